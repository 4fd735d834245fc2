//! The report document, schema `iqaudit.report/4`.
//!
//! One JSON object per analysed capture. Every key is listed here with its unit
//! and when it is `null`; docs/report.md repeats this reference for users.
//! Complex numbers are `[re, im]` arrays. Maps are ordered (`BTreeMap`) and
//! floating-point figures come from sums taken in capture order, so the same
//! capture and profile give byte-identical figures whatever the thread count.
//!
//! | key | meaning |
//! |---|---|
//! | `schema` | always `"iqaudit.report/4"` |
//! | `tool` | `{name, version}` of the program that wrote the report |
//! | `command` | the command line, one argument per element |
//! | `input` | path, `size_bytes`, `sha256` (hex), `format` (the layout name), `format_source` (where it came from), `swap_iq`, `sample_rate_hz`, `center_freq_hz` (null when unknown), `samples` |
//! | `profile` | the resolved link profile with every default filled in |
//! | `capture` | [`CaptureViews`]: decimated PSD (dBFS/Hz), spurs and power-over-time envelope of the whole capture; `null` in reports that predate it |
//! | `bursts` | one [`BurstReport`] per burst found, in capture order; only a bounded set of them carries a [`Trace`] |
//! | `summary` | [`Summary`] over all bursts |
//! | `verdict` | [`Verdict`]: `pass`, `fail` or `no-training`, with each limit checked |
//! | `warnings` | capture-level [`Warning`]s (burst-level ones are inside each burst) |
//! | `provenance` | what is needed to re-run: profile SHA-256, the options given, the trace selection, the `recheck` command (the tool version is `tool.version`) |
//!
//! Size: apart from the traced bursts, every burst entry has a size bounded by
//! the profile (taps, at most [`ERROR_RUNS_KEPT`] error runs, a run-length
//! histogram no longer than the longest run). Traces (≈ 60 KiB each in
//! memory) are kept only for the first `provenance.traced_bursts` bursts and the
//! `provenance.traced_bursts` bursts with the largest RMS EVM (ties: the lower
//! index), so the traced count is at most twice that figure whatever the capture.
//!
//! Schema history: `/4` renamed the schema id from `iqaudit-report/N` to
//! `iqaudit.report/N` (one scheme with `iqaudit.info/N`, `iqaudit.synth-truth/N`,
//! `iqaudit.recheck/N`), split `input.format` (`"ci16_le (from SigMF sidecar)"`)
//! into `format`, `format_source` and `swap_iq`, and dropped
//! `provenance.tool_version` (it repeated `tool.version`); issue #19. Within `/4`, `bursts[].correlation_peak_samples` and the warning code
//! `energy-outside-window` were added (issue #15; the key reads as 0 from an earlier `/4`), then
//! `bursts[].sco_ppm`, `summary.sco_mean_ppm` and `summary.sco_abs_max_ppm` (issue #17; null from
//! an earlier `/4`). `/3` added `capture` (the capture views),
//! `bursts[].received_power_dbfs`, `channel.training_symbols`,
//! `equaliser.feedforward`/`feedback` (the coefficients), `trace.eye_matched`
//! and `trace.eye_equalised`, and `verdict.checks[].margin` (issue #20); every
//! new key reads as `null`/empty/0 from a `/2` document. `/2` made `trace` and `channel.response_db` nullable (null
//! outside the traced set), capped `metrics.error_runs` and added
//! `provenance.traced_bursts`. Later in `/3`: the optional `metrics.mlse`
//! object (absent unless the profile turns the MLSE on, so reports without it
//! are unchanged) and the `dfe-below-mlse` warning (issue #21).

use super::metrics::{ErrorPropagation, ErrorRate, ErrorRun, MlseReport, RunAwareRate};
pub use crate::capture::views::CaptureViews;
use schemars::JsonSchema;
use serde::{Deserialize, Serialize};
use std::fmt;

/// The schema identifier written into every report.
pub const SCHEMA: &str = "iqaudit.report/4";

/// Most decision-error runs listed per burst in `metrics.error_runs` (the first
/// ones in payload order); `metrics.run_length_histogram` covers them all.
pub const ERROR_RUNS_KEPT: usize = 256;

/// A complex number as `[re, im]`.
pub type Complex2 = [f64; 2];

