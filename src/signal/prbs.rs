//! Pseudo-random binary sequences: ITU-T O.150 patterns and any Fibonacci LFSR.
//!
//! Takes in: a named pattern ([`PrbsPattern`]) or a register length, feedback
//! stages and a seed. Gives out: bits (one per `u8`, 0 or 1) and, through a
//! [`Constellation`], symbols.
//!
//! **Register convention** (Fibonacci LFSR, as REFERENCE-VALUES §3 and ITU-T
//! O.150 describe it): stages are numbered 1…n. Each clock the output bit is the
//! content of stage n; the XOR of the feedback stages (e.g. stages a and n for
//! x^n + x^a + 1) is shifted into stage 1 while every stage k moves to k + 1.
//! Equivalently `y[m] = y[m−n] ⊕ y[m−a]`. A seed sets the initial stages: bit
//! `k−1` of the seed is stage k, so the first n output bits are seed bits
//! n−1, n−2, …, 0. The default seed is all ones, so a pattern starts with n ones
//! (O.150: "the pattern begins with the first ONE of n consecutive ONEs").
//!
//! Note that the stage-tap polynomial (x^9 + x^5 + 1) is the reciprocal of the
//! recurrence's characteristic polynomial (x^9 + x^4 + 1); they generate
//! time-reversed sequences. This module always takes *stage numbers*.
//!
//! O.150 sends the 2^15 − 1, 2^23 − 1 and 2^31 − 1 patterns inverted (every bit
//! complemented); [`PrbsPattern::inverted`] says which, and [`Lfsr::from_pattern`]
//! applies it. PRBS7 (x^7 + x^6 + 1) is common serial-link practice, not an
//! O.150 pattern; it is not inverted.

use std::fmt;
use std::str::FromStr;

use serde::{Deserialize, Serialize};

use super::{Constellation, SignalError};
use crate::Cf32;

/// A named PRBS pattern: stage taps and output inversion per ITU-T O.150.
#[derive(
    Debug,
    Clone,
    Copy,
    PartialEq,
    Eq,
    Hash,
    PartialOrd,
    Ord,
    Serialize,
    Deserialize,
    schemars::JsonSchema,
)]
pub enum PrbsPattern {
    /// x^7 + x^6 + 1, period 127 (common practice; not in O.150). Not inverted.
    #[serde(rename = "prbs7")]
    Prbs7,
    /// x^9 + x^5 + 1, period 511 (O.150). Not inverted.
    #[serde(rename = "prbs9")]
    Prbs9,
    /// x^11 + x^9 + 1, period 2047 (O.150). Not inverted.
    #[serde(rename = "prbs11")]
    Prbs11,
    /// x^15 + x^14 + 1, period 32767 (O.150). Inverted.
    #[serde(rename = "prbs15")]
    Prbs15,
    /// x^23 + x^18 + 1, period 8388607 (O.150 §5.6). Inverted.
    #[serde(rename = "prbs23")]
    Prbs23,
    /// x^31 + x^28 + 1, period 2147483647 (O.150). Inverted.
    #[serde(rename = "prbs31")]
    Prbs31,
}

const PRBS_NAMES: &str = "prbs7, prbs9, prbs11, prbs15, prbs23, prbs31";

impl PrbsPattern {
    /// Every pattern.
    pub const ALL: [PrbsPattern; 6] = [
        PrbsPattern::Prbs7,
        PrbsPattern::Prbs9,
        PrbsPattern::Prbs11,
        PrbsPattern::Prbs15,
        PrbsPattern::Prbs23,
        PrbsPattern::Prbs31,
    ];

    /// Register length n.
    pub fn degree(self) -> u32 {
        self.taps()[0]
    }

    /// Feedback stages `[n, a]` of x^n + x^a + 1.
    pub fn taps(self) -> [u32; 2] {
        match self {
            PrbsPattern::Prbs7 => [7, 6],
            PrbsPattern::Prbs9 => [9, 5],
            PrbsPattern::Prbs11 => [11, 9],
            PrbsPattern::Prbs15 => [15, 14],
            PrbsPattern::Prbs23 => [23, 18],
            PrbsPattern::Prbs31 => [31, 28],
        }
    }

