//! Per-burst refinement and symbol extraction.
//!
//! Takes in: a [`SampleSource`], a [`Detection`] from the search, or a [`BurstSync`].
//! Gives out: [`BurstSync`] (fractional timing, CFO, phase) and matched-filtered,
//! timing- and CFO-corrected symbol-rate samples for a range of symbol indices
//! (0 = first training symbol, negative before it).
//!
//! A symbol is *available* when its instant lies inside the capture
//! (`0 ≤ t₀ + k·sps·(1 + ε) ≤ len − 1`, ε the burst's clock offset, 0 unless set). Samples the matched filter or the interpolator need
//! beyond either end of the capture are taken as zero, so the outermost symbols of a
//! burst that touches a capture edge are computed with part of their pulse missing.
use std::ops::Range;

use super::timing::{
    best_instant, golden_max, interpolate_with, sinc_weights, sinc_weights_f64,
    training_correlation, SINC_HALF,
};
use super::{
    cfo, derotate_run, read_padded, BurstSync, Detection, SampleSource, SymbolSpan, SyncError,
    Synchroniser,
};
use crate::channel::{fit_taps, ChannelFitConfig};
use crate::{Cf32, Cf64};

/// Symbols processed per piece in [`Synchroniser::extract_symbols`] (bounds memory).
const EXTRACT_PIECE_SYMBOLS: i64 = 4096;

/// Pre- and post-cursor taps fitted (at most) by the channel-aware CFO estimate: 3 each
/// side covers the usual test channels (Proakis B and C centred on their main tap).
const CFO_FIT_HALF_SPAN: usize = 3;

/// Complex samples per [`dot_real_taps`] step (the folded filter is zero-padded to a
/// multiple of this).
const FOLD_LANES: usize = 4;

/// The folded extraction filter `g = w ∗ p` (interpolator weights `w`, pulse `p`),
/// computed in f64, rounded to f32 and written twice per tap (`g2[2q] = g2[2q+1] = g_q`,
/// one copy for the real and one for the imaginary part); the tail of `g2` is zero.
fn folded_taps(pulse: &[f32], w: &[f64], g2: &mut [f32]) {
    let mut g = vec![0.0f64; g2.len() / 2];
    for (i, wi) in w.iter().enumerate() {
        for (m, pm) in pulse.iter().enumerate() {
            g[i + m] += wi * f64::from(*pm);
        }
    }
    for (pair, gq) in g2.chunks_exact_mut(2).zip(&g) {
        pair.fill(*gq as f32);
    }
}

/// Taps of the slope kernel ([`Synchroniser::extract_slopes`]).
const SLOPE_TAPS: usize = 2 * SINC_HALF + 2;

/// Weights of `(v(n + μ + δ) − v(n + μ − δ))/(2δ)` for a signal `v` interpolated by
/// [`sinc_weights_f64`] at both instants (`0 ≤ μ < 1`, `0 < δ < 1`): weight `j`
/// multiplies sample `n − SINC_HALF + j`.
fn slope_weights(mu: f64, delta: f64) -> [f64; SLOPE_TAPS] {
    let mut w = [0.0f64; SLOPE_TAPS];
    for (sign, s) in [(1.0, mu + delta), (-1.0, mu - delta)] {
        let ns = s.floor();
        // Sample `n + ns − SINC_HALF + 1 + i` is index `ns + 1 + i` from `n − SINC_HALF`.
        let off = (ns as i64 + 1).clamp(0, 2) as usize;
        for (slot, v) in w[off..].iter_mut().zip(sinc_weights_f64(s - ns)) {
            *slot += sign * v / (2.0 * delta);
        }
    }
    w
}

