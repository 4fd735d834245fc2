//! Resolution `Profile → ResolvedProfile`: range checks, cross-key rules and
//! every default filled in. Takes in a parsed [`Profile`]; gives out plain
//! `Serialize` data (embedded verbatim in reports) or one [`ProfileError`]
//! naming the key path. Pure: reads no files (a symbols file's length is
//! checked when its symbols are built).
//!
//! Defaults (also in the rustdoc of each schema field): pulse span 12 symbols;
//! training modulation `qpsk` for PRBS; PRBS seed all
//! ones and O.150 inversion; payload position `after`; channel fit 1 pre-cursor
//! and 3 post-cursor taps, no DC or IQ terms; `mmse-dfe` with Nf = 8, Nb = the
//! post-cursor taps (3 when `"auto"`), delay `"auto"`, carrier refinement on,
//! tracking off; search threshold derived from the false-alarm target (null), `max_cfo_hz` = 2 % of the symbol rate
//! (null when the profile has no sample rate: the analysis applies the same
//! fraction once the capture's rate is known); no limits.

use serde::{Deserialize, Serialize};

use super::schema::{
    Delay, EqualiserKind, PayloadPosition, PayloadRule, Profile, PulseShape, Sequence, TapCount,
    Tracking,
};
use super::ProfileError;
use crate::capture::SampleFormat;
use crate::limits::{
    MAX_CURSOR_TAPS, MAX_EQUALISER_TAPS, MAX_FRAME_SAMPLES, MAX_PAYLOAD_SYMBOLS, MAX_PULSE_TAPS,
    MAX_SAMPLES_PER_SYMBOL, MAX_SPAN_SYMBOLS, MAX_TRAINING_SYMBOLS,
};
use crate::signal::BARKER_LENGTHS;
use crate::signal::{Modulation, PrbsPattern};

/// Default RRC span in symbols.
pub const DEFAULT_SPAN_SYMBOLS: usize = 12;
/// Samples per symbol the capture is resampled to when the profile gives a
/// symbol rate and no `samples_per_symbol`.
pub const DEFAULT_RESAMPLED_SPS: usize = 4;
/// Default `max_cfo_hz` as a fraction of the symbol rate.
pub const DEFAULT_MAX_CFO_FRACTION: f64 = 0.02;

/// A profile with every default filled in and every value checked.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ResolvedProfile {
    /// Capture storage (format and rate may still be null: the file decides).
    pub capture: ResolvedCapture,
    /// Samples per symbol (≥ 1).
    pub samples_per_symbol: usize,
    /// Symbol rate in Hz (`sample_rate_hz / samples_per_symbol`, or the
    /// profile's `symbol_rate_hz`), null without a rate.
    pub symbol_rate_hz: Option<f64>,
    /// The symbol rate the profile gives (Hz), when it gives one: the capture
    /// is then resampled to `samples_per_symbol` samples per symbol before the
    /// analysis. Absent: the capture's own rate is `samples_per_symbol` × the
    /// symbol rate.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub resample_to_symbol_rate_hz: Option<f64>,
    /// Pulse.
    pub pulse: ResolvedPulse,
    /// Training block.
    pub training: ResolvedTraining,
    /// Payload.
    pub payload: ResolvedPayload,
    /// Channel fit.
    pub channel_fit: ResolvedChannelFit,
    /// Equaliser.
    pub equaliser: ResolvedEqualiser,
    /// Search.
    pub search: ResolvedSearch,
    /// Limits (null = not checked).
    pub limits: ResolvedLimits,
}

/// Resolved `capture`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ResolvedCapture {
    /// Raw sample format, null when the file or sidecar must say.
    pub format: Option<SampleFormat>,
    /// Sample rate in Hz, null when the file or sidecar must say.
    pub sample_rate_hz: Option<f64>,
    /// Centre frequency in Hz, null when unknown.
    pub center_freq_hz: Option<f64>,
    /// Swap I and Q on reading.
    pub swap_iq: bool,
    /// Zero point of unsigned datatypes (absent: `symmetric`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub unsigned_zero: Option<crate::capture::UnsignedZero>,
}

/// Resolved `pulse`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ResolvedPulse {
    /// Pulse shape.
    pub shape: PulseShape,
    /// Roll-off β in (0, 1].
    pub rolloff: f64,
    /// Span in symbols (≥ 1).
    pub span_symbols: usize,
}

/// Resolved training sequence (tag `"kind"`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum ResolvedSequence {
    /// PRBS from a Fibonacci LFSR `x^n + x^a + 1` (`polynomial = [n, a]`).
    Prbs {
        /// Named pattern, null for a custom polynomial.
        pattern: Option<PrbsPattern>,
        /// `[n, a]`.
        polynomial: [u32; 2],
        /// Initial register state.
        seed: u64,
        /// Output bits inverted.
        inverted: bool,
        /// Length in symbols.
        length: usize,
    },
    /// Barker code, one BPSK symbol per chip.
    Barker {
        /// Code length.
        n: usize,
    },
    /// Zadoff-Chu.
    ZadoffChu {
        /// Root.
        root: u32,
        /// Length.
        length: usize,
        /// Cyclic shift.
        shift: usize,
    },
    /// Explicit symbols `[re, im]`.
    Symbols {
        /// The symbols.
        values: Vec<[f64; 2]>,
    },
    /// Symbols from a file.
    SymbolsFile {
        /// Path (relative to the working directory, or rebased onto the
        /// profile's directory by `load_profile`).
        path: String,
    },
}

