//! The main job: analyse one capture against a link profile.
//!
//! Takes a capture path, a [`ResolvedProfile`] and [`AnalyseOptions`]; gives a
//! [`Report`] (schema `iqaudit-report/2`). The stages run in data-flow order:
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
//! [`ERROR_RUNS_KEPT`] error runs. The memory held is
//! then a few KiB per burst plus at most `2K` traces, whatever the capture.
//!
//! ## Frame indexing
//!
//! For a burst, symbol index 0 is the first training symbol. A payload before
//! the training occupies indices `−B..0`, the training `0..L`, a payload after it
//! `L..L+A`. Payload symbol numbers in the report (error runs, peak EVM, plots)
//! count the payload symbols in time order: the `B` symbols before the training
//! first, then the `A` after it.

use crate::capture::{Capture, OpenOptions, SampleFormat};
use crate::channel::{ChannelFitConfig, SpanChoice, TapSpan};
use crate::equalise::tracking::{AdaptMode, TrackingConfig};
use crate::equalise::{process_burst, BurstConfig, BurstOutput, BurstView, EqualisedSymbols};
use crate::profile::ResolvedProfile;
use crate::profile::{Delay, EqualiserKind, TapCount, Tracking};
use crate::report::metrics::{
    error_runs, run_length_histogram, ErrorPropagation, ErrorRate, EvmAccumulator,
};
use crate::report::provenance::sha256_file;
use crate::report::schema::{
    BurstMetrics, BurstReport, ChannelReport, EqualiserReport, InputInfo, LimitCheck, Provenance,
    Report, Summary, ToolInfo, Trace, Verdict, VerdictResult, Warning, WarningCode,
    ERROR_RUNS_KEPT, SCHEMA,
};
use crate::signal::{rrc_taps, Constellation};
use crate::sync::{BurstSync, ChunkReader, SampleSource, SyncConfig, Synchroniser};
use crate::{Cf32, Cf64, Error};
use rayon::prelude::*;
use std::path::{Path, PathBuf};

/// Confidence level of every error-rate interval in the report.
pub const CONFIDENCE: f64 = 0.95;
/// Most equalised symbols kept per burst for the constellation plot.
pub const TRACE_POINTS: usize = 2000;
/// Samples either side of a burst's first-symbol instant kept for the sync-metric plot, in symbols.
const SYNC_TRACE_SYMBOLS: usize = 16;
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

/// Which bursts keep their trace: the first `k` and the `k` worst by RMS EVM
/// (ties broken towards the lower index). Offer every burst once, in any order:
/// the worst-`k` set of everything offered is the same whatever the order.
#[derive(Debug)]
struct TraceSelection {
    k: usize,
    worst: std::collections::BTreeSet<Badness>,
}

/// Order of "worse": larger RMS EVM, then the lower index.
#[derive(Debug, Clone, Copy)]
struct Badness {
    evm: f64,
    index: usize,
}

impl Ord for Badness {
    fn cmp(&self, other: &Self) -> std::cmp::Ordering {
        self.evm
            .total_cmp(&other.evm)
            .then_with(|| other.index.cmp(&self.index))
    }
}
impl PartialOrd for Badness {
    fn partial_cmp(&self, other: &Self) -> Option<std::cmp::Ordering> {
        Some(self.cmp(other))
    }
}
impl PartialEq for Badness {
    fn eq(&self, other: &Self) -> bool {
        self.cmp(other) == std::cmp::Ordering::Equal
    }
}
impl Eq for Badness {}

impl TraceSelection {
    fn new(k: usize) -> TraceSelection {
        TraceSelection {
            k,
            worst: std::collections::BTreeSet::new(),
        }
    }

    /// Offer burst `index` with RMS EVM `evm`; returns the index of a burst
    /// (possibly this one) that has just left the traced set for good.
    fn offer(&mut self, index: usize, evm: f64) -> Option<usize> {
        self.worst.insert(Badness { evm, index });
        if self.worst.len() <= self.k {
            return None;
        }
        let out = self.worst.pop_first()?;
        (out.index >= self.k).then_some(out.index)
    }

    /// The RMS EVM a burst offered next must exceed to enter the worst `k`, or
    /// `None` while fewer than `k` bursts are in (any burst enters).
    fn entry_floor(&self) -> Option<f64> {
        if self.worst.len() < self.k {
            return None;
        }
        Some(self.worst.first().map_or(f64::INFINITY, |b| b.evm))
    }

    /// Whether burst `index` with RMS EVM `evm`, offered after the bursts that
    /// gave `floor` ([`entry_floor`](Self::entry_floor)), may be in the final
    /// traced set (a superset test: a later burst can still push it out).
    fn may_enter(&self, index: usize, evm: f64, floor: Option<f64>) -> bool {
        self.k > 0 && (index < self.k || floor.map_or(true, |f| evm.total_cmp(&f).is_ge()))
    }

    /// The traced set once all `n` bursts are offered, in increasing index order:
    /// bursts `0..k` and the `k` worst.
    fn members(&self, n: usize) -> Vec<usize> {
        let mut v: std::collections::BTreeSet<usize> = (0..self.k.min(n)).collect();
        v.extend(self.worst.iter().map(|b| b.index));
        v.into_iter().collect()
    }
}

/// Everything prepared once per capture and shared by all bursts.
struct Plan {
    training: Vec<Cf32>,
    known_before: Option<Vec<Cf32>>,
    known_after: Option<Vec<Cf32>>,
    before: usize,
    after: usize,
    constellation: Constellation,
    burst_cfg: BurstConfig,
    margin: usize,
    sps: usize,
    sample_rate_hz: f64,
    symbol_rate_hz: f64,
    center_freq_hz: Option<f64>,
}

fn usage(message: impl Into<String>) -> Error {
    Error::Usage {
        message: message.into(),
    }
}

/// The capture format the profile asks for, converted to the capture layer's type.
fn profile_format(profile: &ResolvedProfile) -> Result<Option<SampleFormat>, Error> {
    let Some(f) = &profile.capture.format else {
        return Ok(None);
    };
    let name = serde_json::to_value(f)
        .ok()
        .and_then(|v| v.as_str().map(str::to_string))
        .unwrap_or_default();
    name.parse::<SampleFormat>().map(Some).map_err(|_| {
        usage(format!(
            "profile: capture.format '{name}' is not a readable format"
        ))
    })
}

