//! Reading and appending the ledger file.
//!
//! Reading streams the file line by line; each line is capped at [`MAX_LINE`] bytes and at
//! most [`MAX_BAD`] invalid lines are kept (later lines are only counted and hashed), so a
//! padded or damaged ledger costs memory in proportion to its valid entries, never more.
//! An append holds an exclusive lock ([`std::fs::File::lock`]) from reading the current last
//! line to writing the new one with a single append, so concurrent commands each add their
//! line and the chain stays intact. Readers take a shared lock and see whole lines.

use super::{sha256_hex, Entry};
use crate::error::{Error, Result};
use crate::files::Links;
use std::fs::File;
use std::io::{BufRead, BufReader, Read, Seek, Write};
use std::path::{Path, PathBuf};

/// The `prev` of the first line.
const ZERO_HASH: &str = "0000000000000000000000000000000000000000000000000000000000000000";

/// Longest ledger line read: one entry holds one canonical plan, far smaller than this.
pub const MAX_LINE: u64 = 64 << 20;

/// Invalid lines kept for reporting; later lines are counted, not kept.
pub const MAX_BAD: usize = 20;

/// One line: its text (lossy for invalid UTF-8), the SHA-256 of its bytes and its entry.
#[derive(Debug, Clone)]
struct Line {
    text: String,
    hash: String,
    entry: Option<Entry>,
}

/// Lines past the [`MAX_BAD`]th invalid one: counted and hashed, not kept.
#[derive(Debug, Clone)]
struct Unkept {
    first: usize,
    count: usize,
    last_hash: String,
}

/// A ledger as read from disk.
#[derive(Debug, Clone)]
pub struct Ledger {
    /// Where it lives.
    pub path: PathBuf,
    lines: Vec<Line>,
    unkept: Option<Unkept>,
    /// Whether the file ends with a newline (an interrupted write leaves it without).
    complete: bool,
}

/// A ledger held under an exclusive lock, for appending.
#[derive(Debug)]
pub struct Locked {
    file: File,
    ledger: Ledger,
}

impl Ledger {
    /// An empty ledger that will live at `path`.
    pub fn empty(path: PathBuf) -> Self {
        Ledger {
            path,
            lines: Vec::new(),
            unkept: None,
            complete: true,
        }
    }

    /// Read the ledger at `path` (the file the plan's commands append to); `None` when there
    /// is no file.
    pub fn read(path: &Path) -> Result<Option<Self>> {
        Self::read_with(path, Links::Follow)
    }

    /// Read a ledger at `path`, refusing or following a final symbolic link; `None` when
    /// there is no file.
    pub fn read_with(path: &Path, links: Links) -> Result<Option<Self>> {
        match std::fs::symlink_metadata(path) {
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(None),
            Err(e) => return Err(Error::io(path, "cannot read the ledger", e)),
            Ok(_) => {}
        }
        let file = crate::files::open_regular(path, links)?;
        file.lock_shared()
            .map_err(|e| Error::io(path, "cannot lock the ledger for reading", e))?;
        Self::from_reader(path, &file).map(Some)
    }

    /// Parse a ledger from its bytes (e.g. the copy inside a run directory).
    pub fn from_bytes(path: &Path, bytes: &[u8]) -> Result<Self> {
        Self::from_reader(path, bytes)
    }

    fn from_reader(path: &Path, reader: impl Read) -> Result<Self> {
        let mut reader = BufReader::new(reader);
        let mut ledger = Ledger::empty(path.to_path_buf());
        let mut bad = 0;
        let mut buf = Vec::new();
        let mut last_unkept = Vec::new();
        loop {
            buf.clear();
            let (n, whole) = read_line(&mut reader, &mut buf)
                .map_err(|e| Error::io(path, "cannot read the ledger", e))?;
            if n == 0 {
                break;
            }
            ledger.complete = buf.last() == Some(&b'\n');
            if ledger.complete {
                buf.pop();
                if buf.last() == Some(&b'\r') {
                    buf.pop();
                }
            }
            let index = ledger.len();
            if let Some(u) = &mut ledger.unkept {
                // Hashed once at the end: only the last line's hash is ever needed.
                u.count += 1;
                std::mem::swap(&mut buf, &mut last_unkept);
                continue;
            }
            let hash = sha256_hex(&buf);
            let text = String::from_utf8_lossy(&buf).into_owned();
            let entry = whole
                .then(|| serde_json::from_str::<Entry>(&text).ok())
                .flatten();
            if entry.is_none() {
                bad += 1;
                if bad > MAX_BAD {
                    ledger.unkept = Some(Unkept {
                        first: index,
                        count: 1,
                        last_hash: String::new(),
                    });
                    last_unkept = buf.clone();
                    continue;
                }
            }
            ledger.lines.push(Line { text, hash, entry });
        }
        if let Some(u) = &mut ledger.unkept {
            u.last_hash = sha256_hex(&last_unkept);
        }
        Ok(ledger)
    }