/// Resolved `training`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ResolvedTraining {
    /// Constellation the bits map onto (null for Zadoff-Chu and explicit symbols).
    pub modulation: Option<Modulation>,
    /// The sequence.
    pub sequence: ResolvedSequence,
    /// Training length in symbols (null for a symbols file until it is read).
    pub length_symbols: Option<usize>,
}

/// Resolved payload regeneration rule (tag `"kind"`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum ResolvedPayloadRule {
    /// PRBS bits on the payload modulation, restarted from `seed` every burst.
    Prbs {
        /// Named pattern, null for a custom polynomial.
        pattern: Option<PrbsPattern>,
        /// `[n, a]`.
        polynomial: [u32; 2],
        /// Initial register state.
        seed: u64,
        /// Output bits inverted.
        inverted: bool,
    },
    /// Symbols from a file.
    SymbolsFile {
        /// Path.
        path: String,
    },
}

/// Resolved `payload`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ResolvedPayload {
    /// Payload constellation.
    pub modulation: Modulation,
    /// Position relative to the training.
    pub position: PayloadPosition,
    /// Payload symbols before the training (0 for `after`).
    pub before_symbols: usize,
    /// Payload symbols after the training (0 for `before`).
    pub after_symbols: usize,
    /// Regeneration rule, null when the payload is unknown.
    pub known: Option<ResolvedPayloadRule>,
}

/// Resolved `channel_fit`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ResolvedChannelFit {
    /// Pre-cursor taps (or `"auto"`).
    pub pre_cursor_taps: TapCount,
    /// Post-cursor taps (or `"auto"`).
    pub post_cursor_taps: TapCount,
    /// Fit a DC term.
    pub dc_offset: bool,
    /// Fit an IQ-imbalance (conjugate) term.
    pub iq_imbalance: bool,
    /// Most taps in total the training supports (`training / 2`), null for a
    /// symbols file until it is read.
    pub max_total_taps: Option<usize>,
}

/// Resolved `equaliser`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ResolvedEqualiser {
    /// Structure.
    pub kind: EqualiserKind,
    /// Feedforward taps Nf (≥ 1).
    pub feedforward_taps: usize,
    /// Feedback taps Nb (0 for `linear-mmse`).
    pub feedback_taps: usize,
    /// Decision delay.
    pub delay: Delay,
    /// Decision-directed carrier refinement.
    pub carrier_refinement: bool,
    /// Tracking.
    pub tracking: Tracking,
    /// Per-burst sample-clock offset estimate and tracking (absent in profiles
    /// recorded before it existed: on).
    #[serde(default = "default_true")]
    pub clock_tracking: bool,
    /// The Viterbi MLSE reference detector (absent in profiles recorded
    /// before it existed: off).
    #[serde(default)]
    pub mlse: ResolvedMlse,
}

/// Serde default of flags that are on unless a profile says otherwise.
fn default_true() -> bool {
    true
}

/// Largest `equaliser.mlse.max_states` accepted (the survivor memory is
/// `(D + D/2)` bytes per state, ≈ 6 MiB per thread at this limit).
pub const MAX_MLSE_STATES: usize = 65536;

/// Resolved `equaliser.mlse`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ResolvedMlse {
    /// Run the detector.
    pub enabled: bool,
    /// State limit `M^L` (2..=65536).
    pub max_states: usize,
    /// Reduced-state detector above the limit (else skipped).
    pub reduced_state: bool,
}

impl Default for ResolvedMlse {
    fn default() -> Self {
        ResolvedMlse {
            enabled: false,
            max_states: crate::equalise::mlse::DEFAULT_MAX_STATES,
            reduced_state: true,
        }
    }
}

fn check_mlse_states(n: usize) -> Result<usize, ProfileError> {
    if (2..=MAX_MLSE_STATES).contains(&n) {
        Ok(n)
    } else {
        Err(invalid(
            "equaliser.mlse.max_states",
            format!("an integer in 2..={MAX_MLSE_STATES}"),
            n,
        ))
    }
}

/// Resolved `search`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ResolvedSearch {
    /// Normalised correlation threshold in (0, 1]; null: derived by the
    /// synchroniser from its false-alarm target (1e-3 expected false alarms per
    /// 10⁸ noise samples, see `sync`), and recorded in each report's provenance.
    pub threshold: Option<f64>,
    /// Largest expected |CFO| in Hz; null = 2 % of the symbol rate once known.
    pub max_cfo_hz: Option<f64>,
}

