//! Byte offsets in the plan text → 1-based line and column, for error messages.

/// Line starts of a text, for turning byte offsets into positions.
#[derive(Debug, Clone)]
pub struct SourceMap {
    line_starts: Vec<usize>,
    text: String,
}

impl SourceMap {
    /// Index the line starts of `text`.
    pub fn new(text: &str) -> Self {
        let mut line_starts = vec![0];
        line_starts.extend(text.match_indices('\n').map(|(i, _)| i + 1));
        SourceMap {
            line_starts,
            text: text.to_string(),
        }
    }

    /// 1-based (line, column) of a byte offset; the column counts characters.
    pub fn position(&self, offset: usize) -> (usize, usize) {
        let offset = offset.min(self.text.len());
        let line = match self.line_starts.binary_search(&offset) {
            Ok(i) => i,
            Err(i) => i - 1,
        };
        let start = self.line_starts[line];
        let column = self
            .text
            .get(start..offset)
            .map_or(1, |s| s.chars().count() + 1);
        (line + 1, column)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn positions_are_one_based() {
        let m = SourceMap::new("ab\ncd\n\nef");
        assert_eq!(m.position(0), (1, 1));
        assert_eq!(m.position(1), (1, 2));
        assert_eq!(m.position(3), (2, 1));
        assert_eq!(m.position(6), (3, 1));
        assert_eq!(m.position(8), (4, 2));
        assert_eq!(m.position(999), (4, 3));
    }
}
