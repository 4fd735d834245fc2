//! The receiver's own defects, DC offset and IQ imbalance, fitted over the
//! training in the symbol-rate domain and removed from the whole burst.
//!
//! Takes the symbol-rate samples `y` of a burst (matched-filtered, timed and
//! derotated by the synchroniser's CFO estimate), the training and its index in
//! `y`, the tap span, and the rotation `ω` (radians per symbol) the derotation
//! gave a constant at the receiver's input: `ω = −2π·f·sps` with `f` the CFO in
//! cycles per sample. Gives out a [`FrontEndFit`] (DC, image ratio) and
//! [`FrontEndFit::correct`], which removes both from `y` in place.
//!
//! Model. The receiver adds a DC `d` and an image to the signal `s` it samples:
//! `r = K1·s + K2·conj(s) + d` (crate convention, `src/lib.rs`). After
//! derotation by `e^{−j2πf(n−t0)}` and the matched filter, the DC has become a
//! phasor `d·P(f)·e^{jωk}` at symbol `k` (counted from the first training
//! symbol; `P(f)` the pulse's response at `f`, ≈ its DC gain), and the image
//! `K2·e^{j2ωk}·conj(K1⁻¹·y_clean[k])`: it turns at twice the rate against the
//! signal. So the regressors of the least-squares fit are
//! `y[k] = Σ_i h_i·x[k−i] + e^{j2ωk}·Σ_i g_i·conj(x[k−i]) + d_s·e^{jωk} + n[k]`
//! (a widely-linear model whose image term rotates; Tubbax et al.,
//! "Compensation of IQ imbalance and phase noise in OFDM systems", IEEE Trans.
//! Wireless Comm. 4(3), 2005, use the same `K1, K2` description — from memory).
//! Since `h = K1·c` and `g = K2·conj(c)` for the true channel `c`, the ratio
//! `β = K2/conj(K1)` follows as `Σ g_i·h_i / Σ |h_i|²`, and
//! `y − β·e^{j2ωk}·conj(y)` leaves `K1·(1 − |β|²)·y_clean`: no image. The
//! receiver's gain and phase imbalance follow from `g·e^{jφ} = (1 − β)/(1 + β)`.
//!
//! The approximation: the matched filter is taken as flat over the image's
//! shift of `2f`; at CFOs well inside the pulse's flat band (a few kHz against
//! hundreds of kBd) that costs nothing measurable.

use super::ChannelError;
use crate::{Cf32, Cf64};
use nalgebra::{DMatrix, DVector};

/// What the front-end fit found (symbol-rate domain, phase referred to the
/// first training symbol).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FrontEndFit {
    /// DC phasor amplitude at the matched-filter output `d_s` (`None` when not fitted).
    pub dc_symbol: Option<Cf64>,
    /// Image ratio `β = K2/conj(K1)` (`None` when not fitted).
    pub beta: Option<Cf64>,
    /// Rotation `ω` of the DC per symbol, radians.
    pub omega: f64,
    /// Residual noise variance of the fit, `RSS/(M − K)`.
    pub noise_var: f64,
    /// Observations `M`.
    pub observations: usize,
}