/// `Σ_q g_q·x_q` for complex `x` and real taps given as [`folded_taps`] writes them;
/// `x.len()·2 == g2.len()`, a multiple of `2·FOLD_LANES`. `2·FOLD_LANES` independent
/// f32 partial sums (`FOLD_LANES` complex lanes), added lane by lane at the end.
#[inline]
fn dot_real_taps(x: &[Cf32], g2: &[f32]) -> Cf32 {
    let xf: &[f32] = bytemuck::cast_slice(x);
    let mut acc = [0.0f32; 2 * FOLD_LANES];
    for (xc, gc) in xf
        .chunks_exact(2 * FOLD_LANES)
        .zip(g2.chunks_exact(2 * FOLD_LANES))
    {
        for l in 0..2 * FOLD_LANES {
            acc[l] += xc[l] * gc[l];
        }
    }
    let (mut re, mut im) = (0.0f32, 0.0f32);
    for pair in acc.chunks_exact(2) {
        re += pair[0];
        im += pair[1];
    }
    Cf32::new(re, im)
}

impl Synchroniser {
    /// Matched-filter outputs centred on capture samples `first .. first + count`, from
    /// samples de-rotated by `exp(−j2π·f·(n − t_ref))` (`f` in cycles/sample).
    fn mf_region<S: SampleSource + ?Sized>(
        &self,
        src: &S,
        first: i64,
        count: usize,
        f: f64,
        t_ref: f64,
    ) -> Result<Vec<Cf32>, SyncError> {
        let d = (self.pulse.len() - 1) / 2;
        let mut x = vec![Cf32::new(0.0, 0.0); count + self.pulse.len() - 1];
        let start = first - d as i64;
        read_padded(src, start, &mut x)?;
        derotate_run(&mut x, -f, |i| (start + i as i64) as f64 - t_ref);
        // Only the `count` outputs with the whole pulse inside `x` are needed:
        // `y[k] = Σ_m pulse[m]·x[k+m]`, accumulated tap by tap across all outputs
        // (vectorises over k; each output still sums its terms in tap order, as
        // `matched_filter_at` does, so the values are the same).
        let mut y = vec![Cf32::new(0.0, 0.0); count];
        for (m, &h) in self.pulse.iter().enumerate() {
            for (o, &v) in y.iter_mut().zip(&x[m..m + count]) {
                *o += v * h;
            }
        }
        Ok(y)
    }

