//! The library's top-level error: one variant per area, each wrapping that
//! area's typed error (`CaptureError`, …) or carrying the path it concerns.
//!
//! Takes in: area errors via `From`. Gives out: one `Display` line of the form
//! `<file>: <problem>` that the binary prints as `iqaudit: <line>`.

use std::path::PathBuf;

use crate::capture::CaptureError;

/// Any error the library returns to the command line.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// Opening, reading or writing a capture failed.
    #[error(transparent)]
    Capture(#[from] CaptureError),
    /// Any other I/O failure on a named file (`<stdout>` for standard output).
    #[error("{}: {source}", path.display())]
    Io {
        /// The file or stream.
        path: PathBuf,
        /// The OS error.
        source: std::io::Error,
    },
    /// A link profile is missing, malformed or has a bad value (names the file and key).
    #[error(transparent)]
    Profile(#[from] crate::profile::ProfileError),
    /// The synthesiser was given options it cannot honour, or could not write.
    #[error(transparent)]
    Synth(#[from] crate::synth::SynthError),
    /// The command line is inconsistent in a way clap cannot see.
    #[error("{message}")]
    Usage {
        /// What is wrong and how to fix it.
        message: String,
    },
}
