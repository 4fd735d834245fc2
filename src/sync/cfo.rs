//! Carrier-frequency-offset estimators and their Cramér–Rao bound.
//!
//! Takes in: complex correlations of reference segments ([`Cf64`]) or de-rotated
//! training products `u_k = z_k·conj(t_k)` at one sample per symbol.
//! Gives out: frequency in **cycles per sample** (segments) or **radians per symbol**
//! (Kay), positive when the received carrier is above nominal (crate CFO convention:
//! received = ideal·exp(+j2π·f·n)).
//!
//! * Coarse: the phase advance between consecutive reference segments,
//!   `f = arg(Σ_s c_{s+1}·conj(c_s)) / (2π·D)` for segments `D` samples apart —
//!   unambiguous for `|f| < 1/(2D)`.
//! * Training-only fine (kept for comparison; `refine` uses the channel-aware one):
//!   Kay's weighted phase-difference estimator (S. Kay, "A fast and accurate
//!   single frequency estimator", IEEE Trans. ASSP 37(12), 1989), the least-squares
//!   phase-slope fit in phase-difference form, which reaches the Cramér–Rao bound at
//!   high SNR; unambiguous for `|ω| < π` rad/symbol.
//! * Channel-aware fine: the maximiser of the periodogram `J(ω) = |Σ_k u_k·e^{−jωk}|²`
//!   of `u_k = z_k·conj(ŷ_k)`, where `ŷ = h ∗ t` is the training filtered by the
//!   least-squares channel estimate ([`periodogram_frequency`]). For a known reference
//!   with unknown phase this is the maximum-likelihood frequency estimate (Rife &
//!   Boorstyn 1974 for a constant amplitude; with `ŷ` in place of the tone it is the
//!   known-data form used in the joint frequency/channel ML literature, e.g. Morelli &
//!   Mengali, IEEE Trans. Commun. 48(9), 2000 — **from memory**). Unlike Kay's estimator
//!   it does not take phase differences, so samples whose amplitude the channel's ISI
//!   drives near zero only lose weight instead of throwing the estimate off.
//! * Bound: Rife & Boorstyn, IEEE Trans. Inf. Theory 20(5), 1974:
//!   `var(ω̂) ≥ 6 / (SNR·N·(N² − 1))` rad² per sample² for `N` samples at per-sample SNR;
//!   for a known reference `s_k` of varying amplitude ([`frequency_crb_known_reference_rad2`])
//!   `var(ω̂) ≥ σ² / (2·Σ_k |s_k|²·(k − k̄)²)` with `k̄` the energy centroid, which reduces
//!   to the former when `|s_k|` is constant.
use crate::Cf64;

/// Coarse frequency from segment correlations `c_s` whose segments start `spacing`
/// samples apart; cycles per sample. Returns 0 for fewer than two segments.
pub fn segment_frequency(segments: &[Cf64], spacing: f64) -> f64 {
    let acc: Cf64 = segments.windows(2).map(|w| w[1] * w[0].conj()).sum();
    if segments.len() < 2 || spacing <= 0.0 || acc.norm_sqr() == 0.0 {
        return 0.0;
    }
    acc.arg() / (std::f64::consts::TAU * spacing)
}

/// Kay's weighted phase-difference frequency estimate of `u_k ≈ A·exp(j(ω·k + φ)) + noise`,
/// radians per sample of `u`. Returns 0 for fewer than two samples.
///
/// `ω̂ = Σ_{k=0}^{N−2} w_k·arg(u_{k+1}·conj(u_k))` with the parabolic window
/// `w_k = (3N / (2(N² − 1)))·(1 − ((k − (N/2 − 1)) / (N/2))²)`, which sums to 1.
pub fn kay_frequency(u: &[Cf64]) -> f64 {
    let n = u.len();
    if n < 2 {
        return 0.0;
    }
    let nf = n as f64;
    let scale = 1.5 * nf / (nf * nf - 1.0);
    let half = nf / 2.0;
    u.windows(2)
        .enumerate()
        .map(|(k, w)| {
            let d = (k as f64 - (half - 1.0)) / half;
            let wk = scale * (1.0 - d * d);
            let p = w[1] * w[0].conj();
            if p.norm_sqr() == 0.0 {
                0.0
            } else {
                wk * p.arg()
            }
        })
        .sum()
}

