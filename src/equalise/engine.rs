//! The DFE loop shared by every equaliser (ZF-DFE, MMSE-DFE, linear MMSE,
//! genie, tracking variants).
//!
//! Takes symbol-rate samples `y`, filters in apply form
//! (`z_n = e^{−jφ_n}·Σ_r ff[r]·y[n + lag − r] − Σ_{j=1}^{Nb} fb[j−1]·d[n−j]`,
//! `lag = Δ − P`, samples outside `y` read as 0), a slicer, the reference
//! symbols used for feedback inside `truth_range`, and optional phase loop and
//! filter adaptation; writes the soft output `z_n`, the label of the nearest
//! constellation point and the loop phase `φ_n` for every `n` of the segment
//! into caller-owned slices. Nothing is allocated per symbol: the feedforward
//! window is a contiguous slice of a zero-padded copy of `y` (made once per
//! segment) and the feedback history is a contiguous slice of a per-segment
//! decision buffer.
//!
//! Passes whose filters do not adapt run through [`run_fixed_lanes`], which
//! takes several independent passes (the forward and time-reversed halves of a
//! burst, and the different equalisers of one burst) and steps them in lockstep,
//! one symbol of each lane in turn. Every lane does exactly the arithmetic it
//! would do alone, in the same order, so its output is bit-identical to a
//! single-lane run; the gain is that the per-symbol recursions (feedback,
//! slicer, phase loop — a long chain of dependent operations) of different
//! lanes overlap in the processor instead of waiting on each other. The slicer
//! is chosen once per call ([`with_decider`]), not per symbol.

use super::tracking::{AdaptMode, PhaseLoop, TrackingConfig};
use super::Slicer;
use crate::signal::constellation::{BpskKernel, PskKernel, QamKernel};
use crate::{Cf32, Cf64};
use std::ops::Range;

/// Hard decision of one symbol: the label and the point it stands for.
pub(crate) trait Decide {
    /// `(label, points[label])` of the point nearest to `z`.
    fn decide(&self, z: Cf32) -> (usize, Cf32);
}

impl Decide for BpskKernel<'_> {
    #[inline(always)]
    fn decide(&self, z: Cf32) -> (usize, Cf32) {
        BpskKernel::decide(self, z)
    }
}

impl<const T: usize> Decide for QamKernel<'_, T> {
    #[inline(always)]
    fn decide(&self, z: Cf32) -> (usize, Cf32) {
        QamKernel::decide(self, z)
    }
}

impl Decide for PskKernel<'_> {
    #[inline(always)]
    fn decide(&self, z: Cf32) -> (usize, Cf32) {
        PskKernel::decide(self, z)
    }
}

/// Any other [`Slicer`], called through the trait object. A label outside
/// `points()` decides to 0 (such a slicer is broken, but the loop must not panic).
pub(crate) struct DynDecider<'a>(pub &'a dyn Slicer);

impl Decide for DynDecider<'_> {
    #[inline]
    fn decide(&self, z: Cf32) -> (usize, Cf32) {
        let l = self.0.slice(z);
        (l, self.0.points().get(l).copied().unwrap_or_default())
    }
}

/// Evaluates `$body` with `$k` bound to a `&impl Decide` for `$slicer`: the
/// constellation's own kernel when it is one (monomorphised, inlined), else
/// the trait object.
macro_rules! with_decider {
    ($slicer:expr, |$k:ident| $body:expr) => {{
        let slicer: &dyn $crate::equalise::Slicer = $slicer;
        match slicer.as_constellation().map(|c| c.kernel()) {
            Some($crate::signal::constellation::SliceKernel::Qam3(q)) => {
                let $k = &q;
                $body
            }
            Some($crate::signal::constellation::SliceKernel::Qam1(q)) => {
                let $k = &q;
                $body
            }
            Some($crate::signal::constellation::SliceKernel::Qam7(q)) => {
                let $k = &q;
                $body
            }
            Some($crate::signal::constellation::SliceKernel::QamFormula(q)) => {
                let $k = &q;
                $body
            }
            Some($crate::signal::constellation::SliceKernel::Bpsk(b)) => {
                let $k = &b;
                $body
            }
            Some($crate::signal::constellation::SliceKernel::Psk(p)) => {
                let $k = &p;
                $body
            }
            None => {
                let d = $crate::equalise::engine::DynDecider(slicer);
                let $k = &d;
                $body
            }
        }
    }};
}

