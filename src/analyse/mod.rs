//! The main job: analyse one capture against a link profile.
//!
//! Takes a capture path, a [`ResolvedProfile`] and [`AnalyseOptions`]; gives a
//! [`Report`] (schema `iqaudit.report/4`). The stages run in data-flow order:
//!
//! 1. `capture` — open the file (memory map, chunked decoding);
//! 2. `signal` — build the training symbols, the known payload (if any), the
//!    RRC pulse and the payload constellation from the profile;
//! 3. `sync` — search the whole capture for the training block (overlap-save
//!    correlation, in parallel over chunks), then refine each burst's CFO,
//!    timing and phase and cut out matched-filtered symbol-rate samples;
//! 4. `channel` + `equalise` — least-squares channel fit over the training,
//!    decision-directed carrier refinement, and every equaliser on the burst
//!    (the profile's choice is reported; the linear MMSE equaliser and the genie
//!    DFE are run beside it for comparison);
//! 5. `report` — EVM, MER, SER/BER, error runs, warnings, verdict.
//!
//! Bursts are processed in parallel and collected in capture order; all sums are
//! taken in index order, so the report is identical for any thread count.
//!
//! ## Bounded memory
//!
//! Bursts are analysed in batches of [`BURST_BATCH`]. After each batch only the
//! traces of the *traced set* are kept: the first `K` bursts and the `K` bursts
//! with the largest RMS EVM so far (ties: the lower index), `K` being
//! [`AnalyseOptions::traced_bursts`] (default [`DEFAULT_TRACED_BURSTS`]). The
//! worst-`K` set of all bursts does not depend on the order the bursts arrive
//! in, so neither does the selection. Every other burst keeps its figures with
//! `trace` and `channel.response_db` null; every burst lists at most
//! [`ERROR_RUNS_KEPT`](crate::report::schema::ERROR_RUNS_KEPT) error runs. The memory held is
//! then a few KiB per burst plus at most `2K` traces, whatever the capture.
//!
//! ## Frame indexing
//!
//! For a burst, symbol index 0 is the first training symbol. A payload before
//! the training occupies indices `−B..0`, the training `0..L`, a payload after it
//! `L..L+A`. Payload symbol numbers in the report (error runs, peak EVM, plots)
//! count the payload symbols in time order: the `B` symbols before the training
//! first, then the `A` after it.

//!
//! ## Files
//!
//! | file | takes in | gives out |
//! |---|---|---|
//! | `mod.rs` (this driver) | capture path, resolved profile, [`AnalyseOptions`] | the [`Report`]: opens, plans, searches, runs the bursts in batches, collects |
//! | `plan.rs` | the profile and the opened capture | the per-capture plan (symbols, constellation, equaliser settings) and the synchroniser |
//! | `rate.rs` | the capture's rate and the profile's symbol rate | the resampled stream the analysis reads, when the rates are not an integer ratio (#17) |
//! | `burst.rs` | one synchronised burst and the plan | its [`BurstReport`]: extraction, fit and equalisers, figures, warnings |
//! | `detail.rs` | a burst's equalised symbols and channel | the plot trace and the channel figures of the report |
//! | `traced.rs` | each burst's RMS EVM, in any order | which bursts keep their traces |
//! | `verdict.rs` | every burst's figures and the profile's limits | the summary over bursts and the verdict |
//!
//! `recheck` (re-running a recorded report) lives in [`crate::recheck`].

mod annotate;
mod burst;
mod clock;
mod detail;
mod frontend;
mod mlse;
mod plan;
mod rate;
mod traced;
mod verdict;

use crate::capture::Capture;
use crate::capture::SampleFormat;
use crate::profile::ResolvedProfile;
use crate::report::provenance::sha256_file;
use crate::report::schema::{
    BurstReport, InputFormatSource, InputInfo, Provenance, Report, ToolInfo, Warning, WarningCode,
    SCHEMA,
};
use crate::sync::{BurstSync, ChunkReader, Detection, SampleSource, Synchroniser};
use crate::{Cf32, Error};
pub use annotate::write_burst_annotations;
use burst::analyse_burst;
pub use plan::open_capture;
use plan::{usage, Plan, SyncPlan};
use rayon::prelude::*;
use std::path::Path;
use traced::TraceSelection;
use verdict::{cap_error_runs, judge, summarise};