    /// Refine a detection: coarse CFO from segment phases, fractional timing, fine CFO
    /// (channel-aware, [`cfo::periodogram_frequency`]) and carrier phase. See the module docs of [`crate::sync`].
    pub fn refine<S: SampleSource + ?Sized>(
        &self,
        src: &S,
        det: &Detection,
    ) -> Result<BurstSync, SyncError> {
        let fs = self.cfg.sample_rate_hz;
        let sps = self.cfg.sps;
        let n0 = det.start_sample as i64;
        let f_h = det.cfo_hypothesis_hz / fs;

        // Coarse: segment correlations at the detected lag against the hypothesis reference.
        let l = self.reference.len();
        let mut x = vec![Cf32::new(0.0, 0.0); l];
        read_padded(src, n0 - self.head as i64, &mut x)?;
        let s = self.cfg.cfo_segments.min(l).max(1);
        let seg = l / s;
        // conj(ref_m·e^{j2πf_h·m})·x_m = conj(ref_m)·(x_m·e^{−j2πf_h·m}): de-rotate the
        // samples with the anchored phasor instead of one sin_cos per reference sample.
        derotate_run(&mut x, -f_h, |m| m as f64);
        let segs: Vec<Cf64> = (0..s)
            .map(|j| {
                (j * seg..(j + 1) * seg)
                    .map(|m| {
                        let p = self.reference[m].conj() * x[m];
                        Cf64::new(f64::from(p.re), f64::from(p.im))
                    })
                    .sum()
            })
            .collect();
        let f_coarse = f_h + cfo::segment_frequency(&segs, seg as f64);

        // Region of matched-filter outputs covering the training ± margin.
        let n = self.training.len();
        let margin = (sps + 2 + SINC_HALF) as i64;
        let first = n0 - margin;
        let count = (n - 1) * sps + 2 * margin as usize + 1;
        let mut f = f_coarse;
        let mut t0 = n0 as f64;
        let mut radius = sps;
        // Search range of the channel-aware estimate, rad/symbol: first ± two main-lobe
        // half-widths (2π/N each) around the coarse estimate, then ± half of one.
        let lobe = std::f64::consts::TAU / n as f64;
        let mut range = 2.0 * lobe;
        for _ in 0..2 {
            let y = self.mf_region(src, first, count, f, t0)?;
            let pos = best_instant(&y, &self.training, sps, t0 - first as f64, radius);
            t0 = first as f64 + pos;
            let (pn, w) = (pos.floor(), sinc_weights(pos - pos.floor()));
            let z: Vec<Cf32> = (0..n)
                .map(|k| interpolate_with(&y, pn as i64 + (k * sps) as i64, &w))
                .collect();
            f += self.channel_aware_frequency(&z, range) / (std::f64::consts::TAU * sps as f64);
            radius = 1;
            range = 0.5 * lobe;
        }
        // Final: re-time once with the fine CFO, then phase and gain at t0. `y` was
        // de-rotated about the previous t0 (`t_ref`); about the new one it is
        // `y·exp(j2πf·(t0 − t_ref))`, a constant phase, so the correlation is rotated
        // instead of filtering the region again.
        let y = self.mf_region(src, first, count, f, t0)?;
        let pos = best_instant(&y, &self.training, sps, t0 - first as f64, 1);
        let t_ref = t0;
        t0 = first as f64 + pos;
        let corr = training_correlation(&y, &self.training, sps, pos)
            * Cf64::from_polar(1.0, std::f64::consts::TAU * f * (t0 - t_ref));
        let t_energy: f64 = self.training.iter().map(|t| f64::from(t.norm_sqr())).sum();
        let start_sample = (t0 + 0.5).floor() as i64;
        let len = src.len() as f64;
        let spsf = sps as f64;
        let k_lo = (-t0 / spsf).ceil() as i64;
        let k_hi = ((len - 1.0 - t0) / spsf).floor() as i64 + 1;
        Ok(BurstSync {
            start_sample,
            timing_frac: t0 - start_sample as f64,
            metric: det.metric,
            cfo_hz: f * fs,
            cfo_coarse_hz: f_coarse * fs,
            phase_rad: corr.arg(),
            training_gain: corr.norm() / t_energy,
            symbols_in_capture: k_lo..k_hi.max(k_lo),
            peak_instant: t0,
            sco_ppm: 0.0,
        })
    }

