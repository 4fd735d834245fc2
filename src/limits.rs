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
/// Largest batch summary (`summary*.jsonl`) read by `batch --merge`, bytes.
pub const MAX_SUMMARY_BYTES: u64 = 1 << 30;
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
/// Longest frame, samples: `(payload + training symbols) × samples_per_symbol`
/// (the product is capped, not only each factor; 2^25 samples = 256 MiB of
/// complex f32).
pub const MAX_FRAME_SAMPLES: usize = 1 << 25;
/// Most taps of the pulse filter, `span_symbols × samples_per_symbol + 1`.
pub const MAX_PULSE_TAPS: usize = 1 << 16;
/// Most pre-cursor or post-cursor taps a channel fit may be asked for (each side).
pub const MAX_CURSOR_TAPS: usize = 256;
/// Most feedforward or feedback equaliser taps (the MMSE-DFE design solves a
/// dense system of this order).
pub const MAX_EQUALISER_TAPS: usize = 512;

/// Open `path` for reading only if it is a regular file, without ever blocking:
/// the file is opened with `O_NONBLOCK` (so a FIFO swapped in after any earlier
/// check does not block the open; the flag changes nothing for a regular file)
/// and the *open descriptor* is checked with `fstat`. Returns the file and its
/// length in bytes.
///
/// # Errors
/// `InvalidInput` ("not a regular file") for a folder, FIFO, socket or device;
/// any OS error from `open` or `fstat`.
pub fn open_regular(path: &Path) -> io::Result<(std::fs::File, u64)> {
    let mut opts = std::fs::OpenOptions::new();
    opts.read(true);
    #[cfg(unix)]
    {
        use std::os::unix::fs::OpenOptionsExt;
        opts.custom_flags(libc::O_NONBLOCK);
    }
    // A folder opens on Unix; the fstat below refuses it.
    let file = opts.open(path)?;
    let meta = file.metadata()?;
    if !meta.is_file() {
        return Err(not_regular());
    }
    Ok((file, meta.len()))
}

fn not_regular() -> io::Error {
    io::Error::new(
        io::ErrorKind::InvalidInput,
        "not a regular file (a directory, FIFO or device?)",
    )
}

/// Largest capture file hashed or read, bytes (2^50 = 1 PiB): a file whose
/// size is above it is refused. Reads never go past the size the file had when
/// it was opened.
pub const MAX_CAPTURE_BYTES: u64 = 1 << 50;

/// Most samples in the synchroniser's bank of frequency-shifted references:
/// `hypotheses × reference length` (the product is capped, not only the
/// hypothesis count: 2^24 complex f32 = 128 MiB, plus its transforms).
pub const MAX_SYNC_BANK_SAMPLES: usize = 1 << 24;

/// Most samples `synth` may be asked to write in one capture (2^28 = 268 M
/// samples, 2 GiB of cf32, held in memory while it is written): the product
/// `lead_gap + bursts × (frame + largest gap)` is checked before anything is
/// generated. 2^28 leaves room for the 1.1 GB sparse capture of
/// `benches/e2e/run.sh` (2000 bursts, gaps up to 70 000 samples).
pub const MAX_SYNTH_SAMPLES: u64 = 1 << 28;

/// `--jobs` may ask for at most this many worker threads per core
/// (`std::thread::available_parallelism`); more is refused as a usage error.
pub const MAX_JOBS_PER_CORE: usize = 4;

/// The largest `--jobs` value on this machine: [`MAX_JOBS_PER_CORE`] × cores.
pub fn max_jobs() -> usize {
    let cores = std::thread::available_parallelism()
        .map(|n| n.get())
        .unwrap_or(1);
    cores.saturating_mul(MAX_JOBS_PER_CORE)
}

/// Check a `--jobs` value: 1 ..= [`max_jobs`].
///
/// # Errors
/// A one-line message naming the value and the allowed range.
pub fn check_jobs(n: usize) -> Result<usize, String> {
    let max = max_jobs();
    if n == 0 || n > max {
        return Err(format!(
            "--jobs {n}: expected 1..={max} ({MAX_JOBS_PER_CORE} per core on this machine)"
        ));
    }
    Ok(n)
}

/// Lowest sample (or symbol) rate accepted from any input, Hz: a profile,
/// a SigMF sidecar, a WAV header, a report given to `recheck`, `--sample-rate`.
pub const MIN_RATE_HZ: f64 = 1.0;
/// Highest sample (or symbol) rate accepted from any input, Hz (10^12: far
/// beyond any converter; a larger number is a typo, and would make every
/// figure in Hz meaningless).
pub const MAX_RATE_HZ: f64 = 1e12;
/// Largest |centre frequency| accepted from any input, Hz (10^12 = 1 THz).
pub const MAX_ABS_FREQUENCY_HZ: f64 = 1e12;

