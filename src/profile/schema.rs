//! The link profile as written in JSON: serde types, strict (unknown keys are
//! errors), with the defaults that serde fills in. Takes in JSON, gives out a
//! [`Profile`]; range checks and cross-key rules live in `resolve.rs`.
//!
//! Units: Hz for rates and offsets, symbols for lengths, samples for
//! `samples_per_symbol`; the roll-off is dimensionless.

use std::path::Path;

use serde::{Deserialize, Deserializer, Serialize, Serializer};

use crate::capture::SampleFormat;
use crate::signal::{Modulation, PrbsPattern};

/// A complete link profile as parsed from JSON (before defaults are checked and
/// filled in by [`Profile::resolve`]).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Profile {
    /// How the capture is stored, when the file itself does not say.
    #[serde(default)]
    pub capture: CaptureSection,
    /// Integer oversampling factor of the capture (samples per symbol). With
    /// `symbol_rate_hz`, the integer rate the capture is resampled to (default
    /// 4); without it, required.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub samples_per_symbol: Option<u32>,
    /// Symbol rate in Hz, for a capture whose sample rate is not an integer
    /// multiple of it: the capture is then resampled to `samples_per_symbol`
    /// samples per symbol before the analysis (#17).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub symbol_rate_hz: Option<f64>,
    /// Transmit pulse.
    pub pulse: PulseSection,
    /// The training block.
    pub training: TrainingSection,
    /// The payload and where it sits relative to the training block.
    pub payload: PayloadSection,
    /// Channel-fit settings.
    #[serde(default)]
    pub channel_fit: ChannelFitSection,
    /// Equaliser settings.
    #[serde(default)]
    pub equaliser: EqualiserSection,
    /// Training-search settings.
    #[serde(default)]
    pub search: SearchSection,
    /// Pass/fail limits (each absent limit is not checked).
    #[serde(default)]
    pub limits: LimitsSection,
}

/// `capture`: storage format and rates (each optional when the file or a SigMF
/// sidecar says).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct CaptureSection {
    /// SigMF datatype name of a raw capture, e.g. `"cf32_le"`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub format: Option<SampleFormat>,
    /// Sample rate in Hz.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sample_rate_hz: Option<f64>,
    /// Centre frequency in Hz (informational).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub center_freq_hz: Option<f64>,
    /// Swap I and Q on reading (mirrors the spectrum).
    #[serde(default)]
    pub swap_iq: bool,
    /// Zero point of unsigned datatypes (`cu8`, `cu16`, `cu32`): `symmetric`
    /// (default, 127.5 for `cu8`) or `power_of_two` (128 for `cu8`, the SigMF
    /// reference library's). See docs/sigmf.md.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub unsigned_zero: Option<crate::capture::UnsignedZero>,
}

/// Pulse shapes the profile can name.
#[derive(
    Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize, schemars::JsonSchema,
)]
#[serde(rename_all = "snake_case")]
pub enum PulseShape {
    /// Root-raised cosine (transmit and matched filter).
    #[default]
    Rrc,
}

/// `pulse`: the transmit pulse.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct PulseSection {
    /// Pulse shape; only `"rrc"`.
    #[serde(default)]
    pub shape: PulseShape,
    /// RRC roll-off β, in (0, 1].
    pub rolloff: f64,
    /// Filter span in symbols (default 12).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub span_symbols: Option<u32>,
}

/// `training`: modulation and sequence of the training block.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct TrainingSection {
    /// Constellation the PRBS bits are mapped onto (default `"qpsk"`; not
    /// used by Barker, Zadoff-Chu or explicit symbols, which define their
    /// symbols directly).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub modulation: Option<Modulation>,
    /// The sequence.
    pub sequence: Sequence,
}

