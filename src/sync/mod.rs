//! Synchronisation: find every occurrence of the training block, estimate and remove
//! carrier offset, carrier phase and symbol timing, and cut out symbol-rate samples.
//!
//! Takes in: a capture as complex samples ([`Cf32`], whole slice or chunk by chunk
//! through a [`SampleSource`]), the training symbols, the pulse taps (odd length, centre
//! tap at `(len − 1)/2`, e.g. RRC), and a plain [`SyncConfig`] (samples per symbol,
//! sample rate, largest expected carrier offset, threshold). It does not know about
//! the link profile.
//!
//! Gives out: [`Detection`]s (coarse burst positions), [`BurstSync`] (per burst:
//! `start_sample`, `timing_frac`, `metric`, `cfo_hz`, `phase_rad`, …) and matched-filtered,
//! timing- and CFO-corrected symbol-rate samples ([`Synchroniser::extract_symbols`]).
//!
//! ## Conventions
//!
//! * **Timing**: `start_sample` is the capture sample index nearest the instant of the
//!   first training symbol (the centre of its pulse); `timing_frac ∈ [−0.5, 0.5)` samples
//!   refines it: instant `t₀ = start_sample + timing_frac`. Symbol `k` (0 = first
//!   training symbol, negative before it) is at `t₀ + k·sps`.
//! * **CFO** follows the crate convention (received = ideal·exp(+j2π·cfo_hz·t)); extracted
//!   symbols are multiplied by `exp(−j2π·cfo_hz·(n − t₀)/fs)`, so the correction has zero
//!   phase at the first training symbol. `phase_rad` is the phase of
//!   `Σ_k z_k·conj(t_k)` over the corrected training; it is reported but **left in** the
//!   symbols (the channel taps absorb it).
//! * **Metric**: `ρ[n] = |Σ_m conj(r[m])·x[n+m]|² / (Σ|r|² · Σ_m |x[n+m]|²) ∈ [0, 1]` with
//!   `r` the search reference (below); 0 where the window is silent.
//!
//! ## The search reference
//!
//! The training symbols are shaped with the pulse at `sps` (upsample and filter) and
//! cut to the training's own span: from half a symbol before the first training
//! symbol's instant to half a symbol after the last one (`L = (N−1)·sps + 2⌊sps/2⌋ + 1`
//! samples for `N` training symbols). The pulse tails outside that span overlap the
//! neighbouring payload and add nothing but interference. The capture is virtually
//! padded with `⌊sps/2⌋` zeros at both ends, so that correlation lag `n` *is* the
//! first-symbol instant: a burst is detectable whenever every training symbol's
//! instant lies inside the capture (including a burst that starts a fraction of a
//! symbol into the file).
//!
//! ## Carrier offset: a bank of frequency hypotheses (and why)
//!
//! A carrier offset `f` (cycles/sample) rotates the training by `2π·f·L` across the
//! reference and the coherent peak falls as `|sinc(f·L)|²` (−3.9 dB at `f·L = 0.5`).
//! Two remedies cost the same per output sample — one extra complex multiply and one
//! inverse FFT per branch per block, the forward FFT of the input being shared:
//! (a) split the reference into `S` segments and add the `|c_s|²` non-coherently, or
//! (b) correlate with `H` frequency-shifted copies of the whole reference and keep the
//! best. We use (b): the winning branch keeps the **full coherent gain** of the
//! training (non-coherent combining of `S` segments loses up to several dB at the low
//! per-segment SNR where detection matters), its noise statistics are exactly the
//! single-reference ones (so the false-alarm derivation below carries over with a union
//! bound over `H`), and with the default one-hypothesis case (`max_cfo_hz` small) the
//! correlation is just one forward and one inverse FFT per block. Hypotheses are spaced
//! `δ = 0.5/L` cycles/sample, so the worst mismatch `δ/2` costs `|sinc(0.25)|² = −0.9 dB`;
//! `H = 2K+1` with `K = ⌈f_max/δ − ½⌉` (`K = 0` when `f_max ≤ 0.25/L`). Segments are
//! still used *after* detection, once per burst, for the coarse estimate (below).
//!
//! Per burst: coarse CFO = hypothesis + phase advance between `cfo_segments` segment
//! correlations at the detected lag ([`cfo::segment_frequency`]); then the samples are
//! de-rotated, matched-filtered, the fractional instant found by maximising the
//! training correlation over fractional delays ([`timing::best_instant`], windowed-sinc
//! interpolation), and the residual CFO estimated **channel-aware**: the taps are fitted
//! by least squares on the de-rotated training samples `z_k` ([`crate::channel::fit_channel`],
//! up to 3 pre- and 3 post-cursor taps), the channel-filtered training `ŷ = h ∗ t` is
//! rebuilt, and the frequency is the maximiser of the periodogram of `z_k·conj(ŷ_k)`
//! ([`cfo::periodogram_frequency`]: grid over ± two main lobes, then golden section).
//! Timing and CFO are iterated twice, which is the alternating maximisation of the
//! joint (frequency, taps) likelihood (the joint ML frequency/channel estimation of the
//! literature, e.g. Morelli & Mengali 2000 — from memory). A training-only estimate
//! (Kay's, on `z_k·conj(t_k)`) treats the ISI as noise: in the tests it was 9.9 kHz off
//! on Proakis channel B at 12 dB (phase differences of samples the ISI drives near
//! zero) and biased by +18 Hz (rms 20 Hz, CRB σ 6.8 Hz) on mild multipath at 20 dB; the
//! channel-aware estimate meets the adapted Cramér–Rao bound on both.
//!
//! ## Default threshold from a false-alarm rate (derivation)
//!
//! Under noise only, let the window `w = x[n..n+L]` be circular complex Gaussian with
//! covariance `σ²I` (white at the sample rate). Then `ρ = |r^H w|²/(‖r‖²‖w‖²)` is the
//! squared cosine between an isotropic vector and a fixed direction: in an orthonormal
//! basis whose first vector is `r/‖r‖`, `ρ = |w₁|²/Σ_{i≤L}|w_i|²` with `|w_i|²` i.i.d.
//! exponential, so `ρ ~ Beta(1, L−1)` exactly and `P(ρ > γ) = (1−γ)^{L−1}`. Noise that is
//! band-limited to a fraction `B` of the sample rate (a receiver filter) has only about
//! `B·L` degrees of freedom in the window, so the law becomes approximately
//! `Beta(1, L_eff − 1)` with `L_eff ≈ B·L`. An RRC link's band is `B = (1+β)/sps`, so
//! `L_eff ≥ N` (training symbols) for any noise at least as wide as the symbol rate;
//! we use the conservative **`L_eff = N`** (more false alarms predicted than occur for
//! white noise, where `L_eff = L ≈ N·sps`). With `H` hypotheses the union bound gives
//! `P_fa/lag ≤ H·(1−γ)^{L_eff−1}`, and the expected number of false alarms in `M`
//! lags is at most `M·H·(1−γ)^{L_eff−1}` (merging within `min_spacing` only lowers it).
//! The default threshold targets [`DEFAULT_FALSE_ALARMS_PER_1E8_SAMPLES`] `= 1e-3`
//! expected false alarms per 10⁸ samples (≪ 1):
//! `γ = 1 − (10⁻¹¹/H)^{1/(N−1)}` — e.g. `N = 127, H = 1 → γ = 0.182`; `N = 31 → 0.57`.
//! See [`threshold_for_false_alarms`] and [`expected_false_alarms`]; the tests check the
//! tail law on white and band-limited noise and the count on 10⁸ noise samples.
//!
//! ## Parallelism and determinism
//!
//! The search runs over chunks of whole FFT blocks on a fixed global block grid, in
//! parallel with rayon; every lag's value is computed by exactly one block, candidates
//! are collected in chunk order and merged by a total order (metric, then lag), so the
//! result is identical for any thread count and for slice versus chunked input.
use std::collections::BTreeMap;
use std::ops::Range;

