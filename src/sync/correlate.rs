//! Overlap-save FFT cross-correlation and the normalised detection metric.
//!
//! Takes in: complex baseband samples ([`Cf32`]) and one or more reference
//! waveforms of equal length `L` (the shaped training, possibly frequency-shifted
//! per carrier-offset hypothesis).
//!
//! Gives out: the *valid* cross-correlation `c[n] = Σ_{m=0}^{L−1} conj(r[m])·x[n+m]`
//! for `n = 0 ..= len−L` (no wrap-around, no zero-padding of the input), computed
//! block-wise by overlap-save: each block of `N` input samples (the FFT length) yields
//! `N − L + 1` correct outputs, and consecutive blocks overlap by `L − 1` samples.
//!
//! FFT normalisation: rustfft is unnormalised in both directions; the `1/N` of the
//! inverse transform is folded into the stored reference spectra, so outputs are in
//! the units of the direct sum above.
//!
//! The scan kernel (`OverlapSave::scan_block`) fuses the correlation with the
//! normalised metric `ρ[n] = |c[n]|² / (E_r · E_w[n])` where `E_r = Σ|r|²` and
//! `E_w[n] = Σ_{m<L} |x[n+m]|²` is the window energy.
//!
//! ## Lag groups and the pruning bound
//!
//! The lags of a block are taken in groups of `G` (a power of two, `L/4` clamped to
//! 4 ..= 32, at fixed positions `g·G` of the block). Within a group, `E_w` is an f64
//! running sum that starts from a direct sum at the group's first lag (and restarts
//! from a direct sum whenever it falls to the silence floor), so long captures cannot
//! drift and a lag's value depends only on the fixed block grid, never on where a
//! caller's chunks or lag ranges begin.
//!
//! With a positive threshold `γ` most groups never need those sums. Every window of
//! the lags `g·G ..< (g+1)·G` contains the samples `g·G+G−1 ..< g·G+L`, so (energies
//! being non-negative) the energy `B_g` of the `⌊L/G⌋ − 1` whole sample groups inside
//! that span is a lower bound on every `E_w` of the group. A lag is reported only if
//! `|c|² ≥ γ·E_r·E_w`; hence if `max_group |c|² < γ·E_r·(B_g − δ)` no lag of the group
//! can be, and the group is skipped. `δ = 10⁻⁹ × block energy` covers the f64
//! rounding of `B_g` and of the running sums (sums of at most `L + 2G` non-negative
//! terms from a direct sum: error below `(L + 2G)·2⁻⁵³` of the block energy, under
//! 10⁻¹¹ for any reference up to 2¹⁶ samples). On noise and on payload the bound rejects nearly every
//! group (for `L = 257`, `B_g` is 224/257 of the window while the threshold is far
//! above noise-level metrics), so the per-lag cost is the FFTs, `|c|²` and a max.
//! A NaN anywhere in the block's `|c|²` (non-finite input) disables the skip for
//! that block, so such blocks are evaluated lag by lag exactly as before.
use std::sync::Arc;

use rustfft::{Fft, FftPlanner};

use crate::Cf32;

/// Relative floor for the window energy: a window whose energy is below this
/// fraction of the energy in its FFT block is numerically silent at f32 precision
/// (the correlation there is FFT rounding noise), so its metric is defined as 0.
const SILENT_WINDOW_RELATIVE: f64 = 1e-10;

/// Accumulators of [`sum_lanes`].
const SUM_LANES: usize = 8;

/// Largest lag group `G` (module doc).
const MAX_GROUP: usize = 32;

/// Margin `δ` of the pruning bound, relative to the block energy (module doc).
const PRUNE_MARGIN_RELATIVE: f64 = 1e-9;

