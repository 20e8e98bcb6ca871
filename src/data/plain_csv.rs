//! A direct reader for plain CSV files: the declared columns parsed from the file's bytes
//! straight into numbers or labels' text, on all cores, with no text copy of the file.
//!
//! "Plain" means a file the general reader (polars, `cells::csv_text`) would read field for
//! field the same way: valid UTF-8 with no byte-order mark, no double quote and no carriage
//! return anywhere, a header of distinct non-empty names, and every line holding exactly as
//! many fields as the header (no empty line; the last line may lack its line ending). Any
//! other file gets `None` and is read by the general reader, so quoting, line endings and
//! the messages for ragged or damaged files stay that reader's. On a plain file both readers
//! see the same cells, and each cell then goes through the same trimming, missing codes and
//! correctly rounded number parser (`dialect::present`, `dialect::parse_number`), so the
//! numbers and labels are the same bits.

use super::dialect::{parse_number, present};
use rayon::prelude::*;
use std::collections::HashMap;

/// One wanted column of a plain file.
pub(super) enum PlainColumn {
    /// Parsed numbers (a column declared numeric) as a table keeps them: finite values
    /// (the parser refuses others) and NaN for a missing cell.
    Numbers(Vec<f64>),
    /// Trimmed text, `None` for a missing cell.
    Text(Vec<Option<String>>),
    /// A numeric column holding a cell that is not a number: its first row (0-based, in
    /// file order) and the trimmed text.
    NotANumber(usize, String),
}

/// The wanted columns of a plain file.
pub(super) struct PlainCsv {
    /// Data rows (the header line excluded).
    pub rows: usize,
    /// Column names in file order.
    pub header: Vec<String>,
    columns: HashMap<String, PlainColumn>,
}

impl PlainCsv {
    /// Column `name`, once; `None` when the file has no such column (or it was not wanted).
    pub fn take(&mut self, name: &str) -> Option<PlainColumn> {
        self.columns.remove(name)
    }
}

/// The dialect a plain file is read with.
pub(super) struct Dialect<'a> {
    pub separator: u8,
    pub decimal_comma: bool,
    pub missing: &'a [String],
}

/// Bytes read from the file at a time: the parse of one block overlaps the hashing of it,
/// and memory holds one block beside the columns, never the whole file.
pub(super) const BLOCK: usize = 8 << 20;

/// Read the `wanted` columns (name, parsed as numbers) of the CSV in `file` (about
/// `length` bytes), `block` bytes at a time, with the SHA-256 of every byte read. `Ok(None)`
/// when the file is not plain (see the module documentation): the general reader must then
/// read it again from the start.
///
/// # Errors
/// Reading the file fails.
pub(super) fn read(
    file: &mut impl std::io::Read,
    length: u64,
    dialect: &Dialect,
    wanted: &[(&str, bool)],
    block: usize,
) -> std::io::Result<Option<(PlainCsv, String)>> {
    use sha2::{Digest, Sha256};
    let mut hasher = Sha256::new();
    let mut buf = vec![0u8; block];
    let mut pending: Vec<u8> = Vec::new();
    let mut builder: Option<Builder> = None;
    loop {
        let n = read_full(file, &mut buf)?;
        let eof = n < buf.len();
        pending.extend_from_slice(&buf[..n]);
        let cut = match (eof, pending.iter().rposition(|&b| b == b'\n')) {
            (true, _) => pending.len(),
            (false, Some(i)) => i + 1,
            // A line longer than a block: read on.
            (false, None) => {
                hasher.update(&buf[..n]);
                continue;
            }
        };
        let whole = &pending[..cut];
        let (_, parsed) = rayon::join(
            || hasher.update(&buf[..n]),
            || parse_block(&mut builder, whole, length, dialect, wanted),
        );
        if parsed.is_none() {
            return Ok(None);
        }
        pending.drain(..cut);
        if eof {
            break;
        }
    }
    let sha256 = crate::files::hex(&hasher.finalize());
    Ok(builder.map(|b| (b.finish(), sha256)))
}

/// Fill `buf` from `file` as far as it goes; fewer bytes only at the end of the file.
fn read_full(file: &mut impl std::io::Read, buf: &mut [u8]) -> std::io::Result<usize> {
    let mut filled = 0;
    while filled < buf.len() {
        match file.read(&mut buf[filled..]) {
            Ok(0) => break,
            Ok(n) => filled += n,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
            Err(e) => return Err(e),
        }
    }
    Ok(filled)
}

