//! Opening files that somebody else may have prepared: regular files only, never blocking,
//! every read capped.
//!
//! `verify` reads run directories sent by others, so a file it opens may be a FIFO (a read
//! would block forever), a device such as `/dev/zero` (a read never ends) or a symbolic link
//! pointing anywhere. Every such open goes through [`open_regular`]: the file is opened
//! without blocking (`O_NONBLOCK`) and, where asked, without following a final symbolic link
//! (`O_NOFOLLOW`); its type is checked on the open descriptor (no race between check and
//! read); reads stop at a cap the format needs.

use crate::error::{Error, Result};
use sha2::{Digest, Sha256};
use std::fs::File;
use std::io::Read;
use std::path::Path;

/// Whether a final symbolic link in the path may be followed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Links {
    /// Follow it (a path the user named on the command line).
    Follow,
    /// Refuse it (a file inside a directory somebody else prepared).
    Refuse,
}

fn not_regular(path: &Path, what: &str) -> Error {
    Error::io(
        path,
        "refusing to read it",
        std::io::Error::new(
            std::io::ErrorKind::InvalidInput,
            format!("{what}, not a regular file; only regular files are read"),
        ),
    )
}

fn kind_name(t: std::fs::FileType) -> &'static str {
    #[cfg(unix)]
    {
        use std::os::unix::fs::FileTypeExt;
        if t.is_fifo() {
            return "a FIFO (named pipe)";
        }
        if t.is_char_device() || t.is_block_device() {
            return "a device";
        }
        if t.is_socket() {
            return "a socket";
        }
    }
    if t.is_dir() {
        "a directory"
    } else if t.is_symlink() {
        "a symbolic link"
    } else {
        "a special file"
    }
}

/// Open `path` for reading if it is a regular file; never blocks on a FIFO or device.
///
/// # Errors
/// I/O errors, and a clear refusal for a FIFO, device, socket, directory or (with
/// [`Links::Refuse`]) a symbolic link.
pub fn open_regular(path: &Path, links: Links) -> Result<File> {
    let mut options = std::fs::OpenOptions::new();
    options.read(true);
    #[cfg(unix)]
    {
        use std::os::unix::fs::OpenOptionsExt;
        let mut flags = libc::O_NONBLOCK;
        if links == Links::Refuse {
            flags |= libc::O_NOFOLLOW;
        }
        options.custom_flags(flags);
    }
    #[cfg(not(unix))]
    if links == Links::Refuse {
        let meta = std::fs::symlink_metadata(path)
            .map_err(|e| Error::io(path, "cannot read the file", e))?;
        if !meta.is_file() {
            return Err(not_regular(path, kind_name(meta.file_type())));
        }
    }
    let file = match options.open(path) {
        Ok(f) => f,
        Err(e) if links == Links::Refuse && is_symlink(path) => {
            let _ = e;
            return Err(not_regular(path, "a symbolic link"));
        }
        Err(e) => return Err(Error::io(path, "cannot read the file", e)),
    };
    let meta = file
        .metadata()
        .map_err(|e| Error::io(path, "cannot read the file", e))?;
    if !meta.is_file() {
        return Err(not_regular(path, kind_name(meta.file_type())));
    }
    Ok(file)
}

fn is_symlink(path: &Path) -> bool {
    std::fs::symlink_metadata(path).is_ok_and(|m| m.file_type().is_symlink())
}

/// Read a whole regular file of at most `cap` bytes.
///
/// # Errors
/// As [`open_regular`], and a refusal naming the cap when the file is larger.
pub fn read_capped(path: &Path, links: Links, cap: u64) -> Result<Vec<u8>> {
    let file = open_regular(path, links)?;
    let mut bytes = Vec::new();
    file.take(cap + 1)
        .read_to_end(&mut bytes)
        .map_err(|e| Error::io(path, "cannot read the file", e))?;
    if bytes.len() as u64 > cap {
        return Err(Error::io(
            path,
            "refusing to read it",
            std::io::Error::new(
                std::io::ErrorKind::InvalidData,
                format!(
                    "it is larger than {} MiB, more than this kind of file ever needs",
                    cap >> 20
                ),
            ),
        ));
    }
    Ok(bytes)
}

/// Read a whole regular file of at most `cap` bytes as UTF-8 text.
///
/// # Errors
/// As [`read_capped`], and invalid UTF-8.
pub fn read_text_capped(path: &Path, links: Links, cap: u64) -> Result<String> {
    String::from_utf8(read_capped(path, links, cap)?).map_err(|_| {
        Error::io(
            path,
            "cannot read the file",
            std::io::Error::new(std::io::ErrorKind::InvalidData, "it is not UTF-8 text"),
        )
    })
}

/// Hex SHA-256 of some bytes.
pub fn sha256_hex(bytes: &[u8]) -> String {
    hex(&Sha256::digest(bytes))
}

/// Lower-case hex of some bytes.
pub fn hex(bytes: &[u8]) -> String {
    const DIGITS: &[u8; 16] = b"0123456789abcdef";
    let mut out = String::with_capacity(2 * bytes.len());
    for b in bytes {
        out.push(char::from(DIGITS[usize::from(b >> 4)]));
        out.push(char::from(DIGITS[usize::from(b & 15)]));
    }
    out
}

/// Hex SHA-256 of a regular file, read in blocks (memory does not grow with the file).
///
/// # Errors
/// As [`open_regular`].
pub fn sha256_streamed(path: &Path, links: Links) -> Result<String> {
    let mut file = open_regular(path, links)?;
    let mut hasher = Sha256::new();
    let mut buf = vec![0u8; 1 << 16];
    loop {
        let n = file
            .read(&mut buf)
            .map_err(|e| Error::io(path, "cannot read the file", e))?;
        if n == 0 {
            break;
        }
        hasher.update(&buf[..n]);
    }
    Ok(hex(&hasher.finalize()))
}

#[cfg(all(test, unix))]
mod tests {
    use super::*;

    #[test]
    fn refuses_fifo_device_and_links_without_blocking() {
        let dir = tempfile::tempdir().expect("temp dir");
        let fifo = dir.path().join("fifo");
        let status = std::process::Command::new("mkfifo")
            .arg(&fifo)
            .status()
            .expect("mkfifo");
        assert!(status.success());
        let e = read_capped(&fifo, Links::Follow, 10).expect_err("fifo refused");
        assert!(e.to_string().contains("FIFO"), "{e}");
        let e = read_capped(Path::new("/dev/zero"), Links::Follow, 10).expect_err("device");
        assert!(e.to_string().contains("device"), "{e}");
        let link = dir.path().join("link");
        std::os::unix::fs::symlink("/dev/zero", &link).expect("symlink");
        let e = read_capped(&link, Links::Refuse, 10).expect_err("link refused");
        assert!(e.to_string().contains("symbolic link"), "{e}");
        let big = dir.path().join("big");
        std::fs::write(&big, vec![b'x'; 2 << 20]).expect("write");
        let e = read_capped(&big, Links::Refuse, 1 << 20).expect_err("cap");
        assert!(e.to_string().contains("larger than 1 MiB"), "{e}");
        assert_eq!(
            read_capped(&big, Links::Refuse, 2 << 20)
                .expect("fits")
                .len(),
            2 << 20
        );
        // SHA-256("abc"), FIPS 180-2 Appendix B.1.
        std::fs::write(&big, b"abc").expect("write");
        assert_eq!(
            sha256_streamed(&big, Links::Refuse).expect("hash"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }
}