/// Confidence level of every error-rate interval in the report.
pub const CONFIDENCE: f64 = 0.95;
/// Most equalised symbols kept per burst for the constellation plot.
pub const TRACE_POINTS: usize = 2000;
/// Samples either side of a burst's first-symbol instant kept for the sync-metric plot, in symbols.
pub(crate) const SYNC_TRACE_SYMBOLS: usize = 16;
/// Default `K` of the traced set: the first `K` bursts and the `K` worst by RMS
/// EVM keep their plot traces (see the module documentation).
pub const DEFAULT_TRACED_BURSTS: usize = 8;
/// Largest accepted `K` (≈ 60 KiB of trace per burst: 2·1000 traces ≈ 120 MiB).
pub const MAX_TRACED_BURSTS: usize = 1000;
/// Bursts analysed in parallel before the traces outside the traced set are
/// dropped and the batch's stretch of the mapped capture is released; bounds
/// the transient traces to this many, and the capture pages the bursts' small
/// reads keep mapped to this many bursts' worth (the kernel may map up to a
/// 2 MiB page-cache folio around each read).
pub const BURST_BATCH: usize = 64;

/// Options of one analysis besides the profile (command-line overrides).
#[derive(Debug, Clone, Default)]
pub struct AnalyseOptions {
    /// Sample format given on the command line (overrides the profile and the file).
    pub format: Option<SampleFormat>,
    /// Sample rate given on the command line, Hz.
    pub sample_rate_hz: Option<f64>,
    /// The command line, recorded in the report.
    pub command: Vec<String>,
    /// The file's SHA-256 (lowercase hex) when the caller has just computed it
    /// (batch resume, recheck): recorded as is instead of hashing the file again.
    pub input_sha256: Option<String>,
    /// `K` of the traced set (`--traced-bursts`); `None` means
    /// [`DEFAULT_TRACED_BURSTS`]. At most [`MAX_TRACED_BURSTS`].
    pub traced_bursts: Option<usize>,
    /// Do not hash the file (when `input_sha256` is `None`): the report's
    /// `input.sha256` is then the empty string. For callers that will not write
    /// or show the report's JSON (the terminal summary has no digest), where the
    /// hash would be a whole second pass over the capture for nothing.
    pub skip_input_hash: bool,
}

/// `CAPTURE.profile.json` beside the capture: the profile an analysis reads
/// when none is given.
pub fn default_profile_path(capture: &Path) -> std::path::PathBuf {
    let mut s = capture.as_os_str().to_owned();
    s.push(".profile.json");
    std::path::PathBuf::from(s)
}

/// The profile file of an analysis of `capture`: `given`, or
/// [`default_profile_path`], which must then exist.
///
/// # Errors
/// [`Error::Usage`] saying how to write a profile when none is given and
/// none lies beside the capture.
pub fn profile_path_for(capture: &Path, given: Option<&Path>) -> Result<std::path::PathBuf, Error> {
    if let Some(p) = given {
        return Ok(p.to_path_buf());
    }
    let path = default_profile_path(capture);
    if !path.exists() {
        return Err(Error::Usage {
            message: format!(
                "{}: no profile given and {} does not exist; write one with `iqaudit profile new > {}` and edit it, or pass --profile",
                capture.display(),
                path.display(),
                path.display()
            ),
        });
    }
    Ok(path)
}

/// Analyse one capture (see the module documentation).
///
/// ```
/// use iqaudit::analyse::{analyse_capture, AnalyseOptions};
/// use std::path::Path;
///
/// let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-captures");
/// let profile = iqaudit::profile::load_profile(&dir.join("crane-bench-cable.ci16.profile.json"))?;
/// let report = analyse_capture(&dir.join("crane-bench-cable.ci16"), &profile, &AnalyseOptions::default())?;
/// assert_eq!(report.summary.bursts, 4);
/// assert!(report.summary.evm_rms_percent.is_some_and(|e| e < 5.0));
/// # Ok::<(), Box<dyn std::error::Error>>(())
/// ```
///
/// # Errors
/// Unreadable capture, unusable profile, or a failure of a stage that is not a
/// per-burst problem. A capture without training is not an error: its report has
/// no bursts and the verdict `no-training`.
///
/// A channel fit or equaliser design that fails on the capture's data is
/// [`Error::Analysis`] naming the capture.
pub fn analyse_capture(
    path: &Path,
    profile: &ResolvedProfile,
    opts: &AnalyseOptions,
) -> Result<Report, Error> {
    analyse_capture_unnamed(path, profile, opts).map_err(|e| match e {
        Error::Equalise(source) => Error::Analysis {
            path: path.to_path_buf(),
            source,
        },
        e => e,
    })
}