/// Fit the DC phasor and/or the rotating image jointly with `pre + post + 1`
/// taps over the training (observations whose regressor lies inside it, as
/// [`super::fit_channel`]). `origin` is the symbol index of `training[0]` counted
/// from the phasors' origin (0 when the origin is the first training symbol; a
/// second, decision-directed pass over a whole burst passes the burst's start).
///
/// # Errors
/// [`ChannelError::TrainingOutOfRange`], [`ChannelError::NonFinite`],
/// [`ChannelError::TooShort`] and [`ChannelError::IllConditioned`] as the
/// channel fit, the last when the regressor's condition number exceeds
/// `max_condition` (a training too short to tell the DC or the image from the
/// taps).
#[allow(clippy::too_many_arguments)]
pub fn fit_front_end(
    y: &[Cf32],
    training: &[Cf32],
    offset: usize,
    origin: f64,
    pre: usize,
    post: usize,
    omega: f64,
    dc: bool,
    iq: bool,
    max_condition: f64,
) -> Result<FrontEndFit, ChannelError> {
    let n = training.len();
    let yt = super::ls::training_window(y, n, offset)?;
    let l = pre + post + 1;
    let k = l + usize::from(dc) + if iq { l } else { 0 };
    let (t0, t1) = (post, n.saturating_sub(pre));
    let m = t1.saturating_sub(t0);
    if m < k + 1 {
        return Err(ChannelError::TooShort {
            observations: m,
            unknowns: k,
        });
    }
    let x = |i: usize| Cf64::new(f64::from(training[i].re), f64::from(training[i].im));
    let phasor = |t: usize, mult: f64| Cf64::from_polar(1.0, mult * omega * (origin + t as f64));
    let xm = DMatrix::<Cf64>::from_fn(m, k, |r, c| {
        let t = t0 + r;
        if c < l {
            x(t + pre - c)
        } else if dc && c == l {
            phasor(t, 1.0)
        } else {
            let cc = c - l - usize::from(dc);
            phasor(t, 2.0) * x(t + pre - cc).conj()
        }
    });
    let mut b = DVector::<Cf64>::from_fn(m, |r, _| {
        let v = yt[t0 + r];
        Cf64::new(f64::from(v.re), f64::from(v.im))
    });
    let qr = xm.qr();
    let r = qr.r();
    let sv = r.singular_values();
    let smax = sv.iter().cloned().fold(0.0f64, f64::max);
    let smin = sv.iter().cloned().fold(f64::INFINITY, f64::min);
    let condition = if smin > 0.0 {
        smax / smin
    } else {
        f64::INFINITY
    };
    let ill = |condition: f64| ChannelError::IllConditioned {
        unknowns: k,
        condition,
        cap: max_condition,
    };
    if condition.is_nan() || condition > max_condition {
        return Err(ill(condition));
    }
    qr.q_tr_mul(&mut b);
    let rss: f64 = b.rows(k, m - k).iter().map(|v| v.norm_sqr()).sum();
    let coef = r
        .solve_upper_triangular(&b.rows(0, k).into_owned())
        .ok_or_else(|| ill(f64::INFINITY))?;
    let h = &coef.as_slice()[..l];
    let dc_symbol = dc.then(|| coef[l]);
    let beta = iq.then(|| {
        let g = &coef.as_slice()[l + usize::from(dc)..];
        let num: Cf64 = g.iter().zip(h).map(|(g, h)| g * h).sum();
        let den: f64 = h.iter().map(|h| h.norm_sqr()).sum();
        if den > 0.0 {
            num / den
        } else {
            Cf64::new(0.0, 0.0)
        }
    });
    Ok(FrontEndFit {
        dc_symbol,
        beta,
        omega,
        noise_var: super::noise_variance_from_rss(rss, m, k),
        observations: m,
    })
}

impl FrontEndFit {
    /// Remove the fitted DC and image from `y[range]` in place; `offset` is the
    /// index in `y` of the first training symbol (where the phasors start).
    pub fn correct(&self, y: &mut [Cf32], offset: usize, range: std::ops::Range<usize>) {
        let end = range.end.min(y.len());
        for (i, v) in y.iter_mut().enumerate().take(end).skip(range.start) {
            let t = i as f64 - offset as f64;
            let mut s = Cf64::new(f64::from(v.re), f64::from(v.im));
            if let Some(d) = self.dc_symbol {
                s -= d * Cf64::from_polar(1.0, self.omega * t);
            }
            if let Some(b) = self.beta {
                s -= b * Cf64::from_polar(1.0, 2.0 * self.omega * t) * s.conj();
            }
            *v = Cf32::new(s.re as f32, s.im as f32);
        }
    }

    /// The receiver's gain imbalance (dB) and phase imbalance (degrees) in the
    /// crate's convention (`Q' = g·(Q·cos φ − I·sin φ)`), from `β`.
    pub fn iq_imbalance(&self) -> Option<(f64, f64)> {
        self.beta.map(imbalance_from_beta)
    }
}

/// `g·e^{jφ} = (1 − β)/(1 + β)` → (`20·log10 g` dB, `φ` degrees).
pub fn imbalance_from_beta(beta: Cf64) -> (f64, f64) {
    let z = (Cf64::new(1.0, 0.0) - beta) / (Cf64::new(1.0, 0.0) + beta);
    (20.0 * z.norm().max(1e-300).log10(), z.arg().to_degrees())
}