/// Open options for a capture analysed with `profile` and `opts`.
fn open_options(profile: &ResolvedProfile, opts: &AnalyseOptions) -> Result<OpenOptions, Error> {
    Ok(OpenOptions {
        format: match opts.format {
            Some(f) => Some(f),
            None => profile_format(profile)?,
        },
        sample_rate_hz: opts.sample_rate_hz.or(profile.capture.sample_rate_hz),
        swap_iq: profile.capture.swap_iq,
    })
}

/// Open the capture with the precedence of the product contract: `--format` /
/// `--sample-rate` first, then what the file says (SigMF sidecar, WAV header),
/// then the profile's `capture.format` / `capture.sample_rate_hz`, then the file
/// extension. Taking the profile first would let it override the file.
///
/// # Errors
/// The capture cannot be opened.
pub fn open_capture(
    path: &Path,
    profile: &ResolvedProfile,
    opts: &AnalyseOptions,
) -> Result<Capture, Error> {
    use crate::capture::FormatSource;
    let with_profile = open_options(profile, opts)?;
    // First let the file speak: only the command-line overrides.
    let explicit = OpenOptions {
        format: opts.format,
        sample_rate_hz: opts.sample_rate_hz,
        swap_iq: profile.capture.swap_iq,
    };
    if let Ok(c) = Capture::open(path, &explicit) {
        let file_says = opts.format.is_some()
            || matches!(
                c.format_source(),
                FormatSource::Sigmf | FormatSource::WavHeader
            );
        if file_says {
            if c.sample_rate_hz().is_some() || with_profile.sample_rate_hz.is_none() {
                return Ok(c);
            }
            // The file gave the format but no rate: take the profile's rate.
            let rate = OpenOptions {
                sample_rate_hz: with_profile.sample_rate_hz,
                ..explicit
            };
            return Ok(Capture::open(path, &rate)?);
        }
    }
    Ok(Capture::open(path, &with_profile)?)
}

fn burst_config(profile: &ResolvedProfile) -> BurstConfig {
    let mut cfg = BurstConfig::default();
    let fit = &profile.channel_fit;
    let max_total = fit.max_total_taps.unwrap_or(16).max(1);
    let span = match (fit.pre_cursor_taps, fit.post_cursor_taps) {
        (TapCount::Fixed(pre), TapCount::Fixed(post)) => TapSpan::Fixed { pre, post },
        (pre, post) => {
            // A fixed count is tried alone (min = max); "auto" tries 0 up to a cap
            // the training supports.
            let range = |t: TapCount, cap: usize| match t {
                TapCount::Fixed(n) => (n, n),
                TapCount::Auto => (0, cap),
            };
            let (min_pre, max_pre) = range(pre, (max_total / 4).clamp(1, 8));
            let (min_post, max_post) = range(post, (max_total / 2).clamp(1, 16));
            TapSpan::Auto {
                min_pre,
                max_pre,
                min_post,
                max_post,
            }
        }
    };
    cfg.channel = ChannelFitConfig {
        span,
        dc_offset: fit.dc_offset,
        iq_imbalance: fit.iq_imbalance,
        ..ChannelFitConfig::default()
    };
    let eq = &profile.equaliser;
    cfg.ff_taps = eq.feedforward_taps.max(1);
    cfg.fb_taps = eq.feedback_taps;
    cfg.delay = match eq.delay {
        Delay::Auto => None,
        Delay::Fixed(d) => Some(d),
    };
    cfg.carrier.enabled = eq.carrier_refinement;
    cfg.tracking = match eq.tracking {
        Tracking::Off => TrackingConfig::default(),
        Tracking::Lms { mu } => TrackingConfig {
            mode: AdaptMode::Lms,
            lms_step: mu as f32,
            ..TrackingConfig::default()
        },
        Tracking::Rls { lambda } => TrackingConfig {
            mode: AdaptMode::Rls,
            rls_forgetting: lambda as f32,
            ..TrackingConfig::default()
        },
    };
    cfg
}

/// Name of the equaliser result the profile asks to report.
fn chosen_name(profile: &ResolvedProfile) -> &'static str {
    match (profile.equaliser.kind, profile.equaliser.tracking) {
        (EqualiserKind::ZfDfe, _) => "zf-dfe",
        (EqualiserKind::LinearMmse, _) => "linear-mmse",
        (EqualiserKind::MmseDfe, Tracking::Off) => "mmse-dfe",
        (EqualiserKind::MmseDfe, Tracking::Lms { .. }) => "mmse-dfe-lms",
        (EqualiserKind::MmseDfe, Tracking::Rls { .. }) => "mmse-dfe-rls",
    }
}

fn tracking_name(t: Tracking) -> &'static str {
    match t {
        Tracking::Off => "off",
        Tracking::Lms { .. } => "lms",
        Tracking::Rls { .. } => "rls",
    }
}

impl Plan {
    fn new(profile: &ResolvedProfile, capture: &Capture) -> Result<Plan, Error> {
        let sample_rate_hz = capture.sample_rate_hz().ok_or_else(|| {
            usage(format!(
                "{}: sample rate unknown: give capture.sample_rate_hz in the profile, a SigMF sidecar, or --sample-rate",
                capture.path().display()
            ))
        })?;
        let sps = profile.samples_per_symbol;
        let training = profile.training_symbols()?;
        let payload = profile.payload_symbols()?;
        let (known_before, known_after) = match payload {
            Some(p) => (Some(p.before), Some(p.after)),
            None => (None, None),
        };
        let burst_cfg = burst_config(profile);
        let taps_span = match burst_cfg.channel.span {
            TapSpan::Fixed { pre, post } => pre + post + 1,
            TapSpan::Auto {
                max_pre, max_post, ..
            } => max_pre + max_post + 1,
        };
        Ok(Plan {
            training,
            known_before,
            known_after,
            before: profile.payload.before_symbols,
            after: profile.payload.after_symbols,
            constellation: Constellation::new(profile.payload.modulation),
            margin: burst_cfg.ff_taps + burst_cfg.fb_taps + taps_span + 4,
            burst_cfg,
            sps,
            sample_rate_hz,
            symbol_rate_hz: sample_rate_hz / sps as f64,
            center_freq_hz: profile.capture.center_freq_hz.or(capture.center_freq_hz()),
        })
    }

    fn frame_symbols(&self) -> usize {
        self.before + self.training.len() + self.after
    }
}