/// Per-thread work buffers of [`OverlapSave::scan_block`] (from
/// [`OverlapSave::scan_buffers`]).
pub(crate) struct ScanBuffers {
    /// Best `|c|²` over the references, per lag of the block.
    c2: Vec<f32>,
    /// Index of the best reference, per lag (as f32 so the select vectorises).
    best: Vec<f32>,
    /// `|x|²` in f64 for every input sample of the block, zero-padded by the lane slack.
    en: Vec<f64>,
    /// Energy of each group of `G` input samples, plus one zero entry.
    group_energy: Vec<f64>,
}

/// Overlap-save cross-correlator with a bank of equal-length references.
///
/// Plan once with [`OverlapSave::new`], then call [`OverlapSave::process_into`] with
/// caller-owned buffers from any number of threads (the FFT plans are shared `Arc`s).
pub struct OverlapSave {
    fft_len: usize,
    ref_len: usize,
    fwd: Arc<dyn Fft<f32>>,
    inv: Arc<dyn Fft<f32>>,
    /// Per reference: `S = conj(FFT(r zero-padded to N)) / N`, stored split for
    /// the multiply (see [`SplitSpectrum`]).
    spectra: Vec<SplitSpectrum>,
    fft_scratch_len: usize,
    /// Lag group length `G` of the scan (module doc).
    group: usize,
}

impl std::fmt::Debug for OverlapSave {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("OverlapSave")
            .field("fft_len", &self.fft_len)
            .field("ref_len", &self.ref_len)
            .field("references", &self.spectra.len())
            .finish()
    }
}

impl OverlapSave {
    /// Plan a correlator for `references` (all the same non-zero length `L`) with
    /// FFT length `fft_len`.
    ///
    /// # Panics
    /// If `references` is empty, the references differ in length or are empty, or
    /// `fft_len < L` (programmer errors: the synchroniser validates its inputs first).
    pub fn new(references: &[Vec<Cf32>], fft_len: usize) -> OverlapSave {
        assert!(
            !references.is_empty(),
            "OverlapSave needs at least one reference"
        );
        let ref_len = references[0].len();
        assert!(ref_len > 0, "OverlapSave reference must not be empty");
        assert!(
            references.iter().all(|r| r.len() == ref_len),
            "OverlapSave references must have equal lengths"
        );
        assert!(
            fft_len >= ref_len,
            "FFT length {fft_len} shorter than reference {ref_len}"
        );
        let mut planner = FftPlanner::<f32>::new();
        let fwd = planner.plan_fft_forward(fft_len);
        let inv = planner.plan_fft_inverse(fft_len);
        let fft_scratch_len = fwd
            .get_inplace_scratch_len()
            .max(inv.get_inplace_scratch_len());
        let scale = 1.0 / fft_len as f32;
        let mut scratch = vec![Cf32::new(0.0, 0.0); fft_scratch_len];
        let spectra = references
            .iter()
            .map(|r| {
                let mut s = vec![Cf32::new(0.0, 0.0); fft_len];
                s[..ref_len].copy_from_slice(r);
                fwd.process_with_scratch(&mut s, &mut scratch);
                for v in s.iter_mut() {
                    *v = v.conj() * scale;
                }
                SplitSpectrum::new(&s)
            })
            .collect();
        // G: L/4 rounded down to a power of two, clamped to 4 ..= MAX_GROUP, and
        // dividing the FFT length so groups tile the block.
        let quarter = (ref_len / 4).max(1);
        let group = (1usize << quarter.ilog2())
            .clamp(4, MAX_GROUP)
            .min(fft_len & fft_len.wrapping_neg());
        OverlapSave {
            fft_len,
            ref_len,
            fwd,
            inv,
            spectra,
            fft_scratch_len,
            group,
        }
    }

    /// A sensible FFT length for a reference of `ref_len` samples: the next power of
    /// two of `4·L`, at least 4096 (cost per output ∝ N·log N / (N − L + 1)).
    pub fn default_fft_len(ref_len: usize) -> usize {
        (4 * ref_len.max(1)).max(4096).next_power_of_two()
    }

