//! Synthetic captures with known ground truth: the project's test stimulus.
//!
//! Takes in a [`SynthSpec`] (a resolved link profile plus impairments and a
//! seed); gives out the capture's complex samples (full scale = 1.0) and a
//! [`GroundTruth`] that says where every burst is and what was done to it.
//! [`write_outputs`] also writes the capture (any format `capture` writes,
//! incl. WAV), a SigMF sidecar and `FILE.truth.json`.
//!
//! ## Signal model (in the order applied)
//!
//! 1. **Frame**: each burst is `[payload before][training][payload after]`
//!    (profile layout). A known payload comes from the profile's rule; an
//!    unknown one is drawn uniformly from the constellation labels.
//! 2. **Pulse**: RRC with the profile's roll-off and span, `Σ h² = 1` on the
//!    sample grid (as `signal::rrc_taps`), evaluated at a fractional delay so
//!    that symbol `k` of the burst peaks at `instant + k·sps` with
//!    `instant = start_sample + timing_frac`, `timing_frac ∈ [−0.5, 0.5)`.
//! 3. **Channel** (optional): `y(n) = Σ_t h[t]·s(n − (t − main_index)·D)` with
//!    `D = sps` (symbol-spaced) or `1` (sample-spaced). Taps are listed
//!    `h[−P], …, h[0], …, h[Q]`, the main tap at index `P = main_index`
//!    (crate convention); `start_sample` refers to the main-tap path. With
//!    `drift_hz ≠ 0` every tap except the main one turns at `drift_hz`
//!    relative to the main tap, `h[t](n) = h[t]·exp(j2π·drift_hz·(n − instant)/fs)`,
//!    so the taps listed in the truth hold at the first training symbol.
//! 4. **Carrier**: multiply by `exp(j(phase_rad + 2π·cfo_hz·n/fs))` with `n` the
//!    capture sample index (a continuous local oscillator). The truth's
//!    per-burst `phase_rad` is that phase at the burst's first training symbol
//!    instant (crate CFO sign convention).
//! 5. **Level**: everything is scaled by `amplitude = sqrt(10^(level_dbfs/10)·sps)`,
//!    so the noise-free transmitted burst (before the channel) has mean power
//!    `level_dbfs` relative to full scale.
//! 6. **Noise**: complex white Gaussian noise over the whole capture (gaps too)
//!    with variance `amplitude² / (Es/N0)` per sample. Because the pulse has unit
//!    energy and the symbols unit mean power, a unit-energy matched filter
//!    sampled at the symbol instants gives symbols `amplitude·x` and noise of
//!    variance `amplitude²/(Es/N0)`: **Es/N0 is measured at the matched-filter
//!    output** and refers to the transmitted symbol energy (a channel with
//!    `Σ|h|² ≠ 1` changes the received SNR by that factor).
//! 7. **Receiver IQ imbalance** (gain `g = 10^(iq_gain_db/20)`, phase `φ`):
//!    `I' = I`, `Q' = g·(Q·cos φ − I·sin φ)`, i.e. `y = K1·x + K2·x*` with
//!    `K1 = (1 + g·e^{−jφ})/2`, `K2 = (1 − g·e^{jφ})/2`; then a **DC offset** is added.
//! 8. **Quantisation/clipping** to the output format happen in
//!    `capture::write_capture`.
//! 9. **Sample-clock offset** (`sco_ppm = ε·10⁶`, #17): the finished capture
//!    (noise included) is resampled with [`crate::signal::Resampler`] at the
//!    ratio `1/(1 + ε)`, so output sample `n` is the generated signal at
//!    generation sample `n/(1 + ε)`: the receiver's clock is `ε` fast (crate
//!    convention). The truth's burst instants are in the resampled capture; a
//!    CFO given in Hz is then seen at `cfo_hz/(1 + ε)` (0.3 Hz less for 3.4 kHz
//!    at 100 ppm).
//!
//! Bursts are separated by noise-only gaps drawn uniformly from
//! `[gap_min, gap_max]` samples, with `lead_gap_samples` before the first burst
//! and one more drawn gap after the last. A burst's extent (`first_sample` to
//! `end_sample`) includes the pulse tails and the channel spread.
//!
//! ## Memory
//!
//! The capture is held once as `Cf32` (8 bytes per sample; `write_capture`
//! encodes it in chunks), plus one burst's symbols and a block of
//! `BLOCK` (16 384) samples of working buffers, so a 1 GiB `ci16_le` capture
//! needs about 2 GiB. Measured: 32 M samples (5000 bursts) in 5 s with 256 MB
//! peak resident memory (release build, one core).
//!
//! ## Determinism
//!
//! One `ChaCha8Rng` seeded from `seed`, with stream 1 for the layout (timing,
//! random payloads, gaps, in burst order) and stream 2 for the noise (in sample
//! order). Everything runs on one thread in a fixed order, with `f64`
//! arithmetic rounded to `f32` once per sample. The same binary on the same
//! platform (x86_64) therefore gives bit-identical output; different `libm`
//! implementations of `sin`/`cos`/`ln` may differ in the last bit.

use std::path::{Path, PathBuf};

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;
use serde::{Deserialize, Serialize};

use crate::capture::SigmfAnnotation;
use crate::capture::{write_capture, Container, SampleFormat, WavEncoding, WriteSpec};
use crate::profile::{Modulation, ProfileError, ResolvedProfile};
use crate::signal::{rrc_impulse, Constellation};
use crate::{Cf32, Cf64};

mod request;
pub use request::{synth_files, SynthRequest};

/// Output samples made per block inside a burst (bounds the working memory).
const BLOCK: usize = 1 << 14;

/// Largest `|sco_ppm|` [`run`] accepts (1 %: far beyond any crystal, small enough
/// that a burst's layout is unchanged to first order).
pub const MAX_SCO_PPM: f64 = 10_000.0;

