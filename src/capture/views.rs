//! Capture views: the data behind the spectrum and power-over-time plots, as
//! plain serialisable values that `info --json` prints and the analysis report
//! carries (plots are drawn from these, never from the samples).
//!
//! Takes in: [`super::stats::CaptureStats`] (a Welch PSD and a
//! power envelope computed in the same bounded-memory pass as the other
//! figures). Gives out: [`CaptureViews`] — a decimated PSD in dBFS/Hz, the
//! spurs found in it, and a decimated min/mean/max power envelope.
//!
//! **Density scaling.** The Welch bins `P[k]` hold power per bin (their sum is
//! the mean power; see [`stats`](super::stats)). The power spectral density is
//! `P[k]/Δf` with `Δf = fs/N` the bin spacing, which is the "density" scaling
//! `|X|²/(fs·Σw²)` (the normalisation by `Σw²` already accounts for the window's
//! equivalent noise bandwidth). So white noise of power σ² reads `σ²/fs`
//! dBFS/Hz, while a tone of power A² reads `A²/(ENBW·Δf)` at its peak, where the
//! periodic Hann window's ENBW is 1.5 bins (Harris, "On the use of windows for
//! harmonic analysis with the discrete Fourier transform", Proc. IEEE 66(1),
//! 1978, Table 1). Without a sample rate every "Hz" reads "cycles per sample".
//!
//! **Spurs**: a bin is a spur when it is a local maximum, stands at least
//! [`SPUR_MARGIN_DB`] above the local floor (the median of the bins 4 to 32
//! bins away on both sides), and is narrow (the bins 3 away on both sides are
//! at least 6 dB below it, as for a tone seen through the Hann window's 4-bin
//! main lobe). Its power is the sum of the 5 bins around the peak less the
//! floor under them. At most [`MAX_SPURS`] are listed (the highest above their
//! floor), in frequency order. The rule is this project's own (common practice
//! for a median-based floor).
//!
//! **Power envelope.** The capture is cut into blocks of `block_samples`
//! samples (a power of two, at most 256, chosen so that there are at least two
//! blocks per point); each block's mean power is one short-term power reading.
//! Consecutive blocks are grouped into at most `envelope_points` points; each
//! point keeps the mean power of its samples and the smallest and largest block
//! power. Memory is one value per point, whatever the capture length.

use serde::{Deserialize, Serialize};

use super::stats::{CaptureStats, WelchPsd};

/// Height above the local floor that makes a spur, dB.
pub const SPUR_MARGIN_DB: f64 = 10.0;
/// Most spurs listed.
pub const MAX_SPURS: usize = 32;
/// Most points of the decimated PSD.
pub const PSD_POINTS: usize = 512;
/// The level written for zero power (JSON has no −∞), dB.
pub const ZERO_POWER_DB: f64 = -300.0;

fn db(p: f64) -> f64 {
    if p > 0.0 && p.is_finite() {
        (10.0 * p.log10()).max(ZERO_POWER_DB)
    } else {
        ZERO_POWER_DB
    }
}

/// How the capture is cut into envelope blocks and points.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct EnvelopeGrid {
    /// Samples per block (the last block may be shorter).
    pub block_samples: usize,
    /// Blocks in the capture.
    pub blocks: usize,
    /// Points (groups of consecutive blocks).
    pub points: usize,
}

impl EnvelopeGrid {
    /// The grid for a capture of `len` samples and at most `points` points.
    pub fn new(len: usize, points: usize) -> EnvelopeGrid {
        let points = points.max(1);
        let per = (len / (2 * points)).max(1);
        let block = (1usize << (usize::BITS - 1 - per.leading_zeros())).min(256);
        let blocks = len.div_ceil(block);
        EnvelopeGrid {
            block_samples: block,
            blocks,
            points: points.min(blocks),
        }
    }

    /// The point that block `j` belongs to.
    pub fn point_of(&self, j: usize) -> usize {
        (j as u128 * self.points as u128 / self.blocks.max(1) as u128) as usize
    }

    /// First block of point `b`.
    pub fn first_block(&self, b: usize) -> usize {
        (b as u128 * self.blocks as u128).div_ceil(self.points.max(1) as u128) as usize
    }