/// Whole lines of the file into the columns; the first block starts with the header line.
/// `None` when the text is not plain.
fn parse_block(
    builder: &mut Option<Builder>,
    whole: &[u8],
    length: u64,
    dialect: &Dialect,
    wanted: &[(&str, bool)],
) -> Option<()> {
    // `contains` on bytes is a memchr scan.
    if whole.starts_with(b"\xEF\xBB\xBF") || whole.contains(&b'"') || whole.contains(&b'\r') {
        return None;
    }
    let text = std::str::from_utf8(whole).ok()?;
    let body = match builder {
        Some(_) => text,
        None => {
            let (head, body) = text.split_once('\n').unwrap_or((text, ""));
            let per_line = text.len().max(1) as f64 / text.lines().count().max(1) as f64;
            let expected = (length as f64 / per_line * 1.02) as usize + 16;
            *builder = Some(Builder::new(head, dialect, wanted, expected)?);
            body
        }
    };
    builder.as_mut()?.add(body, dialect)
}

/// The columns as they are filled, block by block.
struct Builder {
    header: Vec<String>,
    /// The wanted columns' names, in `columns`' order.
    names: Vec<String>,
    places: Places,
    columns: Vec<PlainColumn>,
    rows: usize,
    /// The first cell of each column that is not a number (row, text).
    bad: Vec<Option<(usize, String)>>,
}

impl Builder {
    /// From the header line; `None` when a name is empty or repeated.
    fn new(
        head: &str,
        dialect: &Dialect,
        wanted: &[(&str, bool)],
        expected: usize,
    ) -> Option<Self> {
        let header: Vec<String> = head
            .split(dialect.separator as char)
            .map(String::from)
            .collect();
        let mut distinct = std::collections::HashSet::new();
        if header
            .iter()
            .any(|h| h.is_empty() || !distinct.insert(h.as_str()))
        {
            return None;
        }
        let picked: Vec<(usize, &str, bool)> = wanted
            .iter()
            .filter_map(|&(name, numeric)| {
                let at = header.iter().position(|h| h == name)?;
                Some((at, name, numeric))
            })
            .collect();
        let columns = picked
            .iter()
            .map(|&(_, _, numeric)| match numeric {
                true => PlainColumn::Numbers(Vec::with_capacity(expected)),
                false => PlainColumn::Text(Vec::with_capacity(expected)),
            })
            .collect();
        Some(Builder {
            places: Places {
                width: header.len(),
                slot: slots(header.len(), &picked),
            },
            names: picked.iter().map(|&(_, n, _)| n.to_string()).collect(),
            bad: vec![None; picked.len()],
            header,
            columns,
            rows: 0,
        })
    }

    /// Whole lines into new rows of every column: the pieces are parsed in parallel, each
    /// into its own rows. `None` when a line is not plain.
    fn add(&mut self, body: &str, dialect: &Dialect) -> Option<()> {
        let pieces = chunks(body);
        let counts: Vec<usize> = pieces.par_iter().map(|p| line_count(p)).collect();
        let total = self.rows + counts.iter().sum::<usize>();
        for column in &mut self.columns {
            match column {
                PlainColumn::Numbers(v) => v.resize(total, f64::NAN),
                PlainColumn::Text(v) => v.resize_with(total, || None),
                PlainColumn::NotANumber(..) => {}
            }
        }
        let mut offset = self.rows;
        let jobs: Vec<(&str, usize, Vec<Out>)> = pieces
            .iter()
            .zip(split_rows(&mut self.columns, self.rows, &counts))
            .zip(&counts)
            .map(|((piece, outs), n)| {
                offset += n;
                (*piece, offset - n, outs)
            })
            .collect();
        let places = &self.places;
        let bad: Vec<Vec<Option<(usize, String)>>> = jobs
            .into_par_iter()
            .map(|(piece, first_row, outs)| fill(piece, first_row, outs, places, dialect))
            .collect::<Option<_>>()?;
        for (k, first) in self.bad.iter_mut().enumerate() {
            if first.is_none() {
                *first = bad.iter().find_map(|b| b[k].clone());
            }
        }
        self.rows = total;
        Some(())
    }

    fn finish(mut self) -> PlainCsv {
        for (column, bad) in self.columns.iter_mut().zip(self.bad) {
            match (column, bad) {
                (column, Some((row, text))) => *column = PlainColumn::NotANumber(row, text),
                (PlainColumn::Numbers(v), None) => v.shrink_to_fit(),
                (PlainColumn::Text(v), None) => v.shrink_to_fit(),
                _ => {}
            }
        }
        PlainCsv {
            rows: self.rows,
            header: self.header,
            columns: self.names.into_iter().zip(self.columns).collect(),
        }
    }
}