/// Schema name written in every truth file.
/// (`/2`: `tool` became `{name, version}` like the other documents', #19.)
pub const TRUTH_SCHEMA: &str = "iqaudit.synth-truth/2";

/// Errors of the synthesiser.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum SynthError {
    /// The profile cannot be turned into symbols.
    #[error(transparent)]
    Profile(#[from] ProfileError),
    /// An option has a value that is not allowed.
    #[error("{option}: expected {expected}, found {found}")]
    InvalidOption {
        /// Option name (CLI spelling, e.g. `--channel`).
        option: String,
        /// What is allowed.
        expected: String,
        /// What was given.
        found: String,
    },
    /// The capture would hold more than [`crate::limits::MAX_SYNTH_SAMPLES`]
    /// samples (the product of the options, not each one, is capped).
    #[error("--bursts {bursts} × ({frame} samples a frame + gap up to {gap_max}) + --lead-gap {lead_gap} = {total} samples: at most {max} samples per capture")]
    TooLarge {
        /// Bursts asked for.
        bursts: usize,
        /// Samples of one burst (frame, pulse tails, channel spread).
        frame: u64,
        /// The largest gap after a burst, samples.
        gap_max: usize,
        /// Samples before the first burst.
        lead_gap: usize,
        /// The capture's length, samples (saturating).
        total: u64,
        /// The cap.
        max: u64,
    },
    /// Writing an output file failed.
    #[error("cannot write {path}: {message}")]
    Write {
        /// The file.
        path: PathBuf,
        /// What went wrong.
        message: String,
    },
}

fn bad(option: &str, expected: impl Into<String>, found: impl std::fmt::Display) -> SynthError {
    SynthError::InvalidOption {
        option: option.to_string(),
        expected: expected.into(),
        found: found.to_string(),
    }
}

/// How far apart the channel taps are.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum TapSpacing {
    /// One symbol period (`sps` samples).
    Symbol,
    /// One sample.
    Sample,
}

/// A multipath channel.
#[derive(Debug, Clone, PartialEq)]
pub struct ChannelSpec {
    /// Taps `h[−P], …, h[0], …, h[Q]`.
    pub taps: Vec<Cf64>,
    /// Index of the main tap `h[0]` in `taps` (= `P`, the pre-cursor count).
    pub main_index: usize,
    /// Tap spacing.
    pub spacing: TapSpacing,
    /// Rotation rate of the non-main taps relative to the main tap, Hz.
    pub drift_hz: f64,
}

/// Fractional timing offset of each burst.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum TimingOffset {
    /// The same fraction for every burst, in [−0.5, 0.5) samples.
    Fixed(f64),
    /// Drawn uniformly from [−0.5, 0.5) for each burst.
    Random,
}

/// Everything the synthesiser needs (plain data; the CLI builds it).
#[derive(Debug, Clone, PartialEq)]
pub struct SynthSpec {
    /// The link profile (layout, modulation, pulse, sequences).
    pub profile: ResolvedProfile,
    /// Sample rate in Hz; `None` takes the profile's.
    pub sample_rate_hz: Option<f64>,
    /// Number of bursts (≥ 1).
    pub bursts: usize,
    /// RNG seed.
    pub seed: u64,
    /// Multipath channel; `None` = a single unit tap.
    pub channel: Option<ChannelSpec>,
    /// Es/N0 in dB at the matched-filter output; `None` = no noise.
    pub esn0_db: Option<f64>,
    /// Carrier frequency offset, Hz.
    pub cfo_hz: f64,
    /// Carrier phase at capture sample 0, radians.
    pub phase_rad: f64,
    /// Fractional timing.
    pub timing: TimingOffset,
    /// DC offset added last, full-scale units `[re, im]`.
    pub dc_offset: [f64; 2],
    /// Receiver IQ gain imbalance (Q relative to I), dB.
    pub iq_gain_db: f64,
    /// Receiver IQ phase imbalance, degrees.
    pub iq_phase_deg: f64,
    /// Mean power of the noise-free transmitted burst, dBFS.
    pub level_dbfs: f64,
    /// Smallest and largest noise-only gap between bursts, samples.
    pub gap_samples: (usize, usize),
    /// Noise-only samples before the first burst.
    pub lead_gap_samples: usize,
    /// Sample-clock offset of the receiver, ppm: its clock runs this much fast,
    /// so received sample `n` is taken at transmit time `n/(fs·(1 + sco_ppm·1e-6))`
    /// (crate convention, see the crate docs). 0 = no offset.
    pub sco_ppm: f64,
}

impl SynthSpec {
    /// A spec with no impairments: one burst, seed 0, no channel, no noise,
    /// zero CFO/phase/timing, −12 dBFS, gaps of 1000–3000 samples, no lead gap.
    pub fn new(profile: ResolvedProfile) -> SynthSpec {
        SynthSpec {
            profile,
            sample_rate_hz: None,
            bursts: 1,
            seed: 0,
            channel: None,
            esn0_db: None,
            cfo_hz: 0.0,
            phase_rad: 0.0,
            timing: TimingOffset::Fixed(0.0),
            dc_offset: [0.0, 0.0],
            iq_gain_db: 0.0,
            iq_phase_deg: 0.0,
            level_dbfs: -12.0,
            gap_samples: (1000, 3000),
            lead_gap_samples: 0,
            sco_ppm: 0.0,
        }
    }
}

/// Where the payload of a burst came from.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct TruthPayload {
    /// Payload constellation.
    pub modulation: Modulation,
    /// Symbols before the training.
    pub before_symbols: usize,
    /// Symbols after the training.
    pub after_symbols: usize,
    /// `"rule"` (regenerate from `profile.payload.known`) or `"random"`.
    pub source: String,
    /// Constellation labels before the training (random payloads; null for a rule).
    pub labels_before: Option<Vec<u16>>,
    /// Constellation labels after the training (random payloads; null for a rule).
    pub labels_after: Option<Vec<u16>>,
}

