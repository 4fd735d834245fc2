//! Carrier refinement over the whole burst.
//!
//! A CFO estimated from the training alone leaves a frequency error whose phase
//! grows linearly with the distance from the training. This module takes the
//! burst (`y`, training, offset, slicer) and the burst configuration, and gives
//! the carrier-corrected samples, the channel fitted on them and a
//! [`CarrierReport`]:
//!
//! 1. fit the channel on the training; the *training-only residual* is the LS
//!    phase slope of `y_t·conj(ŷ_t)` over the training (`ŷ` the fitted channel's
//!    output for the known symbols) — see [`training_phase_slope`];
//! 2. run the MMSE-DFE once with a second-order phase loop (acquisition
//!    bandwidth, loop frequency initialised with the training-only residual);
//!    the decision-aided phase of every symbol is the loop phase plus
//!    `arg(z_n·conj(d_n))` (`d_n` the decision, or the known symbol inside the
//!    training);
//! 3. fit a straight line `θ_n = φ + 2πν·n` to those phases over the whole
//!    burst (least squares, `n` the index into `y`), rotate `y` by
//!    `e^{−j(2πν·n + φ)}` and refit the channel.
//!
//! A fitted DC term (`ChannelFitConfig::dc_offset`) is subtracted from `y`
//! first. The conjugate (IQ-imbalance) taps are reported by the fit but not
//! equalised: the equalisers are strictly linear in `y`.
//!
//! The equalisers then run on the corrected samples with a narrower phase loop
//! (`tracking_loop`) for what a straight line cannot describe.
//!
//! Units: frequencies in cycles per symbol (multiply by the symbol rate for
//! Hz; a positive value means the received carrier sits above, as in
//! `src/lib.rs`, so the caller *adds* `refined_cfo_cycles_per_symbol·Rs` to its
//! `cfo_hz`), phases in radians.

use super::mmse_dfe::DesignInput;
use super::tracking::LoopConfig;
use super::{BurstConfig, BurstView, EqualiseError, Equaliser, MmseDfe, RunOptions};
use crate::channel::{fit_channel, ChannelEstimate, ChannelFitConfig};
use crate::{Cf32, Cf64};
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

/// Plain configuration of the carrier refinement.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct CarrierConfig {
    /// Run the refinement (default true).
    pub enabled: bool,
    /// Loop of the first, decision-gathering pass (default `BnT` 0.01, ζ = 0.707).
    pub acquisition_loop: LoopConfig,
    /// Loop kept running inside the equalisers after the correction (default
    /// `BnT` 0.002, ζ = 0.707).
    pub tracking_loop: LoopConfig,
    /// Indices `[start, end)` of `y` whose phase points enter the frequency fit
    /// (default `None`: all of `y`). A caller that pads the burst with samples
    /// outside the frame (noise, or a neighbour) restricts the fit to the frame,
    /// where decisions mean something.
    pub fit_range: Option<(usize, usize)>,
}

impl Default for CarrierConfig {
    fn default() -> Self {
        let z = std::f64::consts::FRAC_1_SQRT_2;
        CarrierConfig {
            enabled: true,
            acquisition_loop: LoopConfig {
                bandwidth: 0.01,
                damping: z,
            },
            tracking_loop: LoopConfig {
                bandwidth: 0.002,
                damping: z,
            },
            fit_range: None,
        }
    }
}

/// What the carrier refinement found.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct CarrierReport {
    /// Whether the refinement ran.
    pub enabled: bool,
    /// Residual frequency seen on the training alone, cycles/symbol.
    pub training_cfo_cycles_per_symbol: f64,
    /// Frequency correction from the whole burst, cycles/symbol (0 when off).
    pub refined_cfo_cycles_per_symbol: f64,
    /// Phase of the fitted line at `n = 0`, rad (0 when off).
    pub phase_rad: f64,
}