/// Buffers of one pass, kept by the caller and reused from pass to pass (and
/// burst to burst) so a pass allocates nothing once they have grown. Contents
/// on entry are irrelevant: every buffer is cleared and resized before use.
#[derive(Default)]
pub(crate) struct PassScratch {
    ypad: Vec<Cf32>,
    hist: Vec<Cf32>,
    wr: Vec<f32>,
    wi: Vec<f32>,
    br: Vec<f32>,
    bi: Vec<f32>,
    yr: Vec<f32>,
    yi: Vec<f32>,
    accr: Vec<f32>,
    acci: Vec<f32>,
    /// Zeros in front of `y` inside `ypad`.
    left: usize,
    /// Symbols of the current block (fixed-filter lanes).
    m: usize,
}

/// `v` cleared and refilled with `n` copies of `x`.
fn reset<T: Clone>(v: &mut Vec<T>, n: usize, x: T) {
    v.clear();
    v.resize(n, x);
}

/// Caller-side description of one forward pass.
pub(crate) struct Pass<'a> {
    pub y: &'a [Cf32],
    /// Reference symbols, indexed like `y`; used for feedback (and as the
    /// adaptation/phase reference) for `n` in `truth_range`.
    pub truth: &'a [Cf32],
    pub truth_range: Range<usize>,
    /// Symbols `n` to produce.
    pub range: Range<usize>,
}

/// Mutable filter state (reversed storage for contiguous dot products).
pub(crate) struct LoopFilters {
    /// `ffr[t] = ff[Nf−1−t]`
    pub ffr: Vec<Cf32>,
    /// `fbr[t] = fb[Nb−1−t]`
    pub fbr: Vec<Cf32>,
    pub lag: isize,
}

impl LoopFilters {
    pub fn new(ff: &[Cf32], fb: &[Cf32], lag: isize) -> Self {
        LoopFilters {
            ffr: ff.iter().rev().cloned().collect(),
            fbr: fb.iter().rev().cloned().collect(),
            lag,
        }
    }
}

/// Adaptation state.
pub(crate) struct Adapt {
    pub mode: AdaptMode,
    mu: f32,
    lambda: f32,
    /// RLS inverse correlation matrix, row-major `n×n`, in f64 and kept exactly
    /// Hermitian (upper triangle updated, lower mirrored): in f32 the
    /// conventional RLS recursion loses positive-definiteness after a few
    /// thousand updates and diverges.
    p: Vec<Cf64>,
    u: Vec<Cf64>,
    pu: Vec<Cf64>,
}

impl Adapt {
    pub fn off() -> Self {
        Adapt {
            mode: AdaptMode::Off,
            mu: 0.0,
            lambda: 1.0,
            p: Vec::new(),
            u: Vec::new(),
            pu: Vec::new(),
        }
    }
    pub fn new(cfg: &TrackingConfig, n: usize) -> Self {
        let mut a = Adapt::off();
        a.mode = cfg.mode;
        a.mu = cfg.lms_step;
        a.lambda = cfg.rls_forgetting;
        if cfg.mode == AdaptMode::Rls {
            let z = Cf64::new(0.0, 0.0);
            a.p = vec![z; n * n];
            for i in 0..n {
                a.p[i * n + i] = Cf64::new(1.0 / cfg.rls_delta as f64, 0.0);
            }
            a.u = vec![z; n];
            a.pu = vec![z; n];
        }
        a
    }
}

/// One phase-loop step from the output `z` and its decision `d`: the detector
/// is `Im(z·d*)/|d|²` (0 for a zero decision).
#[inline(always)]
fn track_phase(p: &mut PhaseLoop, z: Cf32, d: Cf32) {
    let dn = d.norm_sqr();
    let err = if dn > 0.0 {
        (z * d.conj()).im / dn
    } else {
        0.0
    };
    p.update(err);
}