/// Ground truth of one burst.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct TruthBurst {
    /// Burst number from 0.
    pub index: usize,
    /// Capture sample nearest the first training symbol's instant (main path).
    pub start_sample: u64,
    /// Fraction in [−0.5, 0.5): the instant is `start_sample + timing_frac`.
    pub timing_frac: f64,
    /// First capture sample the burst touches (pulse tail, channel spread).
    pub first_sample: u64,
    /// One past the last capture sample the burst touches.
    pub end_sample: u64,
    /// Carrier offset, Hz.
    pub cfo_hz: f64,
    /// Carrier phase at the first training symbol instant, radians in (−π, π].
    pub phase_rad: f64,
    /// Es/N0 at the matched-filter output, dB (null = noise-free).
    pub esn0_db: Option<f64>,
    /// Amplitude of the unit-power symbols at the matched-filter output.
    pub amplitude: f64,
    /// Channel taps `[re, im]`, `h[−P] … h[Q]`, at the first training symbol.
    pub taps: Vec<[f64; 2]>,
    /// Index of the main tap in `taps`.
    pub main_index: usize,
    /// Tap spacing.
    pub tap_spacing: TapSpacing,
    /// Drift rate of the non-main taps, Hz.
    pub drift_hz: f64,
    /// Training modulation (null for Zadoff-Chu / explicit symbols).
    pub training_modulation: Option<Modulation>,
    /// Training length in symbols.
    pub training_symbols: usize,
    /// The payload.
    pub payload: TruthPayload,
}

/// Receiver impairments applied to the whole capture.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct TruthReceiver {
    /// Noise variance per complex sample (full-scale units²), 0 when noise-free.
    pub noise_variance_per_sample: f64,
    /// Carrier phase at sample 0, radians.
    pub phase_at_sample0_rad: f64,
    /// DC offset `[re, im]`, full-scale units.
    pub dc_offset: [f64; 2],
    /// IQ gain imbalance, dB.
    pub iq_gain_db: f64,
    /// IQ phase imbalance, degrees.
    pub iq_phase_deg: f64,
    /// Mean power of the noise-free transmitted bursts, dBFS.
    pub level_dbfs: f64,
    /// Gap range between bursts, samples.
    pub gap_samples: [usize; 2],
    /// Lead gap, samples.
    pub lead_gap_samples: usize,
    /// Sample-clock offset of the receiver, ppm (positive: its clock is fast;
    /// sample `n` is taken at transmit time `n/(fs·(1 + sco_ppm·1e-6))`); 0 in
    /// truth files that predate it.
    #[serde(default)]
    pub sco_ppm: f64,
}

/// The output file written beside the truth (filled by [`write_outputs`]).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct TruthCapture {
    /// File name of the capture (same directory as the truth file).
    pub file: String,
    /// Storage description, e.g. `"ci16_le"` or `"wav pcm16"`.
    pub format: String,
    /// Samples clipped by the output format.
    pub clipped: u64,
}

/// The complete ground truth of a synthesised capture (`FILE.truth.json`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct GroundTruth {
    /// Always [`TRUTH_SCHEMA`].
    pub schema: String,
    /// Name and version of the writing program.
    pub tool: crate::report::schema::ToolInfo,
    /// The command line that made it (null from the library).
    pub command: Option<String>,
    /// RNG seed.
    pub seed: u64,
    /// Sample rate, Hz.
    pub sample_rate_hz: f64,
    /// Samples in the capture.
    pub total_samples: u64,
    /// The capture file (null until written).
    pub capture: Option<TruthCapture>,
    /// Receiver impairments.
    pub receiver: TruthReceiver,
    /// The resolved profile the bursts follow.
    pub profile: ResolvedProfile,
    /// One entry per burst, in capture order.
    pub bursts: Vec<TruthBurst>,
}

/// Samples plus their ground truth.
#[derive(Debug, Clone)]
pub struct Synthesised {
    /// Complex samples, full scale = 1.0 (not yet quantised).
    pub samples: Vec<Cf32>,
    /// Ground truth.
    pub truth: GroundTruth,
}

/// Parse channel taps such as `"0.1,1.0,0.4-0.2j"`: comma-separated complex
/// numbers written `a`, `bj`, `a+bj` or `a-bj` (`i` is accepted for `j`).
pub fn parse_taps(text: &str) -> Result<Vec<Cf64>, SynthError> {
    let expected = "comma-separated complex taps like 0.1,1.0,0.4-0.2j";
    let taps: Result<Vec<Cf64>, SynthError> = text
        .split(',')
        .map(|t| parse_complex(t.trim()).ok_or_else(|| bad("--channel", expected, t.trim())))
        .collect();
    let taps = taps?;
    if taps.is_empty() || taps.iter().all(|t| t.norm() == 0.0) {
        return Err(bad("--channel", "at least one non-zero tap", text));
    }
    Ok(taps)
}

fn parse_complex(s: &str) -> Option<Cf64> {
    let s: String = s.chars().filter(|c| !c.is_whitespace()).collect();
    if s.is_empty() {
        return None;
    }
    let finite = |v: f64| v.is_finite().then_some(v);
    let imag_part = |p: &str| -> Option<f64> {
        let body = p.strip_suffix('j').or_else(|| p.strip_suffix('i'))?;
        match body {
            "" | "+" => Some(1.0),
            "-" => Some(-1.0),
            b => b.parse::<f64>().ok().and_then(finite),
        }
    };
    if !(s.ends_with('j') || s.ends_with('i')) {
        return s
            .parse::<f64>()
            .ok()
            .and_then(finite)
            .map(|re| Cf64::new(re, 0.0));
    }
    // Split at the last sign that is not at the start and not after an exponent 'e'.
    let bytes = s.as_bytes();
    let split = (1..bytes.len())
        .rev()
        .find(|&i| (bytes[i] == b'+' || bytes[i] == b'-') && !matches!(bytes[i - 1], b'e' | b'E'));
    match split {
        None => imag_part(&s).map(|im| Cf64::new(0.0, im)),
        Some(i) => {
            let re = s[..i].parse::<f64>().ok().and_then(finite)?;
            imag_part(&s[i..]).map(|im| Cf64::new(re, im))
        }
    }
}