use rayon::prelude::*;
use serde::{Deserialize, Serialize};

use crate::Cf32;

pub mod burst;
pub mod cfo;
pub mod correlate;
pub mod timing;

pub use correlate::OverlapSave;

/// Target of the default threshold: expected false alarms per 10⁸ noise samples.
pub const DEFAULT_FALSE_ALARMS_PER_1E8_SAMPLES: f64 = 1e-3;

/// FFT blocks per parallel work item of the search.
const BLOCKS_PER_CHUNK: usize = 64;

/// Errors of the synchroniser.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum SyncError {
    /// A configuration value or a construction input is out of range.
    #[error("sync setting `{key}`: expected {expected}, found {found}")]
    InvalidConfig {
        /// Which setting.
        key: &'static str,
        /// What is allowed.
        expected: String,
        /// What was given.
        found: String,
    },
    /// The capture cannot hold the training block at all.
    #[error("capture has {samples} samples, shorter than the training block ({needed} samples)")]
    CaptureTooShort {
        /// Samples in the capture.
        samples: usize,
        /// Samples spanned by the training symbols' instants.
        needed: usize,
    },
    /// The sample source failed.
    #[error("reading samples at {start_sample}: {source}")]
    Read {
        /// First sample of the failed read.
        start_sample: usize,
        /// The reader's error.
        source: Box<dyn std::error::Error + Send + Sync>,
    },
}

