//! Run directories: self-contained, written whole into a temporary sibling and renamed
//! into place.
//!
//! A published run directory holds the outputs, the exact plan bytes ([`PLAN_FILE`]) and the
//! ledger up to and including the run's own entry ([`LEDGER_FILE`]), so it verifies after
//! later amendments and when shipped alone. Temporaries are named `.NAME.sworn-tmp-PID`; one
//! whose process is gone is stale and removed before a new run into the same place.

use crate::error::{Error, Result};
use std::io::Write;
use std::path::{Path, PathBuf};

pub use crate::layout::{LEDGER_FILE, PLAN_FILE};

const TMP_MARK: &str = ".sworn-tmp-";
const OLD_MARK: &str = ".sworn-old-";

/// A run directory being written.
pub struct Staged {
    /// The temporary directory.
    tmp: PathBuf,
    /// Where it will be published.
    target: PathBuf,
    /// Whether an existing non-empty target may be replaced.
    replace: bool,
}

fn split(target: &Path) -> (PathBuf, String) {
    let parent = target
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .map_or_else(|| PathBuf::from("."), Path::to_path_buf);
    let name = target
        .file_name()
        .map_or_else(|| "out".to_string(), |n| n.to_string_lossy().into_owned());
    (parent, name)
}

/// Whether `target` exists and holds anything.
fn non_empty(target: &Path) -> bool {
    std::fs::read_dir(target).is_ok_and(|mut d| d.next().is_some())
        || target.symlink_metadata().is_ok_and(|m| !m.is_dir())
}

/// Check the target before any work: an existing non-empty directory needs `replace`.
///
/// # Errors
/// The target holds files and `replace` is false.
pub fn check_target(target: &Path, replace: bool) -> Result<()> {
    if !replace && non_empty(target) {
        return Err(Error::io(
            target,
            "refusing to write the run there",
            std::io::Error::new(
                std::io::ErrorKind::AlreadyExists,
                "it already exists and is not empty (an earlier run?); choose another --out, or pass --replace to replace it whole",
            ),
        ));
    }
    Ok(())
}

/// Remove temporaries of this target left by processes that no longer run.
pub fn clean_stale(target: &Path) {
    let (parent, name) = split(target);
    let Ok(dir) = std::fs::read_dir(&parent) else {
        return;
    };
    for entry in dir.flatten() {
        let file = entry.file_name().to_string_lossy().into_owned();
        let Some(rest) = file.strip_prefix(&format!(".{name}")) else {
            continue;
        };
        let pid = rest
            .strip_prefix(TMP_MARK)
            .or_else(|| rest.strip_prefix(OLD_MARK))
            .and_then(|p| p.parse::<u32>().ok());
        if pid.is_some_and(|p| !process_alive(p)) {
            let _ = std::fs::remove_dir_all(entry.path());
        }
    }
}

fn process_alive(pid: u32) -> bool {
    #[cfg(unix)]
    {
        let Ok(pid) = libc::pid_t::try_from(pid) else {
            return false;
        };
        // SAFETY: kill with signal 0 only checks that the process exists.
        let r = unsafe { libc::kill(pid, 0) };
        r == 0 || std::io::Error::last_os_error().raw_os_error() == Some(libc::EPERM)
    }
    #[cfg(not(unix))]
    {
        pid == std::process::id()
    }
}

impl Staged {
    /// Create the temporary directory beside `target`.
    ///
    /// # Errors
    /// The temporary directory cannot be created.
    pub fn new(target: &Path, replace: bool) -> Result<Self> {
        let (parent, name) = split(target);
        std::fs::create_dir_all(&parent)
            .map_err(|e| Error::io(&parent, "cannot create the output folder", e))?;
        let tmp = parent.join(format!(".{name}{TMP_MARK}{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&tmp);
        std::fs::create_dir(&tmp)
            .map_err(|e| Error::io(&tmp, "cannot create a temporary run folder", e))?;
        Ok(Staged {
            tmp,
            target: target.to_path_buf(),
            replace,
        })
    }

    /// Write one file into the temporary directory (flushed to disk).
    ///
    /// # Errors
    /// The file cannot be written.
    pub fn write(&self, name: &str, bytes: &[u8]) -> Result<()> {
        let path = self.tmp.join(name);
        let mut f = std::fs::File::create(&path)
            .map_err(|e| Error::io(&path, "cannot write the file", e))?;
        f.write_all(bytes)
            .and_then(|()| f.sync_all())
            .map_err(|e| Error::io(&path, "cannot write the file", e))
    }

    /// Rename the temporary directory into place, replacing an old one when allowed.
    ///
    /// # Errors
    /// The target appeared meanwhile (without `replace`) or a rename failed.
    pub fn publish(self) -> Result<()> {
        check_target(&self.target, self.replace)?;
        let (parent, name) = split(&self.target);
        let old = parent.join(format!(".{name}{OLD_MARK}{}", std::process::id()));
        let moved = if self.target.symlink_metadata().is_ok() {
            std::fs::rename(&self.target, &old)
                .map_err(|e| Error::io(&self.target, "cannot move the old run aside", e))?;
            true
        } else {
            false
        };
        std::fs::rename(&self.tmp, &self.target)
            .map_err(|e| Error::io(&self.target, "cannot publish the run folder", e))?;
        if moved {
            let _ = std::fs::remove_dir_all(&old).or_else(|_| std::fs::remove_file(&old));
        }
        if let Ok(d) = std::fs::File::open(&parent) {
            let _ = d.sync_all();
        }
        Ok(())
    }

    /// Remove the temporary directory (after a failure).
    pub fn discard(self) {
        let _ = std::fs::remove_dir_all(&self.tmp);
    }
}