/// Resolved `limits` (null = not checked).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ResolvedLimits {
    /// Largest RMS EVM, percent.
    pub evm_rms_percent_max: Option<f64>,
    /// Smallest MER, dB.
    pub mer_db_min: Option<f64>,
    /// Largest SER.
    pub ser_max: Option<f64>,
    /// Judge `ser_max` on the run-aware interval's upper end (absent when false).
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub ser_max_on_upper_bound: bool,
    /// Largest |CFO|, Hz.
    pub cfo_hz_abs_max: Option<f64>,
    /// Spectral mask segments (absent when empty).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub spectral_mask: Vec<super::schema::MaskSegment>,
}

impl ResolvedSearch {
    /// `max_cfo_hz`, or the default fraction of the symbol rate for a capture
    /// at `sample_rate_hz` with `samples_per_symbol`.
    pub fn max_cfo_hz_at(&self, sample_rate_hz: f64, samples_per_symbol: usize) -> f64 {
        self.max_cfo_hz
            .unwrap_or(DEFAULT_MAX_CFO_FRACTION * sample_rate_hz / samples_per_symbol.max(1) as f64)
    }
}

impl ResolvedProfile {
    /// Payload symbols in one burst (before + after the training).
    pub fn payload_symbols_per_burst(&self) -> usize {
        self.payload.before_symbols + self.payload.after_symbols
    }

    /// Check the invariants [`Profile::resolve`] guarantees, for a resolved
    /// profile that did not come from `resolve` (e.g. read back from a report by
    /// `recheck`): every size within the caps of `crate::limits`, every number
    /// finite and in range, lengths consistent with the payload position. A
    /// profile that `resolve` produced always passes.
    pub fn validate(&self) -> Result<(), ProfileError> {
        let c = &self.capture;
        if let Some(r) = c.sample_rate_hz {
            rate("capture.sample_rate_hz", r)?;
        }
        if let Some(f) = c.center_freq_hz {
            if crate::limits::check_frequency_hz(f).is_err() {
                return Err(invalid(
                    "capture.center_freq_hz",
                    "a finite frequency in [-1e12, 1e12] Hz",
                    crate::limits::show_number(f),
                ));
            }
        }
        bounded(
            "samples_per_symbol",
            self.samples_per_symbol,
            MAX_SAMPLES_PER_SYMBOL as usize,
        )?;
        if let Some(r) = self.symbol_rate_hz {
            rate("symbol_rate_hz", r)?;
        }
        if let Some(r) = self.resample_to_symbol_rate_hz {
            rate("resample_to_symbol_rate_hz", r)?;
        }
        let p = &self.pulse;
        if !(p.rolloff.is_finite() && p.rolloff > 0.0 && p.rolloff <= 1.0) {
            return Err(invalid("pulse.rolloff", "a roll-off in (0, 1]", p.rolloff));
        }
        bounded(
            "pulse.span_symbols",
            p.span_symbols,
            MAX_SPAN_SYMBOLS as usize,
        )?;
        let key = "training.sequence";
        let training_len = match &self.training.sequence {
            ResolvedSequence::Prbs { length, .. } | ResolvedSequence::ZadoffChu { length, .. } => {
                Some(bounded(
                    &format!("{key}.length"),
                    *length,
                    MAX_TRAINING_SYMBOLS,
                )?)
            }
            ResolvedSequence::Barker { n } => {
                if !BARKER_LENGTHS.contains(n) {
                    return Err(invalid(
                        &format!("{key}.n"),
                        "one of 2, 3, 4, 5, 7, 11, 13",
                        n,
                    ));
                }
                Some(*n)
            }
            ResolvedSequence::Symbols { values } => {
                bounded(&format!("{key}.values"), values.len(), MAX_TRAINING_SYMBOLS)?;
                if let Some(i) = values
                    .iter()
                    .position(|v| !v[0].is_finite() || !v[1].is_finite())
                {
                    return Err(invalid(
                        &format!("{key}.values[{i}]"),
                        "finite numbers",
                        format!("[{}, {}]", values[i][0], values[i][1]),
                    ));
                }
                Some(values.len())
            }
            ResolvedSequence::SymbolsFile { .. } => None,
        };
        if self.training.length_symbols != training_len {
            return Err(invalid(
                "training.length_symbols",
                format!("{training_len:?} (the sequence's length)"),
                format!("{:?}", self.training.length_symbols),
            ));
        }
        let pay = &self.payload;
        let (b, a) = (pay.before_symbols, pay.after_symbols);
        let shape_ok = match pay.position {
            PayloadPosition::After => b == 0 && a >= 1,
            PayloadPosition::Before => a == 0 && b >= 1,
            PayloadPosition::Both => a >= 1 && b >= 1,
        };
        if !shape_ok || b.saturating_add(a) > MAX_PAYLOAD_SYMBOLS {
            return Err(invalid(
                "payload.after_symbols",
                format!(
                    "lengths that match the position and total at most {MAX_PAYLOAD_SYMBOLS} symbols"
                ),
                format!("before {b}, after {a}"),
            ));
        }
        let fit = &self.channel_fit;
        for (k, t) in [
            ("channel_fit.pre_cursor_taps", fit.pre_cursor_taps),
            ("channel_fit.post_cursor_taps", fit.post_cursor_taps),
        ] {
            if let TapCount::Fixed(n) = t {
                if n > MAX_CURSOR_TAPS {
                    return Err(invalid(
                        k,
                        format!("\"auto\" or an integer in 0..={MAX_CURSOR_TAPS}"),
                        n,
                    ));
                }
            }
        }
        if let Some(n) = training_len {
            check_training_fits(fit, n)?;
        }
        let e = &self.equaliser;
        bounded(
            "equaliser.feedforward_taps",
            e.feedforward_taps,
            MAX_EQUALISER_TAPS,
        )?;
        if e.feedback_taps > MAX_EQUALISER_TAPS {
            return Err(invalid(
                "equaliser.feedback_taps",
                format!("an integer in 0..={MAX_EQUALISER_TAPS}"),
                e.feedback_taps,
            ));
        }
        if let Delay::Fixed(d) = e.delay {
            if d >= e.feedforward_taps {
                return Err(invalid(
                    "equaliser.delay",
                    "a delay below feedforward_taps",
                    d,
                ));
            }
        }
        check_mlse_states(e.mlse.max_states)?;
        match e.tracking {
            Tracking::Off => {}
            Tracking::Lms { mu } => {
                positive("equaliser.tracking.mu", mu)?;
            }
            Tracking::Rls { lambda } => {
                if !(lambda.is_finite() && lambda > 0.0 && lambda <= 1.0) {
                    return Err(invalid(
                        "equaliser.tracking.lambda",
                        "a forgetting factor in (0, 1]",
                        lambda,
                    ));
                }
            }
        }
        if let Some(th) = self.search.threshold {
            if !(th.is_finite() && th > 0.0 && th <= 1.0) {
                return Err(invalid("search.threshold", "a number in (0, 1]", th));
            }
        }
        if let Some(v) = self.search.max_cfo_hz {
            non_negative("search.max_cfo_hz", v)?;
        }
        let l = &self.limits;
        for (k, v) in [
            ("limits.evm_rms_percent_max", l.evm_rms_percent_max),
            ("limits.cfo_hz_abs_max", l.cfo_hz_abs_max),
        ] {
            if let Some(v) = v {
                non_negative(k, v)?;
            }
        }
        if let Some(v) = l.mer_db_min {
            if !v.is_finite() {
                return Err(invalid("limits.mer_db_min", "a finite number of dB", v));
            }
        }
        if let Some(v) = l.ser_max {
            if !(v.is_finite() && (0.0..=1.0).contains(&v)) {
                return Err(invalid("limits.ser_max", "a rate in [0, 1]", v));
            }
        }
        self.check_products()
    }