    /// Take the ledger at `path` under an exclusive lock (created when `create`), read as it
    /// stands now; `None` when there is no file and `create` is false.
    pub fn lock(path: &Path, create: bool) -> Result<Option<Locked>> {
        if !create && !path.exists() {
            return Ok(None);
        }
        let mut options = std::fs::OpenOptions::new();
        options.read(true).append(true).create(create);
        #[cfg(unix)]
        {
            use std::os::unix::fs::OpenOptionsExt;
            options.custom_flags(libc::O_NONBLOCK);
        }
        let mut file = options
            .open(path)
            .map_err(|e| Error::io(path, "cannot open the ledger", e))?;
        let meta = file
            .metadata()
            .map_err(|e| Error::io(path, "cannot open the ledger", e))?;
        if !meta.is_file() {
            return Err(Error::Ledger {
                path: path.to_path_buf(),
                message: "the ledger is not a regular file".into(),
            });
        }
        file.lock()
            .map_err(|e| Error::io(path, "cannot lock the ledger", e))?;
        file.rewind()
            .map_err(|e| Error::io(path, "cannot read the ledger", e))?;
        let ledger = Self::from_reader(path, &file)?;
        Ok(Some(Locked { file, ledger }))
    }

    /// The parsed entries (unparsable lines are skipped; see [`Ledger::problems`]).
    pub fn entries(&self) -> impl Iterator<Item = &Entry> {
        self.lines.iter().filter_map(|l| l.entry.as_ref())
    }

    /// Every kept line with its 1-based line number and its entry (`None`: unparsable).
    pub fn numbered(&self) -> impl Iterator<Item = (usize, Option<&Entry>)> {
        self.lines
            .iter()
            .enumerate()
            .map(|(i, l)| (i + 1, l.entry.as_ref()))
    }

    /// Number of lines.
    pub fn len(&self) -> usize {
        self.lines.len() + self.unkept.as_ref().map_or(0, |u| u.count)
    }

    /// Whether the ledger has no lines.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The first `n` lines as a ledger of their own (the state before a later event).
    pub fn prefix(&self, n: usize) -> Ledger {
        let n = n.min(self.lines.len());
        Ledger {
            path: self.path.clone(),
            lines: self.lines[..n].to_vec(),
            unkept: None,
            complete: true,
        }
    }

    /// The bytes of the first `n` lines, each ending in a newline; `None` when a line among
    /// them was not kept (a ledger with more than [`MAX_BAD`] invalid lines).
    pub fn prefix_bytes(&self, n: usize) -> Option<Vec<u8>> {
        if n > self.lines.len() {
            return None;
        }
        let mut out = Vec::new();
        for l in &self.lines[..n] {
            out.extend_from_slice(l.text.as_bytes());
            out.push(b'\n');
        }
        Some(out)
    }

    /// SHA-256 of line `i`'s bytes.
    pub fn line_hash(&self, i: usize) -> Option<String> {
        self.lines.get(i).map(|l| l.hash.clone())
    }

    /// Index of the line holding `entry` (by sequence number).
    pub fn index_of(&self, seq: u64) -> Option<usize> {
        self.lines
            .iter()
            .position(|l| l.entry.as_ref().is_some_and(|e| e.seq == seq))
    }

    fn last_hash(&self) -> String {
        match (&self.unkept, self.lines.last()) {
            (Some(u), _) => u.last_hash.clone(),
            (None, Some(l)) => l.hash.clone(),
            (None, None) => ZERO_HASH.to_string(),
        }
    }

    /// Integrity problems: unparsable lines, broken hash links, wrong sequence numbers.
    pub fn problems(&self) -> Vec<String> {
        let mut out = Vec::new();
        let mut prev = ZERO_HASH;
        for (i, line) in self.lines.iter().enumerate() {
            match &line.entry {
                None => out.push(format!("line {} is not a valid ledger entry", i + 1)),
                Some(e) => {
                    if e.prev != prev {
                        out.push(format!("line {}: the hash chain is broken (an earlier line was edited, removed or reordered)", i + 1));
                    }
                    if e.seq != i as u64 + 1 {
                        out.push(format!(
                            "line {}: sequence number {} where {} was expected",
                            i + 1,
                            e.seq,
                            i + 1
                        ));
                    }
                }
            }
            prev = &line.hash;
        }
        if let Some(u) = &self.unkept {
            out.push(format!(
                "lines {} to {} were not checked: more than {MAX_BAD} lines before them are not valid entries",
                u.first + 1,
                u.first + u.count
            ));
        }
        out
    }
}

/// Read one line into `buf` (newline included), keeping at most [`MAX_LINE`] bytes and
/// skipping the rest. Returns the bytes consumed and whether the line was kept whole.
fn read_line(reader: &mut impl BufRead, buf: &mut Vec<u8>) -> std::io::Result<(usize, bool)> {
    let n = reader.by_ref().take(MAX_LINE + 1).read_until(b'\n', buf)?;
    if n as u64 <= MAX_LINE || buf.last() == Some(&b'\n') {
        return Ok((n, true));
    }
    let mut skipped = n;
    loop {
        let chunk = reader.fill_buf()?;
        if chunk.is_empty() {
            return Ok((skipped, false));
        }
        match chunk.iter().position(|&b| b == b'\n') {
            Some(i) => {
                reader.consume(i + 1);
                buf.push(b'\n');
                return Ok((skipped + i + 1, false));
            }
            None => {
                let len = chunk.len();
                reader.consume(len);
                skipped += len;
            }
        }
    }
}

