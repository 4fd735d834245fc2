//! Constellations with Gray bit mapping and O(1) nearest-point slicers.
//!
//! Takes in: bits (one per `u8`, 0 or 1; any non-zero byte counts as 1), labels,
//! or received complex symbols. Gives out: unit-mean-power points
//! ([`Cf32`]), labels and bits.
//!
//! Mapping (bits → point), 3GPP TS 38.211 §5.1 closed form, with
//! `s_k = 1 − 2·b(i+k)` (bit 0 → +1, bit 1 → −1):
//!
//! | scheme | point |
//! |---|---|
//! | BPSK   | (1/√2)·(s0 + j·s0) — on the diagonal, not on the real axis |
//! | QPSK   | (1/√2)·(s0 + j·s1) |
//! | 16-QAM | (1/√10)·{ s0·(2 − s2) + j·s1·(2 − s3) } |
//! | 64-QAM | (1/√42)·{ s0·[4 − s2·(2 − s4)] + j·s1·[4 − s3·(2 − s5)] } |
//! | 256-QAM| (1/√170)·{ s0·[8 − s2·(4 − s4·(2 − s6))] + j·s1·[8 − s3·(4 − s5·(2 − s7))] } |
//!
//! Even-numbered bits set I, odd-numbered bits set Q. 8PSK is not in 38.211; its
//! map is a named table ([`Psk8Map`]), default DVB-S2 (EN 302 307-1 Fig. 10),
//! unit radius.
//!
//! A *label* is the bit group read first bit as MSB: `points()[label]` is the
//! point of that group. Slicing is O(1) per symbol: square QAM (and QPSK) round
//! and clamp each axis to a level index and look the label up; PSK takes the
//! angle, finds the sector and looks the label up; BPSK takes the sign of the
//! projection on the diagonal. Exact ties (a measure-zero event for noisy input)
//! resolve deterministically: QAM to the higher level index along the axis, PSK
//! by `f32::round` of the sector number. NaN components slice to a valid label (unspecified
//! which one); the slicer never panics.

use std::f32::consts::PI;
use std::fmt;
use std::str::FromStr;

use serde::{Deserialize, Serialize};

use super::SignalError;
use crate::Cf32;

/// A modulation scheme.
///
/// Text and serde names: `"bpsk"`, `"qpsk"`, `"8psk"`, `"16qam"`, `"64qam"`, `"256qam"`.
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
pub enum Modulation {
    /// Binary PSK, 1 bit per symbol (3GPP: on the diagonal).
    #[serde(rename = "bpsk")]
    Bpsk,
    /// Quadrature PSK, 2 bits per symbol.
    #[serde(rename = "qpsk")]
    Qpsk,
    /// 8-ary PSK, 3 bits per symbol.
    #[serde(rename = "8psk")]
    Psk8,
    /// 16-QAM, 4 bits per symbol.
    #[serde(rename = "16qam")]
    Qam16,
    /// 64-QAM, 6 bits per symbol.
    #[serde(rename = "64qam")]
    Qam64,
    /// 256-QAM, 8 bits per symbol.
    #[serde(rename = "256qam")]
    Qam256,
}

const MODULATION_NAMES: &str = "bpsk, qpsk, 8psk, 16qam, 64qam, 256qam";

impl Modulation {
    /// Every modulation, in order of increasing size.
    pub const ALL: [Modulation; 6] = [
        Modulation::Bpsk,
        Modulation::Qpsk,
        Modulation::Psk8,
        Modulation::Qam16,
        Modulation::Qam64,
        Modulation::Qam256,
    ];

    /// Bits carried by one symbol.
    pub fn bits_per_symbol(self) -> usize {
        match self {
            Modulation::Bpsk => 1,
            Modulation::Qpsk => 2,
            Modulation::Psk8 => 3,
            Modulation::Qam16 => 4,
            Modulation::Qam64 => 6,
            Modulation::Qam256 => 8,
        }
    }

    /// Number of points, `2^bits_per_symbol`.
    pub fn order(self) -> usize {
        1 << self.bits_per_symbol()
    }

    /// The text name (`"16qam"`, …).
    pub fn name(self) -> &'static str {
        match self {
            Modulation::Bpsk => "bpsk",
            Modulation::Qpsk => "qpsk",
            Modulation::Psk8 => "8psk",
            Modulation::Qam16 => "16qam",
            Modulation::Qam64 => "64qam",
            Modulation::Qam256 => "256qam",
        }
    }
}

impl fmt::Display for Modulation {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for Modulation {
    type Err = SignalError;

    /// Parses the text names, case-insensitively.
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let lower = s.trim().to_ascii_lowercase();
        Modulation::ALL
            .into_iter()
            .find(|m| m.name() == lower)
            .ok_or_else(|| SignalError::UnknownModulation {
                found: s.to_string(),
                expected: MODULATION_NAMES,
            })
    }
}

/// Which published bit map 8PSK uses. Angles counter-clockwise from +I, unit radius.
///
/// | bits | `DvbS2` (EN 302 307-1 Fig. 10) | `Ts25223` (3GPP TS 25.223 §5A.2.2) |
/// |---|---|---|
/// | 000 | π/4   | 11π/8 |
/// | 001 | 0     | 9π/8  |
/// | 010 | π     | 5π/8  |
/// | 011 | 5π/4  | 7π/8  |
/// | 100 | π/2   | 13π/8 |
/// | 101 | 7π/4  | 15π/8 |
/// | 110 | 3π/4  | 3π/8  |
/// | 111 | 3π/2  | π/8   |
///
/// Text and serde names: `"dvb-s2"`, `"ts25.223"`. The default is `DvbS2`.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Default, Serialize, Deserialize,
)]
pub enum Psk8Map {
    /// DVB-S2 (ETSI EN 302 307-1, Fig. 10), points on multiples of π/4.
    #[default]
    #[serde(rename = "dvb-s2")]
    DvbS2,
    /// 3GPP TS 25.223 §5A.2.2 (UTRA TDD), points on odd multiples of π/8.
    #[serde(rename = "ts25.223")]
    Ts25223,
}

const PSK8_MAP_NAMES: &str = "dvb-s2, ts25.223";

impl Psk8Map {
    /// Angle of `points[label]` in units of π/8, indexed by label.
    fn angles_pi_over_8(self) -> [u32; 8] {
        match self {
            Psk8Map::DvbS2 => [2, 0, 8, 10, 4, 14, 6, 12],
            Psk8Map::Ts25223 => [11, 9, 5, 7, 13, 15, 3, 1],
        }
    }