    /// The caps on products of settings (issue 16): each setting within its own
    /// cap can still multiply into one huge buffer, so the frame in samples
    /// (`(before + training + after) × samples_per_symbol`) is capped at
    /// [`MAX_FRAME_SAMPLES`] and the pulse filter (`span_symbols ×
    /// samples_per_symbol + 1` taps) at [`MAX_PULSE_TAPS`]. A symbols-file
    /// training is checked again once read (`training_symbols`).
    pub fn check_products(&self) -> Result<(), ProfileError> {
        let sps = self.samples_per_symbol;
        let training = self.training.length_symbols.unwrap_or(0);
        let frame = self
            .payload
            .before_symbols
            .saturating_add(self.payload.after_symbols)
            .saturating_add(training)
            .saturating_mul(sps);
        if frame > MAX_FRAME_SAMPLES {
            return Err(invalid(
                "samples_per_symbol",
                format!(
                    "a frame of at most {MAX_FRAME_SAMPLES} samples ((payload + training \
                     symbols) × samples_per_symbol; a symbols-file training is added when \
                     it is read)"
                ),
                format!("{frame} samples ({sps} per symbol)"),
            ));
        }
        let taps = self
            .pulse
            .span_symbols
            .saturating_mul(sps)
            .saturating_add(1);
        if taps > MAX_PULSE_TAPS {
            return Err(invalid(
                "pulse.span_symbols",
                format!("a pulse of at most {MAX_PULSE_TAPS} taps (span_symbols × samples_per_symbol + 1)"),
                format!("{taps} taps"),
            ));
        }
        Ok(())
    }
}

fn invalid(key: &str, expected: impl Into<String>, found: impl std::fmt::Display) -> ProfileError {
    ProfileError::InvalidValue {
        key: key.to_string(),
        expected: expected.into(),
        found: found.to_string(),
    }
}

/// A sample or symbol rate: finite, in `crate::limits::MIN_RATE_HZ ..=
/// MAX_RATE_HZ`.
fn rate(key: &str, v: f64) -> Result<f64, ProfileError> {
    crate::limits::check_rate_hz(v)
        .map_err(|expected| invalid(key, expected, crate::limits::show_number(v)))
}

/// An integer in `1..=max` (the caps of `crate::limits`, so that no size read
/// from a profile can ask for an unbounded allocation).
fn bounded(key: &str, v: usize, max: usize) -> Result<usize, ProfileError> {
    if (1..=max).contains(&v) {
        Ok(v)
    } else {
        Err(invalid(key, format!("an integer in 1..={max}"), v))
    }
}