    /// Whether O.150 sends this pattern inverted (2^15−1, 2^23−1, 2^31−1).
    pub fn inverted(self) -> bool {
        matches!(
            self,
            PrbsPattern::Prbs15 | PrbsPattern::Prbs23 | PrbsPattern::Prbs31
        )
    }

    /// Period `2^n − 1` in bits.
    pub fn period(self) -> u64 {
        (1u64 << self.degree()) - 1
    }

    /// The text name (`"prbs15"`, …).
    pub fn name(self) -> &'static str {
        match self {
            PrbsPattern::Prbs7 => "prbs7",
            PrbsPattern::Prbs9 => "prbs9",
            PrbsPattern::Prbs11 => "prbs11",
            PrbsPattern::Prbs15 => "prbs15",
            PrbsPattern::Prbs23 => "prbs23",
            PrbsPattern::Prbs31 => "prbs31",
        }
    }
}

impl fmt::Display for PrbsPattern {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for PrbsPattern {
    type Err = SignalError;

    /// Parses `"prbs7"` … `"prbs31"`, case-insensitively.
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let lower = s.trim().to_ascii_lowercase();
        PrbsPattern::ALL
            .into_iter()
            .find(|p| p.name() == lower)
            .ok_or_else(|| SignalError::UnknownPrbs {
                found: s.to_string(),
                expected: PRBS_NAMES,
            })
    }
}

/// A Fibonacci linear-feedback shift register (see the module doc for the convention).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Lfsr {
    degree: u32,
    /// Bit k−1 set for every feedback stage k.
    tap_mask: u64,
    /// Bit k−1 = stage k.
    state: u64,
    invert: bool,
}

impl Lfsr {
    /// A register of `degree` stages (1…=64) with feedback from the stages in `taps`
    /// (each in 1…=degree, and stage `degree` must be among them) and initial stages
    /// from `seed` (bit k−1 = stage k; non-zero, below 2^degree). Output not inverted.
    pub fn new(degree: u32, taps: &[u32], seed: u64) -> Result<Lfsr, SignalError> {
        if !(1..=64).contains(&degree) {
            return Err(SignalError::InvalidLfsr {
                key: "degree",
                found: degree.to_string(),
                expected: "a register length from 1 to 64 stages",
            });
        }
        let mut tap_mask = 0u64;
        for &t in taps {
            if !(1..=degree).contains(&t) {
                return Err(SignalError::InvalidLfsr {
                    key: "taps",
                    found: t.to_string(),
                    expected: "stage numbers from 1 to the register length",
                });
            }
            tap_mask |= 1u64 << (t - 1);
        }
        if tap_mask & (1u64 << (degree - 1)) == 0 {
            return Err(SignalError::InvalidLfsr {
                key: "taps",
                found: format!("{taps:?}"),
                expected: "the last stage (the register length) among the feedback stages",
            });
        }
        let mask = Self::mask_for(degree);
        if seed == 0 || seed & !mask != 0 {
            return Err(SignalError::InvalidLfsr {
                key: "seed",
                found: format!("{seed:#x}"),
                expected: "a non-zero seed that fits in the register",
            });
        }
        Ok(Lfsr {
            degree,
            tap_mask,
            state: seed,
            invert: false,
        })
    }

    fn mask_for(degree: u32) -> u64 {
        if degree == 64 {
            u64::MAX
        } else {
            (1u64 << degree) - 1
        }
    }

    /// The O.150 generator for `p`: all-ones seed, inverted output where O.150 says so.
    pub fn from_pattern(p: PrbsPattern) -> Lfsr {
        let [n, a] = p.taps();
        Lfsr {
            degree: n,
            tap_mask: (1u64 << (n - 1)) | (1u64 << (a - 1)),
            state: Self::mask_for(n),
            invert: p.inverted(),
        }
    }