    /// The text name.
    pub fn name(self) -> &'static str {
        match self {
            Psk8Map::DvbS2 => "dvb-s2",
            Psk8Map::Ts25223 => "ts25.223",
        }
    }
}

impl fmt::Display for Psk8Map {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for Psk8Map {
    type Err = SignalError;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s.trim().to_ascii_lowercase().as_str() {
            "dvb-s2" | "dvbs2" => Ok(Psk8Map::DvbS2),
            "ts25.223" | "ts25223" => Ok(Psk8Map::Ts25223),
            _ => Err(SignalError::UnknownPsk8Map {
                found: s.to_string(),
                expected: PSK8_MAP_NAMES,
            }),
        }
    }
}

/// How the slicer finds the nearest point.
#[derive(Debug, Clone, PartialEq)]
enum Slicer {
    /// Sign of Re + Im (points on the diagonal).
    Bpsk,
    /// Per-axis rounding. `levels` levels per axis at ±1, ±3, … (×`scale`);
    /// `i_label[idx]`/`q_label[idx]` hold that axis's bits already placed in the label;
    /// `i_value[idx]`/`q_value[idx]` the point's real/imaginary part at that level
    /// (so the decided point needs no second lookup through the label).
    SquareQam {
        levels: usize,
        inv_scale: f32,
        i_label: Vec<usize>,
        q_label: Vec<usize>,
        i_value: Vec<f32>,
        q_value: Vec<f32>,
        /// `thresholds[j − 1]`: the smallest f32 the rounding formula puts at
        /// level index ≥ `j` (see [`QamKernel`]).
        thresholds: Vec<f32>,
    },
    /// Sector lookup: sector `k` is centred on angle `offset_rad + k·2π/M`.
    Psk {
        offset_rad: f32,
        sector_label: Vec<usize>,
    },
}

/// A constellation's slicer with the scheme chosen once: hot loops that slice
/// many symbols match on the kernel outside the loop and call the kernel's
/// `decide` inside it (inlined, no per-symbol match). [`Constellation::slice`]
/// goes through the same kernels, so both give the same label for every input.
#[derive(Clone, Copy, Debug)]
pub(crate) enum SliceKernel<'a> {
    /// BPSK.
    Bpsk(BpskKernel<'a>),
    /// QPSK (one threshold per axis).
    Qam1(QamKernel<'a, 1>),
    /// 16-QAM (three thresholds per axis).
    Qam3(QamKernel<'a, 3>),
    /// 64-QAM (seven thresholds per axis).
    Qam7(QamKernel<'a, 7>),
    /// Square QAM by the rounding formula (256-QAM).
    QamFormula(QamKernel<'a, 0>),
    /// 8PSK.
    Psk(PskKernel<'a>),
}

/// BPSK kernel: sign of the projection on the diagonal.
#[derive(Clone, Copy, Debug)]
pub(crate) struct BpskKernel<'a> {
    points: &'a [Cf32],
}

impl BpskKernel<'_> {
    /// Label of the nearest point.
    #[inline(always)]
    pub(crate) fn slice(&self, z: Cf32) -> usize {
        usize::from(z.re + z.im < 0.0)
    }
    /// Label and point of the nearest point.
    #[inline(always)]
    pub(crate) fn decide(&self, z: Cf32) -> (usize, Cf32) {
        let l = self.slice(z);
        (l, self.points[l & 1])
    }
}

/// Square-QAM kernel: per-axis level index, then table lookups.
///
/// The level index is defined by the rounding formula
/// `floor((x·inv_scale + L)/2)` clamped to `[0, L−1]` ([`QamKernel::index_by_formula`]).
/// With `T = L − 1 > 0` it is found instead by counting the `T` thresholds
/// `x` reaches: the formula is a non-decreasing function of `x`, so its value
/// is the number of `j ≥ 1` whose threshold (the smallest f32 the formula puts at
/// ≥ `j`, found by bisection when the constellation is built) is ≤ `x` — the
/// same index for every input, NaN included (no comparison holds: index 0, as
/// the formula's `max(0)` gives), with a much shorter dependency chain than
/// multiply, add, clamp and convert. `T = 0` uses the formula.
#[derive(Clone, Copy, Debug)]
pub(crate) struct QamKernel<'a, const T: usize> {
    /// Levels per axis as f32 (`L`).
    l: f32,
    /// `L − 1` as f32.
    max: f32,
    inv_scale: f32,
    thresholds: [f32; T],
    i_label: &'a [usize],
    q_label: &'a [usize],
    i_value: &'a [f32],
    q_value: &'a [f32],
}

/// Level index of one axis value by the rounding formula (see [`QamKernel`]).
#[inline(always)]
fn qam_index_by_formula(x: f32, inv_scale: f32, l: f32, max: f32) -> usize {
    // Level index = floor((x + L)/2) with x in grid units, clamped to [0, L−1].
    // `f32::clamp` would keep NaN; `max(0).min(max)` maps NaN to 0. After
    // the clamp the value is ≥ 0, where the truncating `as usize` is the
    // floor (and no libm `floorf` call on targets without SSE4.1).
    ((x * inv_scale + l) * 0.5).max(0.0).min(max) as usize
}

/// `thresholds[j − 1]` of [`QamKernel`] for `j = 1..levels`: the smallest f32
/// `x` with `qam_index_by_formula(x) ≥ j`, by bisection over the f32 values in
/// order (the formula is non-decreasing in `x`).
fn qam_thresholds(levels: usize, inv_scale: f32) -> Vec<f32> {
    // Order-preserving map between f32 (not NaN) and i64.
    let key = |x: f32| -> i64 {
        let b = x.to_bits();
        if b >> 31 == 1 {
            -i64::from(b & 0x7fff_ffff)
        } else {
            i64::from(b)
        }
    };
    let value = |k: i64| -> f32 {
        if k < 0 {
            f32::from_bits((-k) as u32 | 0x8000_0000)
        } else {
            f32::from_bits(k as u32)
        }
    };
    let l = levels as f32;
    let max = (levels - 1) as f32;
    let f = |x: f32| qam_index_by_formula(x, inv_scale, l, max);
    (1..levels)
        .map(|j| {
            // f(−∞) = 0 < j ≤ L − 1 = f(+∞): invariant f(lo) < j ≤ f(hi).
            let (mut lo, mut hi) = (key(f32::NEG_INFINITY), key(f32::INFINITY));
            while hi - lo > 1 {
                let mid = lo + (hi - lo) / 2;
                if f(value(mid)) >= j {
                    hi = mid;
                } else {
                    lo = mid;
                }
            }
            value(hi)
        })
        .collect()
}

impl<const T: usize> QamKernel<'_, T> {
    /// Level index of one axis value by the rounding formula.
    #[inline(always)]
    pub(crate) fn index_by_formula(&self, x: f32) -> usize {
        qam_index_by_formula(x, self.inv_scale, self.l, self.max)
    }
    /// Level index of one axis value (thresholds when `T > 0`).
    #[inline(always)]
    fn index(&self, x: f32) -> usize {
        if T == 0 {
            self.index_by_formula(x)
        } else {
            self.thresholds.iter().map(|&t| usize::from(x >= t)).sum()
        }
    }
    /// Label of the nearest point.
    #[inline(always)]
    pub(crate) fn slice(&self, z: Cf32) -> usize {
        self.i_label[self.index(z.re)] | self.q_label[self.index(z.im)]
    }
    /// Label and point of the nearest point (the point read per axis).
    #[inline(always)]
    pub(crate) fn decide(&self, z: Cf32) -> (usize, Cf32) {
        let (ii, qi) = (self.index(z.re), self.index(z.im));
        (
            self.i_label[ii] | self.q_label[qi],
            Cf32::new(self.i_value[ii], self.q_value[qi]),
        )
    }
}

/// PSK kernel: angle, sector, label.
#[derive(Clone, Copy, Debug)]
pub(crate) struct PskKernel<'a> {
    offset_rad: f32,
    sector_label: &'a [usize],
    points: &'a [Cf32],
}