/// A finite number strictly greater than zero.
fn positive(key: &str, v: f64) -> Result<f64, ProfileError> {
    if v.is_finite() && v > 0.0 {
        Ok(v)
    } else {
        Err(invalid(key, "a finite number > 0", v))
    }
}

/// A finite number ≥ 0.
fn non_negative(key: &str, v: f64) -> Result<f64, ProfileError> {
    if v.is_finite() && v >= 0.0 {
        Ok(v)
    } else {
        Err(invalid(key, "a finite number >= 0", v))
    }
}

/// `(n, a, inverted)` of a named pattern: ITU-T O.150 taps and inversion
/// (from `signal::PrbsPattern`, REFERENCE-VALUES §3).
fn pattern_params(p: PrbsPattern) -> (u32, u32, bool) {
    let [n, a] = p.taps();
    (n, a, p.inverted())
}

/// Checks and fills a PRBS description; `key` is the object's key path.
fn resolve_prbs(
    key: &str,
    pattern: Option<PrbsPattern>,
    polynomial: Option<[u32; 2]>,
    seed: Option<u64>,
    inverted: Option<bool>,
) -> Result<(Option<PrbsPattern>, [u32; 2], u64, bool), ProfileError> {
    let (n, a, inv_default) = match (pattern, polynomial) {
        (Some(_), Some(_)) => {
            return Err(ProfileError::Conflict {
                key: format!("{key}.polynomial"),
                problem: "give either `pattern` or `polynomial`, not both".into(),
            })
        }
        (None, None) => {
            return Err(ProfileError::Missing {
                key: format!("{key}.pattern"),
                hint: "name a pattern (prbs7, prbs9, prbs11, prbs15, prbs23, prbs31) or give \
                       `polynomial: [n, a]` for x^n + x^a + 1"
                    .into(),
            })
        }
        (Some(p), None) => pattern_params(p),
        (None, Some([n, a])) => {
            if !(2..=63).contains(&n) || a == 0 || a >= n {
                return Err(invalid(
                    &format!("{key}.polynomial"),
                    "[n, a] with 2 <= n <= 63 and 0 < a < n",
                    format!("[{n}, {a}]"),
                ));
            }
            (n, a, false)
        }
    };
    let all_ones = (1u64 << n) - 1;
    let seed = seed.unwrap_or(all_ones);
    if seed == 0 || seed > all_ones {
        return Err(invalid(
            &format!("{key}.seed"),
            format!("a non-zero register state below 2^{n} (1..={all_ones})"),
            seed,
        ));
    }
    Ok((pattern, [n, a], seed, inverted.unwrap_or(inv_default)))
}

fn gcd(mut a: u64, mut b: u64) -> u64 {
    while b != 0 {
        (a, b) = (b, a % b);
    }
    a
}

