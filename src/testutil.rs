//! Test-only helpers: slow, obviously correct references and seeded signal makers.
//!
//! Takes in: sizes, seeds, signal parameters. Gives out: vectors of [`Cf32`].
//! Every routine here is a direct transcription of its defining formula, used to
//! check the fast code; none of it is compiled outside `#[cfg(test)]`.
#![allow(dead_code)]

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;

use crate::Cf32;

/// `n` samples, real and imaginary parts uniform in [−1, 1), seeded.
pub fn random_cf32(n: usize, seed: u64) -> Vec<Cf32> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    (0..n)
        .map(|_| Cf32::new(rng.gen_range(-1.0..1.0), rng.gen_range(-1.0..1.0)))
        .collect()
}

/// Direct O(N·M) valid cross-correlation `c[n] = Σ_m conj(r[m])·x[n+m]`,
/// `n = 0 ..= x.len() − r.len()`, accumulated in f64.
pub fn direct_correlation(x: &[Cf32], r: &[Cf32]) -> Vec<Cf32> {
    if x.len() < r.len() {
        return Vec::new();
    }
    (0..=x.len() - r.len())
        .map(|n| {
            let (mut re, mut im) = (0.0f64, 0.0f64);
            for (m, rv) in r.iter().enumerate() {
                let a = x[n + m];
                // conj(r)·a
                re += f64::from(rv.re) * f64::from(a.re) + f64::from(rv.im) * f64::from(a.im);
                im += f64::from(rv.re) * f64::from(a.im) - f64::from(rv.im) * f64::from(a.re);
            }
            Cf32::new(re as f32, im as f32)
        })
        .collect()
}

/// First index where `|a[i] − b[i]| > tol`, with both values; lengths must match.
pub fn first_difference(a: &[Cf32], b: &[Cf32], tol: f32) -> Option<(usize, Cf32, Cf32)> {
    assert_eq!(a.len(), b.len(), "length mismatch");
    a.iter()
        .zip(b)
        .enumerate()
        .find(|(_, (x, y))| (**x - **y).norm().is_nan() || (**x - **y).norm() > tol)
        .map(|(i, (x, y))| (i, *x, *y))
}

/// Complex white Gaussian noise with total variance `var` per sample (var/2 per axis).
pub fn add_noise(x: &mut [Cf32], var: f64, rng: &mut ChaCha8Rng) {
    let s = (var / 2.0).sqrt();
    for v in x.iter_mut() {
        let a: f64 = rng.sample(StandardNormal);
        let b: f64 = rng.sample(StandardNormal);
        *v += Cf32::new((a * s) as f32, (b * s) as f32);
    }
}

/// Random QPSK symbols (unit power), seeded — the tests' "PRBS-like" training and payloads.
pub fn random_qpsk(n: usize, rng: &mut ChaCha8Rng) -> Vec<Cf32> {
    let a = std::f32::consts::FRAC_1_SQRT_2;
    (0..n)
        .map(|_| {
            Cf32::new(
                if rng.gen::<bool>() { a } else { -a },
                if rng.gen::<bool>() { a } else { -a },
            )
        })
        .collect()
}

/// One burst to place into a capture.
pub struct BurstSpec {
    /// Symbols of the burst (payload before, training, payload after).
    pub symbols: Vec<Cf32>,
    /// Index within `symbols` of the first training symbol.
    pub training_index: usize,
    /// Instant of the first training symbol, in (fractional) samples.
    pub t0: f64,
    /// Amplitude.
    pub gain: f64,
    /// Carrier offset, cycles per sample.
    pub cfo: f64,
    /// Carrier phase at sample index 0, radians.
    pub phase: f64,
}

/// Add a burst to `x` with an exact fractional delay: the continuous RRC pulse
/// (closed form, `crate::signal::rrc::rrc_impulse`) is evaluated at every sample,
/// truncated to ±`half_span` symbols, scaled so that the sampled pulse has unit
/// energy (`1/√sps`). Carrier: `exp(j(2π·cfo·n + phase))`, with `n` the sample index.
pub fn add_burst(x: &mut [Cf32], b: &BurstSpec, sps: usize, beta: f64, half_span: f64) {
    let sps_f = sps as f64;
    let norm = 1.0 / sps_f.sqrt();
    for (k, s) in b.symbols.iter().enumerate() {
        let tk = b.t0 + (k as f64 - b.training_index as f64) * sps_f;
        let lo = (tk - half_span * sps_f).ceil().max(0.0) as i64;
        let hi = (tk + half_span * sps_f).floor().min(x.len() as f64 - 1.0) as i64;
        for n in lo..=hi {
            let p = rrc_impulse((n as f64 - tk) / sps_f, beta) * norm * b.gain;
            let ph = std::f64::consts::TAU * (b.cfo * n as f64).rem_euclid(1.0) + b.phase;
            let c = Cf32::new((p * ph.cos()) as f32, (p * ph.sin()) as f32);
            x[n as usize] += *s * c;
        }
    }
}

// ---- Stand-in for `crate::signal::rrc` until the signal module lands on main. ----

/// Closed-form RRC impulse response, T = 1 (shared/REFERENCE-VALUES.md §5).
pub fn rrc_impulse(t: f64, beta: f64) -> f64 {
    use std::f64::consts::PI;
    if t.abs() < 1e-12 {
        return 1.0 - beta + 4.0 * beta / PI;
    }
    if beta > 0.0 && ((4.0 * beta * t).abs() - 1.0).abs() < 1e-9 {
        return beta / 2f64.sqrt()
            * ((1.0 + 2.0 / PI) * (PI / (4.0 * beta)).sin()
                + (1.0 - 2.0 / PI) * (PI / (4.0 * beta)).cos());
    }
    ((PI * t * (1.0 - beta)).sin() + 4.0 * beta * t * (PI * t * (1.0 + beta)).cos())
        / (PI * t * (1.0 - (4.0 * beta * t).powi(2)))
}

/// RRC taps, `span·sps + 1` long, unit energy, centre at `(len − 1)/2`.
pub fn rrc_taps(beta: f64, span: usize, sps: usize) -> Vec<f32> {
    let n = span * sps + 1;
    let c = (n - 1) as f64 / 2.0;
    let h: Vec<f64> = (0..n)
        .map(|i| rrc_impulse((i as f64 - c) / sps as f64, beta))
        .collect();
    let e = h.iter().map(|v| v * v).sum::<f64>().sqrt();
    h.iter().map(|v| (v / e) as f32).collect()
}
