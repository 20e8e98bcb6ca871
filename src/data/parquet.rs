//! Reading a Parquet file defensively.
//!
//! A damaged or hostile Parquet file must end in a clear error (exit 2) naming the file, never
//! in a panic or an abort. Three layers:
//! 1. the footer is checked by hand (magic bytes, footer length within the file) before the
//!    library sees the file;
//! 2. the metadata the library decodes is checked against the file length before any column
//!    is read: every column chunk lies inside the file, row counts agree between the file, its
//!    row groups and each flat column chunk, and no count or size exceeds what a file of this
//!    length can hold. This bounds every allocation the reader makes by the file's size, so no
//!    corrupted count can make it ask for exabytes (an allocation failure aborts and cannot be
//!    caught);
//!    The page headers inside each column chunk are walked too (`pages.rs`), since the reader
//!    sizes its buffers by their value counts;
//! 3. every call into the library runs under `catch_unwind`, so a panic inside the reader
//!    becomes an error naming the file (and the step that failed).
//!
//! Invariant of the returned frame: every column has the frame's height.

mod pages;

use polars::prelude::*;
use std::io::{Read, Seek, SeekFrom};
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::Path;
use std::sync::atomic::{AtomicUsize, Ordering};

/// Magic bytes at the start and end of a Parquet file.
const MAGIC: &[u8; 4] = b"PAR1";

/// Most rows a file may declare per byte of its length. A run-length encoded column can hold
/// many rows per byte, so the bound is generous; it exists so that a corrupted row count
/// cannot make the reader allocate more memory than any real file of this size would need.
const ROWS_PER_BYTE: u64 = 1024;

/// Most uncompressed bytes a column chunk may declare per byte of the file (a compression
/// ratio; common practice puts real data far below it).
const UNCOMPRESSED_PER_BYTE: u64 = 4096;

/// Read `path` as Parquet. The error is a message for the user (the caller adds the file).
pub fn read(path: &Path) -> std::result::Result<DataFrame, String> {
    let mut file =
        std::fs::File::open(path).map_err(|e| format!("cannot open the Parquet file: {e}"))?;
    let len = check_footer(&mut file)?;
    let meta = isolated("reading the file's metadata", || {
        let mut reader = ParquetReader::new(file.try_clone()?);
        reader.get_metadata().cloned()
    })
    .map_err(damaged)?;
    check_metadata(&meta, len)?;
    check_pages(&meta, &mut file, len)?;
    let frame = isolated("reading the column data", || {
        let mut reader = ParquetReader::new(file);
        reader.set_metadata(meta);
        reader.finish()
    })
    .map_err(damaged)?;
    check_heights(&frame)?;
    Ok(frame)
}

fn damaged(what: impl std::fmt::Display) -> String {
    format!(
        "the Parquet file is damaged or not a Parquet file: {what}; write it again from its source"
    )
}

/// Check the magic bytes and the footer length; return the file length.
fn check_footer(file: &mut std::fs::File) -> std::result::Result<u64, String> {
    let io = |e: std::io::Error| format!("cannot read the Parquet file: {e}");
    let len = file.seek(SeekFrom::End(0)).map_err(io)?;
    if len < 12 {
        return Err(damaged(format!(
            "it holds {len} bytes, fewer than the 12 every Parquet file has"
        )));
    }
    let mut head = [0u8; 4];
    file.seek(SeekFrom::Start(0)).map_err(io)?;
    file.read_exact(&mut head).map_err(io)?;
    let mut tail = [0u8; 8];
    file.seek(SeekFrom::End(-8)).map_err(io)?;
    file.read_exact(&mut tail).map_err(io)?;
    if &head != MAGIC || &tail[4..] != MAGIC {
        return Err(damaged("it does not start and end with the bytes `PAR1`"));
    }
    let footer = u64::from(u32::from_le_bytes([tail[0], tail[1], tail[2], tail[3]]));
    if footer + 12 > len {
        return Err(damaged(format!(
            "its footer claims {footer} bytes but the file holds {len}"
        )));
    }
    file.seek(SeekFrom::Start(0)).map_err(io)?;
    Ok(len)
}

/// Check what the decoded metadata claims against the file length.
fn check_metadata(
    meta: &polars::io::parquet::read::FileMetadata,
    len: u64,
) -> std::result::Result<(), String> {
    let max_rows = len.saturating_mul(ROWS_PER_BYTE);
    let rows = meta.num_rows as u64;
    if rows > max_rows {
        return Err(damaged(format!(
            "it declares {rows} rows, more than a file of {len} bytes can hold"
        )));
    }
    let group_rows: u64 = meta.row_groups.iter().map(|g| g.num_rows() as u64).sum();
    if group_rows != rows {
        return Err(damaged(format!(
            "it declares {rows} rows but its row groups hold {group_rows}"
        )));
    }
    for (g, group) in meta.row_groups.iter().enumerate() {
        for chunk in group.parquet_columns() {
            let column = chunk.descriptor().path_in_schema.join(".");
            let facts = Chunk {
                compressed: chunk.compressed_size(),
                uncompressed: chunk.uncompressed_size(),
                values: chunk.num_values(),
                start: chunk
                    .dictionary_page_offset()
                    .unwrap_or_else(|| chunk.data_page_offset()),
                flat: chunk.descriptor().descriptor.max_rep_level == 0,
            };
            check_chunk(&facts, group.num_rows() as u64, len).map_err(|what| {
                damaged(format!("column `{column}`, row group {}: {what}", g + 1))
            })?;
        }
    }
    Ok(())
}

/// What a column chunk's metadata claims.
struct Chunk {
    compressed: i64,
    uncompressed: i64,
    values: i64,
    start: i64,
    flat: bool,
}

