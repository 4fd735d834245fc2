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

use super::tracking::{AdaptMode, PhaseLoop, TrackingConfig};
use super::Slicer;
use crate::{Cf32, Cf64};
use std::ops::Range;

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

/// Run one forward pass. `soft`, `labels`, `phase` are indexed like `y`
/// (only `pass.range` is written).
///
/// # Panics
/// When the output slices are shorter than `pass.range.end` or `truth` is
/// shorter than `y` (programmer errors).
/// One phase-loop step from the output `z` and its decision `d`: the detector
/// is `Im(z·d*)/|d|²` (0 for a zero decision).
#[inline]
fn track_phase(p: &mut PhaseLoop, z: Cf32, d: Cf32) {
    let dn = d.norm_sqr();
    let err = if dn > 0.0 {
        (z * d.conj()).im / dn
    } else {
        0.0
    };
    p.update(err);
}

#[allow(clippy::too_many_arguments)] // the caller-owned outputs are separate slices on purpose
pub(crate) fn run_pass(
    pass: &Pass<'_>,
    f: &mut LoopFilters,
    cons: &dyn Slicer,
    mut pll: Option<&mut PhaseLoop>,
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
    let nf = f.ffr.len();
    let nb = f.fbr.len();
    let zero = Cf32::new(0.0, 0.0);
    // Padded copy: ypad[i + left] = y[i]; window for n is
    // ypad[n + lag − (nf−1) + left ..= n + lag + left].
    let first = start as isize + f.lag - (nf as isize - 1);
    let left = (-first).max(0) as usize;
    let last = end as isize - 1 + f.lag;
    let right = (last - (pass.y.len() as isize - 1)).max(0) as usize;
    let mut ypad = std::mem::take(&mut scratch.ypad);
    reset(&mut ypad, left + pass.y.len() + right, zero);
    ypad[left..left + pass.y.len()].copy_from_slice(pass.y);
    // Feedback history: hist[i + nb] = d[start + i]; hist[..nb] = d[start−nb..start].
    let mut hist = std::mem::take(&mut scratch.hist);
    reset(&mut hist, nb + (end - start), zero);
    for (j, h) in hist[..nb].iter_mut().enumerate() {
        let n = start as isize - nb as isize + j as isize;
        if n >= 0 && pass.truth_range.contains(&(n as usize)) {
            *h = pass.truth[n as usize];
        }
    }
    if adapt.mode == AdaptMode::Off {
        fixed_filter_pass(
            pass, f, cons, pll, &ypad, left, &mut hist, soft, labels, phase, scratch,
        );
        scratch.ypad = ypad;
        scratch.hist = hist;
        return;
    }
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
        let label = cons.slice(z);
        let d = if pass.truth_range.contains(&n) {
            pass.truth[n]
        } else {
            cons.points()[label]
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
    scratch.ypad = ypad;
    scratch.hist = hist;
}

/// Symbols per block of the fixed-filter fast path.
const BLOCK: usize = 256;

/// Fast path when the filters do not adapt: the feedforward output does not
/// depend on decisions (the phase loop rotates it afterwards), so it is
/// computed block by block as a FIR vectorised over the output index (split
/// real/imaginary arrays, one axpy per tap); only the feedback, the rotation,
/// the slicer and the loop stay in the serial per-symbol recursion.
#[allow(clippy::too_many_arguments)]
fn fixed_filter_pass(
    pass: &Pass<'_>,
    f: &LoopFilters,
    cons: &dyn Slicer,
    mut pll: Option<&mut PhaseLoop>,
    ypad: &[Cf32],
    left: usize,
    hist: &mut [Cf32],
    soft: &mut [Cf32],
    labels: &mut [usize],
    phase: &mut [f32],
    scratch: &mut PassScratch,
) {
    let Range { start, end } = pass.range.clone();
    let nf = f.ffr.len();
    let nb = f.fbr.len();
    let PassScratch {
        wr,
        wi,
        br,
        bi,
        yr,
        yi,
        accr,
        acci,
        ..
    } = scratch;
    wr.clear();
    wi.clear();
    br.clear();
    bi.clear();
    for w in &f.ffr {
        wr.push(w.re);
        wi.push(w.im);
    }
    for w in &f.fbr {
        br.push(w.re);
        bi.push(w.im);
    }
    let (wr, wi, br, bi) = (&wr[..], &wi[..], &br[..], &bi[..]);
    reset(yr, BLOCK + nf, 0.0);
    reset(yi, BLOCK + nf, 0.0);
    reset(accr, BLOCK, 0.0);
    reset(acci, BLOCK, 0.0);
    let points = cons.points();
    let mut n0 = start;
    while n0 < end {
        let m = BLOCK.min(end - n0);
        let base0 = (n0 as isize + f.lag - (nf as isize - 1) + left as isize) as usize;
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
        for k in 0..m {
            let n = n0 + k;
            let i = n - start;
            let mut z = Cf32::new(accr[k], acci[k]);
            if let Some(p) = pll.as_deref() {
                z *= p.phasor().conj();
            }
            let past = &hist[i..i + nb];
            let (mut sr, mut si) = (0f32, 0f32);
            for ((d, &a), &b) in past.iter().zip(br).zip(bi) {
                sr += a * d.re - b * d.im;
                si += a * d.im + b * d.re;
            }
            z -= Cf32::new(sr, si);
            let label = cons.slice(z);
            let d = if pass.truth_range.contains(&n) {
                pass.truth[n]
            } else {
                points[label]
            };
            soft[n] = z;
            labels[n] = label;
            if let Some(p) = pll.as_deref_mut() {
                phase[n] = p.phase as f32;
                track_phase(p, z, d);
            }
            hist[i + nb] = d;
        }
        n0 += m;
    }
}
