//! Carrier refinement over the whole burst.
//!
//! A CFO estimated from the training alone leaves a frequency error whose phase
//! grows linearly with the distance from the training. This module takes the
//! burst (`y`, training, offset, slicer) and the burst configuration, and gives
//! the carrier-corrected samples, the channel fitted on them and a
//! [`CarrierReport`]:
//!
//! 1. fit the channel on the training; the *training-only residual* is the
//!    phase slope of `y_t·conj(ŷ_t)` over the training (`ŷ` the fitted channel's
//!    output for the known symbols), each phase weighted by `|ŷ_t|²` so that a
//!    symbol the channel drives near zero cannot slip it by a cycle — see
//!    [`training_phase_slope`]; its Cramér–Rao σ at the fitted SNR and the
//!    training length is [`frequency_crb_sigma`];
//! 2. run the MMSE-DFE once with a second-order phase loop (acquisition
//!    bandwidth), the loop frequency starting at the synchroniser's estimate
//!    (the samples arrive corrected by it, so at zero residual); the
//!    decision-aided phase of every symbol is the loop phase plus
//!    `arg(z_n·conj(d_n))` (`d_n` the decision, or the known symbol inside the
//!    training);
//! 3. fit a straight line `θ_n = φ + 2πν·n` to those phases over the whole
//!    burst by weighted least squares (`n` the index into `y`; weight `|d_n|²`
//!    times the probability that the decision is right,
//!    [`decision_reliability`]; decisions within `0.25/BnT` symbols of the
//!    training, the loop's pull-in, left out);
//! 4. accept `ν` only within [`CarrierConfig::max_sigmas`] training σ of the
//!    training estimate; otherwise keep the training estimate and report the
//!    rejected value ([`CarrierReport::rejected_cfo_cycles_per_symbol`]); rotate
//!    `y` by `e^{−j(2πν·n + φ)}` and refit the channel.
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
    /// Largest accepted distance of the refined frequency from the training
    /// estimate, in Cramér–Rao standard deviations of the training estimate
    /// (default 6; [`frequency_crb_sigma`] at the fitted SNR and the training
    /// length). Beyond it the refinement is rejected and the training estimate
    /// kept.
    #[serde(default = "default_max_sigmas")]
    pub max_sigmas: f64,
}

/// Default of [`CarrierConfig::max_sigmas`]: a Gaussian estimate lands beyond
/// 6σ with probability 2·10⁻⁹, so a clean burst is never rejected by chance.
pub const DEFAULT_MAX_SIGMAS: f64 = 6.0;

