//! Least-squares channel fit over the training block.
//!
//! Takes `y` (symbol-rate samples), the training symbols `x` and the index
//! `offset` of `x[0]` in `y`; gives a [`ChannelEstimate`].
//!
//! Observation window: only observations whose whole regressor lies inside the
//! training are used, i.e. `y[offset + t]` for `t ∈ [Q, N−1−P]` (`N` training
//! symbols), so no unknown payload symbol enters the fit. That leaves
//! `M = N − P − Q` equations for `K = P + Q + 1` (+1 DC, +`P+Q+1` conjugate taps)
//! complex unknowns. The system is solved by a Householder QR of the regressor
//! (nalgebra); the residual sum of squares is the norm of the part of `y`
//! orthogonal to the regressor's column space, and the condition number is the
//! ratio of the extreme singular values of `R` (equal to those of the regressor).
//!
//! Automatic span: every `(P, Q)` in the configured ranges is fitted on
//! the common window of the largest model (so all candidates see the same `M`
//! observations) and the one minimising
//! `MDL = M·ln(RSS/M) + K·ln(M)` is kept (Rissanen, "Modeling by shortest data
//! description", Automatica 14, 1978; the complex-data form with one penalty
//! `ln M` per complex unknown as in Wax & Kailath 1985). Ties go to the smaller
//! model. The winner is then refitted on its own (larger) window.

use super::noise::{noise_variance_from_rss, significant_tap_count, snr_db};
use super::{ChannelError, ChannelEstimate, ChannelFitConfig, SpanChoice, TapSpan};
use crate::{Cf32, Cf64};
use nalgebra::{DMatrix, DVector};

/// One solved linear model.
struct Solved {
    coef: Vec<Cf64>,
    rss: f64,
    condition: f64,
    diag_inv: Vec<f64>,
}

/// Fit the channel over the training block (see the module doc for the window,
/// the solver and the automatic tap-count choice).
///
/// # Errors
/// [`ChannelError::TrainingOutOfRange`] when the training does not fit in `y`;
/// [`ChannelError::TooShort`] when `M < K + 1`; [`ChannelError::IllConditioned`]
/// when the training does not excite every unknown (condition number above
/// `cfg.max_condition`); [`ChannelError::NonFinite`] for NaN/inf samples in the
/// window; [`ChannelError::BadConfig`] for a non-positive cap or significance.
pub fn fit_channel(
    y: &[Cf32],
    training: &[Cf32],
    offset: usize,
    cfg: &ChannelFitConfig,
) -> Result<ChannelEstimate, ChannelError> {
    if cfg.max_condition.is_nan() || cfg.max_condition < 1.0 {
        return Err(ChannelError::BadConfig {
            key: "max_condition",
            expected: "a number ≥ 1",
            found: cfg.max_condition.to_string(),
        });
    }
    if cfg.significance.is_nan() || cfg.significance <= 0.0 {
        return Err(ChannelError::BadConfig {
            key: "significance",
            expected: "a number > 0",
            found: cfg.significance.to_string(),
        });
    }
    let n = training.len();
    let yt = training_window(y, n, offset)?;
    match cfg.span {
        TapSpan::Fixed { pre, post } => {
            fit_fixed(yt, training, pre, post, cfg, SpanChoice::Fixed, None)
        }
        TapSpan::Auto {
            min_pre,
            max_pre,
            min_post,
            max_post,
        } => {
            if min_pre > max_pre || min_post > max_post {
                return Err(ChannelError::BadConfig {
                    key: "span",
                    expected: "min ≤ max for the pre- and post-cursor counts",
                    found: format!("pre {min_pre}..={max_pre}, post {min_post}..={max_post}"),
                });
            }
            let mut best: Option<(f64, usize, usize)> = None;
            let mut first_err = None;
            for pre in min_pre..=max_pre {
                for post in min_post..=max_post {
                    let window = (max_post, n.saturating_sub(max_pre));
                    match solve_model(yt, training, pre, post, cfg, Some(window)) {
                        Ok((s, m)) => {
                            let k = s.coef.len() as f64;
                            let mf = m as f64;
                            let score = mf * (s.rss.max(f64::MIN_POSITIVE) / mf).ln() + k * mf.ln();
                            let better = match best {
                                None => true,
                                Some((b, bp, bq)) => {
                                    score < b - 1e-9
                                        || ((score - b).abs() <= 1e-9 && pre + post < bp + bq)
                                }
                            };
                            if better {
                                best = Some((score, pre, post));
                            }
                        }
                        Err(e) => {
                            if first_err.is_none() {
                                first_err = Some(e);
                            }
                        }
                    }
                }
            }
            match best {
                Some((score, pre, post)) => fit_fixed(
                    yt,
                    training,
                    pre,
                    post,
                    cfg,
                    SpanChoice::Mdl { score },
                    None,
                ),
                None => Err(first_err.unwrap_or(ChannelError::TooShort {
                    observations: 0,
                    unknowns: 1,
                })),
            }
        }
    }
}

