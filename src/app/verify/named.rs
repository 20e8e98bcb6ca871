//! Data files named with `verify --data`: each hashed once, then matched to a table by the
//! SHA-256 the run recorded (the file at the recorded location is the fallback).

use super::shown;
use crate::files::{self, Links};
use std::path::{Path, PathBuf};

/// Data files named on the command line, hashed once each.
pub(super) struct NamedData {
    /// Each named file and its SHA-256 (`None` when it could not be read).
    hashed: Vec<(PathBuf, Option<String>)>,
    /// Why a named file could not be read.
    pub(super) problems: Vec<String>,
}

impl NamedData {
    /// Hash every file in `paths`.
    pub(super) fn new(paths: &[PathBuf]) -> Self {
        let mut problems = Vec::new();
        let hashed = paths
            .iter()
            .map(|p| {
                let h = files::sha256_streamed(p, Links::Follow)
                    .map_err(|e| problems.push(format!("--data {}", shown(&e.to_string()))))
                    .ok();
                (p.clone(), h)
            })
            .collect();
        NamedData { hashed, problems }
    }

    /// The file with SHA-256 `want`: a named one, else `default` when it matches.
    pub(super) fn find(
        &mut self,
        want: &str,
        default: &Path,
        problems: &mut Vec<String>,
        id: &str,
    ) -> Option<PathBuf> {
        if let Some((p, _)) = self.hashed.iter().find(|(_, h)| h.as_deref() == Some(want)) {
            return Some(std::path::absolute(p).unwrap_or_else(|_| p.clone()));
        }
        let shown_default = shown(&default.display().to_string());
        if std::fs::symlink_metadata(default).is_err() {
            problems.push(format!("the data file of [data.{id}] is not at {shown_default}, and no --data file has its SHA-256 {want}; name it with --data PATH"));
            return None;
        }
        match files::sha256_streamed(default, Links::Follow) {
            Ok(h) if h == want => Some(default.to_path_buf()),
            Ok(h) => {
                problems.push(format!("the data file of [data.{id}] changed: {shown_default} has SHA-256 {h}, the run read {want} (name the original with --data PATH)"));
                None
            }
            Err(e) => {
                problems.push(format!(
                    "the data file of [data.{id}]: {}",
                    shown(&e.to_string())
                ));
                None
            }
        }
    }
}
