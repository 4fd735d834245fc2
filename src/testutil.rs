//! Test-only helpers: seeded stimulus, naive references for the fast
//! routines, and textbook formulas. Compiled under `#[cfg(test)]` only.
//! Other modules may add sections; keep each section marked.

#![allow(dead_code)]

// ===================== equalise helper: channel + equalise references =====================

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
pub fn random_symbols(r: &mut ChaCha8Rng, points: &[Cf32], n: usize) -> (Vec<Cf32>, Vec<usize>) {
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
                                    + t * (1.48851587 + t * (-0.82215223 + t * 0.17087277)))))))))
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

// ===================== end of equalise helper section =====================