fn default_max_sigmas() -> f64 {
    DEFAULT_MAX_SIGMAS
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
            max_sigmas: DEFAULT_MAX_SIGMAS,
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
    /// Cramér–Rao standard deviation of the training estimate at the fitted
    /// SNR and the training length, cycles/symbol.
    pub training_sigma_cycles_per_symbol: f64,
    /// Frequency correction applied, cycles/symbol (0 when off): the refined
    /// one, or the training estimate when the refinement was rejected.
    pub refined_cfo_cycles_per_symbol: f64,
    /// Phase of the fitted line at `n = 0`, rad (0 when off or rejected).
    pub phase_rad: f64,
    /// The refined frequency that was rejected (farther than
    /// [`CarrierConfig::max_sigmas`] σ from the training estimate), if any.
    pub rejected_cfo_cycles_per_symbol: Option<f64>,
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

/// Weighted least-squares straight line through `(x, y, w)` points (weights
/// `w ≥ 0`): returns `(intercept, slope)`; `(weighted mean y, 0)` for fewer than
/// two distinct `x` with positive weight, `(0, 0)` without weight.
pub fn fit_line_weighted(points: &[(f64, f64, f64)]) -> (f64, f64) {
    let (mut sw, mut sx, mut sy) = (0.0, 0.0, 0.0);
    for &(x, y, w) in points {
        sw += w;
        sx += w * x;
        sy += w * y;
    }
    if sw <= 0.0 || !sw.is_finite() {
        return (0.0, 0.0);
    }
    let (mx, my) = (sx / sw, sy / sw);
    let (mut sxx, mut sxy) = (0.0, 0.0);
    for &(x, y, w) in points {
        sxx += w * (x - mx) * (x - mx);
        sxy += w * (x - mx) * (y - my);
    }
    if sxx <= 0.0 {
        return (my, 0.0);
    }
    let b = sxy / sxx;
    (my - b * mx, b)
}

/// Frequency (cycles/symbol) of `u_t ≈ A_t·e^{j(φ + 2πν·t)}` observed at integer
/// `t` with phase weights `w_t`, without phase unwrapping: a coarse value from the
/// lag-1 products `Σ u_{t+1}·conj(u_t)` over consecutive `t` (Kay's estimator,
/// which weights each step by the amplitudes it joins, so a near-zero `u_t`
/// contributes almost nothing), then the weighted LS slope of the phases of
/// `u_t·e^{−j2πν₁t}` about their weighted mean (small after the coarse step, so
/// none wraps at usable SNR). Returns 0 for fewer than two points.
pub fn weighted_phase_slope(u: &[(f64, Cf64, f64)]) -> f64 {
    let mut c = Cf64::new(0.0, 0.0);
    for w in u.windows(2) {
        if w[1].0 - w[0].0 == 1.0 {
            c += w[1].1 * w[0].1.conj();
        }
    }
    if u.len() < 2 || c.norm_sqr() == 0.0 {
        return 0.0;
    }
    let nu1 = c.arg() / (2.0 * PI);
    let rot = |t: f64| Cf64::from_polar(1.0, -2.0 * PI * nu1 * t);
    let mean: Cf64 = u.iter().map(|(t, v, w)| *v * rot(*t) * *w).sum();
    let r = if mean.norm_sqr() > 0.0 {
        mean.conj() / mean.norm()
    } else {
        Cf64::new(1.0, 0.0)
    };
    let pts: Vec<(f64, f64, f64)> = u
        .iter()
        .map(|(t, v, w)| {
            let a = (*v * rot(*t) * r).arg();
            (*t, if a.is_finite() { a } else { 0.0 }, *w)
        })
        .collect();
    nu1 + fit_line_weighted(&pts).1 / (2.0 * PI)
}

/// Cramér–Rao standard deviation (cycles/symbol) of a frequency estimated from
/// `m` equally spaced observations of one tone at SNR `snr` (linear, `A²/σ²`):
/// `σ² = 6 / ((2π)²·snr·m·(m² − 1))` (Rife & Boorstyn 1974, eq. for the
/// frequency bound with unknown phase and amplitude). Infinite for `m < 2` or
/// `snr ≤ 0`.
pub fn frequency_crb_sigma(snr: f64, m: usize) -> f64 {
    let m = m as f64;
    if m < 2.0 || snr <= 0.0 || !snr.is_finite() {
        return f64::INFINITY;
    }
    (6.0 / ((2.0 * PI).powi(2) * snr * m * (m * m - 1.0))).sqrt()
}

/// The training's channel-filtered output `ŷ_t` (with DC and conjugate terms
/// when fitted) and `u_t = y[offset+t]·conj(ŷ_t)` over the fit window
/// `t ∈ [Q, N−1−P]`: `(t, u_t, |ŷ_t|²)` per window point.
fn training_products(
    y: &[Cf32],
    training: &[Cf32],
    offset: usize,
    ch: &ChannelEstimate,
) -> Vec<(f64, Cf64, f64)> {
    let n = training.len();
    let (pre, post) = (ch.pre, ch.post);
    let mut out = Vec::with_capacity(n);
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
        let u = Cf64::new(yv.re as f64, yv.im as f64) * yh.conj();
        out.push((t as f64, u, yh.norm_sqr()));
    }
    out
}