    /// FFT length `N`.
    pub fn fft_len(&self) -> usize {
        self.fft_len
    }

    /// Reference length `L`.
    pub fn ref_len(&self) -> usize {
        self.ref_len
    }

    /// Number of references in the bank.
    pub fn references(&self) -> usize {
        self.spectra.len()
    }

    /// Valid outputs per FFT block, `N − L + 1`.
    pub fn step(&self) -> usize {
        self.fft_len - self.ref_len + 1
    }

    /// Number of valid correlation lags for an input of `input_len` samples
    /// (`input_len − L + 1`, or 0 when the input is shorter than the reference).
    pub fn output_len(&self, input_len: usize) -> usize {
        (input_len + 1).saturating_sub(self.ref_len)
    }

    /// Scratch length (complex samples) needed by [`OverlapSave::process_into`] and
    /// the scan kernel: two FFT buffers plus the FFT's own scratch.
    pub fn scratch_len(&self) -> usize {
        2 * self.fft_len + self.fft_scratch_len
    }

    /// Correlate `input` with every reference: `out[h·M + n] = Σ_m conj(r_h[m])·input[n+m]`
    /// with `M = output_len(input.len())`, reference-major.
    ///
    /// Scratch contents on entry are irrelevant.
    ///
    /// # Panics
    /// If `out.len() != references()·output_len(input.len())` or
    /// `scratch.len() < scratch_len()`.
    pub fn process_into(&self, input: &[Cf32], out: &mut [Cf32], scratch: &mut [Cf32]) {
        let m = self.output_len(input.len());
        assert_eq!(
            out.len(),
            m * self.spectra.len(),
            "OverlapSave output length"
        );
        assert!(
            scratch.len() >= self.scratch_len(),
            "OverlapSave scratch too short"
        );
        let (buf, rest) = scratch.split_at_mut(self.fft_len);
        let (work, fft_scratch) = rest.split_at_mut(self.fft_len);
        let step = self.step();
        let mut b = 0;
        while b < m {
            self.load_forward(input, b, buf, fft_scratch);
            let valid = step.min(m - b);
            for (h, spec) in self.spectra.iter().enumerate() {
                self.inverse(spec, buf, work, fft_scratch);
                out[h * m + b..h * m + b + valid].copy_from_slice(&work[..valid]);
            }
            b += step;
        }
    }

    /// Convenience form of [`OverlapSave::process_into`] that allocates once.
    pub fn process(&self, input: &[Cf32]) -> Vec<Cf32> {
        let mut out = vec![Cf32::new(0.0, 0.0); self.output_len(input.len()) * self.references()];
        let mut scratch = vec![Cf32::new(0.0, 0.0); self.scratch_len()];
        self.process_into(input, &mut out, &mut scratch);
        out
    }

    /// Copy `input[b .. b+N]` (zero-filled past the end) into `buf` and transform it.
    fn load_forward(&self, input: &[Cf32], b: usize, buf: &mut [Cf32], fft_scratch: &mut [Cf32]) {
        let end = (b + self.fft_len).min(input.len());
        let n = end - b;
        buf[..n].copy_from_slice(&input[b..end]);
        buf[n..].fill(Cf32::new(0.0, 0.0));
        self.fwd.process_with_scratch(buf, fft_scratch);
    }

    fn inverse(
        &self,
        spec: &SplitSpectrum,
        buf: &[Cf32],
        work: &mut [Cf32],
        fft_scratch: &mut [Cf32],
    ) {
        spec.multiply(buf, work);
        self.inv.process_with_scratch(work, fft_scratch);
    }

    /// Work buffers for [`OverlapSave::scan_block`].
    pub(crate) fn scan_buffers(&self) -> ScanBuffers {
        let g = self.group;
        ScanBuffers {
            c2: vec![0.0; self.step()],
            best: vec![0.0; self.step()],
            en: vec![0.0; self.fft_len + SUM_LANES],
            group_energy: vec![0.0; self.fft_len / g + 1],
        }
    }