/// The whole report for one capture.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Report {
    /// Always [`SCHEMA`].
    pub schema: String,
    /// Name and version of the writing program.
    pub tool: ToolInfo,
    /// The command line that produced the report.
    pub command: Vec<String>,
    /// The capture analysed.
    pub input: InputInfo,
    /// The resolved link profile (every default filled in).
    #[schemars(with = "crate::profile::ResolvedProfile")]
    pub profile: serde_json::Value,
    /// What the capture plots are drawn from: the whole capture's Welch PSD
    /// (decimated, dBFS/Hz), its spurs and its power-over-time envelope.
    #[serde(default)]
    pub capture: Option<CaptureViews>,
    /// One entry per burst, in capture order.
    pub bursts: Vec<BurstReport>,
    /// Figures over all bursts.
    pub summary: Summary,
    /// Pass/fail against the profile's limits.
    pub verdict: Verdict,
    /// Capture-level warnings.
    pub warnings: Vec<Warning>,
    /// What is needed to reproduce the figures.
    pub provenance: Provenance,
}

/// Program name and version.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ToolInfo {
    /// `"iqaudit"`.
    pub name: String,
    /// The crate version.
    pub version: String,
}

impl ToolInfo {
    /// This program: `iqaudit` and the crate version.
    pub fn this() -> ToolInfo {
        ToolInfo {
            name: "iqaudit".into(),
            version: env!("CARGO_PKG_VERSION").into(),
        }
    }
}

/// The analysed capture.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct InputInfo {
    /// The capture's path. `analyse`: as given on its command line (relative
    /// to the working directory it ran in, or absolute). `batch`: relative to
    /// the report's own folder (absolute when the input folder was given
    /// absolute). A name that is not UTF-8 is recorded lossily (U+FFFD).
    pub path: String,
    /// The capture's path relative to the report's own folder, recorded by
    /// `analyse --report FILE` when `path` is relative, so that `recheck` finds
    /// the capture from any working directory (tried before `path`). `null`
    /// when `path` is absolute, when the report was not written to a file, in
    /// batch reports (their `path` is already relative to their folder), and
    /// in reports written before this key existed.
    #[serde(default)]
    pub path_from_report: Option<String>,
    /// File size in bytes.
    pub size_bytes: u64,
    /// SHA-256 of the file contents, lowercase hex.
    pub sha256: String,
    /// Sample layout name, e.g. `ci16_le` or `wav_pcm16` (the names of `--format`).
    pub format: String,
    /// Where the layout came from.
    pub format_source: InputFormatSource,
    /// True when I and Q were swapped after decoding.
    pub swap_iq: bool,
    /// Sample rate in Hz.
    pub sample_rate_hz: f64,
    /// Centre frequency in Hz; `null` when unknown.
    pub center_freq_hz: Option<f64>,
    /// Number of complex samples.
    pub samples: u64,
}

impl InputInfo {
    /// The layout and where it came from, for people: `ci16_le (from SigMF sidecar)`.
    pub fn format_description(&self) -> String {
        let src = match self.format_source {
            InputFormatSource::Option => "from --format",
            InputFormatSource::Profile => "from the profile",
            InputFormatSource::Sigmf => "from SigMF sidecar",
            InputFormatSource::WavHeader => "from WAV header",
            InputFormatSource::Extension => "from file extension",
            InputFormatSource::Memory => "in memory",
        };
        let swap = if self.swap_iq { ", I/Q swapped" } else { "" };
        format!("{} ({src}{swap})", self.format)
    }
}

/// Where the sample layout of the analysed capture came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum InputFormatSource {
    /// The `--format` option.
    Option,
    /// The profile's `capture.format`.
    Profile,
    /// A SigMF `.sigmf-meta` sidecar.
    Sigmf,
    /// The WAV header.
    WavHeader,
    /// The file extension.
    Extension,
    /// Samples given in memory (library use).
    Memory,
}

