//! Zadoff–Chu (constant-amplitude zero-autocorrelation) sequences.
//!
//! Takes in: a root `u`, a length `N` and a cyclic shift. Gives out: `N` unit
//! magnitude complex values ([`Cf32`]).
//!
//! * Odd `N` (3GPP TS 36.211 §5.7.2 PRACH and §6.11.1.1 PSS):
//!   `x_u(n) = exp(−jπ·u·n(n+1)/N)`.
//! * Even `N` (Chu 1972, even-length form, with the same sign):
//!   `x_u(n) = exp(−jπ·u·n²/N)`. (The odd-length formula is not periodic in `n`
//!   with period `N` when `N` is even, so its cyclic autocorrelation is not ideal.)
//! * Cyclic shift `v`: `out[n] = x_u((n + v) mod N)` (the PRACH convention
//!   `x_{u,v}(n) = x_u((n + C_v) mod N_ZC)`).
//!
//! The phase is computed exactly in integers, `u·n(n+1) mod 2N`, before the
//! conversion to floating point, so long sequences do not lose precision.
//!
//! Properties (Chu 1972): |x(n)| = 1 and the periodic autocorrelation is zero
//! at every non-zero lag whenever gcd(u, N) = 1 (prime length is not needed;
//! prime length makes the cross-correlation between any two roots flat, √N).

use super::SignalError;
use crate::Cf32;

fn gcd(mut a: u64, mut b: u64) -> u64 {
    while b != 0 {
        (a, b) = (b, a % b);
    }
    a
}

/// The Zadoff–Chu sequence of root `root` and length `len`, cyclically shifted by `shift`.
///
/// Any root is accepted (a root not coprime to `len` gives a valid but not
/// zero-autocorrelation sequence); `len == 0` gives an empty vector. Use
/// [`zadoff_chu_checked`] for user input.
pub fn zadoff_chu(root: u32, len: usize, shift: usize) -> Vec<Cf32> {
    if len == 0 {
        return Vec::new();
    }
    let n_zc = len as u128;
    let two_n = 2 * n_zc;
    let u = root as u128 % two_n;
    (0..len)
        .map(|n| {
            let k = ((n as u128) + (shift as u128)) % n_zc;
            let q = if len % 2 == 1 { k * (k + 1) } else { k * k } % two_n;
            let m = (u * q) % two_n;
            // exp(−jπ·m/N), m in [0, 2N).
            let phase = -std::f64::consts::PI * (m as f64) / (len as f64);
            Cf32::new(phase.cos() as f32, phase.sin() as f32)
        })
        .collect()
}