impl Profile {
    /// Check every value and fill in every default. Reads no files.
    pub fn resolve(&self) -> Result<ResolvedProfile, ProfileError> {
        // capture
        let c = &self.capture;
        if let Some(r) = c.sample_rate_hz {
            rate("capture.sample_rate_hz", r)?;
        }
        if let Some(f) = c.center_freq_hz {
            if crate::limits::check_frequency_hz(f).is_err() {
                return Err(invalid(
                    "capture.center_freq_hz",
                    "a finite frequency in [-1e12, 1e12] Hz",
                    crate::limits::show_number(f),
                ));
            }
        }
        let capture = ResolvedCapture {
            format: c.format,
            sample_rate_hz: c.sample_rate_hz,
            center_freq_hz: c.center_freq_hz,
            swap_iq: c.swap_iq,
            unsigned_zero: c.unsigned_zero,
        };
        if let Some(r) = self.symbol_rate_hz {
            rate("symbol_rate_hz", r)?;
        }
        let sps = match (self.samples_per_symbol, self.symbol_rate_hz) {
            (Some(s), _) => s as usize,
            (None, Some(_)) => DEFAULT_RESAMPLED_SPS,
            (None, None) => {
                return Err(invalid(
                    "samples_per_symbol",
                    "an integer oversampling factor (or give symbol_rate_hz)",
                    "nothing",
                ))
            }
        };
        bounded("samples_per_symbol", sps, MAX_SAMPLES_PER_SYMBOL as usize)?;
        let symbol_rate_hz = self
            .symbol_rate_hz
            .or(c.sample_rate_hz.map(|r| r / sps as f64));

        // pulse
        let p = &self.pulse;
        if !(p.rolloff.is_finite() && p.rolloff > 0.0 && p.rolloff <= 1.0) {
            return Err(invalid("pulse.rolloff", "a roll-off in (0, 1]", p.rolloff));
        }
        let span = p.span_symbols.map_or(DEFAULT_SPAN_SYMBOLS, |s| s as usize);
        bounded("pulse.span_symbols", span, MAX_SPAN_SYMBOLS as usize)?;
        let pulse = ResolvedPulse {
            shape: p.shape,
            rolloff: p.rolloff,
            span_symbols: span,
        };

        let training = self.resolve_training()?;
        let payload = self.resolve_payload()?;
        let channel_fit = self.resolve_channel_fit(training.length_symbols)?;
        let equaliser = self.resolve_equaliser(&channel_fit)?;

        // search
        let s = &self.search;
        let threshold = s.threshold;
        if let Some(t) = threshold {
            if !(t.is_finite() && t > 0.0 && t <= 1.0) {
                return Err(invalid("search.threshold", "a number in (0, 1]", t));
            }
        }
        let max_cfo_hz = match s.max_cfo_hz {
            Some(v) => {
                non_negative("search.max_cfo_hz", v)?;
                if let Some(r) = c.sample_rate_hz {
                    if v >= r / 2.0 {
                        return Err(invalid(
                            "search.max_cfo_hz",
                            format!("less than half the sample rate ({} Hz)", r / 2.0),
                            v,
                        ));
                    }
                }
                Some(v)
            }
            None => symbol_rate_hz.map(|rs| DEFAULT_MAX_CFO_FRACTION * rs),
        };
        let search = ResolvedSearch {
            threshold,
            max_cfo_hz,
        };

        // limits
        let l = &self.limits;
        if let Some(v) = l.evm_rms_percent_max {
            non_negative("limits.evm_rms_percent_max", v)?;
        }
        if let Some(v) = l.mer_db_min {
            if !v.is_finite() {
                return Err(invalid("limits.mer_db_min", "a finite number of dB", v));
            }
        }
        if let Some(v) = l.ser_max {
            if !(v.is_finite() && (0.0..=1.0).contains(&v)) {
                return Err(invalid("limits.ser_max", "a rate in [0, 1]", v));
            }
            if payload.known.is_none() {
                return Err(ProfileError::Conflict {
                    key: "limits.ser_max".into(),
                    problem: "a SER limit needs a known payload; add payload.known or remove \
                              the limit"
                        .into(),
                });
            }
        }
        if let Some(v) = l.cfo_hz_abs_max {
            non_negative("limits.cfo_hz_abs_max", v)?;
        }
        for (i, m) in l.spectral_mask.iter().enumerate() {
            let key = |k: &str| format!("limits.spectral_mask[{i}].{k}");
            non_negative(&key("from_offset_hz"), m.from_offset_hz)?;
            if !(m.to_offset_hz.is_finite() && m.to_offset_hz > m.from_offset_hz) {
                return Err(invalid(
                    &key("to_offset_hz"),
                    "a finite number of Hz above from_offset_hz",
                    m.to_offset_hz,
                ));
            }
            if !(m.max_db_rel_peak.is_finite() && m.max_db_rel_peak <= 0.0) {
                return Err(invalid(
                    &key("max_db_rel_peak"),
                    "a finite number of dB <= 0 (relative to the PSD peak)",
                    m.max_db_rel_peak,
                ));
            }
        }
        let limits = ResolvedLimits {
            evm_rms_percent_max: l.evm_rms_percent_max,
            mer_db_min: l.mer_db_min,
            ser_max: l.ser_max,
            ser_max_on_upper_bound: l.ser_max_on_upper_bound.unwrap_or(false),
            cfo_hz_abs_max: l.cfo_hz_abs_max,
            spectral_mask: l.spectral_mask.clone(),
        };

        let resolved = ResolvedProfile {
            capture,
            samples_per_symbol: sps,
            symbol_rate_hz,
            resample_to_symbol_rate_hz: self.symbol_rate_hz,
            pulse,
            training,
            payload,
            channel_fit,
            equaliser,
            search,
            limits,
        };
        resolved.check_products()?;
        Ok(resolved)
    }

