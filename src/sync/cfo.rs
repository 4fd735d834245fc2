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
//! * Fine: Kay's weighted phase-difference estimator (S. Kay, "A fast and accurate
//!   single frequency estimator", IEEE Trans. ASSP 37(12), 1989), the least-squares
//!   phase-slope fit in phase-difference form, which reaches the Cramér–Rao bound at
//!   high SNR; unambiguous for `|ω| < π` rad/symbol.
//! * Bound: Rife & Boorstyn, IEEE Trans. Inf. Theory 20(5), 1974:
//!   `var(ω̂) ≥ 6 / (SNR·N·(N² − 1))` rad² per sample² for `N` samples at per-sample SNR.
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

#[cfg(test)]
mod tests {
    use super::*;

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