/// The received samples under the training, `y[offset .. offset + n]`, checked to
/// lie inside `y` and to be finite (both fits take their input through this).
pub(super) fn training_window(
    y: &[Cf32],
    n: usize,
    offset: usize,
) -> Result<&[Cf32], ChannelError> {
    if offset.checked_add(n).map_or(true, |end| end > y.len()) {
        return Err(ChannelError::TrainingOutOfRange {
            offset,
            training_len: n,
            samples: y.len(),
        });
    }
    let yt = &y[offset..offset + n];
    if let Some(i) = yt
        .iter()
        .position(|v| !(v.re.is_finite() && v.im.is_finite()))
    {
        return Err(ChannelError::NonFinite { index: offset + i });
    }
    Ok(yt)
}

/// Taps only: the least-squares taps `h[−pre..=post]` of the plain linear model (no DC,
/// no conjugate taps) on the same observation window as [`fit_channel`], for callers
/// that need nothing else (no noise variance, condition number or tap variances).
///
/// Solver: the normal equations `(XᴴX)·h = Xᴴy` by a Cholesky factorisation, in f64
/// — `O(M·K²)` with `K = pre + post + 1` small, against the QR, SVD and triangular
/// inverse of [`fit_channel`]. Forming `XᴴX` squares the condition number, which costs
/// nothing at the condition numbers accepted here (≤ `max_condition`, default 1e3:
/// relative error ≲ 1e6·ε ≈ 2e-10).
///
/// Conditioning: a pivot of the factorisation that is not positive, or
/// `max_i (XᴴX)_ii / min_j d_j > max_condition²` (`d_j` the squared pivots) is
/// rejected. Since `λ_max ≥ max_i (XᴴX)_ii` and `λ_min ≤ min_j d_j`, that ratio is a
/// lower bound on `cond(X)²`: every training rejected here is also rejected by
/// [`fit_channel`] with the same cap, while one whose bound passes but whose
/// condition number is above the cap is accepted here and not there.
///
/// # Errors
/// As [`fit_channel`]: [`ChannelError::BadConfig`] (cap not ≥ 1),
/// [`ChannelError::TrainingOutOfRange`], [`ChannelError::NonFinite`],
/// [`ChannelError::TooShort`] (`M < K + 1`) and [`ChannelError::IllConditioned`].
pub fn fit_taps(
    y: &[Cf32],
    training: &[Cf32],
    offset: usize,
    pre: usize,
    post: usize,
    max_condition: f64,
) -> Result<Vec<Cf64>, ChannelError> {
    if max_condition.is_nan() || max_condition < 1.0 {
        return Err(ChannelError::BadConfig {
            key: "max_condition",
            expected: "a number ≥ 1",
            found: max_condition.to_string(),
        });
    }
    let n = training.len();
    let yt = training_window(y, n, offset)?;
    let k = pre + post + 1;
    let (t0, t1) = (post, n.saturating_sub(pre));
    let m = t1.saturating_sub(t0);
    if m < k + 1 {
        return Err(ChannelError::TooShort {
            observations: m,
            unknowns: k,
        });
    }
    // Row t ∈ [t0, t1) of X holds x[t + pre − c] in column c (tap c − pre), so
    // (XᴴX)[a][b] = Σ_t conj(x[t+pre−a])·x[t+pre−b] and (Xᴴy)[a] = Σ_t conj(x[t+pre−a])·y[t].
    // The Gram is Hermitian: fill the lower triangle, read the upper by conjugation.
    // With s = t + pre − a and lag δ = a − b ≥ 0, (XᴴX)[a][b] = Σ_s conj(x[s])·x[s+δ]
    // over s ∈ [t0+pre−a, t1+pre−a): the window of (a+1, b+1) is that of (a, b) moved
    // down by one sample, so each diagonal needs one full sum (b = 0) and then one term
    // in and one out per step — O(M·K + K²) instead of O(M·K²).
    let x: Vec<Cf64> = training.iter().map(|v| widen(*v)).collect();
    let mut g = vec![Cf64::new(0.0, 0.0); k * k];
    let mut rhs = vec![Cf64::new(0.0, 0.0); k];
    for (a, r) in rhs.iter_mut().enumerate() {
        *r = (t0..t1).map(|t| x[t + pre - a].conj() * widen(yt[t])).sum();
    }
    for delta in 0..k {
        let (lo, hi) = (t0 + pre - delta, t1 + pre - delta);
        let mut acc: Cf64 = (lo..hi).map(|s| x[s].conj() * x[s + delta]).sum();
        g[delta * k] = acc;
        for b in 1..k - delta {
            // (a, b) = (delta + b, b): window [lo − b, hi − b).
            let (add, drop) = (lo - b, hi - b);
            acc += x[add].conj() * x[add + delta] - x[drop].conj() * x[drop + delta];
            g[(delta + b) * k + b] = acc;
        }
    }
    // Cholesky G = L·Lᴴ in place (lower triangle).
    let ill = |condition: f64| ChannelError::IllConditioned {
        unknowns: k,
        condition,
        cap: max_condition,
    };
    let max_diag = (0..k).map(|j| g[j * k + j].re).fold(0.0f64, f64::max);
    let mut min_pivot = f64::INFINITY;
    for j in 0..k {
        let mut d = g[j * k + j].re;
        for p in 0..j {
            d -= g[j * k + p].norm_sqr();
        }
        if d.is_nan() || d <= 0.0 {
            return Err(ill(f64::INFINITY));
        }
        min_pivot = min_pivot.min(d);
        let ljj = d.sqrt();
        g[j * k + j] = Cf64::new(ljj, 0.0);
        for i in j + 1..k {
            let mut v = g[i * k + j];
            for p in 0..j {
                v -= g[i * k + p] * g[j * k + p].conj();
            }
            g[i * k + j] = v / ljj;
        }
    }
    let bound = (max_diag / min_pivot).sqrt();
    if bound.is_nan() || bound > max_condition {
        return Err(ill(bound));
    }
    // L·u = Xᴴy, then Lᴴ·h = u.
    for i in 0..k {
        let mut v = rhs[i];
        for p in 0..i {
            v -= g[i * k + p] * rhs[p];
        }
        rhs[i] = v / g[i * k + i].re;
    }
    for i in (0..k).rev() {
        let mut v = rhs[i];
        for p in i + 1..k {
            v -= g[p * k + i].conj() * rhs[p];
        }
        rhs[i] = v / g[i * k + i].re;
    }
    Ok(rhs)
}