    fn resolve_training(&self) -> Result<ResolvedTraining, ProfileError> {
        let t = &self.training;
        let key = "training.sequence";
        let no_modulation = |kind: &str| -> Result<(), ProfileError> {
            if t.modulation.is_some() {
                Err(ProfileError::Conflict {
                    key: "training.modulation".into(),
                    problem: format!(
                        "a {kind} sequence defines its symbols directly; remove the modulation"
                    ),
                })
            } else {
                Ok(())
            }
        };
        let (modulation, sequence, length) = match &t.sequence {
            Sequence::Prbs {
                pattern,
                polynomial,
                seed,
                inverted,
                length,
            } => {
                let (pattern, polynomial, seed, inverted) =
                    resolve_prbs(key, *pattern, *polynomial, *seed, *inverted)?;
                bounded(&format!("{key}.length"), *length, MAX_TRAINING_SYMBOLS)?;
                (
                    Some(t.modulation.unwrap_or(Modulation::Qpsk)),
                    ResolvedSequence::Prbs {
                        pattern,
                        polynomial,
                        seed,
                        inverted,
                        length: *length,
                    },
                    Some(*length),
                )
            }
            Sequence::Barker { n } => {
                if !BARKER_LENGTHS.contains(n) {
                    return Err(invalid(
                        &format!("{key}.n"),
                        "one of 2, 3, 4, 5, 7, 11, 13",
                        n,
                    ));
                }
                no_modulation("barker")?;
                (None, ResolvedSequence::Barker { n: *n }, Some(*n))
            }
            Sequence::ZadoffChu {
                root,
                length,
                shift,
            } => {
                no_modulation("zadoff_chu")?;
                bounded(&format!("{key}.length"), *length, MAX_TRAINING_SYMBOLS)?;
                if *root == 0 || *root as usize >= *length || gcd(*root as u64, *length as u64) != 1
                {
                    return Err(invalid(
                        &format!("{key}.root"),
                        format!("a root in 1..{length} coprime with the length {length}"),
                        root,
                    ));
                }
                if *shift >= *length {
                    return Err(invalid(
                        &format!("{key}.shift"),
                        format!("a cyclic shift below the length {length}"),
                        shift,
                    ));
                }
                (
                    None,
                    ResolvedSequence::ZadoffChu {
                        root: *root,
                        length: *length,
                        shift: *shift,
                    },
                    Some(*length),
                )
            }
            Sequence::Symbols { values } => {
                no_modulation("symbols")?;
                if values.is_empty() {
                    return Err(invalid(
                        &format!("{key}.values"),
                        "at least one [re, im] pair",
                        "an empty list",
                    ));
                }
                if values.len() > MAX_TRAINING_SYMBOLS {
                    return Err(invalid(
                        &format!("{key}.values"),
                        format!("at most {MAX_TRAINING_SYMBOLS} pairs"),
                        values.len(),
                    ));
                }
                if let Some(i) = values
                    .iter()
                    .position(|v| !v[0].is_finite() || !v[1].is_finite())
                {
                    return Err(invalid(
                        &format!("{key}.values[{i}]"),
                        "finite numbers",
                        format!("[{}, {}]", values[i][0], values[i][1]),
                    ));
                }
                (
                    None,
                    ResolvedSequence::Symbols {
                        values: values.clone(),
                    },
                    Some(values.len()),
                )
            }
            Sequence::SymbolsFile { path } => {
                no_modulation("symbols_file")?;
                if path.is_empty() {
                    return Err(invalid(&format!("{key}.path"), "a file path", "\"\""));
                }
                (
                    None,
                    ResolvedSequence::SymbolsFile { path: path.clone() },
                    None,
                )
            }
        };
        Ok(ResolvedTraining {
            modulation,
            sequence,
            length_symbols: length,
        })
    }

    fn resolve_payload(&self) -> Result<ResolvedPayload, ProfileError> {
        let p = &self.payload;
        let position = p.position.unwrap_or(PayloadPosition::After);
        let positive_len = |key: &str, v: Option<usize>, hint: &str| match v {
            None => Err(ProfileError::Missing {
                key: key.to_string(),
                hint: hint.to_string(),
            }),
            Some(n) => bounded(key, n, MAX_PAYLOAD_SYMBOLS),
        };
        let (before, after) = match position {
            PayloadPosition::After | PayloadPosition::Before => {
                for k in ["length_before_symbols", "length_after_symbols"] {
                    let given = if k == "length_before_symbols" {
                        p.length_before_symbols.is_some()
                    } else {
                        p.length_after_symbols.is_some()
                    };
                    if given {
                        return Err(ProfileError::Conflict {
                            key: format!("payload.{k}"),
                            problem: "only for position \"both\"; use payload.length_symbols"
                                .into(),
                        });
                    }
                }
                let n = positive_len(
                    "payload.length_symbols",
                    p.length_symbols,
                    "give the payload length in symbols",
                )?;
                if position == PayloadPosition::After {
                    (0, n)
                } else {
                    (n, 0)
                }
            }
            PayloadPosition::Both => {
                if p.length_symbols.is_some() {
                    return Err(ProfileError::Conflict {
                        key: "payload.length_symbols".into(),
                        problem: "with position \"both\" give payload.length_before_symbols \
                                  and payload.length_after_symbols instead"
                            .into(),
                    });
                }
                let hint = "position \"both\" needs the lengths on each side of the training";
                (
                    positive_len(
                        "payload.length_before_symbols",
                        p.length_before_symbols,
                        hint,
                    )?,
                    positive_len("payload.length_after_symbols", p.length_after_symbols, hint)?,
                )
            }
        };
        if before + after > MAX_PAYLOAD_SYMBOLS {
            return Err(invalid(
                "payload.length_after_symbols",
                format!("at most {MAX_PAYLOAD_SYMBOLS} payload symbols per burst (before + after)"),
                before + after,
            ));
        }
        let known = match &p.known {
            None => None,
            Some(PayloadRule::Prbs {
                pattern,
                polynomial,
                seed,
                inverted,
            }) => {
                let (pattern, polynomial, seed, inverted) =
                    resolve_prbs("payload.known", *pattern, *polynomial, *seed, *inverted)?;
                Some(ResolvedPayloadRule::Prbs {
                    pattern,
                    polynomial,
                    seed,
                    inverted,
                })
            }
            Some(PayloadRule::SymbolsFile { path }) => {
                if path.is_empty() {
                    return Err(invalid("payload.known.path", "a file path", "\"\""));
                }
                Some(ResolvedPayloadRule::SymbolsFile { path: path.clone() })
            }
        };
        Ok(ResolvedPayload {
            modulation: p.modulation,
            position,
            before_symbols: before,
            after_symbols: after,
            known,
        })
    }