/// One burst: where it was found, what the channel did, how the payload came out.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct BurstReport {
    /// 0-based burst number in capture order.
    pub index: usize,
    /// Capture sample nearest the first training symbol's instant.
    pub start_sample: u64,
    /// Fractional timing in samples, in [−0.5, 0.5): instant = `start_sample + timing_frac_samples`.
    pub timing_frac_samples: f64,
    /// Instant of the training-correlation peak, capture samples (fractional). The
    /// burst is timed at the instant best for the channel fit's tap window
    /// (`start_sample + timing_frac_samples`), which differs from the peak on an
    /// asymmetric channel.
    #[serde(default)]
    pub correlation_peak_samples: f64,
    /// Peak of the normalised correlation metric, in [0, 1].
    pub sync_metric: f64,
    /// Carrier frequency offset in Hz (training estimate plus decision-directed refinement).
    pub cfo_hz: f64,
    /// CFO estimated from the training alone, Hz.
    pub cfo_training_hz: f64,
    /// CFO in parts per million of the centre frequency; `null` when it is unknown.
    pub cfo_ppm: Option<f64>,
    /// Centre frequency the burst was recorded at, Hz: the SigMF capture
    /// segment's `core:frequency` where the burst starts, else the capture's,
    /// else the profile's; `null` when none says.
    #[serde(default)]
    pub center_freq_hz: Option<f64>,
    /// Carrier phase at the first training symbol, radians.
    pub phase_rad: f64,
    /// Mean received power over the burst's samples (payload and training), dBFS;
    /// `null` for zero power.
    #[serde(default)]
    pub received_power_dbfs: Option<f64>,
    /// Sample-clock offset estimated from the burst, ppm (positive: the
    /// receiver's clock is fast; crate convention); `null` for a burst too short
    /// to estimate it (fewer than 4 blocks of 256 training and payload symbols)
    /// or with `sync.clock_tracking` off.
    #[serde(default)]
    pub sco_ppm: Option<f64>,
    /// True when the capture ends before the burst does.
    pub truncated: bool,
    /// Payload symbols present in the capture (fewer than the profile says when truncated).
    pub payload_symbols: usize,
    /// The fitted channel.
    pub channel: ChannelReport,
    /// The equaliser used and its predicted and achieved output SNR.
    pub equaliser: EqualiserReport,
    /// Figures of merit of the equalised payload.
    pub metrics: BurstMetrics,
    /// Data for the plots (decimated so reports stay small); `null` for bursts
    /// outside the traced set (the first `provenance.traced_bursts` bursts and
    /// as many again with the largest RMS EVM).
    pub trace: Option<Trace>,
    /// Burst-level warnings.
    pub warnings: Vec<Warning>,
}

/// The least-squares channel fit of one burst.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ChannelReport {
    /// Complex taps `h[−P] … h[Q]` as `[re, im]`.
    pub taps: Vec<Complex2>,
    /// Tap magnitudes in dB relative to the main tap.
    pub taps_db: Vec<f64>,
    /// Index of the main tap `h[0]` in `taps` (= number of pre-cursor taps).
    pub main_index: usize,
    /// Number of pre-cursor taps P.
    pub pre_cursor: usize,
    /// Number of post-cursor taps Q.
    pub post_cursor: usize,
    /// Taps whose power stands above the estimation noise.
    pub significant_taps: usize,
    /// RMS delay spread of the tap powers, in symbols.
    pub delay_spread_symbols: f64,
    /// Residual noise variance per symbol (same scale as the taps).
    pub noise_variance: f64,
    /// SNR at the symbol-rate matched-filter output, dB.
    pub snr_db: f64,
    /// Receiver DC removed from the burst, `[I, Q]` in full-scale units at the
    /// capture's input (fitted as a phasor at −CFO after derotation, so it is
    /// found at any CFO); `null` when `channel_fit.dc_offset` is off.
    pub dc: Option<Complex2>,
    /// Power of the removed DC relative to the burst's received power, dB;
    /// `null` when not fitted.
    #[serde(default)]
    pub dc_relative_db: Option<f64>,
    /// Power of the removed image relative to the signal, `20·log10|K2/K1*|` dB
    /// (receiver IQ imbalance); `null` when `channel_fit.iq_imbalance` is off.
    pub image_level_db: Option<f64>,
    /// Receiver gain imbalance removed, dB: `20·log10 g` in the model
    /// `Q' = g·(Q·cos φ − I·sin φ)` shared with `synth` and `info`; `null` when not fitted.
    #[serde(default)]
    pub iq_gain_imbalance_db: Option<f64>,
    /// Receiver phase imbalance removed, degrees: `φ` of the same model; `null` when not fitted.
    #[serde(default)]
    pub iq_phase_imbalance_deg: Option<f64>,
    /// How the tap counts were chosen: `fixed` or `mdl`.
    pub span_choice: String,
    /// Training symbols N the taps were fitted over. Each tap's estimation
    /// error has a variance of about `noise_variance / N` (white training of
    /// unit power), the floor below which a tap cannot be told from zero.
    #[serde(default)]
    pub training_symbols: usize,
    /// Channel frequency response: `[f, |H(f)| dB]` with f in cycles/symbol from
    /// −0.5 to 0.5 (129 points); `null` for bursts without a trace (it follows
    /// from `taps`: `H(f) = Σ_k h[k]·exp(−j2πfk)`, k counted from the main tap).
    pub response_db: Option<Vec<[f64; 2]>>,
}