/// Least-squares straight line through `(x, y)` points: returns `(intercept, slope)`;
/// `(mean y, 0)` for fewer than two distinct `x`.
pub fn fit_line(points: impl Iterator<Item = (f64, f64)> + Clone) -> (f64, f64) {
    let (mut n, mut sx, mut sy) = (0.0, 0.0, 0.0);
    for (x, y) in points.clone() {
        n += 1.0;
        sx += x;
        sy += y;
    }
    if n == 0.0 {
        return (0.0, 0.0);
    }
    let (mx, my) = (sx / n, sy / n);
    let (mut sxx, mut sxy) = (0.0, 0.0);
    for (x, y) in points {
        sxx += (x - mx) * (x - mx);
        sxy += (x - mx) * (y - my);
    }
    if sxx <= 0.0 {
        return (my, 0.0);
    }
    let b = sxy / sxx;
    (my - b * mx, b)
}

/// Residual frequency over the training: LS slope (cycles/symbol) of the
/// unwrapped phase of `y[offset+t]·conj(ŷ_t)` over the fit window
/// `t ∈ [Q, N−1−P]`, where `ŷ_t = Σ_i h[i]·x[t−i]` (+ DC and conjugate terms when
/// fitted). Returns 0 for fewer than two window points.
pub fn training_phase_slope(
    y: &[Cf32],
    training: &[Cf32],
    offset: usize,
    ch: &ChannelEstimate,
) -> f64 {
    let n = training.len();
    let (pre, post) = (ch.pre, ch.post);
    let mut prev = None::<f64>;
    let mut unwrapped = Vec::new();
    for t in post..n.saturating_sub(pre) {
        let Some(yv) = y.get(offset + t) else { break };
        let mut yh = ch.dc.unwrap_or_default();
        for (c, h) in ch.taps.iter().enumerate() {
            let x = training[t + pre - c];
            yh += h * Cf64::new(x.re as f64, x.im as f64);
            if let Some(g) = &ch.conj_taps {
                yh += g[c] * Cf64::new(x.re as f64, -x.im as f64);
            }
        }
        let mut th = (Cf64::new(yv.re as f64, yv.im as f64) * yh.conj()).arg();
        if let Some(p) = prev {
            th = p + wrap(th - p);
        }
        prev = Some(th);
        unwrapped.push((t as f64, th));
    }
    fit_line(unwrapped.iter().cloned()).1 / (2.0 * PI)
}

/// Training-only CFO estimate (cycles/symbol): fit the channel, take the
/// [`training_phase_slope`], derotate, and repeat (three rounds, summing the
/// slopes) so the channel fit is not smeared by the rotation it measures.
///
/// # Errors
/// Channel-fit errors.
pub fn estimate_training_cfo(
    y: &[Cf32],
    training: &[Cf32],
    offset: usize,
    cfg: &ChannelFitConfig,
) -> Result<f64, EqualiseError> {
    let mut nu = 0.0;
    let mut buf = y.to_vec();
    for _ in 0..3 {
        derotate_into(y, nu, 0.0, &mut buf);
        let ch = fit_channel(&buf, training, offset, cfg)?;
        nu += training_phase_slope(&buf, training, offset, &ch);
    }
    Ok(nu)
}

/// Samples between exact anchors of [`derotate_into`].
const DEROTATE_ANCHOR: usize = 32;

/// `out[n] = y[n]·e^{−j(2π·nu·n + phase)}`.
///
/// The phasor is computed exactly (one f64 `sin_cos` of the angle) every
/// 32 samples (`DEROTATE_ANCHOR`) and advanced by one f64 complex multiply by
/// `e^{−j2π·nu}` in between. Between anchors the f64 phasor drifts by a few
/// ε = 2⁻⁵³ per step (≈ 1e-14 after 32 steps), far below the f32 rounding of the
/// phasor (2⁻²⁴ ≈ 6e-8), so each output equals the `sin_cos`-per-sample result
/// except where that rounding sits within ≈ 1e-14 of a tie (≈ one component in
/// 10⁶), where the two differ by one f32 ulp of the phasor.
///
/// # Panics
/// When `out.len() != y.len()`.
pub fn derotate_into(y: &[Cf32], nu: f64, phase: f64, out: &mut [Cf32]) {
    assert_eq!(y.len(), out.len());
    let exact = |n: usize| {
        let a = -(2.0 * PI * nu * n as f64 + phase);
        let (s, c) = a.sin_cos();
        Cf64::new(c, s)
    };
    let (s, c) = (-(2.0 * PI * nu)).sin_cos();
    let step = Cf64::new(c, s);
    for (k, (ob, yb)) in out
        .chunks_mut(DEROTATE_ANCHOR)
        .zip(y.chunks(DEROTATE_ANCHOR))
        .enumerate()
    {
        let mut p = exact(k * DEROTATE_ANCHOR);
        for (o, v) in ob.iter_mut().zip(yb) {
            *o = v * Cf32::new(p.re as f32, p.im as f32);
            p *= step;
        }
    }
}