fn unknown_count(pre: usize, post: usize, cfg: &ChannelFitConfig) -> usize {
    let l = pre + post + 1;
    l + usize::from(cfg.dc_offset) + if cfg.iq_imbalance { l } else { 0 }
}

/// Solve one model; `window = (t_first, t_end)` restricts observations to training
/// indices `t ∈ [t_first, t_end)` (default: `[post, N − pre)`). Returns the
/// solution and the number of observations.
fn solve_model(
    yt: &[Cf32],
    x: &[Cf32],
    pre: usize,
    post: usize,
    cfg: &ChannelFitConfig,
    window: Option<(usize, usize)>,
) -> Result<(Solved, usize), ChannelError> {
    let n = x.len();
    let l = pre + post + 1;
    let k = unknown_count(pre, post, cfg);
    let (t0, t1) = window.unwrap_or((post, n.saturating_sub(pre)));
    let m = t1.saturating_sub(t0);
    if m < k + 1 {
        return Err(ChannelError::TooShort {
            observations: m,
            unknowns: k,
        });
    }
    // Regressor: row r ↔ observation t = t0 + r; column c < l ↔ tap i = c − pre,
    // value x[t − i] = x[t + pre − c].
    let xm = DMatrix::<Cf64>::from_fn(m, k, |r, c| {
        let t = t0 + r;
        if c < l {
            widen(x[t + pre - c])
        } else if cfg.dc_offset && c == l {
            Cf64::new(1.0, 0.0)
        } else {
            let cc = c - l - usize::from(cfg.dc_offset);
            widen(x[t + pre - cc]).conj()
        }
    });
    let mut b = DVector::<Cf64>::from_fn(m, |r, _| widen(yt[t0 + r]));
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
    if condition.is_nan() || condition > cfg.max_condition {
        return Err(ChannelError::IllConditioned {
            unknowns: k,
            condition,
            cap: cfg.max_condition,
        });
    }
    qr.q_tr_mul(&mut b);
    let rss: f64 = b.rows(k, m - k).iter().map(|v| v.norm_sqr()).sum();
    let qb = b.rows(0, k).into_owned();
    let coef = r
        .solve_upper_triangular(&qb)
        .ok_or(ChannelError::IllConditioned {
            unknowns: k,
            condition: f64::INFINITY,
            cap: cfg.max_condition,
        })?;
    // diag((XᴴX)⁻¹) = diag(R⁻¹R⁻ᴴ) = squared row norms of R⁻¹.
    let rinv = r
        .solve_upper_triangular(&DMatrix::<Cf64>::identity(k, k))
        .ok_or(ChannelError::IllConditioned {
            unknowns: k,
            condition: f64::INFINITY,
            cap: cfg.max_condition,
        })?;
    let diag_inv = (0..k)
        .map(|i| rinv.row(i).iter().map(|v| v.norm_sqr()).sum())
        .collect();
    Ok((
        Solved {
            coef: coef.iter().cloned().collect(),
            rss,
            condition,
            diag_inv,
        },
        m,
    ))
}