/// The body cut into pieces of whole lines, about 1 MiB each (more pieces than threads, so
/// the cores stay busy when lines differ in cost).
fn chunks(body: &str) -> Vec<&str> {
    const PIECE: usize = 1 << 20;
    let mut out = Vec::with_capacity(body.len() / PIECE + 1);
    let mut rest = body;
    while !rest.is_empty() {
        let cut = match rest.len() > PIECE {
            true => rest[PIECE..]
                .find('\n')
                .map_or(rest.len(), |i| PIECE + i + 1),
            false => rest.len(),
        };
        let (piece, tail) = rest.split_at(cut);
        out.push(piece);
        rest = tail;
    }
    out
}

/// Lines of a piece, as [`fill`] walks them (the last may lack its line ending).
fn line_count(piece: &str) -> usize {
    let lines = piece.strip_suffix('\n').unwrap_or(piece);
    lines.bytes().filter(|&b| b == b'\n').count() + 1
}

/// Where the wanted fields sit in a line.
struct Places {
    /// Fields in a line.
    width: usize,
    /// For each field of a line, the wanted column it fills (`usize::MAX`: none).
    slot: Vec<usize>,
}

fn slots(width: usize, picked: &[(usize, &str, bool)]) -> Vec<usize> {
    let mut slot = vec![usize::MAX; width];
    for (k, &(at, _, _)) in picked.iter().enumerate() {
        slot[at] = k;
    }
    slot
}

/// One piece's rows of one column.
enum Out<'a> {
    Numbers(&'a mut [f64]),
    Text(&'a mut [Option<String>]),
}

/// The columns' rows from `start` cut into consecutive runs of `counts` rows: for each
/// piece, its rows of every column.
fn split_rows<'a>(
    columns: &'a mut [PlainColumn],
    start: usize,
    counts: &[usize],
) -> Vec<Vec<Out<'a>>> {
    let mut per_piece: Vec<Vec<Out<'a>>> = counts.iter().map(|_| Vec::new()).collect();
    for column in columns.iter_mut() {
        match column {
            PlainColumn::Numbers(v) => {
                let mut rest: &mut [f64] = &mut v[start..];
                for (outs, &n) in per_piece.iter_mut().zip(counts) {
                    let (head, tail) = std::mem::take(&mut rest).split_at_mut(n);
                    outs.push(Out::Numbers(head));
                    rest = tail;
                }
            }
            PlainColumn::Text(v) => {
                let mut rest: &mut [Option<String>] = &mut v[start..];
                for (outs, &n) in per_piece.iter_mut().zip(counts) {
                    let (head, tail) = std::mem::take(&mut rest).split_at_mut(n);
                    outs.push(Out::Text(head));
                    rest = tail;
                }
            }
            PlainColumn::NotANumber(..) => {}
        }
    }
    per_piece
}