/// Plain settings of the synchroniser (the analysis code maps the profile onto this).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SyncConfig {
    /// Samples per symbol of the capture (≥ 1).
    pub sps: usize,
    /// Sample rate, Hz (> 0); only converts cycles/sample to Hz.
    pub sample_rate_hz: f64,
    /// Largest expected carrier offset magnitude, Hz (≥ 0, at most a quarter of the
    /// symbol rate).
    pub max_cfo_hz: f64,
    /// Detection threshold on the normalised metric, in (0, 1]; `None` derives it from
    /// [`DEFAULT_FALSE_ALARMS_PER_1E8_SAMPLES`] (see the module doc).
    pub threshold: Option<f64>,
    /// Peaks closer than this many samples merge (the biggest is kept); `None` uses the
    /// search reference length. Set it to the frame length when known.
    pub min_spacing_samples: Option<usize>,
    /// Segments of the reference for the coarse CFO estimate (≥ 1; 1 disables it).
    pub cfo_segments: usize,
}

impl SyncConfig {
    /// Settings with defaults: no carrier offset expected, derived threshold,
    /// spacing = reference length, 4 coarse-CFO segments.
    pub fn new(sps: usize, sample_rate_hz: f64) -> SyncConfig {
        SyncConfig {
            sps,
            sample_rate_hz,
            max_cfo_hz: 0.0,
            threshold: None,
            min_spacing_samples: None,
            cfo_segments: 4,
        }
    }
}

/// A coarse detection from the search.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Detection {
    /// Whole-sample estimate of the first training symbol's instant (capture index).
    pub start_sample: usize,
    /// Normalised metric at that lag, in [0, 1].
    pub metric: f64,
    /// Centre frequency of the winning carrier-offset hypothesis, Hz.
    pub cfo_hypothesis_hz: f64,
}

/// Synchronisation result of one burst.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BurstSync {
    /// Capture sample index nearest the first training symbol's instant (normally
    /// within the capture; it can be −1 only if refinement moves an edge burst's
    /// instant before sample −0.5).
    pub start_sample: i64,
    /// Fractional part of the instant, samples, in [−0.5, 0.5).
    pub timing_frac: f64,
    /// Detection metric (from the search), [0, 1].
    pub metric: f64,
    /// Carrier frequency offset, Hz (crate sign convention).
    pub cfo_hz: f64,
    /// Coarse CFO (hypothesis + segment phases), Hz.
    pub cfo_coarse_hz: f64,
    /// Carrier phase of the corrected training at the first training symbol, radians.
    pub phase_rad: f64,
    /// Amplitude gain of the training: `|Σ z_k·conj(t_k)| / Σ|t_k|²`.
    pub training_gain: f64,
    /// Symbol indices whose instants lie inside the capture (`0` = first training symbol).
    pub symbols_in_capture: Range<i64>,
    /// Instant of the training-correlation peak, samples. [`Synchroniser::refine`]
    /// times the burst there; [`Synchroniser::align`] moves the instant to the one
    /// best for the channel fit and keeps this.
    #[serde(default)]
    pub peak_instant: f64,
    /// Sample-clock offset applied by [`Synchroniser::extract_symbols`], ppm
    /// (crate convention: symbol `k` at `instant() + k·sps·(1 + sco_ppm·1e-6)`);
    /// 0 from [`Synchroniser::refine`] and [`Synchroniser::align`].
    #[serde(default)]
    pub sco_ppm: f64,
}

impl BurstSync {
    /// Instant of the first training symbol, samples: `start_sample + timing_frac`.
    pub fn instant(&self) -> f64 {
        self.start_sample as f64 + self.timing_frac
    }

    /// Samples per symbol on the capture's clock: `sps·(1 + sco_ppm·1e-6)`.
    pub fn symbol_spacing(&self, sps: usize) -> f64 {
        let spsf = sps as f64;
        if self.sco_ppm == 0.0 {
            spsf
        } else {
            spsf * (1.0 + self.sco_ppm * 1e-6)
        }
    }

    /// Instant of symbol `k` (0 = first training symbol), capture samples.
    pub fn symbol_instant(&self, k: i64, sps: usize) -> f64 {
        self.instant() + k as f64 * self.symbol_spacing(sps)
    }