    fn resolve_channel_fit(
        &self,
        training_len: Option<usize>,
    ) -> Result<ResolvedChannelFit, ProfileError> {
        let c = &self.channel_fit;
        let pre = c.pre_cursor_taps.unwrap_or(TapCount::Fixed(1));
        let post = c.post_cursor_taps.unwrap_or(TapCount::Fixed(3));
        for (key, t) in [
            ("channel_fit.pre_cursor_taps", pre),
            ("channel_fit.post_cursor_taps", post),
        ] {
            if let TapCount::Fixed(n) = t {
                if n > MAX_CURSOR_TAPS {
                    return Err(invalid(
                        key,
                        format!("\"auto\" or an integer in 0..={MAX_CURSOR_TAPS}"),
                        n,
                    ));
                }
            }
        }
        let fit = ResolvedChannelFit {
            pre_cursor_taps: pre,
            post_cursor_taps: post,
            dc_offset: c.dc_offset.unwrap_or(false),
            iq_imbalance: c.iq_imbalance.unwrap_or(false),
            max_total_taps: training_len.map(|n| n / 2),
        };
        if let Some(n) = training_len {
            check_training_fits(&fit, n)?;
        }
        Ok(fit)
    }

    fn resolve_equaliser(
        &self,
        fit: &ResolvedChannelFit,
    ) -> Result<ResolvedEqualiser, ProfileError> {
        let e = &self.equaliser;
        let kind = e.kind.unwrap_or_default();
        let nf = e.feedforward_taps.unwrap_or(8);
        bounded("equaliser.feedforward_taps", nf, MAX_EQUALISER_TAPS)?;
        let nb_default = match (kind, fit.post_cursor_taps) {
            (EqualiserKind::LinearMmse, _) => 0,
            (_, TapCount::Fixed(q)) => q,
            (_, TapCount::Auto) => 3,
        };
        let nb = e.feedback_taps.unwrap_or(nb_default);
        if nb > MAX_EQUALISER_TAPS {
            return Err(invalid(
                "equaliser.feedback_taps",
                format!("an integer in 0..={MAX_EQUALISER_TAPS}"),
                nb,
            ));
        }
        if kind == EqualiserKind::LinearMmse && nb != 0 {
            return Err(ProfileError::Conflict {
                key: "equaliser.feedback_taps".into(),
                problem: format!(
                    "a linear-mmse equaliser has no feedback filter; remove feedback_taps \
                     (found {nb}) or choose kind zf-dfe or mmse-dfe"
                ),
            });
        }
        let delay = e.delay.unwrap_or(Delay::Auto);
        if let Delay::Fixed(d) = delay {
            if d >= nf {
                return Err(invalid(
                    "equaliser.delay",
                    format!("\"auto\" or a delay below feedforward_taps ({nf})"),
                    d,
                ));
            }
        }
        let tracking = e.tracking.unwrap_or_default();
        match tracking {
            Tracking::Off => {}
            Tracking::Lms { mu } => {
                positive("equaliser.tracking.mu", mu)?;
            }
            Tracking::Rls { lambda } => {
                if !(lambda.is_finite() && lambda > 0.0 && lambda <= 1.0) {
                    return Err(invalid(
                        "equaliser.tracking.lambda",
                        "a forgetting factor in (0, 1]",
                        lambda,
                    ));
                }
            }
        }
        Ok(ResolvedEqualiser {
            kind,
            feedforward_taps: nf,
            feedback_taps: nb,
            delay,
            carrier_refinement: e.carrier_refinement.unwrap_or(true),
            tracking,
            clock_tracking: e.clock_tracking.unwrap_or(true),
            mlse: {
                let m = e.mlse.clone().unwrap_or_default();
                let d = ResolvedMlse::default();
                ResolvedMlse {
                    enabled: m.enabled.unwrap_or(d.enabled),
                    max_states: check_mlse_states(m.max_states.unwrap_or(d.max_states))?,
                    reduced_state: m.reduced_state.unwrap_or(d.reduced_state),
                }
            },
        })
    }
}

/// The rule "a fit of `pre + post + 1` taps needs at least twice as many
/// training symbols" (common practice: at least two equations per unknown for a
/// usable least-squares fit). With `"auto"` counts, the fixed part plus one
/// main tap must fit. Used at resolution and again once a symbols file is read.
pub fn check_training_fits(
    fit: &ResolvedChannelFit,
    training_symbols: usize,
) -> Result<(), ProfileError> {
    let fixed = |t: TapCount| match t {
        TapCount::Fixed(n) => n,
        TapCount::Auto => 0,
    };
    let pre = fixed(fit.pre_cursor_taps);
    let post = fixed(fit.post_cursor_taps);
    // Saturating: a resolved profile read back from a report (recheck) has not
    // been through the caps of `resolve`, so the counts may be anything.
    let taps = pre.saturating_add(post).saturating_add(1);
    let needed = taps.saturating_mul(2);
    if training_symbols < needed {
        return Err(ProfileError::TrainingTooShort {
            key: "training.sequence".into(),
            training_symbols,
            taps,
            pre,
            post,
            needed,
        });
    }
    Ok(())
}
