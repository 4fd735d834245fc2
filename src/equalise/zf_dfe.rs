//! Classic zero-forcing DFE: subtract the post-cursor ISI of past decisions,
//! scale by the main tap, slice.
//!
//! Takes the channel taps `h[−P..=Q]`, `σ²`, `Es`, and the main-tap choice
//! (strongest tap by default, or a given index into `taps`); gives
//! [`DfeFilters`] in apply form: one feedforward tap `1/h_m` on `y[n − P + m]`
//! and feedback taps `h_{m+j}/h_m`, `j = 1..`. Pre-cursor taps (indices below the
//! main tap) are ignored: the classic structure cannot cancel ISI from symbols
//! not yet decided, which is its known weakness; their power is counted as
//! interference in the predicted SNR
//! `|h_m|²·Es / (σ² + Es·Σ_{j<m}|h_j|²)`.
//!
//! Refusal: the design fails with [`EqualiseError::WeakMainTap`] when
//! `|h_m|²·Es < min_main_snr·σ²` (default 10, i.e. the main tap alone is less
//! than 10 dB above the noise), or `h_m = 0`.

use super::mmse_dfe::DesignInput;
use super::{DfeFilters, EqualiseError};
use crate::Cf64;

/// Default [`design_zf_dfe`] threshold: `|h_m|²·Es ≥ 10·σ²`.
pub const DEFAULT_MIN_MAIN_SNR: f64 = 10.0;

/// Design the classic ZF-DFE (see the module doc). `main = None` picks the
/// strongest tap (first on ties).
///
/// # Errors
/// [`EqualiseError::WeakMainTap`] when the main tap is too weak to divide by;
/// [`EqualiseError::BadConfig`] for an out-of-range `main` or empty taps.
pub fn design_zf_dfe(
    ch: &DesignInput<'_>,
    main: Option<usize>,
    min_main_snr: f64,
) -> Result<DfeFilters, EqualiseError> {
    let l = ch.taps.len();
    let m = match main {
        Some(m) if m < l => m,
        Some(m) => {
            return Err(EqualiseError::BadConfig {
                key: "zf_main_tap",
                expected: "an index into the taps",
                found: m.to_string(),
            })
        }
        None => {
            let mut best = None::<(usize, f64)>;
            for (i, h) in ch.taps.iter().enumerate() {
                if best.map_or(true, |(_, b)| h.norm_sqr() > b) {
                    best = Some((i, h.norm_sqr()));
                }
            }
            best.map(|(i, _)| i).ok_or(EqualiseError::BadConfig {
                key: "taps",
                expected: "at least one tap",
                found: "0 taps".into(),
            })?
        }
    };
    let hm = ch.taps[m];
    let main_power = hm.norm_sqr() * ch.es;
    if main_power.is_nan() || main_power <= 0.0 || main_power < min_main_snr * ch.noise_var {
        return Err(EqualiseError::WeakMainTap {
            index: m,
            main_snr_db: 10.0 * (main_power / ch.noise_var).log10(),
            min_db: 10.0 * min_main_snr.log10(),
        });
    }
    let ff = [Cf64::new(1.0, 0.0) / hm];
    let fb: Vec<Cf64> = ch.taps[m + 1..].iter().map(|h| h / hm).collect();
    let pre_isi: f64 = ch.taps[..m].iter().map(|h| h.norm_sqr()).sum::<f64>() * ch.es;
    let snr = main_power / (ch.noise_var + pre_isi);
    Ok(DfeFilters::from_f64(&ff, &fb, m, ch.pre, 1.0, snr, snr))
}
