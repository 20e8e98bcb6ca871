//! "Did you mean …?": the closest known name by edit distance, for plan keys, column names
//! and expression functions alike.

/// Levenshtein distance between two strings, by characters.
///
/// # Formula
/// The standard dynamic programme over prefixes (Wagner and Fischer 1974, "The
/// string-to-string correction problem", JACM 21(1)), keeping one row.
pub fn distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut row: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.chars().enumerate() {
        let mut prev = row[0];
        row[0] = i + 1;
        for (j, cb) in b.iter().enumerate() {
            let cost = usize::from(ca != *cb);
            let next = (row[j + 1] + 1).min(row[j] + 1).min(prev + cost);
            prev = row[j + 1];
            row[j + 1] = next;
        }
    }
    row[b.len()]
}

/// The known name closest to `name`, if it is close enough to be a plausible typo
/// (distance at most a third of the longer name, at least 2 allowed, and less than the
/// length of the name itself).
pub fn closest<'a, I>(name: &str, known: I) -> Option<String>
where
    I: IntoIterator<Item = &'a str>,
{
    let mut best: Option<(usize, &str)> = None;
    for candidate in known {
        let d = distance(&name.to_lowercase(), &candidate.to_lowercase());
        if best.is_none_or(|(bd, _)| d < bd) {
            best = Some((d, candidate));
        }
    }
    best.filter(|(d, c)| *d <= (name.len().max(c.len()) / 3).max(2) && *d < name.chars().count())
        .map(|(_, c)| c.to_string())
}

/// " Did you mean `x`?" or an empty string.
pub fn hint<'a, I>(name: &str, known: I) -> String
where
    I: IntoIterator<Item = &'a str>,
{
    closest(name, known).map_or(String::new(), |c| format!("; did you mean `{c}`?"))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn distances() {
        assert_eq!(distance("kitten", "sitting"), 3);
        assert_eq!(distance("", "abc"), 3);
        assert_eq!(distance("same", "same"), 0);
    }

    #[test]
    fn suggests_close_names_only() {
        let known = ["temp_c", "kwh", "roof_m2"];
        assert_eq!(closest("tmep_c", known), Some("temp_c".into()));
        assert_eq!(closest("zzzzzzzz", known), None);
        assert_eq!(hint("kwj", known), "; did you mean `kwh`?");
    }
}