/// Cramér–Rao bound on the variance of a frequency estimate, rad² per sample²,
/// for `n` samples of a tone at per-sample SNR `snr` (linear), amplitude and phase
/// unknown (Rife & Boorstyn 1974): `6 / (snr·n·(n² − 1))`.
pub fn frequency_crb_rad2(snr: f64, n: usize) -> f64 {
    let nf = n as f64;
    6.0 / (snr * nf * (nf * nf - 1.0))
}

/// Periodogram `|Σ_k u_k·e^{−jω(k−c)}|²` at `omega` (rad per sample of `u`), with the
/// index centred at `c = (N−1)/2` (the centring changes only the phase of the sum).
/// The phasor is advanced by a recurrence in f64 (drift ≈ N·1e-16, negligible).
pub fn periodogram(u: &[Cf64], omega: f64) -> f64 {
    if u.is_empty() {
        return 0.0;
    }
    let c = (u.len() as f64 - 1.0) / 2.0;
    let step = Cf64::from_polar(1.0, -omega);
    let mut e = Cf64::from_polar(1.0, omega * c);
    let mut acc = Cf64::new(0.0, 0.0);
    for v in u {
        acc += *v * e;
        e *= step;
    }
    acc.norm_sqr()
}

/// The periodogram and its first two derivatives in `ω` at `omega`:
/// `(J, J′, J″)` with `A = Σ_k u_k·e^{−jω(k−c)}`, `A′ = Σ −j(k−c)·u_k·e^{…}`,
/// `A″ = Σ −(k−c)²·u_k·e^{…}`, `J = |A|²`, `J′ = 2·Re(A′·conj A)`,
/// `J″ = 2·(|A′|² + Re(A″·conj A))` — one pass, same phasor recurrence as [`periodogram`].
fn periodogram_derivatives(u: &[Cf64], omega: f64) -> (f64, f64, f64) {
    let c = (u.len() as f64 - 1.0) / 2.0;
    let step = Cf64::from_polar(1.0, -omega);
    let mut e = Cf64::from_polar(1.0, omega * c);
    let mut a0 = Cf64::new(0.0, 0.0);
    let mut a1c = Cf64::new(0.0, 0.0);
    let mut a2c = Cf64::new(0.0, 0.0);
    for (k, v) in u.iter().enumerate() {
        let d = k as f64 - c;
        let t = *v * e;
        a0 += t;
        // A′ = −j·Σ d·t and A″ = −Σ d²·t: accumulate Σ d·t and Σ d²·t.
        a1c += t * d;
        a2c += t * (d * d);
        e *= step;
    }
    let a1v = Cf64::new(a1c.im, -a1c.re); // −j·Σ d·t
    let a2v = -a2c;
    (
        a0.norm_sqr(),
        2.0 * (a1v * a0.conj()).re,
        2.0 * (a1v.norm_sqr() + (a2v * a0.conj()).re),
    )
}