impl PskKernel<'_> {
    /// Label of the nearest point.
    #[inline(always)]
    pub(crate) fn slice(&self, z: Cf32) -> usize {
        let m = self.sector_label.len();
        let step = 2.0 * PI / m as f32;
        let theta = z.im.atan2(z.re) - self.offset_rad;
        let k = (theta / step).round();
        // `as i64` saturates and maps NaN to 0; rem_euclid keeps it in range.
        let k = (k as i64).rem_euclid(m as i64) as usize;
        self.sector_label[k]
    }
    /// Label and point of the nearest point.
    #[inline(always)]
    pub(crate) fn decide(&self, z: Cf32) -> (usize, Cf32) {
        let l = self.slice(z);
        (l, self.points[l])
    }
}

/// A constellation: its points indexed by label and an O(1) slicer.
#[derive(Debug, Clone, PartialEq)]
pub struct Constellation {
    modulation: Modulation,
    psk8_map: Psk8Map,
    points: Vec<Cf32>,
    min_distance: f32,
    slicer: Slicer,
}

/// Per-axis level (in units of the grid step/2, i.e. odd integers) for `k` axis
/// bits, from the TS 38.211 §5.1 nested form: for k = 3,
/// `s0·[4 − s1·(2 − s2)]` where `s = 1 − 2b` and `axis_bits` MSB is the first bit.
fn axis_level(axis_bits: usize, k: usize) -> i32 {
    let s = |j: usize| -> i32 { 1 - 2 * ((axis_bits >> (k - 1 - j)) & 1) as i32 };
    let mut v = 1;
    for j in (1..k).rev() {
        v = (1 << (k - j)) - s(j) * v;
    }
    s(0) * v
}

impl Constellation {
    /// The 3GPP TS 38.211 §5.1 constellation for `m`; 8PSK uses [`Psk8Map::DvbS2`].
    pub fn new(m: Modulation) -> Constellation {
        Self::with_psk8_map(m, Psk8Map::default())
    }

    /// Like [`Constellation::new`], choosing the 8PSK bit map (ignored for other schemes).
    pub fn with_psk8_map(m: Modulation, map: Psk8Map) -> Constellation {
        match m {
            Modulation::Bpsk => {
                let a = std::f32::consts::FRAC_1_SQRT_2;
                Constellation {
                    modulation: m,
                    psk8_map: map,
                    points: vec![Cf32::new(a, a), Cf32::new(-a, -a)],
                    min_distance: 2.0,
                    slicer: Slicer::Bpsk,
                }
            }
            Modulation::Psk8 => Self::psk8(map),
            Modulation::Qpsk | Modulation::Qam16 | Modulation::Qam64 | Modulation::Qam256 => {
                Self::square_qam(m, map)
            }
        }
    }

    fn square_qam(m: Modulation, map: Psk8Map) -> Constellation {
        let bps = m.bits_per_symbol();
        let k = bps / 2; // bits per axis
        let levels = 1usize << k;
        let order = m.order();
        // Mean power of the odd-integer grid: 2·(M − 1)/3 (2, 10, 42, 170).
        let norm = 2.0 * (order as f64 - 1.0) / 3.0;
        let scale = (1.0 / norm.sqrt()) as f32;
        let mut points = Vec::with_capacity(order);
        let mut i_label = vec![0usize; levels];
        let mut q_label = vec![0usize; levels];
        let mut i_value = vec![0f32; levels];
        let mut q_value = vec![0f32; levels];
        for label in 0..order {
            // Split label bits b0 b1 b2 … (MSB first) into I = b0 b2 …, Q = b1 b3 ….
            let (mut ib, mut qb) = (0usize, 0usize);
            for j in 0..k {
                ib = (ib << 1) | ((label >> (bps - 1 - 2 * j)) & 1);
                qb = (qb << 1) | ((label >> (bps - 2 - 2 * j)) & 1);
            }
            let li = axis_level(ib, k);
            let lq = axis_level(qb, k);
            let point = Cf32::new(li as f32 * scale, lq as f32 * scale);
            points.push(point);
            // Level index: level −(L−1) → 0, …, +(L−1) → L−1.
            let idx_i = ((li + levels as i32 - 1) / 2) as usize;
            let idx_q = ((lq + levels as i32 - 1) / 2) as usize;
            i_label[idx_i] = label & Self::i_mask(bps);
            q_label[idx_q] = label & !Self::i_mask(bps) & (order - 1);
            i_value[idx_i] = point.re;
            q_value[idx_q] = point.im;
        }
        Constellation {
            modulation: m,
            psk8_map: map,
            points,
            min_distance: 2.0 * scale,
            slicer: Slicer::SquareQam {
                levels,
                inv_scale: norm.sqrt() as f32,
                i_label,
                q_label,
                i_value,
                q_value,
                thresholds: qam_thresholds(levels, norm.sqrt() as f32),
            },
        }
    }

    /// Mask of the label bits that set I (b0, b2, …, i.e. label bits bps−1, bps−3, …).
    fn i_mask(bps: usize) -> usize {
        (0..bps / 2).fold(0, |acc, j| acc | (1 << (bps - 1 - 2 * j)))
    }