/// Residual frequency over the training (cycles/symbol): the
/// [`weighted_phase_slope`] of `y[offset+t]·conj(ŷ_t)` over the fit window
/// `t ∈ [Q, N−1−P]`, where `ŷ_t = Σ_i h[i]·x[t−i]` (+ DC and conjugate terms when
/// fitted), each phase weighted by `|ŷ_t|²` (its noise variance is
/// `σ²/(2|ŷ_t|²)`). A symbol where the channel drives `ŷ_t` near zero (a spectral
/// null) therefore cannot slip the estimate by a cycle, as an unwrapped
/// unweighted slope does. Returns 0 for fewer than two window points.
pub fn training_phase_slope(
    y: &[Cf32],
    training: &[Cf32],
    offset: usize,
    ch: &ChannelEstimate,
) -> f64 {
    weighted_phase_slope(&training_products(y, training, offset, ch))
}

/// Cramér–Rao σ (cycles/symbol) of the training-only frequency estimate at the
/// fitted SNR `mean|ŷ_t|²/σ²` over the fit window, with the SNR capped at 60 dB
/// (model error, f32 rounding) so that a noise-free capture keeps a finite bound.
fn training_sigma(y: &[Cf32], training: &[Cf32], offset: usize, ch: &ChannelEstimate) -> f64 {
    let u = training_products(y, training, offset, ch);
    let m = u.len();
    let p = u.iter().map(|(_, _, w)| w).sum::<f64>() / m.max(1) as f64;
    let snr = (p / ch.noise_var.max(0.0)).min(1e6);
    frequency_crb_sigma(if snr.is_nan() { 1e6 } else { snr }, m)
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

/// Steps 1–4 of the module doc. Returns the corrected samples, the channel
/// fitted on them and the report. With `cfg.carrier.enabled == false` the
/// samples are returned unchanged with the first fit.
pub(crate) fn refine_carrier(
    burst: &BurstView<'_>,
    cfg: &BurstConfig,
) -> Result<(Vec<Cf32>, ChannelEstimate, CarrierReport), EqualiseError> {
    let fit0 = fit_channel(burst.y, burst.training, burst.offset, &cfg.channel)?;
    let train_nu = training_phase_slope(burst.y, burst.training, burst.offset, &fit0);
    let sigma = training_sigma(burst.y, burst.training, burst.offset, &fit0);
    // A fitted DC term is a receiver offset (not rotated by the carrier):
    // remove it before anything rotates the samples.
    let mut base = burst.y.to_vec();
    if let Some(d) = fit0.dc {
        let d = Cf32::new(d.re as f32, d.im as f32);
        base.iter_mut().for_each(|v| *v -= d);
    }
    let burst = &BurstView { y: &base, ..*burst };
    let bound = cfg.carrier.max_sigmas * sigma;
    let mut report = CarrierReport {
        enabled: cfg.carrier.enabled,
        training_cfo_cycles_per_symbol: train_nu,
        training_sigma_cycles_per_symbol: sigma,
        refined_cfo_cycles_per_symbol: 0.0,
        phase_rad: 0.0,
        rejected_cfo_cycles_per_symbol: None,
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
    // The samples come corrected by the synchroniser's channel-aware estimate:
    // the loop starts there (zero residual) unless the training says the
    // samples were not corrected at all (a residual beyond the bound).
    let start_nu = if train_nu.abs() <= bound {
        0.0
    } else {
        train_nu
    };
    let opts = RunOptions {
        phase_loop: Some(cfg.carrier.acquisition_loop),
        initial_freq_cycles_per_symbol: start_nu,
        ..RunOptions::default()
    };
    let mut eq = MmseDfe::new(&ch, cfg.ff_taps, cfg.fb_taps, cfg.delay, opts)?;
    let out = eq.run(burst)?;
    let points = burst.slicer.points();
    let es = fit0.es.max(f64::MIN_POSITIVE);
    // Output noise variance the design predicts, for the decision reliability.
    let snr_out = 10f64.powf(eq.filters().predicted_snr_unbiased_db / 10.0);
    let var_out = if snr_out.is_finite() && snr_out > 0.0 {
        es / snr_out
    } else {
        es * 1e-6
    };
    let dmin = min_distance(burst.slicer);
    let tr = burst.offset..burst.offset + burst.training.len();
    let (lo, hi) = cfg.carrier.fit_range.unwrap_or((0, burst.y.len()));
    let keep = lo.min(burst.y.len())..hi.min(burst.y.len());
    // Pull-in: decisions within this many symbols of the training, where the
    // loop is still settling, stay out of the fit.
    let settle = (0.25 / cfg.carrier.acquisition_loop.bandwidth.max(1e-6)).round() as usize;
    let settled = |n: usize| n + settle < tr.start || n >= tr.end + settle;
    // The decision-aided phases with their weights: `|d|²` (the phase noise
    // variance of a point is `σ²/(2|d|²)`) times, for a decision, the
    // probability that it is right.
    let phases: Vec<(f64, f64, f64)> = out
        .soft
        .iter()
        .zip(&out.labels)
        .zip(&out.phase_rad)
        .enumerate()
        .filter(|(n, _)| keep.contains(n) && (tr.contains(n) || settled(*n)))
        .map(|(n, ((z, l), p))| {
            let (d, reliability) = if tr.contains(&n) {
                (burst.training[n - burst.offset], 1.0)
            } else {
                let d = points.get(*l).cloned().unwrap_or_default();
                (
                    d,
                    decision_reliability((z - d).norm() as f64, dmin, var_out),
                )
            };
            let r = (z * d.conj()).arg() as f64;
            let w = d.norm_sqr() as f64 * reliability;
            (n as f64, *p as f64 + if r.is_finite() { r } else { 0.0 }, w)
        })
        .collect();
    let (mut phase, slope) = fit_line_weighted(&phases);
    let mut nu = slope / (2.0 * PI);
    if !nu.is_finite() || (nu - train_nu).abs() > bound {
        report.rejected_cfo_cycles_per_symbol = Some(nu);
        nu = train_nu;
        phase = 0.0;
    }
    let mut corrected = vec![Cf32::new(0.0, 0.0); burst.y.len()];
    derotate_into(burst.y, nu, phase, &mut corrected);
    let fit1 = fit_channel(&corrected, burst.training, burst.offset, &cfg.channel)?;
    report.refined_cfo_cycles_per_symbol = nu;
    report.phase_rad = phase;
    Ok((corrected, fit1, report))
}

/// Smallest distance between two points of the slicer's constellation.
fn min_distance(slicer: &dyn super::Slicer) -> f64 {
    if let Some(c) = slicer.as_constellation() {
        return f64::from(c.min_distance());
    }
    let p = slicer.points();
    let mut d = f64::INFINITY;
    for (i, a) in p.iter().enumerate() {
        for b in &p[i + 1..] {
            d = d.min(f64::from((a - b).norm()));
        }
    }
    d
}

/// Probability that a hard decision at distance `e` from its point is right,
/// for complex Gaussian noise of variance `var` and a neighbour at `dmin`: the
/// posterior `1/(1 + exp(−(|z−d'|² − |z−d|²)/σ²))` against the neighbour `d'`
/// in the worst direction, where `|z−d'|² − |z−d|² = dmin² − 2·dmin·e`
/// (a lower bound on the reliability: the error may point away from every
/// neighbour).
pub fn decision_reliability(e: f64, dmin: f64, var: f64) -> f64 {
    if !dmin.is_finite() || var <= 0.0 {
        return 1.0;
    }
    let margin = (dmin * dmin - 2.0 * dmin * e) / var;
    1.0 / (1.0 + (-margin).exp())
}