/// The synchroniser for a plan, with the threshold to use.
fn synchroniser(profile: &ResolvedProfile, plan: &Plan) -> Result<Synchroniser, Error> {
    let pulse = rrc_taps(profile.pulse.rolloff, profile.pulse.span_symbols, plan.sps);
    let cfg = SyncConfig {
        sps: plan.sps,
        sample_rate_hz: plan.sample_rate_hz,
        max_cfo_hz: profile
            .search
            .max_cfo_hz_at(plan.sample_rate_hz, plan.sps)
            .min(0.25 * plan.symbol_rate_hz),
        threshold: profile.search.threshold,
        min_spacing_samples: Some((plan.frame_symbols() * plan.sps).max(1)),
        cfo_segments: 4,
    };
    Ok(Synchroniser::new(&plan.training, &pulse, cfg)?)
}

/// Analyse one capture (see the module documentation).
///
/// # Errors
/// Unreadable capture, unusable profile, or a failure of a stage that is not a
/// per-burst problem. A capture without training is not an error: its report has
/// no bursts and the verdict `no-training`.
pub fn analyse_capture(
    path: &Path,
    profile: &ResolvedProfile,
    opts: &AnalyseOptions,
) -> Result<Report, Error> {
    profile.validate()?;
    let capture = open_capture(path, profile, opts)?;
    let plan = Plan::new(profile, &capture)?;
    let sync = synchroniser(profile, &plan)?;
    // The SHA-256 of the whole file is a second pass over it: run it beside the
    // search and the bursts (same bytes, same digest) instead of after them.
    let hash_path = path.to_path_buf();
    let known = match (&opts.input_sha256, opts.skip_input_hash) {
        (Some(d), _) => Some(d.clone()),
        (None, true) => Some(String::new()),
        (None, false) => None,
    };
    let hasher = std::thread::spawn(move || known.map_or_else(|| sha256_file(&hash_path), Ok));
    let src = ChunkReader::new(capture.len(), |s, out: &mut [Cf32]| {
        capture.read_into(s, out).map(|_| ())
    });
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
    let traced = opts.traced_bursts.unwrap_or(DEFAULT_TRACED_BURSTS);
    if traced > MAX_TRACED_BURSTS {
        return Err(usage(format!(
            "--traced-bursts {traced}: at most {MAX_TRACED_BURSTS} (each traced burst holds ≈ 60 KiB)"
        )));
    }
    let bursts: Vec<BurstReport> = if capture.len() < sync.min_capture_len() {
        warnings.push(Warning::new(
            WarningCode::NoTrainingFound,
            format!(
                "the capture holds {} samples, fewer than the {} the training block needs",
                capture.len(),
                sync.min_capture_len()
            ),
        ));
        Vec::new()
    } else {
        let detections = sync.search_source(&src)?;
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
                    let bs = sync.refine(&src, det)?;
                    let want = |evm: f64| selection.may_enter(k, evm, floor);
                    analyse_burst(k, &bs, &plan, profile, &sync, &src, &capture, &want)
                })
                .collect::<Result<Vec<_>, Error>>()?;
            // Burst reads are small and leave their pages mapped; let this
            // batch's stretch of the capture go in one call (generously
            // padded: releasing too much only costs a re-read from the cache).
            if let (Some(first), Some(last)) = (batch.first(), batch.last()) {
                let pad = 2 * (plan.frame_symbols() + 2 * plan.margin) * plan.sps + 4096;
                capture.release_samples(
                    first.start_sample.saturating_sub(pad),
                    last.start_sample.saturating_add(pad),
                );
            }
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
        // The traced set is known once every burst is in (the bursts that left
        // it have lost their detail above). Analyse again, with the detail on,
        // any member that was not judged likely when its batch ran (none, by the
        // test on `may_enter`: this is a safety net). The analysis
        // is deterministic, so the second run gives the very figures of the first;
        // only the trace and the channel response are taken from it.
        let traced = selection.members(bursts.len());
        let missing: Vec<usize> = traced
            .into_iter()
            .filter(|&k| bursts.get(k).is_some_and(|b| b.trace.is_none()))
            .collect();
        let details = missing
            .par_iter()
            .map(|&k| {
                let bs = sync.refine(&src, &detections[k])?;
                analyse_burst(k, &bs, &plan, profile, &sync, &src, &capture, &|_| true)
            })
            .collect::<Result<Vec<_>, Error>>()?;
        for (k, d) in missing.into_iter().zip(details) {
            if let Some(b) = bursts.get_mut(k) {
                debug_assert_eq!(b.metrics.evm_rms_percent, d.metrics.evm_rms_percent);
                b.trace = d.trace;
                b.channel.response_db = d.channel.response_db;
            }
        }
        bursts
    };
    if bursts.is_empty()
        && !warnings
            .iter()
            .any(|w| w.code == WarningCode::NoTrainingFound)
    {
        warnings.push(Warning::new(
            WarningCode::NoTrainingFound,
            format!(
                "no training block above the threshold {:.3}; check the profile's training and sample rate, or lower search.threshold",
                sync.threshold()
            ),
        ));
    }
    let summary = summarise(&bursts);
    let verdict = judge(profile, &bursts, &summary);
    let profile_value =
        serde_json::to_value(profile).map_err(|e| usage(format!("profile: {e}")))?;
    let profile_sha = crate::report::provenance::profile_sha256(profile)
        .map_err(|e| usage(format!("profile: {e}")))?;
    let size_bytes = capture.file_len_bytes();
    let hashed = hasher
        .join()
        .unwrap_or_else(|_| Err(std::io::Error::other("the hashing thread panicked")));
    let sha256 = hashed.map_err(|source| Error::Io {
        path: path.to_path_buf(),
        source,
    })?;
    // The capture layer cannot tell --format from the profile's format (both
    // reach it as an open option); name the one that was used.
    let mut format = capture.format_description();
    if capture.format_source() == crate::capture::FormatSource::Option {
        let by = if opts.format.is_some() {
            "from --format"
        } else {
            "from the profile"
        };
        let swap = if capture.swap_iq() {
            ", I/Q swapped"
        } else {
            ""
        };
        format = format!("{} ({by}{swap})", capture.container());
    }
    Ok(Report {
        schema: SCHEMA.to_string(),
        tool: ToolInfo {
            name: "iqaudit".into(),
            version: env!("CARGO_PKG_VERSION").into(),
        },
        command: opts.command.clone(),
        input: InputInfo {
            path: path.display().to_string(),
            size_bytes,
            sha256,
            format,
            sample_rate_hz: plan.sample_rate_hz,
            center_freq_hz: plan.center_freq_hz,
            samples: capture.len() as u64,
        },
        profile: profile_value,
        bursts,
        summary,
        verdict,
        warnings,
        provenance: Provenance {
            tool_version: env!("CARGO_PKG_VERSION").into(),
            profile_sha256: profile_sha,
            format_override: opts.format.map(|f| f.name().to_string()),
            sample_rate_override_hz: opts.sample_rate_hz,
            traced_bursts: traced,
            threshold: sync.threshold(),
            recheck: "iqaudit recheck REPORT.json".into(),
        },
    })
}