    fn psk8(map: Psk8Map) -> Constellation {
        let angles = map.angles_pi_over_8();
        let points: Vec<Cf32> = angles
            .iter()
            .map(|&a| Cf32::from_polar(1.0, a as f32 * PI / 8.0))
            .collect();
        // All angles share the same parity: even → sectors centred on k·π/4, odd → π/8 + k·π/4.
        let offset_units = angles[0] % 2;
        let mut sector_label = vec![0usize; 8];
        for (label, &a) in angles.iter().enumerate() {
            sector_label[((a - offset_units) / 2) as usize] = label;
        }
        Constellation {
            modulation: Modulation::Psk8,
            psk8_map: map,
            points,
            min_distance: 2.0 * (PI / 8.0).sin(),
            slicer: Slicer::Psk {
                offset_rad: offset_units as f32 * PI / 8.0,
                sector_label,
            },
        }
    }

    /// The modulation scheme.
    pub fn modulation(&self) -> Modulation {
        self.modulation
    }

    /// The 8PSK bit map in use (meaningful only for 8PSK).
    pub fn psk8_map(&self) -> Psk8Map {
        self.psk8_map
    }

    /// Bits per symbol.
    pub fn bits_per_symbol(&self) -> usize {
        self.modulation.bits_per_symbol()
    }

    /// Number of points.
    pub fn order(&self) -> usize {
        self.points.len()
    }

    /// The points, `points()[label]`; unit mean power.
    pub fn points(&self) -> &[Cf32] {
        &self.points
    }

    /// Smallest distance between two distinct points.
    pub fn min_distance(&self) -> f32 {
        self.min_distance
    }

    /// Label of a bit group (`bits.len() == bits_per_symbol()`, first bit MSB; non-zero = 1).
    ///
    /// # Panics
    /// If `bits.len() != bits_per_symbol()` (a programmer error).
    pub fn bits_to_label(&self, bits: &[u8]) -> usize {
        assert_eq!(
            bits.len(),
            self.bits_per_symbol(),
            "bits_to_label: need exactly bits_per_symbol bits"
        );
        bits.iter()
            .fold(0usize, |acc, &b| (acc << 1) | usize::from(b != 0))
    }

    /// Writes the bits of `label` into `out` (first bit = MSB of the label).
    ///
    /// # Panics
    /// If `out.len() != bits_per_symbol()` or `label >= order()` (programmer errors).
    pub fn label_to_bits(&self, label: usize, out: &mut [u8]) {
        let bps = self.bits_per_symbol();
        assert_eq!(
            out.len(),
            bps,
            "label_to_bits: need exactly bits_per_symbol bits"
        );
        assert!(label < self.order(), "label_to_bits: label out of range");
        for (j, o) in out.iter_mut().enumerate() {
            *o = ((label >> (bps - 1 - j)) & 1) as u8;
        }
    }

    /// Maps a bit stream to symbols: `out[k]` is the point of bits
    /// `bits[k·bps .. (k+1)·bps]`.
    ///
    /// # Panics
    /// If `bits.len() != out.len() * bits_per_symbol()` (a programmer error).
    pub fn map_bits(&self, bits: &[u8], out: &mut [Cf32]) {
        let bps = self.bits_per_symbol();
        assert_eq!(
            bits.len(),
            out.len() * bps,
            "map_bits: bits.len() must equal out.len() * bits_per_symbol"
        );
        for (o, group) in out.iter_mut().zip(bits.chunks_exact(bps)) {
            let label = group
                .iter()
                .fold(0usize, |acc, &b| (acc << 1) | usize::from(b != 0));
            *o = self.points[label];
        }
    }

    /// Maps labels to points.
    ///
    /// # Panics
    /// If the lengths differ or a label is `>= order()` (programmer errors).
    pub fn map_labels(&self, labels: &[usize], out: &mut [Cf32]) {
        assert_eq!(labels.len(), out.len(), "map_labels: length mismatch");
        for (o, &l) in out.iter_mut().zip(labels) {
            *o = self.points[l];
        }
    }

