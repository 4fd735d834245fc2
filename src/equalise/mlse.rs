//! Maximum-likelihood sequence estimation (Viterbi) over the fitted channel: a
//! reference detector that says what the best receiver could do on the same
//! burst, beside the DFE.
//!
//! **Model and metric.** The samples `y` are symbol-spaced outputs of the
//! receive (RRC) matched filter after timing and carrier correction, and the
//! fitted channel is `y[n] = Σ_{c=0}^{L} taps[c]·x[n + P − c] + w[n]` with `P`
//! pre-cursor taps (crate convention, `taps[c] = h[c − P]`) and `L = taps.len()
//! − 1` the channel memory. The RRC pulse is a Nyquist pulse, so `w` is white
//! at the symbol rate: the matched filter sampled once per symbol already *is*
//! the whitened matched filter of Forney (1972), and no further prefilter is
//! needed. The detector therefore uses Forney's form — the Euclidean branch
//! metric `|y[n] − Σ_c taps[c]·x[n+P−c]|²` on `y` directly — and not the
//! Ungerboeck (1974) metric, which works on the unwhitened matched-filter
//! output with the channel autocorrelation: the two give the same ML
//! sequence, but the Euclidean form needs no second filtering of `y`, keeps the
//! pre-cursor taps inside the same trellis (no separate anti-causal prefilter),
//! and its branch metric is the squared residual the channel fit itself
//! minimised, so a burst's metric and its noise estimate have the same scale.
//! Pre-cursor taps are handled by re-indexing time to the newest symbol: step
//! `t` introduces `x[t]` and consumes the observation `y[t − P]`.
//!
//! **States.** The trellis state after step `t` holds `(x[t], …, x[t−μ+1])` as
//! base-`M` digits, newest least significant (`M` points, `μ` symbols of state
//! memory), `M^μ` states. When `M^L` is at most [`MlseConfig::max_states`]
//! (default [`DEFAULT_MAX_STATES`] = 4096: QPSK memory 6, 8PSK memory 4, 16-QAM
//! memory 3, 64-QAM memory 2, 256-QAM memory 1) the detector is the full
//! Viterbi MLSE with `μ = L` ([`MlseMode::Full`]). Above the limit it runs, if
//! allowed, delayed decision-feedback sequence estimation (Duel-Hallen &
//! Heegard, "Delayed decision-feedback sequence estimation", IEEE Trans.
//! Commun. 37(5), 1989; [`MlseMode::ReducedState`]): `μ` is the largest memory
//! with `M^μ ≤ max_states`, and the taps beyond `μ` are cancelled with each
//! survivor's own past decisions (per-survivor feedback). That is no longer
//! maximum likelihood and is labelled as such; otherwise the detector is
//! skipped ([`MlseSkip::TooManyStates`]). A channel without memory (`L = 0`)
//! runs with one symbol of state and a zero second tap, i.e. the slicer.
//!
//! **Burst layout.** As for the DFE: the training symbols are known, the
//! symbols from the training onwards are detected forwards and the symbols
//! before it in time-reversed order on the reversed channel (taps reversed, not
//! conjugated; see the `equalise` module doc), each pass starting at the
//! training. Known symbols (any values, e.g. a QPSK training before a 16-QAM
//! payload) force the trellis to one digit (0) and their true contribution
//! replaces that digit's in the observations that see them. A pass decides
//! `x[t]` for `t` in its range and uses only the observations all of whose
//! symbols lie in that range (nothing is assumed about symbols outside the
//! frame); the last `P` symbols of a pass are therefore decided from fewer
//! observations, like the DFE's truncated window. A non-finite sample carries
//! no information and its observation is skipped. The detector has no phase
//! loop of its own: it relies on the burst's carrier correction, so a residual
//! phase drift that the DFE's loop follows (or a spurious slope the
//! decision-directed refinement locked at low SNR) costs the MLSE, not the DFE.
//!
//! **Memory.** Path metrics in `f32`, renormalised every step (the smallest is
//! subtracted), two rows of `M^μ`; the survivor memory is a ring of
//! `D + B` rows of `M^μ` bytes (`D` the traceback depth, `B = D/2` the block
//! of decisions released per traceback): every `B` steps the best state is
//! traced back `D + B` steps and the oldest `B` decisions are emitted, so the
//! survivor memory stays bounded whatever the burst length, and the decision
//! delay is between `D` and `D + B` symbols (at the end of a pass everything
//! is traced back from the best final state). Per-survivor registers (reduced
//! state only) hold `L − μ` labels per state. All of it lives in a
//! caller-owned [`MlseScratch`] whose size [`Mlse::scratch_len`] states; once
//! grown, a burst allocates nothing per symbol. Ties between equal metrics go
//! to the lower predecessor digit, so results are deterministic.