    /// The O.150 generator for `p` started from `seed` instead of all ones.
    pub fn from_pattern_with_seed(p: PrbsPattern, seed: u64) -> Result<Lfsr, SignalError> {
        Ok(Lfsr::new(p.degree(), &p.taps(), seed)?.with_inversion(p.inverted()))
    }

    /// Sets whether every output bit is complemented.
    pub fn with_inversion(mut self, invert: bool) -> Lfsr {
        self.invert = invert;
        self
    }

    /// Register length n.
    pub fn degree(&self) -> u32 {
        self.degree
    }

    /// Current stages (bit k−1 = stage k).
    pub fn state(&self) -> u64 {
        self.state
    }

    /// Whether the output is inverted.
    pub fn inverted(&self) -> bool {
        self.invert
    }

    /// Clocks once and returns the output bit (stage n before the shift, inverted if set).
    #[inline]
    pub fn next_bit(&mut self) -> u8 {
        let out = ((self.state >> (self.degree - 1)) & 1) as u8;
        let fb = (self.state & self.tap_mask).count_ones() as u64 & 1;
        self.state = ((self.state << 1) | fb) & Self::mask_for(self.degree);
        out ^ u8::from(self.invert)
    }

    /// Fills `out` with the next `out.len()` bits (no allocation).
    pub fn fill(&mut self, out: &mut [u8]) {
        for b in out.iter_mut() {
            *b = self.next_bit();
        }
    }

    /// Fills `out` with symbols of `c`, taking `c.bits_per_symbol()` bits per symbol
    /// (first bit = MSB of the label), with no allocation.
    pub fn fill_symbols(&mut self, c: &Constellation, out: &mut [Cf32]) {
        let bps = c.bits_per_symbol();
        for o in out.iter_mut() {
            let mut label = 0usize;
            for _ in 0..bps {
                label = (label << 1) | usize::from(self.next_bit());
            }
            *o = c.points()[label];
        }
    }
}

/// The first `n` bits of pattern `p` (O.150 convention, all-ones seed).
pub fn prbs_bits(p: PrbsPattern, n: usize) -> Vec<u8> {
    let mut out = vec![0u8; n];
    Lfsr::from_pattern(p).fill(&mut out);
    out
}