/// Indices (into the extracted vector) of the payload symbols, in payload order.
fn payload_indices(plan: &Plan, offset: usize) -> impl Iterator<Item = usize> + '_ {
    let before = offset - plan.before..offset;
    let t_end = offset + plan.training.len();
    before.chain(t_end..t_end + plan.after)
}

#[allow(clippy::too_many_arguments)]
fn analyse_burst<S: SampleSource + ?Sized>(
    index: usize,
    bs: &BurstSync,
    plan: &Plan,
    profile: &ResolvedProfile,
    sync: &Synchroniser,
    src: &S,
    capture: &Capture,
    want_detail: &(dyn Fn(f64) -> bool + Sync),
) -> Result<BurstReport, Error> {
    let mut warnings = Vec::new();
    let l = plan.training.len();
    let offset = plan.margin + plan.before;
    let first = -((plan.before + plan.margin) as i64);
    let last = (l + plan.after + plan.margin) as i64;
    let mut y = vec![Cf32::new(0.0, 0.0); (last - first) as usize];
    let span = sync.extract_symbols(src, bs, first..last, &mut y)?;
    // Which payload symbols exist in the capture.
    let avail = (span.available.start - first) as usize..(span.available.end - first) as usize;
    let all_payload: Vec<usize> = payload_indices(plan, offset).collect();
    let present: Vec<(usize, usize)> = all_payload
        .iter()
        .enumerate()
        .filter(|(_, i)| avail.contains(i))
        .map(|(p, &i)| (p, i))
        .collect();
    let truncated = present.len() < all_payload.len();
    if truncated {
        warnings.push(Warning::new(
            WarningCode::BurstTruncated,
            format!(
                "the capture cuts this burst: {} of {} payload symbols present",
                present.len(),
                all_payload.len()
            ),
        ));
    }

    // Known symbols laid out like `y` (zeros in the margins).
    let known: Option<Vec<Cf32>> = match (&plan.known_before, &plan.known_after) {
        (Some(b), Some(a)) => {
            let mut k = vec![Cf32::new(0.0, 0.0); y.len()];
            k[offset - b.len()..offset].copy_from_slice(b);
            k[offset..offset + l].copy_from_slice(&plan.training);
            k[offset + l..offset + l + a.len()].copy_from_slice(a);
            Some(k)
        }
        _ => None,
    };
    let view = BurstView {
        y: &y,
        training: &plan.training,
        offset,
        slicer: &plan.constellation,
        known: known.as_deref(),
    };
    // The carrier-frequency fit uses only the frame's symbols present in the
    // capture, not the padding around it.
    let mut cfg = plan.burst_cfg;
    let frame = offset - plan.before..offset + l + plan.after;
    cfg.carrier.fit_range = Some((
        frame.start.max(avail.start),
        frame.end.min(avail.end).max(frame.start.max(avail.start)),
    ));
    // The reported equaliser: the profile's choice, or the MMSE-DFE if it refused.
    // The ZF-DFE's pass is needed only when it is the choice.
    let wanted = chosen_name(profile);
    cfg.run_zf_dfe = wanted == "zf-dfe";
    let out = process_burst(&view, &cfg)?;

    let (name, filters, eq) = match pick(&out, wanted) {
        Some(r) => (wanted, r.0, r.1),
        None => {
            let why = match out.get(wanted).map(|r| &r.outcome) {
                Some(Err(e)) => e.to_string(),
                _ => "it did not run".to_string(),
            };
            warnings.push(Warning::new(
                WarningCode::MainTapWeak,
                format!("{wanted} refused ({why}); figures are from the mmse-dfe"),
            ));
            let (f, s) = pick(&out, "mmse-dfe").ok_or_else(|| {
                usage(format!(
                    "burst {index}: no equaliser could run on this burst ({why})"
                ))
            })?;
            ("mmse-dfe", f, s)
        }
    };

    // Figures of merit over the payload present.
    let c = &plan.constellation;
    let known_payload: Option<Vec<Cf32>> = known
        .as_ref()
        .map(|k| present.iter().map(|&(_, i)| k[i]).collect());
    let z: Vec<Cf32> = present.iter().map(|&(_, i)| eq.soft[i]).collect();
    let decided: Vec<Cf32> = present
        .iter()
        .map(|&(_, i)| c.points()[eq.labels[i]])
        .collect();
    let reference = known_payload.as_deref().unwrap_or(&decided);
    let mut acc = EvmAccumulator::default();
    acc.add(&z, reference, 0);
    let fig = acc.figures();
    // The trace and the channel response only where the caller may keep them
    // (the value judged is `metrics.evm_rms_percent` below).
    let detail = want_detail(fig.map(|f| f.evm_rms_percent).unwrap_or(0.0));
    let payload_numbers: Vec<usize> = present.iter().map(|&(p, _)| p).collect();

    let (ser, ber, runs, wrong, propagation) = match &known_payload {
        Some(kp) => {
            let true_labels: Vec<usize> = kp.iter().map(|s| c.slice(*s)).collect();
            let labels: Vec<usize> = present.iter().map(|&(_, i)| eq.labels[i]).collect();
            let wrong: Vec<bool> = labels
                .iter()
                .zip(&true_labels)
                .map(|(a, b)| a != b)
                .collect();
            let sym_err = wrong.iter().filter(|w| **w).count() as u64;
            let bit_err: u64 = labels
                .iter()
                .zip(&true_labels)
                .map(|(a, b)| u64::from((a ^ b).count_ones()))
                .sum();
            let n = labels.len() as u64;
            let bits = n * c.bits_per_symbol() as u64;
            let runs: Vec<_> = error_runs(wrong.iter().copied())
                .into_iter()
                .map(|mut r| {
                    r.start = payload_numbers[r.start];
                    r
                })
                .collect();
            let genie_errors = pick(&out, "genie-mmse-dfe").map(|(_, g)| {
                present
                    .iter()
                    .zip(&true_labels)
                    .filter(|(&(_, i), t)| g.labels[i] != **t)
                    .count() as u64
            });
            let dfe_errors = pick(&out, "mmse-dfe").map(|(_, d)| {
                present
                    .iter()
                    .zip(&true_labels)
                    .filter(|(&(_, i), t)| d.labels[i] != **t)
                    .count() as u64
            });
            let prop = match (dfe_errors, genie_errors) {
                (Some(d), Some(g)) => Some(ErrorPropagation::new(d, g)),
                _ => None,
            };
            let wrong_idx: Vec<usize> = wrong
                .iter()
                .enumerate()
                .filter(|(_, w)| **w)
                .map(|(j, _)| payload_numbers[j])
                .collect();
            (
                ErrorRate::new(sym_err, n, CONFIDENCE),
                ErrorRate::new(bit_err, bits, CONFIDENCE),
                runs,
                wrong_idx,
                prop,
            )
        }
        None => (None, None, Vec::new(), Vec::new(), None),
    };
    if let Some(p) = &propagation {
        if let Some(m) = p.multiplication {
            if m > 2.0 && p.dfe_errors >= 10 {
                warnings.push(Warning::new(
                    WarningCode::ErrorPropagation,
                    format!(
                        "decision feedback multiplied the errors {:.1}× ({} against {} with true symbols fed back)",
                        m, p.dfe_errors, p.genie_errors
                    ),
                ));
            }
        }
    }

    // Linear MMSE for comparison, with the same reference.
    let linear_evm = pick(&out, "linear-mmse").and_then(|(_, s)| {
        let zl: Vec<Cf32> = present.iter().map(|&(_, i)| s.soft[i]).collect();
        let refl: Vec<Cf32> = match &known_payload {
            Some(k) => k.clone(),
            None => present
                .iter()
                .map(|&(_, i)| c.points()[s.labels[i]])
                .collect(),
        };
        crate::report::metrics::evm(&zl, &refl).map(|f| f.evm_rms_percent)
    });

    let ch = &out.channel;
    let channel = channel_report(ch, detail);
    let main_power = ch.taps[ch.pre].norm_sqr();
    let strongest = ch.taps.iter().map(|t| t.norm_sqr()).fold(0.0, f64::max);
    if main_power < 0.5 * strongest {
        warnings.push(Warning::new(
            WarningCode::MainTapWeak,
            format!(
                "the main tap is {:.1} dB below the strongest tap; consider more pre-cursor taps",
                10.0 * (strongest / main_power.max(1e-300)).log10()
            ),
        ));
    }
    if bs.metric < 1.25 * sync.threshold() {
        warnings.push(Warning::new(
            WarningCode::WeakCorrelation,
            format!(
                "correlation peak {:.3} is close to the threshold {:.3}",
                bs.metric,
                sync.threshold()
            ),
        ));
    }
    region_warnings(bs, plan, capture, &mut warnings)?;

    let refined_hz = out.carrier.refined_cfo_cycles_per_symbol * plan.symbol_rate_hz;
    let cfo_hz = bs.cfo_hz + refined_hz;
    let n_payload = present.len();
    let metrics = BurstMetrics {
        reference: if known_payload.is_some() {
            "known-payload".into()
        } else {
            "decisions".into()
        },
        symbols: n_payload,
        evm_rms_percent: fig.map(|f| f.evm_rms_percent).unwrap_or(0.0),
        evm_rms_db: fig.and_then(|f| f.evm_rms_db),
        evm_peak_percent: fig.map(|f| f.evm_peak_percent).unwrap_or(0.0),
        evm_peak_symbol: fig
            .map(|f| payload_numbers.get(f.evm_peak_index).copied().unwrap_or(0))
            .unwrap_or(0),
        mer_db: fig.and_then(|f| f.mer_db),
        ser,
        ber,
        run_length_histogram: run_length_histogram(&runs),
        error_runs: runs,
        error_propagation: propagation,
    };
    let trace = if detail {
        Some(trace(
            bs,
            sync,
            src,
            plan,
            &z,
            &payload_numbers,
            reference,
            wrong,
        )?)
    } else {
        None
    };
    Ok(BurstReport {
        index,
        start_sample: bs.start_sample.max(0) as u64,
        timing_frac_samples: bs.timing_frac,
        sync_metric: bs.metric,
        cfo_hz,
        cfo_training_hz: bs.cfo_hz,
        cfo_ppm: plan
            .center_freq_hz
            .filter(|f| *f > 0.0)
            .map(|f| cfo_hz / f * 1e6),
        phase_rad: bs.phase_rad,
        truncated,
        payload_symbols: n_payload,
        channel,
        equaliser: EqualiserReport {
            kind: name.to_string(),
            feedforward_taps: filters.ff.len(),
            feedback_taps: filters.fb.len(),
            decision_delay: filters.delay,
            predicted_snr_db: finite(filters.predicted_snr_unbiased_db),
            achieved_snr_db: metrics.mer_db,
            linear_mmse_evm_percent: linear_evm,
            tracking: tracking_name(profile.equaliser.tracking).to_string(),
        },
        metrics,
        trace,
        warnings,
    })
}

