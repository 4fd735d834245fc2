//! Noise variance, SNR and tap significance from a least-squares residual.
//!
//! Takes residual sums of squares, observation and unknown counts, tap
//! estimates and their variances; gives `σ²` (per complex sample), SNR in dB
//! (`10·log10`) and the count of significant taps.

use crate::Cf64;

/// Unbiased noise variance `RSS/(M − K)` for `M` complex observations and `K`
/// complex unknowns of a linear model (Kay, *Fundamentals of Statistical Signal
/// Processing: Estimation Theory*, 1993, ch. 4 — the residual of a linear model
/// with `K` parameters has `M − K` degrees of freedom). Returns `NaN` when
/// `M ≤ K`.
pub fn noise_variance_from_rss(rss: f64, m: usize, k: usize) -> f64 {
    if m <= k {
        f64::NAN
    } else {
        rss / (m - k) as f64
    }
}

/// `10·log10(signal_power / noise_var)`; `+∞` for a zero noise variance.
pub fn snr_db(signal_power: f64, noise_var: f64) -> f64 {
    if noise_var <= 0.0 {
        f64::INFINITY
    } else {
        10.0 * (signal_power / noise_var).log10()
    }
}

/// Number of taps with `|h_i|² > factor·var_i` (`var_i` the estimation variance
/// of tap `i`). A tap whose estimate cannot be told from estimation noise is not
/// counted; see [`super::ChannelFitConfig::significance`].
pub fn significant_tap_count(taps: &[Cf64], variance: &[f64], factor: f64) -> usize {
    taps.iter()
        .zip(variance)
        .filter(|(h, v)| h.norm_sqr() > factor * **v)
        .count()
}
