//! Closed-form and infinite-length equaliser performance (pure functions).
//!
//! Takes channel taps (any index origin: only `|H(e^{jω})|` matters), the
//! input SNR `Es/σ²` (linear) and a maximum frequency-grid size; gives output
//! SNRs (linear). Integrals over ω are evaluated with the periodic trapezoid
//! rule on equally spaced frequencies (exact for trigonometric polynomials of
//! degree below the grid size and spectrally accurate — the error falls
//! geometrically with the grid size — for smooth periodic integrands).
//! `|H|²` on a grid comes from a zero-padded FFT of the taps (rustfft,
//! unnormalised forward transform — only magnitudes are used).
//!
//! **Adaptive grid.** The three integrands `ln(1 + SNR·|H|²)`, `ln|H|²` and
//! `1/(1 + SNR·|H|²)` are analytic and periodic in ω whenever `H` has no zero
//! on the unit circle, so the trapezoid estimates converge geometrically. The
//! integrals start on [`START_GRID`] points (raised to the tap count) and the
//! grid is doubled — each doubling evaluates only the new odd points, one FFT
//! of the half-sample-shifted taps — until two successive estimates of every
//! integral agree to [`GRID_TOL`] (see there), or the grid reaches the caller's
//! maximum (normally [`DEFAULT_GRID`]); the finer estimate is returned. For a
//! channel with a zero on or very near the unit circle the `ln|H|²` estimates
//! converge slowly and the grid runs to the maximum, which gives the same
//! figures as the former fixed grid of that size (up to summation order).
//!
//! Formulas (via shared/REFERENCE-VALUES.md §8): Salz, BSTJ 52(8) 1973 for the
//! MMSE-DFE; ZF-DFE = SNR·exp(mean ln|H|²); MMSE-LE unbiased =
//! [mean 1/(1+SNR|H|²)]⁻¹ − 1; matched-filter bound = SNR·Σ|h|².

use crate::Cf64;
use rustfft::FftPlanner;

/// Default (maximum) frequency-grid size for the integrals (2^16 points).
pub const DEFAULT_GRID: usize = 1 << 16;

/// First grid of the adaptive integration (points; raised to the tap count).
pub const START_GRID: usize = 512;

/// Convergence test of the adaptive grid: successive estimates `a_n`, `a_2n`
/// agree when `|a_2n − a_n| ≤ GRID_TOL·(1 + |a_2n|)` for the two log means
/// (an absolute error of 1e-12 in a log mean is 4.3e-12 dB in the figure) and
/// `|a_2n − a_n| ≤ GRID_TOL·a_2n` for the mean of `1/(1 + SNR·|H|²)` (a relative
/// error in the linear figure). With geometric convergence the difference of
/// two successive estimates bounds the error of the coarser one, and the finer
/// one returned is more accurate still.
pub const GRID_TOL: f64 = 1e-12;

/// Biased and unbiased output SNR of an MMSE equaliser (linear).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OutputSnr {
    /// `Es/MSE` (biased).
    pub biased: f64,
    /// `Es/MSE − 1` (unbiased; the one that governs symbol errors).
    pub unbiased: f64,
}

thread_local! {
    // One planner per thread: the plan (and its twiddle table) for a grid size is
    // built once, not once per burst. Same plan ⇒ same output.
    static PLANNER: std::cell::RefCell<FftPlanner<f64>> = std::cell::RefCell::new(FftPlanner::new());
}

/// `|H(e^{jω_k})|²` on `grid` equally spaced frequencies `ω_k = 2πk/grid`.
/// A grid smaller than the tap count is raised to the tap count.
pub fn power_response(taps: &[Cf64], grid: usize) -> Vec<f64> {
    let n = grid.max(taps.len()).max(1);
    let mut buf = vec![Cf64::new(0.0, 0.0); n];
    power_response_shifted(taps, 0.0, &mut buf);
    buf.iter().map(|v| v.re).collect()
}

/// `buf[k].re = |H(e^{jω_k})|²` at `ω_k = 2π(k + shift)/n`, `n = buf.len()`
/// (`n ≥ taps.len()`): one FFT of the taps modulated by `e^{−j2π·shift·m/n}`.
pub(crate) fn power_response_shifted(taps: &[Cf64], shift: f64, buf: &mut [Cf64]) {
    let n = buf.len();
    buf.fill(Cf64::new(0.0, 0.0));
    for (m, (b, h)) in buf.iter_mut().zip(taps).enumerate() {
        *b = if shift == 0.0 || m == 0 {
            *h
        } else {
            let a = -2.0 * std::f64::consts::PI * shift * m as f64 / n as f64;
            *h * Cf64::new(a.cos(), a.sin())
        };
    }
    if n == 0 {
        return;
    }
    let fft = PLANNER.with(|p| p.borrow_mut().plan_fft_forward(n));
    fft.process(buf);
    for v in buf.iter_mut() {
        *v = Cf64::new(v.norm_sqr(), 0.0);
    }
}

/// The three frequency means the infinite-length figures need.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GridMeans {
    /// `mean ln(1 + SNR·|H|²)`.
    pub log_1p: f64,
    /// `mean ln|H|²`; `None` when `|H|²` is exactly 0 at a grid point.
    pub log_power: Option<f64>,
    /// `mean 1/(1 + SNR·|H|²)`.
    pub inv_1p: f64,
    /// Grid size of the returned estimates.
    pub grid: usize,
}