fn finite(x: f64) -> Option<f64> {
    x.is_finite().then_some(x)
}

/// The filters and symbols of the equaliser called `name`, if it ran.
fn pick<'a>(
    out: &'a BurstOutput,
    name: &str,
) -> Option<(&'a crate::equalise::DfeFilters, &'a EqualisedSymbols)> {
    match out.get(name).map(|r| &r.outcome) {
        Some(Ok((f, s))) => Some((f, s)),
        _ => None,
    }
}

/// Channel figures for the report.
/// The frequency response (`response_db`) only with `detail`.
fn channel_report(ch: &crate::channel::ChannelEstimate, detail: bool) -> ChannelReport {
    let main = ch.taps[ch.pre].norm().max(1e-300);
    let powers: Vec<f64> = ch.taps.iter().map(|t| t.norm_sqr()).collect();
    let total: f64 = powers.iter().sum::<f64>().max(1e-300);
    let mean: f64 = powers
        .iter()
        .enumerate()
        .map(|(i, p)| i as f64 * p)
        .sum::<f64>()
        / total;
    let spread = (powers
        .iter()
        .enumerate()
        .map(|(i, p)| (i as f64 - mean).powi(2) * p)
        .sum::<f64>()
        / total)
        .sqrt();
    const GRID: usize = 128;
    let response_db = detail.then(|| {
        (0..=GRID)
            .map(|g| {
                let f = g as f64 / GRID as f64 - 0.5;
                let h: Cf64 = ch
                    .taps
                    .iter()
                    .enumerate()
                    .map(|(i, t)| {
                        let k = i as f64 - ch.pre as f64;
                        t * Cf64::from_polar(1.0, -2.0 * std::f64::consts::PI * f * k)
                    })
                    .sum();
                [f, 20.0 * h.norm().max(1e-12).log10()]
            })
            .collect()
    });
    ChannelReport {
        taps: ch.taps.iter().map(|t| [t.re, t.im]).collect(),
        taps_db: ch
            .taps
            .iter()
            .map(|t| 20.0 * (t.norm().max(1e-300) / main).log10())
            .collect(),
        main_index: ch.pre,
        pre_cursor: ch.pre,
        post_cursor: ch.post,
        significant_taps: ch.significant_taps,
        delay_spread_symbols: spread,
        noise_variance: ch.noise_var,
        snr_db: ch.snr_db,
        dc: ch.dc.map(|d| [d.re, d.im]),
        image_level_db: ch.conj_taps.as_ref().map(|g| {
            let gp: f64 = g.iter().map(|v| v.norm_sqr()).sum();
            10.0 * (gp.max(1e-300) / total).log10()
        }),
        span_choice: match ch.span_choice {
            SpanChoice::Fixed => "fixed".into(),
            SpanChoice::Mdl { .. } => "mdl".into(),
        },
        response_db,
    }
}