    /// Partial points of the consecutive blocks `first_block ..` whose mean
    /// powers are `powers`, in a capture of `len` samples.
    pub(crate) fn buckets_of(
        &self,
        first_block: usize,
        powers: &[f64],
        len: usize,
    ) -> Vec<EnvelopeBucket> {
        let mut out: Vec<EnvelopeBucket> = Vec::new();
        for (i, &p) in powers.iter().enumerate() {
            let j = first_block + i;
            let b = self.point_of(j);
            let n = self
                .block_samples
                .min(len.saturating_sub(j * self.block_samples)) as u64;
            match out.last_mut() {
                Some(last) if last.point == b => last.add(p, n),
                _ => {
                    let mut e = EnvelopeBucket::empty(b);
                    e.add(p, n);
                    out.push(e);
                }
            }
        }
        out
    }
}

/// One point of the envelope while it is being summed.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EnvelopeBucket {
    /// Point index.
    pub point: usize,
    /// Samples summed.
    pub samples: u64,
    /// Σ block power × block samples.
    pub energy: f64,
    /// Smallest block power.
    pub min: f64,
    /// Largest block power.
    pub max: f64,
}

impl EnvelopeBucket {
    fn empty(point: usize) -> EnvelopeBucket {
        EnvelopeBucket {
            point,
            samples: 0,
            energy: 0.0,
            min: f64::INFINITY,
            max: f64::NEG_INFINITY,
        }
    }

    fn add(&mut self, p: f64, n: u64) {
        self.samples += n;
        self.energy += p * n as f64;
        self.min = self.min.min(p);
        self.max = self.max.max(p);
    }
}

/// The power-over-time envelope of a whole capture (linear powers).
#[derive(Debug, Clone, PartialEq)]
pub struct PowerEnvelope {
    /// The block and point layout.
    pub grid: EnvelopeGrid,
    /// One entry per point, in time order.
    pub buckets: Vec<EnvelopeBucket>,
}

impl PowerEnvelope {
    pub(crate) fn empty(grid: &EnvelopeGrid) -> PowerEnvelope {
        PowerEnvelope {
            grid: *grid,
            buckets: (0..grid.points).map(EnvelopeBucket::empty).collect(),
        }
    }

    /// Add partial points (in chunk order, so the sums are deterministic).
    pub(crate) fn merge(&mut self, parts: &[EnvelopeBucket]) {
        for p in parts {
            if let Some(b) = self.buckets.get_mut(p.point) {
                b.samples += p.samples;
                b.energy += p.energy;
                b.min = b.min.min(p.min);
                b.max = b.max.max(p.max);
            }
        }
    }
}

/// Everything the capture plots are drawn from (`info --json` key `views`,
/// report key `capture`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct CaptureViews {
    /// Sample rate, Hz; `null` when unknown (then every frequency is in
    /// cycles per sample and every time in samples).
    pub sample_rate_hz: Option<f64>,
    /// Centre frequency, Hz; `null` when unknown. PSD frequencies are offsets from it.
    pub center_freq_hz: Option<f64>,
    /// The decimated Welch PSD; `null` below 2 samples.
    pub psd: Option<PsdView>,
    /// Spurs found in the full-resolution PSD, in frequency order.
    pub spurs: Vec<Spur>,
    /// The height above the local floor that makes a spur, dB.
    pub spur_margin_db: f64,
    /// The power-over-time envelope.
    pub power: PowerView,
}

/// A decimated Welch PSD.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct PsdView {
    /// Welch segment length N (bins of the full-resolution PSD).
    pub fft_len: usize,
    /// Segments averaged.
    pub segments_averaged: usize,
    /// Bin spacing `fs/N`, Hz (cycles/sample without a rate).
    pub resolution: f64,
    /// Equivalent noise bandwidth of the window, Hz (1.5 bins for Hann).
    pub enbw: f64,
    /// `"Hz"` or `"cycles/sample"`: the unit of `resolution`, `enbw`, the
    /// point frequencies and the occupied-bandwidth edges.
    pub frequency_unit: String,
    /// `"dBFS/Hz"` or `"dBFS/(cycle/sample)"`.
    pub level_unit: String,
    /// Full-resolution bins merged into one point.
    pub bins_per_point: usize,
    /// `[frequency offset from centre, mean level, largest bin level]` per point.
    pub points: Vec<[f64; 3]>,
    /// Highest bin level, same unit as the points.
    pub peak_level: f64,
    /// Fraction of the power in the occupied bandwidth (0.99).
    pub obw_fraction: f64,
    /// Occupied-bandwidth edges, frequency offsets; `null` for a capture without power.
    pub obw_lower: Option<f64>,
    /// Upper edge.
    pub obw_upper: Option<f64>,
}