/// Running sums of the three integrands over the points evaluated so far.
#[derive(Default, Clone, Copy)]
struct Sums {
    log_1p: f64,
    log_power: f64,
    zero: bool,
    inv_1p: f64,
}

impl Sums {
    fn add(&mut self, p: &[Cf64], snr: f64) {
        let (mut a, mut b, mut c) = (0.0, 0.0, 0.0);
        let mut zero = false;
        for v in p {
            let v = v.re;
            let s = 1.0 + snr * v;
            a += s.ln();
            if v > 0.0 {
                b += v.ln();
            } else {
                zero = true;
            }
            c += 1.0 / s;
        }
        self.log_1p += a;
        self.log_power += b;
        self.zero |= zero;
        self.inv_1p += c;
    }
    fn means(&self, n: usize) -> GridMeans {
        let k = n as f64;
        GridMeans {
            log_1p: self.log_1p / k,
            log_power: (!self.zero).then(|| self.log_power / k),
            inv_1p: self.inv_1p / k,
            grid: n,
        }
    }
}

fn agree(fine: &GridMeans, coarse: &GridMeans) -> bool {
    let log_ok = |f: f64, c: f64| (f - c).abs() <= GRID_TOL * (1.0 + f.abs());
    let power_ok = match (fine.log_power, coarse.log_power) {
        // An exact spectral zero fixes the ZF figure at 0 on this and every finer grid.
        (None, _) => true,
        (Some(f), Some(c)) => log_ok(f, c),
        (Some(_), None) => false,
    };
    log_ok(fine.log_1p, coarse.log_1p)
        && power_ok
        && (fine.inv_1p - coarse.inv_1p).abs() <= GRID_TOL * fine.inv_1p
}

/// The three frequency means on the adaptive grid (module doc): start at
/// [`START_GRID`] points, double until successive estimates agree to
/// [`GRID_TOL`] or the next grid would exceed `max_grid`. A `max_grid` below the
/// start gives a fixed grid of `max_grid` points. Grids are raised to the tap
/// count.
pub fn grid_means(taps: &[Cf64], snr: f64, max_grid: usize) -> GridMeans {
    let floor = taps.len().max(1);
    let max_grid = max_grid.max(floor);
    let mut n = START_GRID.max(floor).min(max_grid);
    let mut buf = vec![Cf64::new(0.0, 0.0); n];
    power_response_shifted(taps, 0.0, &mut buf);
    let mut sums = Sums::default();
    sums.add(&buf, snr);
    let mut est = sums.means(n);
    while 2 * n <= max_grid {
        // The new points of the 2n grid sit half-way between the old ones:
        // ω = 2π(k + ½)/n.
        power_response_shifted(taps, 0.5, &mut buf);
        sums.add(&buf, snr);
        n *= 2;
        let fine = sums.means(n);
        let done = agree(&fine, &est);
        est = fine;
        if done {
            break;
        }
        buf.resize(n, Cf64::new(0.0, 0.0));
    }
    est
}

/// Salz infinite-length MMSE-DFE SNR: `exp(mean ln(1 + SNR·|H|²))`, and the
/// unbiased value (that minus one). `grid`: the maximum grid (module doc).
pub fn salz_mmse_dfe_snr(taps: &[Cf64], snr: f64, grid: usize) -> OutputSnr {
    let biased = grid_means(taps, snr, grid).log_1p.exp();
    OutputSnr {
        biased,
        unbiased: biased - 1.0,
    }
}

/// Infinite-length ZF-DFE SNR: `SNR·exp(mean ln|H|²)`; 0 when `H` has an exact
/// zero on the grid. `grid`: the maximum grid (module doc).
pub fn zf_dfe_snr(taps: &[Cf64], snr: f64, grid: usize) -> f64 {
    zf_from(grid_means(taps, snr, grid), snr)
}

fn zf_from(m: GridMeans, snr: f64) -> f64 {
    m.log_power.map_or(0.0, |l| snr * l.exp())
}

/// Infinite-length linear MMSE equaliser SNR: biased `[mean 1/(1+SNR|H|²)]⁻¹`,
/// unbiased that minus one. `grid`: the maximum grid (module doc).
pub fn mmse_le_snr(taps: &[Cf64], snr: f64, grid: usize) -> OutputSnr {
    let biased = 1.0 / grid_means(taps, snr, grid).inv_1p;
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

/// All infinite-length figures for one channel, in dB (one adaptive grid).
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

/// [`TheoryBounds`] for `taps` at input SNR `snr` (linear); `grid` is the
/// maximum grid (module doc).
pub fn bounds(taps: &[Cf64], snr: f64, grid: usize) -> TheoryBounds {
    let m = grid_means(taps, snr, grid);
    let salz = m.log_1p.exp();
    let le = 1.0 / m.inv_1p;
    TheoryBounds {
        input_snr_db: to_db(snr),
        matched_filter_bound_db: to_db(matched_filter_bound(taps, snr)),
        mmse_dfe_biased_db: to_db(salz),
        mmse_dfe_unbiased_db: to_db(salz - 1.0),
        zf_dfe_db: to_db(zf_from(m, snr)),
        mmse_le_unbiased_db: to_db(le - 1.0),
    }
}