/// Fills `scratch.ypad` (zero-padded copy of `y`, `scratch.left` zeros in
/// front) and `scratch.hist` (feedback history: `hist[i + nb] = d[start + i]`,
/// `hist[..nb] = d[start−nb..start]` from the reference symbols where known).
fn pad_and_history(pass: &Pass<'_>, f: &LoopFilters, scratch: &mut PassScratch) {
    let Range { start, end } = pass.range.clone();
    let nf = f.ffr.len();
    let nb = f.fbr.len();
    let zero = Cf32::new(0.0, 0.0);
    // Padded copy: ypad[i + left] = y[i]; window for n is
    // ypad[n + lag − (nf−1) + left ..= n + lag + left].
    let first = start as isize + f.lag - (nf as isize - 1);
    let left = (-first).max(0) as usize;
    let last = end as isize - 1 + f.lag;
    let right = (last - (pass.y.len() as isize - 1)).max(0) as usize;
    reset(&mut scratch.ypad, left + pass.y.len() + right, zero);
    scratch.ypad[left..left + pass.y.len()].copy_from_slice(pass.y);
    scratch.left = left;
    reset(&mut scratch.hist, nb + end.saturating_sub(start), zero);
    for (j, h) in scratch.hist[..nb].iter_mut().enumerate() {
        let n = start as isize - nb as isize + j as isize;
        if n >= 0 && pass.truth_range.contains(&(n as usize)) {
            *h = pass.truth[n as usize];
        }
    }
}

/// Run one forward pass. `soft`, `labels`, `phase` are indexed like `y`
/// (only `pass.range` is written). Passes whose filters do not adapt go
/// through [`run_fixed_lanes`] (as a single lane).
///
/// # Panics
/// When the output slices are shorter than `pass.range.end` or `truth` is
/// shorter than `y` (programmer errors).
#[allow(clippy::too_many_arguments)] // the caller-owned outputs are separate slices on purpose
pub(crate) fn run_pass(
    pass: &Pass<'_>,
    f: &mut LoopFilters,
    cons: &dyn Slicer,
    pll: Option<&mut PhaseLoop>,
    adapt: &mut Adapt,
    soft: &mut [Cf32],
    labels: &mut [usize],
    phase: &mut [f32],
    scratch: &mut PassScratch,
) {
    let Range { start, end } = pass.range.clone();
    if start >= end {
        return;
    }
    assert!(soft.len() >= end && labels.len() >= end && phase.len() >= end);
    assert!(pass.truth.len() >= pass.y.len());
    if adapt.mode == AdaptMode::Off {
        let mut lane = [FixedLane {
            pass: Pass {
                y: pass.y,
                truth: pass.truth,
                truth_range: pass.truth_range.clone(),
                range: pass.range.clone(),
            },
            filters: &*f,
            pll: pll.as_deref().cloned(),
            soft,
            labels,
            phase,
        }];
        run_fixed_lanes(&mut lane, cons, std::slice::from_mut(scratch));
        if let (Some(p), Some(q)) = (pll, lane[0].pll.take()) {
            *p = q;
        }
        return;
    }
    with_decider!(cons, |k| adaptive_pass(
        pass, f, k, pll, adapt, soft, labels, phase, scratch
    ))
}