    /// The same burst with its instant moved by `shift` samples and the clock
    /// offset set to `sco_ppm`; `symbols_in_capture` follows for a capture of
    /// `capture_len` samples (the other fields are kept).
    pub fn retimed(&self, shift: f64, sco_ppm: f64, sps: usize, capture_len: u64) -> BurstSync {
        let t0 = self.instant() + shift;
        let start_sample = (t0 + 0.5).floor() as i64;
        let mut b = BurstSync {
            start_sample,
            timing_frac: t0 - start_sample as f64,
            sco_ppm,
            ..self.clone()
        };
        b.symbols_in_capture = symbols_inside(t0, b.symbol_spacing(sps), capture_len);
        b
    }
}

/// Symbol indices `k` whose instants `t0 + k·spacing` lie in `[0, len − 1]`.
pub(crate) fn symbols_inside(t0: f64, spacing: f64, len: u64) -> Range<i64> {
    let len = len as f64;
    let k_lo = (-t0 / spacing).ceil() as i64;
    let k_hi = ((len - 1.0 - t0) / spacing).floor() as i64 + 1;
    k_lo..k_hi.max(k_lo)
}

/// Which symbols of a requested range [`Synchroniser::extract_symbols`] produced.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct SymbolSpan {
    /// Requested symbol indices.
    pub requested: Range<i64>,
    /// Produced ones (a sub-range of `requested`; the others are written as 0).
    pub available: Range<i64>,
}

impl SymbolSpan {
    /// Whether part of the request lies outside the capture.
    pub fn truncated(&self) -> bool {
        self.available != self.requested
    }
    /// Number of symbols produced.
    pub fn count(&self) -> usize {
        (self.available.end - self.available.start).max(0) as usize
    }
}

/// Anything the synchroniser can read samples from: a slice, or a chunk reader over a
/// memory map (see [`ChunkReader`]). Reads never extend past `len()`.
pub trait SampleSource: Sync {
    /// Number of complex samples.
    fn len(&self) -> usize;
    /// Whether the source has no samples.
    fn is_empty(&self) -> bool {
        self.len() == 0
    }
    /// Fill `out` with samples `[start, start + out.len())`.
    fn read(&self, start: usize, out: &mut [Cf32]) -> Result<(), SyncError>;
}

impl SampleSource for [Cf32] {
    fn len(&self) -> usize {
        <[Cf32]>::len(self)
    }
    fn read(&self, start: usize, out: &mut [Cf32]) -> Result<(), SyncError> {
        out.copy_from_slice(&self[start..start + out.len()]);
        Ok(())
    }
}

/// A [`SampleSource`] from a length and a read function, e.g.
/// `ChunkReader::new(cap.len(), |s, out| cap.read_into(s, out).map(|_| ()))`.
pub struct ChunkReader<F> {
    len: usize,
    read: F,
}

impl<F> ChunkReader<F> {
    /// Wrap `read(start, out)` over `len` samples.
    pub fn new(len: usize, read: F) -> ChunkReader<F> {
        ChunkReader { len, read }
    }
}

impl<F, E> SampleSource for ChunkReader<F>
where
    F: Fn(usize, &mut [Cf32]) -> Result<(), E> + Sync,
    E: std::error::Error + Send + Sync + 'static,
{
    fn len(&self) -> usize {
        self.len
    }
    fn read(&self, start: usize, out: &mut [Cf32]) -> Result<(), SyncError> {
        (self.read)(start, out).map_err(|e| SyncError::Read {
            start_sample: start,
            source: Box::new(e),
        })
    }
}

/// Read `out.len()` samples starting at `start` (may be negative or run past the end);
/// samples outside the source are zero.
pub(crate) fn read_padded<S: SampleSource + ?Sized>(
    src: &S,
    start: i64,
    out: &mut [Cf32],
) -> Result<(), SyncError> {
    let zero = Cf32::new(0.0, 0.0);
    let len = src.len() as i64;
    let lo = start.max(0);
    let hi = (start + out.len() as i64).min(len);
    if lo < hi {
        // Zero only the padding: the read overwrites the rest.
        let a = (lo - start) as usize;
        let b = (hi - start) as usize;
        out[..a].fill(zero);
        out[b..].fill(zero);
        src.read(lo as usize, &mut out[a..b])?;
    } else {
        out.fill(zero);
    }
    Ok(())
}

/// Threshold `γ` such that `hypotheses·(1−γ)^{l_eff−1} = per_lag_probability`
/// (module doc). `l_eff` is clamped to ≥ 2.
pub fn threshold_for_false_alarms(l_eff: f64, hypotheses: usize, per_lag_probability: f64) -> f64 {
    let l = l_eff.max(2.0);
    let p = (per_lag_probability / hypotheses.max(1) as f64).clamp(0.0, 1.0);
    1.0 - p.powf(1.0 / (l - 1.0))
}