fn fit_fixed(
    yt: &[Cf32],
    x: &[Cf32],
    pre: usize,
    post: usize,
    cfg: &ChannelFitConfig,
    choice: SpanChoice,
    window: Option<(usize, usize)>,
) -> Result<ChannelEstimate, ChannelError> {
    let (s, m) = solve_model(yt, x, pre, post, cfg, window)?;
    let l = pre + post + 1;
    let k = s.coef.len();
    let noise_var = noise_variance_from_rss(s.rss, m, k);
    let es = x.iter().map(|v| widen(*v).norm_sqr()).sum::<f64>() / x.len().max(1) as f64;
    let taps: Vec<Cf64> = s.coef[..l].to_vec();
    let tap_variance: Vec<f64> = s.diag_inv[..l].iter().map(|d| d * noise_var).collect();
    let dc = cfg.dc_offset.then(|| s.coef[l]);
    let conj_taps = cfg
        .iq_imbalance
        .then(|| s.coef[l + usize::from(cfg.dc_offset)..].to_vec());
    let energy: f64 = taps.iter().map(|h| h.norm_sqr()).sum();
    Ok(ChannelEstimate {
        significant_taps: significant_tap_count(&taps, &tap_variance, cfg.significance),
        snr_db: snr_db(energy * es, noise_var),
        taps,
        pre,
        post,
        conj_taps,
        dc,
        noise_var,
        es,
        observations: m,
        unknowns: k,
        condition_number: s.condition,
        tap_variance,
        span_choice: choice,
    })
}

