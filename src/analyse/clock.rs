//! Sample-clock offset of one burst: estimated from the burst itself and followed
//! across its payload (#17, item 3).
//!
//! Takes in: a burst's first extraction and equalisation ([`Frame`],
//! [`BurstOutput`]) made at the burst's clock offset (normally 0), the sample
//! source and the synchroniser. Gives out: the clock offset in ppm (crate
//! convention: positive when the receiver's clock is fast, symbol `k` at
//! `t₀ + k·sps·(1 + ε)`), and — when it matters — the frame extracted again with
//! the offset and equalised again.
//!
//! **Timing error of a block.** The frame's timing derivative is extracted too
//! ([`Synchroniser::extract_slopes`]: `y'_k ≈ (y(t_k + δ) − y(t_k − δ))/(2δ)`,
//! δ = [`DELTA`] samples, the same interpolator at both instants, one folded filter). With `ŷ_k = c_b·Σ_i h_i·d_{k−i}`
//! (the fitted taps applied to the known symbols where known, to the equaliser's
//! decisions elsewhere; `c_b` the block's own complex gain, which absorbs what
//! the phase tracking follows), an instant late by `e` gives
//! `y_k − ŷ_k ≈ e·y'_k + noise`, so the least-squares timing error of block `b`
//! (`B` = [`BLOCK`] symbols) is
//! `e_b = Re Σ conj(y'_k)(y_k − ŷ_k) / Σ|y'_k|²`, with variance
//! `σ²/(2·Σ|y'_k|²)` for noise of variance `σ²` per symbol (the channel fit's).
//!
//! **Offset.** Extracted at offset `ε_c`, symbol `k`'s instant is late by
//! `e_k = e₀ + k·sps·(ε_c − ε)`; a weighted least-squares line through
//! `(k_b, e_b)` (block centre, weight `1/var(e_b)`) gives slope `s` and
//! `ε = ε_c − s/sps`. The slope's variance is `1/Σ_b w_b(k_b − k̄)²`, scaled up by
//! the fit's reduced χ² when that exceeds 1 (decision errors, model error).
//!
//! **Progressive.** Decisions far from the training are wrong while the drift is
//! uncorrected, so pass `p` uses only blocks within `L_p` symbols of the training
//! (`L₀` = [`FIRST_SPAN`], doubling). When a pass's estimate is significant
//! (beyond [`SIGNIFICANCE`] σ from the offset in use) and moves the burst's last
//! instant by more than [`MIN_DRIFT_SAMPLES`], the frame is extracted and
//! equalised again with it; the passes go on until the span covers the burst
//! (and once more over the whole burst if that last pass moved the offset).
//! A burst with fewer than [`MIN_BLOCKS`] blocks is not estimated, nor any with
//! the profile's `equaliser.clock_tracking` false. An impairment-
//! free burst normally ends its passes with the offset unused, so its figures
//! are exactly those without the estimate; its cost is one extra extraction (of
//! the slopes) per pass and the block sums.
use super::burst::Frame;
use super::plan::{chosen_name, Plan};
use crate::equalise::BurstOutput;
use crate::profile::ResolvedProfile;
use crate::sync::{BurstSync, SampleSource, Synchroniser};
use crate::{Cf32, Cf64, Error};

/// Half-spacing of the derivative's central difference, samples.
pub const DELTA: f64 = 0.1;
/// Symbols per timing-error block.
pub const BLOCK: usize = 256;
/// Fewest blocks (of training and payload present) for an estimate.
pub const MIN_BLOCKS: usize = 4;
/// Half-width of the first pass's span around the training, symbols.
pub const FIRST_SPAN: usize = 2048;
/// An estimate is used only beyond this many standard deviations.
pub const SIGNIFICANCE: f64 = 4.0;
/// An estimate is used only when it moves the burst's farthest symbol instant
/// by more than this, samples.
pub const MIN_DRIFT_SAMPLES: f64 = 0.01;
/// Most re-extractions per burst (bounds the cost of a burst that never settles).
const MAX_UPDATES: usize = 8;

/// One pass's estimate.
#[derive(Debug, Clone, Copy)]
struct Estimate {
    /// Clock offset, ppm.
    sco_ppm: f64,
    /// Its standard deviation, ppm.
    sigma_ppm: f64,
}

/// The burst's clock: what was estimated and the burst timed with it.
pub(super) struct Clock {
    /// Final estimate, ppm (`None` for a burst too short to estimate).
    pub(super) sco_ppm: Option<f64>,
    /// The burst as extracted for the figures (offset applied or not).
    pub(super) burst: BurstSync,
}

/// Usable frame indices: training and payload present.
fn frame_span(frame: &Frame, plan: &Plan) -> std::ops::Range<usize> {
    let l = plan.training.len();
    let lo = (frame.offset - plan.before).max(frame.avail.start);
    let hi = (frame.offset + l + plan.after).min(frame.avail.end).max(lo);
    lo..hi
}