/// Expected false alarms (upper bound) over `lags` noise lags at threshold `γ`:
/// `lags·hypotheses·(1−γ)^{l_eff−1}`.
pub fn expected_false_alarms(threshold: f64, l_eff: f64, hypotheses: usize, lags: f64) -> f64 {
    lags * hypotheses as f64 * (1.0 - threshold).max(0.0).powf(l_eff.max(2.0) - 1.0)
}

/// One lag above threshold.
#[derive(Debug, Clone, Copy)]
struct Candidate {
    lag: usize,
    rho: f64,
    hyp: usize,
}

/// Per-thread buffers of the search.
struct Worker {
    chunk: Vec<Cf32>,
    scratch: Vec<Cf32>,
    bufs: correlate::ScanBuffers,
}

/// The synchroniser's sizes and derived settings, known before it is built
/// ([`Synchroniser::dimensions`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SyncDimensions {
    /// Samples in the search reference (the trimmed shaped training).
    pub reference_len: usize,
    /// Index in the reference of the first training symbol's instant.
    pub head: usize,
    /// Carrier-offset hypotheses searched (odd, ≥ 1).
    pub hypotheses: usize,
    /// Spacing of the hypotheses, cycles/sample.
    pub hypothesis_step: f64,
    /// The threshold the synchroniser will use (given or derived).
    pub threshold: f64,
    /// Fewest samples a capture must hold to be searched, `(N−1)·sps + 1`
    /// (as [`Synchroniser::min_capture_len`]).
    pub min_capture_len: usize,
}

/// The synchroniser: built once per training/pulse/config, shared across threads.
#[derive(Debug)]
pub struct Synchroniser {
    cfg: SyncConfig,
    training: Vec<Cf32>,
    pulse: Vec<f32>,
    /// Trimmed shaped training.
    reference: Vec<Cf32>,
    /// Index in `reference` of the first training symbol's instant (= padding).
    head: usize,
    ref_energy: f64,
    /// Hypothesis frequencies, cycles/sample.
    hyps: Vec<f64>,
    corr: OverlapSave,
    threshold: f64,
    min_spacing: usize,
}