    /// Move a refined burst's instant to the one that minimises `cost` of the
    /// training-rate samples taken there (#15): e.g. [`crate::channel::WindowCost`],
    /// the description length of the channel fit over its tap window, so that the
    /// window holds as much of the sampled response as it can rather than being
    /// centred on the correlation peak (the channel's energy centroid).
    ///
    /// Candidates: for the peak's symbol and its two neighbours (a whole symbol moves
    /// the window by one tap), the best fractional instant within half a symbol
    /// (every whole-sample offset scored, then golden section over ±1 sample around
    /// the best to 1e-3 samples, kept only if it scores no worse). Of the three, the
    /// nearest to the peak scoring within `tolerance` of the least is kept: two
    /// alignments that both hold the whole response differ by noise only, and the
    /// burst then keeps the correlation's alignment. The samples are the
    /// same matched-filtered, CFO-corrected, interpolated values
    /// [`Synchroniser::extract_symbols`] gives; phase and gain are taken again at the
    /// chosen instant, CFO and metric are kept, `peak_instant` is kept.
    pub fn align<S: SampleSource + ?Sized>(
        &self,
        src: &S,
        bs: &BurstSync,
        cost: &dyn Fn(&[Cf32]) -> f64,
        tolerance: f64,
    ) -> Result<BurstSync, SyncError> {
        let fs = self.cfg.sample_rate_hz;
        let sps = self.cfg.sps;
        let f = bs.cfo_hz / fs;
        let t_peak = bs.instant();
        let n = self.training.len();
        let reach = (sps + sps.div_ceil(2)) as i64 + 2;
        let margin = reach + SINC_HALF as i64;
        let first = t_peak.floor() as i64 - margin;
        let count = (n.max(1) - 1) * sps + 2 * margin as usize + 1;
        let y = self.mf_region(src, first, count, f, t_peak)?;
        let mut z = vec![Cf32::new(0.0, 0.0); n];
        let eval = |t: f64| {
            let pos = t - first as f64;
            let (pn, w) = (pos.floor(), sinc_weights(pos - pos.floor()));
            for (k, o) in z.iter_mut().enumerate() {
                *o = interpolate_with(&y, pn as i64 + (k * sps) as i64, &w);
            }
            let c = cost(&z);
            if c.is_nan() {
                f64::INFINITY
            } else {
                c
            }
        };
        // The best fractional instant within half a symbol of `c`: whole-sample grid,
        // then golden section over ±1 sample (kept only if no worse).
        let half = sps.div_ceil(2) as i64;
        let eval = std::cell::RefCell::new(eval);
        let fractional = |c: f64| {
            let mut best = (c, (eval.borrow_mut())(c));
            for d in 1..=half {
                for j in [-d, d] {
                    let v = (eval.borrow_mut())(c + j as f64);
                    if v < best.1 {
                        best = (c + j as f64, v);
                    }
                }
            }
            let g = golden_max(
                |t| -(eval.borrow_mut())(t),
                best.0 - 1.0,
                best.0 + 1.0,
                1e-3,
            );
            let v = (eval.borrow_mut())(g);
            if v <= best.1 {
                (g, v)
            } else {
                best
            }
        };
        // The window's alignment: the peak's symbol and its two neighbours; the nearest
        // to the peak of those within tolerance of the least cost.
        let spsf = sps as f64;
        let cands = [0.0, -spsf, spsf].map(|j| fractional(t_peak + j));
        let least = cands.iter().map(|c| c.1).fold(f64::INFINITY, f64::min);
        let tol = if tolerance.is_finite() {
            tolerance.max(0.0)
        } else {
            0.0
        };
        let t0 = cands
            .iter()
            .find(|c| c.1 <= least + tol)
            .map_or(t_peak, |c| c.0);
        let pos = t0 - first as f64;
        let corr = training_correlation(&y, &self.training, sps, pos)
            * Cf64::from_polar(1.0, std::f64::consts::TAU * f * (t0 - t_peak));
        let t_energy: f64 = self.training.iter().map(|t| f64::from(t.norm_sqr())).sum();
        let start_sample = (t0 + 0.5).floor() as i64;
        let len = src.len() as f64;
        let k_lo = (-t0 / spsf).ceil() as i64;
        let k_hi = ((len - 1.0 - t0) / spsf).floor() as i64 + 1;
        Ok(BurstSync {
            start_sample,
            timing_frac: t0 - start_sample as f64,
            phase_rad: corr.arg(),
            training_gain: corr.norm() / t_energy.max(f64::MIN_POSITIVE),
            symbols_in_capture: k_lo..k_hi.max(k_lo),
            peak_instant: bs.peak_instant,
            ..bs.clone()
        })
    }

    /// Residual carrier frequency of the training samples `z` (symbol rate, one per
    /// training symbol), rad/symbol, searched within `±range`: fit the channel taps by
    /// least squares on `z` ([`fit_taps`], `±s` taps around the main one), rebuild
    /// the channel-filtered training `ŷ = h ∗ t` over the observations whose whole
    /// regressor lies in the training, and maximise the periodogram of `z·conj(ŷ)`
    /// ([`cfo::periodogram_frequency`]). Called once per timing/CFO iteration, this is
    /// the alternating (frequency, taps) maximisation of the joint likelihood. When the
    /// fit is impossible (a training too short for a 3-tap model, or one that does not
    /// excite the taps) it falls back to one tap, `ŷ = t`: Rife & Boorstyn's estimator.
    fn channel_aware_frequency(&self, z: &[Cf32], range: f64) -> f64 {
        let t = &self.training;
        let n = t.len();
        // Largest half-span s ≤ CFO_FIT_HALF_SPAN that leaves ≥ 4 observations per unknown.
        let s = (1..=CFO_FIT_HALF_SPAN)
            .rev()
            .find(|&s| n >= 2 * s + 4 * (2 * s + 1))
            .unwrap_or(0);
        let wide = |v: Cf32| Cf64::new(f64::from(v.re), f64::from(v.im));
        let fitted = if s == 0 {
            None
        } else {
            fit_taps(z, t, 0, s, s, ChannelFitConfig::default().max_condition).ok()
        };
        let u: Vec<Cf64> = match fitted {
            Some(taps) => (s..n - s)
                .map(|k| {
                    // ŷ_k = Σ_{i=−s}^{s} h[i]·t[k−i], tap h[i] at index i + s.
                    let yhat: Cf64 = taps
                        .iter()
                        .enumerate()
                        .map(|(c, h)| *h * wide(t[k + s - c]))
                        .sum();
                    wide(z[k]) * yhat.conj()
                })
                .collect(),
            None => z
                .iter()
                .zip(t)
                .map(|(zk, tk)| wide(*zk) * wide(*tk).conj())
                .collect(),
        };
        cfo::periodogram_frequency(&u, range)
    }