use super::{reverse_channel, Slicer};
use crate::{Cf32, Cf64};
use serde::{Deserialize, Serialize};
use std::ops::Range;

/// Default state limit `M^μ` (4096 states).
pub const DEFAULT_MAX_STATES: usize = 4096;

/// Smallest traceback depth used by default (symbols).
pub const MIN_TRACEBACK: usize = 64;

/// Largest traceback depth (symbols): bounds the survivor memory.
pub const MAX_TRACEBACK: usize = 1024;

/// Plain configuration of the detector.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MlseConfig {
    /// Largest number of trellis states `M^μ` (default 4096).
    pub max_states: usize,
    /// Above the limit, run the reduced-state detector (DDFSE, default true)
    /// instead of skipping.
    pub reduced_state: bool,
    /// Traceback depth `D` in symbols; `None` (default): `max(64, 16·μ)`,
    /// at most [`MAX_TRACEBACK`].
    pub traceback_depth: Option<usize>,
}

impl Default for MlseConfig {
    fn default() -> Self {
        MlseConfig {
            max_states: DEFAULT_MAX_STATES,
            reduced_state: true,
            traceback_depth: None,
        }
    }
}

/// Which detector runs.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum MlseMode {
    /// Full Viterbi MLSE over all `M^L` states.
    Full,
    /// Delayed decision-feedback sequence estimation over `M^μ` states, `μ < L`.
    ReducedState,
}

/// Why the detector cannot run on a channel.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[non_exhaustive]
pub enum MlseSkip {
    /// `M^L` states exceed the limit and the reduced-state detector is off (or
    /// even one symbol of state is too many).
    #[error("skipped ({points}^{memory} states, limit {max_states})")]
    TooManyStates {
        /// `M`
        points: usize,
        /// `L`
        memory: usize,
        /// the limit
        max_states: usize,
    },
    /// A tap or a constellation point is not finite.
    #[error("skipped (non-finite channel taps or constellation)")]
    NonFinite,
    /// More than 256 constellation points, or none.
    #[error("skipped ({0} constellation points; 1 to 256 supported)")]
    Points(usize),
}

/// One direction's trellis tables.
#[derive(Debug, Clone)]
struct Trellis {
    /// `taps` in the direction of this pass (`g[k]` multiplies `x[t−k]`).
    g: Vec<Cf32>,
    /// Pre-cursor count of this direction.
    pre: usize,
    /// `g[0]·points[a]`, split.
    new_re: Vec<f32>,
    new_im: Vec<f32>,
    /// `Σ_{j<μ} g[j+1]·points[digit_j(s)]` for every state `s`.
    isi: Vec<Cf32>,
}

/// A planned detector for one channel and constellation.
#[derive(Debug, Clone)]
pub struct Mlse {
    mode: MlseMode,
    points: Vec<Cf32>,
    memory: usize,
    state_memory: usize,
    states: usize,
    depth: usize,
    block: usize,
    fwd: Trellis,
    rev: Trellis,
}

/// Buffers of [`Mlse::detect_into`], kept by the caller and reused from burst
/// to burst; contents on entry are irrelevant.
#[derive(Debug, Default, Clone)]
pub struct MlseScratch {
    metric: Vec<f32>,
    next: Vec<f32>,
    r_re: Vec<f32>,
    r_im: Vec<f32>,
    tb: Vec<u8>,
    reg: Vec<u8>,
    reg_next: Vec<u8>,
    yr: Vec<Cf32>,
    known_r: Vec<Cf32>,
    rev_labels: Vec<usize>,
}