/// The clock offset estimated on frame indices `use_range` (see the module docs),
/// or `None` when there are too few blocks or no signal.
#[allow(clippy::too_many_arguments)]
fn estimate<S: SampleSource + ?Sized>(
    bs: &BurstSync,
    frame: &Frame,
    out: &BurstOutput,
    plan: &Plan,
    profile: &ResolvedProfile,
    sync: &Synchroniser,
    src: &S,
    use_range: std::ops::Range<usize>,
) -> Result<Option<Estimate>, Error> {
    let nb = use_range.len() / BLOCK;
    if nb < MIN_BLOCKS {
        return Ok(None);
    }
    let Some(labels) = [chosen_name(profile), "mmse-dfe"].iter().find_map(|n| {
        match out.get(n).map(|r| &r.outcome) {
            Some(Ok((_, s))) => Some(&s.labels),
            _ => None,
        }
    }) else {
        return Ok(None);
    };
    let offset = frame.offset as i64;
    let syms = use_range.start as i64 - offset..use_range.end as i64 - offset;
    let n = use_range.len();
    let mut slope = vec![Cf32::new(0.0, 0.0); n];
    sync.extract_slopes(src, bs, syms, DELTA, &mut slope)?;
    // The equaliser's carrier correction `exp(−j(2πνi + φ))` at frame index `i`,
    // applied to the slopes as it was to the samples.
    let (nu, phi) = (
        out.carrier.refined_cfo_cycles_per_symbol,
        out.carrier.phase_rad,
    );
    let wide = |v: Cf32| Cf64::new(f64::from(v.re), f64::from(v.im));
    let points = plan.constellation.points();
    let ch = &out.channel;
    let symbol_at = |i: usize| -> Cf64 {
        if let Some(k) = &frame.known {
            return wide(k[i]);
        }
        let l = plan.training.len();
        if (frame.offset..frame.offset + l).contains(&i) {
            return wide(plan.training[i - frame.offset]);
        }
        labels
            .get(i)
            .and_then(|&c| points.get(c))
            .map_or(Cf64::new(0.0, 0.0), |p| wide(*p))
    };
    let step = Cf64::from_polar(1.0, -std::f64::consts::TAU * nu);
    let span = frame_span(frame, plan);
    let noise = ch.noise_var.max(f64::MIN_POSITIVE);
    // (block centre in symbols from the training start, e_b, weight 1/var(e_b)).
    let mut blocks: Vec<(f64, f64, f64)> = Vec::with_capacity(nb);
    let mut yhat = vec![Cf64::new(0.0, 0.0); BLOCK];
    let mut dy = vec![Cf64::new(0.0, 0.0); BLOCK];
    for b in 0..nb {
        let first = use_range.start + b * BLOCK;
        // The rotation at the block's first index, then advanced by one step per
        // symbol (256 steps: rounding drift ≈ 1e-14).
        let mut rot = Cf64::from_polar(1.0, -(std::f64::consts::TAU * nu * first as f64 + phi));
        let (mut yy, mut hh) = (Cf64::new(0.0, 0.0), 0.0f64);
        for (j, (yh, d)) in yhat.iter_mut().zip(dy.iter_mut()).enumerate() {
            let i = first + j;
            // ŷ_i = Σ_t h[t − P]·d[i − (t − P)], symbols outside the frame as 0.
            let mut acc = Cf64::new(0.0, 0.0);
            for (t, h) in ch.taps.iter().enumerate() {
                let src_i = i as i64 - (t as i64 - ch.pre as i64);
                if src_i >= span.start as i64 && src_i < span.end as i64 {
                    acc += *h * symbol_at(src_i as usize);
                }
            }
            *yh = acc;
            *d = wide(slope[i - use_range.start]) * rot;
            rot *= step;
            let y = wide(out.corrected[i]);
            yy += acc.conj() * y;
            hh += acc.norm_sqr();
        }
        if hh <= 0.0 {
            continue;
        }
        let c = yy / hh;
        let (mut num, mut den) = (0.0f64, 0.0f64);
        for (j, (yh, d)) in yhat.iter().zip(&dy).enumerate() {
            let r = wide(out.corrected[first + j]) - c * *yh;
            num += (d.conj() * r).re;
            den += d.norm_sqr();
        }
        if den > 0.0 && num.is_finite() {
            let centre = (first + BLOCK / 2) as f64 - 0.5 - frame.offset as f64;
            blocks.push((centre, num / den, 2.0 * den / noise));
        }
    }
    if blocks.len() < MIN_BLOCKS {
        return Ok(None);
    }
    let sw: f64 = blocks.iter().map(|b| b.2).sum();
    let xm = blocks.iter().map(|b| b.2 * b.0).sum::<f64>() / sw;
    let ym = blocks.iter().map(|b| b.2 * b.1).sum::<f64>() / sw;
    let sxx: f64 = blocks.iter().map(|b| b.2 * (b.0 - xm).powi(2)).sum();
    let sxy: f64 = blocks.iter().map(|b| b.2 * (b.0 - xm) * (b.1 - ym)).sum();
    if sxx.is_nan() || sxx <= 0.0 {
        return Ok(None);
    }
    let slope = sxy / sxx;
    let chi2: f64 = blocks
        .iter()
        .map(|b| b.2 * (b.1 - ym - slope * (b.0 - xm)).powi(2))
        .sum::<f64>()
        / (blocks.len() - 2) as f64;
    let var_slope = chi2.max(1.0) / sxx;
    let sps = plan.sps as f64;
    let e = bs.sco_ppm * 1e-6 - slope / sps;
    let sigma = var_slope.sqrt() / sps;
    if !(e.is_finite() && sigma.is_finite()) {
        return Ok(None);
    }
    Ok(Some(Estimate {
        sco_ppm: e * 1e6,
        sigma_ppm: sigma * 1e6,
    }))
}

