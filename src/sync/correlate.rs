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
//! `E_w[n] = Σ_{m<L} |x[n+m]|²` is the window energy, kept as an f64 running sum that
//! restarts from a direct sum at fixed points of every block (so long captures cannot
//! drift and results do not depend on where a caller's chunks or lag ranges begin, only
//! on the fixed block grid). The running sum is one serial chain of dependent f64
//! additions; to keep it off the critical path each block's lags are split into
//! `ENERGY_LANES` (8) contiguous lanes, each restarting from its own direct sum, and the
//! lanes are advanced in lockstep so the CPU overlaps their chains.
use std::sync::Arc;

use rustfft::{Fft, FftPlanner};

use crate::Cf32;

/// Relative floor for the window energy: a window whose energy is below this
/// fraction of the energy in its FFT block is numerically silent at f32 precision
/// (the correlation there is FFT rounding noise), so its metric is defined as 0.
const SILENT_WINDOW_RELATIVE: f64 = 1e-10;

/// Independent running-sum lanes per FFT block (see the module doc).
pub(crate) const ENERGY_LANES: usize = 8;

/// Per-thread work buffers of [`OverlapSave::scan_block`] (from
/// [`OverlapSave::scan_buffers`]).
pub(crate) struct ScanBuffers {
    /// Best `|c|²` over the references, per lag of the block.
    c2: Vec<f32>,
    /// Index of the best reference, per lag (as f32 so the select vectorises).
    best: Vec<f32>,
    /// `|x|²` in f64 for every input sample of the block, zero-padded by the lane slack.
    en: Vec<f64>,
    /// Window energy per lag.
    ew: Vec<f64>,
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
        OverlapSave {
            fft_len,
            ref_len,
            fwd,
            inv,
            spectra,
            fft_scratch_len,
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

    /// Scan one FFT block of the metric.
    ///
    /// `input` must hold at least `first + count + L − 1` samples starting at the block
    /// start (the caller zero-pads); lags `first .. first+count` of this block
    /// (`first + count ≤ step()`) are evaluated. For every lag whose metric
    /// `ρ = |c|²/(E_r·E_w)` is `≥ threshold` (pass a negative threshold to get every
    /// lag), `emit(lag_in_block, ρ, best_reference)` is called in increasing lag order.
    /// `bufs` are the caller's work buffers ([`OverlapSave::scan_buffers`]).
    /// Work buffers for [`OverlapSave::scan_block`].
    pub(crate) fn scan_buffers(&self) -> ScanBuffers {
        let q = self.step().div_ceil(ENERGY_LANES);
        ScanBuffers {
            c2: vec![0.0; self.step()],
            best: vec![0.0; self.step()],
            en: vec![0.0; self.fft_len + ENERGY_LANES],
            ew: vec![0.0; q * ENERGY_LANES],
        }
    }

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
        let (buf, rest) = scratch.split_at_mut(self.fft_len);
        let (work, fft_scratch) = rest.split_at_mut(self.fft_len);
        self.load_forward(input, 0, buf, fft_scratch);
        let n_in = self.fft_len.min(input.len());
        let en = &mut bufs.en;
        for (e, v) in en[..n_in].iter_mut().zip(input) {
            *e = energy(*v);
        }
        en[n_in..].fill(0.0);
        let block_energy = sum_lanes(&en[..n_in]);
        let floor = SILENT_WINDOW_RELATIVE * block_energy;
        // Compare |c|² ≥ γ·E_r·E_w without dividing; divide only for emitted lags.
        let scaled = threshold * ref_energy;
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
        // Window energies: lane a covers lags [a·q, (a+1)·q) of the block whatever
        // `first` is; only the lanes holding lags of this scan are run.
        let q = self.step().div_ceil(ENERGY_LANES);
        let (a_lo, a_hi) = (first / q, end.div_ceil(q));
        let mut acc = [0.0f64; ENERGY_LANES];
        for t in 0..q {
            for (a, ew_a) in acc.iter_mut().enumerate().take(a_hi).skip(a_lo) {
                let j = a * q + t;
                if t == 0 {
                    *ew_a = sum_lanes(&en[j..j + l]);
                } else {
                    *ew_a += en[j + l - 1] - en[j - 1];
                }
                if *ew_a <= floor {
                    *ew_a = sum_lanes(&en[j..j + l]);
                }
                bufs.ew[j] = *ew_a;
            }
        }
        for (j, ((&c, &b), &ew)) in c2
            .iter()
            .zip(best.iter())
            .zip(&bufs.ew[first..end])
            .enumerate()
        {
            let i = first + j;
            let c = f64::from(c);
            if threshold >= 0.0 && c < scaled * ew {
                continue;
            }
            let rho = if ew > floor && ew > 0.0 {
                (c / (ref_energy * ew)).min(1.0)
            } else {
                0.0
            };
            if rho >= threshold {
                emit(i, rho, b as usize);
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

/// Sum in f64 with `ENERGY_LANES` accumulators in a fixed order (vectorisable, and the
/// same value on every call with the same input).
fn sum_lanes(v: &[f64]) -> f64 {
    let mut acc = [0.0f64; ENERGY_LANES];
    let mut it = v.chunks_exact(ENERGY_LANES);
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

    #[test]
    fn overlap_save_with_reference_as_long_as_the_fft_still_matches_direct() {
        let refs = vec![random_symbols(64, 9)];
        check(&random_symbols(300, 10), &refs, 64, true);
    }
}