/// `β = K2/conj(K1)` of a receiver with gain imbalance `gain_db` and phase
/// imbalance `phase_deg` (`K1 = (1 + g·e^{−jφ})/2`, `K2 = (1 − g·e^{jφ})/2`).
pub fn beta_from_imbalance(gain_db: f64, phase_deg: f64) -> Cf64 {
    let z = Cf64::from_polar(10f64.powf(gain_db / 20.0), phase_deg.to_radians());
    (Cf64::new(1.0, 0.0) - z) / (Cf64::new(1.0, 0.0) + z)
}

#[cfg(test)]
mod tests {
    use super::*;

    use crate::testutil::lcg_qpsk as training;

    /// Direct evaluation of the receiver model of the module doc at symbol rate.
    fn received(
        x: &[Cf32],
        c: &[Cf64],
        pre: usize,
        k1: Cf64,
        k2: Cf64,
        d: Cf64,
        omega: f64,
    ) -> Vec<Cf32> {
        (0..x.len())
            .map(|k| {
                let mut clean = Cf64::new(0.0, 0.0);
                for (i, ci) in c.iter().enumerate() {
                    let j = k as i64 + pre as i64 - i as i64;
                    if (0..x.len() as i64).contains(&j) {
                        let v = x[j as usize];
                        clean += ci * Cf64::new(f64::from(v.re), f64::from(v.im));
                    }
                }
                let w = Cf64::from_polar(1.0, omega * k as f64);
                let v = k1 * clean + k2 * w * w * clean.conj() + d * w;
                Cf32::new(v.re as f32, v.im as f32)
            })
            .collect()
    }

    // The model is exact here, so the fit must recover DC and image to the f32
    // rounding of y (common practice for a noise-free least-squares check).
    #[test]
    fn a_noise_free_burst_gives_back_the_receivers_dc_and_imbalance() {
        let x = training(200, 3);
        let c = [
            Cf64::new(0.2, 0.1),
            Cf64::new(1.0, 0.0),
            Cf64::new(0.3, -0.2),
        ];
        let (gain_db, phase_deg) = (0.9, 4.5);
        let beta = beta_from_imbalance(gain_db, phase_deg);
        let z = Cf64::from_polar(10f64.powf(gain_db / 20.0), phase_deg.to_radians());
        let k1 = (Cf64::new(1.0, 0.0) + z.conj()) / 2.0;
        let k2 = (Cf64::new(1.0, 0.0) - z) / 2.0;
        assert!((k2 / k1.conj() - beta).norm() < 1e-12);
        let d = Cf64::new(0.03, -0.02);
        for omega in [0.0, 0.02, -0.3] {
            let y = received(&x, &c, 1, k1, k2, d, omega);
            let fit = fit_front_end(&y, &x, 0, 0.0, 1, 1, omega, true, true, 1e3).unwrap();
            let b = fit.beta.unwrap();
            assert!((b - beta).norm() < 1e-5, "ω {omega}: β {b} against {beta}");
            let ds = fit.dc_symbol.unwrap();
            assert!((ds - d).norm() < 1e-5, "ω {omega}: d {ds}");
            let (g, p) = fit.iq_imbalance().unwrap();
            assert!((g - gain_db).abs() < 1e-3 && (p - phase_deg).abs() < 1e-2);
            // After the correction, a plain linear fit leaves no residual.
            let mut yc = y.clone();
            let all = 0..yc.len();
            fit.correct(&mut yc, 0, all);
            let plain = fit_front_end(&yc, &x, 0, 0.0, 1, 1, omega, false, false, 1e3).unwrap();
            assert!(plain.noise_var < 1e-10, "ω {omega}: {}", plain.noise_var);
        }
    }

    #[test]
    fn the_imbalance_conversion_round_trips() {
        for (g, p) in [(0.0, 0.0), (0.9, 4.5), (-1.5, -7.0), (3.0, 20.0)] {
            let (g2, p2) = imbalance_from_beta(beta_from_imbalance(g, p));
            assert!((g - g2).abs() < 1e-12 && (p - p2).abs() < 1e-10);
        }
    }
}