    /// The slicer with the scheme chosen once (see [`SliceKernel`]).
    #[inline]
    pub(crate) fn kernel(&self) -> SliceKernel<'_> {
        match &self.slicer {
            Slicer::Bpsk => SliceKernel::Bpsk(BpskKernel {
                points: &self.points,
            }),
            Slicer::SquareQam {
                levels,
                inv_scale,
                i_label,
                q_label,
                i_value,
                q_value,
                thresholds,
            } => {
                fn make<'a, const T: usize>(
                    levels: usize,
                    inv_scale: f32,
                    thresholds: [f32; T],
                    tables: [&'a [usize]; 2],
                    values: [&'a [f32]; 2],
                ) -> QamKernel<'a, T> {
                    QamKernel {
                        l: levels as f32,
                        max: (levels - 1) as f32,
                        inv_scale,
                        thresholds,
                        i_label: tables[0],
                        q_label: tables[1],
                        i_value: values[0],
                        q_value: values[1],
                    }
                }
                let (n, s) = (*levels, *inv_scale);
                let t = [&i_label[..], &q_label[..]];
                let v = [&i_value[..], &q_value[..]];
                let th = &thresholds[..];
                if let Ok(a) = <[f32; 1]>::try_from(th) {
                    SliceKernel::Qam1(make(n, s, a, t, v))
                } else if let Ok(a) = <[f32; 3]>::try_from(th) {
                    SliceKernel::Qam3(make(n, s, a, t, v))
                } else if let Ok(a) = <[f32; 7]>::try_from(th) {
                    SliceKernel::Qam7(make(n, s, a, t, v))
                } else {
                    SliceKernel::QamFormula(make(n, s, [], t, v))
                }
            }
            Slicer::Psk {
                offset_rad,
                sector_label,
            } => SliceKernel::Psk(PskKernel {
                offset_rad: *offset_rad,
                sector_label,
                points: &self.points,
            }),
        }
    }

    /// Label of the point nearest to `z` (Euclidean), O(1).
    #[inline]
    pub fn slice(&self, z: Cf32) -> usize {
        match self.kernel() {
            SliceKernel::Bpsk(k) => k.slice(z),
            SliceKernel::Qam1(k) => k.slice(z),
            SliceKernel::Qam3(k) => k.slice(z),
            SliceKernel::Qam7(k) => k.slice(z),
            SliceKernel::QamFormula(k) => k.slice(z),
            SliceKernel::Psk(k) => k.slice(z),
        }
    }

    /// The point nearest to `z`.
    #[inline]
    pub fn decide(&self, z: Cf32) -> Cf32 {
        self.points[self.slice(z)]
    }

    /// Slices a block: `labels[k] = slice(z[k])`.
    ///
    /// # Panics
    /// If the lengths differ (a programmer error).
    pub fn slice_into(&self, z: &[Cf32], labels: &mut [usize]) {
        assert_eq!(z.len(), labels.len(), "slice_into: length mismatch");
        // The scheme is chosen once for the block.
        macro_rules! each {
            ($k:expr) => {
                for (l, &v) in labels.iter_mut().zip(z) {
                    *l = $k.slice(v);
                }
            };
        }
        match self.kernel() {
            SliceKernel::Bpsk(k) => each!(k),
            SliceKernel::Qam1(k) => each!(k),
            SliceKernel::Qam3(k) => each!(k),
            SliceKernel::Qam7(k) => each!(k),
            SliceKernel::QamFormula(k) => each!(k),
            SliceKernel::Psk(k) => each!(k),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    fn bits_of(s: &str) -> Vec<u8> {
        s.bytes().map(|c| c - b'0').collect()
    }

    fn assert_point(c: &Constellation, bits: &str, re: f64, im: f64, norm: f64, source: &str) {
        let b = bits_of(bits);
        let mut out = [Cf32::new(0.0, 0.0)];
        c.map_bits(&b, &mut out);
        let want = Cf32::new((re / norm.sqrt()) as f32, (im / norm.sqrt()) as f32);
        // Tolerance 1e-6: f32 rounding of values ≤ 1.2 in magnitude.
        assert!(
            (out[0] - want).norm() < 1e-6,
            "{:?} bits {bits}: got {} want {} ({source})",
            c.modulation(),
            out[0],
            want
        );
    }

    #[test]
    fn bpsk_and_qpsk_match_ts36211_tables() {
        // Source: 3GPP TS 36.211 §7.1.1 Table 7.1.1-1 and §7.1.2 Table 7.1.2-1
        // (via shared/REFERENCE-VALUES.md §1.2), values ×√2.
        let src = "TS 36.211 Tables 7.1.1-1/7.1.2-1";
        let b = Constellation::new(Modulation::Bpsk);
        assert_point(&b, "0", 1.0, 1.0, 2.0, src);
        assert_point(&b, "1", -1.0, -1.0, 2.0, src);
        let q = Constellation::new(Modulation::Qpsk);
        for (bits, i, qq) in [
            ("00", 1.0, 1.0),
            ("01", 1.0, -1.0),
            ("10", -1.0, 1.0),
            ("11", -1.0, -1.0),
        ] {
            assert_point(&q, bits, i, qq, 2.0, src);
        }
    }

    #[test]
    fn gray_16qam_matches_every_row_of_ts36211_table() {
        // Source: 3GPP TS 36.211 §7.1.3, Table 7.1.3-1, all 16 rows, values ×√10
        // (via shared/REFERENCE-VALUES.md §1.2).
        let rows = [
            ("0000", 1.0, 1.0),
            ("0001", 1.0, 3.0),
            ("0010", 3.0, 1.0),
            ("0011", 3.0, 3.0),
            ("0100", 1.0, -1.0),
            ("0101", 1.0, -3.0),
            ("0110", 3.0, -1.0),
            ("0111", 3.0, -3.0),
            ("1000", -1.0, 1.0),
            ("1001", -1.0, 3.0),
            ("1010", -3.0, 1.0),
            ("1011", -3.0, 3.0),
            ("1100", -1.0, -1.0),
            ("1101", -1.0, -3.0),
            ("1110", -3.0, -1.0),
            ("1111", -3.0, -3.0),
        ];
        let c = Constellation::new(Modulation::Qam16);
        for (bits, i, q) in rows {
            assert_point(&c, bits, i, q, 10.0, "TS 36.211 Table 7.1.3-1");
        }
    }

    #[test]
    fn qam64_and_qam256_match_ts36211_spot_rows() {
        // Source: 3GPP TS 36.211 §7.1.4 Table 7.1.4-1 and §7.1.5 Table 7.1.5-1 spot rows
        // (via shared/REFERENCE-VALUES.md §1.2).
        let c64 = Constellation::new(Modulation::Qam64);
        for (bits, i, q) in [
            ("000000", 3.0, 3.0),
            ("000001", 3.0, 1.0),
            ("000010", 1.0, 3.0),
            ("000011", 1.0, 1.0),
            ("001100", 5.0, 5.0),
            ("010101", 3.0, -7.0),
            ("101010", -7.0, 3.0),
            ("111111", -7.0, -7.0),
        ] {
            assert_point(&c64, bits, i, q, 42.0, "TS 36.211 Table 7.1.4-1");
        }
        let c256 = Constellation::new(Modulation::Qam256);
        for (bits, i, q) in [
            ("00000000", 5.0, 5.0),
            ("00000001", 5.0, 7.0),
            ("00001111", 1.0, 1.0),
            ("00110011", 9.0, 9.0),
            ("01010101", 5.0, -15.0),
            ("01011010", 1.0, -11.0),
            ("10100101", -11.0, 1.0),
            ("10101010", -15.0, 5.0),
            ("11000011", -7.0, -7.0),
            ("11110000", -11.0, -11.0),
            ("11111111", -15.0, -15.0),
        ] {
            assert_point(&c256, bits, i, q, 170.0, "TS 36.211 Table 7.1.5-1");
        }
    }

    #[test]
    fn qam_axis_levels_match_the_per_axis_tables() {
        // Source: REFERENCE-VALUES.md §1.2 per-axis tables (computed there from TS 38.211 §5.1).
        let t64 = [3, 1, 5, 7, -3, -1, -5, -7];
        for (bits, &want) in t64.iter().enumerate() {
            assert_eq!(axis_level(bits, 3), want, "64QAM axis bits {bits:03b}");
        }
        let t256 = [5, 7, 3, 1, 11, 9, 13, 15, -5, -7, -3, -1, -11, -9, -13, -15];
        for (bits, &want) in t256.iter().enumerate() {
            assert_eq!(axis_level(bits, 4), want, "256QAM axis bits {bits:04b}");
        }
    }

    /// Direct restatement of the TS 38.211 §5.1 closed form (independent of `axis_level`).
    fn ts38211_closed_form(m: Modulation, b: &[u8]) -> (f64, f64) {
        let s = |k: usize| 1.0 - 2.0 * b[k] as f64;
        match m {
            Modulation::Bpsk => (s(0) / 2f64.sqrt(), s(0) / 2f64.sqrt()),
            Modulation::Qpsk => (s(0) / 2f64.sqrt(), s(1) / 2f64.sqrt()),
            Modulation::Qam16 => {
                let n = 10f64.sqrt();
                (s(0) * (2.0 - s(2)) / n, s(1) * (2.0 - s(3)) / n)
            }
            Modulation::Qam64 => {
                let n = 42f64.sqrt();
                (
                    s(0) * (4.0 - s(2) * (2.0 - s(4))) / n,
                    s(1) * (4.0 - s(3) * (2.0 - s(5))) / n,
                )
            }
            Modulation::Qam256 => {
                let n = 170f64.sqrt();
                (
                    s(0) * (8.0 - s(2) * (4.0 - s(4) * (2.0 - s(6)))) / n,
                    s(1) * (8.0 - s(3) * (4.0 - s(5) * (2.0 - s(7)))) / n,
                )
            }
            Modulation::Psk8 => unreachable!("8PSK is not in TS 38.211 §5.1"),
        }
    }

    #[test]
    fn every_label_matches_the_ts38211_closed_form() {
        // Source: 3GPP TS 38.211 §5.1.2–5.1.6 (via shared/REFERENCE-VALUES.md §1.1).
        for m in [
            Modulation::Bpsk,
            Modulation::Qpsk,
            Modulation::Qam16,
            Modulation::Qam64,
            Modulation::Qam256,
        ] {
            let c = Constellation::new(m);
            let mut bits = vec![0u8; c.bits_per_symbol()];
            for label in 0..c.order() {
                c.label_to_bits(label, &mut bits);
                let (re, im) = ts38211_closed_form(m, &bits);
                let p = c.points()[label];
                assert!(
                    (p.re as f64 - re).abs() < 1e-6 && (p.im as f64 - im).abs() < 1e-6,
                    "{m} label {label}"
                );
            }
        }
    }

    #[test]
    fn psk8_maps_match_dvbs2_and_ts25223_tables() {
        use std::f64::consts::PI as PI64;
        // Source: ETSI EN 302 307-1 Fig. 10 (DVB-S2) and 3GPP TS 25.223 §5A.2.2
        // (via shared/REFERENCE-VALUES.md §1.3), angles in radians, unit radius.
        let dvb = [
            ("000", PI64 / 4.0),
            ("001", 0.0),
            ("010", PI64),
            ("011", 5.0 * PI64 / 4.0),
            ("100", PI64 / 2.0),
            ("101", 7.0 * PI64 / 4.0),
            ("110", 3.0 * PI64 / 4.0),
            ("111", 3.0 * PI64 / 2.0),
        ];
        let ts = [
            ("000", 11.0 * PI64 / 8.0),
            ("001", 9.0 * PI64 / 8.0),
            ("010", 5.0 * PI64 / 8.0),
            ("011", 7.0 * PI64 / 8.0),
            ("100", 13.0 * PI64 / 8.0),
            ("101", 15.0 * PI64 / 8.0),
            ("110", 3.0 * PI64 / 8.0),
            ("111", PI64 / 8.0),
        ];
        for (map, table, src) in [
            (Psk8Map::DvbS2, dvb, "EN 302 307-1 Fig. 10"),
            (Psk8Map::Ts25223, ts, "TS 25.223 §5A.2.2"),
        ] {
            let c = Constellation::with_psk8_map(Modulation::Psk8, map);
            for (bits, ang) in table {
                assert_point(&c, bits, ang.cos(), ang.sin(), 1.0, src);
            }
        }
        assert_eq!(
            Constellation::new(Modulation::Psk8).psk8_map(),
            Psk8Map::DvbS2
        );
    }

    fn all_constellations() -> Vec<Constellation> {
        let mut v: Vec<Constellation> = Modulation::ALL
            .into_iter()
            .map(Constellation::new)
            .collect();
        v.push(Constellation::with_psk8_map(
            Modulation::Psk8,
            Psk8Map::Ts25223,
        ));
        v
    }

    #[test]
    fn every_nearest_neighbour_pair_differs_in_one_bit() {
        // Source: Gray property, REFERENCE-VALUES.md §1.1/§1.3 ("computed" there); checked
        // here by brute force over all point pairs at the minimum distance.
        for c in all_constellations() {
            let p = c.points();
            let mut pairs = 0;
            for a in 0..p.len() {
                for b in a + 1..p.len() {
                    let d = (p[a] - p[b]).norm();
                    assert!(d > c.min_distance() * (1.0 - 1e-5), "{:?}", c.modulation());
                    if d < c.min_distance() * (1.0 + 1e-5) {
                        pairs += 1;
                        assert_eq!((a ^ b).count_ones(), 1, "{:?} {a} {b}", c.modulation());
                    }
                }
            }
            assert!(
                pairs > 0,
                "{:?}: no nearest-neighbour pairs",
                c.modulation()
            );
        }
    }

    #[test]
    fn constellations_have_unit_mean_power_and_distinct_points() {
        // Source: TS 38.211 §5.1 normalisation 1/√2, 1/√10, 1/√42, 1/√170 gives Es = 1
        // (REFERENCE-VALUES.md §1.1); 8PSK unit radius (§1.3).
        for c in all_constellations() {
            let mean: f64 =
                c.points().iter().map(|p| p.norm_sqr() as f64).sum::<f64>() / c.order() as f64;
            assert!((mean - 1.0).abs() < 1e-6, "{:?}: {mean}", c.modulation());
            assert_eq!(c.order(), c.modulation().order());
        }
        // Minimum distance 2/√norm (REFERENCE-VALUES.md §1.1, computed).
        for (m, norm) in [
            (Modulation::Qpsk, 2.0f32),
            (Modulation::Qam16, 10.0),
            (Modulation::Qam64, 42.0),
            (Modulation::Qam256, 170.0),
        ] {
            let d = Constellation::new(m).min_distance();
            assert!((d - 2.0 / norm.sqrt()).abs() < 1e-6, "{m}");
        }
    }

    fn brute_force_nearest(points: &[Cf32], z: Cf32) -> (usize, f64) {
        let zd = (z.re as f64, z.im as f64);
        let mut best = (0, f64::INFINITY);
        for (i, p) in points.iter().enumerate() {
            let d = (p.re as f64 - zd.0).powi(2) + (p.im as f64 - zd.1).powi(2);
            if d < best.1 {
                best = (i, d);
            }
        }
        best
    }

    #[test]
    fn slicer_agrees_with_brute_force_search_on_random_inputs() {
        // Reference: exhaustive nearest-point search in f64 (obviously correct).
        // Tolerance: where labels differ the two squared distances must agree to 1e-5
        // (relative) — an f32 rounding tie right on a decision boundary.
        let mut rng = ChaCha8Rng::seed_from_u64(0x5eed_0001);
        for c in all_constellations() {
            for n in 0..20_000 {
                // Mostly inside, some far outside (up to ±50), some exactly on points.
                let r = if n % 10 == 0 { 50.0 } else { 1.6 };
                let z = match n % 97 {
                    0 => c.points()[n % c.order()],
                    _ => Cf32::new(rng.gen_range(-r..r), rng.gen_range(-r..r)),
                };
                let got = c.slice(z);
                let (want, dwant) = brute_force_nearest(c.points(), z);
                if got != want {
                    let p = c.points()[got];
                    let dgot =
                        (p.re as f64 - z.re as f64).powi(2) + (p.im as f64 - z.im as f64).powi(2);
                    assert!(
                        (dgot - dwant).abs() <= 1e-5 * dwant.max(1e-12),
                        "{:?} z={z}: slicer {got} brute {want}",
                        c.modulation()
                    );
                }
                assert_eq!(c.decide(z), c.points()[got]);
            }
        }
    }

    #[test]
    fn slicer_returns_a_valid_label_for_non_finite_input() {
        for c in all_constellations() {
            for z in [
                Cf32::new(f32::NAN, 0.0),
                Cf32::new(0.0, f32::NAN),
                Cf32::new(f32::INFINITY, f32::NEG_INFINITY),
                Cf32::new(f32::MAX, -f32::MAX),
                Cf32::new(0.0, 0.0),
            ] {
                assert!(c.slice(z) < c.order());
            }
        }
    }

    #[test]
    fn kernel_decide_gives_the_slice_label_and_its_point_for_every_input() {
        // Reference: `slice` (checked against brute force above) and `points()[label]`;
        // the per-axis point tables must reproduce the point exactly (bit for bit),
        // including for non-finite and far-out inputs. Source: common practice
        // (fast path against the plain path).
        let mut rng = ChaCha8Rng::seed_from_u64(0x5eed_0002);
        let specials = [
            Cf32::new(f32::NAN, 0.0),
            Cf32::new(0.0, f32::NAN),
            Cf32::new(f32::INFINITY, f32::NEG_INFINITY),
            Cf32::new(f32::MAX, -f32::MAX),
            Cf32::new(0.0, 0.0),
            Cf32::new(-0.0, 0.0),
        ];
        for c in all_constellations() {
            let zs = specials
                .iter()
                .copied()
                .chain(c.points().iter().copied())
                .chain((0..20_000).map(|n| {
                    let r = if n % 10 == 0 { 50.0 } else { 1.6 };
                    Cf32::new(rng.gen_range(-r..r), rng.gen_range(-r..r))
                }));
            for z in zs {
                let (label, point) = match c.kernel() {
                    SliceKernel::Bpsk(k) => k.decide(z),
                    SliceKernel::Qam1(k) => k.decide(z),
                    SliceKernel::Qam3(k) => k.decide(z),
                    SliceKernel::Qam7(k) => k.decide(z),
                    SliceKernel::QamFormula(k) => k.decide(z),
                    SliceKernel::Psk(k) => k.decide(z),
                };
                assert_eq!(label, c.slice(z), "{:?} z={z}", c.modulation());
                let want = c.points()[label];
                assert_eq!(
                    point.re.to_bits(),
                    want.re.to_bits(),
                    "{:?}",
                    c.modulation()
                );
                assert_eq!(
                    point.im.to_bits(),
                    want.im.to_bits(),
                    "{:?}",
                    c.modulation()
                );
            }
        }
    }

    #[test]
    fn qam_threshold_count_gives_the_formula_level_index_for_every_input() {
        // Reference: the rounding formula (`index_by_formula`, the slicer's
        // definition). Exact equality, checked on both sides of every threshold
        // (the neighbouring f32 values), at specials and on a random sweep.
        // Source: common practice (fast path against the plain formula).
        fn check<const T: usize>(k: &QamKernel<'_, T>, name: &str) {
            let mut rng = ChaCha8Rng::seed_from_u64(0x5eed_0003);
            let mut xs = vec![
                f32::NAN,
                -f32::NAN,
                f32::INFINITY,
                f32::NEG_INFINITY,
                f32::MAX,
                -f32::MAX,
                0.0,
                -0.0,
                f32::MIN_POSITIVE,
                -f32::MIN_POSITIVE,
            ];
            for &t in &k.thresholds {
                let up = f32::from_bits(if t >= 0.0 {
                    t.to_bits() + 1
                } else {
                    t.to_bits() - 1
                });
                let down = f32::from_bits(if t > 0.0 {
                    t.to_bits() - 1
                } else {
                    t.to_bits() + 1
                });
                xs.extend([t, up, down]);
            }
            xs.extend((0..100_000).map(|n| {
                let r = if n % 10 == 0 { 100.0 } else { 1.6 };
                rng.gen_range(-r..r)
            }));
            for x in xs {
                assert_eq!(k.index(x), k.index_by_formula(x), "{name} x={x:e}");
            }
        }
        for c in all_constellations() {
            let name = c.modulation().name();
            match c.kernel() {
                SliceKernel::Qam1(k) => check(&k, name),
                SliceKernel::Qam3(k) => check(&k, name),
                SliceKernel::Qam7(k) => check(&k, name),
                SliceKernel::QamFormula(k) => check(&k, name),
                SliceKernel::Bpsk(_) | SliceKernel::Psk(_) => {}
            }
        }
        // Every square QAM but 256-QAM takes the threshold path.
        let kinds: Vec<bool> = [Modulation::Qpsk, Modulation::Qam16, Modulation::Qam64]
            .into_iter()
            .map(|m| matches!(Constellation::new(m).kernel(), SliceKernel::QamFormula(_)))
            .collect();
        assert_eq!(kinds, [false, false, false]);
    }

    #[test]
    fn label_bits_label_round_trip_and_points_slice_to_themselves() {
        for c in all_constellations() {
            let mut bits = vec![0u8; c.bits_per_symbol()];
            for label in 0..c.order() {
                c.label_to_bits(label, &mut bits);
                assert_eq!(c.bits_to_label(&bits), label);
                let mut p = [Cf32::new(0.0, 0.0)];
                c.map_bits(&bits, &mut p);
                assert_eq!(p[0], c.points()[label]);
                assert_eq!(c.slice(p[0]), label, "{:?}", c.modulation());
            }
        }
    }

    #[test]
    fn modulation_names_round_trip_through_text_and_serde() {
        for m in Modulation::ALL {
            assert_eq!(m.to_string().parse::<Modulation>().unwrap(), m);
            let j = serde_json::to_string(&m).unwrap();
            assert_eq!(j, format!("\"{}\"", m.name()));
            assert_eq!(serde_json::from_str::<Modulation>(&j).unwrap(), m);
        }
        assert_eq!("16QAM".parse::<Modulation>().unwrap(), Modulation::Qam16);
        let e = "32qam".parse::<Modulation>().unwrap_err();
        assert!(matches!(e, SignalError::UnknownModulation { .. }));
        assert!(e.to_string().contains("256qam"));
        for p in [Psk8Map::DvbS2, Psk8Map::Ts25223] {
            assert_eq!(p.to_string().parse::<Psk8Map>().unwrap(), p);
        }
        assert!("edge".parse::<Psk8Map>().is_err());
    }

    #[test]
    fn map_bits_maps_a_stream_group_by_group() {
        let c = Constellation::new(Modulation::Qam16);
        let bits = bits_of("00001111");
        let mut out = [Cf32::new(0.0, 0.0); 2];
        c.map_bits(&bits, &mut out);
        assert_eq!(out, [c.points()[0], c.points()[15]]);
        let mut labels = [0usize; 2];
        c.slice_into(&out, &mut labels);
        assert_eq!(labels, [0, 15]);
    }

    #[test]
    fn awgn_symbol_error_rate_is_inside_the_binomial_interval_of_the_textbook_value() {
        // Source: Proakis, Digital Communications (4th ed. §5.2) exact SER formulas, values
        // computed in REFERENCE-VALUES.md §7 (BPSK Q(√(2Es/N0)) for the diagonal BPSK,
        // QPSK/QAM exact, 8PSK Craig integral). Complex noise variance 1/(Es/N0).
        // Pass band: exact two-sided 99 % binomial interval for 2e5 symbols (seeded, so the
        // outcome is deterministic).
        let cases: [(Modulation, f64, f64); 14] = [
            (Modulation::Bpsk, 0.0, 7.864960e-02),
            (Modulation::Bpsk, 5.0, 5.953867e-03),
            (Modulation::Qpsk, 5.0, 7.393827e-02),
            (Modulation::Qpsk, 10.0, 1.564790e-03),
            (Modulation::Psk8, 10.0, 8.700476e-02),
            (Modulation::Psk8, 15.0, 2.339450e-03),
            (Modulation::Qam16, 10.0, 2.220309e-01),
            (Modulation::Qam16, 15.0, 1.778184e-02),
            (Modulation::Qam64, 15.0, 3.476243e-01),
            (Modulation::Qam64, 20.0, 5.027041e-02),
            (Modulation::Qam64, 25.0, 1.823972e-04),
            (Modulation::Qam256, 20.0, 4.534295e-01),
            (Modulation::Qam256, 25.0, 9.824890e-02),
            (Modulation::Qam16, 5.0, 5.373851e-01),
        ];
        let n = 200_000usize;
        for (ci, (m, esn0_db, ser)) in cases.into_iter().enumerate() {
            let c = Constellation::new(m);
            let mut rng = ChaCha8Rng::seed_from_u64(1000 + ci as u64);
            let labels: Vec<usize> = (0..n).map(|_| rng.gen_range(0..c.order())).collect();
            let mut z = vec![Cf32::new(0.0, 0.0); n];
            c.map_labels(&labels, &mut z);
            let var = 10f64.powf(-esn0_db / 10.0);
            crate::testutil::add_awgn(&mut z, var, 2000 + ci as u64);
            let errors = labels
                .iter()
                .zip(&z)
                .filter(|(&l, &v)| c.slice(v) != l)
                .count() as u64;
            let (lo, hi) = crate::testutil::binomial_interval(n as u64, ser, 0.99);
            eprintln!(
                "{m} Es/N0 {esn0_db} dB: measured SER {:.4e}, textbook {ser:.4e}, 99 % band {lo}..={hi}",
                errors as f64 / n as f64
            );
            assert!(
                (lo..=hi).contains(&errors),
                "{m} at {esn0_db} dB: {errors} errors, expected {lo}..={hi} (SER {ser})"
            );
        }
    }

    #[test]
    fn awgn_bit_error_rate_matches_the_exact_gray_labelling_value() {
        // Source: REFERENCE-VALUES.md §7 "Exact BER, 3GPP Gray labelling" (computed there by
        // enumerating the per-axis PAM decision regions) and QPSK BER Q(√(Es/N0)) (Proakis).
        // This checks the labels, not just the decision regions. Bits within a symbol are not
        // independent, so the band is mean ± 3.29·sd/√n of the per-symbol bit-error count
        // (99.9 % normal interval; n = 2e5 symbols makes the CLT accurate).
        let cases: [(Modulation, f64, f64); 8] = [
            (Modulation::Qpsk, 5.0, 3.767899e-02),
            (Modulation::Qpsk, 10.0, 7.827011e-04),
            (Modulation::Qam16, 10.0, 5.899273e-02),
            (Modulation::Qam16, 15.0, 4.465400e-03),
            (Modulation::Qam64, 15.0, 6.415873e-02),
            (Modulation::Qam64, 20.0, 8.486430e-03),
            (Modulation::Qam256, 20.0, 6.542295e-02),
            (Modulation::Qam256, 25.0, 1.259856e-02),
        ];
        let n = 200_000usize;
        for (ci, (m, esn0_db, ber)) in cases.into_iter().enumerate() {
            let c = Constellation::new(m);
            let bps = c.bits_per_symbol();
            let mut rng = ChaCha8Rng::seed_from_u64(3000 + ci as u64);
            let labels: Vec<usize> = (0..n).map(|_| rng.gen_range(0..c.order())).collect();
            let mut z = vec![Cf32::new(0.0, 0.0); n];
            c.map_labels(&labels, &mut z);
            crate::testutil::add_awgn(&mut z, 10f64.powf(-esn0_db / 10.0), 4000 + ci as u64);
            let (mut sum, mut sum_sq) = (0.0f64, 0.0f64);
            for (&l, &v) in labels.iter().zip(&z) {
                let e = (c.slice(v) ^ l).count_ones() as f64;
                sum += e;
                sum_sq += e * e;
            }
            let mean = sum / n as f64;
            let sd = (sum_sq / n as f64 - mean * mean).sqrt();
            let measured = mean / bps as f64;
            let half = 3.29 * sd / (n as f64).sqrt() / bps as f64;
            eprintln!(
                "{m} Es/N0 {esn0_db} dB: measured BER {measured:.4e}, exact {ber:.4e} ± {half:.1e}"
            );
            assert!(
                (measured - ber).abs() <= half,
                "{m} at {esn0_db} dB: BER {measured:.4e} vs {ber:.4e} (±{half:.2e})"
            );
        }
    }
}
