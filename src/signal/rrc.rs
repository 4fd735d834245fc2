//! Root-raised-cosine (RRC) pulse: closed form, taps, transmit shaping and matched filter.
//!
//! Takes in: roll-off `beta` in (0, 1], filter span in symbols, samples per
//! symbol `sps`, symbols ([`Cf32`]) or received samples. Gives out: the pulse
//! value (time in symbol periods, T = 1), unit-energy `f32` taps, shaped
//! samples at `sps` samples per symbol, and matched-filter output.
//!
//! Closed form (T = 1):
//!
//! ```text
//! h(t) = [ sin(πt(1−β)) + 4βt·cos(πt(1+β)) ] / [ πt·(1 − (4βt)²) ]
//! h(0) = 1 − β + 4β/π
//! h(±1/(4β)) = (β/√2)·[ (1 + 2/π)·sin(π/(4β)) + (1 − 2/π)·cos(π/(4β)) ]
//! ```
//!
//! With T = 1 the pulse has unit energy and `h∗h` is the raised cosine, zero at
//! every non-zero integer (Nyquist). Sampled, truncated taps are rescaled so that
//! Σh² = 1 exactly; truncation leaves residual inter-symbol interference that
//! falls as the span grows (about 1e-2 for span 8, 1e-3 for span 32 at β = 0.22).
//! At `sps = 1` the sampled pulse is aliased and the cascade is not Nyquist; use
//! `sps ≥ 2` for shaping.
//!
//! Delay conventions: [`shape`] and [`PolyphaseInterpolator`] produce the full
//! convolution, so symbol `k` peaks at output index `k·sps + (taps.len() − 1)/2`.
//! [`matched_filter_into`] is a *centred* correlation: `out[n]` lines up with
//! `input[n]` (zero delay), so after shaping and matched filtering symbol `k`
//! is still at index `k·sps + (taps.len() − 1)/2`.

use super::SignalError;
use crate::Cf32;
use std::f64::consts::PI;

/// Distance (in symbol periods) from a removable singularity within which the
/// limit value is used. Near the singularity the general expression loses about
/// `1e-16/δ` to cancellation while the limit value is off by `O(δ)`; 1e-8 balances
/// both at ≈1e-8, far below `f32` tap precision.
const SINGULAR_EPS: f64 = 1e-8;

/// Checks RRC parameters given by a user: `beta` in (0, 1], `span_symbols ≥ 1`, `sps ≥ 1`.
pub fn validate_rrc(beta: f64, span_symbols: usize, sps: usize) -> Result<(), SignalError> {
    if !(beta > 0.0 && beta <= 1.0) {
        return Err(SignalError::InvalidPulseParameter {
            key: "beta",
            found: beta.to_string(),
            expected: "a roll-off in (0, 1]",
        });
    }
    if span_symbols == 0 {
        return Err(SignalError::InvalidPulseParameter {
            key: "span_symbols",
            found: span_symbols.to_string(),
            expected: "at least 1 symbol",
        });
    }
    if sps == 0 {
        return Err(SignalError::InvalidPulseParameter {
            key: "sps",
            found: sps.to_string(),
            expected: "at least 1 sample per symbol",
        });
    }
    Ok(())
}

#[cold]
#[inline(never)]
fn bad_params(e: SignalError) -> ! {
    panic!("{e}")
}

/// The RRC pulse at time `t_symbols` (in symbol periods, T = 1), unit energy.
///
/// # Panics
/// If `beta` is not in (0, 1] (a programmer error; validate user input with
/// [`validate_rrc`] first).
pub fn rrc_impulse(t_symbols: f64, beta: f64) -> f64 {
    if !(beta > 0.0 && beta <= 1.0) {
        bad_params(SignalError::InvalidPulseParameter {
            key: "beta",
            found: beta.to_string(),
            expected: "a roll-off in (0, 1]",
        });
    }
    let t = t_symbols;
    if t.abs() < SINGULAR_EPS {
        return 1.0 - beta + 4.0 * beta / PI;
    }
    let x = 4.0 * beta * t;
    if (1.0 - x * x).abs() < SINGULAR_EPS * 8.0 * beta {
        let a = PI / (4.0 * beta);
        return beta / 2f64.sqrt() * ((1.0 + 2.0 / PI) * a.sin() + (1.0 - 2.0 / PI) * a.cos());
    }
    ((PI * t * (1.0 - beta)).sin() + x * (PI * t * (1.0 + beta)).cos()) / (PI * t * (1.0 - x * x))
}

