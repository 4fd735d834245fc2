//! Test-only references: slow, obviously correct versions of the fast routines,
//! and seeded signal helpers.
//!
//! Takes in: plain slices. Gives out: freshly allocated results. Nothing here
//! is optimised; every routine is a direct restatement of its definition.

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

/// `n` unit-power QPSK symbols from a 64-bit LCG (Knuth's MMIX constants): a
/// rich training without a generator crate.
pub fn lcg_qpsk(n: usize, seed: u64) -> Vec<Cf32> {
    let mut s = seed;
    (0..n)
        .map(|_| {
            s = s
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            let b = (s >> 33) as u32;
            let h = std::f32::consts::FRAC_1_SQRT_2;
            Cf32::new(
                if b & 1 == 0 { h } else { -h },
                if b & 2 == 0 { h } else { -h },
            )
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

// ===================== equalise helper: channel + equalise references =====================

/// Seeded stimulus and naive references for `channel` and `equalise` tests.
#[allow(dead_code)]
pub mod eqref {
    use crate::equalise::Slicer;
    use crate::{Cf32, Cf64};
    use nalgebra::{DMatrix, DVector};
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;
    use rand_distr::{Distribution, StandardNormal};

    /// Seeded RNG.
    pub fn rng(seed: u64) -> ChaCha8Rng {
        ChaCha8Rng::seed_from_u64(seed)
    }

    /// QPSK / 16QAM points from the 3GPP TS 38.211 §5.1 closed form (via
    /// shared/REFERENCE-VALUES.md §1.1), indexed by label (first bit MSB).
    pub fn qam_points(bits: usize) -> Vec<Cf32> {
        (0..1usize << bits)
            .map(|l| {
                let b = |i: usize| ((l >> (bits - 1 - i)) & 1) as f32;
                let s = |i: usize| 1.0 - 2.0 * b(i);
                match bits {
                    2 => Cf32::new(s(0), s(1)) / 2f32.sqrt(),
                    4 => Cf32::new(s(0) * (2.0 - s(2)), s(1) * (2.0 - s(3))) / 10f32.sqrt(),
                    _ => panic!("qam_points: only 2 or 4 bits"),
                }
            })
            .collect()
    }

    /// Brute-force nearest-point slicer (an obviously-correct reference).
    pub struct BruteSlicer(pub Vec<Cf32>);

    impl Slicer for BruteSlicer {
        fn slice(&self, z: Cf32) -> usize {
            let mut best = (0, f32::INFINITY);
            for (i, p) in self.0.iter().enumerate() {
                let d = (z - p).norm_sqr();
                if d < best.1 {
                    best = (i, d);
                }
            }
            best.0
        }
        fn points(&self) -> &[Cf32] {
            &self.0
        }
    }

    /// `n` random symbols from `points`: (symbols, labels).
    pub fn random_symbols(
        r: &mut ChaCha8Rng,
        points: &[Cf32],
        n: usize,
    ) -> (Vec<Cf32>, Vec<usize>) {
        let labels: Vec<usize> = (0..n).map(|_| r.gen_range(0..points.len())).collect();
        (labels.iter().map(|&l| points[l]).collect(), labels)
    }

    /// Complex Gaussian sample with `E|n|² = var`.
    pub fn cgauss(r: &mut ChaCha8Rng, var: f64) -> Cf32 {
        let s = (var / 2.0).sqrt();
        let a: f64 = StandardNormal.sample(r);
        let b: f64 = StandardNormal.sample(r);
        Cf32::new((a * s) as f32, (b * s) as f32)
    }

    /// Direct convolution in the crate convention: `y[k] = Σ_{i=−P}^{Q} h[i]·x[k−i]`,
    /// `taps[c] = h[c − pre]`, symbols outside `x` are zero; `y.len() == x.len()`.
    pub fn convolve(x: &[Cf32], taps: &[Cf64], pre: usize) -> Vec<Cf32> {
        (0..x.len())
            .map(|k| {
                let mut acc = Cf64::new(0.0, 0.0);
                for (c, h) in taps.iter().enumerate() {
                    let idx = k as isize - (c as isize - pre as isize);
                    if idx >= 0 && (idx as usize) < x.len() {
                        let v = x[idx as usize];
                        acc += h * Cf64::new(v.re as f64, v.im as f64);
                    }
                }
                Cf32::new(acc.re as f32, acc.im as f32)
            })
            .collect()
    }

    /// Real taps to `Cf64`.
    pub fn real_taps(t: &[f64]) -> Vec<Cf64> {
        t.iter().map(|&v| Cf64::new(v, 0.0)).collect()
    }

    /// Dense normal-equations LS reference: solve `(XᴴX)·h = Xᴴy` by LU for the
    /// plain linear model (taps only) on the window `t ∈ [post, N−1−pre]`.
    pub fn dense_ls_normal_equations(
        y: &[Cf32],
        x: &[Cf32],
        offset: usize,
        pre: usize,
        post: usize,
    ) -> Vec<Cf64> {
        let l = pre + post + 1;
        let rows: Vec<usize> = (post..x.len() - pre).collect();
        let w = |v: Cf32| Cf64::new(v.re as f64, v.im as f64);
        let xm = DMatrix::<Cf64>::from_fn(rows.len(), l, |r, c| w(x[rows[r] + pre - c]));
        let b = DVector::<Cf64>::from_fn(rows.len(), |r, _| w(y[offset + rows[r]]));
        let xh = xm.adjoint();
        (&xh * &xm)
            .lu()
            .solve(&(&xh * b))
            .expect("reference solve")
            .iter()
            .cloned()
            .collect()
    }

    /// Textbook one-symbol-at-a-time DFE (no loop, no adaptation):
    /// `z_n = Σ_r ff[r]·y[n+lag−r] − Σ_j fb[j−1]·d[n−j]`, `y` zero outside, `d`
    /// the truth inside `truth_range`, else the decision; `d` before `start` is the
    /// truth inside `truth_range` and zero elsewhere. Returns soft outputs for `start..end`.
    #[allow(clippy::too_many_arguments)]
    pub fn textbook_dfe(
        y: &[Cf32],
        ff: &[Cf32],
        fb: &[Cf32],
        lag: isize,
        truth: &[Cf32],
        truth_range: std::ops::Range<usize>,
        start: usize,
        end: usize,
        slicer: &dyn Slicer,
    ) -> Vec<Cf32> {
        let mut d = vec![Cf32::new(0.0, 0.0); y.len()];
        for n in truth_range.clone() {
            if n < start {
                d[n] = truth[n];
            }
        }
        let mut out = Vec::new();
        for n in start..end {
            let mut z = Cf32::new(0.0, 0.0);
            for (r, f) in ff.iter().enumerate() {
                let k = n as isize + lag - r as isize;
                if k >= 0 && (k as usize) < y.len() {
                    z += f * y[k as usize];
                }
            }
            for (j, b) in fb.iter().enumerate() {
                let k = n as isize - 1 - j as isize;
                if k >= 0 {
                    z -= b * d[k as usize];
                }
            }
            d[n] = if truth_range.contains(&n) {
                truth[n]
            } else {
                slicer.points()[slicer.slice(z)]
            };
            out.push(z);
        }
        out
    }

    /// Dense Wiener–Hopf reference for the MMSE-DFE at delay `delay`: builds the
    /// full joint covariance of `U = [Y; −X_fb]` and cross-correlation with `x_Δ`
    /// and solves `R_UU·θ = r_Ux` by LU. Returns `(w, b, mse)` in the estimation
    /// form `z = wᴴY − bᴴX_fb` (not the apply form).
    pub fn dense_wiener_hopf(
        taps: &[Cf64],
        noise_var: f64,
        es: f64,
        nf: usize,
        nb: usize,
        delay: usize,
    ) -> (Vec<Cf64>, Vec<Cf64>, f64) {
        let l = taps.len();
        let ncol = nf + l - 1;
        let h = DMatrix::<Cf64>::from_fn(nf, ncol, |r, c| {
            if c >= r && c - r < l {
                taps[c - r]
            } else {
                Cf64::new(0.0, 0.0)
            }
        });
        // S maps X to U: U = S·X + [N; 0].
        let n = nf + nb;
        let s = DMatrix::<Cf64>::from_fn(n, ncol, |r, c| {
            if r < nf {
                h[(r, c)]
            } else if c == delay + 1 + (r - nf) {
                Cf64::new(-1.0, 0.0)
            } else {
                Cf64::new(0.0, 0.0)
            }
        });
        let mut ruu = &s * s.adjoint() * Cf64::new(es, 0.0);
        for i in 0..nf {
            ruu[(i, i)] += Cf64::new(noise_var, 0.0);
        }
        let rux = DVector::<Cf64>::from_fn(n, |r, _| s[(r, delay)] * es);
        let th = ruu.lu().solve(&rux).expect("reference solve");
        let mse = es - rux.dotc(&th).re;
        (
            th.rows(0, nf).iter().cloned().collect(),
            th.rows(nf, nb).iter().cloned().collect(),
            mse,
        )
    }

    /// Gaussian tail `Q(x) = ½·erfc(x/√2)` (erfc from Numerical Recipes' Chebyshev
    /// fit, fractional error < 1.2e-7).
    pub fn q_func(x: f64) -> f64 {
        let z = (x / 2f64.sqrt()).abs();
        let t = 1.0 / (1.0 + 0.5 * z);
        let r = t
            * (-z * z - 1.26551223
                + t * (1.00002368
                    + t * (0.37409196
                        + t * (0.09678418
                            + t * (-0.18628806
                                + t * (0.27886807
                                    + t * (-1.13520398
                                        + t * (1.48851587
                                            + t * (-0.82215223 + t * 0.17087277)))))))))
                .exp();
        let erfc = if x >= 0.0 { r } else { 2.0 - r };
        0.5 * erfc
    }

    /// Square M-QAM / QPSK SER in AWGN (Proakis; REFERENCE-VALUES §7):
    /// `P = 2P√M − P√M²`, `P√M = 2(1−1/√M)·Q(√(3·SNR/(M−1)))`.
    pub fn qam_ser(m: usize, snr: f64) -> f64 {
        let sm = (m as f64).sqrt();
        let p = 2.0 * (1.0 - 1.0 / sm) * q_func((3.0 * snr / (m as f64 - 1.0)).sqrt());
        2.0 * p - p * p
    }

    /// Data-aided EVM (RMS, linear) of `z` against `s`.
    pub fn evm(z: &[Cf32], s: &[Cf32]) -> f64 {
        let e: f64 = z
            .iter()
            .zip(s)
            .map(|(a, b)| (a - b).norm_sqr() as f64)
            .sum();
        let p: f64 = s.iter().map(|b| b.norm_sqr() as f64).sum();
        (e / p).sqrt()
    }
}
// ===================== end of equalise helper section =====================
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