/// `n_symbols` symbols of `c` driven by pattern `p` (all-ones seed).
pub fn prbs_symbols(p: PrbsPattern, c: &Constellation, n_symbols: usize) -> Vec<Cf32> {
    let mut out = vec![Cf32::new(0.0, 0.0); n_symbols];
    Lfsr::from_pattern(p).fill_symbols(c, &mut out);
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::signal::Modulation;

    fn hex32(bits: &[u8]) -> u32 {
        bits[..32]
            .iter()
            .fold(0u32, |acc, &b| (acc << 1) | u32::from(b))
    }

    /// Raw (non-inverted) register output.
    fn raw_bits(p: PrbsPattern, n: usize) -> Vec<u8> {
        let mut out = vec![0u8; n];
        Lfsr::from_pattern(p).with_inversion(false).fill(&mut out);
        out
    }

    #[test]
    fn first_32_bits_match_the_o150_table() {
        // Source: REFERENCE-VALUES.md §3 "First 32 bits" table (computed there from the
        // ITU-T O.150 tap table with the all-ones register convention): output of stage n
        // and the feedback stream y[n..n+31].
        let table = [
            (PrbsPattern::Prbs7, 0xFE04_1851u32, 0x020C_28F2u32),
            (PrbsPattern::Prbs9, 0xFF83_DF17, 0x07BE_2E64),
            (PrbsPattern::Prbs11, 0xFFE0_0C07, 0x0060_3C19),
            (PrbsPattern::Prbs15, 0xFFFE_0004, 0x0002_000C),
            (PrbsPattern::Prbs23, 0xFFFF_FE00, 0x0000_3E00),
            (PrbsPattern::Prbs31, 0xFFFF_FFFE, 0x0000_000E),
        ];
        for (p, out_hex, fb_hex) in table {
            let raw = raw_bits(p, 32 + p.degree() as usize);
            assert_eq!(hex32(&raw), out_hex, "{p} output");
            assert_eq!(hex32(&raw[p.degree() as usize..]), fb_hex, "{p} feedback");
        }
    }

    #[test]
    fn o150_inverts_prbs15_23_31_only() {
        // Source: ITU-T O.150 tap/inversion table (via REFERENCE-VALUES.md §3); PRBS15 sent
        // pattern starts 00000000000000011111111111111011.
        for p in PrbsPattern::ALL {
            let sent = prbs_bits(p, 64);
            let raw = raw_bits(p, 64);
            let want_inv = matches!(
                p,
                PrbsPattern::Prbs15 | PrbsPattern::Prbs23 | PrbsPattern::Prbs31
            );
            assert_eq!(p.inverted(), want_inv);
            for (s, r) in sent.iter().zip(&raw) {
                assert_eq!(*s, r ^ u8::from(want_inv), "{p}");
            }
        }
        assert_eq!(hex32(&prbs_bits(PrbsPattern::Prbs15, 32)), 0x0001_FFFB);
    }

    #[test]
    fn output_obeys_the_recurrence_for_every_pattern() {
        // Source: REFERENCE-VALUES.md §3 — y[m] = y[m−n] ⊕ y[m−a] (phase-independent check).
        for p in PrbsPattern::ALL {
            let [n, a] = p.taps();
            let y = raw_bits(p, 4000);
            for m in n as usize..y.len() {
                assert_eq!(y[m], y[m - n as usize] ^ y[m - a as usize], "{p} m {m}");
            }
        }
    }

    /// Period (first return of the register state) and count of ones over one period.
    fn period_and_ones(p: PrbsPattern) -> (u64, u64) {
        let mut l = Lfsr::from_pattern(p).with_inversion(false);
        let start = l.state();
        let (mut k, mut ones) = (0u64, 0u64);
        loop {
            ones += u64::from(l.next_bit());
            k += 1;
            if l.state() == start || k > p.period() {
                return (k, ones);
            }
        }
    }

    #[test]
    fn period_is_2n_minus_1_with_2n_minus_1_half_ones() {
        // Source: m-sequence properties, REFERENCE-VALUES.md §3 (period 2^n − 1, balance
        // 2^(n−1) ones per period; Golomb 1967). PRBS23 walks 8.4e6 states — fine in release.
        let mut pats = vec![
            PrbsPattern::Prbs7,
            PrbsPattern::Prbs9,
            PrbsPattern::Prbs11,
            PrbsPattern::Prbs15,
        ];
        if !cfg!(debug_assertions) {
            pats.push(PrbsPattern::Prbs23);
        }
        for p in pats {
            let (period, ones) = period_and_ones(p);
            let n = p.degree();
            assert_eq!(period, (1u64 << n) - 1, "{p}");
            assert_eq!(ones, 1u64 << (n - 1), "{p}");
        }
    }

    #[test]
    fn bipolar_periodic_autocorrelation_is_minus_one_off_peak() {
        // Source: REFERENCE-VALUES.md §3 — bipolar (0 → +1, 1 → −1) periodic autocorrelation
        // is 2^n − 1 at lag 0 and −1 elsewhere (computed there for n = 7, 9, 11).
        for p in [PrbsPattern::Prbs7, PrbsPattern::Prbs9, PrbsPattern::Prbs11] {
            let n = p.period() as usize;
            let s: Vec<i32> = prbs_bits(p, n).iter().map(|&b| 1 - 2 * b as i32).collect();
            for lag in 0..n {
                let r: i32 = (0..n).map(|i| s[i] * s[(i + lag) % n]).sum();
                let want = if lag == 0 { n as i32 } else { -1 };
                assert_eq!(r, want, "{p} lag {lag}");
            }
        }
    }

    #[test]
    fn run_lengths_follow_golomb_r2_for_prbs9() {
        // Source: Golomb's run postulate R2 as stated in REFERENCE-VALUES.md §3 (Golomb 1967,
        // from memory there; computed there). Cyclic runs over one period.
        let p = PrbsPattern::Prbs9;
        let n = p.degree() as usize;
        let y = raw_bits(p, p.period() as usize);
        // Rotate so the sequence starts at a run boundary.
        let start = (1..y.len()).find(|&i| y[i] != y[i - 1]).unwrap();
        let rot: Vec<u8> = y[start..].iter().chain(&y[..start]).copied().collect();
        let mut runs = vec![[0u32; 2]; n + 1];
        let mut len = 1;
        for i in 1..=rot.len() {
            if i < rot.len() && rot[i] == rot[i - 1] {
                len += 1;
            } else {
                runs[len][rot[i - 1] as usize] += 1;
                len = 1;
            }
        }
        for (k, r) in runs.iter().enumerate().take(n - 1).skip(1) {
            let want = 1u32 << (n - k - 2);
            assert_eq!(*r, [want, want], "runs of length {k}");
        }
        assert_eq!(runs[n - 1], [1, 0]);
        assert_eq!(runs[n], [0, 1]);
    }

    #[test]
    fn custom_lfsr_equals_named_pattern_and_validates_its_inputs() {
        let mut a = Lfsr::new(9, &[9, 5], 0x1ff).unwrap();
        let mut b = Lfsr::from_pattern(PrbsPattern::Prbs9);
        for _ in 0..1000 {
            assert_eq!(a.next_bit(), b.next_bit());
        }
        // Seed bit k−1 = stage k: the first n outputs are seed bits n−1 … 0.
        let mut l = Lfsr::new(4, &[4, 3], 0b0110).unwrap();
        let mut first = [0u8; 4];
        l.fill(&mut first);
        assert_eq!(first, [0, 1, 1, 0]);
        for (deg, taps, seed, key) in [
            (0u32, vec![1u32], 1u64, "degree"),
            (65, vec![65], 1, "degree"),
            (7, vec![6], 1, "taps"),
            (7, vec![7, 8], 1, "taps"),
            (7, vec![7, 6], 0, "seed"),
            (7, vec![7, 6], 0x80, "seed"),
        ] {
            match Lfsr::new(deg, &taps, seed) {
                Err(SignalError::InvalidLfsr { key: k, .. }) => assert_eq!(k, key),
                other => panic!("expected {key} error, got {other:?}"),
            }
        }
        // A 64-stage register works (x^64 + x^63 + x^61 + x^60 + 1, common practice) and
        // obeys its recurrence.
        let mut l = Lfsr::new(64, &[64, 63, 61, 60], u64::MAX).unwrap();
        let mut y = vec![0u8; 300];
        l.fill(&mut y);
        for m in 64..300 {
            assert_eq!(y[m], y[m - 64] ^ y[m - 63] ^ y[m - 61] ^ y[m - 60]);
        }
    }

    #[test]
    fn prbs_symbols_map_bits_through_the_constellation() {
        let c = Constellation::new(Modulation::Qam16);
        let sym = prbs_symbols(PrbsPattern::Prbs9, &c, 100);
        let bits = prbs_bits(PrbsPattern::Prbs9, 400);
        let mut want = vec![Cf32::new(0.0, 0.0); 100];
        c.map_bits(&bits, &mut want);
        assert_eq!(sym, want);
    }

    #[test]
    fn pattern_names_round_trip() {
        for p in PrbsPattern::ALL {
            assert_eq!(p.to_string().parse::<PrbsPattern>().unwrap(), p);
            let j = serde_json::to_string(&p).unwrap();
            assert_eq!(serde_json::from_str::<PrbsPattern>(&j).unwrap(), p);
        }
        assert!(matches!(
            "prbs10".parse::<PrbsPattern>(),
            Err(SignalError::UnknownPrbs { .. })
        ));
    }
}