/// Half-length of the tap vector in samples: `ceil(span·sps/2)`.
fn half_len(span_symbols: usize, sps: usize) -> usize {
    (span_symbols * sps).div_ceil(2)
}

/// RRC taps sampled at `sps` samples per symbol over `span_symbols` symbols,
/// symmetric, normalised to Σh² = 1.
///
/// Length is `span·sps + 1` when `span·sps` is even (the usual case); when it is
/// odd the span is rounded up by one sample (length `span·sps + 2`) so that the
/// centre `(len − 1)/2` falls on a tap.
///
/// # Panics
/// If the parameters fail [`validate_rrc`] (programmer error).
pub fn rrc_taps(beta: f64, span_symbols: usize, sps: usize) -> Vec<f32> {
    if let Err(e) = validate_rrc(beta, span_symbols, sps) {
        bad_params(e);
    }
    let half = half_len(span_symbols, sps) as i64;
    let raw: Vec<f64> = (-half..=half)
        .map(|n| rrc_impulse(n as f64 / sps as f64, beta))
        .collect();
    let energy: f64 = raw.iter().map(|v| v * v).sum();
    let g = 1.0 / energy.sqrt();
    raw.iter().map(|v| (v * g) as f32).collect()
}

/// A polyphase interpolator: upsamples symbols by `sps` and filters with `taps`
/// without multiplying by the inserted zeros.
///
/// Output sample `n = q·sps + p` is `Σ_m s[q − m]·taps[m·sps + p]` — the full
/// convolution of the zero-stuffed symbols with the taps.
#[derive(Debug, Clone)]
pub struct PolyphaseInterpolator {
    /// `phases[p][m] = taps[m·sps + p]`.
    phases: Vec<Vec<f32>>,
    sps: usize,
    taps_len: usize,
}

impl PolyphaseInterpolator {
    /// Splits `taps` into `sps` phases.
    ///
    /// # Panics
    /// If `sps == 0` or `taps` is empty (programmer errors).
    pub fn new(taps: &[f32], sps: usize) -> PolyphaseInterpolator {
        assert!(sps >= 1, "PolyphaseInterpolator: sps must be at least 1");
        assert!(
            !taps.is_empty(),
            "PolyphaseInterpolator: taps must not be empty"
        );
        let phases = (0..sps)
            .map(|p| taps.iter().skip(p).step_by(sps).copied().collect())
            .collect();
        PolyphaseInterpolator {
            phases,
            sps,
            taps_len: taps.len(),
        }
    }

    /// Samples per symbol.
    pub fn sps(&self) -> usize {
        self.sps
    }

    /// Output length for `n_symbols` symbols: `(n − 1)·sps + taps.len()`, or 0 for none.
    pub fn output_len(&self, n_symbols: usize) -> usize {
        if n_symbols == 0 {
            0
        } else {
            (n_symbols - 1) * self.sps + self.taps_len
        }
    }

    /// Shapes `symbols` into `out` (no allocation).
    ///
    /// # Panics
    /// If `out.len() != self.output_len(symbols.len())` (a programmer error).
    pub fn process_into(&self, symbols: &[Cf32], out: &mut [Cf32]) {
        assert_eq!(
            out.len(),
            self.output_len(symbols.len()),
            "PolyphaseInterpolator::process_into: out has the wrong length"
        );
        let n_sym = symbols.len() as i64;
        for (n, o) in out.iter_mut().enumerate() {
            let q = (n / self.sps) as i64;
            let p = n % self.sps;
            let phase = &self.phases[p];
            // m runs over the sub-taps with 0 ≤ q − m < n_sym.
            let m_lo = (q - n_sym + 1).max(0) as usize;
            let m_hi = (phase.len() as i64).min(q + 1);
            let mut acc = Cf32::new(0.0, 0.0);
            if (m_lo as i64) < m_hi {
                for (m, &h) in phase.iter().enumerate().take(m_hi as usize).skip(m_lo) {
                    acc += symbols[(q as usize) - m] * h;
                }
            }
            *o = acc;
        }
    }