/// `training.sequence`: how the training symbols are generated (tag `"kind"`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum Sequence {
    /// ITU-T O.150-style PRBS bits mapped onto the training modulation.
    Prbs {
        /// Named pattern (`"prbs7"`, `"prbs9"`, …); or give `polynomial`.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        pattern: Option<PrbsPattern>,
        /// Feedback stages `[n, a]` for `x^n + x^a + 1` (instead of `pattern`).
        #[serde(default, skip_serializing_if = "Option::is_none")]
        polynomial: Option<[u32; 2]>,
        /// Initial register state, non-zero, below `2^n` (default all ones).
        #[serde(default, skip_serializing_if = "Option::is_none")]
        seed: Option<u64>,
        /// Invert the output bits (default: as O.150 says for the pattern).
        #[serde(default, skip_serializing_if = "Option::is_none")]
        inverted: Option<bool>,
        /// Training length in symbols.
        length: usize,
    },
    /// Barker code of length `n` (2, 3, 4, 5, 7, 11 or 13), one real symbol `±1` per chip.
    Barker {
        /// Code length.
        n: usize,
    },
    /// Zadoff-Chu sequence `x_u(n) = exp(−jπ·u·n(n+1)/N)`, cyclically shifted.
    ZadoffChu {
        /// Root `u`, coprime with `length`.
        root: u32,
        /// Length `N`.
        length: usize,
        /// Cyclic shift (default 0).
        #[serde(default)]
        shift: usize,
    },
    /// Explicit symbols as `[re, im]` pairs.
    Symbols {
        /// The symbols.
        values: Vec<[f64; 2]>,
    },
    /// Symbols read from a text file (one `re im` pair per line, `#` comments),
    /// relative to the profile's directory.
    SymbolsFile {
        /// File path.
        path: String,
    },
}

/// Where the payload sits relative to the training block.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum PayloadPosition {
    /// Training first (preamble frame).
    After,
    /// Training last (postamble frame).
    Before,
    /// Payload on both sides (midamble frame).
    Both,
}

/// `payload`: modulation, length, position and, when known, how to regenerate it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct PayloadSection {
    /// Payload constellation.
    pub modulation: Modulation,
    /// Where the payload sits (default `"after"`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub position: Option<PayloadPosition>,
    /// Payload length for `after` / `before`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub length_symbols: Option<usize>,
    /// Payload symbols before the training (position `both`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub length_before_symbols: Option<usize>,
    /// Payload symbols after the training (position `both`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub length_after_symbols: Option<usize>,
    /// How to regenerate a known payload (absent: unknown payload).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub known: Option<PayloadRule>,
}

/// `payload.known`: a rule that regenerates the payload symbols (tag `"kind"`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum PayloadRule {
    /// PRBS bits mapped onto the payload modulation, restarted from `seed` in
    /// every burst.
    Prbs {
        /// Named pattern; or give `polynomial`.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        pattern: Option<PrbsPattern>,
        /// Feedback stages `[n, a]` for `x^n + x^a + 1`.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        polynomial: Option<[u32; 2]>,
        /// Initial register state (default all ones).
        #[serde(default, skip_serializing_if = "Option::is_none")]
        seed: Option<u64>,
        /// Invert the output bits (default: as O.150 says for the pattern).
        #[serde(default, skip_serializing_if = "Option::is_none")]
        inverted: Option<bool>,
    },
    /// Symbols read from a text file (`re im` per line), as many as the payload needs.
    SymbolsFile {
        /// File path, relative to the profile's directory.
        path: String,
    },
}

/// A tap count: a number, or `"auto"` (the channel fit chooses).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TapCount {
    /// Let the fit choose (up to what the training supports).
    Auto,
    /// Exactly this many taps.
    Fixed(usize),
}

/// Decision delay of the MMSE equalisers: a number of symbols, or `"auto"`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Delay {
    /// Chosen by the equaliser design (best MSE).
    Auto,
    /// This many symbols.
    Fixed(usize),
}

fn ser_auto_or<S: Serializer>(auto: bool, n: usize, s: S) -> Result<S::Ok, S::Error> {
    if auto {
        s.serialize_str("auto")
    } else {
        s.serialize_u64(n as u64)
    }
}