    /// Matched-filtered, timing- and CFO-corrected symbol-rate samples for symbol indices
    /// `symbols` (0 = first training symbol): `out[i]` is symbol `symbols.start + i`,
    /// sampled at `t₀ + k·sps` (`t₀ + k·sps·(1 + ε)` with a clock offset
    /// `ε = burst.sco_ppm·1e-6`, see [`BurstSync::symbol_instant`]) after multiplying
    /// the capture by `exp(−j2π·cfo·(n−t₀)/fs)`. With `ε = 0` a piece of symbols
    /// shares one fractional instant and one folded filter; with `ε ≠ 0` each symbol
    /// is interpolated on its own.
    /// Symbols outside the capture are written as 0 and excluded from the returned
    /// [`SymbolSpan::available`] (a truncated burst is processed as far as it goes).
    ///
    /// # Panics
    /// If `out.len()` differs from the length of `symbols` (or `symbols` is reversed).
    pub fn extract_symbols<S: SampleSource + ?Sized>(
        &self,
        src: &S,
        burst: &BurstSync,
        symbols: Range<i64>,
        out: &mut [Cf32],
    ) -> Result<SymbolSpan, SyncError> {
        assert!(symbols.start <= symbols.end, "reversed symbol range");
        assert_eq!(
            out.len() as i64,
            symbols.end - symbols.start,
            "output length must match the symbol range"
        );
        out.fill(Cf32::new(0.0, 0.0));
        let a = symbols.start.max(burst.symbols_in_capture.start);
        let b = symbols.end.min(burst.symbols_in_capture.end).max(a);
        let t0 = burst.instant();
        let f = burst.cfo_hz / self.cfg.sample_rate_hz;
        let sps = self.cfg.sps;
        let spsf = sps as f64;
        // Matched filter and interpolator folded into one real filter per piece (every
        // instant of a piece shares one fractional part): value at `n + μ` =
        // `Σ_i w_i(μ)·Σ_m p_m·x[n − SINC_HALF + 1 + i + m − d] = Σ_q g_q·x[n − SINC_HALF + 1 − d + q]`
        // with `g = w ∗ p` — only the symbol instants are filtered, not every sample.
        if burst.sco_ppm != 0.0 {
            self.extract_drifting(src, burst, a..b, &mut out[(a - symbols.start) as usize..])?;
            return Ok(SymbolSpan {
                requested: symbols,
                available: a..b,
            });
        }
        let d = (self.pulse.len() - 1) / 2;
        let taps = self.pulse.len() + 2 * SINC_HALF - 1;
        let padded = taps.div_ceil(FOLD_LANES) * FOLD_LANES;
        let mut g2 = vec![0.0f32; 2 * padded];
        let mut x: Vec<Cf32> = Vec::new();
        let mut k = a;
        while k < b {
            let k_end = (k + EXTRACT_PIECE_SYMBOLS).min(b);
            let t = t0 + k as f64 * spsf;
            let n = t.floor();
            folded_taps(&self.pulse, &sinc_weights_f64(t - n), &mut g2);
            let start = n as i64 - (SINC_HALF - 1) as i64 - d as i64;
            let len = (k_end - 1 - k) as usize * sps + taps;
            // Zeros past `len` meet the zero padding of `g2`.
            x.clear();
            x.resize(len + padded - taps, Cf32::new(0.0, 0.0));
            read_padded(src, start, &mut x[..len])?;
            derotate_run(&mut x[..len], -f, |i| (start + i as i64) as f64 - t0);
            for (j, o) in out[(k - symbols.start) as usize..(k_end - symbols.start) as usize]
                .iter_mut()
                .enumerate()
            {
                *o = dot_real_taps(&x[j * sps..j * sps + padded], &g2);
            }
            k = k_end;
        }
        Ok(SymbolSpan {
            requested: symbols,
            available: a..b,
        })
    }

