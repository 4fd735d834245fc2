//! Test-only references: slow, obviously correct versions of the fast routines,
//! and seeded signal helpers.
//!
//! Takes in: plain slices. Gives out: freshly allocated results. Nothing here
//! is optimised; every routine is a direct transcription of its definition.

use crate::Cf32;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;

/// Full linear convolution `y[n] = Σ_k a[k]·b[n−k]`, length `a.len() + b.len() − 1`
/// (empty if either input is empty), in f64.
pub fn direct_convolve_real(a: &[f64], b: &[f64]) -> Vec<f64> {
    if a.is_empty() || b.is_empty() {
        return Vec::new();
    }
    let mut y = vec![0.0; a.len() + b.len() - 1];
    for (i, &x) in a.iter().enumerate() {
        for (j, &h) in b.iter().enumerate() {
            y[i + j] += x * h;
        }
    }
    y
}

/// Full linear convolution of complex `x` with real `h`, accumulated in f64.
pub fn direct_convolve_complex_real(x: &[Cf32], h: &[f32]) -> Vec<Cf32> {
    if x.is_empty() || h.is_empty() {
        return Vec::new();
    }
    let mut y = vec![(0.0f64, 0.0f64); x.len() + h.len() - 1];
    for (i, v) in x.iter().enumerate() {
        for (j, &t) in h.iter().enumerate() {
            y[i + j].0 += v.re as f64 * t as f64;
            y[i + j].1 += v.im as f64 * t as f64;
        }
    }
    y.into_iter()
        .map(|(r, i)| Cf32::new(r as f32, i as f32))
        .collect()
}

/// Centred correlation `y[n] = Σ_m h[m]·x[n + m − c]`, `c = (h.len() − 1)/2`,
/// zero outside `x`; output as long as `x`. Accumulated in f64.
pub fn naive_correlate_centred(x: &[Cf32], h: &[f32]) -> Vec<Cf32> {
    let c = (h.len() as i64 - 1) / 2;
    (0..x.len() as i64)
        .map(|n| {
            let (mut re, mut im) = (0.0f64, 0.0f64);
            for (m, &t) in h.iter().enumerate() {
                let i = n + m as i64 - c;
                if i >= 0 && (i as usize) < x.len() {
                    re += x[i as usize].re as f64 * t as f64;
                    im += x[i as usize].im as f64 * t as f64;
                }
            }
            Cf32::new(re as f32, im as f32)
        })
        .collect()
}

/// `n` complex values uniform in [−1, 1)², from a seeded ChaCha8 generator.
pub fn random_symbols(n: usize, seed: u64) -> Vec<Cf32> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    (0..n)
        .map(|_| Cf32::new(rng.gen_range(-1.0..1.0), rng.gen_range(-1.0..1.0)))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn references_reproduce_hand_computed_cases() {
        // Hand-computed: [1, 2] ∗ [1, 1, 1] = [1, 3, 3, 2].
        assert_eq!(
            direct_convolve_real(&[1.0, 2.0], &[1.0, 1.0, 1.0]),
            vec![1.0, 3.0, 3.0, 2.0]
        );
        assert!(direct_convolve_real(&[], &[1.0]).is_empty());
        let x = [Cf32::new(1.0, -1.0), Cf32::new(2.0, 0.5)];
        let y = direct_convolve_complex_real(&x, &[0.5, 1.0]);
        assert_eq!(
            y,
            vec![
                Cf32::new(0.5, -0.5),
                Cf32::new(2.0, -0.75),
                Cf32::new(2.0, 0.5)
            ]
        );
        // Centred correlation with taps [1, 2, 3] (c = 1): y[n] = x[n−1] + 2x[n] + 3x[n+1].
        let x = [
            Cf32::new(1.0, 0.0),
            Cf32::new(10.0, 0.0),
            Cf32::new(100.0, 0.0),
        ];
        let y = naive_correlate_centred(&x, &[1.0, 2.0, 3.0]);
        let re: Vec<f32> = y.iter().map(|v| v.re).collect();
        assert_eq!(re, vec![32.0, 321.0, 210.0]);
    }
}

