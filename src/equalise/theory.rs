//! Closed-form and infinite-length equaliser performance (pure functions).
//!
//! Takes channel taps (any index origin: only `|H(e^{jω})|` matters), the
//! input SNR `Es/σ²` (linear) and a frequency-grid size; gives output SNRs
//! (linear). Integrals over ω are evaluated with the periodic trapezoid rule on
//! `grid` equally spaced frequencies (exact for trigonometric polynomials of
//! degree < grid and spectrally accurate for smooth periodic integrands);
//! `|H|²` on the grid comes from a zero-padded FFT of the taps (rustfft,
//! unnormalised forward transform — only magnitudes are used).
//!
//! Formulas (via shared/REFERENCE-VALUES.md §8): Salz, BSTJ 52(8) 1973 for the
//! MMSE-DFE; ZF-DFE = SNR·exp(mean ln|H|²); MMSE-LE unbiased =
//! [mean 1/(1+SNR|H|²)]⁻¹ − 1; matched-filter bound = SNR·Σ|h|².

use crate::Cf64;
use rustfft::FftPlanner;

/// Default frequency-grid size for the integrals (2^16 points).
pub const DEFAULT_GRID: usize = 1 << 16;

/// Biased and unbiased output SNR of an MMSE equaliser (linear).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OutputSnr {
    /// `Es/MSE` (biased).
    pub biased: f64,
    /// `Es/MSE − 1` (unbiased; the one that governs symbol errors).
    pub unbiased: f64,
}

/// `|H(e^{jω_k})|²` on `grid` equally spaced frequencies `ω_k = 2πk/grid`.
/// A grid smaller than the tap count is raised to the tap count.
pub fn power_response(taps: &[Cf64], grid: usize) -> Vec<f64> {
    let n = grid.max(taps.len()).max(1);
    let mut buf = vec![Cf64::new(0.0, 0.0); n];
    buf[..taps.len()].copy_from_slice(taps);
    // One planner per thread: the plan (and its twiddle table) for a grid size is
    // built once, not once per burst. Same plan ⇒ same output.
    thread_local! {
        static PLANNER: std::cell::RefCell<FftPlanner<f64>> = std::cell::RefCell::new(FftPlanner::new());
    }
    let fft = PLANNER.with(|p| p.borrow_mut().plan_fft_forward(n));
    fft.process(&mut buf);
    buf.iter().map(|v| v.norm_sqr()).collect()
}

fn grid_mean(values: impl Iterator<Item = f64>, n: usize) -> f64 {
    values.sum::<f64>() / n as f64
}

/// Salz infinite-length MMSE-DFE SNR: `exp(mean ln(1 + SNR·|H|²))`, and the
/// unbiased value (that minus one).
pub fn salz_mmse_dfe_snr(taps: &[Cf64], snr: f64, grid: usize) -> OutputSnr {
    let p = power_response(taps, grid);
    let biased = grid_mean(p.iter().map(|v| (1.0 + snr * v).ln()), p.len()).exp();
    OutputSnr {
        biased,
        unbiased: biased - 1.0,
    }
}

/// Infinite-length ZF-DFE SNR: `SNR·exp(mean ln|H|²)`; 0 when `H` has an exact
/// zero on the grid.
pub fn zf_dfe_snr(taps: &[Cf64], snr: f64, grid: usize) -> f64 {
    let p = power_response(taps, grid);
    if p.iter().any(|v| *v <= 0.0) {
        return 0.0;
    }
    snr * grid_mean(p.iter().map(|v| v.ln()), p.len()).exp()
}

/// Infinite-length linear MMSE equaliser SNR: biased `[mean 1/(1+SNR|H|²)]⁻¹`,
/// unbiased that minus one.
pub fn mmse_le_snr(taps: &[Cf64], snr: f64, grid: usize) -> OutputSnr {
    let p = power_response(taps, grid);
    let biased = 1.0 / grid_mean(p.iter().map(|v| 1.0 / (1.0 + snr * v)), p.len());
    OutputSnr {
        biased,
        unbiased: biased - 1.0,
    }
}

/// Matched-filter bound `SNR·Σ|h|²`.
pub fn matched_filter_bound(taps: &[Cf64], snr: f64) -> f64 {
    snr * taps.iter().map(|h| h.norm_sqr()).sum::<f64>()
}

/// `10·log10(x)`.
pub fn to_db(x: f64) -> f64 {
    10.0 * x.log10()
}

/// All infinite-length figures for one channel, in dB (one FFT).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct TheoryBounds {
    /// Input SNR `Es/σ²`, dB.
    pub input_snr_db: f64,
    /// Matched-filter bound `SNR·Σ|h|²`, dB.
    pub matched_filter_bound_db: f64,
    /// Salz MMSE-DFE, biased, dB.
    pub mmse_dfe_biased_db: f64,
    /// Salz MMSE-DFE, unbiased, dB.
    pub mmse_dfe_unbiased_db: f64,
    /// ZF-DFE `SNR·exp(mean ln|H|²)`, dB (−∞ for an exact spectral zero).
    pub zf_dfe_db: f64,
    /// MMSE linear equaliser, unbiased, dB.
    pub mmse_le_unbiased_db: f64,
}

/// [`TheoryBounds`] for `taps` at input SNR `snr` (linear), on `grid` frequencies.
pub fn bounds(taps: &[Cf64], snr: f64, grid: usize) -> TheoryBounds {
    let p = power_response(taps, grid);
    let n = p.len();
    let salz = grid_mean(p.iter().map(|v| (1.0 + snr * v).ln()), n).exp();
    let zf = if p.iter().any(|v| *v <= 0.0) {
        0.0
    } else {
        snr * grid_mean(p.iter().map(|v| v.ln()), n).exp()
    };
    let le = 1.0 / grid_mean(p.iter().map(|v| 1.0 / (1.0 + snr * v)), n);
    TheoryBounds {
        input_snr_db: to_db(snr),
        matched_filter_bound_db: to_db(matched_filter_bound(taps, snr)),
        mmse_dfe_biased_db: to_db(salz),
        mmse_dfe_unbiased_db: to_db(salz - 1.0),
        zf_dfe_db: to_db(zf),
        mmse_le_unbiased_db: to_db(le - 1.0),
    }
}