#[inline]
fn widen(v: Cf32) -> Cf64 {
    Cf64::new(v.re as f64, v.im as f64)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testutil::eqref::{
        cgauss, convolve, dense_ls_normal_equations, qam_points, random_symbols, rng,
    };

    fn cfg(pre: usize, post: usize) -> ChannelFitConfig {
        ChannelFitConfig {
            span: TapSpan::Fixed { pre, post },
            ..ChannelFitConfig::default()
        }
    }

    fn c(re: f64, im: f64) -> Cf64 {
        Cf64::new(re, im)
    }

    /// Burst = training only, through `taps` plus noise of variance `var`.
    fn burst(seed: u64, x: &[Cf32], taps: &[Cf64], pre: usize, var: f64) -> Vec<Cf32> {
        let mut r = rng(seed);
        convolve(x, taps, pre)
            .into_iter()
            .map(|v| v + cgauss(&mut r, var))
            .collect()
    }

    #[test]
    fn ls_taps_are_unbiased_with_covariance_sigma2_inverse_gram_over_500_trials() {
        // Source: Kay, Fundamentals of Statistical Signal Processing: Estimation
        // Theory (1993), ch. 4 (linear model): ĥ ~ CN(h, σ²(XᴴX)⁻¹), and the
        // residual has M − K degrees of freedom so E[RSS/(M−K)] = σ².
        let q = qam_points(2);
        let (x, _) = random_symbols(&mut rng(1), &q, 64);
        let taps = [c(0.2, -0.1), c(1.0, 0.3), c(-0.4, 0.25)];
        let var = 0.1;
        let trials = 500;
        let mut sum = [Cf64::new(0.0, 0.0); 3];
        let mut sq = [0.0f64; 3];
        let mut nv = 0.0;
        let mut pred = Vec::new();
        let mut dof = 0;
        for t in 0..trials {
            let y = burst(100 + t, &x, &taps, 1, var);
            let e = fit_channel(&y, &x, 0, &cfg(1, 1)).unwrap();
            for i in 0..3 {
                sum[i] += e.taps[i];
                sq[i] += (e.taps[i] - taps[i]).norm_sqr();
            }
            nv += e.noise_var;
            // tap_variance uses σ̂²; the Kay covariance uses the true σ².
            pred = e
                .tap_variance
                .iter()
                .map(|v| v / e.noise_var * var)
                .collect();
            dof = e.observations - e.unknowns;
        }
        let n = trials as f64;
        for i in 0..3 {
            // Mean: each of re/im of the mean has variance var_i/(2n); allow
            // 4.5 standard deviations of the complex error magnitude.
            let err = (sum[i] / n - taps[i]).norm();
            let tol = 4.5 * (pred[i] / n).sqrt();
            assert!(err < tol, "tap {i}: bias {err:.2e} above {tol:.2e}");
            // Variance: |e|² is exponential (mean v, sd v), so the sample mean of
            // n draws has relative sd 1/√n = 4.5 %; allow 4 sd = 18 %.
            let ratio = sq[i] / n / pred[i];
            assert!(
                (ratio - 1.0).abs() < 4.0 / n.sqrt(),
                "tap {i}: variance ratio {ratio:.3}"
            );
        }
        // σ̂² = RSS/(M−K): a χ² with 2(M−K) real dof, relative sd 1/√(M−K) per trial.
        let ratio = nv / n / var;
        let tol = 4.0 / (n * dof as f64).sqrt();
        assert!(
            (ratio - 1.0).abs() < tol,
            "noise variance ratio {ratio:.4}, tol {tol:.4}"
        );
    }

    #[test]
    fn snr_estimate_is_within_0_3_db_of_truth_at_ten_thousand_symbols() {
        // Source: the definition SNR = Σ|h|²·Es/σ² (src/lib.rs conventions);
        // the 0.3 dB bound is the task's acceptance figure (common practice).
        let q = qam_points(4);
        let (x, _) = random_symbols(&mut rng(2), &q, 10_000);
        let taps = [c(0.3, 0.1), c(0.9, -0.2), c(0.0, 0.35), c(-0.1, 0.05)];
        let energy: f64 = taps.iter().map(|h| h.norm_sqr()).sum();
        for snr_db in [5.0, 15.0, 25.0] {
            let var = energy / 10f64.powf(snr_db / 10.0);
            let y = burst(3, &x, &taps, 1, var);
            let e = fit_channel(&y, &x, 0, &cfg(1, 2)).unwrap();
            assert!(
                (e.snr_db - snr_db).abs() < 0.3,
                "true {snr_db} dB, estimated {:.3}",
                e.snr_db
            );
        }
    }

    #[test]
    fn qr_fit_matches_dense_normal_equations_for_many_sizes() {
        // Reference: dense (XᴴX)h = Xᴴy solved by LU (src/testutil.rs). Both in
        // f64 on well-conditioned random trainings: agreement to 1e-9 relative.
        let q = qam_points(2);
        for (n, pre, post) in [(7, 1, 1), (13, 0, 4), (31, 2, 2), (101, 3, 5), (257, 0, 0)] {
            let (x, _) = random_symbols(&mut rng(n as u64), &q, n);
            let taps: Vec<Cf64> = (0..pre + post + 1)
                .map(|i| c(1.0 / (1 + i) as f64, 0.1 * i as f64))
                .collect();
            let y = burst(5, &x, &taps, pre, 0.05);
            let fast = fit_channel(&y, &x, 0, &cfg(pre, post)).unwrap();
            let slow = dense_ls_normal_equations(&y, &x, 0, pre, post);
            for (i, (a, b)) in fast.taps.iter().zip(&slow).enumerate() {
                assert!(
                    (a - b).norm() < 1e-9 * (1.0 + b.norm()),
                    "N={n}: first difference at tap {i}: {a} vs {b}"
                );
            }
        }
    }

    #[test]
    fn taps_only_fit_matches_the_full_fit_and_dense_normal_equations() {
        // References: fit_channel (Householder QR, the full fit) and the dense
        // (XᴴX)h = Xᴴy LU solve of src/testutil.rs, on the same data. All in f64 on
        // well-conditioned random trainings: agreement to 1e-9 relative (as the QR
        // against dense test above). Sizes include the smallest allowed (M = K + 1),
        // a prime N, one tap and a 7-tap span at N = 64 (the CFO rounds' case),
        // with the training at a nonzero offset in y.
        let q = qam_points(2);
        for (n, pre, post, off) in [
            (4usize, 0usize, 1usize, 0usize),
            (7, 1, 1, 2),
            (13, 0, 4, 0),
            (31, 2, 2, 5),
            (64, 3, 3, 9),
            (101, 3, 5, 0),
            (257, 0, 0, 1),
        ] {
            let (x, _) = random_symbols(&mut rng(40 + n as u64), &q, n);
            let taps: Vec<Cf64> = (0..pre + post + 1)
                .map(|i| c(1.0 / (1 + i) as f64, 0.1 * i as f64 - 0.2))
                .collect();
            let mut y = vec![Cf32::new(0.3, -0.1); off];
            y.extend(burst(41, &x, &taps, pre, 0.05));
            let fast = fit_taps(&y, &x, off, pre, post, 1e3).unwrap();
            let full = fit_channel(&y, &x, off, &cfg(pre, post)).unwrap();
            let slow = dense_ls_normal_equations(&y, &x, off, pre, post);
            assert_eq!(fast.len(), full.taps.len());
            for (i, ((a, b), d)) in fast.iter().zip(&full.taps).zip(&slow).enumerate() {
                assert!(
                    (a - b).norm() < 1e-9 * (1.0 + b.norm()),
                    "N={n}: tap {i}: {a} vs full {b}"
                );
                assert!(
                    (a - d).norm() < 1e-9 * (1.0 + d.norm()),
                    "N={n}: tap {i}: {a} vs dense {d}"
                );
            }
        }
    }

    #[test]
    fn taps_only_fit_rejects_what_the_full_fit_rejects() {
        // Same typed errors as fit_channel on the same inputs (too short, a constant
        // training that cannot separate taps, out of range, non-finite, bad cap).
        let q = qam_points(2);
        let (x, _) = random_symbols(&mut rng(6), &q, 16);
        let y = burst(7, &x, &[c(1.0, 0.0)], 0, 0.01);
        for n in [0usize, 1, 4] {
            let r = fit_taps(&y, &x[..n], 0, 2, 2, 1e3);
            assert!(
                matches!(r, Err(ChannelError::TooShort { .. })),
                "N={n}: {r:?}"
            );
        }
        let constant = vec![q[0]; 16];
        let r = fit_taps(&y, &constant, 0, 1, 1, 1e3);
        assert!(
            matches!(r, Err(ChannelError::IllConditioned { .. })),
            "{r:?}"
        );
        assert!(matches!(
            fit_channel(&y, &constant, 0, &cfg(1, 1)),
            Err(ChannelError::IllConditioned { .. })
        ));
        let r = fit_taps(&y, &x, 5, 0, 0, 1e3);
        assert!(
            matches!(r, Err(ChannelError::TrainingOutOfRange { .. })),
            "{r:?}"
        );
        let mut bad = y.clone();
        bad[3] = Cf32::new(f32::NAN, 0.0);
        assert_eq!(
            fit_taps(&bad, &x, 0, 0, 0, 1e3),
            Err(ChannelError::NonFinite { index: 3 })
        );
        assert!(matches!(
            fit_taps(&y, &x, 0, 0, 0, 0.5),
            Err(ChannelError::BadConfig { .. })
        ));
        assert!(matches!(
            fit_taps(&y, &x, 0, 0, 0, f64::NAN),
            Err(ChannelError::BadConfig { .. })
        ));
    }

    #[test]
    fn taps_only_condition_bound_never_exceeds_the_full_condition_number() {
        // Source: from memory — for a Hermitian positive-definite G, λ_max ≥ max G_ii
        // and every Cholesky pivot d_j ≥ λ_min (d_j = 1/[(G_j)⁻¹]_jj for the leading
        // block G_j, and Cauchy interlacing), so max G_ii / min d_j ≤ cond(G) = cond(X)².
        // Checked on trainings made worse and worse conditioned (a random training
        // blended towards a constant): whenever fit_taps rejects, fit_channel rejects,
        // and whatever fit_channel accepts, fit_taps accepts.
        let q = qam_points(2);
        let (x, _) = random_symbols(&mut rng(12), &q, 40);
        let y = burst(13, &x, &[c(1.0, 0.0)], 0, 0.01);
        for blend in [0.0f32, 0.5, 0.9, 0.99, 0.999, 0.9999, 0.99999, 1.0] {
            let xb: Vec<Cf32> = x
                .iter()
                .map(|v| *v * (1.0 - blend) + q[0] * blend)
                .collect();
            for cap in [2.0, 10.0, 1e3] {
                let light = fit_taps(&y, &xb, 0, 1, 2, cap);
                let full = fit_channel(
                    &y,
                    &xb,
                    0,
                    &ChannelFitConfig {
                        max_condition: cap,
                        ..cfg(1, 2)
                    },
                );
                if matches!(light, Err(ChannelError::IllConditioned { .. })) {
                    assert!(
                        matches!(full, Err(ChannelError::IllConditioned { .. })),
                        "blend {blend} cap {cap}: light rejects, full gives {full:?}"
                    );
                }
                if let Ok(e) = full {
                    assert!(
                        light.is_ok(),
                        "blend {blend} cap {cap}: cond {}",
                        e.condition_number
                    );
                }
            }
        }
    }

    #[test]
    fn too_short_constant_and_misplaced_trainings_are_typed_errors() {
        let q = qam_points(2);
        let (x, _) = random_symbols(&mut rng(6), &q, 16);
        let y = burst(7, &x, &[c(1.0, 0.0)], 0, 0.01);
        // N = 0 and N = 1 and N < K.
        for n in [0usize, 1, 4] {
            let r = fit_channel(&y, &x[..n], 0, &cfg(2, 2));
            assert!(
                matches!(r, Err(ChannelError::TooShort { .. })),
                "N={n}: {r:?}"
            );
        }
        // A constant training cannot separate the taps.
        let constant = vec![q[0]; 16];
        let r = fit_channel(&y, &constant, 0, &cfg(1, 1));
        assert!(
            matches!(r, Err(ChannelError::IllConditioned { .. })),
            "{r:?}"
        );
        // BPSK-like training (x* ∝ x) cannot separate conjugate taps.
        let bpsk: Vec<Cf32> = x
            .iter()
            .map(|v| if v.re > 0.0 { q[0] } else { q[3] })
            .collect();
        let wl = ChannelFitConfig {
            iq_imbalance: true,
            ..cfg(0, 1)
        };
        let r = fit_channel(&y, &bpsk, 0, &wl);
        assert!(
            matches!(r, Err(ChannelError::IllConditioned { .. })),
            "{r:?}"
        );
        let r = fit_channel(&y, &x, 5, &cfg(0, 0));
        assert!(
            matches!(r, Err(ChannelError::TrainingOutOfRange { .. })),
            "{r:?}"
        );
        let mut bad = y.clone();
        bad[3] = Cf32::new(f32::NAN, 0.0);
        let r = fit_channel(&bad, &x, 0, &cfg(0, 0));
        assert_eq!(r, Err(ChannelError::NonFinite { index: 3 }));
    }

    #[test]
    fn mdl_picks_the_true_span_and_significant_taps_count_the_nonzero_ones() {
        // Source: Rissanen (1978) MDL; a correctly specified model is selected
        // with probability → 1 as M grows (consistency; common knowledge).
        let q = qam_points(2);
        let (x, _) = random_symbols(&mut rng(8), &q, 600);
        let taps = [c(0.3, -0.2), c(1.0, 0.0), c(0.0, 0.4), c(0.25, 0.1)];
        let y = burst(9, &x, &taps, 1, 0.01);
        let auto = ChannelFitConfig {
            span: TapSpan::Auto {
                min_pre: 0,
                max_pre: 3,
                min_post: 0,
                max_post: 5,
            },
            ..ChannelFitConfig::default()
        };
        let e = fit_channel(&y, &x, 0, &auto).unwrap();
        assert_eq!((e.pre, e.post), (1, 2), "MDL chose {:?}", e.span_choice);
        assert!(matches!(e.span_choice, SpanChoice::Mdl { .. }));
        // Pre-cursor count fixed at 1, post-cursor count automatic.
        let mixed = ChannelFitConfig {
            span: TapSpan::Auto {
                min_pre: 1,
                max_pre: 1,
                min_post: 0,
                max_post: 6,
            },
            ..ChannelFitConfig::default()
        };
        let e = fit_channel(&y, &x, 0, &mixed).unwrap();
        assert_eq!((e.pre, e.post), (1, 2));
        // Over-fitted span: the extra (zero) taps are not significant.
        let e = fit_channel(&y, &x, 0, &cfg(3, 5)).unwrap();
        assert_eq!(e.significant_taps, 4, "taps {:?}", e.taps);
    }

    #[test]
    fn widely_linear_fit_recovers_conjugate_taps_and_dc() {
        // Model y = Σh x + Σg x* + d (widely-linear; Picinbono & Chevalier 1995,
        // from memory). Noise 1e-4 over 2000 symbols: estimates within 1e-2.
        let q = qam_points(4);
        let (x, _) = random_symbols(&mut rng(10), &q, 2000);
        let h = [c(1.0, 0.1), c(0.2, -0.3)];
        let g = [c(0.05, 0.02), c(-0.03, 0.01)];
        let d = c(0.02, -0.04);
        let xc: Vec<Cf32> = x.iter().map(|v| v.conj()).collect();
        let a = convolve(&x, &h, 0);
        let b = convolve(&xc, &g, 0);
        let mut r = rng(11);
        let y: Vec<Cf32> = a
            .iter()
            .zip(&b)
            .map(|(u, v)| u + v + Cf32::new(d.re as f32, d.im as f32) + cgauss(&mut r, 1e-4))
            .collect();
        let wl = ChannelFitConfig {
            iq_imbalance: true,
            dc_offset: true,
            ..cfg(0, 1)
        };
        let e = fit_channel(&y, &x, 0, &wl).unwrap();
        let gc = e.conj_taps.clone().unwrap();
        for i in 0..2 {
            assert!(
                (e.taps[i] - h[i]).norm() < 1e-2 && (gc[i] - g[i]).norm() < 1e-2,
                "{e:?}"
            );
        }
        assert!((e.dc.unwrap() - d).norm() < 1e-2);
    }
}