/// Parse one piece into its rows of every wanted column; the first non-number of each
/// column (its row in the file, counted from `first_row`, and text). `None` when a line is
/// empty or does not hold exactly the header's number of fields.
fn fill(
    piece: &str,
    first_row: usize,
    mut outs: Vec<Out>,
    places: &Places,
    dialect: &Dialect,
) -> Option<Vec<Option<(usize, String)>>> {
    let lines = piece.strip_suffix('\n').unwrap_or(piece);
    let mut bad: Vec<Option<(usize, String)>> = vec![None; outs.len()];
    for (row, line) in lines.split('\n').enumerate() {
        if line.is_empty() {
            return None;
        }
        let mut fields = 0;
        for (i, field) in line.split(dialect.separator as char).enumerate() {
            fields += 1;
            let k = places.slot.get(i).copied().unwrap_or(usize::MAX);
            let Some(out) = outs.get_mut(k) else { continue };
            let cell = present(field, dialect.missing);
            match out {
                Out::Numbers(values) => {
                    // A missing cell, or one that is not a finite number (recorded and
                    // refused), is stored as NaN.
                    *values.get_mut(row)? = cell
                        .and_then(|s| {
                            let x = parse_number(s, dialect.decimal_comma);
                            if x.is_none() && bad[k].is_none() {
                                bad[k] = Some((first_row + row, s.to_string()));
                            }
                            x
                        })
                        .unwrap_or(f64::NAN);
                }
                Out::Text(values) => *values.get_mut(row)? = cell.map(String::from),
            }
        }
        if fields != places.width {
            return None;
        }
    }
    Some(bad)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn dialect(missing: &[String]) -> Dialect<'_> {
        Dialect {
            separator: b',',
            decimal_comma: false,
            missing,
        }
    }

    /// `text` read `block` bytes at a time.
    fn read_text(
        text: &[u8],
        d: &Dialect,
        wanted: &[(&str, bool)],
        block: usize,
    ) -> Option<(PlainCsv, String)> {
        let mut cursor = std::io::Cursor::new(text);
        read(&mut cursor, text.len() as u64, d, wanted, block).expect("reads")
    }

    #[test]
    fn files_the_general_reader_must_read_are_left_to_it() {
        let missing = vec![String::new()];
        let d = dialect(&missing);
        let wanted = [("a", true), ("b", false)];
        for text in [
            "\u{feff}a,b\n1,x\n", // byte-order mark
            "a,b\n\"1\",x\n",     // quoted field
            "a,b\r\n1,x\r\n",     // carriage returns
            "a,b\n1,x,3\n",       // a line with more fields
            "a,b\n1\n",           // a line with fewer fields
            "a,b\n1,x\n\n2,y\n",  // an empty line
            "a,a\n1,2\n",         // duplicate names
            "a,\n1,2\n",          // an empty name
            "",                   // nothing at all
        ] {
            for block in [4, 1 << 20] {
                assert!(
                    read_text(text.as_bytes(), &d, &wanted, block).is_none(),
                    "{text:?}"
                );
            }
        }
        assert!(
            read_text(b"a,b\n\xff,x\n", &d, &wanted, 64).is_none(),
            "invalid UTF-8"
        );
    }

    #[test]
    fn cells_are_trimmed_coded_missing_and_parsed_across_blocks_and_pieces() {
        let missing = vec![String::new(), "NA".to_string()];
        let d = dialect(&missing);
        // Several blocks of several pieces each, and blocks cutting lines anywhere.
        let mut text = String::from("id,a,skip,b\n");
        let n = 60_000;
        for i in 0..n {
            let a = match i {
                3 => " NA ".to_string(),
                7 => String::new(),
                _ => format!(" {i}.25"),
            };
            text.push_str(&format!("r{i},{a},zzzzzzzz,{}\n", i % 3));
        }
        assert!(text.len() > 1 << 20, "the test needs several pieces");
        let whole = crate::files::sha256_hex(text.as_bytes());
        for block in [1 << 20, 777_777, 37] {
            let (mut p, sha) = read_text(
                text.as_bytes(),
                &d,
                &[("a", true), ("b", false), ("id", false)],
                block,
            )
            .expect("plain");
            assert_eq!((p.rows, sha.as_str()), (n, whole.as_str()), "block {block}");
            let Some(PlainColumn::Numbers(a)) = p.take("a") else {
                panic!("numbers")
            };
            let last = (n - 1) as f64 + 0.25;
            assert!(a[3].is_nan() && a[7].is_nan(), "missing cells are NaN");
            assert_eq!((a[8], a[n - 1]), (8.25, last));
            let Some(PlainColumn::Text(b)) = p.take("b") else {
                panic!("text")
            };
            assert_eq!(b[5].as_deref(), Some("2"));
            assert!(p.take("skip").is_none() && p.take("b").is_none());
        }
        // No line ending after the last line.
        let (p, _) = read_text(b"a,b\n1,x\n2,y", &d, &[("a", true)], 5).expect("plain");
        assert_eq!(p.rows, 2);
        // Two bad cells far apart: the first in the file is the one named.
        let later = format!("r{},{},", n - 10, format_args!(" {}.25", n - 10));
        assert!(text.contains(&later) && text.contains("r100, 100.25,"));
        let bad = text
            .replacen(&later, &format!("r{},later,", n - 10), 1)
            .replacen("r100, 100.25,", "r100,earlier,", 1);
        for block in [1 << 20, 4096] {
            let (mut p, _) = read_text(bad.as_bytes(), &d, &[("a", true)], block).expect("plain");
            match p.take("a") {
                Some(PlainColumn::NotANumber(row, text)) => {
                    assert_eq!((row, text.as_str()), (100, "earlier"))
                }
                _ => panic!("a non-number is reported"),
            }
        }
    }
}