fn analyse_capture_unnamed(
    path: &Path,
    profile: &ResolvedProfile,
    opts: &AnalyseOptions,
) -> Result<Report, Error> {
    profile.validate()?;
    let capture = open_capture(path, profile, opts)?;
    let plan = Plan::new(profile, &capture)?;
    // Checked, not built: the reference and the bank are `training × sps`
    // samples and more, so they are built only once the capture is known to
    // be long enough to hold the training (rule 2 of #16).
    let sync_plan = SyncPlan::new(profile, &plan)?;
    let threshold = sync_plan.dims.threshold;
    let traced = opts.traced_bursts.unwrap_or(DEFAULT_TRACED_BURSTS);
    if traced > MAX_TRACED_BURSTS {
        return Err(usage(format!(
            "--traced-bursts {traced}: at most {MAX_TRACED_BURSTS} (each traced burst holds ≈ 60 KiB)"
        )));
    }
    // The SHA-256 of the whole file is a second pass over it: run it beside the
    // search and the bursts (same bytes, same digest) instead of after them.
    // The data file (a `.sigmf-meta` path stands for its `.sigmf-data`): the
    // digest is always of the samples analysed.
    let hash_path = capture.path().to_path_buf();
    let known = match (&opts.input_sha256, opts.skip_input_hash) {
        (Some(d), _) => Some(d.clone()),
        (None, true) => Some(String::new()),
        (None, false) => None,
    };
    let hasher = std::thread::spawn(move || known.map_or_else(|| sha256_file(&hash_path), Ok));
    let mut warnings = Vec::new();
    if capture.trailing_bytes() > 0 {
        warnings.push(Warning::new(
            WarningCode::TrailingBytes,
            format!(
                "{} trailing bytes do not make a whole sample and were ignored",
                capture.trailing_bytes()
            ),
        ));
    }
    metadata_warnings(&capture, profile, opts, &mut warnings);
    let bursts = bursts_or_too_short(sync_plan, &plan, profile, &capture, traced, &mut warnings)?;
    if bursts.is_empty()
        && !warnings
            .iter()
            .any(|w| w.code == WarningCode::NoTrainingFound)
    {
        warnings.push(Warning::new(
            WarningCode::NoTrainingFound,
            format!(
                "no training block above the threshold {threshold:.3}; check the profile's training and sample rate, or lower search.threshold"
            ),
        ));
    }
    // The capture views (PSD, spurs, power envelope): one more bounded-memory
    // pass over the capture, as `iqaudit info` makes it, while the hash runs.
    let stats_opts = crate::capture::stats::StatsOptions::default();
    let stats = crate::capture::stats::capture_stats(&capture, &stats_opts, &|_| {})?;
    let views = crate::capture::views::capture_views(
        &stats,
        Some(plan.sample_rate_hz),
        plan.center_freq_hz,
        stats_opts.obw_fraction,
    );
    let hashed = hasher
        .join()
        .unwrap_or_else(|_| Err(std::io::Error::other("the hashing thread panicked")));
    let sha256 = hashed.map_err(|source| Error::Io {
        path: path.to_path_buf(),
        source,
    })?;
    let summary = summarise(&bursts);
    let verdict = judge(profile, &bursts, &summary, &views);
    let profile_value =
        serde_json::to_value(profile).map_err(|e| usage(format!("profile: {e}")))?;
    Ok(Report {
        schema: SCHEMA.to_string(),
        tool: ToolInfo::this(),
        command: opts.command.clone(),
        input: InputInfo {
            path: path.display().to_string(),
            path_from_report: None,
            size_bytes: capture.file_len_bytes(),
            sha256,
            format: capture.container().to_string(),
            format_source: format_source(&capture, opts),
            swap_iq: capture.swap_iq(),
            sample_rate_hz: plan.input_rate_hz,
            center_freq_hz: plan.center_freq_hz,
            samples: capture.len() as u64,
        },
        profile: profile_value,
        capture: Some(views),
        bursts,
        summary,
        verdict,
        warnings,
        provenance: provenance(profile, opts, traced, threshold)?,
    })
}

/// How to reproduce the figures: the options and settings besides the profile.
fn provenance(
    profile: &ResolvedProfile,
    opts: &AnalyseOptions,
    traced: usize,
    threshold: f64,
) -> Result<Provenance, Error> {
    Ok(Provenance {
        profile_sha256: crate::report::provenance::profile_sha256(profile)
            .map_err(|e| usage(format!("profile: {e}")))?,
        format_override: opts.format.map(|f| f.name().to_string()),
        sample_rate_override_hz: opts.sample_rate_hz,
        traced_bursts: traced,
        threshold,
        recheck: "iqaudit recheck REPORT.json".into(),
    })
}