/// Wrap an angle to (−π, π].
fn wrap_phase(x: f64) -> f64 {
    use std::f64::consts::PI;
    let mut y = x.rem_euclid(2.0 * PI);
    if y > PI {
        y -= 2.0 * PI;
    }
    y
}

/// One burst's plan (drawn before any sample is made).
struct BurstPlan {
    pos: usize,
    frac: f64,
    labels_before: Option<Vec<u16>>,
    labels_after: Option<Vec<u16>>,
}

/// Ranges [`SynthSpec::validate`] allows: the physically meaningful ones
/// (outside them the generator writes infinite or NaN samples, or a capture
/// that is all noise or all clipping). This project's choice, documented in
/// docs/robustness.md (rule 5), not a standard.
pub mod ranges {
    /// `level_dbfs`, dBFS.
    pub const LEVEL_DBFS: (f64, f64) = (-200.0, 40.0);
    /// `esn0_db`, dB (−60 dB already makes a noise-only capture).
    pub const ESN0_DB: (f64, f64) = (-100.0, 200.0);
    /// `iq_gain_db`, dB.
    pub const IQ_GAIN_DB: (f64, f64) = (-40.0, 40.0);
    /// `|iq_phase_deg|` below this, degrees (at 90° Q is made of I alone).
    pub const IQ_PHASE_DEG_ABS: f64 = 90.0;
    /// `|phase_rad|` in degrees.
    pub const PHASE_DEG_ABS: f64 = 360.0;
    /// Each `dc_offset` component, full-scale units.
    pub const DC_ABS: f64 = 1.0;
    /// The largest `|tap|` of a channel.
    pub const TAP_MAGNITUDE: (f64, f64) = (1e-6, 1e6);
}

impl SynthSpec {
    /// Check every field before anything is generated, and return the sample
    /// rate the capture will have. [`run`] calls it first; `iqaudit synth`
    /// calls it before it checks its output names, so the command line and the
    /// library refuse the same specs with the same messages (options named in
    /// their CLI spelling).
    ///
    /// Checked: the profile's invariants ([`ResolvedProfile::validate`]); the
    /// sample rate (given or the profile's) in [1, 10^12] Hz; at least one
    /// burst; every number finite; `|cfo_hz|` and a channel's `|drift_hz|`
    /// below fs/2; `|sco_ppm|` ≤ [`MAX_SCO_PPM`]; a fixed timing fraction in
    /// [−0.5, 0.5); gaps MIN ≤ MAX; the [`ranges`]; a channel with a main tap
    /// inside it; and the size of the capture, `lead_gap + bursts × (frame +
    /// largest gap)` ≤ [`crate::limits::MAX_SYNTH_SAMPLES`] samples (each
    /// factor may be within its own bounds while the product is not).
    ///
    /// # Errors
    /// [`SynthError::Profile`], [`SynthError::InvalidOption`] naming the option,
    /// or [`SynthError::TooLarge`].
    pub fn validate(&self) -> Result<f64, SynthError> {
        use crate::limits::show_number as show;
        self.profile.validate()?;
        let fs = self
            .sample_rate_hz
            .or(self.profile.capture.sample_rate_hz)
            .ok_or_else(|| {
                bad(
                    "--sample-rate",
                    "a sample rate (the profile has none: give capture.sample_rate_hz or --sample-rate)",
                    "nothing",
                )
            })?;
        crate::limits::check_rate_hz(fs).map_err(|e| bad("--sample-rate", e, show(fs)))?;
        if self.bursts == 0 {
            return Err(bad("--bursts", "at least 1", 0));
        }
        let finite = [
            ("--cfo-hz", self.cfo_hz),
            ("--phase-deg", self.phase_rad),
            ("--dc", self.dc_offset[0]),
            ("--dc", self.dc_offset[1]),
            ("--iq-gain-db", self.iq_gain_db),
            ("--iq-phase-deg", self.iq_phase_deg),
            ("--level-dbfs", self.level_dbfs),
            ("--sco-ppm", self.sco_ppm),
            ("--esn0-db", self.esn0_db.unwrap_or(0.0)),
        ];
        for (opt, v) in finite {
            if !v.is_finite() {
                return Err(bad(opt, "a finite number", show(v)));
            }
        }
        let within = |opt: &str, v: f64, (lo, hi): (f64, f64), unit: &str| {
            if (lo..=hi).contains(&v) {
                Ok(())
            } else {
                Err(bad(opt, format!("a number in [{lo}, {hi}]{unit}"), show(v)))
            }
        };
        within("--level-dbfs", self.level_dbfs, ranges::LEVEL_DBFS, " dBFS")?;
        if let Some(e) = self.esn0_db {
            within("--esn0-db", e, ranges::ESN0_DB, " dB")?;
        }
        within("--iq-gain-db", self.iq_gain_db, ranges::IQ_GAIN_DB, " dB")?;
        let iq = ranges::IQ_PHASE_DEG_ABS;
        if self.iq_phase_deg.abs() >= iq {
            return Err(bad(
                "--iq-phase-deg",
                format!("a number in (-{iq}, {iq}) degrees"),
                show(self.iq_phase_deg),
            ));
        }
        // In degrees, as the option is given (a round trip through radians
        // may add an ulp: allow it).
        let deg = ranges::PHASE_DEG_ABS;
        if self.phase_rad.to_degrees().abs() > deg * (1.0 + 1e-12) {
            return Err(bad(
                "--phase-deg",
                format!("a number in [-{deg}, {deg}] degrees"),
                show(self.phase_rad.to_degrees()),
            ));
        }
        for v in self.dc_offset {
            within(
                "--dc",
                v,
                (-ranges::DC_ABS, ranges::DC_ABS),
                " of full scale",
            )?;
        }
        if self.cfo_hz.abs() >= fs / 2.0 {
            return Err(bad(
                "--cfo-hz",
                format!("|CFO| below fs/2 = {} Hz", show(fs / 2.0)),
                show(self.cfo_hz),
            ));
        }
        if self.sco_ppm.abs() > MAX_SCO_PPM {
            return Err(bad(
                "--sco-ppm",
                format!("|offset| at most {MAX_SCO_PPM} ppm"),
                show(self.sco_ppm),
            ));
        }
        if let TimingOffset::Fixed(f) = self.timing {
            if !(f.is_finite() && (-0.5..0.5).contains(&f)) {
                return Err(bad(
                    "--timing-frac",
                    "a fraction in [-0.5, 0.5) or \"random\"",
                    show(f),
                ));
            }
        }
        if self.gap_samples.0 > self.gap_samples.1 {
            return Err(bad(
                "--gap",
                "MIN:MAX with MIN <= MAX",
                format!("{}:{}", self.gap_samples.0, self.gap_samples.1),
            ));
        }
        if let Some(ch) = &self.channel {
            if ch.taps.is_empty() || ch.main_index >= ch.taps.len() {
                return Err(bad(
                    "--channel-main",
                    format!("an index below the number of taps ({})", ch.taps.len()),
                    ch.main_index,
                ));
            }
            if ch
                .taps
                .iter()
                .any(|t| !(t.re.is_finite() && t.im.is_finite()))
            {
                return Err(bad("--channel", "finite taps", "a non-finite tap"));
            }
            let largest = ch.taps.iter().map(|t| t.norm()).fold(0.0, f64::max);
            let (lo, hi) = ranges::TAP_MAGNITUDE;
            if !(lo..=hi).contains(&largest) {
                return Err(bad(
                    "--channel",
                    format!("taps whose largest magnitude is in [{lo:e}, {hi:e}]"),
                    show(largest),
                ));
            }
            if !(ch.drift_hz.is_finite() && ch.drift_hz.abs() < fs / 2.0) {
                return Err(bad(
                    "--drift-hz",
                    format!("|drift| below fs/2 = {} Hz", show(fs / 2.0)),
                    show(ch.drift_hz),
                ));
            }
            // The taps' spread is part of each burst's extent.
            let d = match ch.spacing {
                TapSpacing::Symbol => self.profile.samples_per_symbol,
                TapSpacing::Sample => 1,
            } as u64;
            self.check_size((ch.taps.len() as u64 - 1).saturating_mul(d))?;
        } else {
            self.check_size(0)?;
        }
        Ok(fs)
    }