/// Clipping, non-finite samples and DC over the burst's own samples.
fn region_warnings(
    bs: &BurstSync,
    plan: &Plan,
    capture: &Capture,
    warnings: &mut Vec<Warning>,
) -> Result<(), Error> {
    let sps = plan.sps as i64;
    let lo = (bs.start_sample - plan.before as i64 * sps).max(0) as usize;
    let hi = ((bs.start_sample + (plan.training.len() + plan.after) as i64 * sps).max(0) as usize)
        .min(capture.len());
    if hi <= lo {
        return Ok(());
    }
    let mut buf = vec![Cf32::new(0.0, 0.0); hi - lo];
    let stats = capture.read_into(lo, &mut buf)?;
    if stats.clipped > 0 {
        warnings.push(Warning::new(
            WarningCode::Clipping,
            format!(
                "{} of the burst's {} samples sit at full scale; reduce the receiver gain",
                stats.clipped,
                buf.len()
            ),
        ));
    }
    if stats.non_finite > 0 {
        warnings.push(Warning::new(
            WarningCode::NonFiniteSamples,
            format!(
                "{} NaN or infinite samples in the burst were replaced by 0",
                stats.non_finite
            ),
        ));
    }
    let n = buf.len() as f64;
    let (mut sum, mut power) = (Cf64::new(0.0, 0.0), 0.0f64);
    for s in &buf {
        sum += Cf64::new(f64::from(s.re), f64::from(s.im));
        power += f64::from(s.norm_sqr());
    }
    let dc = sum / n;
    let mean_power = power / n;
    if mean_power > 0.0 && dc.norm_sqr() / mean_power > 0.01 {
        let advice = if plan.burst_cfg.channel.dc_offset {
            "the channel fit removes it (channel_fit.dc_offset is on)"
        } else {
            "enable channel_fit.dc_offset"
        };
        warnings.push(Warning::new(
            WarningCode::StrongDc,
            format!(
                "DC offset {:.1} dB relative to the burst power; {advice}",
                10.0 * (dc.norm_sqr() / mean_power).log10()
            ),
        ));
    }
    Ok(())
}

#[allow(clippy::too_many_arguments)]
fn trace<S: SampleSource + ?Sized>(
    bs: &BurstSync,
    sync: &Synchroniser,
    src: &S,
    plan: &Plan,
    z: &[Cf32],
    numbers: &[usize],
    reference: &[Cf32],
    wrong: Vec<usize>,
) -> Result<Trace, Error> {
    let n = z.len();
    let stride = n.div_ceil(TRACE_POINTS).max(1);
    let constellation: Vec<[f64; 3]> = (0..n)
        .step_by(stride)
        .map(|j| [numbers[j] as f64, f64::from(z[j].re), f64::from(z[j].im)])
        .collect();
    let shown: std::collections::BTreeSet<usize> =
        constellation.iter().map(|p| p[0] as usize).collect();
    let wrong: Vec<usize> = wrong.into_iter().filter(|w| shown.contains(w)).collect();
    let block = (n / 200).max(16);
    let mut evm_blocks = Vec::new();
    let mut j = 0;
    while j < n {
        let e = (j + block).min(n);
        if let Some(f) = crate::report::metrics::evm(&z[j..e], &reference[j..e]) {
            evm_blocks.push([numbers[j] as f64, f.evm_rms_percent]);
        }
        j = e;
    }
    let half = SYNC_TRACE_SYMBOLS * plan.sps;
    let centre = bs.start_sample.max(0) as usize;
    let from = centre.saturating_sub(half);
    let values = sync.metric(src, from..centre + half + 1)?;
    let sync_metric = values
        .iter()
        .enumerate()
        .map(|(i, v)| [(from + i) as f64 - centre as f64, *v])
        .collect();
    Ok(Trace {
        constellation,
        wrong,
        evm_blocks,
        sync_metric,
    })
}

/// Keep the first [`ERROR_RUNS_KEPT`] error runs (the histogram covers them all).
fn cap_error_runs(m: &mut BurstMetrics) {
    if m.error_runs.len() > ERROR_RUNS_KEPT {
        m.error_runs.truncate(ERROR_RUNS_KEPT);
        m.error_runs.shrink_to_fit();
    }
}