    /// Scan one FFT block of the metric.
    ///
    /// `input` must hold at least `first + count + L − 1` samples starting at the block
    /// start (the caller zero-pads); lags `first .. first+count` of this block
    /// (`first + count ≤ step()`) are evaluated. For every lag whose metric
    /// `ρ = |c|²/(E_r·E_w)` is `≥ threshold` (pass a negative threshold to get every
    /// lag), `emit(lag_in_block, ρ, best_reference)` is called in increasing lag order.
    /// `bufs` are the caller's work buffers ([`OverlapSave::scan_buffers`]).
    ///
    /// Lags are handled in groups of `G` (fixed positions in the block, see the module
    /// doc); with a positive threshold a group is skipped when a lower bound on its
    /// window energies proves that no lag of it can reach the threshold, so the result
    /// is the same as evaluating every lag.
    #[allow(clippy::too_many_arguments)]
    pub(crate) fn scan_block(
        &self,
        input: &[Cf32],
        first: usize,
        count: usize,
        ref_energy: f64,
        threshold: f64,
        scratch: &mut [Cf32],
        bufs: &mut ScanBuffers,
        emit: &mut impl FnMut(usize, f64, usize),
    ) {
        debug_assert!(first + count <= self.step());
        let l = self.ref_len;
        let g = self.group;
        let (buf, rest) = scratch.split_at_mut(self.fft_len);
        let (work, fft_scratch) = rest.split_at_mut(self.fft_len);
        self.load_forward(input, 0, buf, fft_scratch);
        let n_in = self.fft_len.min(input.len());
        let en = &mut bufs.en;
        for (e, v) in en[..n_in].iter_mut().zip(input) {
            *e = energy(*v);
        }
        en[n_in..].fill(0.0);
        // Energy of every group of G input samples (the last entry stays 0 so the
        // bound below may read one group past the block).
        let ge = &mut bufs.group_energy;
        for (s, c) in ge.iter_mut().zip(en[..self.fft_len].chunks_exact(g)) {
            *s = sum_lanes(c);
        }
        ge[self.fft_len / g] = 0.0;
        let block_energy = sum_lanes(&ge[..n_in.div_ceil(g)]);
        let floor = SILENT_WINDOW_RELATIVE * block_energy;
        let end = first + count;
        let c2 = &mut bufs.c2[first..end];
        let best = &mut bufs.best[first..end];
        for (h, spec) in self.spectra.iter().enumerate() {
            self.inverse(spec, buf, work, fft_scratch);
            let w = &work[first..end];
            if h == 0 {
                for ((c, b), v) in c2.iter_mut().zip(best.iter_mut()).zip(w) {
                    *c = v.norm_sqr();
                    *b = 0.0;
                }
            } else {
                // Branch-free select written as arithmetic on same-width lanes
                // (index held as f32, exact below 2^24; `b + 1·(h − b) = h`
                // exactly for such integers) so the loop vectorises.
                let hu = h as f32;
                for ((c, b), v) in c2.iter_mut().zip(best.iter_mut()).zip(w) {
                    let p = v.norm_sqr();
                    let gt = f32::from(u8::from(p > *c));
                    *b += gt * (hu - *b);
                    *c = c.max(p);
                }
            }
        }
        let c2 = &bufs.c2;
        let best = &bufs.best;
        // Compare |c|² ≥ γ·E_r·E_w without dividing; divide only for emitted lags.
        let scaled = threshold * ref_energy;
        // Whole groups inside the common part of a group's windows (module doc).
        let inner = (l / g).saturating_sub(1);
        let margin = PRUNE_MARGIN_RELATIVE * block_energy;
        let prune = threshold > 0.0 && inner > 0 && !has_nan(&c2[first..end]);
        for gi in first / g..end.div_ceil(g) {
            let g0 = gi * g;
            let (lo, hi) = (first.max(g0), end.min(g0 + g));
            if prune {
                let peak = c2[lo..hi].iter().fold(0.0f32, |m, &c| m.max(c));
                let bound: f64 = ge[gi + 1..gi + 1 + inner].iter().sum();
                if f64::from(peak) < scaled * (bound - margin) {
                    continue;
                }
            }
            // Exact window energies of the group: a direct sum at the group start,
            // then the running sum (restarted by a direct sum near silence).
            let mut ew = sum_lanes(&en[g0..g0 + l]);
            for i in g0..hi {
                if i > g0 {
                    ew += en[i + l - 1] - en[i - 1];
                    if ew <= floor {
                        ew = sum_lanes(&en[i..i + l]);
                    }
                }
                if i < lo {
                    continue;
                }
                let c = f64::from(c2[i]);
                if threshold >= 0.0 && c < scaled * ew {
                    continue;
                }
                let rho = if ew > floor && ew > 0.0 {
                    (c / (ref_energy * ew)).min(1.0)
                } else {
                    0.0
                };
                if rho >= threshold {
                    emit(i, rho, best[i] as usize);
                }
            }
        }
    }
}

