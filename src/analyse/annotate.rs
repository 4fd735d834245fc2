//! The detected bursts of a finished analysis written back as SigMF
//! annotations (#18): `analyse --annotate` and `batch --annotate`.
//!
//! Takes the capture path, the profile and options the analysis ran with, and
//! its [`Report`]; opens the capture again the same way (so the sidecar, the
//! archive member and the format are the ones analysed) and writes one
//! annotation per burst ([`crate::report::annotations::burst_annotations`],
//! each with the centre frequency of the segment the burst sits in) with
//! [`Capture::write_annotations`]: to a new sidecar by default, to the input's
//! own sidecar only when asked. Gives the path written.

use std::path::{Path, PathBuf};

use super::plan::open_capture;
use super::AnalyseOptions;
use crate::capture::AnnotationTarget;
use crate::profile::ResolvedProfile;
use crate::report::annotations::burst_annotations;
use crate::report::schema::Report;
use crate::Error;

/// Write `report`'s bursts as SigMF annotations of the capture at `path`
/// (see the module documentation).
///
/// # Errors
/// The capture cannot be opened again as it was analysed, or
/// [`Capture::write_annotations`](crate::capture::Capture::write_annotations)
/// refuses (no sidecar to update, an archive, a name taken by another
/// program's file, a 24-bit WAV) or cannot write.
pub fn write_burst_annotations(
    path: &Path,
    profile: &ResolvedProfile,
    opts: &AnalyseOptions,
    report: &Report,
    target: AnnotationTarget,
) -> Result<PathBuf, Error> {
    let capture = open_capture(path, profile, opts)?;
    let fallback = report.input.center_freq_hz;
    let annotations = burst_annotations(report, &|b| b.center_freq_hz.or(fallback));
    Ok(capture.write_annotations(
        &annotations,
        target,
        Some(report.input.sample_rate_hz),
        report.input.center_freq_hz,
    )?)
}
