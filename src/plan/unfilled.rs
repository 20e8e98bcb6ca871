//! Places a starter plan leaves for the study team (`"<fill: …>"`) must be filled before a plan
//! is checked, sealed or run.

use super::SourceMap;
use crate::error::{Error, Result};
use std::path::Path;

/// The mark `sworn init` writes where only the study team can decide.
pub const MARK: &str = "\"<fill:";

/// The first unfilled mark outside comments, as an error naming its line, column and key.
pub fn refuse_marks(path: &Path, text: &str) -> Result<()> {
    let map = SourceMap::new(text);
    let mut offset = 0;
    for line in text.split_inclusive('\n') {
        let code = strip_comment(line);
        if let Some(at) = code.find(MARK) {
            let (line_no, column) = map.position(offset + at);
            let key = code
                .split_once('=')
                .map(|(k, _)| k.trim().trim_matches('"').to_string())
                .unwrap_or_default();
            let mark: String = code[at + 1..]
                .split('"')
                .next()
                .unwrap_or("")
                .chars()
                .take(80)
                .collect();
            return Err(Error::Plan {
                path: path.to_path_buf(),
                line: line_no,
                column,
                key,
                message: format!(
                    "this place still holds the starter plan's mark `{mark}`; replace the mark (quotes included) with the value it asks for (see docs/plan-reference.md)"
                ),
            });
        }
        offset += line.len();
    }
    Ok(())
}

/// The part of a TOML line before a comment (a `#` outside a string).
fn strip_comment(line: &str) -> &str {
    let mut in_basic = false;
    let mut in_literal = false;
    let mut escaped = false;
    for (i, c) in line.char_indices() {
        match c {
            _ if escaped => escaped = false,
            '\\' if in_basic => escaped = true,
            '"' if !in_literal => in_basic = !in_basic,
            '\'' if !in_basic => in_literal = !in_literal,
            '#' if !in_basic && !in_literal => return &line[..i],
            _ => {}
        }
    }
    line
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_mark_is_refused_with_its_place() {
        let text = "format = 1\n# title = \"<fill: ignored in a comment>\"\noutcome = \"<fill: the outcome column>\"\n";
        let err = refuse_marks(Path::new("p.toml"), text)
            .unwrap_err()
            .to_string();
        assert!(err.starts_with("p.toml:3:11:"), "{err}");
        assert!(err.contains("`<fill: the outcome column>`"), "{err}");
        assert!(err.contains("(at `outcome`)"), "{err}");
    }

    #[test]
    fn filled_plans_and_hashes_in_strings_pass() {
        let text =
            "title = \"a # b\" # \"<fill: x>\"\nnote = '<fill: in a literal string is text>'\n";
        assert!(refuse_marks(Path::new("p.toml"), text).is_ok());
    }
}