/// Like [`zadoff_chu`], but requires `len ≥ 1` and `1 ≤ root < len` with
/// gcd(root, len) = 1 (so the sequence has zero cyclic autocorrelation);
/// `shift` is reduced modulo `len`.
pub fn zadoff_chu_checked(root: u32, len: usize, shift: usize) -> Result<Vec<Cf32>, SignalError> {
    if len < 2 {
        return Err(SignalError::InvalidZadoffChu {
            key: "length",
            found: len.to_string(),
            expected: "a length of at least 2".to_string(),
        });
    }
    if root == 0 || root as usize >= len || gcd(root as u64, len as u64) != 1 {
        return Err(SignalError::InvalidZadoffChu {
            key: "root",
            found: root.to_string(),
            expected: format!(
                "a root from 1 to {} that shares no factor with {len}",
                len - 1
            ),
        });
    }
    Ok(zadoff_chu(root, len, shift % len))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::Cf64;

    fn c64(v: Cf32) -> Cf64 {
        Cf64::new(v.re as f64, v.im as f64)
    }

    /// Periodic cross-correlation r[l] = Σ a[n]·conj(b[(n+l) mod N]) (definition).
    fn periodic_xcorr(a: &[Cf32], b: &[Cf32], lag: usize) -> Cf64 {
        let n = a.len();
        (0..n)
            .map(|i| c64(a[i]) * c64(b[(i + lag) % n]).conj())
            .sum()
    }

    #[test]
    fn pss_root_25_matches_ts36211_values() {
        // Source: 3GPP TS 36.211 §6.11.1.1 PSS d_u(n) (formula verified via restatements;
        // values computed in REFERENCE-VALUES.md §2): PSS = length-63 ZC with element 31
        // removed. Tolerance 2e-6: the table has 6 decimals, values are f32.
        let x = zadoff_chu(25, 63, 0);
        let d: Vec<Cf32> = x
            .iter()
            .enumerate()
            .filter(|(i, _)| *i != 31)
            .map(|(_, v)| *v)
            .collect();
        assert_eq!(d.len(), 62);
        let table = [
            (0, 1.000000, 0.000000),
            (1, -0.797133, -0.603804),
            (2, 0.365341, -0.930874),
            (3, -0.733052, -0.680173),
            (4, 0.980172, 0.198146),
            (5, 0.955573, 0.294755),
            (6, -0.500000, -0.866025),
            (7, 0.766044, -0.642788),
            (29, -0.733052, 0.680173),
            (30, -0.988831, 0.149042),
            (31, -0.988831, 0.149042),
            (32, -0.733052, 0.680173),
            (60, -0.797133, -0.603804),
            (61, 1.000000, 0.000000),
        ];
        for (n, re, im) in table {
            let v = d[n];
            assert!(
                (v.re - re).abs() < 2e-6 && (v.im - im).abs() < 2e-6,
                "d_25({n}) = {v}"
            );
        }
        // Removed element x_25(31) = 0.456211 + 0.889872j (REFERENCE-VALUES.md §2).
        assert!((x[31] - Cf32::new(0.456211, 0.889872)).norm() < 2e-6);
        // Centro-symmetry d_u(n) = d_u(61 − n) (REFERENCE-VALUES.md §2, computed).
        for n in 0..62 {
            assert!((d[n] - d[61 - n]).norm() < 1e-5, "n {n}");
        }
        // d_29(1..3) and d_34 = conj(d_29) (REFERENCE-VALUES.md §2).
        let x29 = zadoff_chu(29, 63, 0);
        for (n, re, im) in [
            (1, -0.969077, -0.246757),
            (2, -0.733052, -0.680173),
            (3, 0.074730, 0.997204),
        ] {
            assert!((x29[n] - Cf32::new(re, im)).norm() < 3e-6, "d_29({n})");
        }
        let x34 = zadoff_chu(34, 63, 0);
        for (a, b) in x34.iter().zip(&x29) {
            assert!((a - b.conj()).norm() < 1e-5);
        }
    }

    #[test]
    fn cross_correlation_of_roots_25_and_29_is_flat_root_63() {
        // Source: Popović 1992 (from memory in REFERENCE-VALUES.md §2), confirmed there by
        // computation: |r| = √63 = 7.9373 at every lag since gcd(29 − 25, 63) = 1.
        // Tolerance 1e-4: f32 inputs, 63-term f64 sum.
        let a = zadoff_chu(25, 63, 0);
        let b = zadoff_chu(29, 63, 0);
        for lag in 0..63 {
            let r = periodic_xcorr(&a, &b, lag).norm();
            assert!((r - 63f64.sqrt()).abs() < 1e-4, "lag {lag}: {r}");
        }
    }

    #[test]
    fn coprime_roots_give_constant_amplitude_and_zero_cyclic_autocorrelation() {
        // Source: Chu, IEEE Trans. IT 18(4), 1972 (via REFERENCE-VALUES.md §2): zero periodic
        // autocorrelation at non-zero lags when gcd(u, N) = 1, odd or even N.
        // Tolerance 1e-3: f32 rounding (≈6e-8 per term) summed over N ≤ 839 terms stays far below.
        for (u, n) in [
            (25u32, 63usize),
            (1, 2),
            (1, 3),
            (7, 64),
            (5, 12),
            (4, 15),
            (129, 839),
            (1, 139),
        ] {
            let x = zadoff_chu(u, n, 0);
            for v in &x {
                assert!((v.norm() - 1.0).abs() < 1e-6);
            }
            let lags: Vec<usize> = if n > 100 {
                vec![1, 2, 100, n / 2]
            } else {
                (1..n).collect()
            };
            for lag in lags {
                let r = periodic_xcorr(&x, &x, lag).norm();
                assert!(r < 1e-3, "u {u} N {n} lag {lag}: {r}");
            }
            assert!((periodic_xcorr(&x, &x, 0).re - n as f64).abs() < 1e-3);
        }
    }

    #[test]
    fn a_root_sharing_a_factor_with_the_length_is_not_zero_autocorrelation() {
        // Shows the gcd condition matters (so the test above can fail): u = 3, N = 63.
        let x = zadoff_chu(3, 63, 0);
        let worst = (1..63)
            .map(|l| periodic_xcorr(&x, &x, l).norm())
            .fold(0.0, f64::max);
        assert!(worst > 1.0, "{worst}");
    }

    #[test]
    fn cyclic_shift_rotates_the_sequence() {
        // Source: 3GPP TS 36.211 §5.7.2 cyclic shift x_{u,v}(n) = x_u((n + C_v) mod N_ZC).
        for (u, n, v) in [
            (25u32, 63usize, 5usize),
            (7, 64, 63),
            (129, 839, 419),
            (1, 5, 12),
        ] {
            let x = zadoff_chu(u, n, 0);
            let s = zadoff_chu(u, n, v);
            for i in 0..n {
                assert!((s[i] - x[(i + v) % n]).norm() < 1e-6);
            }
        }
        assert!(zadoff_chu(1, 0, 3).is_empty());
    }

    #[test]
    fn checked_form_rejects_bad_roots_and_lengths() {
        for (u, n, key) in [
            (0u32, 63usize, "root"),
            (63, 63, "root"),
            (3, 63, "root"),
            (1, 1, "length"),
        ] {
            match zadoff_chu_checked(u, n, 0) {
                Err(SignalError::InvalidZadoffChu { key: k, .. }) => assert_eq!(k, key),
                other => panic!("expected {key} error, got {other:?}"),
            }
        }
        assert_eq!(
            zadoff_chu_checked(25, 63, 64).unwrap(),
            zadoff_chu(25, 63, 1)
        );
    }
}
