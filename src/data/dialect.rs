//! CSV dialects (field separator, decimal mark) and missing-value codes: the declared values,
//! the detection of a mismatch, and messages in sworn's own words rather than a library's.

use std::io::Read;
use std::path::Path;

pub use crate::plan::{DEFAULT_MISSING, SEPARATORS};

/// How a separator is written in a plan.
pub fn shown(separator: u8) -> &'static str {
    SEPARATORS
        .iter()
        .find(|(_, b, _)| *b == separator)
        .map_or("\",\"", |(_, _, s)| s)
}

/// The missing-value codes as messages list them.
pub fn missing_list(codes: &[String]) -> String {
    codes
        .iter()
        .map(|c| {
            if c.is_empty() {
                "an empty field".to_string()
            } else {
                format!("`{c}`")
            }
        })
        .collect::<Vec<_>>()
        .join(", ")
}

/// The first line of the file (at most 64 KiB read), without its line ending.
fn header_line(path: &Path) -> Option<String> {
    let mut buf = Vec::new();
    std::fs::File::open(path)
        .ok()?
        .take(64 * 1024)
        .read_to_end(&mut buf)
        .ok()?;
    let text = String::from_utf8_lossy(&buf);
    let line = text.lines().next()?.trim_start_matches('\u{feff}');
    Some(line.to_string())
}

/// Fields of `line` split by `sep`, outside double quotes.
fn field_count(line: &str, sep: u8) -> usize {
    let mut quoted = false;
    let mut n = 1;
    for b in line.bytes() {
        match b {
            b'"' => quoted = !quoted,
            _ if b == sep && !quoted => n += 1,
            _ => {}
        }
    }
    n
}

/// The separator that splits the header line into the most fields (`,` on a tie or when none
/// splits it).
pub fn detect(path: &Path) -> u8 {
    let Some(line) = header_line(path) else {
        return b',';
    };
    let mut best = (1, b',');
    for (_, sep, _) in SEPARATORS {
        let n = field_count(&line, sep);
        if n > best.0 {
            best = (n, sep);
        }
    }
    best.1
}

/// `Err(message)` when the header line is not split by the declared separator but is by
/// another one: the usual sign of a file written with a different dialect.
pub fn check_separator(path: &Path, table: &str, declared: u8) -> Result<(), String> {
    let Some(line) = header_line(path) else {
        return Ok(());
    };
    if field_count(&line, declared) > 1 {
        return Ok(());
    }
    let found = detect(path);
    if found == declared {
        return Ok(());
    }
    Err(format!(
        "the header line holds no {} but {} fields separated by {}; this file uses another separator: set separator = {} under [data.{table}]",
        shown(declared),
        field_count(&line, found),
        shown(found),
        shown(found)
    ))
}

/// A CSV reader's failure in sworn's words: never a library's option names.
pub fn reader_message(library_message: &str, separator: u8) -> String {
    let lower = library_message.to_ascii_lowercase();
    if lower.contains("ragged") || lower.contains("more fields") {
        return format!(
            "a line holds more fields than the header line; check that the separator is {} (key `separator`) and that fields containing it are quoted",
            shown(separator)
        );
    }
    let first = library_message.lines().next().unwrap_or("");
    let cut = first
        .find("Consider")
        .or_else(|| first.find("consider"))
        .map_or(first, |i| first[..i].trim_end_matches([' ', ';', ',', '.']));
    cut.chars().take(200).collect()
}

/// A cell's trimmed text, `None` when empty or one of the table's missing codes.
pub fn present<'a>(cell: &'a str, missing: &[String]) -> Option<&'a str> {
    Some(cell.trim()).filter(|s| !s.is_empty() && !missing.iter().any(|m| m == s))
}

/// Parse a numeric field with the table's decimal mark. `None` when it is not a finite number.
pub fn parse_number(text: &str, decimal_comma: bool) -> Option<f64> {
    let parsed = if decimal_comma {
        if text.contains('.') {
            return None;
        }
        text.replacen(',', ".", 1).parse::<f64>()
    } else {
        text.parse::<f64>()
    };
    parsed.ok().filter(|x| x.is_finite())
}

/// The advice for a value that is not a number in a numeric column.
pub fn not_a_number_advice(text: &str, decimal_comma: bool, missing: &[String]) -> String {
    if !decimal_comma && parse_number(text, true).is_some() {
        return "it looks like a number with a decimal comma: set decimal = \",\" (with separator = \";\") under this table".to_string();
    }
    if decimal_comma && text.parse::<f64>().is_ok_and(f64::is_finite) {
        return "it uses a decimal point while the table declares decimal = \",\"; fix the value or the key".to_string();
    }
    format!(
        "if it marks a missing value, list it in this table's `missing` codes (now {}); otherwise correct the value",
        missing_list(missing)
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Missing codes match whole trimmed cells only, whatever their length and first byte.
    #[test]
    fn missing_codes_match_whole_cells() {
        let codes: Vec<String> = ["", "NA", ".", "-99", "n/a"].map(String::from).to_vec();
        for cell in ["NA", " NA ", ".", "-99", "\tn/a", "", "   "] {
            assert_eq!(present(cell, &codes), None, "{cell:?}");
        }
        for cell in [
            "N", "NAN", "na", "0", "1", "-9", "-990", "n/b", "..", "-99.0", "0.5",
        ] {
            assert_eq!(present(cell, &codes), Some(cell), "{cell:?}");
        }
        assert_eq!(present(" 7 ", &codes), Some("7"));
        assert_eq!(present(".", &[]), Some("."));
    }

    #[test]
    fn separators_are_detected_from_the_header() {
        let dir = tempfile::tempdir().expect("temp dir");
        let p = dir.path().join("d.csv");
        std::fs::write(&p, "a;b;\"c;d\"\n1,5;2;3\n").expect("write");
        assert_eq!(detect(&p), b';');
        let msg = check_separator(&p, "t", b',').unwrap_err();
        assert!(msg.contains("3 fields separated by \";\""), "{msg}");
        assert!(
            msg.contains("set separator = \";\" under [data.t]"),
            "{msg}"
        );
        assert!(check_separator(&p, "t", b';').is_ok());
        std::fs::write(&p, "a\tb\n").expect("write");
        assert_eq!(detect(&p), b'\t');
        std::fs::write(&p, "single\n1\n").expect("write");
        assert!(check_separator(&p, "t", b',').is_ok());
    }

    #[test]
    fn decimal_commas_parse_only_when_declared() {
        assert_eq!(parse_number("1,5", true), Some(1.5));
        assert_eq!(parse_number("1,5", false), None);
        assert_eq!(parse_number("1.000,5", true), None);
        assert_eq!(parse_number("-2.25e3", false), Some(-2250.0));
        assert!(not_a_number_advice("1,5", false, &[]).contains("decimal = \",\""));
        let codes = vec![String::new(), "NA".into()];
        let advice = not_a_number_advice("absent", false, &codes);
        assert!(
            advice.contains("`missing` codes (now an empty field, `NA`)"),
            "{advice}"
        );
    }

    #[test]
    fn library_wording_never_reaches_the_user() {
        let m = reader_message(
            "found more fields than defined in 'Schema'\n\nConsider setting 'truncate_ragged_lines=true'.",
            b';',
        );
        assert!(
            !m.contains("truncate_ragged_lines") && m.contains("separator is \";\""),
            "{m}"
        );
        assert_eq!(
            reader_message("bad thing; Consider setting 'x'", b','),
            "bad thing"
        );
    }
}