/// A spectrum `S` laid out for a shuffle-light complex multiply on flat `f32`
/// runs: `a = [Re S₀, Re S₀, Re S₁, Re S₁, …]`, `b = [−Im S₀, Im S₀, −Im S₁, …]`, so
/// that with `x` the flat (re, im) run of the input, `(x·S)[j] = x[j]·a[j] +
/// x[j^1]·b[j]`. Same IEEE results as the textbook form: `xr·sr + xi·(−si)` is
/// exactly `xr·sr − xi·si`, and the imaginary part only swaps the operands of an
/// addition.
struct SplitSpectrum {
    a: Vec<f32>,
    b: Vec<f32>,
}

impl SplitSpectrum {
    fn new(s: &[Cf32]) -> SplitSpectrum {
        let a = s.iter().flat_map(|v| [v.re, v.re]).collect();
        let b = s.iter().flat_map(|v| [-v.im, v.im]).collect();
        SplitSpectrum { a, b }
    }

    /// `out[k] = x[k]·S[k]` for `k < min(x.len(), out.len(), N)`.
    fn multiply(&self, x: &[Cf32], out: &mut [Cf32]) {
        let x: &[f32] = bytemuck::cast_slice(x);
        let out: &mut [f32] = bytemuck::cast_slice_mut(out);
        for (((o, x), a), b) in out
            .chunks_exact_mut(2)
            .zip(x.chunks_exact(2))
            .zip(self.a.chunks_exact(2))
            .zip(self.b.chunks_exact(2))
        {
            o[0] = x[0] * a[0] + x[1] * b[0];
            o[1] = x[1] * a[1] + x[0] * b[1];
        }
    }
}

/// Whether any value of a run of non-negative `|c|²` values is NaN: their sum, in
/// `SUM_LANES` accumulators so the loop vectorises, is NaN exactly then (adding
/// non-negative values can overflow to +∞ but never makes a NaN).
fn has_nan(v: &[f32]) -> bool {
    let mut acc = [0.0f32; SUM_LANES];
    let mut it = v.chunks_exact(SUM_LANES);
    for c in &mut it {
        for (a, x) in acc.iter_mut().zip(c) {
            *a += *x;
        }
    }
    acc.iter().chain(it.remainder()).sum::<f32>().is_nan()
}

/// Sum in f64 with `SUM_LANES` accumulators in a fixed order (vectorisable, and the
/// same value on every call with the same input).
fn sum_lanes(v: &[f64]) -> f64 {
    let mut acc = [0.0f64; SUM_LANES];
    let mut it = v.chunks_exact(SUM_LANES);
    for c in &mut it {
        for (a, x) in acc.iter_mut().zip(c) {
            *a += *x;
        }
    }
    let mut s = ((acc[0] + acc[1]) + (acc[2] + acc[3])) + ((acc[4] + acc[5]) + (acc[6] + acc[7]));
    for x in it.remainder() {
        s += *x;
    }
    s
}