/// One burst as the detector sees it.
#[derive(Clone)]
pub struct MlseBurst<'a> {
    /// Symbol-rate samples (carrier-corrected, DC removed).
    pub y: &'a [Cf32],
    /// Training symbols (known values; need not be constellation points).
    pub training: &'a [Cf32],
    /// Index of `training[0]` in `y`.
    pub offset: usize,
    /// Symbols to decide: the frame (`training` inside it); the detector
    /// assumes nothing about symbols outside it.
    pub span: Range<usize>,
}

/// Errors of [`Mlse::detect_into`] (programmer-facing layout checks).
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[non_exhaustive]
pub enum MlseError {
    /// The training or the span does not fit in `y`, or the training is not inside the span.
    #[error("MLSE burst layout: training {offset}+{training_len} and span {span_start}..{span_end} in {samples} samples")]
    Layout {
        /// training offset
        offset: usize,
        /// training length
        training_len: usize,
        /// span start
        span_start: usize,
        /// span end
        span_end: usize,
        /// `y.len()`
        samples: usize,
    },
}

impl Trellis {
    fn new(taps: &[Cf64], pre: usize, points: &[Cf32], mu: usize) -> Trellis {
        let m = points.len();
        let mut g: Vec<Cf32> = taps
            .iter()
            .map(|t| Cf32::new(t.re as f32, t.im as f32))
            .collect();
        if g.len() < 2 {
            g.resize(2, Cf32::new(0.0, 0.0));
        }
        let new_re = points.iter().map(|p| (g[0] * p).re).collect();
        let new_im = points.iter().map(|p| (g[0] * p).im).collect();
        let states = m.pow(mu as u32);
        let isi = (0..states)
            .map(|s| {
                let mut acc = Cf32::new(0.0, 0.0);
                let mut v = s;
                for j in 0..mu {
                    acc += g[j + 1] * points[v % m];
                    v /= m;
                }
                acc
            })
            .collect();
        Trellis {
            g,
            pre,
            new_re,
            new_im,
            isi,
        }
    }
}

/// `m^e`, or `None` above `limit`.
fn pow_within(m: usize, e: usize, limit: usize) -> Option<usize> {
    let mut v = 1usize;
    for _ in 0..e {
        v = v.checked_mul(m).filter(|&x| x <= limit)?;
    }
    (v <= limit).then_some(v)
}

impl Mlse {
    /// Plan the detector for `taps` (crate convention, `pre` pre-cursor taps)
    /// and the constellation of `slicer`.
    ///
    /// # Errors
    /// [`MlseSkip`] when it cannot run (too many states with the reduced-state
    /// detector off, non-finite taps, unsupported constellation size).
    pub fn new(
        taps: &[Cf64],
        pre: usize,
        slicer: &dyn Slicer,
        cfg: &MlseConfig,
    ) -> Result<Mlse, MlseSkip> {
        let points = slicer.points().to_vec();
        let m = points.len();
        if m == 0 || m > 256 {
            return Err(MlseSkip::Points(m));
        }
        let finite = |re: f64, im: f64| re.is_finite() && im.is_finite();
        if taps.iter().any(|t| !finite(t.re, t.im))
            || points
                .iter()
                .any(|p| !finite(f64::from(p.re), f64::from(p.im)))
        {
            return Err(MlseSkip::NonFinite);
        }
        let memory = taps.len().saturating_sub(1);
        let pre = pre.min(memory);
        let skip = MlseSkip::TooManyStates {
            points: m,
            memory,
            max_states: cfg.max_states,
        };
        let (mode, mu) = match pow_within(m, memory.max(1), cfg.max_states) {
            Some(_) => (MlseMode::Full, memory.max(1)),
            None if cfg.reduced_state && memory > 1 => {
                let mut mu = 0;
                while mu + 1 < memory && pow_within(m, mu + 1, cfg.max_states).is_some() {
                    mu += 1;
                }
                if mu == 0 {
                    return Err(skip);
                }
                (MlseMode::ReducedState, mu)
            }
            None => return Err(skip),
        };
        let states = m.pow(mu as u32);
        let depth = cfg
            .traceback_depth
            .unwrap_or(MIN_TRACEBACK.max(16 * mu))
            .clamp(1, MAX_TRACEBACK);
        let block = (depth / 2).max(1);
        let (rtaps, rpre) = reverse_channel(taps, pre);
        Ok(Mlse {
            mode,
            memory,
            state_memory: mu,
            states,
            depth,
            block,
            fwd: Trellis::new(taps, pre, &points, mu),
            rev: Trellis::new(&rtaps, rpre.min(memory), &points, mu),
            points,
        })
    }