    /// The capture's size against [`crate::limits::MAX_SYNTH_SAMPLES`]
    /// (`spread`: the channel's, samples).
    fn check_size(&self, spread: u64) -> Result<(), SynthError> {
        let prof = &self.profile;
        let sps = prof.samples_per_symbol as u64;
        let frame = (prof.payload_symbols_per_burst() as u64)
            .saturating_add(prof.training.length_symbols.unwrap_or(0) as u64)
            .saturating_add(2 * prof.pulse.span_symbols as u64)
            .saturating_mul(sps)
            .saturating_add(spread);
        let per_burst = frame.saturating_add(self.gap_samples.1 as u64);
        let total = (self.lead_gap_samples as u64)
            .saturating_add((self.bursts as u64).saturating_mul(per_burst));
        let max = crate::limits::MAX_SYNTH_SAMPLES;
        if total > max {
            return Err(SynthError::TooLarge {
                bursts: self.bursts,
                frame,
                gap_max: self.gap_samples.1,
                lead_gap: self.lead_gap_samples,
                total,
                max,
            });
        }
        Ok(())
    }
}

/// Make the capture: samples (full scale 1.0) and ground truth.
///
/// When the profile gives `symbol_rate_hz` and the sample rate is not
/// `samples_per_symbol` × that rate, the capture is made at the integer rate
/// and resampled to the sample rate with [`crate::signal::Resampler`] (#17);
/// the truth's sample positions are then in the resampled capture, and a
/// sample-spaced channel's spacing is one sample of the integer rate.
pub fn run(spec: &SynthSpec) -> Result<Synthesised, SynthError> {
    let fs = spec.validate()?;
    let prof = &spec.profile;
    // Input (generation-rate) samples per output sample. A receiver clock fast by
    // ε takes output sample `n` at transmit time `n/(fs·(1 + ε))`, i.e. at
    // generation sample `n·ratio/(1 + ε)`.
    let sco = spec.sco_ppm * 1e-6;
    let gen_rate = match prof.resample_to_symbol_rate_hz {
        Some(rs) => rs * prof.samples_per_symbol as f64,
        None => fs,
    };
    let ratio = gen_rate / fs / (1.0 + sco);
    if spec.sco_ppm == 0.0
        && (prof.resample_to_symbol_rate_hz.is_none() || (ratio - 1.0).abs() < 1e-12)
    {
        return run_integer_rate(spec);
    }
    let resampler = crate::signal::Resampler::new(ratio).ok_or_else(|| {
        bad(
            "--sample-rate",
            format!(
                "a rate within a factor {} of samples_per_symbol × symbol_rate_hz ({gen_rate} Hz)",
                crate::signal::resample::MAX_RATIO
            ),
            fs,
        )
    })?;
    let mut inner = spec.clone();
    inner.sample_rate_hz = Some(gen_rate);
    let to_gen = |n: usize| (n as f64 * ratio).ceil() as usize;
    inner.gap_samples = (to_gen(spec.gap_samples.0), to_gen(spec.gap_samples.1));
    inner.lead_gap_samples = to_gen(spec.lead_gap_samples);
    let made = run_integer_rate(&inner)?;
    let samples = resampler.process_all(&made.samples);
    let total = samples.len() as u64;
    let mut truth = made.truth;
    truth.sample_rate_hz = fs;
    truth.total_samples = total;
    // White noise keeps its variance through an interpolator; a decimating
    // low-pass keeps the fraction 1/ratio of it.
    truth.receiver.noise_variance_per_sample *= (1.0 / ratio).min(1.0);
    truth.receiver.gap_samples = [spec.gap_samples.0, spec.gap_samples.1];
    truth.receiver.lead_gap_samples = spec.lead_gap_samples;
    truth.receiver.sco_ppm = spec.sco_ppm;
    for b in &mut truth.bursts {
        let instant = (b.start_sample as f64 + b.timing_frac) / ratio;
        let start = instant.round();
        b.start_sample = start as u64;
        b.timing_frac = instant - start;
        b.first_sample = (b.first_sample as f64 / ratio).floor() as u64;
        b.end_sample = ((b.end_sample as f64 / ratio).ceil() as u64).min(total);
    }
    Ok(Synthesised { samples, truth })
}

