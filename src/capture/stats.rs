//! Whole-capture statistics for `iqaudit info`: power, peak, DC, clipping,
//! non-finite samples, a blind IQ-imbalance estimate and the occupied bandwidth
//! from a Welch power spectrum.
//!
//! Takes in: an opened [`Capture`]. Gives out: [`CaptureStats`] (linear figures,
//! full scale = 1.0) and the documented JSON object [`InfoReport`] (dB figures).
//!
//! **Bounded memory and determinism.** Samples are processed in fixed chunks of
//! [`StatsOptions::chunk_samples`] (independent of the file size and of the thread
//! count). Chunks are handed to rayon in batches; each chunk yields partial sums
//! (`f64` accumulators) and the partials are added *in chunk order*, so the
//! result is bit-identical for any number of threads. Working memory is one
//! chunk buffer per worker plus one batch of partials. Non-finite samples count
//! as 0 in every figure (as [`Capture::read_into`] delivers them) and are counted.
//!
//! **Welch PSD.** Segments of `N` = [`StatsOptions::welch_fft_len`] samples (or
//! the largest power of two not above the capture length when it is shorter),
//! periodic Hann window `w[n] = 0.5 − 0.5·cos(2πn/N)`, 50 % overlap (hop `N/2`).
//! Each bin holds `P[k] = mean over segments of |X[k]|² / (N·Σw²)`, so that
//! `Σ_k P[k]` is the mean power (Parseval; exact for the windowed data). Bins are
//! stored in *centred* order: index `i` is frequency `(i − N/2)/N` cycles per
//! sample, i.e. `(i − N/2)·fs/N` Hz. The bin spacing is `fs/N`; the Hann window's
//! equivalent noise bandwidth is 1.5 bins. When more than
//! [`StatsOptions::welch_max_segments`] segments exist, that many are averaged,
//! spread evenly over the capture (segment `⌊i·(S−1)/(M−1)⌋` of the `S` available).
//!
//! **Occupied bandwidth** is the width holding `obw_fraction` (default 99 %) of
//! the PSD power, leaving equal halves of the rest below and above (common
//! practice for the "99 % power bandwidth"); edges are interpolated within a bin
//! treating each bin's power as spread evenly over its width.
//!
//! **IQ imbalance** (blind, second-order statistics; common practice, from
//! memory): with DC removed, for a circular signal `E[I²] = E[Q²]` and
//! `E[IQ] = 0`. The receiver's gain imbalance is `g = sqrt(E[Q²]/E[I²])`
//! (reported as `10·log10(E[Q²]/E[I²])` dB) and its phase imbalance
//! `φ = −asin(E[IQ]/sqrt(E[I²]E[Q²]))`, in the crate's convention
//! `Q' = g·(Q·cos φ − I·sin φ)` shared with `synth` and the report (`src/lib.rs`). Meaningful only when the signal itself is
//! circular (noise, QAM/PSK with random data), not for a single real tone.

use std::sync::Arc;

use rayon::prelude::*;
use rustfft::{Fft, FftPlanner};
use serde::Serialize;

use super::views::{EnvelopeBucket, EnvelopeGrid, PowerEnvelope};
use super::{Capture, CaptureError, ReadStats};
use crate::Cf32;

/// Tuning of [`capture_stats`]. All sizes are in complex samples.
#[derive(Debug, Clone, PartialEq)]
pub struct StatsOptions {
    /// Samples per processing chunk (memory per worker: 8 bytes × this).
    pub chunk_samples: usize,
    /// Welch segment length `N` (a power of two is fastest).
    pub welch_fft_len: usize,
    /// Most Welch segments averaged; beyond that an even spread is taken.
    pub welch_max_segments: usize,
    /// Fraction of power inside the occupied bandwidth (0.99 = 99 %).
    pub obw_fraction: f64,
    /// Most points of the power-over-time envelope (see [`PowerEnvelope`]).
    pub envelope_points: usize,
}

impl Default for StatsOptions {
    fn default() -> Self {
        StatsOptions {
            chunk_samples: 1 << 16,
            welch_fft_len: 4096,
            welch_max_segments: 2048,
            obw_fraction: 0.99,
            envelope_points: 640,
        }
    }
}

/// Chunks processed in parallel per batch (bounds the partials held at once).
const BATCH_CHUNKS: usize = 64;
/// Welch segments per parallel work item.
const WELCH_GROUP: usize = 32;

/// Linear whole-capture figures (full scale = 1.0, powers in |x|²).
#[derive(Debug, Clone, PartialEq)]
pub struct CaptureStats {
    /// Complex samples analysed.
    pub samples: u64,
    /// Mean of |x|².
    pub mean_power: f64,
    /// Largest |x|².
    pub peak_power: f64,
    /// Mean of I (DC offset, full-scale units).
    pub dc_i: f64,
    /// Mean of Q.
    pub dc_q: f64,
    /// Variance of I (DC removed).
    pub var_i: f64,
    /// Variance of Q (DC removed).
    pub var_q: f64,
    /// Covariance of I and Q (DC removed).
    pub cov_iq: f64,
    /// Clipped and non-finite sample counts.
    pub read: ReadStats,
    /// Welch power spectrum, when the capture has at least 2 samples.
    pub psd: Option<WelchPsd>,
    /// Power over time: a min/mean/max envelope of short-block powers.
    pub envelope: PowerEnvelope,
    /// Chunk size used (the bounded-memory unit).
    pub chunk_samples: usize,
}

