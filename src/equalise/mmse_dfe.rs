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
//!
//! Cost: `H` is banded Toeplitz, so `H_ĉ·H_ĉᴴ` is Hermitian with lower bandwidth
//! `L − 1` and each feedback column touches only an `L×L` block. The system is
//! built from the banded Gram matrix once per design, the feedback columns are
//! subtracted on their blocks, and a band Cholesky (`O(Nf·L²)`) solves it — no
//! allocation per delay. The dense joint Wiener–Hopf solve in the tests
//! (`testutil::eqref::dense_wiener_hopf`) is its slow reference.

use super::{DfeFilters, EqualiseError};
use crate::Cf64;

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
    let deltas = match delay {
        Some(d) if d < ncol => d..d + 1,
        Some(d) => {
            return Err(EqualiseError::BadConfig {
                key: "delay",
                expected: "a delay below ff_taps + taps − 1",
                found: d.to_string(),
            })
        }
        None => 0..ncol,
    };
    let mut sys = BandSystem::new(ch.taps, nf);
    let mut best: Option<(f64, usize, Vec<Cf64>)> = None;
    for d in deltas {
        let Some((snr, w)) = sys.solve_delay(d, nb, ch.es, ch.noise_var) else {
            continue;
        };
        if best
            .as_ref()
            .map_or(true, |(s, _, _)| snr > *s * (1.0 + 1e-12))
        {
            best = Some((snr, d, w.to_vec()));
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

/// The Wiener–Hopf system of one design, reused across delays: the Gram matrix
/// `H·Hᴴ` (row-major `nf×nf`, only `|r − s| < L` nonzero), the working matrix
/// holding the band Cholesky factor, and the solve vectors.
struct BandSystem<'a> {
    taps: &'a [Cf64],
    nf: usize,
    gram: Vec<Cf64>,
    a: Vec<Cf64>,
    y: Vec<Cf64>,
    w: Vec<Cf64>,
    hd: Vec<Cf64>,
}

impl<'a> BandSystem<'a> {
    fn new(taps: &'a [Cf64], nf: usize) -> Self {
        let l = taps.len();
        let z = Cf64::new(0.0, 0.0);
        let mut gram = vec![z; nf * nf];
        // gram[r][s] = Σ_c H[r][c]·conj(H[s][c]), H[r][c] = taps[c − r].
        for r in 0..nf {
            for s in r.saturating_sub(l - 1)..=r {
                let mut acc = z;
                for c in r..(s + l) {
                    acc += taps[c - r] * taps[c - s].conj();
                }
                gram[r * nf + s] = acc;
            }
        }
        BandSystem {
            taps,
            nf,
            gram,
            a: vec![z; nf * nf],
            y: vec![z; nf],
            w: vec![z; nf],
            hd: vec![z; nf],
        }
    }

    /// Column `c` of `H` at row `r` (zero outside the band).
    fn h(&self, r: usize, c: usize) -> Cf64 {
        c.checked_sub(r)
            .and_then(|i| self.taps.get(i))
            .copied()
            .unwrap_or_default()
    }

    /// Solve `(Es·H_ĉ·H_ĉᴴ + σ²·I)·w = Es·h_Δ` for delay `d`; `Some((Es/MSE, w))`
    /// when the system is positive definite and the MSE and bias are positive.
    fn solve_delay(
        &mut self,
        d: usize,
        nb: usize,
        es: f64,
        noise_var: f64,
    ) -> Option<(f64, &[Cf64])> {
        let (nf, l) = (self.nf, self.taps.len());
        let bw = l - 1;
        let ncol = nf + l - 1;
        // Lower triangle of the band only.
        for r in 0..nf {
            let lo = r.saturating_sub(bw);
            let row = r * nf;
            self.a[row + lo..=row + r].copy_from_slice(&self.gram[row + lo..=row + r]);
        }
        for j in 1..=nb {
            let c = d + j;
            if c >= ncol {
                break;
            }
            // Column c is nonzero on rows c − L + 1 ..= c (within 0..nf).
            let r0 = c.saturating_sub(bw);
            let r1 = c.min(nf - 1);
            for r in r0..=r1 {
                let hr = self.h(r, c);
                for s in r0..=r {
                    let v = hr * self.h(s, c).conj();
                    self.a[r * nf + s] -= v;
                }
            }
        }
        for r in 0..nf {
            let lo = r.saturating_sub(bw);
            for v in &mut self.a[r * nf + lo..=r * nf + r] {
                *v *= es;
            }
            self.a[r * nf + r] += Cf64::new(noise_var, 0.0);
        }
        // Band Cholesky A = L·Lᴴ in place (lower triangle).
        for j in 0..nf {
            let k0 = j.saturating_sub(bw);
            let mut dj = self.a[j * nf + j].re;
            for k in k0..j {
                dj -= self.a[j * nf + k].norm_sqr();
            }
            if !(dj > 0.0 && dj.is_finite()) {
                return None;
            }
            let ljj = dj.sqrt();
            self.a[j * nf + j] = Cf64::new(ljj, 0.0);
            for i in j + 1..(j + bw + 1).min(nf) {
                let mut s = self.a[i * nf + j];
                for k in i.saturating_sub(bw)..j {
                    s -= self.a[i * nf + k] * self.a[j * nf + k].conj();
                }
                self.a[i * nf + j] = s / ljj;
            }
        }
        for r in 0..nf {
            self.hd[r] = self.h(r, d);
        }
        // L·y = Es·h_Δ, then Lᴴ·w = y.
        for i in 0..nf {
            let mut s = self.hd[i] * es;
            for k in i.saturating_sub(bw)..i {
                s -= self.a[i * nf + k] * self.y[k];
            }
            self.y[i] = s / self.a[i * nf + i].re;
        }
        for i in (0..nf).rev() {
            let mut s = self.y[i];
            for k in i + 1..(i + bw + 1).min(nf) {
                s -= self.a[k * nf + i].conj() * self.w[k];
            }
            self.w[i] = s / self.a[i * nf + i].re;
        }
        // β = h_Δᴴ·w.
        let beta: f64 = self
            .hd
            .iter()
            .zip(&self.w)
            .map(|(h, w)| (h.conj() * w).re)
            .sum();
        let mse = es * (1.0 - beta);
        if !(mse > 0.0 && beta > 0.0) {
            return None;
        }
        Some((es / mse, &self.w))
    }
}