fn summarise(bursts: &[BurstReport]) -> Summary {
    let mut s = Summary {
        bursts: bursts.len(),
        ..Summary::default()
    };
    if bursts.is_empty() {
        return s;
    }
    // Combine per-burst EVM exactly: Σ|e|² = EVM²·Σ|s|², Σ|s|² ≈ n·P (weights by symbols).
    let (mut err, mut refp, mut worst) = (0.0f64, 0.0f64, 0.0f64);
    for b in bursts {
        let n = b.metrics.symbols as f64;
        let e = (b.metrics.evm_rms_percent / 100.0).powi(2);
        err += e * n;
        refp += n;
        worst = worst.max(b.metrics.evm_rms_percent);
    }
    if refp > 0.0 {
        let evm = (err / refp).sqrt();
        s.evm_rms_percent = Some(100.0 * evm);
        s.mer_db = (evm > 0.0).then(|| -20.0 * evm.log10());
    }
    s.evm_worst_percent = Some(worst);
    let total = |f: &dyn Fn(&BurstReport) -> Option<ErrorRate>| -> Option<ErrorRate> {
        let mut any = false;
        let (mut e, mut t) = (0u64, 0u64);
        for b in bursts {
            if let Some(r) = f(b) {
                any = true;
                e += r.errors;
                t += r.trials;
            }
        }
        if any {
            ErrorRate::new(e, t, CONFIDENCE)
        } else {
            None
        }
    };
    s.ser = total(&|b| b.metrics.ser);
    s.ber = total(&|b| b.metrics.ber);
    s.cfo_abs_max_hz = bursts.iter().map(|b| b.cfo_hz.abs()).reduce(f64::max);
    s.longest_error_run = bursts
        .iter()
        .map(|b| b.metrics.longest_error_run())
        .max()
        .unwrap_or(0);
    s
}

fn judge(profile: &ResolvedProfile, bursts: &[BurstReport], summary: &Summary) -> Verdict {
    if bursts.is_empty() {
        return Verdict {
            result: VerdictResult::NoTraining,
            checks: Vec::new(),
        };
    }
    let lim = &profile.limits;
    let mut checks = Vec::new();
    let mut check = |name: &str, threshold: Option<f64>, measured: Option<f64>, upper: bool| {
        if let (Some(t), Some(m)) = (threshold, measured) {
            checks.push(LimitCheck {
                limit: name.to_string(),
                threshold: t,
                measured: m,
                pass: if upper { m <= t } else { m >= t },
            });
        }
    };
    check(
        "limits.evm_rms_percent_max",
        lim.evm_rms_percent_max,
        summary.evm_worst_percent,
        true,
    );
    let worst_mer = bursts
        .iter()
        .map(|b| b.metrics.mer_db.unwrap_or(f64::INFINITY))
        .reduce(f64::min);
    check("limits.mer_db_min", lim.mer_db_min, worst_mer, false);
    check(
        "limits.ser_max",
        lim.ser_max,
        summary.ser.map(|r| r.rate),
        true,
    );
    check(
        "limits.cfo_hz_abs_max",
        lim.cfo_hz_abs_max,
        summary.cfo_abs_max_hz,
        true,
    );
    let result = if checks.iter().all(|c| c.pass) {
        VerdictResult::Pass
    } else {
        VerdictResult::Fail
    };
    Verdict { result, checks }
}

/// Where `recheck` finds the capture a report names: the recorded path as given
/// (relative to the working directory), else relative to the report's folder.
pub fn locate_input(report_path: &Path, recorded: &str) -> PathBuf {
    let p = PathBuf::from(recorded);
    if p.exists() || p.is_absolute() {
        return p;
    }
    match report_path.parent() {
        Some(dir) if dir.join(&p).exists() => dir.join(p),
        _ => p,
    }
}

/// What `recheck` found.
#[derive(Debug, Clone)]
pub struct RecheckResult {
    /// The capture that was re-analysed.
    pub input: PathBuf,
    /// Figures that did not reproduce (empty when every figure did).
    pub differences: Vec<crate::report::compare::Difference>,
    /// Number of numeric figures compared.
    pub figures: usize,
}

fn count_numbers(v: &serde_json::Value) -> usize {
    match v {
        serde_json::Value::Number(_) => 1,
        serde_json::Value::Array(a) => a.iter().map(count_numbers).sum(),
        serde_json::Value::Object(o) => o.values().map(count_numbers).sum(),
        _ => 0,
    }
}

/// A report read back for `recheck`, checked before any file it names is touched.
#[derive(Debug, Clone)]
pub struct RecordedReport {
    /// The report as JSON (the figures are compared value by value).
    pub value: serde_json::Value,
    /// The report as typed data.
    pub report: Report,
    /// The resolved profile it recorded, re-validated
    /// ([`ResolvedProfile::validate`]).
    pub profile: ResolvedProfile,
    /// The `--format` override it recorded.
    pub format: Option<SampleFormat>,
}

/// Parse and check report text for `recheck` without touching any other file:
/// valid JSON, schema `iqaudit-report/2`, every key known, `input.sha256` a
/// 64-digit hex string, the recorded profile usable and within the caps of
/// `crate::limits`, the format override a known format. `report_path` only
/// names the report in errors.
///
/// # Errors
/// [`Error::Report`] naming what is wrong.
pub fn parse_recorded_report(text: &str, report_path: &Path) -> Result<RecordedReport, Error> {
    let bad = |message: String| Error::Report {
        path: report_path.to_path_buf(),
        message,
    };
    let recorded: serde_json::Value =
        serde_json::from_str(text).map_err(|e| bad(format!("not valid JSON ({e})")))?;
    let schema = recorded
        .get("schema")
        .and_then(|s| s.as_str())
        .unwrap_or("");
    if schema != SCHEMA {
        let why = if schema.starts_with("iqaudit-report/") {
            "written by another iqaudit version; analyse the capture again"
        } else {
            "not an iqaudit report?"
        };
        return Err(bad(format!(
            "schema is '{schema}', expected '{SCHEMA}' ({why})"
        )));
    }
    // From a borrow: cloning the tree first would hold it twice.
    let report = <Report as serde::Deserialize>::deserialize(&recorded)
        .map_err(|e| bad(format!("does not match the {SCHEMA} schema: {e}")))?;
    if !crate::report::provenance::is_sha256_hex(&report.input.sha256) {
        return Err(bad(format!(
            "input.sha256 '{}' is not a 64-digit hex SHA-256",
            report.input.sha256
        )));
    }
    let profile: ResolvedProfile = serde_json::from_value(report.profile.clone())
        .map_err(|e| bad(format!("the recorded profile is not usable: {e}")))?;
    profile
        .validate()
        .map_err(|e| bad(format!("the recorded profile is not usable: profile.{e}")))?;
    let format = match &report.provenance.format_override {
        Some(name) => Some(name.parse::<SampleFormat>().map_err(|_| {
            bad(format!(
                "provenance.format_override '{name}' is not a format"
            ))
        })?),
        None => None,
    };
    if report.provenance.traced_bursts > MAX_TRACED_BURSTS {
        return Err(bad(format!(
            "provenance.traced_bursts {} is above the cap {MAX_TRACED_BURSTS}",
            report.provenance.traced_bursts
        )));
    }
    if let Some(r) = report.provenance.sample_rate_override_hz {
        if !(r.is_finite() && r > 0.0) {
            return Err(bad(format!(
                "provenance.sample_rate_override_hz {r} is not a positive rate"
            )));
        }
    }
    Ok(RecordedReport {
        value: recorded,
        report,
        profile,
        format,
    })
}