/// A narrow peak in the PSD.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Spur {
    /// Frequency offset from the centre (the PSD's `frequency_unit`).
    pub frequency: f64,
    /// Peak level (the PSD's `level_unit`).
    pub level: f64,
    /// Power of the spur (5 bins around the peak, floor removed), dBFS.
    pub power_dbfs: f64,
    /// Height above the local floor, dB.
    pub above_floor_db: f64,
}

/// The decimated power-over-time envelope.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct PowerView {
    /// Samples per short-term power reading.
    pub block_samples: usize,
    /// Samples in the capture.
    pub samples: u64,
    /// `[first sample, mean power dBFS, lowest block dBFS, highest block dBFS]` per point.
    pub points: Vec<[f64; 4]>,
}

/// Median of a small set (sorted copy; `total_cmp` so NaN cannot panic).
fn median(v: &mut [f64]) -> f64 {
    v.sort_by(|a, b| a.total_cmp(b));
    let n = v.len();
    if n == 0 {
        0.0
    } else if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    }
}

/// Spurs in a PSD, as bin indices with their floor (per-bin powers), highest
/// above the floor first, at most [`MAX_SPURS`].
pub fn find_spurs(bins: &[f64], margin_db: f64) -> Vec<(usize, f64)> {
    let n = bins.len();
    let mut found = Vec::new();
    let ratio = 10f64.powf(margin_db / 10.0);
    let mut near = Vec::with_capacity(64);
    for p in 3..n.saturating_sub(3) {
        let v = bins[p];
        if !(v > 0.0 && v >= bins[p - 1] && v > bins[p + 1]) {
            continue;
        }
        if bins[p - 3] > v / 4.0 || bins[p + 3] > v / 4.0 {
            continue;
        }
        near.clear();
        near.extend(
            (p.saturating_sub(32)..p.saturating_sub(3))
                .chain((p + 4)..(p + 33).min(n))
                .map(|i| bins[i]),
        );
        if near.len() < 8 {
            continue;
        }
        let floor = median(&mut near);
        if v >= ratio * floor {
            found.push((p, floor));
        }
    }
    found.sort_by(|a, b| {
        let ha = bins[a.0] / a.1.max(1e-300);
        let hb = bins[b.0] / b.1.max(1e-300);
        hb.total_cmp(&ha).then(a.0.cmp(&b.0))
    });
    found.truncate(MAX_SPURS);
    found.sort_by_key(|s| s.0);
    found
}

/// Equivalent noise bandwidth of a window in bins: `N·Σw²/(Σw)²`.
pub fn enbw_bins(window: &[f32]) -> f64 {
    let s1: f64 = window.iter().map(|&w| f64::from(w)).sum();
    let s2: f64 = window.iter().map(|&w| f64::from(w) * f64::from(w)).sum();
    if s1 == 0.0 {
        return 0.0;
    }
    window.len() as f64 * s2 / (s1 * s1)
}

fn psd_view(psd: &WelchPsd, fs: Option<f64>, obw_fraction: f64) -> (PsdView, Vec<Spur>) {
    let n = psd.fft_len;
    let rate = fs.unwrap_or(1.0);
    let df = rate / n as f64;
    let enbw = enbw_bins(&super::stats::hann_periodic(n)) * df;
    let freq = |i: f64| (i - (n / 2) as f64) * df;
    let per = n.div_ceil(PSD_POINTS).next_power_of_two().max(1);
    let points = psd
        .bins
        .chunks(per)
        .enumerate()
        .map(|(g, c)| {
            let mean = c.iter().sum::<f64>() / c.len() as f64;
            let max = c.iter().copied().fold(0.0f64, f64::max);
            let centre = (g * per) as f64 + (c.len() as f64 - 1.0) / 2.0;
            [freq(centre), db(mean / df), db(max / df)]
        })
        .collect();
    let peak = psd.bins.iter().copied().fold(0.0f64, f64::max);
    let obw = psd.occupied_bandwidth(obw_fraction);
    let spurs = find_spurs(&psd.bins, SPUR_MARGIN_DB)
        .into_iter()
        .map(|(p, floor)| {
            let lo = p.saturating_sub(2);
            let hi = (p + 3).min(n);
            let power: f64 = psd.bins[lo..hi].iter().sum::<f64>() - (hi - lo) as f64 * floor;
            Spur {
                frequency: freq(p as f64),
                level: db(psd.bins[p] / df),
                power_dbfs: db(power),
                above_floor_db: db(psd.bins[p]) - db(floor),
            }
        })
        .collect();
    let unit = if fs.is_some() { "Hz" } else { "cycles/sample" };
    (
        PsdView {
            fft_len: n,
            segments_averaged: psd.segments_averaged,
            resolution: df,
            enbw,
            frequency_unit: unit.into(),
            level_unit: if fs.is_some() {
                "dBFS/Hz".into()
            } else {
                "dBFS/(cycle/sample)".into()
            },
            bins_per_point: per,
            points,
            peak_level: db(peak / df),
            obw_fraction,
            obw_lower: obw.map(|o| o.lower * rate),
            obw_upper: obw.map(|o| o.upper * rate),
        },
        spurs,
    )
}

