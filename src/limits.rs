//! Resource bounds: the documented caps on every size that comes from a file or
//! a profile, and the one way the crate reads a small text input.
//!
//! Takes in: paths of small text inputs (link profiles, reports, symbols files)
//! and numbers read from profiles. Gives out: the file's text, or an
//! [`std::io::Error`] saying why it was not read (not a regular file, larger than
//! its cap, not UTF-8). Units: bytes (`_BYTES`) and symbols (`_SYMBOLS`).
//!
//! Every allocation whose size comes from input is checked against the file's
//! actual size or against one of these caps *before* it is made, so a hostile
//! header or profile gives a clear error instead of an attempted multi-gigabyte
//! allocation (docs/robustness.md lists each check).
//!
//! A small input is opened only after `metadata()` says it is a regular file:
//! opening a FIFO for reading blocks until a writer appears, and reading a
//! character device such as `/dev/zero` never ends.

use std::io::{self, Read};
use std::path::Path;

/// Largest link profile read, bytes (a complete profile is about 2 KiB).
pub const MAX_PROFILE_BYTES: u64 = 16 << 20;
/// Largest report read by `recheck`, bytes (traces are decimated, so reports
/// stay in the megabytes).
pub const MAX_REPORT_BYTES: u64 = 256 << 20;
/// Largest symbols file read, bytes (one `re im` pair per line).
pub const MAX_SYMBOLS_FILE_BYTES: u64 = 256 << 20;
/// Longest training sequence, symbols (PRBS and Zadoff-Chu lengths).
pub const MAX_TRAINING_SYMBOLS: usize = 1 << 20;
/// Most payload symbols in one burst (before + after the training).
pub const MAX_PAYLOAD_SYMBOLS: usize = 1 << 24;
/// Largest oversampling factor `samples_per_symbol`.
pub const MAX_SAMPLES_PER_SYMBOL: u32 = 1024;
/// Longest pulse span, symbols.
pub const MAX_SPAN_SYMBOLS: u32 = 1024;
/// Most pre-cursor or post-cursor taps a channel fit may be asked for (each side).
pub const MAX_CURSOR_TAPS: usize = 256;
/// Most feedforward or feedback equaliser taps (the MMSE-DFE design solves a
/// dense system of this order).
pub const MAX_EQUALISER_TAPS: usize = 512;

/// Read a small UTF-8 text input of at most `max_bytes` bytes.
///
/// # Errors
/// `InvalidInput` when the path is not a regular file (directory, FIFO, device)
/// or is larger than `max_bytes`; `InvalidData` when it is not UTF-8; any OS
/// error from `metadata`, `open` or `read`.
pub fn read_small_text(path: &Path, max_bytes: u64) -> io::Result<String> {
    let meta = std::fs::metadata(path)?;
    if !meta.is_file() {
        return Err(io::Error::new(
            io::ErrorKind::InvalidInput,
            "not a regular file (a directory, FIFO or device?)",
        ));
    }
    if meta.len() > max_bytes {
        return Err(too_large(meta.len(), max_bytes));
    }
    let file = std::fs::File::open(path)?;
    // The file may grow after the check: never read more than the cap + 1 byte.
    let mut bytes = Vec::with_capacity(meta.len() as usize);
    file.take(max_bytes + 1).read_to_end(&mut bytes)?;
    if bytes.len() as u64 > max_bytes {
        return Err(too_large(bytes.len() as u64, max_bytes));
    }
    String::from_utf8(bytes).map_err(|e| {
        io::Error::new(
            io::ErrorKind::InvalidData,
            format!("not UTF-8 text (byte {})", e.utf8_error().valid_up_to()),
        )
    })
}

fn too_large(len: u64, max: u64) -> io::Error {
    io::Error::new(
        io::ErrorKind::InvalidInput,
        format!("{len} bytes is larger than the {max}-byte limit for this kind of file"),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_directory_and_an_oversized_file_are_refused_without_reading() {
        let dir = tempfile::tempdir().unwrap();
        let e = read_small_text(dir.path(), 10).unwrap_err();
        assert!(e.to_string().contains("not a regular file"), "{e}");
        let p = dir.path().join("big.json");
        std::fs::write(&p, b"0123456789ab").unwrap();
        let e = read_small_text(&p, 10).unwrap_err();
        assert!(e.to_string().contains("12 bytes"), "{e}");
        assert_eq!(read_small_text(&p, 12).unwrap(), "0123456789ab");
    }

    #[cfg(unix)]
    #[test]
    fn a_fifo_is_refused_without_blocking() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("pipe.json");
        let ok = std::process::Command::new("mkfifo")
            .arg(&p)
            .status()
            .map(|s| s.success())
            .unwrap_or(false);
        if !ok {
            eprintln!("mkfifo unavailable; skipping");
            return;
        }
        let e = read_small_text(&p, 1 << 20).unwrap_err();
        assert_eq!(e.kind(), io::ErrorKind::InvalidInput);
    }
}