/// [`run`] at the integer rate `samples_per_symbol` × the symbol rate.
fn run_integer_rate(spec: &SynthSpec) -> Result<Synthesised, SynthError> {
    let fs = spec.validate()?;
    let prof = &spec.profile;
    let sps = prof.samples_per_symbol;
    let training = prof.training_symbols()?;
    let known = prof.payload_symbols()?;
    let n_before = prof.payload.before_symbols;
    let n_after = prof.payload.after_symbols;
    let nsym = n_before + training.len() + n_after;
    let constellation = Constellation::new(prof.payload.modulation);
    let points = constellation.points();

    // Pulse on the sample grid, laid out and normalised like signal::rrc_taps
    // (half-length ceil(span·sps/2), Σh² = 1).
    let beta = prof.pulse.rolloff;
    let half = (prof.pulse.span_symbols * sps).div_ceil(2);
    let ntaps = 2 * half + 1;
    let energy: f64 = (0..ntaps)
        .map(|m| rrc_impulse((m as f64 - half as f64) / sps as f64, beta).powi(2))
        .sum();
    let gain = 1.0 / energy.sqrt();

    let unit = ChannelSpec {
        taps: vec![Cf64::new(1.0, 0.0)],
        main_index: 0,
        spacing: TapSpacing::Symbol,
        drift_hz: 0.0,
    };
    let ch = spec.channel.as_ref().unwrap_or(&unit);
    let d = match ch.spacing {
        TapSpacing::Symbol => sps,
        TapSpacing::Sample => 1,
    };
    let p_taps = ch.main_index;
    let spread = (ch.taps.len() - 1) * d;
    let w_len = (nsym - 1) * sps + ntaps;
    let burst_len = w_len + spread;

    // Plan: timing, random payload labels and gaps, in burst order (stream 1).
    let mut rng_layout = ChaCha8Rng::seed_from_u64(spec.seed);
    rng_layout.set_stream(1);
    let draw_labels = |n: usize, rng: &mut ChaCha8Rng| -> Vec<u16> {
        (0..n)
            .map(|_| rng.gen_range(0..points.len()) as u16)
            .collect()
    };
    let mut plans = Vec::with_capacity(spec.bursts);
    let mut pos = spec.lead_gap_samples;
    for _ in 0..spec.bursts {
        let frac = match spec.timing {
            TimingOffset::Fixed(f) => f,
            TimingOffset::Random => rng_layout.gen_range(-0.5..0.5),
        };
        let (labels_before, labels_after) = if known.is_some() {
            (None, None)
        } else {
            (
                Some(draw_labels(n_before, &mut rng_layout)),
                Some(draw_labels(n_after, &mut rng_layout)),
            )
        };
        plans.push(BurstPlan {
            pos,
            frac,
            labels_before,
            labels_after,
        });
        let gap = rng_layout.gen_range(spec.gap_samples.0..=spec.gap_samples.1);
        pos += burst_len + gap;
    }
    let total = pos;

    // Level and noise.
    let amplitude = (10f64.powf(spec.level_dbfs / 10.0) * sps as f64).sqrt();
    let noise_var = spec
        .esn0_db
        .map_or(0.0, |e| amplitude * amplitude / 10f64.powf(e / 10.0));
    let mut samples = vec![Cf32::new(0.0, 0.0); total];
    if noise_var > 0.0 {
        let mut rng_noise = ChaCha8Rng::seed_from_u64(spec.seed);
        rng_noise.set_stream(2);
        let s = (noise_var / 2.0).sqrt();
        for x in samples.iter_mut() {
            let re: f64 = rng_noise.sample(StandardNormal);
            let im: f64 = rng_noise.sample(StandardNormal);
            *x = Cf32::new((s * re) as f32, (s * im) as f32);
        }
    }

    // Bursts, made block by block so that memory stays bounded whatever the
    // burst length: w = pulse-shaped symbols, y = w through the channel.
    // Each sample is summed in a fixed order (ascending symbol, ascending tap).
    let mut symbols: Vec<Cf32> = Vec::with_capacity(nsym);
    let mut pulse = vec![0f64; ntaps];
    let mut wblock = vec![Cf64::new(0.0, 0.0); BLOCK + spread];
    let mut bursts = Vec::with_capacity(spec.bursts);
    let two_pi = 2.0 * std::f64::consts::PI;
    let cycles_per_sample = spec.cfo_hz / fs;
    for (index, plan) in plans.iter().enumerate() {
        symbols.clear();
        match (&known, &plan.labels_before) {
            (Some(k), _) => symbols.extend_from_slice(&k.before),
            (None, Some(lb)) => symbols.extend(lb.iter().map(|&l| points[l as usize])),
            _ => {}
        }
        symbols.extend_from_slice(&training);
        match (&known, &plan.labels_after) {
            (Some(k), _) => symbols.extend_from_slice(&k.after),
            (None, Some(la)) => symbols.extend(la.iter().map(|&l| points[l as usize])),
            _ => {}
        }

        // Pulse at the fractional delay; symbol k peaks at k·sps + half + frac in w.
        for (m, p) in pulse.iter_mut().enumerate() {
            *p = gain * rrc_impulse((m as f64 - half as f64 - plan.frac) / sps as f64, beta);
        }
        let local_start = p_taps * d + n_before * sps + half;
        let local_instant = local_start as f64 + plan.frac;

        let mut j0 = 0;
        while j0 < burst_len {
            let j1 = (j0 + BLOCK).min(burst_len);
            // w over [a, b): everything the channel needs for y[j0..j1).
            let a = j0.saturating_sub(spread);
            let b = j1.min(w_len);
            for i in a..b {
                // w[i] = Σ_k x_k·pulse[i − k·sps] over 0 ≤ i − k·sps < ntaps.
                let k_lo = (i + 1).saturating_sub(ntaps).div_ceil(sps);
                let k_hi = (i / sps).min(nsym - 1);
                let mut acc = Cf64::new(0.0, 0.0);
                for k in k_lo..=k_hi {
                    let x = symbols[k];
                    acc += Cf64::new(x.re as f64, x.im as f64) * pulse[i - k * sps];
                }
                wblock[i - a] = acc;
            }
            for j in j0..j1 {
                // y[j] = Σ_t h_t(j)·w[j − t·D]; main path delayed by P·D.
                let mut v = Cf64::new(0.0, 0.0);
                for (t, &h) in ch.taps.iter().enumerate() {
                    let off = t * d;
                    if j < off || j - off >= w_len {
                        continue;
                    }
                    let ht = if t != p_taps && ch.drift_hz != 0.0 {
                        let ph = two_pi * ch.drift_hz * (j as f64 - local_instant) / fs;
                        h * Cf64::new(ph.cos(), ph.sin())
                    } else {
                        h
                    };
                    v += ht * wblock[j - off - a];
                }
                // Carrier, level, and add onto the noise.
                let n = plan.pos + j;
                let turns = (cycles_per_sample * n as f64).fract();
                let ph = spec.phase_rad + two_pi * turns;
                let z = v * Cf64::new(ph.cos(), ph.sin()) * amplitude;
                let s = &mut samples[n];
                *s = Cf32::new((s.re as f64 + z.re) as f32, (s.im as f64 + z.im) as f32);
            }
            j0 = j1;
        }

        let start_sample = (plan.pos + local_start) as u64;
        let instant = start_sample as f64 + plan.frac;
        let payload = TruthPayload {
            modulation: prof.payload.modulation,
            before_symbols: n_before,
            after_symbols: n_after,
            source: if known.is_some() { "rule" } else { "random" }.to_string(),
            labels_before: plan.labels_before.clone(),
            labels_after: plan.labels_after.clone(),
        };
        bursts.push(TruthBurst {
            index,
            start_sample,
            timing_frac: plan.frac,
            first_sample: plan.pos as u64,
            end_sample: (plan.pos + burst_len) as u64,
            cfo_hz: spec.cfo_hz,
            phase_rad: wrap_phase(spec.phase_rad + two_pi * (cycles_per_sample * instant).fract()),
            esn0_db: spec.esn0_db,
            amplitude,
            taps: ch.taps.iter().map(|t| [t.re, t.im]).collect(),
            main_index: ch.main_index,
            tap_spacing: ch.spacing,
            drift_hz: ch.drift_hz,
            training_modulation: prof.training.modulation,
            training_symbols: training.len(),
            payload,
        });
    }

    // Receiver IQ imbalance, then DC.
    if spec.iq_gain_db != 0.0 || spec.iq_phase_deg != 0.0 || spec.dc_offset != [0.0, 0.0] {
        let g = 10f64.powf(spec.iq_gain_db / 20.0);
        let (sin_phi, cos_phi) = spec.iq_phase_deg.to_radians().sin_cos();
        for s in samples.iter_mut() {
            let (i, q) = (s.re as f64, s.im as f64);
            let q2 = g * (q * cos_phi - i * sin_phi);
            *s = Cf32::new(
                (i + spec.dc_offset[0]) as f32,
                (q2 + spec.dc_offset[1]) as f32,
            );
        }
    }

    let truth = GroundTruth {
        schema: TRUTH_SCHEMA.to_string(),
        tool: crate::report::schema::ToolInfo::this(),
        command: None,
        seed: spec.seed,
        sample_rate_hz: fs,
        total_samples: total as u64,
        capture: None,
        receiver: TruthReceiver {
            noise_variance_per_sample: noise_var,
            phase_at_sample0_rad: spec.phase_rad,
            dc_offset: spec.dc_offset,
            iq_gain_db: spec.iq_gain_db,
            iq_phase_deg: spec.iq_phase_deg,
            level_dbfs: spec.level_dbfs,
            gap_samples: [spec.gap_samples.0, spec.gap_samples.1],
            lead_gap_samples: spec.lead_gap_samples,
            sco_ppm: 0.0,
        },
        profile: prof.clone(),
        bursts,
    };
    Ok(Synthesised { samples, truth })
}