/// The capture's bursts, or none with a warning when it is shorter than the
/// training block. The length is compared before the synchroniser is built:
/// its reference and bank are sized by the profile (`training × sps` samples,
/// times the hypotheses), and a maximal training on a tiny capture built
/// 1.8 GB of them only to find the capture too short.
fn bursts_or_too_short(
    sync_plan: SyncPlan,
    plan: &Plan,
    profile: &ResolvedProfile,
    capture: &Capture,
    traced: usize,
    warnings: &mut Vec<Warning>,
) -> Result<Vec<BurstReport>, Error> {
    let needed = sync_plan.dims.min_capture_len;
    if plan.analysis_len(capture) >= needed {
        let sync = sync_plan.build(plan)?;
        let run = Run {
            plan,
            profile,
            sync: &sync,
            capture,
        };
        return run.all_bursts(traced);
    }
    warnings.push(Warning::new(
        WarningCode::NoTrainingFound,
        format!(
            "the capture holds {} samples, fewer than the {needed} the training block needs",
            capture.len(),
        ),
    ));
    Ok(Vec::new())
}

/// Where the capture's format came from, as the report states it. The capture
/// layer cannot tell `--format` from the profile's format (both reach it as an
/// open option); name the one that was used.
fn format_source(capture: &Capture, opts: &AnalyseOptions) -> InputFormatSource {
    use crate::capture::FormatSource as F;
    match capture.format_source() {
        F::Option if opts.format.is_some() => InputFormatSource::Option,
        F::Option => InputFormatSource::Profile,
        F::Sigmf => InputFormatSource::Sigmf,
        F::WavHeader => InputFormatSource::WavHeader,
        F::Extension => InputFormatSource::Extension,
        F::Memory => InputFormatSource::Memory,
    }
}

/// What every burst of one capture shares while the bursts run.
struct Run<'a> {
    plan: &'a Plan,
    profile: &'a ResolvedProfile,
    sync: &'a Synchroniser,
    capture: &'a Capture,
}

impl Run<'_> {
    /// Search the capture and analyse every burst found, in batches of
    /// [`BURST_BATCH`], keeping the detail of the traced set only.
    fn all_bursts(&self, traced: usize) -> Result<Vec<BurstReport>, Error> {
        let capture = self.capture;
        let plan = self.plan;
        let src = ChunkReader::new(plan.analysis_len(capture), |s, out: &mut [Cf32]| {
            plan.read_analysis(capture, s, out)
        });
        let detections = self.sync.search_source(&src)?;
        let mut selection = TraceSelection::new(traced);
        let mut bursts: Vec<BurstReport> = Vec::with_capacity(detections.len());
        for (b, batch) in detections.chunks(BURST_BATCH).enumerate() {
            // Detail (trace, channel response) for the bursts that may end up in
            // the traced set, judged by what the earlier batches settled.
            let floor = selection.entry_floor();
            let done = batch
                .par_iter()
                .enumerate()
                .map(|(j, det)| {
                    let k = b * BURST_BATCH + j;
                    self.one(&src, k, det, &|evm| selection.may_enter(k, evm, floor))
                })
                .collect::<Result<Vec<_>, Error>>()?;
            self.release(batch);
            // In index order, so `bursts[i].index == i`.
            for mut r in done {
                cap_error_runs(&mut r.metrics);
                let dropped = selection.offer(r.index, r.metrics.evm_rms_percent);
                bursts.push(r);
                // Memory stays bounded: a detail is held only while its burst
                // is in the traced set.
                if let Some(d) = dropped.and_then(|i| bursts.get_mut(i)) {
                    d.trace = None;
                    d.channel.response_db = None;
                }
            }
        }
        let members = selection.members(bursts.len());
        self.fill_missing_details(&src, &detections, &members, &mut bursts)?;
        Ok(bursts)
    }

    /// Refine one detection and analyse the burst.
    fn one<S: SampleSource + ?Sized>(
        &self,
        src: &S,
        k: usize,
        det: &Detection,
        want_detail: &(dyn Fn(f64) -> bool + Sync),
    ) -> Result<BurstReport, Error> {
        let (plan, profile, sync, capture) = (self.plan, self.profile, self.sync, self.capture);
        let mut bs = time_burst(sync, plan, src, det)?;
        // A receiver DC the front-end fit sees pulls the timing: time the burst
        // again on the samples less that DC (#17); the burst then fits and
        // removes the DC itself.
        if plan.burst_cfg.channel.dc_offset {
            if let Some(dc) = burst::probe_dc(&bs, plan, sync, src)? {
                bs = time_burst(sync, plan, &frontend::LessDc::new(src, dc), det)?;
            }
        }
        analyse_burst(k, &bs, plan, profile, sync, src, capture, want_detail)
    }

    /// Burst reads are small and leave their pages mapped; let this batch's
    /// stretch of the capture go in one call (generously padded: releasing too
    /// much only costs a re-read from the cache).
    fn release(&self, batch: &[Detection]) {
        if let (Some(first), Some(last)) = (batch.first(), batch.last()) {
            let plan = self.plan;
            let pad = 2 * (plan.frame_symbols() + 2 * plan.margin) * plan.sps + 4096;
            let (lo, hi) = plan.capture_range(
                first.start_sample.saturating_sub(pad),
                last.start_sample.saturating_add(pad),
                self.capture,
            );
            self.capture.release_samples(lo, hi);
        }
    }

    /// The traced set is known once every burst is in (the bursts that left it
    /// have lost their detail). Analyse again, with the detail on, any member
    /// that was not judged likely when its batch ran (none, by the test on
    /// `may_enter`: this is a safety net). The analysis is deterministic, so the
    /// second run gives the very figures of the first; only the trace and the
    /// channel response are taken from it.
    fn fill_missing_details<S: SampleSource + Sync + ?Sized>(
        &self,
        src: &S,
        detections: &[Detection],
        members: &[usize],
        bursts: &mut [BurstReport],
    ) -> Result<(), Error> {
        let missing: Vec<usize> = members
            .iter()
            .copied()
            .filter(|&k| bursts.get(k).is_some_and(|b| b.trace.is_none()))
            .collect();
        let details = missing
            .par_iter()
            .map(|&k| self.one(src, k, &detections[k], &|_| true))
            .collect::<Result<Vec<_>, Error>>()?;
        for (k, d) in missing.into_iter().zip(details) {
            if let Some(b) = bursts.get_mut(k) {
                debug_assert_eq!(b.metrics.evm_rms_percent, d.metrics.evm_rms_percent);
                b.trace = d.trace;
                b.channel.response_db = d.channel.response_db;
            }
        }
        Ok(())
    }
}