/// Frequency (rad per sample of `u`) maximising [`periodogram`] over
/// `[−range, range]`: a grid of spacing `π/(2N)` (a quarter of the main lobe's
/// half-width `2π/N`, so the best grid point lies on the main lobe within 0.25 dB of
/// its top), then Newton's method on `J′(ω) = 0` from the best grid point, kept within
/// ± one grid step of it, to `1e-9` of a step (a handful of iterations). Where the
/// periodogram is not concave there, or Newton leaves that bracket or does not settle,
/// golden-section search over the bracket to `1e-6` of a step instead. Ties on the grid
/// go to the point nearest 0. Returns 0 for fewer than two samples, a non-positive
/// range, or an all-zero `u`.
pub fn periodogram_frequency(u: &[Cf64], range: f64) -> f64 {
    let n = u.len();
    if n < 2 || !(range > 0.0 && range.is_finite()) || u.iter().all(|v| v.norm_sqr() == 0.0) {
        return 0.0;
    }
    let step = std::f64::consts::PI / (2.0 * n as f64);
    let g = (range / step).ceil() as i64;
    let mut best = (periodogram(u, 0.0), 0i64);
    for d in 1..=g {
        for j in [-d, d] {
            let v = periodogram(u, j as f64 * step);
            if v > best.0 {
                best = (v, j);
            }
        }
    }
    let w = best.1 as f64 * step;
    let (lo, hi) = (w - step, w + step);
    let mut x = w;
    for _ in 0..NEWTON_ITERATIONS {
        let (_, d1, d2) = periodogram_derivatives(u, x);
        if d2.is_nan() || d2 >= 0.0 {
            break;
        }
        let dx = -d1 / d2;
        let next = x + dx;
        if !(lo..=hi).contains(&next) {
            break;
        }
        x = next;
        if dx.abs() <= step * 1e-9 {
            return x;
        }
    }
    super::timing::golden_max(|x| periodogram(u, x), lo, hi, step * 1e-6)
}

/// Newton steps tried by [`periodogram_frequency`] before it falls back to golden
/// section (quadratic convergence from within a quarter lobe needs 3–5).
const NEWTON_ITERATIONS: usize = 12;