#[inline]
fn energy(v: Cf32) -> f64 {
    let re = f64::from(v.re);
    let im = f64::from(v.im);
    re * re + im * im
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testutil::{direct_correlation, first_difference, random_symbols};

    /// Tolerance: f32 FFT of length N has relative RMS error ~ ε·log2 N (ε = 6e-8);
    /// we allow 2e-5 of the scale Σ|r|·max|x| — common practice for f32 FFT checks.
    fn check(input: &[Cf32], refs: &[Vec<Cf32>], fft_len: usize, garbage: bool) {
        let os = OverlapSave::new(refs, fft_len);
        let m = os.output_len(input.len());
        let mut out = vec![Cf32::new(f32::NAN, f32::NAN); m * refs.len()];
        let fill = if garbage {
            Cf32::new(1e30, -7.0)
        } else {
            Cf32::new(0.0, 0.0)
        };
        let mut scratch = vec![fill; os.scratch_len() + 3];
        os.process_into(input, &mut out, &mut scratch);
        let xmax = input.iter().map(|v| v.norm()).fold(0.0f32, f32::max);
        for (h, r) in refs.iter().enumerate() {
            let want = direct_correlation(input, r);
            assert_eq!(want.len(), m);
            let rsum: f32 = r.iter().map(|v| v.norm()).sum();
            let tol = 2e-5 * rsum * xmax.max(1e-30);
            if let Some((i, a, b)) = first_difference(&out[h * m..(h + 1) * m], &want, tol) {
                panic!(
                    "len {} ref {} fft {fft_len} ref#{h}: first difference at lag {i}: {a} vs {b} (tol {tol})",
                    input.len(),
                    r.len()
                );
            }
        }
    }

    #[test]
    fn overlap_save_matches_direct_correlation_over_swept_sizes() {
        // Sizes include 0, 1, primes, exactly one block, one block plus one.
        for &ref_len in &[1usize, 2, 7, 31, 97] {
            let fft_len = 128usize.max((2 * ref_len).next_power_of_two());
            let step = fft_len - ref_len + 1;
            for &n in &[
                0usize,
                1,
                2,
                13,
                ref_len - 1,
                ref_len,
                ref_len + 1,
                127,
                257,
                fft_len,
                fft_len + step,
                1031,
            ] {
                let input = random_symbols(n, 11 + n as u64);
                let refs = vec![random_symbols(ref_len, 3), random_symbols(ref_len, 4)];
                check(&input, &refs, fft_len, false);
                check(&input, &refs, fft_len, true);
            }
        }
    }

    #[test]
    fn split_spectrum_multiply_is_bit_identical_to_the_complex_product() {
        // Slow twin: num-complex's own `Complex * Complex` (the textbook
        // (ac − bd) + (ad + bc)i), compared bit for bit; sizes 0, 1, 2, 13, 4096.
        for n in [0usize, 1, 2, 13, 4096] {
            let s = random_symbols(n, 21);
            let x = random_symbols(n, 22);
            let split = SplitSpectrum::new(&s);
            let mut out = vec![Cf32::new(f32::NAN, f32::NAN); n];
            split.multiply(&x, &mut out);
            for k in 0..n {
                let want = x[k] * s[k];
                assert_eq!(out[k].re.to_bits(), want.re.to_bits(), "n={n} k={k}");
                assert_eq!(out[k].im.to_bits(), want.im.to_bits(), "n={n} k={k}");
            }
        }
    }

    /// Every (block-relative lag, ρ bits, reference) the scan emits over `x`.
    fn scan_all(
        os: &OverlapSave,
        x: &[Cf32],
        ref_energy: f64,
        threshold: f64,
    ) -> Vec<(usize, u64, usize)> {
        let (l, step) = (os.ref_len(), os.step());
        let mut padded = x.to_vec();
        padded.resize(x.len() + os.fft_len(), Cf32::new(0.0, 0.0));
        let lags = os.output_len(x.len());
        let mut scratch = vec![Cf32::new(0.0, 0.0); os.scratch_len()];
        let mut bufs = os.scan_buffers();
        let mut out = Vec::new();
        let mut b = 0;
        while b < lags {
            let count = step.min(lags - b);
            os.scan_block(
                &padded[b..b + count + l - 1],
                0,
                count,
                ref_energy,
                threshold,
                &mut scratch,
                &mut bufs,
                &mut |i, rho, h| out.push((b + i, rho.to_bits(), h)),
            );
            b += step;
        }
        out
    }

    #[test]
    fn group_pruning_emits_exactly_what_a_lag_by_lag_evaluation_emits() {
        // Slow twin: the same scan with a negative threshold (no group is skipped,
        // every lag evaluated), then filtered by ρ ≥ γ. Inputs are built to stress
        // the bound: reference copies from 0.05 to 1.0 of full strength in noise, a
        // stretch of exact zeros, a strong burst followed by zeros, a quiet region
        // (1e-6) beside a loud one, and one block holding a NaN and one an infinity.
        let l = 257;
        let r = random_symbols(l, 5);
        let mut e_r = 0.0f64;
        for v in &r {
            e_r += f64::from(v.norm_sqr());
        }
        let refs = vec![
            r.clone(),
            r.iter().map(|v| v * Cf32::new(0.0, 1.0)).collect(),
        ];
        let os = OverlapSave::new(&refs, OverlapSave::default_fft_len(l));
        assert_eq!(os.group, 32);
        let mut x = random_symbols(60_000, 6);
        for v in x.iter_mut() {
            *v *= 0.05;
        }
        for (k, a) in [0.05f32, 0.1, 0.2, 0.4, 0.7, 1.0].iter().enumerate() {
            let at = 1_000 + k * 4_111;
            for (m, v) in r.iter().enumerate() {
                x[at + m] += v * *a;
            }
        }
        x[30_000..34_000].fill(Cf32::new(0.0, 0.0));
        for (m, v) in r.iter().enumerate() {
            x[35_000 + m] = *v;
        }
        x[35_000 + l..40_000].fill(Cf32::new(0.0, 0.0));
        for v in &mut x[40_000..46_000] {
            *v *= 2e-5;
        }
        for (m, v) in r.iter().enumerate() {
            x[43_000 + m] += v * 1e-6;
        }
        x[50_001] = Cf32::new(f32::NAN, 0.0);
        x[55_555] = Cf32::new(f32::INFINITY, 1.0);
        for x in [&x[..], &x[..45_000]] {
            let every = scan_all(&os, x, e_r, -1.0);
            assert_eq!(every.len(), os.output_len(x.len()));
            for gamma in [0.01, 0.05, 0.2, 0.5, 0.9, 1.0] {
                let want: Vec<_> = every
                    .iter()
                    .filter(|(_, rho, _)| f64::from_bits(*rho) >= gamma)
                    .copied()
                    .collect();
                let got = scan_all(&os, x, e_r, gamma);
                assert_eq!(got, want, "threshold {gamma}");
                if gamma == 0.2 {
                    // The copies from 0.2 up are found (the check is not vacuous).
                    assert!(got.iter().any(|(i, _, _)| *i == 1_000 + 2 * 4_111));
                }
            }
        }
    }

    #[test]
    fn overlap_save_with_reference_as_long_as_the_fft_still_matches_direct() {
        let refs = vec![random_symbols(64, 9)];
        check(&random_symbols(300, 10), &refs, 64, true);
    }
}