/// Accepts a non-negative integer or the string `"auto"`.
fn de_auto_or<'de, D: Deserializer<'de>>(d: D) -> Result<Option<usize>, D::Error> {
    struct V;
    impl serde::de::Visitor<'_> for V {
        type Value = Option<usize>;
        fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
            f.write_str("a non-negative integer or \"auto\"")
        }
        fn visit_u64<E: serde::de::Error>(self, v: u64) -> Result<Self::Value, E> {
            usize::try_from(v)
                .map(Some)
                .map_err(|_| E::invalid_value(serde::de::Unexpected::Unsigned(v), &self))
        }
        fn visit_i64<E: serde::de::Error>(self, v: i64) -> Result<Self::Value, E> {
            match u64::try_from(v) {
                Ok(u) => self.visit_u64(u),
                Err(_) => Err(E::invalid_value(serde::de::Unexpected::Signed(v), &self)),
            }
        }
        fn visit_str<E: serde::de::Error>(self, v: &str) -> Result<Self::Value, E> {
            if v == "auto" {
                Ok(None)
            } else {
                Err(E::invalid_value(serde::de::Unexpected::Str(v), &self))
            }
        }
    }
    d.deserialize_any(V)
}

impl Serialize for TapCount {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        match *self {
            TapCount::Auto => ser_auto_or(true, 0, s),
            TapCount::Fixed(n) => ser_auto_or(false, n, s),
        }
    }
}
impl<'de> Deserialize<'de> for TapCount {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        Ok(de_auto_or(d)?.map_or(TapCount::Auto, TapCount::Fixed))
    }
}
/// JSON Schema of a count written as a non-negative integer or `"auto"`.
fn auto_or_count_schema(what: &str) -> schemars::Schema {
    schemars::json_schema!({
        "description": format!("{what}: a non-negative integer or \"auto\""),
        "oneOf": [
            {"type": "integer", "minimum": 0},
            {"const": "auto"}
        ]
    })
}

impl schemars::JsonSchema for TapCount {
    fn schema_name() -> std::borrow::Cow<'static, str> {
        "TapCount".into()
    }
    fn json_schema(_: &mut schemars::SchemaGenerator) -> schemars::Schema {
        auto_or_count_schema("tap count")
    }
}

impl schemars::JsonSchema for Delay {
    fn schema_name() -> std::borrow::Cow<'static, str> {
        "Delay".into()
    }
    fn json_schema(_: &mut schemars::SchemaGenerator) -> schemars::Schema {
        auto_or_count_schema("decision delay in symbols")
    }
}

impl Serialize for Delay {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        match *self {
            Delay::Auto => ser_auto_or(true, 0, s),
            Delay::Fixed(n) => ser_auto_or(false, n, s),
        }
    }
}
impl<'de> Deserialize<'de> for Delay {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        Ok(de_auto_or(d)?.map_or(Delay::Auto, Delay::Fixed))
    }
}

/// `channel_fit`: which taps and extra terms the least-squares fit estimates.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ChannelFitSection {
    /// Pre-cursor taps `P` (default 1).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub pre_cursor_taps: Option<TapCount>,
    /// Post-cursor taps `Q` (default 3).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub post_cursor_taps: Option<TapCount>,
    /// Also fit a DC offset term (default false).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub dc_offset: Option<bool>,
    /// Also fit an IQ-imbalance (conjugate) term (default false).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub iq_imbalance: Option<bool>,
}

/// Equaliser structures.
#[derive(
    Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum EqualiserKind {
    /// Zero-forcing decision feedback equaliser.
    ZfDfe,
    /// Finite-length MMSE decision feedback equaliser.
    #[default]
    MmseDfe,
    /// Linear MMSE equaliser (no feedback).
    LinearMmse,
}

/// Decision-directed tracking of a slowly varying channel (tag `"kind"`).
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum Tracking {
    /// No tracking: the filters stay as designed from the training.
    #[default]
    Off,
    /// Least mean squares with step size `mu` (> 0).
    Lms {
        /// Step size.
        mu: f64,
    },
    /// Recursive least squares with forgetting factor `lambda` in (0, 1].
    Rls {
        /// Forgetting factor.
        lambda: f64,
    },
}