/// Two-sided binomial acceptance interval `[lo, hi]` for a count of successes in
/// `n` trials with success probability `p`: the smallest `lo` and largest `hi`
/// with `P(K < lo) ≤ (1−conf)/2` and `P(K > hi) ≤ (1−conf)/2`. Exact, summed in
/// log space (ln k! by cumulative sums), so it works for n up to a few million.
pub fn binomial_interval(n: u64, p: f64, conf: f64) -> (u64, u64) {
    assert!(p > 0.0 && p < 1.0 && conf > 0.0 && conf < 1.0);
    let tail = (1.0 - conf) / 2.0;
    let mut ln_fact = vec![0.0f64; n as usize + 1];
    for k in 1..=n as usize {
        ln_fact[k] = ln_fact[k - 1] + (k as f64).ln();
    }
    let ln_pmf = |k: u64| {
        ln_fact[n as usize] - ln_fact[k as usize] - ln_fact[(n - k) as usize]
            + k as f64 * p.ln()
            + (n - k) as f64 * (1.0 - p).ln()
    };
    // lo: first k where the lower tail P(K ≤ k) exceeds `tail` ⇒ P(K < k) ≤ tail.
    let mut cdf = 0.0;
    let mut lo = 0;
    for k in 0..=n {
        cdf += ln_pmf(k).exp();
        if cdf > tail {
            lo = k;
            break;
        }
    }
    let mut sf = 0.0;
    let mut hi = n;
    for k in (0..=n).rev() {
        sf += ln_pmf(k).exp();
        if sf > tail {
            hi = k;
            break;
        }
    }
    (lo, hi)
}

/// Gaussian-noise helper: adds complex noise of total variance `var` (each
/// component `var/2`) from a seeded ChaCha8 generator.
pub fn add_awgn(x: &mut [Cf32], var: f64, seed: u64) {
    use rand_distr::{Distribution, Normal};
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let nd = Normal::new(0.0f64, (var / 2.0).sqrt()).expect("finite variance");
    for v in x.iter_mut() {
        v.re += nd.sample(&mut rng) as f32;
        v.im += nd.sample(&mut rng) as f32;
    }
}

#[cfg(test)]
mod binomial_tests {
    use super::*;

    #[test]
    fn binomial_interval_matches_hand_computed_fair_coin_case() {
        // Hand-computed: n = 10, p = 0.5: P(K = 0) = 1/1024 ≤ 0.005 < P(K ≤ 1) = 11/1024,
        // so at 99 % the interval is [1, 9].
        assert_eq!(binomial_interval(10, 0.5, 0.99), (1, 9));
        // At 50 %: P(K ≤ 3) = 176/1024 ≤ 0.25 < P(K ≤ 4) = 386/1024 ⇒ [4, 6].
        assert_eq!(binomial_interval(10, 0.5, 0.5), (4, 6));
        // Large n: centred on n·p, width ≈ 2·2.576·√(npq) (normal approximation).
        let (lo, hi) = binomial_interval(200_000, 0.1, 0.99);
        let sd = (200_000.0f64 * 0.1 * 0.9).sqrt();
        assert!(
            ((hi - lo) as f64 - 2.0 * 2.576 * sd).abs() < 4.0,
            "{lo} {hi}"
        );
        assert!(((lo + hi) as f64 / 2.0 - 20_000.0).abs() < 2.0);
    }
}

// ---- Synchroniser test helpers (sync helper) ----

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
            let p = crate::signal::rrc::rrc_impulse((n as f64 - tk) / sps_f, beta) * norm * b.gain;
            let ph = std::f64::consts::TAU * (b.cfo * n as f64).rem_euclid(1.0) + b.phase;
            let c = Cf32::new((p * ph.cos()) as f32, (p * ph.sin()) as f32);
            x[n as usize] += *s * c;
        }
    }
}