    /// Full MLSE or the reduced-state detector.
    pub fn mode(&self) -> MlseMode {
        self.mode
    }
    /// Channel memory `L` (taps − 1).
    pub fn memory(&self) -> usize {
        self.memory
    }
    /// Symbols of state `μ` (`L` for the full MLSE; at least 1).
    pub fn state_memory(&self) -> usize {
        self.state_memory
    }
    /// Trellis states `M^μ`.
    pub fn states(&self) -> usize {
        self.states
    }
    /// Traceback depth `D` in symbols.
    pub fn traceback_depth(&self) -> usize {
        self.depth
    }
    /// `full` or `reduced-state`, the report's status word.
    pub fn status(&self) -> &'static str {
        match self.mode {
            MlseMode::Full => "full",
            MlseMode::ReducedState => "reduced-state",
        }
    }
    /// One line for the report, e.g. `viterbi, 16^2 = 256 states` or
    /// `ddfse, 16^3 = 4096 states (channel memory 4)`.
    pub fn describe(&self) -> String {
        let m = self.points.len();
        match self.mode {
            MlseMode::Full => format!(
                "viterbi, {m}^{} = {} states",
                self.state_memory, self.states
            ),
            MlseMode::ReducedState => format!(
                "ddfse, {m}^{} = {} states (channel memory {})",
                self.state_memory, self.states, self.memory
            ),
        }
    }

    /// Bytes of [`MlseScratch`] a burst of `len` samples needs (the buffers grow
    /// to this and no further): path metrics and residuals `4·4·M^μ`, survivor
    /// ring `(D + D/2)·M^μ`, per-survivor registers `2·(L − μ)·M^μ`, and the
    /// time-reversed copy of the burst with its labels, `(8 + 8 + 8)·len`.
    pub fn scratch_len(&self, len: usize) -> usize {
        let s = self.states;
        let lt = self.memory.saturating_sub(self.state_memory);
        16 * s + (self.depth + self.block) * s + 2 * lt * s + 16 * len + 8 * len
    }

    /// Allocating form of [`Mlse::detect_into`].
    ///
    /// # Errors
    /// As [`Mlse::detect_into`].
    pub fn detect(&self, burst: &MlseBurst<'_>) -> Result<Vec<usize>, MlseError> {
        let mut out = Vec::new();
        self.detect_into(burst, &mut out, &mut MlseScratch::default())?;
        Ok(out)
    }

    /// Decide every symbol of `burst.span`: `out` (resized to `y.len()`) gets
    /// the constellation label of each; entries outside the span, and the
    /// training's (known) entries, are 0.
    ///
    /// # Errors
    /// [`MlseError::Layout`] when the training is not inside the span or the
    /// span not inside `y`.
    pub fn detect_into(
        &self,
        burst: &MlseBurst<'_>,
        out: &mut Vec<usize>,
        scratch: &mut MlseScratch,
    ) -> Result<(), MlseError> {
        let len = burst.y.len();
        let nt = burst.training.len();
        let span = burst.span.clone();
        let t_end = burst.offset.checked_add(nt);
        if span.start > span.end
            || span.end > len
            || burst.offset < span.start
            || t_end.map_or(true, |e| e > span.end)
        {
            return Err(MlseError::Layout {
                offset: burst.offset,
                training_len: nt,
                span_start: span.start,
                span_end: span.end,
                samples: len,
            });
        }
        out.clear();
        out.resize(len, 0);
        // Forward: from the first training symbol to the end of the span.
        self.pass(
            &self.fwd,
            burst.y,
            burst.offset..span.end,
            burst.training,
            out,
            scratch,
        );
        // Backward: the symbols before the training, on the reversed burst.
        if burst.offset > span.start {
            let mut yr = std::mem::take(&mut scratch.yr);
            let mut kr = std::mem::take(&mut scratch.known_r);
            let mut lr = std::mem::take(&mut scratch.rev_labels);
            yr.clear();
            yr.extend(burst.y.iter().rev());
            kr.clear();
            kr.extend(burst.training.iter().rev());
            lr.clear();
            lr.resize(len, 0);
            let start = len - (burst.offset + nt);
            self.pass(
                &self.rev,
                &yr,
                start..len - span.start,
                &kr,
                &mut lr,
                scratch,
            );
            for n in span.start..burst.offset {
                out[n] = lr[len - 1 - n];
            }
            scratch.yr = yr;
            scratch.known_r = kr;
            scratch.rev_labels = lr;
        }
        for v in &mut out[burst.offset..burst.offset + nt] {
            *v = 0;
        }
        Ok(())
    }

    /// One direction: decide `x[t]`, `t ∈ range`, into `out[t]`; `known[i]` is
    /// the value of `x[range.start + i]`.
    fn pass(
        &self,
        tr: &Trellis,
        y: &[Cf32],
        range: Range<usize>,
        known: &[Cf32],
        out: &mut [usize],
        sc: &mut MlseScratch,
    ) {
        let Range { start, end } = range;
        if start >= end {
            return;
        }
        let m = self.points.len();
        let s_count = self.states;
        let mu = self.state_memory;
        let l = self.memory;
        let lt = l.saturating_sub(mu);
        let stride = s_count / m;
        let rows = self.depth + self.block;
        let inf = f32::INFINITY;
        let reset = |v: &mut Vec<f32>, x: f32| {
            v.clear();
            v.resize(s_count, x);
        };
        reset(&mut sc.metric, 0.0);
        reset(&mut sc.next, inf);
        reset(&mut sc.r_re, 0.0);
        reset(&mut sc.r_im, 0.0);
        sc.tb.clear();
        sc.tb.resize(rows * s_count, 0);
        sc.reg.clear();
        sc.reg.resize(lt * s_count, 0);
        sc.reg_next.clear();
        sc.reg_next.resize(lt * s_count, 0);
        let known_end = start + known.len();
        let g = &tr.g;
        let p0 = self.points[0];
        let mut emitted = 0usize; // steps (from `start`) already decided
        for t in start..end {
            let step = t - start;
            // The observation of this step, if every symbol it sees is in range.
            let obs = (t >= start + l && t >= tr.pre)
                .then(|| y.get(t - tr.pre).copied())
                .flatten()
                .filter(|v| v.re.is_finite() && v.im.is_finite())
                .map(|mut v| {
                    // Known symbols sit at digit 0: swap its contribution for theirs.
                    if t < known_end + l {
                        for (k, gk) in g.iter().enumerate().take(l + 1) {
                            let n = t - k;
                            if n >= start && n < known_end {
                                v += gk * (p0 - known[n - start]);
                            }
                        }
                    }
                    v
                });
            let forced = t < known_end;
            if let Some(v) = obs {
                for s in 0..s_count {
                    let mut r = v - tr.isi[s];
                    if lt > 0 {
                        let reg = &sc.reg[s * lt..(s + 1) * lt];
                        for (i, &d) in reg.iter().enumerate() {
                            r -= g[mu + 1 + i] * self.points[d as usize];
                        }
                    }
                    sc.r_re[s] = r.re;
                    sc.r_im[s] = r.im;
                }
            }
            let row = (step % rows) * s_count;
            let tb = &mut sc.tb[row..row + s_count];
            acs(
                &sc.metric,
                &sc.r_re,
                &sc.r_im,
                &tr.new_re,
                &tr.new_im,
                m,
                stride,
                obs.is_some(),
                forced,
                &mut sc.next,
                tb,
            );
            if lt > 0 {
                for (sp, &b) in tb.iter().enumerate() {
                    let b = b as usize;
                    let s = sp / m + stride * b;
                    let dst = &mut sc.reg_next[sp * lt..(sp + 1) * lt];
                    dst[0] = b as u8;
                    dst[1..].copy_from_slice(&sc.reg[s * lt..s * lt + lt - 1]);
                }
                std::mem::swap(&mut sc.reg, &mut sc.reg_next);
            }
            // Renormalise: the best metric becomes 0.
            let best = sc.next.iter().copied().fold(inf, f32::min);
            if best.is_finite() {
                sc.next.iter_mut().for_each(|v| *v -= best);
            } else {
                sc.next.iter_mut().for_each(|v| *v = 0.0);
            }
            std::mem::swap(&mut sc.metric, &mut sc.next);
            if step + 1 - emitted == rows {
                self.traceback(sc, start, step, emitted, emitted + self.block, out);
                emitted += self.block;
            }
        }
        let last = end - 1 - start;
        self.traceback(sc, start, last, emitted, last + 1, out);
    }

    /// From the best state after step `last`, walk back to step `first` and
    /// write the symbols of steps `first..emit_end` into `out[start + step]`.
    fn traceback(
        &self,
        sc: &MlseScratch,
        start: usize,
        last: usize,
        first: usize,
        emit_end: usize,
        out: &mut [usize],
    ) {
        let m = self.points.len();
        let s_count = self.states;
        let stride = s_count / m;
        let rows = self.depth + self.block;
        let mut s = 0;
        let mut best = f32::INFINITY;
        for (i, &v) in sc.metric.iter().enumerate() {
            if v < best {
                best = v;
                s = i;
            }
        }
        let mut step = last;
        loop {
            if step < emit_end {
                out[start + step] = s % m;
            }
            if step == first {
                break;
            }
            let b = sc.tb[(step % rows) * s_count + s] as usize;
            s = s / m + stride * b;
            step -= 1;
        }
    }
}