impl Locked {
    /// The ledger as it stands under the lock.
    pub fn ledger(&self) -> &Ledger {
        &self.ledger
    }

    /// Append `entry` (seq, time and prev are filled in) as one line at the end of the file.
    pub fn append(&mut self, mut entry: Entry) -> Result<Entry> {
        let path = self.ledger.path.clone();
        entry.seq = self.ledger.len() as u64 + 1;
        entry.time = super::now_rfc3339();
        entry.prev = self.ledger.last_hash();
        let line = serde_json::to_string(&entry).map_err(|e| Error::Ledger {
            path: path.clone(),
            message: format!("cannot serialise the entry: {e}"),
        })?;
        let mut bytes = Vec::with_capacity(line.len() + 2);
        if !self.ledger.complete {
            // An interrupted write left a partial last line: keep it a line of its own.
            bytes.push(b'\n');
        }
        bytes.extend_from_slice(line.as_bytes());
        bytes.push(b'\n');
        self.file
            .write_all(&bytes)
            .and_then(|()| self.file.sync_data())
            .map_err(|e| Error::io(&path, "cannot append to the ledger", e))?;
        self.ledger.complete = true;
        let hash = sha256_hex(line.as_bytes());
        if let Some(u) = &mut self.ledger.unkept {
            u.count += 1;
            u.last_hash = hash;
        } else {
            self.ledger.lines.push(Line {
                text: line,
                hash,
                entry: Some(entry.clone()),
            });
        }
        Ok(entry)
    }
}

#[cfg(test)]
mod tests {
    use super::super::Event;
    use super::*;

    fn locked(path: &Path) -> Locked {
        Ledger::lock(path, true).expect("lock").expect("exists")
    }

    #[test]
    fn chain_detects_edits() {
        let dir = tempfile::tempdir().expect("temp dir");
        let path = dir.path().join("p.ledger");
        locked(&path)
            .append(Entry::new(Event::Sealed))
            .expect("append");
        locked(&path)
            .append(Entry::new(Event::Run))
            .expect("append");
        let read = Ledger::read(&path).expect("read").expect("exists");
        assert!(read.problems().is_empty(), "{:?}", read.problems());
        assert_eq!(read.entries().count(), 2);
        let text = std::fs::read_to_string(&path).expect("read");
        std::fs::write(&path, text.replacen("\"sealed\"", "\"amended\"", 1)).expect("write");
        let edited = Ledger::read(&path).expect("read").expect("exists");
        assert_eq!(edited.problems().len(), 1, "{:?}", edited.problems());
    }

    #[test]
    fn padded_ledger_keeps_little_and_still_appends_in_chain() {
        let dir = tempfile::tempdir().expect("temp dir");
        let path = dir.path().join("p.ledger");
        locked(&path)
            .append(Entry::new(Event::Sealed))
            .expect("append");
        let mut f = std::fs::OpenOptions::new()
            .append(true)
            .open(&path)
            .expect("open");
        f.write_all(&vec![b'\n'; 1 << 20]).expect("pad");
        f.write_all(b"{\"partial").expect("partial");
        drop(f);
        let read = Ledger::read(&path).expect("read").expect("exists");
        assert_eq!(read.len(), 2 + (1 << 20));
        assert_eq!(read.lines.len(), 1 + MAX_BAD);
        let problems = read.problems();
        assert_eq!(problems.len(), MAX_BAD + 1, "{problems:?}");
        assert!(problems[MAX_BAD].contains("were not checked"));
        let mut l = locked(&path);
        let e = l.append(Entry::new(Event::Run)).expect("append");
        assert_eq!(e.seq, 3 + (1 << 20));
        assert_eq!(e.prev, sha256_hex(b"{\"partial"));
        let text = std::fs::read(&path).expect("read");
        let tail = &text[text.len() - e.prev.len() - 200..];
        let needle = b"{\"partial\n{\"seq";
        assert!(
            tail.windows(needle.len()).any(|w| w == needle),
            "the partial line stays a line of its own"
        );
    }

    #[test]
    fn overlong_line_is_invalid_and_skipped() {
        let dir = tempfile::tempdir().expect("temp dir");
        let path = dir.path().join("p.ledger");
        let mut bytes = vec![b'x'; MAX_LINE as usize + 10];
        bytes.extend_from_slice(b"\nnext\n");
        std::fs::write(&path, bytes).expect("write");
        let read = Ledger::read(&path).expect("read").expect("exists");
        assert_eq!(read.len(), 2);
        assert_eq!(read.problems().len(), 2);
    }
}