/// Cramér–Rao bound on the variance of a frequency estimate, rad² per sample², from
/// samples `s_k·e^{j(ωk+φ)} + n_k` with the reference `s_k` known, `φ` unknown and
/// complex white noise of variance `noise_var` per sample:
/// `σ² / (2·Σ_k |s_k|²·(k − k̄)²)`, `k̄ = Σ k|s_k|² / Σ|s_k|²` (the Fisher information of
/// `ω` after projecting out the phase). With `|s_k|² = A²` this is Rife & Boorstyn's
/// `6/(SNR·N(N²−1))`, `SNR = A²/σ²`. Infinite when the reference has no spread.
pub fn frequency_crb_known_reference_rad2(s: &[Cf64], noise_var: f64) -> f64 {
    let e: f64 = s.iter().map(|v| v.norm_sqr()).sum();
    if e <= 0.0 {
        return f64::INFINITY;
    }
    let kbar = s
        .iter()
        .enumerate()
        .map(|(k, v)| k as f64 * v.norm_sqr())
        .sum::<f64>()
        / e;
    let info: f64 = s
        .iter()
        .enumerate()
        .map(|(k, v)| v.norm_sqr() * (k as f64 - kbar).powi(2))
        .sum();
    if info <= 0.0 {
        return f64::INFINITY;
    }
    noise_var / (2.0 * info)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn periodogram_matches_a_direct_dft_sum() {
        // Slow twin: Σ u_k·exp(−jω(k−c)) with cos/sin per term (the definition).
        let u: Vec<Cf64> = (0..37)
            .map(|k| Cf64::new((k as f64 * 0.7).sin() + 0.2, (k as f64 * 1.3).cos()))
            .collect();
        for &w in &[-1.0f64, -0.013, 0.0, 0.2, 2.9] {
            let c = 18.0;
            let direct: Cf64 = u
                .iter()
                .enumerate()
                .map(|(k, v)| *v * Cf64::from_polar(1.0, -w * (k as f64 - c)))
                .sum();
            let p = periodogram(&u, w);
            // Tolerance: f64 recurrence over 37 steps, relative 1e-12 (common practice).
            assert!((p - direct.norm_sqr()).abs() <= 1e-12 * direct.norm_sqr().max(1.0));
        }
        assert_eq!(periodogram(&[], 0.3), 0.0);
    }

    #[test]
    fn periodogram_frequency_recovers_a_tone_of_varying_amplitude_exactly() {
        // Source: from memory — the periodogram of a noiseless tone with real
        // non-negative amplitudes a_k peaks exactly at its frequency (|Σ a_k| ≥ |Σ a_k e^{jθ_k}|).
        for &n in &[2usize, 3, 17, 121] {
            for &w in &[-0.05f64, -0.001, 0.0, 0.002, 0.04] {
                let u: Vec<Cf64> = (0..n)
                    .map(|k| {
                        let a = 0.05 + (k as f64 * 2.1).sin().abs();
                        Cf64::from_polar(a, w * k as f64 + 0.9)
                    })
                    .collect();
                let e = periodogram_frequency(&u, 0.06);
                // Tolerance: the documented golden-section accuracy, 1e-6 of the grid step.
                let tol = std::f64::consts::PI / (2.0 * n as f64) * 1e-6;
                assert!((e - w).abs() <= tol, "n={n} w={w} got {e}");
            }
        }
        assert_eq!(periodogram_frequency(&[], 0.1), 0.0);
        assert_eq!(periodogram_frequency(&[Cf64::new(1.0, 0.0)], 0.1), 0.0);
        assert_eq!(periodogram_frequency(&[Cf64::new(0.0, 0.0); 5], 0.1), 0.0);
    }

    #[test]
    fn periodogram_frequency_agrees_with_a_dense_grid_search() {
        // Slow twin: brute-force maximum over 200 001 points of [−range, range];
        // tolerance = the dense grid's half step.
        let mut state = 12345u64;
        let mut next = || {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5
        };
        for &n in &[5usize, 31, 64] {
            let u: Vec<Cf64> = (0..n)
                .map(|k| Cf64::from_polar(1.0, 0.03 * k as f64) + Cf64::new(next(), next()))
                .collect();
            let range = 0.2;
            let pts = 200_000;
            let mut best = (f64::MIN, 0.0);
            for i in 0..=pts {
                let w = -range + 2.0 * range * i as f64 / pts as f64;
                let v = periodogram(&u, w);
                if v > best.0 {
                    best = (v, w);
                }
            }
            let e = periodogram_frequency(&u, range);
            assert!(
                (e - best.1).abs() <= range / pts as f64 + 1e-9,
                "n={n}: {e} vs {}",
                best.1
            );
        }
    }

    /// The estimator as first written: the same grid, then golden section over ± one
    /// grid step to 1e-6 of a step.
    fn periodogram_frequency_golden(u: &[Cf64], range: f64) -> f64 {
        let n = u.len();
        let step = std::f64::consts::PI / (2.0 * n as f64);
        let g = (range / step).ceil() as i64;
        let mut best = (periodogram(u, 0.0), 0i64);
        for d in 1..=g {
            for j in [-d, d] {
                let v = periodogram(u, j as f64 * step);
                if v > best.0 {
                    best = (v, j);
                }
            }
        }
        let w = best.1 as f64 * step;
        crate::sync::timing::golden_max(|x| periodogram(u, x), w - step, w + step, step * 1e-6)
    }

    #[test]
    fn periodogram_derivatives_match_central_differences() {
        // Reference: central differences of `periodogram` (the definition) with
        // h = 1e-4 rad: truncation ≈ h²·J‴/6, tolerance 1e-5 of the scale N⁴·max|u|²
        // (common practice for second differences in f64).
        let u: Vec<Cf64> = (0..41)
            .map(|k| Cf64::new((k as f64 * 0.7).sin() + 0.2, (k as f64 * 1.3).cos()))
            .collect();
        let h = 1e-4;
        let n = u.len() as f64;
        for &w in &[-0.4f64, -0.01, 0.0, 0.05, 1.1] {
            let (j0, j1, j2) = periodogram_derivatives(&u, w);
            let (jm, jp) = (periodogram(&u, w - h), periodogram(&u, w + h));
            let scale = n * n * n * n;
            assert!((j0 - periodogram(&u, w)).abs() <= 1e-12 * scale);
            assert!(
                (j1 - (jp - jm) / (2.0 * h)).abs() <= 1e-5 * scale,
                "J′ at {w}"
            );
            assert!(
                (j2 - (jp - 2.0 * j0 + jm) / (h * h)).abs() <= 1e-5 * scale,
                "J″ at {w}"
            );
        }
    }

    #[test]
    fn newton_refinement_agrees_with_golden_section_on_noisy_tones() {
        // Slow twin: the grid-plus-golden-section estimator. Newton converges to the
        // same local maximum; golden section stops within 1e-6 of a grid step of it,
        // so the tolerance is 2e-6 of a step. 300 noisy tones of random frequency,
        // SNR from −3 to 20 dB, lengths 2, 3, a prime and 58 (the CFO rounds' size).
        let mut state = 777u64;
        let mut next = || {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5
        };
        for i in 0..300 {
            let n = [2usize, 3, 31, 58][i % 4];
            let w0 = 0.2 * next();
            let noise = 10f64.powf((-3.0 + 23.0 * (next() + 0.5)) / -20.0);
            let u: Vec<Cf64> = (0..n)
                .map(|k| {
                    Cf64::from_polar(1.0 + 0.5 * next(), w0 * k as f64)
                        + Cf64::new(next(), next()) * (noise * 2.45)
                })
                .collect();
            let range = [0.1, 0.2, 0.05][i % 3];
            let fast = periodogram_frequency(&u, range);
            let slow = periodogram_frequency_golden(&u, range);
            let step = std::f64::consts::PI / (2.0 * n as f64);
            assert!(
                (fast - slow).abs() <= 2e-6 * step,
                "trial {i} n {n}: newton {fast} golden {slow}"
            );
        }
    }

    #[test]
    fn known_reference_crb_reduces_to_rife_boorstyn_for_a_constant_amplitude() {
        // Source: Rife & Boorstyn 1974, 6/(SNR·N(N²−1)); amplitude 2, σ² = 0.5 → SNR 8.
        for &n in &[2usize, 10, 127] {
            let s: Vec<Cf64> = (0..n)
                .map(|k| Cf64::from_polar(2.0, 0.3 * k as f64))
                .collect();
            let a = frequency_crb_known_reference_rad2(&s, 0.5);
            let b = frequency_crb_rad2(8.0, n);
            assert!((a - b).abs() <= 1e-12 * b, "n={n}: {a} vs {b}");
        }
        assert!(frequency_crb_known_reference_rad2(&[Cf64::new(1.0, 0.0)], 1.0).is_infinite());
    }

    #[test]
    fn kay_weights_sum_to_one_so_a_clean_tone_is_recovered_exactly() {
        // Source: Kay 1989 — the window sums to one; a noiseless tone gives ω exactly.
        for &n in &[2usize, 3, 17, 128] {
            for &w in &[-2.5f64, -0.01, 0.0, 0.3, 3.0] {
                let u: Vec<Cf64> = (0..n)
                    .map(|k| Cf64::from_polar(2.0, w * k as f64 + 0.4))
                    .collect();
                let e = kay_frequency(&u);
                assert!((e - w).abs() < 1e-12, "n={n} w={w} got {e}");
            }
        }
        assert_eq!(kay_frequency(&[]), 0.0);
        assert_eq!(kay_frequency(&[Cf64::new(1.0, 0.0)]), 0.0);
    }

    #[test]
    fn segment_frequency_recovers_a_clean_phase_ramp() {
        let d = 50.0;
        for &f in &[-0.009f64, 0.0, 0.004] {
            let c: Vec<Cf64> = (0..4)
                .map(|s| Cf64::from_polar(3.0, std::f64::consts::TAU * f * d * s as f64 + 1.0))
                .collect();
            assert!((segment_frequency(&c, d) - f).abs() < 1e-14);
        }
    }

    #[test]
    fn crb_matches_the_rife_boorstyn_closed_form_at_a_hand_computed_point() {
        // Source: Rife & Boorstyn 1974, eq. for var(ω): 6/(SNR·N(N²−1)); N=10, SNR=100 → 6/99000.
        assert!((frequency_crb_rad2(100.0, 10) - 6.0 / 99_000.0).abs() < 1e-18);
    }
}