/// Where and how [`write_outputs`] stores the capture.
#[derive(Debug, Clone, PartialEq)]
pub struct OutputSpec {
    /// Raw layout or WAV encoding.
    pub container: Container,
    /// Also write a SigMF sidecar (raw layouts only).
    pub sigmf_sidecar: bool,
    /// Centre frequency for the sidecar, Hz (default: the profile's).
    pub center_freq_hz: Option<f64>,
}

/// Parse an output format: a SigMF raw name (`cf32_le`, `ci16_le`, …) or a WAV
/// encoding written `wav_pcm8`, `wav_pcm16`, `wav_pcm24`, `wav_pcm32`,
/// `wav_float32` (the names `capture::Container` displays).
pub fn parse_container(text: &str) -> Result<Container, SynthError> {
    if let Ok(f) = text.parse::<SampleFormat>() {
        return Ok(Container::Raw(f));
    }
    WavEncoding::ALL
        .iter()
        .find(|e| format!("wav_{e}") == text)
        .map(|&e| Container::Wav(e))
        .ok_or_else(|| {
            let wav: Vec<String> = WavEncoding::ALL
                .iter()
                .map(|e| format!("wav_{e}"))
                .collect();
            bad(
                "--format",
                format!(
                    "one of {}, {}",
                    SampleFormat::accepted_names(),
                    wav.join(", ")
                ),
                text,
            )
        })
}

