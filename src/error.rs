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
    /// The synchroniser could not run (bad settings, or a read failed mid-search).
    #[error("synchronisation: {0}")]
    Sync(#[from] crate::sync::SyncError),
    /// The channel fit or an equaliser design failed (e.g. a training that cannot
    /// excite every tap).
    #[error("channel and equaliser: {0}")]
    Equalise(#[from] crate::equalise::EqualiseError),
    /// The capture was read but its analysis could not complete: the channel
    /// fit or an equaliser design failed on it (exit class 4, "analysis failed").
    #[error("{}: analysis failed: channel and equaliser: {source}", path.display())]
    Analysis {
        /// The capture.
        path: PathBuf,
        /// What failed.
        source: crate::equalise::EqualiseError,
    },
    /// An output file could not be written.
    #[error(transparent)]
    Write(#[from] crate::atomic::WriteError),
    /// A report given to `recheck` cannot be used.
    #[error("{}: {message}", path.display())]
    Report {
        /// The report file.
        path: PathBuf,
        /// What is wrong with it.
        message: String,
    },
    /// The capture named in a report is not the one that was analysed.
    /// The message says "differs" and states neither digest: the report may
    /// name any file, and its digest is not shown to whoever sent the report.
    #[error("{}: the capture changed since the report was written (its SHA-256 differs from the one recorded)", path.display())]
    InputChanged {
        /// The capture.
        path: PathBuf,
        /// SHA-256 recorded in the report.
        expected: String,
        /// SHA-256 of the file now.
        found: String,
    },
    /// A capture analysed with its SigMF sidecar was found without it (moved
    /// or copied without its `.sigmf-meta`): an input problem, not a figure
    /// that differs.
    #[error("{}: the report was made with the SigMF sidecar beside this capture, but {} is not there now; move or copy the .sigmf-meta together with the data file", path.display(), sidecar.display())]
    SidecarMissing {
        /// The capture.
        path: PathBuf,
        /// The sidecar name looked for.
        sidecar: PathBuf,
    },
    /// A batch could not run (bad folder, output not writable, no captures).
    #[error(transparent)]
    Batch(#[from] crate::batch::BatchError),
    /// Per-shard summaries could not be merged.
    #[error(transparent)]
    Merge(#[from] crate::batch::MergeError),
    /// The command line is inconsistent in a way clap cannot see.
    #[error("{message}")]
    Usage {
        /// What is wrong and how to fix it.
        message: String,
    },
}