/// What an ideal receiver could achieve on the burst's fitted channel at its
/// fitted noise level (infinite-length equalisers; formulas and sources in
/// `equalise::theory`: Salz, BSTJ 52(8) 1973 for the MMSE-DFE). dB; `null`
/// where a figure is not finite (a ZF-DFE on a channel with a spectral zero).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct TheoryReport {
    /// Input SNR `Es/σ²` (the fit's SNR less the channel's energy), dB.
    pub input_snr_db: Option<f64>,
    /// Matched-filter bound `SNR·Σ|h|²`, dB: no equaliser does better.
    pub matched_filter_bound_db: Option<f64>,
    /// Salz's infinite-length MMSE-DFE, unbiased, dB (correct decisions fed back).
    pub mmse_dfe_unbiased_db: Option<f64>,
    /// Infinite-length ZF-DFE, dB.
    pub zf_dfe_db: Option<f64>,
    /// Infinite-length linear MMSE equaliser, unbiased, dB.
    pub mmse_le_unbiased_db: Option<f64>,
}

/// Which equaliser ran and what it was expected to achieve.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct EqualiserReport {
    /// `zf-dfe`, `mmse-dfe` or `linear-mmse`.
    pub kind: String,
    /// Feedforward taps.
    pub feedforward_taps: usize,
    /// Feedback taps.
    pub feedback_taps: usize,
    /// Decision delay in symbols.
    pub decision_delay: usize,
    /// Output SNR predicted from the channel estimate, dB (unbiased).
    pub predicted_snr_db: Option<f64>,
    /// Output SNR achieved on the payload (from the EVM), dB.
    pub achieved_snr_db: Option<f64>,
    /// The EVM the linear MMSE equaliser of the same span gives on the same burst, %.
    pub linear_mmse_evm_percent: Option<f64>,
    /// Infinite-length bounds from the fitted channel and noise, beside
    /// `achieved_snr_db` ([`TheoryReport`]).
    #[serde(default)]
    pub theory: Option<TheoryReport>,
    /// Tracking mode (`off`, `lms`, `rls`).
    pub tracking: String,
    /// Feedforward coefficients `ff[0..Nf]` as designed (before tracking), in
    /// apply form: `z_n = Σ_r ff[r]·y[n + Δ − P − r] − Σ_j fb[j−1]·d[n−j]`
    /// (P = `channel.pre_cursor`, Δ = `decision_delay`).
    #[serde(default)]
    pub feedforward: Vec<Complex2>,
    /// Feedback coefficients `fb[0..Nb]` (`fb[j−1]` multiplies decision `d[n−j]`).
    #[serde(default)]
    pub feedback: Vec<Complex2>,
}

/// Figures of merit of one burst's payload.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct BurstMetrics {
    /// `known-payload` (data-aided) or `decisions`.
    pub reference: String,
    /// Payload symbols measured.
    pub symbols: usize,
    /// RMS EVM, % of RMS reference amplitude.
    pub evm_rms_percent: f64,
    /// RMS EVM, dB; `null` if zero.
    pub evm_rms_db: Option<f64>,
    /// Peak EVM, %.
    pub evm_peak_percent: f64,
    /// Payload index of the peak EVM symbol.
    pub evm_peak_symbol: usize,
    /// MER, dB; `null` if the error is zero.
    pub mer_db: Option<f64>,
    /// RMS phase error of the equalised symbols against their reference,
    /// degrees: `√(mean(arg(z·conj(ref))²))` (the carrier's and the receiver's
    /// phase noise as the payload sees it); `null` without symbols.
    #[serde(default)]
    pub phase_error_rms_deg: Option<f64>,
    /// Symbol error rate with 95 % Clopper–Pearson interval; `null` when the payload is unknown.
    pub ser: Option<ErrorRate>,
    /// The SER interval over error events (runs counted once), which holds
    /// when decision feedback makes errors come in runs
    /// ([`RunAwareRate`]); `null` when the payload is unknown.
    #[serde(default)]
    pub ser_run_aware: Option<RunAwareRate>,
    /// Bit error rate with 95 % interval; `null` when the payload is unknown.
    pub ber: Option<ErrorRate>,
    /// Runs of consecutive decision errors (payload symbol index, length), the
    /// first [`ERROR_RUNS_KEPT`] in payload order; empty when unknown.
    /// `run_length_histogram` covers every run.
    pub error_runs: Vec<ErrorRun>,
    /// Entry i counts error runs of length i + 1, over every run of the burst
    /// (its sum is the number of runs, its length the longest run).
    pub run_length_histogram: Vec<u64>,
    /// DFE errors against the genie DFE fed true symbols; `null` when the payload is unknown.
    pub error_propagation: Option<ErrorPropagation>,
    /// The Viterbi MLSE reference detector on the same burst ([`MlseReport`]);
    /// absent unless the profile turns it on (`equaliser.mlse.enabled`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub mlse: Option<MlseReport>,
}