/// A Welch power spectrum in centred bin order (see the module doc).
#[derive(Debug, Clone, PartialEq)]
pub struct WelchPsd {
    /// Segment length `N` (= number of bins).
    pub fft_len: usize,
    /// Power per bin, centred order; `Σ bins` ≈ mean power.
    pub bins: Vec<f64>,
    /// Segments averaged.
    pub segments_averaged: usize,
    /// Segments available at 50 % overlap.
    pub segments_available: usize,
}

/// An occupied-bandwidth result in cycles per sample (multiply by fs for Hz).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OccupiedBandwidth {
    /// Lower edge, cycles/sample in [−0.5, 0.5].
    pub lower: f64,
    /// Upper edge, cycles/sample.
    pub upper: f64,
}

impl OccupiedBandwidth {
    /// Width in cycles per sample.
    pub fn width(&self) -> f64 {
        self.upper - self.lower
    }
}

impl WelchPsd {
    /// Sum of all bins (≈ mean power).
    pub fn total_power(&self) -> f64 {
        self.bins.iter().sum()
    }

    /// Centre frequency of bin `i`, cycles per sample.
    pub fn bin_frequency(&self, i: usize) -> f64 {
        (i as f64 - (self.fft_len / 2) as f64) / self.fft_len as f64
    }

    /// The band holding `fraction` of the power with equal tails outside it;
    /// `None` when the spectrum holds no power.
    pub fn occupied_bandwidth(&self, fraction: f64) -> Option<OccupiedBandwidth> {
        let total = self.total_power();
        if !(total > 0.0 && total.is_finite()) {
            return None;
        }
        let tail = (1.0 - fraction.clamp(0.0, 1.0)) / 2.0 * total;
        let lo = self.position_of(tail)?;
        let hi = self.position_of(total - tail)?;
        let n = self.fft_len as f64;
        let half = (self.fft_len / 2) as f64;
        // Position u in [0, N]: bin i covers [i, i+1), centred at frequency (i − N/2)/N.
        let f = |u: f64| (u - 0.5 - half) / n;
        Some(OccupiedBandwidth {
            lower: f(lo),
            upper: f(hi),
        })
    }

    /// Continuous bin position where the cumulative power reaches `target`.
    fn position_of(&self, target: f64) -> Option<f64> {
        let mut cum = 0.0;
        for (i, &p) in self.bins.iter().enumerate() {
            if p > 0.0 && cum + p >= target {
                return Some(i as f64 + ((target - cum) / p).clamp(0.0, 1.0));
            }
            cum += p;
        }
        (self.fft_len > 0).then_some(self.fft_len as f64)
    }
}

#[derive(Debug, Clone, Copy, Default)]
struct Moments {
    n: u64,
    si: f64,
    sq: f64,
    sii: f64,
    sqq: f64,
    siq: f64,
    peak: f64,
    read: ReadStats,
}

impl Moments {
    #[inline(always)]
    fn add(&mut self, s: Cf32) {
        let i = f64::from(s.re);
        let q = f64::from(s.im);
        self.si += i;
        self.sq += q;
        self.sii += i * i;
        self.sqq += q * q;
        self.siq += i * q;
        let p = i * i + q * q;
        if p > self.peak {
            self.peak = p;
        }
    }

    /// Moments of already-clean samples. Short runs are summed in 8 f32 lanes
    /// (at most `LANE_BLOCK / 8` terms per lane) and each run's lane sums are
    /// added to the f64 accumulators, so precision stays at f64 level over the
    /// capture while the inner loop vectorises. Fixed block boundaries keep the
    /// result independent of threads.
    ///
    /// The mean power of each run of `lane_block` samples is pushed to
    /// `block_powers` (the power-over-time envelope is built from them).
    fn of_clean(
        samples: &[Cf32],
        read: ReadStats,
        lane_block: usize,
        block_powers: &mut Vec<f64>,
    ) -> Moments {
        let mut m = Moments {
            n: samples.len() as u64,
            read,
            ..Moments::default()
        };
        for block in samples.chunks(lane_block.max(1)) {
            let before = m.sii + m.sqq;
            let mut l = [[0f32; 8]; 5];
            let mut pk = [0f32; 8];
            let mut it = block.chunks_exact(8);
            for c in &mut it {
                for k in 0..8 {
                    let (i, q) = (c[k].re, c[k].im);
                    l[0][k] += i;
                    l[1][k] += q;
                    l[2][k] += i * i;
                    l[3][k] += q * q;
                    l[4][k] += i * q;
                    let p = i * i + q * q;
                    pk[k] = if p > pk[k] { p } else { pk[k] };
                }
            }
            let sum = |a: &[f32; 8]| a.iter().map(|&v| f64::from(v)).sum::<f64>();
            m.si += sum(&l[0]);
            m.sq += sum(&l[1]);
            m.sii += sum(&l[2]);
            m.sqq += sum(&l[3]);
            m.siq += sum(&l[4]);
            for &p in &pk {
                m.peak = m.peak.max(f64::from(p));
            }
            for &s in it.remainder() {
                m.add(s);
            }
            block_powers.push((m.sii + m.sqq - before) / block.len() as f64);
        }
        m
    }