    /// [`Synchroniser::extract_symbols`] with a clock offset: symbol `k` of `range`
    /// (all inside the capture) at `t₀ + k·sps·(1 + ε)`, written to `out[k − range.start]`.
    /// Every instant has its own fractional part, so the matched filter is run at
    /// every capture sample of a piece (`mf` below, tap by tap as in `mf_region`)
    /// and each symbol is interpolated from it with its own windowed-sinc weights.
    fn extract_drifting<S: SampleSource + ?Sized>(
        &self,
        src: &S,
        burst: &BurstSync,
        range: Range<i64>,
        out: &mut [Cf32],
    ) -> Result<(), SyncError> {
        let t0 = burst.instant();
        let f = burst.cfo_hz / self.cfg.sample_rate_hz;
        let sps = self.cfg.sps;
        let d = (self.pulse.len() - 1) / 2;
        let h = SINC_HALF as i64;
        let mut x: Vec<Cf32> = Vec::new();
        let mut mf: Vec<Cf32> = Vec::new();
        let mut k = range.start;
        while k < range.end {
            let k_end = (k + EXTRACT_PIECE_SYMBOLS).min(range.end);
            // Matched-filter outputs at capture samples `lo ..= hi` cover every
            // interpolator of the piece.
            let lo = burst.symbol_instant(k, sps).floor() as i64 - h + 1;
            let hi = burst.symbol_instant(k_end - 1, sps).floor() as i64 + h;
            let count = (hi - lo + 1) as usize;
            let start = lo - d as i64;
            x.clear();
            x.resize(count + self.pulse.len() - 1, Cf32::new(0.0, 0.0));
            read_padded(src, start, &mut x)?;
            derotate_run(&mut x, -f, |i| (start + i as i64) as f64 - t0);
            mf.clear();
            mf.resize(count, Cf32::new(0.0, 0.0));
            for (m, &p) in self.pulse.iter().enumerate() {
                for (o, &v) in mf.iter_mut().zip(&x[m..m + count]) {
                    *o += v * p;
                }
            }
            for (kk, o) in (k..k_end).zip(&mut out[(k - range.start) as usize..]) {
                let t = burst.symbol_instant(kk, sps);
                let n = t.floor();
                *o = interpolate_with(&mf, n as i64 - lo, &sinc_weights(t - n));
            }
            k = k_end;
        }
        Ok(())
    }