    /// Convenience form of [`process_into`](Self::process_into) that allocates the output once.
    pub fn process(&self, symbols: &[Cf32]) -> Vec<Cf32> {
        let mut out = vec![Cf32::new(0.0, 0.0); self.output_len(symbols.len())];
        self.process_into(symbols, &mut out);
        out
    }
}

/// Transmit shaping: upsample by `sps` and filter with `taps` (full convolution).
///
/// Output length `(symbols.len() − 1)·sps + taps.len()` (0 for no symbols);
/// symbol `k` peaks at `k·sps + (taps.len() − 1)/2`.
///
/// # Panics
/// If `sps == 0` or `taps` is empty (programmer errors).
pub fn shape(symbols: &[Cf32], taps: &[f32], sps: usize) -> Vec<Cf32> {
    PolyphaseInterpolator::new(taps, sps).process(symbols)
}

/// Matched (receive) filter: centred correlation with real taps,
/// `out[n] = Σ_m taps[m]·input[n + m − c]` with `c = (taps.len() − 1)/2` and
/// samples outside `input` taken as zero. Zero delay: `out[n]` lines up with
/// `input[n]`. For symmetric taps (RRC) correlation equals convolution.
///
/// # Panics
/// If `out.len() != input.len()` or `taps` is empty (programmer errors).
pub fn matched_filter_into(input: &[Cf32], taps: &[f32], out: &mut [Cf32]) {
    assert_eq!(
        out.len(),
        input.len(),
        "matched_filter_into: out must be as long as input"
    );
    assert!(
        !taps.is_empty(),
        "matched_filter_into: taps must not be empty"
    );
    for (n, o) in out.iter_mut().enumerate() {
        *o = matched_filter_at(input, taps, n);
    }
}

/// One output sample of [`matched_filter_into`], `out[n]`, computed alone (for
/// symbol-rate sampling without filtering every sample). `n` may lie anywhere;
/// samples outside `input` count as zero.
///
/// # Panics
/// If `taps` is empty (a programmer error).
#[inline]
pub fn matched_filter_at(input: &[Cf32], taps: &[f32], n: usize) -> Cf32 {
    assert!(
        !taps.is_empty(),
        "matched_filter_at: taps must not be empty"
    );
    let c = (taps.len() - 1) / 2;
    let m_lo = c.saturating_sub(n);
    // Input index n + m − c < len  ⇔  m < len + c − n.
    let m_hi = (input.len() + c).saturating_sub(n).min(taps.len());
    let mut acc = Cf32::new(0.0, 0.0);
    if m_lo < m_hi {
        let start = n + m_lo - c;
        for (&h, &x) in taps[m_lo..m_hi].iter().zip(&input[start..]) {
            acc += x * h;
        }
    }
    acc
}