/// Re-run the analysis recorded in a report and compare every figure exactly.
///
/// # Errors
/// [`Error::Report`] when the report cannot be read or is not an
/// `iqaudit-report/2` document (see [`parse_recorded_report`]); [`Error::Io`]
/// when the capture is missing; [`Error::InputChanged`] when its SHA-256 differs
/// from the recorded one; and any error of [`analyse_capture`].
pub fn recheck(report_path: &Path) -> Result<RecheckResult, Error> {
    let bad = |message: String| Error::Report {
        path: report_path.to_path_buf(),
        message,
    };
    let text = crate::limits::read_small_text(report_path, crate::limits::MAX_REPORT_BYTES)
        .map_err(|source| Error::Io {
            path: report_path.to_path_buf(),
            source,
        })?;
    let RecordedReport {
        value: recorded,
        report,
        profile,
        format,
    } = parse_recorded_report(&text, report_path)?;
    drop(text);
    let input = locate_input(report_path, &report.input.path);
    let found = sha256_file(&input).map_err(|source| Error::Io {
        path: input.clone(),
        source,
    })?;
    if !found.eq_ignore_ascii_case(&report.input.sha256) {
        return Err(Error::InputChanged {
            path: input,
            expected: report.input.sha256.clone(),
            found,
        });
    }
    let opts = AnalyseOptions {
        format,
        sample_rate_hz: report.provenance.sample_rate_override_hz,
        command: report.command.clone(),
        input_sha256: Some(found),
        traced_bursts: Some(report.provenance.traced_bursts),
        skip_input_hash: false,
    };
    let recorded_path = report.input.path.clone();
    drop(report);
    let mut again = analyse_capture(&input, &profile, &opts)?;
    again.input.path = recorded_path;
    // Burst by burst: one JSON tree (the recorded one) in memory, not two.
    let differences = crate::report::compare::report_differences(&recorded, again, &["command"])
        .map_err(|e| bad(e.to_string()))?;
    Ok(RecheckResult {
        input,
        differences,
        figures: count_numbers(&recorded),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::seq::SliceRandom;
    use rand::{Rng, SeedableRng};

    /// The slow twin: sort everything by (EVM descending, index ascending), take
    /// `k`, add the first `k` indices (the documented rule; common practice).
    fn reference(evm: &[f64], k: usize) -> Vec<usize> {
        let mut order: Vec<usize> = (0..evm.len()).collect();
        order.sort_by(|&a, &b| evm[b].total_cmp(&evm[a]).then(a.cmp(&b)));
        let mut set: std::collections::BTreeSet<usize> = order.into_iter().take(k).collect();
        set.extend(0..k.min(evm.len()));
        set.into_iter().collect()
    }

    /// Offer every burst in `order`; the traced set at the end.
    fn streamed(evm: &[f64], k: usize, order: &[usize]) -> Vec<usize> {
        let mut sel = TraceSelection::new(k);
        let mut traced = vec![true; evm.len()];
        for &i in order {
            if let Some(d) = sel.offer(i, evm[i]) {
                traced[d] = false;
            }
        }
        let kept: Vec<usize> = (0..evm.len()).filter(|&i| traced[i]).collect();
        assert_eq!(kept, sel.members(evm.len()));
        kept
    }

    #[test]
    fn the_traced_set_matches_a_full_sort_for_any_arrival_order_with_ties() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(9);
        for n in [0usize, 1, 2, 3, 7, 31, 300] {
            for k in [0usize, 1, 2, 5, 40] {
                // Few distinct values, so ties are common.
                let evm: Vec<f64> = (0..n).map(|_| f64::from(rng.gen_range(0..6u8))).collect();
                let want = reference(&evm, k);
                assert!(want.len() <= 2 * k);
                let mut order: Vec<usize> = (0..n).collect();
                assert_eq!(streamed(&evm, k, &order), want, "n {n} k {k} in order");
                for _ in 0..5 {
                    order.shuffle(&mut rng);
                    assert_eq!(streamed(&evm, k, &order), want, "n {n} k {k} shuffled");
                }
            }
        }
    }

    #[test]
    fn bursts_judged_unlikely_in_their_batch_never_end_up_in_the_traced_set() {
        // The first pass computes details only where `may_enter` says yes, judged
        // against the floor the earlier batches settled; the traced set at the end
        // (checked against the full-sort twin) must lie inside what was judged.
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        for n in [0usize, 1, 5, 64, 65, 300] {
            for k in [0usize, 1, 3, 8] {
                for batch in [1usize, 7, 64] {
                    let evm: Vec<f64> = (0..n).map(|_| f64::from(rng.gen_range(0..9u8))).collect();
                    let mut sel = TraceSelection::new(k);
                    let mut judged = Vec::new();
                    for start in (0..n).step_by(batch) {
                        let floor = sel.entry_floor();
                        let end = (start + batch).min(n);
                        for (i, e) in evm.iter().enumerate().take(end).skip(start) {
                            if sel.may_enter(i, *e, floor) {
                                judged.push(i);
                            }
                        }
                        for (i, e) in evm.iter().enumerate().take(end).skip(start) {
                            sel.offer(i, *e);
                        }
                    }
                    let members = sel.members(n);
                    assert_eq!(members, reference(&evm, k), "n {n} k {k} batch {batch}");
                    for m in &members {
                        assert!(judged.contains(m), "n {n} k {k} batch {batch}: {m}");
                    }
                }
            }
        }
    }

    #[test]
    fn the_traced_set_of_a_worked_example_is_the_first_k_and_the_worst_k() {
        let evm = [9.0, 1.0, 2.0, 8.0, 3.0, 7.0, 0.5];
        let mut sel = TraceSelection::new(2);
        for (i, e) in evm.iter().enumerate() {
            sel.offer(i, *e);
        }
        // Worst two: 0 (9.0) and 3 (8.0); first two: 0, 1. Traced {0, 1, 3}:
        // worked by hand from the rule.
        assert_eq!(sel.members(evm.len()), vec![0, 1, 3]);
    }
}