impl Synchroniser {
    /// The synchroniser's sizes for a training of `training_len` symbols and a
    /// pulse of `pulse_len` taps, with every setting checked — without building
    /// anything: no waveform, bank or FFT plan is allocated. [`Synchroniser::new`]
    /// makes the same checks (this function) first; a caller that knows the
    /// capture's length compares it with [`SyncDimensions::min_capture_len`]
    /// before paying for the build (the reference alone is
    /// `training_len × sps` samples).
    ///
    /// Errors ([`SyncError::InvalidConfig`]): as [`Synchroniser::new`], except the
    /// training's energy, which needs its symbols.
    pub fn dimensions(
        training_len: usize,
        pulse_len: usize,
        cfg: &SyncConfig,
    ) -> Result<SyncDimensions, SyncError> {
        let bad = |key: &'static str, expected: &str, found: String| {
            Err(SyncError::InvalidConfig {
                key,
                expected: expected.to_string(),
                found,
            })
        };
        if training_len == 0 {
            return bad("training", "at least one symbol", "0 symbols".into());
        }
        if pulse_len == 0 || pulse_len % 2 == 0 {
            return bad(
                "pulse",
                "an odd number of taps (centred pulse)",
                format!("{pulse_len} taps"),
            );
        }
        if cfg.sps == 0 {
            return bad("sps", "an integer ≥ 1", "0".into());
        }
        if !(cfg.sample_rate_hz.is_finite() && cfg.sample_rate_hz > 0.0) {
            return bad(
                "sample_rate_hz",
                "a positive number",
                cfg.sample_rate_hz.to_string(),
            );
        }
        let max_rel = cfg.max_cfo_hz / cfg.sample_rate_hz * cfg.sps as f64;
        if !(cfg.max_cfo_hz.is_finite() && cfg.max_cfo_hz >= 0.0 && max_rel <= 0.25) {
            return bad(
                "max_cfo_hz",
                "a number in [0, symbol rate / 4]",
                cfg.max_cfo_hz.to_string(),
            );
        }
        if let Some(t) = cfg.threshold {
            if !(t > 0.0 && t <= 1.0) {
                return bad("threshold", "a number in (0, 1]", t.to_string());
            }
        }
        if cfg.min_spacing_samples == Some(0) {
            return bad("min_spacing_samples", "an integer ≥ 1", "0".into());
        }
        if cfg.cfo_segments == 0 {
            return bad("cfo_segments", "an integer ≥ 1", "0".into());
        }
        let sps = cfg.sps;
        let d = (pulse_len - 1) / 2;
        let half = (sps / 2).min(d);
        let too_long = || {
            bad(
                "max_cfo_hz",
                "at most 4097 frequency hypotheses for this training, and at most 2^24 samples in the hypothesis bank (hypotheses × reference length)",
                "a reference longer than the bank".to_string(),
            )
        };
        let Some(ref_len) = (training_len - 1)
            .checked_mul(sps)
            .and_then(|v| v.checked_add(2 * half + 1))
        else {
            return too_long();
        };
        let f_max = cfg.max_cfo_hz / cfg.sample_rate_hz;
        let delta = 0.5 / ref_len as f64;
        let k = ((f_max / delta - 0.5).ceil()).max(0.0) as i64;
        if k > 2048
            || (2 * k as usize + 1).saturating_mul(ref_len) > crate::limits::MAX_SYNC_BANK_SAMPLES
        {
            return bad(
                "max_cfo_hz",
                "at most 4097 frequency hypotheses for this training, and at most 2^24 samples in the hypothesis bank (hypotheses × reference length)",
                format!("{}", 2 * k + 1),
            );
        }
        let hypotheses = 2 * k as usize + 1;
        let threshold = cfg.threshold.unwrap_or_else(|| {
            threshold_for_false_alarms(
                training_len as f64,
                hypotheses,
                DEFAULT_FALSE_ALARMS_PER_1E8_SAMPLES / 1e8,
            )
        });
        Ok(SyncDimensions {
            reference_len: ref_len,
            head: half,
            hypotheses,
            hypothesis_step: delta,
            threshold,
            min_capture_len: (training_len - 1) * sps + 1,
        })
    }

    /// Build the search reference, the hypothesis bank and the FFT plans.
    ///
    /// Errors ([`SyncError::InvalidConfig`]): empty training, empty or even-length
    /// pulse, `sps = 0`, non-positive sample rate, negative or too large `max_cfo_hz`,
    /// threshold outside (0, 1], zero spacing or segments (all checked by
    /// [`Synchroniser::dimensions`] before anything is allocated), a training
    /// without energy.
    pub fn new(
        training: &[Cf32],
        pulse: &[f32],
        cfg: SyncConfig,
    ) -> Result<Synchroniser, SyncError> {
        let dims = Synchroniser::dimensions(training.len(), pulse.len(), &cfg)?;
        let sps = cfg.sps;
        let d = (pulse.len() - 1) / 2;
        let half = dims.head;
        let shaped = crate::signal::rrc::shape(training, pulse, sps);
        let start = d - half;
        let ref_len = dims.reference_len;
        let reference: Vec<Cf32> = shaped[start..start + ref_len].to_vec();
        drop(shaped);
        let ref_energy: f64 = reference.iter().map(|v| f64::from(v.norm_sqr())).sum();
        if !(ref_energy > 0.0 && ref_energy.is_finite()) {
            return Err(SyncError::InvalidConfig {
                key: "training",
                expected: "symbols with non-zero finite energy".to_string(),
                found: format!("energy {ref_energy}"),
            });
        }
        let delta = dims.hypothesis_step;
        let k = (dims.hypotheses / 2) as i64;
        let hyps: Vec<f64> = (-k..=k).map(|h| h as f64 * delta).collect();
        let bank: Vec<Vec<Cf32>> = hyps
            .iter()
            .map(|&f| {
                reference
                    .iter()
                    .enumerate()
                    .map(|(m, r)| *r * rotation(f, m as f64))
                    .collect()
            })
            .collect();
        let corr = OverlapSave::new(&bank, OverlapSave::default_fft_len(ref_len));
        drop(bank);
        let threshold = dims.threshold;
        let min_spacing = cfg.min_spacing_samples.unwrap_or(ref_len);
        Ok(Synchroniser {
            cfg,
            training: training.to_vec(),
            pulse: pulse.to_vec(),
            reference,
            head: half,
            ref_energy,
            hyps,
            corr,
            threshold,
            min_spacing,
        })
    }

    /// The settings.
    pub fn config(&self) -> &SyncConfig {
        &self.cfg
    }
    /// The threshold in use (given or derived).
    pub fn threshold(&self) -> f64 {
        self.threshold
    }
    /// Search reference (trimmed shaped training), its first-symbol offset is
    /// [`Synchroniser::reference_head`].
    pub fn reference(&self) -> &[Cf32] {
        &self.reference
    }
    /// Matched-filter pulse taps (odd length, centred) the extraction applies.
    pub fn pulse(&self) -> &[f32] {
        &self.pulse
    }
    /// Index in [`Synchroniser::reference`] of the first training symbol's instant.
    pub fn reference_head(&self) -> usize {
        self.head
    }
    /// Carrier-offset hypotheses, Hz.
    pub fn hypotheses_hz(&self) -> Vec<f64> {
        self.hyps
            .iter()
            .map(|f| f * self.cfg.sample_rate_hz)
            .collect()
    }
    /// Effective length used for the default threshold (training symbols).
    pub fn effective_length(&self) -> f64 {
        self.training.len() as f64
    }
    /// Minimum capture length: samples spanned by the training instants, `(N−1)·sps + 1`.
    pub fn min_capture_len(&self) -> usize {
        (self.training.len() - 1) * self.cfg.sps + 1
    }

    /// Number of search lags for a capture of `len` samples, or the typed error.
    fn lag_count(&self, len: usize) -> Result<usize, SyncError> {
        let needed = self.min_capture_len();
        if len < needed {
            return Err(SyncError::CaptureTooShort {
                samples: len,
                needed,
            });
        }
        Ok(len - needed + 1)
    }

    /// Search a whole in-memory capture. No burst found is `Ok(vec![])`.
    pub fn search(&self, samples: &[Cf32]) -> Result<Vec<Detection>, SyncError> {
        self.search_source(samples)
    }

    /// Search a capture of `len` samples read chunk by chunk through
    /// `read(start, out)` (e.g. `Capture::read_into` over a memory map); chunks overlap by
    /// the reference length and are processed in parallel. Same result as [`Self::search`].
    pub fn search_chunked<F, E>(&self, len: usize, read: F) -> Result<Vec<Detection>, SyncError>
    where
        F: Fn(usize, &mut [Cf32]) -> Result<(), E> + Sync,
        E: std::error::Error + Send + Sync + 'static,
    {
        self.search_source(&ChunkReader::new(len, read))
    }

    /// Search any [`SampleSource`].
    pub fn search_source<S: SampleSource + ?Sized>(
        &self,
        src: &S,
    ) -> Result<Vec<Detection>, SyncError> {
        let lags = self.lag_count(src.len())?;
        let cands = self.scan(src, 0..lags, lags, self.threshold)?;
        Ok(self.merge(cands))
    }

    /// The metric (best over hypotheses) for first-symbol instants `starts`
    /// (clipped to the searchable lags), e.g. around a burst for plots. Values are
    /// identical to what the search computed.
    pub fn metric<S: SampleSource + ?Sized>(
        &self,
        src: &S,
        starts: Range<usize>,
    ) -> Result<Vec<f64>, SyncError> {
        let lags = self.lag_count(src.len())?;
        let range = starts.start.min(lags)..starts.end.min(lags);
        let mut out = vec![0.0; range.end.saturating_sub(range.start)];
        for c in self.scan(src, range.clone(), lags, -1.0)? {
            out[c.lag - range.start] = c.rho;
        }
        Ok(out)
    }

    /// Buffers for one thread; the chunk buffer never exceeds the padded capture, nor
    /// the blocks a scan of `lags_in_scan` lags can touch in one chunk.
    fn new_worker(&self, total_lags: usize, lags_in_scan: usize) -> Worker {
        let step = self.corr.step();
        let blocks = total_lags
            .div_ceil(step)
            .min(lags_in_scan.div_ceil(step) + 1);
        let chunk_len = step * BLOCKS_PER_CHUNK.min(blocks);
        Worker {
            chunk: vec![Cf32::new(0.0, 0.0); chunk_len + self.corr.ref_len() - 1],
            scratch: vec![Cf32::new(0.0, 0.0); self.corr.scratch_len()],
            bufs: self.corr.scan_buffers(),
        }
    }

    /// Evaluate lags `lags` (a sub-range of the searchable lags), returning those with
    /// metric ≥ `threshold` in lag order.
    fn scan<S: SampleSource + ?Sized>(
        &self,
        src: &S,
        lags: Range<usize>,
        total_lags: usize,
        threshold: f64,
    ) -> Result<Vec<Candidate>, SyncError> {
        if lags.start >= lags.end {
            return Ok(Vec::new());
        }
        let step = self.corr.step();
        let chunk = step * BLOCKS_PER_CHUNK;
        let c0 = lags.start / chunk;
        let c1 = lags.end.div_ceil(chunk);
        let per_chunk: Vec<Result<Vec<Candidate>, SyncError>> = (c0..c1)
            .into_par_iter()
            .map_init(
                || self.new_worker(total_lags, lags.end - lags.start),
                |w, c| self.scan_chunk(src, c, &lags, threshold, w),
            )
            .collect();
        let mut out = Vec::new();
        for r in per_chunk {
            out.extend(r?);
        }
        Ok(out)
    }

    fn scan_chunk<S: SampleSource + ?Sized>(
        &self,
        src: &S,
        c: usize,
        lags: &Range<usize>,
        threshold: f64,
        w: &mut Worker,
    ) -> Result<Vec<Candidate>, SyncError> {
        let step = self.corr.step();
        let chunk_start = c * step * BLOCKS_PER_CHUNK;
        // Only the blocks that hold lags of this scan are read and transformed (a
        // short `metric` range touches one or two); block boundaries stay on the
        // chunk's grid, so every lag gets the same value as in the full search.
        let chunk_end = chunk_start + step * BLOCKS_PER_CHUNK;
        let b_lo = (lags.start.max(chunk_start) - chunk_start) / step;
        let b_hi = (lags.end.min(chunk_end).max(chunk_start) - chunk_start).div_ceil(step);
        if b_lo >= b_hi {
            return Ok(Vec::new());
        }
        let need = (b_hi - b_lo) * step + self.corr.ref_len() - 1;
        let buf = &mut w.chunk[..need];
        // Virtual sample u (zero-padded by `head`) is capture sample u − head.
        read_padded(
            src,
            (chunk_start + b_lo * step) as i64 - self.head as i64,
            buf,
        )?;
        let mut out = Vec::new();
        for bi in b_lo..b_hi {
            let b = chunk_start + bi * step;
            let lo = lags.start.max(b);
            let hi = lags.end.min(b + step);
            if lo >= hi {
                continue;
            }
            self.corr.scan_block(
                &buf[(bi - b_lo) * step..],
                lo - b,
                hi - lo,
                self.ref_energy,
                threshold,
                &mut w.scratch,
                &mut w.bufs,
                &mut |i, rho, hyp| {
                    out.push(Candidate {
                        lag: b + i,
                        rho,
                        hyp,
                    })
                },
            );
        }
        Ok(out)
    }

    /// Greedy merge: strongest first (ties: earlier lag), drop anything closer than
    /// `min_spacing` to a kept peak; result in lag order.
    fn merge(&self, mut cands: Vec<Candidate>) -> Vec<Detection> {
        cands.sort_by(|a, b| b.rho.total_cmp(&a.rho).then(a.lag.cmp(&b.lag)));
        let sp = self.min_spacing;
        let mut kept: BTreeMap<usize, Candidate> = BTreeMap::new();
        for c in cands {
            let lo = c.lag.saturating_sub(sp - 1);
            let hi = c.lag.saturating_add(sp - 1);
            if kept.range(lo..=hi).next().is_none() {
                kept.insert(c.lag, c);
            }
        }
        kept.into_values()
            .map(|c| Detection {
                start_sample: c.lag,
                metric: c.rho,
                cfo_hypothesis_hz: self.hyps[c.hyp] * self.cfg.sample_rate_hz,
            })
            .collect()
    }
}