    /// Timing derivative of [`Synchroniser::extract_symbols`]'s values, per sample:
    /// `out[i] ≈ (v(t_k + δ) − v(t_k − δ))/(2δ)` for symbol `k = symbols.start + i`
    /// at its instant `t_k` (drifted by the burst's clock offset), with `v` the same
    /// de-rotated (about `t₀`), matched-filtered, interpolated signal. One folded
    /// filter per piece (`ε = 0`) or per-symbol interpolation of the matched filter
    /// (`ε ≠ 0`), as for the values. `delta` is clamped to `[1e-3, 0.5]` samples.
    ///
    /// # Panics
    /// If `out.len()` differs from the length of `symbols` (or `symbols` is reversed).
    pub fn extract_slopes<S: SampleSource + ?Sized>(
        &self,
        src: &S,
        burst: &BurstSync,
        symbols: Range<i64>,
        delta: f64,
        out: &mut [Cf32],
    ) -> Result<SymbolSpan, SyncError> {
        assert!(symbols.start <= symbols.end, "reversed symbol range");
        assert_eq!(
            out.len() as i64,
            symbols.end - symbols.start,
            "output length must match the symbol range"
        );
        let delta = if delta.is_finite() {
            delta.clamp(1e-3, 0.5)
        } else {
            0.1
        };
        out.fill(Cf32::new(0.0, 0.0));
        let a = symbols.start.max(burst.symbols_in_capture.start);
        let b = symbols.end.min(burst.symbols_in_capture.end).max(a);
        let t0 = burst.instant();
        let f = burst.cfo_hz / self.cfg.sample_rate_hz;
        let sps = self.cfg.sps;
        let d = (self.pulse.len() - 1) / 2;
        let h = SINC_HALF as i64;
        let mut x: Vec<Cf32> = Vec::new();
        if burst.sco_ppm == 0.0 {
            let taps = self.pulse.len() + SLOPE_TAPS - 1;
            let padded = taps.div_ceil(FOLD_LANES) * FOLD_LANES;
            let mut g2 = vec![0.0f32; 2 * padded];
            let mut k = a;
            while k < b {
                let k_end = (k + EXTRACT_PIECE_SYMBOLS).min(b);
                let t = burst.symbol_instant(k, sps);
                let n = t.floor();
                g2.fill(0.0);
                folded_taps(&self.pulse, &slope_weights(t - n, delta), &mut g2);
                let start = n as i64 - h - d as i64;
                let len = (k_end - 1 - k) as usize * sps + taps;
                x.clear();
                x.resize(len + padded - taps, Cf32::new(0.0, 0.0));
                read_padded(src, start, &mut x[..len])?;
                derotate_run(&mut x[..len], -f, |i| (start + i as i64) as f64 - t0);
                for (j, o) in out[(k - symbols.start) as usize..(k_end - symbols.start) as usize]
                    .iter_mut()
                    .enumerate()
                {
                    *o = dot_real_taps(&x[j * sps..j * sps + padded], &g2);
                }
                k = k_end;
            }
        } else {
            let mut mf: Vec<Cf32> = Vec::new();
            let mut k = a;
            while k < b {
                let k_end = (k + EXTRACT_PIECE_SYMBOLS).min(b);
                let lo = burst.symbol_instant(k, sps).floor() as i64 - h;
                let hi = burst.symbol_instant(k_end - 1, sps).floor() as i64 + h + 1;
                let count = (hi - lo + 1) as usize;
                let start = lo - d as i64;
                x.clear();
                x.resize(count + self.pulse.len() - 1, Cf32::new(0.0, 0.0));
                read_padded(src, start, &mut x)?;
                derotate_run(&mut x, -f, |i| (start + i as i64) as f64 - t0);
                mf.clear();
                mf.resize(count, Cf32::new(0.0, 0.0));
                for (m, &p) in self.pulse.iter().enumerate() {
                    for (o, &v) in mf.iter_mut().zip(&x[m..m + count]) {
                        *o += v * p;
                    }
                }
                for (kk, o) in (k..k_end).zip(&mut out[(k - symbols.start) as usize..]) {
                    let t = burst.symbol_instant(kk, sps);
                    let n = t.floor();
                    let w = slope_weights(t - n, delta);
                    let base = (n as i64 - h - lo) as usize;
                    let mut acc = Cf32::new(0.0, 0.0);
                    for (v, wj) in mf[base..base + SLOPE_TAPS].iter().zip(&w) {
                        acc += *v * *wj as f32;
                    }
                    *o = acc;
                }
                k = k_end;
            }
        }
        Ok(SymbolSpan {
            requested: symbols,
            available: a..b,
        })
    }

    /// Convenience: search, refine every detection, in capture order.
    pub fn synchronise<S: SampleSource + ?Sized>(
        &self,
        src: &S,
    ) -> Result<Vec<BurstSync>, SyncError> {
        self.search_source(src)?
            .iter()
            .map(|d| self.refine(src, d))
            .collect()
    }
}