/// Add-compare-select of one step. New state `s' = a + M·u` has the
/// predecessors `s = u + stride·b`, `b ∈ 0..M`; the branch metric is
/// `|r[s] − new[a]|²` with an observation, 0 without; a forced step allows
/// only `a = 0`. Ties keep the lower `b`.
#[allow(clippy::too_many_arguments)]
#[inline]
fn acs(
    metric: &[f32],
    r_re: &[f32],
    r_im: &[f32],
    new_re: &[f32],
    new_im: &[f32],
    m: usize,
    stride: usize,
    obs: bool,
    forced: bool,
    next: &mut [f32],
    tb: &mut [u8],
) {
    next.fill(f32::INFINITY);
    tb.fill(0);
    let amax = if forced { 1 } else { m };
    let (new_re, new_im) = (&new_re[..amax], &new_im[..amax]);
    for u in 0..stride {
        let nrow = &mut next[u * m..u * m + amax];
        let trow = &mut tb[u * m..u * m + amax];
        for b in 0..m {
            let s = u + stride * b;
            let ms = metric[s];
            if ms == f32::INFINITY {
                continue;
            }
            let bb = b as u8;
            if obs {
                let (rr, ri) = (r_re[s], r_im[s]);
                for (((nv, tv), &ar), &ai) in
                    nrow.iter_mut().zip(trow.iter_mut()).zip(new_re).zip(new_im)
                {
                    let dr = rr - ar;
                    let di = ri - ai;
                    let c = ms + (dr * dr + di * di);
                    if c < *nv {
                        *nv = c;
                        *tv = bb;
                    }
                }
            } else {
                for (nv, tv) in nrow.iter_mut().zip(trow.iter_mut()) {
                    if ms < *nv {
                        *nv = ms;
                        *tv = bb;
                    }
                }
            }
        }
    }
}

#[cfg(test)]
#[path = "mlse_tests.rs"]
mod tests;