/// Check a rate in Hz: finite and in [`MIN_RATE_HZ`] ..= [`MAX_RATE_HZ`].
///
/// # Errors
/// What was expected, for a message that names the key and the value.
pub fn check_rate_hz(hz: f64) -> Result<f64, &'static str> {
    if hz.is_finite() && (MIN_RATE_HZ..=MAX_RATE_HZ).contains(&hz) {
        Ok(hz)
    } else {
        Err("a finite rate in [1, 1e12] Hz")
    }
}

/// Check a centre frequency in Hz: finite, |f| ≤ [`MAX_ABS_FREQUENCY_HZ`].
///
/// # Errors
/// What was expected, for a message that names the key and the value.
pub fn check_frequency_hz(hz: f64) -> Result<f64, &'static str> {
    if hz.is_finite() && hz.abs() <= MAX_ABS_FREQUENCY_HZ {
        Ok(hz)
    } else {
        Err("a finite frequency in [-1e12, 1e12] Hz")
    }
}

/// Format a number for an error message: short even when it is absurd
/// (`1e300`, not three hundred digits).
pub fn show_number(v: f64) -> String {
    if v.is_finite() && v != 0.0 && !(1e-6..1e15).contains(&v.abs()) {
        format!("{v:e}")
    } else {
        format!("{v}")
    }
}

/// Check the `RAYON_NUM_THREADS` environment variable, which sizes the
/// worker pool of every command that does not take `--jobs`: a number above
/// [`max_jobs`] is refused like `--jobs` (it would spawn threads until the host
/// starves). Anything else (unset, empty, not a number, 0) is left to the
/// thread pool, which then uses one thread per core.
///
/// # Errors
/// A one-line message naming the variable, its value and the allowed range.
pub fn check_thread_env(value: Option<&std::ffi::OsStr>) -> Result<(), String> {
    let Some(text) = value.and_then(|v| v.to_str()) else {
        return Ok(());
    };
    match text.trim().parse::<u64>() {
        Ok(n) if n > max_jobs() as u64 => Err(format!(
            "environment RAYON_NUM_THREADS={n}: expected 1..={} ({MAX_JOBS_PER_CORE} per core on this machine)",
            max_jobs()
        )),
        _ => Ok(()),
    }
}

/// Read a small UTF-8 text input of at most `max_bytes` bytes.
///
/// # Errors
/// `InvalidInput` when the path is not a regular file (directory, FIFO, device)
/// or is larger than `max_bytes`; `InvalidData` when it is not UTF-8; any OS
/// error from `metadata`, `open` or `read`.
pub fn read_small_text(path: &Path, max_bytes: u64) -> io::Result<String> {
    let meta = std::fs::metadata(path)?;
    if !meta.is_file() {
        return Err(not_regular());
    }
    let (file, len) = open_regular(path)?;
    if len > max_bytes {
        return Err(too_large(len, max_bytes));
    }
    // The file may grow after the check: never read more than the cap + 1 byte.
    let mut bytes = Vec::with_capacity(len as usize);
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
    fn rates_and_frequencies_outside_the_physical_ranges_are_refused() {
        // Bounds are this crate's documented choice (docs/robustness.md).
        for ok in [1.0, 2.4e6, 1e12] {
            assert!(check_rate_hz(ok).is_ok(), "{ok}");
        }
        for bad in [0.0, 0.5, -1.0, 1.000_001e12, 1e300, f64::NAN, f64::INFINITY] {
            assert!(check_rate_hz(bad).is_err(), "{bad}");
        }
        assert!(check_frequency_hz(-433.92e6).is_ok() && check_frequency_hz(0.0).is_ok());
        assert!(check_frequency_hz(1e300).is_err() && check_frequency_hz(f64::NAN).is_err());
        assert_eq!(show_number(1e300), "1e300");
        assert_eq!(show_number(-1e6), "-1000000");
    }

    #[test]
    fn a_thread_count_in_the_environment_above_the_jobs_cap_is_refused() {
        use std::ffi::OsStr;
        let over = (max_jobs() + 1).to_string();
        let e = check_thread_env(Some(OsStr::new(&over))).unwrap_err();
        assert!(e.contains("RAYON_NUM_THREADS"), "{e}");
        for fine in ["1", "0", "", "many", "-3"] {
            assert!(check_thread_env(Some(OsStr::new(fine))).is_ok(), "{fine}");
        }
        assert!(check_thread_env(None).is_ok());
    }

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
