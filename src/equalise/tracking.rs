//! Decision-directed tracking: normalised LMS and RLS updates of the DFE
//! filters, and a second-order phase-tracking loop.
//!
//! Takes plain configuration ([`TrackingConfig`], [`LoopConfig`]); gives the
//! per-symbol update state used inside the DFE loop (`engine`). The error of
//! each update is `e = d − z`, with `z` the (unbiased, derotated) equaliser
//! output and `d` the decision (or the known symbol inside the training).
//! Phases are in radians per symbol; loop bandwidths `BnT` are normalised to
//! the symbol rate.
//!
//! Loop gains (common practice; formulas from memory, as in M. Rice, *Digital
//! Communications: A Discrete-Time Approach*, 2009, appendix C): with
//! `θ = BnT/(ζ + 1/(4ζ))`, `Kp = 4ζθ/(1 + 2ζθ + θ²)`, `Ki = 4θ²/(1 + 2ζθ + θ²)`
//! for a phase detector of unit gain (`Im(z·d*)/|d|² ≈ phase error` near lock).

use crate::Cf32;
use serde::{Deserialize, Serialize};

/// Filter adaptation mode.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum AdaptMode {
    /// Filters stay as designed.
    #[default]
    Off,
    /// Normalised LMS: `w ← w + μ·e·conj(u)/(‖u‖² + ε)`.
    Lms,
    /// Exponentially weighted RLS (Haykin, *Adaptive Filter Theory*, RLS algorithm).
    Rls,
}

/// Configuration of decision-directed tracking (off by default).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct TrackingConfig {
    /// Which filter update to run.
    pub mode: AdaptMode,
    /// NLMS step `μ` (0 < μ < 2; default 0.03).
    pub lms_step: f32,
    /// RLS forgetting factor `λ` (default 0.995).
    pub rls_forgetting: f32,
    /// RLS initial inverse correlation `P(0) = I/δ` with this `δ` (default 100:
    /// about `E|u|²/(1−λ)`, the steady-state weight of the regressor, so the
    /// first updates do not throw away the MMSE design the filters start from).
    pub rls_delta: f32,
    /// Second-order phase loop run together with the filter updates.
    pub phase_loop: LoopConfig,
}

impl Default for TrackingConfig {
    fn default() -> Self {
        TrackingConfig {
            mode: AdaptMode::Off,
            lms_step: 0.03,
            rls_forgetting: 0.995,
            rls_delta: 100.0,
            phase_loop: LoopConfig {
                bandwidth: 0.002,
                damping: std::f64::consts::FRAC_1_SQRT_2,
            },
        }
    }
}

/// A second-order phase-locked loop's design values.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct LoopConfig {
    /// Noise bandwidth `BnT` normalised to the symbol rate (0 disables the loop).
    pub bandwidth: f64,
    /// Damping factor `ζ`.
    pub damping: f64,
}

/// Running state of the second-order phase loop.
#[derive(Debug, Clone)]
pub struct PhaseLoop {
    kp: f64,
    ki: f64,
    /// Current phase estimate (rad).
    pub phase: f64,
    /// Current frequency estimate (rad/symbol).
    pub freq: f64,
    rot: Cf32,
    count: u32,
}

impl PhaseLoop {
    /// A loop at phase 0 and frequency 0 with the gains of `cfg`.
    pub fn new(cfg: &LoopConfig) -> PhaseLoop {
        let z = cfg.damping;
        let th = cfg.bandwidth / (z + 1.0 / (4.0 * z));
        let den = 1.0 + 2.0 * z * th + th * th;
        PhaseLoop {
            kp: 4.0 * z * th / den,
            ki: 4.0 * th * th / den,
            phase: 0.0,
            freq: 0.0,
            rot: Cf32::new(1.0, 0.0),
            count: 0,
        }
    }
    /// `e^{jφ}` of the current phase.
    #[inline]
    pub fn phasor(&self) -> Cf32 {
        self.rot
    }
    /// Feed the phase error `err` (rad) and advance one symbol. A non-finite
    /// error (a NaN sample upstream) is treated as 0 so the loop cannot be
    /// poisoned for the rest of the burst.
    #[inline]
    pub fn update(&mut self, err: f32) {
        let err = if err.is_finite() { err as f64 } else { 0.0 };
        self.freq += self.ki * err;
        let d = self.freq + self.kp * err;
        self.phase += d;
        // Incremental rotation: third-order Taylor of e^{jd} for the small
        // per-symbol step, then one Newton step back onto the unit circle.
        let d = d as f32;
        let d2 = d * d;
        let step = Cf32::new(1.0 - 0.5 * d2, d * (1.0 - d2 / 6.0));
        let r = self.rot * step;
        self.rot = r * (1.5 - 0.5 * r.norm_sqr());
        self.count += 1;
        if self.count == 256 {
            // Re-anchor the phasor on the f64 phase so rounding cannot accumulate.
            self.count = 0;
            let (s, c) = self.phase.sin_cos();
            self.rot = Cf32::new(c as f32, s as f32);
        }
    }
}