/// `equaliser`: structure and lengths.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct EqualiserSection {
    /// Structure (default `"mmse-dfe"`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub kind: Option<EqualiserKind>,
    /// Feedforward taps Nf (default 8).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub feedforward_taps: Option<usize>,
    /// Feedback taps Nb (default: the post-cursor taps, or 3 with `"auto"`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub feedback_taps: Option<usize>,
    /// Decision delay (default `"auto"`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub delay: Option<Delay>,
    /// Refine the carrier phase/frequency from the decisions (default true).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub carrier_refinement: Option<bool>,
    /// Tracking (default `{"kind": "off"}`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub tracking: Option<Tracking>,
    /// Estimate each burst's sample-clock offset and follow it (default true;
    /// bursts shorter than 1024 training and payload symbols are never estimated).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub clock_tracking: Option<bool>,
    /// The Viterbi MLSE reference detector (default off).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub mlse: Option<MlseSection>,
}

/// `equaliser.mlse`: the Viterbi MLSE reference detector run beside the DFE.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct MlseSection {
    /// Run it (default false: it costs far more than the DFE, docs/performance.md).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub enabled: Option<bool>,
    /// Largest trellis state count `M^L` (default 4096, allowed 2..=65536).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub max_states: Option<usize>,
    /// Above the limit, run the reduced-state detector (DDFSE) instead of
    /// skipping (default true).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub reduced_state: Option<bool>,
}

/// `search`: how the training block is found.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct SearchSection {
    /// Normalised correlation threshold in (0, 1] (default: derived from the
    /// synchroniser's false-alarm target, 1e-3 expected false alarms per 10⁸ samples).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub threshold: Option<f64>,
    /// Largest expected carrier offset in Hz (default 2 % of the symbol rate).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub max_cfo_hz: Option<f64>,
}

/// `limits`: pass/fail limits; an absent limit is not checked.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct LimitsSection {
    /// Largest allowed RMS EVM in percent.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub evm_rms_percent_max: Option<f64>,
    /// Smallest allowed MER in dB.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub mer_db_min: Option<f64>,
    /// Largest allowed symbol error rate (needs a known payload).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ser_max: Option<f64>,
    /// Judge `ser_max` on the upper end of the 95 % run-aware interval
    /// (`summary.ser_run_aware.ci_high`) instead of the point estimate.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ser_max_on_upper_bound: Option<bool>,
    /// Largest allowed |CFO| in Hz.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cfo_hz_abs_max: Option<f64>,
    /// Spectral mask: segments of frequency offset from the centre (both
    /// sides) where the capture's PSD must stay a given number of dB below its
    /// own peak.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub spectral_mask: Vec<MaskSegment>,
}

/// One segment of `limits.spectral_mask`: for offsets
/// `from_offset_hz ≤ |f − fc| ≤ to_offset_hz` the Welch PSD (the same one
/// `iqaudit info` computes) must not exceed its peak plus `max_db_rel_peak`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct MaskSegment {
    /// Lower end of the offset range, Hz (≥ 0).
    pub from_offset_hz: f64,
    /// Upper end of the offset range, Hz (> `from_offset_hz`).
    pub to_offset_hz: f64,
    /// Highest level allowed, dB relative to the PSD's peak (≤ 0).
    pub max_db_rel_peak: f64,
}

impl Profile {
    /// Make relative symbols-file paths relative to `base` (the profile's
    /// directory). Absolute paths are left alone.
    pub fn rebase_paths(&mut self, base: &Path) {
        let rebase = |p: &mut String| {
            if Path::new(p.as_str()).is_relative() && !base.as_os_str().is_empty() {
                *p = base.join(p.as_str()).to_string_lossy().into_owned();
            }
        };
        if let Sequence::SymbolsFile { path } = &mut self.training.sequence {
            rebase(path);
        }
        if let Some(PayloadRule::SymbolsFile { path }) = &mut self.payload.known {
            rebase(path);
        }
    }
}