/// The symbol-by-symbol loop with LMS or RLS updates of the filters.
#[allow(clippy::too_many_arguments)]
fn adaptive_pass<K: Decide>(
    pass: &Pass<'_>,
    f: &mut LoopFilters,
    cons: &K,
    mut pll: Option<&mut PhaseLoop>,
    adapt: &mut Adapt,
    soft: &mut [Cf32],
    labels: &mut [usize],
    phase: &mut [f32],
    scratch: &mut PassScratch,
) {
    let Range { start, end } = pass.range.clone();
    let nf = f.ffr.len();
    let nb = f.fbr.len();
    let zero = Cf32::new(0.0, 0.0);
    pad_and_history(pass, f, scratch);
    let left = scratch.left;
    let ypad = &scratch.ypad[..];
    let hist = &mut scratch.hist[..];
    let ntot = nf + nb;
    for n in start..end {
        let i = n - start;
        let base = (n as isize + f.lag - (nf as isize - 1) + left as isize) as usize;
        let win = &ypad[base..base + nf];
        let mut acc = zero;
        for (w, v) in f.ffr.iter().zip(win) {
            acc += w * v;
        }
        let rot = pll.as_ref().map_or(Cf32::new(1.0, 0.0), |p| p.phasor());
        let mut z = acc * rot.conj();
        let past = &hist[i..i + nb];
        let mut fbs = zero;
        for (b, d) in f.fbr.iter().zip(past) {
            fbs += b * d;
        }
        z -= fbs;
        let (label, point) = cons.decide(z);
        let d = if pass.truth_range.contains(&n) {
            pass.truth[n]
        } else {
            point
        };
        soft[n] = z;
        labels[n] = label;
        if let Some(p) = pll.as_deref_mut() {
            phase[n] = p.phase as f32;
            track_phase(p, z, d);
        }
        // A non-finite output (NaN/inf sample in the window) must not reach
        // the adaptive taps: skip the update for that symbol.
        let mode = if z.re.is_finite() && z.im.is_finite() {
            adapt.mode
        } else {
            AdaptMode::Off
        };
        match mode {
            AdaptMode::Off => {}
            AdaptMode::Lms => {
                let e = d - z;
                let norm: f32 = win.iter().map(|v| v.norm_sqr()).sum::<f32>()
                    + past.iter().map(|v| v.norm_sqr()).sum::<f32>()
                    + 1e-6;
                let g = e * (adapt.mu / norm);
                let gr = g * rot;
                for (w, v) in f.ffr.iter_mut().zip(win) {
                    *w += gr * v.conj();
                }
                for (b, v) in f.fbr.iter_mut().zip(&hist[i..i + nb]) {
                    *b -= g * v.conj();
                }
            }
            AdaptMode::Rls => {
                let e = d - z;
                let e64 = Cf64::new(e.re as f64, e.im as f64);
                let rc = rot.conj();
                let w64 = |v: Cf32| Cf64::new(v.re as f64, v.im as f64);
                for (u, v) in adapt.u.iter_mut().zip(win) {
                    *u = w64(v * rc);
                }
                for (u, v) in adapt.u[nf..].iter_mut().zip(past) {
                    *u = -w64(*v);
                }
                // z = wᵀu = vᴴu with v = conj(w): RLS on v (Haykin), then w = conj(v).
                // pu = P·u, den = λ + uᴴ·P·u, k = pu/den,
                // v ← v + k·e*, i.e. w ← w + conj(k)·e; P ← (P − k·uᴴ·P)/λ.
                let z64 = Cf64::new(0.0, 0.0);
                for r in 0..ntot {
                    let row = &adapt.p[r * ntot..(r + 1) * ntot];
                    let mut s = z64;
                    for (pv, uv) in row.iter().zip(&adapt.u) {
                        s += pv * uv;
                    }
                    adapt.pu[r] = s;
                }
                let mut upu = z64;
                for (uv, pv) in adapt.u.iter().zip(&adapt.pu) {
                    upu += uv.conj() * pv;
                }
                let lambda = adapt.lambda as f64;
                let den = lambda + upu.re;
                if den > 1e-12 && den.is_finite() {
                    let inv = 1.0 / den;
                    for t in 0..ntot {
                        let k = adapt.pu[t] * inv;
                        let dw = k.conj() * e64;
                        let dw = Cf32::new(dw.re as f32, dw.im as f32);
                        if t < nf {
                            f.ffr[t] += dw;
                        } else {
                            f.fbr[t - nf] += dw;
                        }
                    }
                    // P is Hermitian, so uᴴP = (P·u)ᴴ = puᴴ.
                    let il = 1.0 / lambda;
                    for r in 0..ntot {
                        let kr = adapt.pu[r] * inv;
                        for c in r..ntot {
                            let v = (adapt.p[r * ntot + c] - kr * adapt.pu[c].conj()) * il;
                            adapt.p[r * ntot + c] = v;
                            adapt.p[c * ntot + r] = v.conj();
                        }
                        let dgl = &mut adapt.p[r * ntot + r];
                        dgl.im = 0.0;
                    }
                }
            }
        }
        hist[i + nb] = d;
    }
}

/// Symbols per block of the fixed-filter fast path.
const BLOCK: usize = 256;

/// One pass with fixed filters, for [`run_fixed_lanes`]. `soft`, `labels`,
/// `phase` are indexed like `pass.y` (only `pass.range` is written); `pll`
/// is left in its state after the last symbol.
pub(crate) struct FixedLane<'a> {
    pub pass: Pass<'a>,
    pub filters: &'a LoopFilters,
    pub pll: Option<PhaseLoop>,
    pub soft: &'a mut [Cf32],
    pub labels: &'a mut [usize],
    pub phase: &'a mut [f32],
}