/// `exp(j·2π·f·m)` with the phase reduced in f64 first.
#[inline]
pub(crate) fn rotation(f: f64, m: f64) -> Cf32 {
    let ph = std::f64::consts::TAU * (f * m).rem_euclid(1.0);
    Cf32::new(ph.cos() as f32, ph.sin() as f32)
}

/// Samples between exact anchors of [`derotate_run`].
const ROTATION_ANCHOR: usize = 32;

/// `x[i] *= rotation(f, m(i))` for a run where `m(i+1) − m(i) = 1`: the phasor is
/// computed exactly (as [`rotation`], in f64) every [`ROTATION_ANCHOR`] samples and
/// multiplied there by a table of `exp(j2πf·i)`, `i < ROTATION_ANCHOR`, built once per
/// run by recurrence in f64 — instead of a `sin_cos` per sample, and without a serial
/// phasor chain through the samples (each sample's phasor is one f64 product).
/// The table drifts by a few ε = 2⁻⁵³ per entry, far below the f32 rounding of the
/// result.
pub(crate) fn derotate_run(x: &mut [Cf32], f: f64, m: impl Fn(usize) -> f64) {
    let exact = |m: f64| {
        let ph = std::f64::consts::TAU * (f * m).rem_euclid(1.0);
        crate::Cf64::new(ph.cos(), ph.sin())
    };
    let step = exact(1.0);
    let mut advance = [crate::Cf64::new(1.0, 0.0); ROTATION_ANCHOR];
    for i in 1..ROTATION_ANCHOR.min(x.len()) {
        advance[i] = advance[i - 1] * step;
    }
    for (a, block) in x.chunks_mut(ROTATION_ANCHOR).enumerate() {
        let p0 = exact(m(a * ROTATION_ANCHOR));
        for (v, t) in block.iter_mut().zip(&advance) {
            let p = p0 * *t;
            *v *= Cf32::new(p.re as f32, p.im as f32);
        }
    }
}

#[cfg(test)]
mod tests;