fn check_chunk(chunk: &Chunk, group_rows: u64, len: u64) -> std::result::Result<(), String> {
    let non_negative =
        |v: i64, what: &str| u64::try_from(v).map_err(|_| format!("its {what} is negative"));
    let compressed = non_negative(chunk.compressed, "compressed size")?;
    let uncompressed = non_negative(chunk.uncompressed, "uncompressed size")?;
    let values = non_negative(chunk.values, "count of values")?;
    let start = non_negative(chunk.start, "offset")?;
    match start.checked_add(compressed) {
        Some(end) if start >= 4 && end <= len - 8 => {}
        _ => {
            return Err(format!(
            "its data (bytes {start} to {start}+{compressed}) lie outside the file of {len} bytes"
        ))
        }
    }
    if uncompressed > len.saturating_mul(UNCOMPRESSED_PER_BYTE) {
        return Err(format!(
            "it declares {uncompressed} uncompressed bytes, more than a file of {len} bytes can hold"
        ));
    }
    if values > len.saturating_mul(ROWS_PER_BYTE) {
        return Err(format!(
            "it declares {values} values, more than a file of {len} bytes can hold"
        ));
    }
    if chunk.flat && values != group_rows {
        return Err(format!(
            "it holds {values} values but its row group has {group_rows} rows"
        ));
    }
    Ok(())
}

/// Walk the page headers of every column chunk (the reader sizes its buffers by the counts in
/// them, which the file's metadata does not cover) and check each against its chunk: sizes
/// non-negative and inside the chunk, value counts at most the chunk's.
fn check_pages(
    meta: &polars::io::parquet::read::FileMetadata,
    file: &mut std::fs::File,
    len: u64,
) -> std::result::Result<(), String> {
    let io = |e: std::io::Error| format!("cannot read the Parquet file: {e}");
    for (g, group) in meta.row_groups.iter().enumerate() {
        for chunk in group.parquet_columns() {
            let column = chunk.descriptor().path_in_schema.join(".");
            let start = chunk
                .dictionary_page_offset()
                .unwrap_or_else(|| chunk.data_page_offset()) as u64;
            let mut bytes = vec![0u8; chunk.compressed_size() as usize];
            file.seek(SeekFrom::Start(start)).map_err(io)?;
            file.read_exact(&mut bytes).map_err(io)?;
            pages::check(&bytes, chunk.num_values() as u64, len).map_err(|what| {
                damaged(format!("column `{column}`, row group {}: {what}", g + 1))
            })?;
        }
    }
    file.seek(SeekFrom::Start(0)).map_err(io)?;
    Ok(())
}

/// Every column must have the frame's height (a damaged file can yield ragged columns).
fn check_heights(frame: &DataFrame) -> std::result::Result<(), String> {
    let height = frame.height();
    match frame.columns().iter().find(|c| c.len() != height) {
        Some(c) => Err(damaged(format!(
            "column `{}` holds {} values but the file has {height} rows",
            c.name(),
            c.len()
        ))),
        None => Ok(()),
    }
}

/// Number of isolated library calls in progress; while it is non-zero the panic hook stays
/// silent, because the panic becomes an error message instead.
static ISOLATED: AtomicUsize = AtomicUsize::new(0);

fn install_quiet_hook() {
    static ONCE: std::sync::Once = std::sync::Once::new();
    ONCE.call_once(|| {
        let previous = std::panic::take_hook();
        std::panic::set_hook(Box::new(move |info| {
            if ISOLATED.load(Ordering::SeqCst) == 0 {
                previous(info);
            }
        }));
    });
}

/// Run a library call; a panic inside it becomes an error saying which step failed. The
/// error is the library's message (its first line), for the caller to place.
pub(super) fn isolated<T>(
    step: &str,
    call: impl FnOnce() -> PolarsResult<T>,
) -> std::result::Result<T, String> {
    install_quiet_hook();
    ISOLATED.fetch_add(1, Ordering::SeqCst);
    let outcome = catch_unwind(AssertUnwindSafe(call));
    ISOLATED.fetch_sub(1, Ordering::SeqCst);
    match outcome {
        Ok(Ok(v)) => Ok(v),
        Ok(Err(e)) => Err(format!("{step}: {}", first_line(&e.to_string()))),
        Err(payload) => {
            let what = payload
                .downcast_ref::<String>()
                .map(String::as_str)
                .or_else(|| payload.downcast_ref::<&str>().copied())
                .unwrap_or("an internal check failed");
            Err(format!(
                "the reader stopped while {step} ({})",
                first_line(what)
            ))
        }
    }
}

/// The first line of a library message, at most 160 characters.
fn first_line(s: &str) -> String {
    let line = s.lines().next().unwrap_or("");
    crate::escape::clip(line, 160)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rejects_files_without_magic_or_with_an_oversized_footer() {
        let dir = tempfile::tempdir().expect("tempdir");
        let p = dir.path().join("x.parquet");
        std::fs::write(&p, b"PAR1").expect("write");
        assert!(read(&p).unwrap_err().contains("fewer than the 12"));
        std::fs::write(&p, b"PAR1xxxxxxxxxxxxPAR0").expect("write");
        assert!(read(&p).unwrap_err().contains("`PAR1`"));
        let mut b = b"PAR1xxxxxxxx".to_vec();
        b.extend_from_slice(&1000u32.to_le_bytes());
        b.extend_from_slice(b"PAR1");
        std::fs::write(&p, &b).expect("write");
        assert!(read(&p).unwrap_err().contains("footer claims 1000 bytes"));
    }
}