impl BurstMetrics {
    /// Number of decision-error runs in the burst (the sum of the histogram;
    /// `error_runs` may list fewer).
    pub fn error_run_count(&self) -> u64 {
        self.run_length_histogram.iter().sum()
    }

    /// Length of the longest decision-error run, symbols (0 without errors).
    pub fn longest_error_run(&self) -> usize {
        self.run_length_histogram
            .iter()
            .rposition(|&n| n > 0)
            .map_or(0, |i| i + 1)
    }
}

/// Decimated data the plots are drawn from.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Trace {
    /// Up to a fixed number of equalised payload symbols, evenly spread: `[index, re, im]`.
    pub constellation: Vec<[f64; 3]>,
    /// Indices (payload symbols) of wrong decisions among `constellation`'s points.
    pub wrong: Vec<usize>,
    /// RMS EVM % over consecutive blocks: `[first symbol, evm %]`.
    pub evm_blocks: Vec<[f64; 2]>,
    /// Normalised sync metric around the burst: `[sample offset from start_sample, metric]`.
    pub sync_metric: Vec<[f64; 2]>,
    /// Eye of the matched-filter output before equalisation; `null` when not computed.
    #[serde(default)]
    pub eye_matched: Option<EyeTrace>,
    /// Consecutive equalised payload symbols `[re, im]` from the first payload
    /// symbol on (at most a few hundred), for the symbol-spaced eye.
    #[serde(default)]
    pub eye_equalised: Vec<Complex2>,
}

/// Eye-diagram data: matched-filter output around consecutive symbol
/// instants, divided by the main tap `h[0]` (so the ideal values at the
/// instant are the constellation points), CFO corrected.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct EyeTrace {
    /// Points per symbol period in each trace.
    pub points_per_symbol: usize,
    /// One trace per symbol: `2·points_per_symbol + 1` values `[re, im]` from one
    /// symbol before the instant to one after (the instant is the middle point).
    pub traces: Vec<Vec<Complex2>>,
}

/// Figures over all bursts of a capture.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Summary {
    /// Bursts found.
    pub bursts: usize,
    /// RMS EVM over all payload symbols of all bursts, %; `null` without bursts.
    pub evm_rms_percent: Option<f64>,
    /// Worst burst RMS EVM, %.
    pub evm_worst_percent: Option<f64>,
    /// MER over all bursts, dB.
    pub mer_db: Option<f64>,
    /// SER over all bursts with 95 % interval; `null` when the payload is unknown.
    pub ser: Option<ErrorRate>,
    /// The run-aware SER interval over all bursts (error events and errors
    /// summed); `null` when the payload is unknown.
    #[serde(default)]
    pub ser_run_aware: Option<RunAwareRate>,
    /// BER over all bursts with 95 % interval; `null` when the payload is unknown.
    pub ber: Option<ErrorRate>,
    /// Largest |CFO| over bursts, Hz.
    pub cfo_abs_max_hz: Option<f64>,
    /// Mean of the bursts' `sco_ppm` (those that have one), ppm; `null` when none has.
    #[serde(default)]
    pub sco_mean_ppm: Option<f64>,
    /// Largest |`sco_ppm`| over bursts, ppm; `null` when none has one.
    #[serde(default)]
    pub sco_abs_max_ppm: Option<f64>,
    /// Longest decision-error run over bursts, symbols.
    pub longest_error_run: usize,
}

/// Pass/fail against limits.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Verdict {
    /// `pass`, `fail` or `no-training`.
    pub result: VerdictResult,
    /// Every limit checked, with the measured value.
    pub checks: Vec<LimitCheck>,
}

/// Outcome of the limit checks.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum VerdictResult {
    /// Analysed, every limit met.
    Pass,
    /// Analysed, at least one limit failed.
    Fail,
    /// No training block was found.
    NoTraining,
}