/// Runs independent fixed-filter passes in lockstep (see the module doc); each
/// lane's outputs are bit-identical to running it alone. `scratch` needs at
/// least `lanes.len()` entries (one per lane).
///
/// The feedforward output does not depend on decisions (the phase loop
/// rotates it afterwards), so it is computed block by block as a FIR
/// vectorised over the output index (split real/imaginary arrays, one axpy per
/// tap); only the feedback, the rotation, the slicer and the loop stay in the
/// serial per-symbol recursion.
///
/// # Panics
/// When `scratch` is shorter than `lanes`, a lane's outputs are shorter than
/// its `pass.range.end` or its `truth` is shorter than its `y` (programmer errors).
pub(crate) fn run_fixed_lanes(
    lanes: &mut [FixedLane<'_>],
    cons: &dyn Slicer,
    scratch: &mut [PassScratch],
) {
    with_decider!(cons, |k| fixed_lanes(lanes, k, scratch))
}

fn fixed_lanes<K: Decide>(lanes: &mut [FixedLane<'_>], cons: &K, scratch: &mut [PassScratch]) {
    assert!(scratch.len() >= lanes.len());
    let scratch = &mut scratch[..lanes.len()];
    let mut longest = 0;
    for (lane, sc) in lanes.iter().zip(scratch.iter_mut()) {
        sc.m = 0;
        if lane.pass.range.is_empty() {
            continue;
        }
        let end = lane.pass.range.end;
        assert!(lane.soft.len() >= end && lane.labels.len() >= end && lane.phase.len() >= end);
        assert!(lane.pass.truth.len() >= lane.pass.y.len());
        longest = longest.max(lane.pass.range.len());
        prepare_fixed(lane, sc);
    }
    let mut s0 = 0;
    while s0 < longest {
        for (lane, sc) in lanes.iter().zip(scratch.iter_mut()) {
            feedforward_block(lane, sc, s0);
        }
        let m = BLOCK.min(longest - s0);
        let mut active = lanes
            .iter_mut()
            .zip(scratch.iter_mut())
            .filter(|(_, sc)| sc.m > 0);
        if let (Some((lane, sc)), None) = (active.next(), active.next()) {
            // One lane in this block (a single pass, or the others have ended).
            single_lane_block(lane, sc, cons, s0);
        } else {
            for k in 0..m {
                for (lane, sc) in lanes.iter_mut().zip(scratch.iter_mut()) {
                    if k < sc.m {
                        fixed_step(lane, sc, cons, s0, k);
                    }
                }
            }
        }
        s0 += m;
    }
}

/// Padded input, history and split filters of one lane.
fn prepare_fixed(lane: &FixedLane<'_>, sc: &mut PassScratch) {
    let f = lane.filters;
    let nf = f.ffr.len();
    pad_and_history(&lane.pass, f, sc);
    sc.wr.clear();
    sc.wi.clear();
    sc.br.clear();
    sc.bi.clear();
    for w in &f.ffr {
        sc.wr.push(w.re);
        sc.wi.push(w.im);
    }
    for w in &f.fbr {
        sc.br.push(w.re);
        sc.bi.push(w.im);
    }
    reset(&mut sc.yr, BLOCK + nf, 0.0);
    reset(&mut sc.yi, BLOCK + nf, 0.0);
    reset(&mut sc.accr, BLOCK, 0.0);
    reset(&mut sc.acci, BLOCK, 0.0);
    sc.m = 0;
}

/// Feedforward outputs of the lane's symbols `start + s0 ..` (at most
/// [`BLOCK`]) into `accr`/`acci`; sets `sc.m` to their count (0 past the end).
fn feedforward_block(lane: &FixedLane<'_>, sc: &mut PassScratch, s0: usize) {
    let Range { start, end } = lane.pass.range.clone();
    let f = lane.filters;
    let nf = f.ffr.len();
    let n0 = start + s0;
    let m = if start < end {
        BLOCK.min(end.saturating_sub(n0))
    } else {
        0
    };
    sc.m = m;
    if m == 0 {
        return;
    }
    let PassScratch {
        ypad,
        wr,
        wi,
        yr,
        yi,
        accr,
        acci,
        left,
        ..
    } = sc;
    let base0 = (n0 as isize + f.lag - (nf as isize - 1) + *left as isize) as usize;
    for (k, v) in ypad[base0..base0 + m + nf - 1].iter().enumerate() {
        yr[k] = v.re;
        yi[k] = v.im;
    }
    accr[..m].fill(0.0);
    acci[..m].fill(0.0);
    for t in 0..nf {
        let (a, b) = (wr[t], wi[t]);
        let (xr, xi) = (&yr[t..t + m], &yi[t..t + m]);
        for (((or, oi), &vr), &vi) in accr[..m]
            .iter_mut()
            .zip(acci[..m].iter_mut())
            .zip(xr)
            .zip(xi)
        {
            *or += a * vr - b * vi;
            *oi += a * vi + b * vr;
        }
    }
}

/// The serial part of one block when a single lane runs: the same arithmetic
/// as [`fixed_step`] in the same order, with the loop state and the newest
/// fed-back symbol kept in locals (registers) rather than re-read from memory
/// each symbol, which shortens the per-symbol dependency chain.
fn single_lane_block<K: Decide>(
    lane: &mut FixedLane<'_>,
    sc: &mut PassScratch,
    cons: &K,
    s0: usize,
) {
    let start = lane.pass.range.start;
    let truth = lane.pass.truth;
    let truth_range = lane.pass.truth_range.clone();
    let mut pll = lane.pll.take();
    let PassScratch {
        hist,
        br,
        bi,
        accr,
        acci,
        m,
        ..
    } = sc;
    let nb = br.len();
    let (br, bi) = (&br[..], &bi[..]);
    let (older_r, older_i) = (&br[..nb.saturating_sub(1)], &bi[..nb.saturating_sub(1)]);
    let newest = br.last().copied().zip(bi.last().copied());
    let mut last = if nb > 0 {
        hist[s0 + nb - 1]
    } else {
        Cf32::new(0.0, 0.0)
    };
    for k in 0..*m {
        let i = s0 + k;
        let n = start + i;
        let mut z = Cf32::new(accr[k], acci[k]);
        if let Some(p) = pll.as_ref() {
            z *= p.phasor().conj();
        }
        // Oldest first, the newest (in `last`) added last: the order of `fixed_step`.
        let (mut sr, mut si) = (0f32, 0f32);
        for ((d, &a), &b) in hist[i..i + nb.saturating_sub(1)]
            .iter()
            .zip(older_r)
            .zip(older_i)
        {
            sr += a * d.re - b * d.im;
            si += a * d.im + b * d.re;
        }
        if let Some((a, b)) = newest {
            sr += a * last.re - b * last.im;
            si += a * last.im + b * last.re;
        }
        z -= Cf32::new(sr, si);
        let (label, point) = cons.decide(z);
        let d = if truth_range.contains(&n) {
            truth[n]
        } else {
            point
        };
        lane.soft[n] = z;
        lane.labels[n] = label;
        if let Some(p) = pll.as_mut() {
            lane.phase[n] = p.phase as f32;
            track_phase(p, z, d);
        }
        hist[i + nb] = d;
        last = d;
    }
    lane.pll = pll;
}

/// The serial part for symbol `start + s0 + k` of one lane: rotation,
/// feedback, decision, phase loop.
#[inline(always)]
fn fixed_step<K: Decide>(
    lane: &mut FixedLane<'_>,
    sc: &mut PassScratch,
    cons: &K,
    s0: usize,
    k: usize,
) {
    let start = lane.pass.range.start;
    let nb = sc.br.len();
    let i = s0 + k;
    let n = start + i;
    let mut z = Cf32::new(sc.accr[k], sc.acci[k]);
    if let Some(p) = lane.pll.as_ref() {
        z *= p.phasor().conj();
    }
    let past = &sc.hist[i..i + nb];
    let (mut sr, mut si) = (0f32, 0f32);
    for ((d, &a), &b) in past.iter().zip(&sc.br).zip(&sc.bi) {
        sr += a * d.re - b * d.im;
        si += a * d.im + b * d.re;
    }
    z -= Cf32::new(sr, si);
    let (label, point) = cons.decide(z);
    let d = if lane.pass.truth_range.contains(&n) {
        lane.pass.truth[n]
    } else {
        point
    };
    lane.soft[n] = z;
    lane.labels[n] = label;
    if let Some(p) = lane.pll.as_mut() {
        lane.phase[n] = p.phase as f32;
        track_phase(p, z, d);
    }
    sc.hist[i + nb] = d;
}