/// Convenience form of [`matched_filter_into`] that allocates the output once.
pub fn matched_filter(input: &[Cf32], taps: &[f32]) -> Vec<Cf32> {
    let mut out = vec![Cf32::new(0.0, 0.0); input.len()];
    matched_filter_into(input, taps, &mut out);
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testutil::{direct_convolve_real, naive_correlate_centred, random_symbols};

    #[test]
    fn closed_form_matches_published_check_values() {
        // Source: REFERENCE-VALUES.md §5 check-value table (computed there from the closed
        // form of the encyclopedia article "Root-raised-cosine filter", T = 1).
        // Tolerance 1e-8: the table has 9 decimals.
        let table: [(f64, [f64; 8]); 4] = [
            (
                0.22,
                [
                    1.060112700,
                    -0.157184262,
                    0.625122157,
                    -0.057323524,
                    -0.179260277,
                    0.049508002,
                    -0.038180841,
                    1.0 / (4.0 * 0.22),
                ],
            ),
            (
                0.35,
                [
                    1.095633841,
                    0.260603461,
                    0.607773618,
                    -0.084690266,
                    -0.135164117,
                    0.057119306,
                    -0.025453674,
                    1.0 / (4.0 * 0.35),
                ],
            ),
            (
                0.25,
                [
                    1.068309886,
                    -0.064237156,
                    0.621797411,
                    -0.064237156,
                    -0.170297634,
                    0.053051648,
                    -0.037513180,
                    1.0,
                ],
            ),
            (
                0.20,
                [
                    1.054647909,
                    -0.200000000,
                    0.627108157,
                    -0.052546192,
                    -0.184733140,
                    0.046586419,
                    -0.037731253,
                    1.25,
                ],
            ),
        ];
        for (beta, v) in table {
            let ts = [0.0, v[7], 0.5, 1.0, 1.5, 2.0, 3.0];
            let want = [v[0], v[1], v[2], v[3], v[4], v[5], v[6]];
            for (t, w) in ts.iter().zip(want) {
                for sign in [1.0, -1.0] {
                    let got = rrc_impulse(sign * t, beta);
                    assert!((got - w).abs() < 1e-8, "beta {beta} t {t}: {got} vs {w}");
                }
            }
        }
        // Source: REFERENCE-VALUES.md §5 — for β = 0.20 the special point equals −β exactly.
        assert!((rrc_impulse(1.25, 0.2) + 0.2).abs() < 1e-12);
    }

    #[test]
    fn special_points_are_the_limits_of_the_general_expression() {
        // Source: REFERENCE-VALUES.md §5 (removable points are limits of the general form).
        // Approaching at δ = 1e-5 the general expression is smooth enough that the
        // difference is O(δ) ≤ 1e-4 (first derivative is O(1)).
        for beta in [0.05, 0.2, 0.22, 0.25, 0.35, 0.5, 1.0] {
            let ts = 1.0 / (4.0 * beta);
            for (t0, d) in [(0.0, 1e-5), (ts, 1e-5), (-ts, 1e-5)] {
                let lim = rrc_impulse(t0, beta);
                for s in [-1.0, 1.0] {
                    let near = rrc_impulse(t0 + s * d, beta);
                    assert!((near - lim).abs() < 1e-4, "beta {beta} t {t0}");
                }
            }
        }
    }

    #[test]
    fn continuous_pulse_has_unit_energy() {
        // Source: REFERENCE-VALUES.md §5 — energy 1/T = 1. Riemann sum at 64 samples per
        // symbol over ±400 symbols; the tail beyond decays as 1/t² (energy left out < 1e-4).
        for beta in [0.22, 0.35, 0.5, 1.0] {
            let sps = 64.0;
            let e: f64 = (-400 * 64..=400 * 64)
                .map(|n| rrc_impulse(n as f64 / sps, beta).powi(2))
                .sum::<f64>()
                / sps;
            assert!((e - 1.0).abs() < 1e-3, "beta {beta}: energy {e}");
        }
    }

    #[test]
    fn continuous_cascade_is_a_nyquist_raised_cosine() {
        // Source: REFERENCE-VALUES.md §5 — h∗h is the raised cosine, zero at every non-zero
        // multiple of T (Nyquist criterion). Evaluated as a Riemann sum of h(τ)h(k−τ) at 64
        // samples per symbol over ±400 symbols; tolerance 2e-3 covers the truncated 1/t² tails.
        for beta in [0.22, 0.35, 0.5, 1.0] {
            let sps = 64i64;
            let h: Vec<f64> = (-400 * sps..=400 * sps)
                .map(|n| rrc_impulse(n as f64 / sps as f64, beta))
                .collect();
            let c = h.len() as i64 / 2;
            for k in 0..=4i64 {
                let shift = k * sps;
                let v: f64 = (0..h.len() as i64)
                    .filter(|&i| (0..h.len() as i64).contains(&(2 * c + shift - i)))
                    .map(|i| h[i as usize] * h[(2 * c + shift - i) as usize])
                    .sum::<f64>()
                    / sps as f64;
                let want = if k == 0 { 1.0 } else { 0.0 };
                assert!((v - want).abs() < 2e-3, "beta {beta} k {k}: {v}");
            }
        }
    }

    /// Largest |cascade| at non-zero symbol lags, and the peak.
    fn cascade_isi(beta: f64, span: usize, sps: usize) -> (f64, f64) {
        let t = rrc_taps(beta, span, sps);
        let t64: Vec<f64> = t.iter().map(|&v| v as f64).collect();
        let c = direct_convolve_real(&t64, &t64);
        let mid = c.len() / 2;
        let mut isi = 0.0f64;
        let mut k = sps;
        while k <= mid {
            isi = isi.max(c[mid + k].abs()).max(c[mid - k].abs());
            k += sps;
        }
        (c[mid], isi)
    }

    #[test]
    fn truncated_cascade_has_zero_isi_within_1e3_for_long_spans() {
        // Source: Nyquist criterion for the raised cosine (REFERENCE-VALUES.md §5). The
        // truncated-taps tolerance is measured, not published: with span 8 the residual ISI
        // is ≈1e-2 at β = 0.22 (truncation of 1/t² tails), so 1e-3 needs span 64 for
        // β ∈ {0.22, 0.35}, span 16 for β = 0.25, span 8 for β = 0.5 and span 12 for β = 1
        // (numbers from an independent numpy computation of the same taps, sps 4 and 8).
        for (beta, span) in [(0.22, 64), (0.25, 16), (0.35, 64), (0.5, 8), (1.0, 12)] {
            for sps in [4, 8] {
                let (peak, isi) = cascade_isi(beta, span, sps);
                assert!((peak - 1.0).abs() < 1e-5, "peak {peak}");
                assert!(isi < 1e-3, "beta {beta} span {span} sps {sps}: isi {isi}");
            }
        }
        // And it shrinks with the span.
        let (_, isi8) = cascade_isi(0.22, 8, 8);
        let (_, isi64) = cascade_isi(0.22, 64, 8);
        assert!(isi64 < isi8 / 10.0, "{isi8} {isi64}");
    }

    #[test]
    fn taps_are_symmetric_unit_energy_and_centred() {
        for (beta, span, sps) in [(0.22, 8, 4), (0.35, 10, 2), (1.0, 1, 1), (0.5, 3, 3)] {
            let t = rrc_taps(beta, span, sps);
            let expect_len = if span * sps % 2 == 0 {
                span * sps + 1
            } else {
                span * sps + 2
            };
            assert_eq!(t.len(), expect_len);
            let e: f64 = t.iter().map(|&v| (v as f64).powi(2)).sum();
            assert!((e - 1.0).abs() < 1e-6, "energy {e}");
            for i in 0..t.len() {
                assert_eq!(t[i], t[t.len() - 1 - i]);
            }
            let c = (t.len() - 1) / 2;
            assert!(t.iter().all(|&v| v <= t[c]));
        }
    }

    #[test]
    fn invalid_parameters_are_typed_errors() {
        for (b, s, p, key) in [
            (0.0, 8, 4, "beta"),
            (1.5, 8, 4, "beta"),
            (f64::NAN, 8, 4, "beta"),
            (0.3, 0, 4, "span_symbols"),
            (0.3, 8, 0, "sps"),
        ] {
            match validate_rrc(b, s, p) {
                Err(SignalError::InvalidPulseParameter { key: k, .. }) => assert_eq!(k, key),
                other => panic!("expected error for {key}, got {other:?}"),
            }
        }
        assert!(validate_rrc(1.0, 1, 1).is_ok());
    }

    #[test]
    #[should_panic(expected = "beta")]
    fn rrc_taps_panics_on_bad_beta() {
        let _ = rrc_taps(0.0, 8, 4);
    }

    #[test]
    fn polyphase_interpolator_equals_direct_convolution() {
        // Reference: zero-stuff then direct O(N·M) convolution (testutil). Tolerance 1e-5:
        // f32 sums of ≤ 100 terms of magnitude ≤ 1.2, in a different order.
        let lengths = [0usize, 1, 2, 3, 5, 7, 13, 31, 97];
        for (beta, span, sps) in [(0.22, 8, 4), (0.35, 6, 3), (0.5, 4, 1), (0.25, 5, 7)] {
            let taps = rrc_taps(beta, span, sps);
            let interp = PolyphaseInterpolator::new(&taps, sps);
            for &n in &lengths {
                let sym = random_symbols(n, 7 + n as u64);
                let mut up = vec![Cf32::new(0.0, 0.0); if n == 0 { 0 } else { (n - 1) * sps + 1 }];
                for (k, &s) in sym.iter().enumerate() {
                    up[k * sps] = s;
                }
                let want = crate::testutil::direct_convolve_complex_real(&up, &taps);
                // Garbage-filled output must be fully overwritten.
                let mut got = vec![Cf32::new(f32::NAN, 9.0); interp.output_len(n)];
                interp.process_into(&sym, &mut got);
                assert_eq!(got.len(), want.len(), "n {n}");
                for (i, (g, w)) in got.iter().zip(&want).enumerate() {
                    assert!((g - w).norm() < 1e-5, "n {n} sps {sps}: first diff at {i}");
                }
                assert_eq!(shape(&sym, &taps, sps), got);
            }
        }
    }

    #[test]
    fn matched_filter_equals_naive_centred_correlation() {
        // Reference: naive centred correlation (testutil). Tolerance 1e-5 as above.
        for taps_len in [1usize, 2, 3, 5, 33] {
            let taps: Vec<f32> = (0..taps_len)
                .map(|i| (i as f32 * 0.37).sin() + 0.1)
                .collect();
            for n in [0usize, 1, 2, 3, 7, 11, 31, 101] {
                let x = random_symbols(n, 100 + n as u64);
                let want = naive_correlate_centred(&x, &taps);
                let mut got = vec![Cf32::new(f32::NAN, f32::NAN); n];
                matched_filter_into(&x, &taps, &mut got);
                for (i, (g, w)) in got.iter().zip(&want).enumerate() {
                    assert!(
                        (g - w).norm() < 1e-5,
                        "taps {taps_len} n {n}: first diff at {i}"
                    );
                }
                assert_eq!(matched_filter(&x, &taps), got);
                for (i, g) in got.iter().enumerate() {
                    assert_eq!(matched_filter_at(&x, &taps, i), *g);
                }
                // Beyond the end the output tails off to zero.
                let far = matched_filter_at(&x, &taps, n + taps_len);
                assert_eq!(far, Cf32::new(0.0, 0.0));
            }
        }
    }

    #[test]
    fn shaping_then_matched_filtering_recovers_symbols_at_the_documented_index() {
        // Source: Nyquist criterion (REFERENCE-VALUES.md §5); delay convention from this
        // module's doc. The residual is bounded by Σ_{k≠0}|cascade(k·sps)|·max|s| (truncation
        // ISI) plus 1e-5 for f32 rounding.
        let (beta, span, sps) = (0.5, 8, 4);
        let taps = rrc_taps(beta, span, sps);
        let t64: Vec<f64> = taps.iter().map(|&v| v as f64).collect();
        let casc = direct_convolve_real(&t64, &t64);
        let mid = casc.len() / 2;
        let isi_sum: f64 = (0..casc.len())
            .filter(|&i| i != mid && (i as i64 - mid as i64) % sps as i64 == 0)
            .map(|i| casc[i].abs())
            .sum();
        let sym = random_symbols(64, 42);
        let smax = sym.iter().map(|s| s.norm()).fold(0.0f32, f32::max) as f64;
        let bound = isi_sum * smax + 1e-5;
        assert!(bound < 2e-2, "bound {bound}");
        let tx = shape(&sym, &taps, sps);
        let rx = matched_filter(&tx, &taps);
        let c = (taps.len() - 1) / 2;
        for (k, s) in sym.iter().enumerate() {
            let z = rx[k * sps + c];
            assert!(((z - s).norm() as f64) < bound, "symbol {k}: {z} vs {s}");
        }
    }
}