/// The worst level in each mask segment: for segment `(from, to)` (Hz, both
/// sides of the centre) the largest `largest bin` level of the PSD points
/// whose frequency lies in `from ≤ |f| ≤ to`, relative to the PSD's peak, dB.
/// `None` for a segment no point falls in, or without a sample rate.
pub fn mask_excess(psd: &PsdView, segments: &[(f64, f64)]) -> Vec<Option<f64>> {
    segments
        .iter()
        .map(|&(from, to)| {
            if psd.frequency_unit != "Hz" {
                return None;
            }
            psd.points
                .iter()
                .filter(|p| (from..=to).contains(&p[0].abs()))
                .map(|p| p[2] - psd.peak_level)
                .reduce(f64::max)
        })
        .collect()
}

/// The capture views of a capture's statistics.
pub fn capture_views(
    stats: &CaptureStats,
    sample_rate_hz: Option<f64>,
    center_freq_hz: Option<f64>,
    obw_fraction: f64,
) -> CaptureViews {
    let (psd, spurs) = match &stats.psd {
        Some(p) => {
            let (v, s) = psd_view(p, sample_rate_hz, obw_fraction);
            (Some(v), s)
        }
        None => (None, Vec::new()),
    };
    let env = &stats.envelope;
    let points = env
        .buckets
        .iter()
        .enumerate()
        .filter(|(_, b)| b.samples > 0)
        .map(|(i, b)| {
            let first = (env.grid.first_block(i) * env.grid.block_samples) as f64;
            [first, db(b.energy / b.samples as f64), db(b.min), db(b.max)]
        })
        .collect();
    CaptureViews {
        sample_rate_hz,
        center_freq_hz,
        psd,
        spurs,
        spur_margin_db: SPUR_MARGIN_DB,
        power: PowerView {
            block_samples: env.grid.block_samples,
            samples: stats.samples,
            points,
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_block_falls_in_one_point_and_points_are_contiguous_and_non_empty() {
        for (len, pts) in [
            (1usize, 1024usize),
            (7, 4),
            (19_661, 1024),
            (1 << 20, 1024),
            (1000, 3),
        ] {
            let g = EnvelopeGrid::new(len, pts);
            assert!(g.block_samples.is_power_of_two() && g.block_samples <= 256);
            assert_eq!(g.blocks, len.div_ceil(g.block_samples));
            let mut last = 0;
            for j in 0..g.blocks {
                let b = g.point_of(j);
                assert!(b == last || b == last + 1, "len {len}: block {j}");
                if b != last || j == 0 {
                    assert_eq!(g.first_block(b), j, "len {len}: point {b}");
                }
                last = b;
            }
            assert_eq!(last + 1, g.points, "len {len}");
        }
    }

    // Harris 1978, Table 1: the Hann window's equivalent noise bandwidth is
    // 1.50 bins (exact for the periodic form: N·(3N/8)/(N/2)² = 1.5).
    #[test]
    fn the_hann_window_has_an_enbw_of_one_and_a_half_bins() {
        for n in [16usize, 1024, 4096] {
            let e = enbw_bins(&crate::capture::stats::hann_periodic(n));
            assert!((e - 1.5).abs() < 1e-6, "{n}: {e}");
        }
    }

    #[test]
    fn a_narrow_peak_over_a_flat_floor_is_a_spur_and_a_wide_band_edge_is_not() {
        let mut bins = vec![1.0; 512];
        // A Hann-shaped tone 20 dB up at bin 100.
        bins[99] = 50.0;
        bins[100] = 100.0;
        bins[101] = 50.0;
        // A 100-bin wide band 30 dB up from bin 300.
        for b in &mut bins[300..400] {
            *b = 1000.0;
        }
        let s = find_spurs(&bins, 10.0);
        assert_eq!(s.len(), 1, "{s:?}");
        assert_eq!(s[0].0, 100);
        assert!((s[0].1 - 1.0).abs() < 1e-12);
        // 9.9 dB up is not a spur at a 10 dB margin.
        let mut low = vec![1.0; 512];
        low[200] = 9.7;
        assert!(find_spurs(&low, 10.0).is_empty());
    }

    use crate::capture::stats::{capture_stats, StatsOptions};
    use crate::capture::{encode_raw, Capture, SampleFormat};
    use crate::Cf32;
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;
    use rand_distr::{Distribution, Normal};
    use std::f64::consts::PI;

    fn cap(samples: &[Cf32]) -> Capture {
        let mut b = Vec::new();
        encode_raw(samples, SampleFormat::Cf32Le, &mut b);
        Capture::from_bytes(b, SampleFormat::Cf32Le)
    }

    fn views_of(x: &[Cf32], fs: f64) -> CaptureViews {
        let o = StatsOptions::default();
        let st = capture_stats(&cap(x), &o, &|_| {}).unwrap();
        capture_views(&st, Some(fs), None, o.obw_fraction)
    }

    // Known level of a tone: a complex tone of power A² centred on a bin reads
    // A²/(ENBW·Δf) at its peak, ENBW = 1.5 bins for the Hann window (Harris
    // 1978, Table 1), Δf = fs/N. Issue #20 asks for 0.2 dB.
    #[test]
    fn a_bin_centred_tone_reads_its_power_over_the_hann_enbw_in_dbfs_per_hz() {
        let (fs, n, a) = (1.0e6, 4096usize, 0.3f64);
        let k0 = 300.0;
        let x: Vec<Cf32> = (0..200_000)
            .map(|t| {
                let ph = 2.0 * PI * k0 * t as f64 / n as f64;
                Cf32::new((a * ph.cos()) as f32, (a * ph.sin()) as f32)
            })
            .collect();
        let v = views_of(&x, fs);
        let psd = v.psd.unwrap();
        let expect = 10.0 * (a * a / (1.5 * fs / n as f64)).log10();
        assert!(
            (psd.peak_level - expect).abs() < 0.2,
            "peak {} dBFS/Hz, expected {expect}",
            psd.peak_level
        );
        assert_eq!(psd.level_unit, "dBFS/Hz");
        // The tone is listed as a spur at its frequency with its power.
        let s = v
            .spurs
            .iter()
            .find(|s| (s.frequency - k0 * fs / n as f64).abs() < 1.0);
        let s = s.expect("the tone is a spur");
        assert!((s.power_dbfs - 10.0 * (a * a).log10()).abs() < 0.2, "{s:?}");
    }

    // Known level of white noise: power σ² spread evenly over fs reads σ²/fs
    // per Hz (the definition of a flat PSD). The mean over all bins of 2048
    // averaged segments has a standard error far below 0.01 dB; 0.2 dB as asked.
    #[test]
    fn white_noise_reads_its_power_over_the_sample_rate_in_dbfs_per_hz() {
        let fs = 2.0e6;
        let sigma = 0.05f64; // per component: total power 2σ²
        let mut rng = ChaCha8Rng::seed_from_u64(4);
        let d = Normal::new(0.0, sigma).unwrap();
        let x: Vec<Cf32> = (0..1 << 20)
            .map(|_| Cf32::new(d.sample(&mut rng) as f32, d.sample(&mut rng) as f32))
            .collect();
        let v = views_of(&x, fs);
        let psd = v.psd.unwrap();
        let mean_lin: f64 = psd
            .points
            .iter()
            .map(|p| 10f64.powf(p[1] / 10.0))
            .sum::<f64>()
            / psd.points.len() as f64;
        let expect = 10.0 * (2.0 * sigma * sigma / fs).log10();
        let got = 10.0 * mean_lin.log10();
        assert!((got - expect).abs() < 0.2, "{got} vs {expect} dBFS/Hz");
        // Every point is near the level too (4 bins × 256 segments each).
        for p in &psd.points {
            assert!((p[1] - expect).abs() < 1.5, "{p:?}");
        }
        assert!(v.spurs.is_empty(), "{:?}", v.spurs);
    }

    // Slow reference for the envelope: the mean power of each block computed
    // directly, grouped by `point_of`; compared with the chunked parallel pass
    // for odd chunk sizes and thread counts (bit-identical across threads).
    #[test]
    fn the_envelope_matches_a_direct_computation_for_any_chunking_and_threads() {
        let mut rng = ChaCha8Rng::seed_from_u64(8);
        let d = Normal::new(0.0, 0.1).unwrap();
        for len in [1usize, 9, 1000, 70_001] {
            let mut x: Vec<Cf32> = (0..len)
                .map(|_| Cf32::new(d.sample(&mut rng) as f32, d.sample(&mut rng) as f32))
                .collect();
            // A burst ten times stronger in the middle third.
            for s in &mut x[len / 3..2 * len / 3] {
                *s *= 10.0;
            }
            let grid = EnvelopeGrid::new(len, 64);
            let mut reference = vec![(0u64, 0.0f64, f64::INFINITY, f64::NEG_INFINITY); grid.points];
            for (j, blk) in x.chunks(grid.block_samples).enumerate() {
                let p: f64 =
                    blk.iter().map(|s| f64::from(s.norm_sqr())).sum::<f64>() / blk.len() as f64;
                let r = &mut reference[grid.point_of(j)];
                r.0 += blk.len() as u64;
                r.1 += p * blk.len() as f64;
                r.2 = r.2.min(p);
                r.3 = r.3.max(p);
            }
            let c = cap(&x);
            let mut first = None;
            for (chunk, threads) in [(4099usize, 1usize), (65_536, 2), (100, 3)] {
                let o = StatsOptions {
                    chunk_samples: chunk,
                    envelope_points: 64,
                    ..StatsOptions::default()
                };
                let st = rayon::ThreadPoolBuilder::new()
                    .num_threads(threads)
                    .build()
                    .unwrap()
                    .install(|| capture_stats(&c, &o, &|_| {}).unwrap());
                let env = &st.envelope;
                assert_eq!(env.grid, grid);
                for (b, (r, e)) in reference.iter().zip(&env.buckets).enumerate() {
                    assert_eq!(r.0, e.samples, "len {len} point {b}");
                    // f32 lane sums against f64: 1e-5 relative.
                    let tol = 1e-5 * r.1.abs().max(1e-30);
                    assert!((r.1 - e.energy).abs() <= tol, "len {len} point {b}");
                    assert!((r.2 - e.min).abs() <= 1e-5 * r.2, "len {len} point {b}");
                    assert!((r.3 - e.max).abs() <= 1e-5 * r.3, "len {len} point {b}");
                }
                if threads > 1 && chunk == 65_536 {
                    first.get_or_insert(st.envelope.clone());
                }
            }
            let o = StatsOptions {
                envelope_points: 64,
                ..StatsOptions::default()
            };
            let one = rayon::ThreadPoolBuilder::new()
                .num_threads(1)
                .build()
                .unwrap()
                .install(|| capture_stats(&c, &o, &|_| {}).unwrap());
            assert_eq!(Some(one.envelope), first, "len {len}");
        }
    }

    // The shipped bench noise floor (sample-captures/README.md): white noise at
    // −40 dBFS over 1 MS/s, i.e. −100 dBFS/Hz, and a spur at +125 kHz at
    // −55 dBFS made by sample-captures/make_bench_noise_floor.py.
    #[test]
    fn the_shipped_noise_floor_shows_its_spur_at_125_khz_and_its_floor_level() {
        let path = concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/sample-captures/bench-noise-floor.cf32"
        );
        let c = Capture::open(std::path::Path::new(path), &Default::default()).unwrap();
        let o = StatsOptions::default();
        let st = capture_stats(&c, &o, &|_| {}).unwrap();
        let v = capture_views(&st, c.sample_rate_hz(), c.center_freq_hz(), 0.99);
        let spur = v.spurs.iter().find(|s| (s.frequency - 125e3).abs() < 300.0);
        let spur = spur.expect("the +125 kHz spur is listed");
        assert!((spur.power_dbfs + 55.0).abs() < 0.5, "{spur:?}");
        let psd = v.psd.unwrap();
        let mid: Vec<f64> = psd.points.iter().map(|p| p[1]).collect();
        let mut sorted = mid.clone();
        sorted.sort_by(|a, b| a.total_cmp(b));
        let median = sorted[sorted.len() / 2];
        assert!((median + 100.0).abs() < 0.5, "floor {median} dBFS/Hz");
    }
}