    fn merge(&mut self, o: &Moments) {
        self.n += o.n;
        self.si += o.si;
        self.sq += o.sq;
        self.sii += o.sii;
        self.sqq += o.sqq;
        self.siq += o.siq;
        self.peak = self.peak.max(o.peak);
        self.read += o.read;
    }
}

/// Compute every figure of `iqaudit info` over the whole capture in bounded
/// memory. `progress` is called with the number of samples just finished
/// (from worker threads; order unspecified).
pub fn capture_stats(
    capture: &Capture,
    opts: &StatsOptions,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<CaptureStats, CaptureError> {
    let len = capture.len();
    let grid = EnvelopeGrid::new(len, opts.envelope_points);
    // Chunks hold whole envelope blocks, so no block straddles two chunks.
    let chunk = opts
        .chunk_samples
        .max(1)
        .next_multiple_of(grid.block_samples);
    let n_chunks = len.div_ceil(chunk);
    let view = capture.as_cf32_slice();
    let mut total = Moments::default();
    let mut envelope = PowerEnvelope::empty(&grid);
    let mut first = 0;
    while first < n_chunks {
        let last = (first + BATCH_CHUNKS).min(n_chunks);
        type Part = (Moments, Vec<EnvelopeBucket>);
        let parts: Vec<Result<Part, CaptureError>> = (first..last)
            .into_par_iter()
            .map_init(
                || (Vec::<Cf32>::new(), Vec::<f64>::new()),
                |(buf, blocks), c| {
                    let start = c * chunk;
                    let end = (start + chunk).min(len);
                    let lb = grid.block_samples;
                    blocks.clear();
                    let m = match view {
                        // Zero-copy when the chunk holds only finite values;
                        // otherwise clean a copy exactly as read_into does.
                        Some(v) => {
                            // The map may have lost this range to a truncation
                            // since it was opened (SIGBUS if touched).
                            capture.ensure_present(start, end)?;
                            let part = &v[start..end];
                            let mut read = ReadStats::default();
                            for &s in part {
                                read += super::raw::check_float(s).1;
                            }
                            if read.non_finite == 0 {
                                Moments::of_clean(part, read, lb, blocks)
                            } else {
                                buf.resize(chunk, Cf32::default());
                                let out = &mut buf[..end - start];
                                let read = capture.read_into(start, out)?;
                                Moments::of_clean(out, read, lb, blocks)
                            }
                        }
                        None => {
                            buf.resize(chunk, Cf32::default());
                            let out = &mut buf[..end - start];
                            let read = capture.read_into(start, out)?;
                            Moments::of_clean(out, read, lb, blocks)
                        }
                    };
                    let buckets = grid.buckets_of(start / lb, blocks, len);
                    progress((end - start) as u64);
                    Ok((m, buckets))
                },
            )
            .collect();
        for p in parts {
            let (m, b) = p?;
            total.merge(&m);
            envelope.merge(&b);
        }
        // The zero-copy path reads the map directly: release what this batch
        // of chunks touched (read_into releases its own large reads).
        capture.release_samples(first * chunk, last * chunk);
        first = last;
    }
    let n = total.n.max(1) as f64;
    let (dc_i, dc_q) = (total.si / n, total.sq / n);
    let psd = welch_psd(capture, opts.welch_fft_len, opts.welch_max_segments)?;
    Ok(CaptureStats {
        samples: total.n,
        mean_power: (total.sii + total.sqq) / n,
        peak_power: total.peak,
        dc_i,
        dc_q,
        var_i: (total.sii / n - dc_i * dc_i).max(0.0),
        var_q: (total.sqq / n - dc_q * dc_q).max(0.0),
        cov_iq: total.siq / n - dc_i * dc_q,
        read: total.read,
        psd,
        envelope,
        chunk_samples: chunk,
    })
}

/// Periodic Hann window of length `n`.
pub fn hann_periodic(n: usize) -> Vec<f32> {
    (0..n)
        .map(|k| (0.5 - 0.5 * (2.0 * std::f64::consts::PI * k as f64 / n as f64).cos()) as f32)
        .collect()
}

/// Add `|FFT(window · segment)[k]|²` (natural FFT bin order) to `acc`.
/// `segment` is overwritten with the windowed spectrum.
///
/// # Panics
/// If `segment`, `window` and `acc` differ in length or `fft.len()` differs.
pub(crate) fn add_periodogram(
    segment: &mut [Cf32],
    window: &[f32],
    fft: &dyn Fft<f32>,
    scratch: &mut [Cf32],
    acc: &mut [f64],
) {
    assert!(segment.len() == window.len() && acc.len() == window.len());
    for (s, &w) in segment.iter_mut().zip(window) {
        *s *= w;
    }
    if !segment.is_empty() {
        fft.process_with_scratch(segment, scratch);
    }
    for (a, x) in acc.iter_mut().zip(segment.iter()) {
        let (re, im) = (f64::from(x.re), f64::from(x.im));
        *a += re * re + im * im;
    }
}

/// Welch PSD of the whole capture (see the module doc); `None` below 2 samples.
pub fn welch_psd(
    capture: &Capture,
    fft_len: usize,
    max_segments: usize,
) -> Result<Option<WelchPsd>, CaptureError> {
    let len = capture.len();
    let n = if len >= fft_len {
        fft_len
    } else if len >= 2 {
        1usize << (usize::BITS - 1 - len.leading_zeros())
    } else {
        0
    };
    if n < 2 {
        return Ok(None);
    }
    let hop = (n / 2).max(1);
    let available = (len - n) / hop + 1;
    let m = available.min(max_segments.max(1));
    let start_of = |i: usize| -> usize {
        if m == available {
            i * hop
        } else if m == 1 {
            0
        } else {
            let j = (i as u128 * (available as u128 - 1) / (m as u128 - 1)) as usize;
            j * hop
        }
    };
    let window = hann_periodic(n);
    let fft: Arc<dyn Fft<f32>> = FftPlanner::new().plan_fft_forward(n);
    let groups = m.div_ceil(WELCH_GROUP);
    let parts: Vec<Result<Vec<f64>, CaptureError>> = (0..groups)
        .into_par_iter()
        .map_init(
            || {
                (
                    vec![Cf32::default(); n],
                    vec![Cf32::default(); fft.get_inplace_scratch_len()],
                )
            },
            |(seg, scratch), g| {
                let mut acc = vec![0.0f64; n];
                let range = g * WELCH_GROUP..((g + 1) * WELCH_GROUP).min(m);
                for i in range.clone() {
                    capture.read_into(start_of(i), seg)?;
                    add_periodogram(seg, &window, fft.as_ref(), scratch, &mut acc);
                }
                // Segment reads are small and keep their pages mapped: let the
                // group's stretch of a mapped capture go in one call.
                if let (Some(a), Some(b)) = (range.clone().next(), range.last()) {
                    capture.release_samples(start_of(a), start_of(b) + n);
                }
                Ok(acc)
            },
        )
        .collect();
    let mut sum = vec![0.0f64; n];
    for p in parts {
        for (s, v) in sum.iter_mut().zip(p?) {
            *s += v;
        }
    }
    let wsum: f64 = window.iter().map(|&w| f64::from(w) * f64::from(w)).sum();
    let scale = 1.0 / (m as f64 * n as f64 * wsum);
    // Natural order k = 0..N−1 → centred order: index i holds k = (i + N/2) mod N.
    let bins = (0..n).map(|i| sum[(i + n / 2) % n] * scale).collect();
    Ok(Some(WelchPsd {
        fft_len: n,
        bins,
        segments_averaged: m,
        segments_available: available,
    }))
}

fn db(x: f64) -> Option<f64> {
    (x > 0.0 && x.is_finite()).then(|| 10.0 * x.log10())
}

/// Schema id of `iqaudit info --json` (`/2`: `tool` became `{name, version}`
/// like the other documents', #19).
pub const INFO_SCHEMA: &str = "iqaudit.info/2";

/// The JSON object printed by `iqaudit info --json` (schema [`INFO_SCHEMA`]).
///
/// Keys and units (a key is `null` when the figure is undefined — e.g. a dB
/// value of zero power, or anything in Hz when the sample rate is unknown):
///
/// * `schema` — `"iqaudit.info/2"`; `tool` — `{name, version}` of the program.
/// * `path`, `file_size_bytes`, `data_offset_bytes`, `trailing_bytes` (ignored
///   partial sample at the end), `format` (`cf32_le`, …, `wav_pcm16`, …),
///   `format_source` (`option`, `sigmf`, `wav_header`, `extension`), `swap_iq`.
/// * `samples` (complex), `sample_rate_hz`, `center_freq_hz`, `duration_s`.
/// * `mean_power_dbfs`, `peak_power_dbfs` (0 dBFS = |x|² of 1), `papr_db`
///   (peak over mean power).
/// * `dc_i`, `dc_q` (mean of I and Q, full-scale units), `dc_relative_db`
///   (`|mean|²` over mean power, dB).
/// * `clipped_samples`, `clipped_percent` (samples at the format's extreme
///   codes; always 0 for float formats), `above_full_scale_samples` (float
///   formats: I or Q beyond ±1.0), `non_finite_samples`.
/// * `iq_gain_imbalance_db` (`10·log10(var Q / var I)`), `iq_phase_imbalance_deg`.
/// * `psd_fft_len`, `psd_resolution_hz` (`fs/N`; `null` without a rate),
///   `psd_segments_averaged`, `psd_segments_available`.
/// * `obw_fraction` (0.99), `obw_hz`, `obw_lower_hz`, `obw_upper_hz` (relative to
///   the centre frequency), `obw_fraction_of_rate` (width in cycles/sample).
/// * `views` — the plot data: `psd` (decimated Welch PSD in dBFS/Hz with the
///   occupied-bandwidth edges), `spurs` (narrow peaks `spur_margin_db` above the
///   local floor) and `power` (min/mean/max power-over-time envelope); see
///   [`super::views`].
/// * `warnings` — list of `{kind, message}`; kinds: `trailing_bytes`,
///   `clipping`, `non_finite`.
#[derive(Debug, Clone, Serialize, PartialEq, schemars::JsonSchema)]
pub struct InfoReport {
    /// Schema identifier.
    pub schema: &'static str,
    /// Name and version of the writing program.
    pub tool: crate::report::schema::ToolInfo,
    /// Capture path as given.
    pub path: String,
    /// File length in bytes.
    pub file_size_bytes: u64,
    /// Offset of the first sample.
    pub data_offset_bytes: u64,
    /// Ignored bytes at the end.
    pub trailing_bytes: usize,
    /// Layout name.
    pub format: String,
    /// Where the layout came from.
    pub format_source: super::FormatSource,
    /// I and Q swapped.
    pub swap_iq: bool,
    /// Complex samples.
    pub samples: u64,
    /// Sample rate, Hz.
    pub sample_rate_hz: Option<f64>,
    /// Centre frequency, Hz.
    pub center_freq_hz: Option<f64>,
    /// Duration, seconds.
    pub duration_s: Option<f64>,
    /// Mean power, dBFS.
    pub mean_power_dbfs: Option<f64>,
    /// Peak power, dBFS.
    pub peak_power_dbfs: Option<f64>,
    /// Peak-to-average power ratio, dB.
    pub papr_db: Option<f64>,
    /// Mean of I.
    pub dc_i: f64,
    /// Mean of Q.
    pub dc_q: f64,
    /// DC power relative to mean power, dB.
    pub dc_relative_db: Option<f64>,
    /// Clipped samples.
    pub clipped_samples: u64,
    /// Clipped samples, percent of all.
    pub clipped_percent: f64,
    /// Float captures only: samples with I or Q beyond ±1.0 (they are not
    /// clipped — a float has no extreme code — but lie above full scale);
    /// `null` for integer formats.
    #[serde(default)]
    pub above_full_scale_samples: Option<u64>,
    /// Non-finite samples (counted as 0 in the figures).
    pub non_finite_samples: u64,
    /// IQ gain imbalance, dB.
    pub iq_gain_imbalance_db: Option<f64>,
    /// IQ phase imbalance, degrees.
    pub iq_phase_imbalance_deg: Option<f64>,
    /// Welch segment length.
    pub psd_fft_len: Option<usize>,
    /// Welch bin spacing, Hz.
    pub psd_resolution_hz: Option<f64>,
    /// Segments averaged.
    pub psd_segments_averaged: Option<usize>,
    /// Segments available.
    pub psd_segments_available: Option<usize>,
    /// Power fraction of the occupied bandwidth.
    pub obw_fraction: f64,
    /// Occupied bandwidth, Hz.
    pub obw_hz: Option<f64>,
    /// Lower edge, Hz relative to centre.
    pub obw_lower_hz: Option<f64>,
    /// Upper edge, Hz relative to centre.
    pub obw_upper_hz: Option<f64>,
    /// Occupied bandwidth as a fraction of the sample rate.
    pub obw_fraction_of_rate: Option<f64>,
    /// The decimated PSD (dBFS/Hz), its spurs and the power-over-time
    /// envelope (documented in [`super::views`]).
    pub views: super::views::CaptureViews,
    /// Warnings.
    pub warnings: Vec<InfoWarning>,
}

/// Something the user should know about a capture.
#[derive(Debug, Clone, Serialize, PartialEq, schemars::JsonSchema)]
pub struct InfoWarning {
    /// `trailing_bytes`, `clipping` or `non_finite`.
    pub kind: &'static str,
    /// One line for humans.
    pub message: String,
}

impl InfoReport {
    /// Take `f` (Hz) as the centre frequency (a `--center-freq` override):
    /// sets `center_freq_hz` and redraws the views' absolute frequency axis
    /// from the same statistics.
    pub fn set_center_freq(&mut self, stats: &CaptureStats, opts: &StatsOptions, f: f64) {
        self.center_freq_hz = Some(f);
        self.views =
            super::views::capture_views(stats, self.sample_rate_hz, Some(f), opts.obw_fraction);
    }
}

/// Build the report from a capture and its statistics.
pub fn info_report(capture: &Capture, stats: &CaptureStats, opts: &StatsOptions) -> InfoReport {
    let fs = capture.sample_rate_hz();
    let samples = stats.samples;
    let nonzero = samples.max(1) as f64;
    let (gain, phase) = if stats.var_i > 0.0 && stats.var_q > 0.0 {
        let rho = (stats.cov_iq / (stats.var_i * stats.var_q).sqrt()).clamp(-1.0, 1.0);
        (
            Some(10.0 * (stats.var_q / stats.var_i).log10()),
            // Q' = g·(Q·cos φ − I·sin φ) gives E[I·Q'] = −g·sin φ·E[I²]: φ = −asin ρ.
            Some(-rho.asin().to_degrees()),
        )
    } else {
        (None, None)
    };
    let obw = stats
        .psd
        .as_ref()
        .and_then(|p| p.occupied_bandwidth(opts.obw_fraction));
    let mut warnings = Vec::new();
    if capture.trailing_bytes() > 0 {
        warnings.push(InfoWarning {
            kind: "trailing_bytes",
            message: format!(
                "{} trailing byte(s) ignored: the data is not a whole number of {}-byte {} samples",
                capture.trailing_bytes(),
                capture.container().bytes_per_sample(),
                capture.container()
            ),
        });
    }
    let float = capture.container().is_float();
    let (clipped, above_full_scale) = if float {
        (0, Some(stats.read.clipped))
    } else {
        (stats.read.clipped, None)
    };
    if let Some(n) = above_full_scale.filter(|n| *n > 0) {
        warnings.push(InfoWarning {
            kind: "above_full_scale",
            message: format!(
                "{n} float sample(s) have I or Q beyond ±1.0 ({:.4} %): nothing clipped in the file, but dBFS figures exceed 0 and a conversion to integers would clip",
                100.0 * n as f64 / nonzero
            ),
        });
    }
    if clipped > 0 {
        warnings.push(InfoWarning {
            kind: "clipping",
            message: format!(
                "{} sample(s) at full scale ({:.4} %): the recording chain was overdriven; lower the receiver gain",
                stats.read.clipped,
                100.0 * stats.read.clipped as f64 / nonzero
            ),
        });
    }
    if stats.read.non_finite > 0 {
        warnings.push(InfoWarning {
            kind: "non_finite",
            message: format!(
                "{} sample(s) are NaN or infinite; they count as 0 in every figure",
                stats.read.non_finite
            ),
        });
    }
    InfoReport {
        schema: INFO_SCHEMA,
        tool: crate::report::schema::ToolInfo::this(),
        path: capture.path().display().to_string(),
        file_size_bytes: capture.file_len_bytes(),
        data_offset_bytes: capture.data_offset_bytes(),
        trailing_bytes: capture.trailing_bytes(),
        format: capture.container().to_string(),
        format_source: capture.format_source(),
        swap_iq: capture.swap_iq(),
        samples,
        sample_rate_hz: fs,
        center_freq_hz: capture.center_freq_hz(),
        duration_s: fs.map(|r| samples as f64 / r),
        mean_power_dbfs: db(stats.mean_power),
        peak_power_dbfs: db(stats.peak_power),
        papr_db: (stats.mean_power > 0.0)
            .then(|| db(stats.peak_power / stats.mean_power))
            .flatten(),
        dc_i: stats.dc_i,
        dc_q: stats.dc_q,
        dc_relative_db: (stats.mean_power > 0.0)
            .then(|| db((stats.dc_i * stats.dc_i + stats.dc_q * stats.dc_q) / stats.mean_power))
            .flatten(),
        clipped_samples: clipped,
        clipped_percent: 100.0 * clipped as f64 / nonzero,
        above_full_scale_samples: above_full_scale,
        non_finite_samples: stats.read.non_finite,
        iq_gain_imbalance_db: gain,
        iq_phase_imbalance_deg: phase,
        psd_fft_len: stats.psd.as_ref().map(|p| p.fft_len),
        psd_resolution_hz: stats
            .psd
            .as_ref()
            .and_then(|p| fs.map(|r| r / p.fft_len as f64)),
        psd_segments_averaged: stats.psd.as_ref().map(|p| p.segments_averaged),
        psd_segments_available: stats.psd.as_ref().map(|p| p.segments_available),
        obw_fraction: opts.obw_fraction,
        obw_hz: obw.and_then(|o| fs.map(|r| o.width() * r)),
        obw_lower_hz: obw.and_then(|o| fs.map(|r| o.lower * r)),
        obw_upper_hz: obw.and_then(|o| fs.map(|r| o.upper * r)),
        obw_fraction_of_rate: obw.map(|o| o.width()),
        views: super::views::capture_views(stats, fs, capture.center_freq_hz(), opts.obw_fraction),
        warnings,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::capture::{encode_raw, SampleFormat};
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;
    use rand_distr::{Distribution, Normal};
    use std::f64::consts::PI;

    /// Textbook DFT in f64: X[k] = Σ x[n]·exp(−j2πkn/N) (rustfft's forward sign).
    fn naive_dft(x: &[Cf32]) -> Vec<(f64, f64)> {
        let n = x.len();
        (0..n)
            .map(|k| {
                let mut acc = (0.0, 0.0);
                for (t, s) in x.iter().enumerate() {
                    let a = -2.0 * PI * ((k * t) % n) as f64 / n as f64;
                    let (re, im) = (f64::from(s.re), f64::from(s.im));
                    acc.0 += re * a.cos() - im * a.sin();
                    acc.1 += re * a.sin() + im * a.cos();
                }
                acc
            })
            .collect()
    }

    fn noise(n: usize, seed: u64, sigma: f64) -> Vec<Cf32> {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let d = Normal::new(0.0, sigma).unwrap();
        (0..n)
            .map(|_| Cf32::new(d.sample(&mut rng) as f32, d.sample(&mut rng) as f32))
            .collect()
    }

    fn cap(samples: &[Cf32]) -> Capture {
        let mut b = Vec::new();
        encode_raw(samples, SampleFormat::Cf32Le, &mut b);
        Capture::from_bytes(b, SampleFormat::Cf32Le)
    }

    // The reference itself, on hand-computed cases: an impulse has a flat
    // spectrum of ones; exp(+j2π·3n/8) puts all of its energy (N) into bin 3.
    #[test]
    fn the_naive_dft_reference_gets_an_impulse_and_a_bin_centred_tone_right() {
        let mut imp = vec![Cf32::default(); 5];
        imp[0] = Cf32::new(1.0, 0.0);
        for (re, im) in naive_dft(&imp) {
            assert!((re - 1.0).abs() < 1e-12 && im.abs() < 1e-12);
        }
        let tone: Vec<Cf32> = (0..8)
            .map(|t| {
                let a = 2.0 * PI * 3.0 * t as f64 / 8.0;
                Cf32::new(a.cos() as f32, a.sin() as f32)
            })
            .collect();
        let x = naive_dft(&tone);
        for (k, (re, im)) in x.iter().enumerate() {
            let expect = if k == 3 { 8.0 } else { 0.0 };
            assert!((re - expect).abs() < 1e-5 && im.abs() < 1e-5, "bin {k}");
        }
    }

    // Fast vs slow: the windowed rustfft periodogram equals |naive DFT(w·x)|² in
    // natural bin order. Tolerance 1e-5 of the total energy: f32 FFT rounding
    // (~1e-7 relative per operation, log N stages) against an f64 reference.
    #[test]
    fn windowed_fft_periodogram_matches_a_naive_dft_for_sizes_0_1_and_primes() {
        for n in [0usize, 1, 2, 3, 5, 7, 13, 16, 31, 64, 97] {
            let x = noise(n, 7 + n as u64, 0.3);
            let w = hann_periodic(n);
            let fft = FftPlanner::new().plan_fft_forward(n);
            let mut seg = x.clone();
            // Garbage-filled scratch must not matter.
            let mut scratch = vec![Cf32::new(9.0, -9.0); fft.get_inplace_scratch_len()];
            let mut acc = vec![0.0; n];
            add_periodogram(&mut seg, &w, fft.as_ref(), &mut scratch, &mut acc);
            let xw: Vec<Cf32> = x.iter().zip(&w).map(|(s, &w)| *s * w).collect();
            let reference: Vec<f64> = naive_dft(&xw).iter().map(|(r, i)| r * r + i * i).collect();
            let total: f64 = reference.iter().sum::<f64>().max(1e-30);
            for k in 0..n {
                assert!(
                    (acc[k] - reference[k]).abs() <= 1e-5 * total,
                    "n={n} first differing bin {k}: {} vs {}",
                    acc[k],
                    reference[k]
                );
            }
        }
    }

    // Source: Parseval's theorem, Σ_k |X[k]|² = N·Σ_n |x[n]|² (any DSP text; the
    // scaling of the PSD is chosen so Σ P[k] is the mean windowed power). Exact
    // check: equal to the directly computed mean of Σ|w·x|²/Σw² over the same
    // segments, to 1e-6 relative (f32 FFT rounding).
    #[test]
    fn psd_bins_sum_exactly_to_the_window_weighted_mean_power_of_the_segments() {
        let x = noise(10_000, 3, 0.1);
        let c = cap(&x);
        let psd = welch_psd(&c, 256, usize::MAX).unwrap().unwrap();
        let w = hann_periodic(256);
        let wsum: f64 = w.iter().map(|&v| f64::from(v) * f64::from(v)).sum();
        let mut direct = 0.0;
        for s in 0..psd.segments_available {
            for (k, &wk) in w.iter().enumerate() {
                direct += f64::from((x[s * 128 + k] * wk).norm_sqr());
            }
        }
        direct /= wsum * psd.segments_available as f64;
        let total = psd.total_power();
        assert!((total / direct - 1.0).abs() < 1e-6, "{total} vs {direct}");
    }

    // Source: Parseval's theorem (as above); for a stationary signal the Welch
    // total matches the plain time-domain mean power. 0.1 dB is the limit.
    #[test]
    fn psd_total_power_matches_time_domain_mean_power_within_a_tenth_of_a_db() {
        let mut x = noise(1 << 18, 11, 0.05);
        for (t, s) in x.iter_mut().enumerate() {
            let a = 2.0 * PI * 0.1234 * t as f64;
            *s += Cf32::new(0.2 * a.cos() as f32 + 0.01, 0.2 * a.sin() as f32);
        }
        let c = cap(&x);
        let st = capture_stats(&c, &StatsOptions::default(), &|_| {}).unwrap();
        let total = st.psd.as_ref().unwrap().total_power();
        let d = 10.0 * (total / st.mean_power).log10();
        assert!(
            d.abs() < 0.1,
            "PSD total {total} vs mean power {}: {d} dB",
            st.mean_power
        );
    }

    // Common practice: a complex tone exp(+j2πk0 n/N) lies in bin k0, and the
    // centred order puts frequency 0 at index N/2 (module doc).
    #[test]
    fn a_complex_tone_peaks_in_its_bin_for_positive_and_negative_frequencies() {
        let n = 1024;
        for k0 in [-300.0f64, -1.0, 0.0, 5.0, 200.3, 511.0] {
            let x: Vec<Cf32> = (0..20_000)
                .map(|t| {
                    let a = 2.0 * PI * k0 * t as f64 / n as f64;
                    Cf32::new(0.5 * a.cos() as f32, 0.5 * a.sin() as f32)
                })
                .collect();
            let psd = welch_psd(&cap(&x), n, 2048).unwrap().unwrap();
            let peak = (0..n)
                .max_by(|&a, &b| psd.bins[a].total_cmp(&psd.bins[b]))
                .unwrap();
            assert_eq!(peak as i64, n as i64 / 2 + k0.round() as i64, "k0={k0}");
            assert!((psd.bin_frequency(peak) - k0.round() / n as f64).abs() < 1e-12);
        }
    }

    // Common practice: the 99 % power bandwidth of a flat band of width B is
    // 0.99·B (1 % of the power cut off, half at each edge). Band-limited noise is
    // made by random bins in [−B/2, B/2] and an inverse DFT (circular, so exactly
    // band-limited). Check: within one resolution bin (fs/N).
    #[test]
    fn band_limited_noise_gives_its_99_percent_bandwidth_within_one_bin() {
        let len = 1 << 17;
        let mut spec = vec![Cf32::default(); len];
        let mut rng = ChaCha8Rng::seed_from_u64(5);
        let d = Normal::new(0.0, 1.0).unwrap();
        for (b, centre) in [(0.25f64, 0.0f64), (0.1, 0.2), (0.6, -0.05)] {
            let lo = ((centre - b / 2.0) * len as f64).round() as i64;
            let hi = ((centre + b / 2.0) * len as f64).round() as i64;
            spec.iter_mut().for_each(|s| *s = Cf32::default());
            for k in lo..hi {
                spec[k.rem_euclid(len as i64) as usize] =
                    Cf32::new(d.sample(&mut rng) as f32, d.sample(&mut rng) as f32);
            }
            let mut x = spec.clone();
            FftPlanner::new().plan_fft_inverse(len).process(&mut x);
            let scale = 1.0 / (len as f32).sqrt() * 0.01;
            x.iter_mut().for_each(|s| *s *= scale);
            let psd = welch_psd(&cap(&x), 4096, 2048).unwrap().unwrap();
            let obw = psd.occupied_bandwidth(0.99).unwrap();
            let expect = 0.99 * (hi - lo) as f64 / len as f64;
            let bin = 1.0 / 4096.0;
            assert!(
                (obw.width() - expect).abs() <= bin,
                "B={b}: {} vs {expect}",
                obw.width()
            );
            assert!(
                (0.5 * (obw.lower + obw.upper) - centre).abs() <= bin,
                "centre {centre}"
            );
        }
    }

    // Blind second-order IQ-imbalance estimate (common practice, from memory):
    // apply the crate's convention I = x, Q = g·(y·cos φ − x·sin φ) (as synth
    // does) to circular noise and recover g, φ.
    // Tolerance: each variance has relative standard error sqrt(2/n), so the
    // ratio in dB has ≈ 4.34·sqrt(4/n) ≈ 0.0085 dB for n = 2^20; the correlation
    // ≈ 1/sqrt(n) rad ≈ 0.056°. 0.05 dB and 0.3° are about 6 standard errors.
    #[test]
    fn blind_iq_imbalance_recovers_an_applied_gain_and_phase_error() {
        let (g, phi_deg) = (1.1f64, 4.0f64);
        let phi = phi_deg.to_radians();
        let x: Vec<Cf32> = noise(1 << 20, 21, 0.1)
            .into_iter()
            .map(|s| {
                let (i, q) = (f64::from(s.re), f64::from(s.im));
                Cf32::new(i as f32, (g * (q * phi.cos() - i * phi.sin())) as f32)
            })
            .collect();
        let c = cap(&x);
        let o = StatsOptions::default();
        let st = capture_stats(&c, &o, &|_| {}).unwrap();
        let r = info_report(&c, &st, &o);
        let gain_db = r.iq_gain_imbalance_db.unwrap();
        assert!((gain_db - 20.0 * g.log10()).abs() < 0.05, "{gain_db}");
        assert!((r.iq_phase_imbalance_deg.unwrap() - phi_deg).abs() < 0.3);
    }

    #[test]
    fn figures_are_bit_identical_for_one_two_and_five_threads_and_any_progress() {
        let x = noise(300_001, 9, 0.2);
        let c = cap(&x);
        let o = StatsOptions {
            chunk_samples: 4099,
            ..StatsOptions::default()
        };
        let run = |threads| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap()
                .install(|| capture_stats(&c, &o, &|_| {}).unwrap())
        };
        let one = run(1);
        assert_eq!(one, run(2));
        assert_eq!(one, run(5));
        // Slow reference for the moments: one f64 pass in sample order.
        let mean: f64 = x.iter().map(|s| f64::from(s.norm_sqr())).sum::<f64>() / x.len() as f64;
        assert!((one.mean_power / mean - 1.0).abs() < 1e-6);
    }

    #[test]
    fn a_capped_segment_count_spreads_evenly_and_includes_the_last_segment() {
        let mut x = vec![Cf32::default(); 100 * 64 + 64];
        let n = x.len();
        x[n - 10] = Cf32::new(0.5, 0.0); // energy only in the final segment
        let psd = welch_psd(&cap(&x), 128, 4).unwrap().unwrap();
        assert_eq!(psd.segments_averaged, 4);
        assert_eq!(psd.segments_available, 100);
        assert!(psd.total_power() > 0.0);
    }

    #[test]
    fn one_sample_gives_no_spectrum_and_zero_power_gives_null_decibels() {
        let c = cap(&[Cf32::default()]);
        let o = StatsOptions::default();
        let st = capture_stats(&c, &o, &|_| {}).unwrap();
        assert!(st.psd.is_none());
        let r = info_report(&c, &st, &o);
        assert_eq!(r.mean_power_dbfs, None);
        assert_eq!(r.iq_gain_imbalance_db, None);
        let json = serde_json::to_string(&r).unwrap();
        assert!(!json.contains("NaN") && json.contains("\"mean_power_dbfs\":null"));
    }
}
