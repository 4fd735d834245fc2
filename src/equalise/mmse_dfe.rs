//! Finite-length MMSE decision-feedback equaliser (Al-Dhahir & Cioffi,
//! "MMSE decision-feedback equalizers: finite-length results", IEEE Trans. Inf.
//! Theory 41(4), 1995).
//!
//! Takes the channel taps `h[−P..=Q]`, the noise variance `σ²`, the symbol
//! energy `Es`, the feedforward length `Nf` (symbol-spaced), the feedback length
//! `Nb` and optionally the decision delay `Δ`; gives [`DfeFilters`] in the crate's
//! *apply form* (see [`DfeFilters`]) scaled to be unbiased, with the predicted
//! biased and unbiased output SNR.
//!
//! Derivation (ideal feedback, white symbols of energy `Es`, white noise `σ²`):
//! the FF window `Y = [y_m, …, y_{m−Nf+1}]ᵀ = H·X + N` with `X` the
//! `Nf + L − 1` symbols it touches (`L = P + Q + 1`) and `H[r][c] = h_full[c − r]`.
//! The decided symbol is `X[Δ]`; the feedback cancels `X[Δ+1..=Δ+Nb]`. The
//! Wiener–Hopf equations give `b = H_fbᴴ·w` and
//! `(Es·H_ĉ·H_ĉᴴ + σ²·I)·w = Es·h_Δ` where `H_ĉ` is `H` without the feedback
//! columns; `MSE = Es·(1 − h_Δᴴ·w)`, the bias `β = wᴴh_Δ = 1 − MSE/Es`,
//! `SNR_biased = Es/MSE`, `SNR_unbiased = SNR_biased − 1`. With `Δ = None` every
//! `Δ ∈ [0, Nf + L − 2]` is solved (Cholesky) and the largest output SNR wins
//! (ties: smallest Δ).

use super::{DfeFilters, EqualiseError};
use crate::Cf64;
use nalgebra::{DMatrix, DVector};

/// Channel model handed to the designs.
#[derive(Debug, Clone, Copy)]
pub struct DesignInput<'a> {
    /// Taps `h[−P..=Q]`.
    pub taps: &'a [Cf64],
    /// Pre-cursor count `P` (index of the main tap).
    pub pre: usize,
    /// Noise variance per complex sample.
    pub noise_var: f64,
    /// Symbol energy.
    pub es: f64,
}

/// Design the unbiased MMSE-DFE (see the module doc). `nb = 0` gives the linear
/// MMSE equaliser.
///
/// # Errors
/// [`EqualiseError::BadConfig`] for `nf = 0`, empty taps, non-finite or negative
/// noise; [`EqualiseError::SingularDesign`] when no delay gives a positive-definite
/// system (e.g. zero noise and a channel that leaves the window rank-deficient).
pub fn design_mmse_dfe(
    ch: &DesignInput<'_>,
    nf: usize,
    nb: usize,
    delay: Option<usize>,
) -> Result<DfeFilters, EqualiseError> {
    let l = ch.taps.len();
    if nf == 0 {
        return Err(EqualiseError::BadConfig {
            key: "ff_taps",
            expected: "at least 1",
            found: "0".into(),
        });
    }
    if l == 0 || ch.pre >= l {
        return Err(EqualiseError::BadConfig {
            key: "taps",
            expected: "at least one tap and pre < taps.len()",
            found: format!("{l} taps, pre {}", ch.pre),
        });
    }
    if !(ch.noise_var.is_finite() && ch.noise_var >= 0.0 && ch.es.is_finite() && ch.es > 0.0) {
        return Err(EqualiseError::BadConfig {
            key: "noise_var",
            expected: "finite σ² ≥ 0 and Es > 0",
            found: format!("σ² {}, Es {}", ch.noise_var, ch.es),
        });
    }
    let ncol = nf + l - 1;
    let hcol = |c: usize| -> DVector<Cf64> {
        DVector::from_fn(nf, |r, _| {
            if c >= r && c - r < l {
                ch.taps[c - r]
            } else {
                Cf64::new(0.0, 0.0)
            }
        })
    };
    let hm = DMatrix::<Cf64>::from_fn(nf, ncol, |r, c| {
        if c >= r && c - r < l {
            ch.taps[c - r]
        } else {
            Cf64::new(0.0, 0.0)
        }
    });
    let gram = &hm * hm.adjoint();
    let deltas: Vec<usize> = match delay {
        Some(d) if d < ncol => vec![d],
        Some(d) => {
            return Err(EqualiseError::BadConfig {
                key: "delay",
                expected: "a delay below ff_taps + taps − 1",
                found: d.to_string(),
            })
        }
        None => (0..ncol).collect(),
    };
    let mut best: Option<(f64, usize, DVector<Cf64>)> = None;
    for &d in &deltas {
        let mut a = gram.clone();
        for j in 1..=nb {
            if d + j >= ncol {
                break;
            }
            let col = hcol(d + j);
            a -= &col * col.adjoint();
        }
        a *= Cf64::new(ch.es, 0.0);
        for i in 0..nf {
            a[(i, i)] += Cf64::new(ch.noise_var, 0.0);
        }
        let Some(chol) = a.cholesky() else { continue };
        let hd = hcol(d);
        let w = chol.solve(&(&hd * Cf64::new(ch.es, 0.0)));
        let beta = hd.dotc(&w).re; // h_Δᴴ w
        let mse = ch.es * (1.0 - beta);
        if !(mse > 0.0 && beta > 0.0) {
            continue;
        }
        let snr = ch.es / mse;
        if best
            .as_ref()
            .map_or(true, |(s, _, _)| snr > *s * (1.0 + 1e-12))
        {
            best = Some((snr, d, w));
        }
    }
    let (snr, d, w) = best.ok_or(EqualiseError::SingularDesign {
        ff_taps: nf,
        fb_taps: nb,
    })?;
    let beta = 1.0 - 1.0 / snr;
    let ff: Vec<Cf64> = w.iter().map(|v| v.conj() / beta).collect();
    let fb = feedback_from_ff(&ff, ch.taps, d, nb);
    Ok(DfeFilters::from_f64(
        &ff,
        &fb,
        d,
        ch.pre,
        beta,
        snr,
        snr - 1.0,
    ))
}

/// Feedback taps in apply form: the combined response `(ff ∗ h)` at positions
/// `Δ+1 ..= Δ+nb` (zero beyond its support).
pub(crate) fn feedback_from_ff(ff: &[Cf64], taps: &[Cf64], delay: usize, nb: usize) -> Vec<Cf64> {
    (1..=nb)
        .map(|j| {
            let pos = delay + j;
            ff.iter()
                .enumerate()
                .filter_map(|(r, f)| pos.checked_sub(r).and_then(|i| taps.get(i)).map(|h| f * h))
                .sum()
        })
        .collect()
}

/// [`design_mmse_dfe`] with a requested delay clamped to the largest one the
/// filter span allows (`Nf + L − 2`), so one requested delay serves both the
/// forward and the time-reversed channel.
pub(crate) fn design_mmse_dfe_clamped(
    c: &DesignInput<'_>,
    nf: usize,
    nb: usize,
    delay: Option<usize>,
) -> Result<DfeFilters, EqualiseError> {
    design_mmse_dfe(
        c,
        nf,
        nb,
        delay.map(|d| d.min((nf + c.taps.len()).saturating_sub(2))),
    )
}