fn wrap(a: f64) -> f64 {
    (a + PI).rem_euclid(2.0 * PI) - PI
}

/// Steps 1–3 of the module doc. Returns the corrected samples, the channel
/// fitted on them and the report. With `cfg.carrier.enabled == false` the
/// samples are returned unchanged with the first fit.
pub(crate) fn refine_carrier(
    burst: &BurstView<'_>,
    cfg: &BurstConfig,
) -> Result<(Vec<Cf32>, ChannelEstimate, CarrierReport), EqualiseError> {
    let fit0 = fit_channel(burst.y, burst.training, burst.offset, &cfg.channel)?;
    let train_nu = training_phase_slope(burst.y, burst.training, burst.offset, &fit0);
    // A fitted DC term is a receiver offset (not rotated by the carrier):
    // remove it before anything rotates the samples.
    let mut base = burst.y.to_vec();
    if let Some(d) = fit0.dc {
        let d = Cf32::new(d.re as f32, d.im as f32);
        base.iter_mut().for_each(|v| *v -= d);
    }
    let burst = &BurstView { y: &base, ..*burst };
    let mut report = CarrierReport {
        enabled: cfg.carrier.enabled,
        training_cfo_cycles_per_symbol: train_nu,
        refined_cfo_cycles_per_symbol: 0.0,
        phase_rad: 0.0,
    };
    if !cfg.carrier.enabled {
        let fit = if fit0.dc.is_some() {
            fit_channel(&base, burst.training, burst.offset, &cfg.channel)?
        } else {
            fit0
        };
        return Ok((base, fit, report));
    }
    let ch = DesignInput {
        taps: &fit0.taps,
        pre: fit0.pre,
        noise_var: fit0.noise_var,
        es: fit0.es,
    };
    let opts = RunOptions {
        phase_loop: Some(cfg.carrier.acquisition_loop),
        initial_freq_cycles_per_symbol: train_nu,
        ..RunOptions::default()
    };
    let mut eq = MmseDfe::new(&ch, cfg.ff_taps, cfg.fb_taps, cfg.delay, opts)?;
    let out = eq.run(burst)?;
    let points = burst.slicer.points();
    let tr = burst.offset..burst.offset + burst.training.len();
    let (lo, hi) = cfg.carrier.fit_range.unwrap_or((0, burst.y.len()));
    let keep = lo.min(burst.y.len())..hi.min(burst.y.len());
    // The decision-aided phases, computed once (an arctangent each) and then
    // read twice by the line fit.
    let phases: Vec<(f64, f64)> = out
        .soft
        .iter()
        .zip(&out.labels)
        .zip(&out.phase_rad)
        .enumerate()
        .filter(|(n, _)| keep.contains(n))
        .map(|(n, ((z, l), p))| {
            let d = if tr.contains(&n) {
                burst.training[n - burst.offset]
            } else {
                points.get(*l).cloned().unwrap_or_default()
            };
            let r = (z * d.conj()).arg() as f64;
            (n as f64, *p as f64 + if r.is_finite() { r } else { 0.0 })
        })
        .collect();
    let (phase, slope) = fit_line(phases.iter().copied());
    let nu = slope / (2.0 * PI);
    let mut corrected = vec![Cf32::new(0.0, 0.0); burst.y.len()];
    derotate_into(burst.y, nu, phase, &mut corrected);
    let fit1 = fit_channel(&corrected, burst.training, burst.offset, &cfg.channel)?;
    report.refined_cfo_cycles_per_symbol = nu;
    report.phase_rad = phase;
    Ok((corrected, fit1, report))
}