/// Refine a detection and time the burst for the equaliser's tap window, not
/// the correlation peak (#15).
fn time_burst<S: SampleSource + ?Sized>(
    sync: &Synchroniser,
    plan: &Plan,
    src: &S,
    det: &Detection,
) -> Result<BurstSync, Error> {
    let peak = sync.refine(src, det)?;
    Ok(match &plan.window {
        Some(w) => sync.align(src, &peak, &|z| w.score(z).cost, w.tolerance())?,
        None => peak,
    })
}

/// Two values closer than this (relative) are the same frequency or rate.
const SAME_VALUE: f64 = 1e-9;

/// What the capture's metadata sources said against each other (#18): the
/// notes made while opening (extension against sidecar datatype, a sidecar for
/// another file, …), and the profile's centre frequency and sample rate against
/// the ones the file gave (the file's are used; a command-line rate overrides
/// both and is not compared).
fn metadata_warnings(
    capture: &Capture,
    profile: &ResolvedProfile,
    opts: &AnalyseOptions,
    warnings: &mut Vec<Warning>,
) {
    for note in capture.notes() {
        let code = match note {
            crate::capture::CaptureNote::UnknownSigmfCoreKey { .. } => {
                WarningCode::MetadataUnknownKey
            }
            _ => WarningCode::MetadataDisagrees,
        };
        warnings.push(Warning::new(code, note.to_string()));
    }
    let differ = |a: f64, b: f64| (a - b).abs() > SAME_VALUE * a.abs().max(b.abs());
    if let (Some(p), Some(c)) = (profile.capture.center_freq_hz, capture.center_freq_hz()) {
        if differ(p, c) {
            warnings.push(Warning::new(
                WarningCode::MetadataDisagrees,
                format!(
                    "centre frequency: the SigMF sidecar says {c} Hz (used), the profile's capture.center_freq_hz says {p} Hz"
                ),
            ));
        }
    }
    if opts.sample_rate_hz.is_none() {
        if let (Some(p), Some(c)) = (profile.capture.sample_rate_hz, capture.sample_rate_hz()) {
            if differ(p, c) {
                warnings.push(Warning::new(
                    WarningCode::MetadataDisagrees,
                    format!(
                        "sample rate: the file says {c} S/s (used), the profile's capture.sample_rate_hz says {p} S/s"
                    ),
                ));
            }
        }
    }
}
