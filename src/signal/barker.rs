//! Barker codes: binary sequences whose aperiodic autocorrelation sidelobes are
//! at most 1 in magnitude (R. H. Barker, 1953).
//!
//! Takes in: a length N. Gives out: the code as `±1` (`i8`), or as real-valued
//! symbols ([`Cf32`], `+1 → 1 + 0j`). Known lengths: 2, 3, 4, 5, 7, 11, 13 (no
//! other binary lengths are known; odd lengths above 13 are impossible, Turyn
//! 1961). One representative per length is returned; its reversal and/or
//! negation is also a Barker code. For N = 2 and 4 the representatives are
//! `+ −` and `+ + − +` (the alternatives `+ +` and `+ + + −` are also Barker).

use crate::Cf32;

const B2: [i8; 2] = [1, -1];
const B3: [i8; 3] = [1, 1, -1];
const B4: [i8; 4] = [1, 1, -1, 1];
const B5: [i8; 5] = [1, 1, 1, -1, 1];
const B7: [i8; 7] = [1, 1, 1, -1, -1, 1, -1];
const B11: [i8; 11] = [1, 1, 1, -1, -1, -1, 1, -1, -1, 1, -1];
const B13: [i8; 13] = [1, 1, 1, 1, 1, -1, -1, 1, 1, -1, 1, -1, 1];

/// The lengths for which [`barker`] returns a code.
pub const BARKER_LENGTHS: [usize; 7] = [2, 3, 4, 5, 7, 11, 13];

/// The Barker code of length `n` as ±1, or `None` if no code of that length is known.
pub fn barker(n: usize) -> Option<&'static [i8]> {
    match n {
        2 => Some(&B2),
        3 => Some(&B3),
        4 => Some(&B4),
        5 => Some(&B5),
        7 => Some(&B7),
        11 => Some(&B11),
        13 => Some(&B13),
        _ => None,
    }
}

/// The Barker code of length `n` as real symbols `±1 + 0j`, or `None` for an unknown length.
pub fn barker_symbols(n: usize) -> Option<Vec<Cf32>> {
    barker(n).map(|c| c.iter().map(|&v| Cf32::new(f32::from(v), 0.0)).collect())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Aperiodic autocorrelation at lags 1…n−1 (straight from the definition).
    fn sidelobes(c: &[i8]) -> Vec<i32> {
        (1..c.len())
            .map(|k| {
                (0..c.len() - k)
                    .map(|i| c[i] as i32 * c[i + k] as i32)
                    .sum()
            })
            .collect()
    }

    #[test]
    fn every_barker_code_has_sidelobes_at_most_one() {
        // Source: Barker 1953 definition, table of codes via REFERENCE-VALUES.md §4.
        for n in BARKER_LENGTHS {
            let c = barker(n).unwrap();
            assert_eq!(c.len(), n);
            assert!(c.iter().all(|&v| v == 1 || v == -1));
            let s = sidelobes(c);
            assert!(s.iter().all(|v| v.abs() <= 1), "N {n}: {s:?}");
            assert_eq!(s.iter().map(|v| v.abs()).max(), Some(1), "N {n}");
        }
        for n in [0, 1, 6, 8, 9, 10, 12, 14, 15] {
            assert!(barker(n).is_none(), "N {n}");
        }
    }

    #[test]
    fn peak_to_sidelobe_ratios_match_published_values() {
        // Source: REFERENCE-VALUES.md §4 (computed there): PSL 20·log10(N) =
        // 6.02, 9.54, 12.04, 13.98, 16.90, 20.83, 22.28 dB. Tolerance 0.005 dB (2 decimals).
        let want = [6.02, 9.54, 12.04, 13.98, 16.90, 20.83, 22.28];
        for (n, w) in BARKER_LENGTHS.into_iter().zip(want) {
            let c = barker(n).unwrap();
            let peak: i32 = c.iter().map(|&v| v as i32 * v as i32).sum();
            let side = sidelobes(c).iter().map(|v| v.abs()).max().unwrap();
            let psl_db = 20.0 * (peak as f64 / side as f64).log10();
            assert!((psl_db - w).abs() < 0.005, "N {n}: {psl_db}");
        }
    }

    #[test]
    fn barker13_sidelobes_alternate_zero_and_one() {
        // Source: REFERENCE-VALUES.md §4 — Barker-13 sidelobes are 0, 1, 0, 1, … (six +1, six 0).
        let s = sidelobes(barker(13).unwrap());
        let want: Vec<i32> = (1..13).map(|k: i32| (k % 2) ^ 1).collect();
        assert_eq!(s, want);
    }

    #[test]
    fn barker11_reversed_and_negated_is_the_80211_chip_sequence() {
        // Source: REFERENCE-VALUES.md §4 — IEEE 802.11 DSSS chips +1 −1 +1 +1 −1 +1 +1 +1 −1 −1 −1
        // are the negated, time-reversed Barker-11 (chip sequence from memory there).
        let chips = [1, -1, 1, 1, -1, 1, 1, 1, -1, -1, -1];
        let rev: Vec<i8> = barker(11).unwrap().iter().rev().map(|&v| -v).collect();
        assert_eq!(rev, chips);
    }

    #[test]
    fn barker_symbols_are_real_plus_minus_one() {
        let s = barker_symbols(7).unwrap();
        assert_eq!(s.len(), 7);
        for (z, &c) in s.iter().zip(barker(7).unwrap()) {
            assert_eq!(*z, Cf32::new(c as f32, 0.0));
        }
        assert!(barker_symbols(6).is_none());
    }
}