/// The container [`write_outputs`] uses when none is named: a `.wav` file gets
/// 16-bit PCM; otherwise the profile's `capture.format`, else the format the
/// reader infers from the extension, else `cf32_le`. An extension that names a
/// different raw format from the profile's is refused (`--out`), so a file is
/// never named for one layout while holding another.
pub fn default_container(out: &Path, profile: &ResolvedProfile) -> Result<Container, SynthError> {
    let ext = out
        .extension()
        .and_then(|e| e.to_str())
        .map(|e| e.to_ascii_lowercase());
    if ext.as_deref() == Some("wav") {
        return Ok(Container::Wav(WavEncoding::Pcm16));
    }
    let by_ext = ext.as_deref().and_then(SampleFormat::from_extension);
    match (profile.capture.format, by_ext) {
        // A file named for one layout but holding another would be misread by
        // anything that goes by the name (including `iqaudit info`).
        (Some(p), Some(e)) if p != e => Err(bad(
            "--out",
            format!(
                "a name whose extension matches the profile's capture.format {} (or --format {} to write what the name says)",
                p.name(),
                e.name()
            ),
            format!("{} (the extension means {})", out.display(), e.name()),
        )),
        (Some(p), _) => Ok(Container::Raw(p)),
        (None, Some(e)) => Ok(Container::Raw(e)),
        (None, None) => Ok(Container::Raw(SampleFormat::Cf32Le)),
    }
}

/// Synthesise and write the capture (atomically, via `capture::write_capture`),
/// its SigMF sidecar when asked, and `FILE.truth.json`. `command` is recorded
/// in the truth. Returns the truth as written.
pub fn write_outputs(
    spec: &SynthSpec,
    out: &Path,
    output: &OutputSpec,
    command: Option<String>,
) -> Result<GroundTruth, SynthError> {
    let Synthesised { samples, mut truth } = run(spec)?;
    let center_freq_hz = output
        .center_freq_hz
        .or(spec.profile.capture.center_freq_hz);
    let write_spec = WriteSpec {
        container: output.container,
        sample_rate_hz: truth.sample_rate_hz,
        center_freq_hz,
        sigmf_sidecar: output.sigmf_sidecar,
        description: Some(format!(
            "iqaudit synth test stimulus, seed {}, {} bursts",
            spec.seed, spec.bursts
        )),
        annotations: truth_annotations(&truth, center_freq_hz),
        unsigned_zero: crate::capture::UnsignedZero::default(),
    };
    let stats = write_capture(out, &samples, &write_spec).map_err(|e| SynthError::Write {
        path: out.to_path_buf(),
        message: e.to_string(),
    })?;
    drop(samples);
    truth.command = command;
    truth.capture = Some(TruthCapture {
        file: out
            .file_name()
            .map(|f| f.to_string_lossy().into_owned())
            .unwrap_or_default(),
        format: output.container.to_string(),
        clipped: stats.clipped,
    });
    let tpath = truth_path(out);
    let mut json = serde_json::to_string_pretty(&truth).map_err(|e| SynthError::Write {
        path: tpath.clone(),
        message: e.to_string(),
    })?;
    json.push('\n');
    crate::atomic::write_atomic(&tpath, json.as_bytes()).map_err(|e| SynthError::Write {
        path: tpath.clone(),
        message: e.to_string(),
    })?;
    Ok(truth)
}

/// The ground truth as SigMF annotations, one per burst: `core:sample_start` /
/// `core:sample_count` span every sample the burst touches
/// (`first_sample..end_sample`), the frequency edges are the carrier (centre
/// frequency, 0 when unknown, plus the CFO) ± half the occupied bandwidth
/// `(1 + β)·fs/sps` of the RRC pulse, and the `iqaudit:` keys give the truth
/// (docs/sigmf.md).
pub fn truth_annotations(truth: &GroundTruth, center_freq_hz: Option<f64>) -> Vec<SigmfAnnotation> {
    let prof = &truth.profile;
    let half_bw = 0.5 * (1.0 + prof.pulse.rolloff) * truth.sample_rate_hz
        / prof.samples_per_symbol.max(1) as f64;
    truth
        .bursts
        .iter()
        .map(|b| {
            let carrier = center_freq_hz.unwrap_or(0.0) + b.cfo_hz;
            let mut ext = std::collections::BTreeMap::new();
            ext.insert("kind".to_string(), serde_json::json!("truth"));
            ext.insert("burst_index".to_string(), serde_json::json!(b.index));
            ext.insert(
                "start_sample".to_string(),
                serde_json::json!(b.start_sample),
            );
            ext.insert("cfo_hz".to_string(), serde_json::json!(b.cfo_hz));
            ext.insert("esn0_db".to_string(), serde_json::json!(b.esn0_db));
            SigmfAnnotation {
                sample_start: b.first_sample,
                sample_count: b.end_sample.saturating_sub(b.first_sample),
                label: format!("burst {} (truth)", b.index),
                freq_lower_edge_hz: Some(carrier - half_bw),
                freq_upper_edge_hz: Some(carrier + half_bw),
                comment: Some("iqaudit synth ground truth".into()),
                extension: ext,
            }
        })
        .collect()
}

/// The truth file path for a capture: `FILE.truth.json` beside it.
pub fn truth_path(capture: &Path) -> PathBuf {
    let mut s = capture.as_os_str().to_owned();
    s.push(".truth.json");
    PathBuf::from(s)
}

#[cfg(test)]
mod tests;