/// How the caller extracts, corrects and equalises the burst timed at a given
/// [`BurstSync`] (its first `limit` frame symbols, or all of it with `None`).
pub(super) type Remake<'a> =
    dyn FnMut(&BurstSync, Option<usize>) -> Result<(Frame, BurstOutput), Error> + 'a;

/// Estimate the burst's clock offset and, when it matters, extract and equalise
/// the burst again with it (`remake`; see the module docs). `frame` and `out` are
/// the burst's first extraction and equalisation (at `bs`); they are replaced
/// when the offset is applied.
#[allow(clippy::too_many_arguments)]
pub(super) fn follow_clock<S: SampleSource + ?Sized>(
    bs: &BurstSync,
    plan: &Plan,
    profile: &ResolvedProfile,
    sync: &Synchroniser,
    src: &S,
    frame: &mut Frame,
    out: &mut BurstOutput,
    remake: &mut Remake<'_>,
) -> Result<Clock, Error> {
    let sps = plan.sps;
    let len = src.len() as u64;
    let mut cur = bs.clone();
    let span = frame_span(frame, plan);
    let shortest = if profile.equaliser.clock_tracking {
        MIN_BLOCKS * BLOCK
    } else {
        usize::MAX
    };
    // Farthest symbol from the training start, symbols (where drift is largest).
    let far = (span.end as f64 - frame.offset as f64)
        .abs()
        .max((frame.offset as f64 - span.start as f64).abs());
    if span.len() < shortest {
        return Ok(Clock {
            sco_ppm: None,
            burst: cur,
        });
    }
    let l = plan.training.len();
    // Length of the whole frame (`y`), symbols: a prefix this long is all of it.
    let whole = frame.offset + l + plan.after + plan.margin;
    let mut reach = FIRST_SPAN;
    let mut last: Option<Estimate> = None;
    let mut updates = 0;
    // The frame and its equalisation cover only `limit` symbols past the
    // training while the passes run (a prefix of an after-training payload).
    let mut partial = false;
    loop {
        let lo = frame.offset.saturating_sub(reach).max(span.start);
        let covers = lo == span.start && frame.offset + l + reach >= span.end;
        if partial && frame.avail.end < (frame.offset + l + reach).min(span.end) {
            // A prefix extracted for an earlier pass: extend it at the offset in use.
            let limit = (!covers).then(|| frame.offset + l + 2 * reach + plan.margin);
            (*frame, *out) = remake(&cur, limit)?;
            partial = limit.is_some_and(|n| n < whole);
        }
        let hi = (frame.offset + l + reach)
            .min(span.end)
            .min(frame.avail.end);
        let est = estimate(&cur, frame, out, plan, profile, sync, src, lo..hi.max(lo))?;
        let Some(est) = est else {
            if covers {
                break;
            }
            reach *= 2;
            continue;
        };
        last = Some(est);
        let step = est.sco_ppm - cur.sco_ppm;
        let moves = (step * 1e-6 * far * sps as f64).abs() > MIN_DRIFT_SAMPLES;
        // The first use needs a significant estimate; once the burst is known to
        // drift, each pass's estimate (over a longer span) supersedes the last.
        let significant = cur.sco_ppm != bs.sco_ppm || step.abs() > SIGNIFICANCE * est.sigma_ppm;
        if moves && significant && updates < MAX_UPDATES {
            updates += 1;
            cur = cur.retimed(0.0, est.sco_ppm, sps, len);
            // Until the span covers the burst, only the next pass's prefix is needed.
            let limit = (!covers).then(|| frame.offset + l + 2 * reach + plan.margin);
            (*frame, *out) = remake(&cur, limit)?;
            partial = limit.is_some_and(|n| n < whole);
            if !covers {
                reach *= 2;
            }
            continue;
        }
        if covers {
            break;
        }
        reach *= 2;
    }
    if partial {
        (*frame, *out) = remake(&cur, None)?;
    }
    Ok(Clock {
        sco_ppm: last.map(|e| e.sco_ppm),
        burst: cur,
    })
}