/// One limit and the value it was checked against.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct LimitCheck {
    /// The profile key of the limit, e.g. `limits.evm_rms_percent_max`.
    pub limit: String,
    /// The limit value.
    pub threshold: f64,
    /// The measured value (worst case over bursts).
    pub measured: f64,
    /// Whether the measured value is within the limit.
    pub pass: bool,
    /// Distance from the limit in the limit's unit, positive when within it
    /// (`threshold − measured` for a maximum, `measured − threshold` for a minimum).
    #[serde(default)]
    pub margin: f64,
}

/// Reproduction data.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Provenance {
    /// SHA-256 of the canonical JSON of the resolved profile.
    pub profile_sha256: String,
    /// Sample format given on the command line (overrides profile and file), if any.
    pub format_override: Option<String>,
    /// Sample rate given on the command line, Hz, if any.
    pub sample_rate_override_hz: Option<f64>,
    /// Trace selection: the first this-many bursts and the this-many with the
    /// largest RMS EVM carry a `trace` (see [`BurstReport::trace`]).
    pub traced_bursts: usize,
    /// Detection threshold actually used (the profile's, or the one derived from the false-alarm target).
    pub threshold: f64,
    /// Command that re-runs the analysis and compares every figure.
    pub recheck: String,
}

/// A warning with a stable code and a specific hint.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Warning {
    /// Stable code, e.g. `clipping`.
    pub code: WarningCode,
    /// Human-readable detail with the figures involved and what to try.
    pub message: String,
}

/// Stable warning codes.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize, Deserialize, JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
#[non_exhaustive]
pub enum WarningCode {
    /// Integer samples at the format's extreme codes.
    Clipping,
    /// Float samples with I or Q beyond ±1.0 (above full scale; nothing clipped).
    AboveFullScale,
    /// DC offset strong relative to the signal.
    StrongDc,
    /// The capture ends inside a burst.
    BurstTruncated,
    /// The main tap is weak against the other taps or the noise.
    MainTapWeak,
    /// Decision-directed tracking diverged.
    TrackingLost,
    /// No training block found.
    NoTrainingFound,
    /// Trailing bytes that do not make a whole sample were ignored.
    TrailingBytes,
    /// NaN or infinite samples were replaced by zero.
    NonFiniteSamples,
    /// The correlation peak was close to the threshold.
    WeakCorrelation,
    /// Error propagation multiplied the decision errors.
    ErrorPropagation,
    /// The carrier refinement moved the frequency farther from the training
    /// estimate than its Cramér–Rao bound allows; the training estimate was kept.
    CarrierRefinementRejected,
    /// The burst's figures show loss of lock (errors or EVM far beyond what the
    /// fitted SNR predicts, or a CFO outside the search range).
    LossOfLock,
    /// The DFE made clearly more symbol errors than the MLSE on the same channel.
    DfeBelowMlse,
    /// The burst runs across a SigMF capture-segment boundary (the recording's
    /// frequency or gain may change inside it).
    SpansSegments,
    /// Two sources of the capture's metadata disagree (sidecar against profile,
    /// extension or WAV header), or a sidecar was passed over; the message names both.
    MetadataDisagrees,
    /// A SigMF sidecar holds a `core:` key that SigMF 1.x does not define for
    /// the object it sits in (a typo such as `core:sample_rat`); it was
    /// ignored. The message names the sidecar, the object and the key.
    MetadataUnknownKey,
    /// A significant part of the channel's energy lies outside the fitted tap
    /// window at the chosen sampling instant (it acts as unmodelled noise).
    EnergyOutsideWindow,
}

impl fmt::Display for WarningCode {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let s = serde_json::to_value(self)
            .ok()
            .and_then(|v| v.as_str().map(str::to_string))
            .unwrap_or_default();
        f.write_str(&s)
    }
}

impl Warning {
    /// A warning with its message.
    pub fn new(code: WarningCode, message: impl Into<String>) -> Warning {
        Warning {
            code,
            message: message.into(),
        }
    }
}

impl fmt::Display for Warning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "[{}] {}", self.code, self.message)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn warning_codes_serialise_as_stable_kebab_case_strings() {
        assert_eq!(WarningCode::BurstTruncated.to_string(), "burst-truncated");
        assert_eq!(
            serde_json::to_string(&VerdictResult::NoTraining).unwrap(),
            "\"no-training\""
        );
    }
}
