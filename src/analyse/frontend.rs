//! The receiver's DC offset and IQ imbalance, fitted over a burst's training and
//! removed from its symbol-rate samples before any equaliser sees them (#17).
//!
//! Takes a burst's extracted frame (`y`, the first training symbol's index, the
//! indices inside the capture), the plan and the synchroniser's CFO for the
//! burst; corrects `y` in place and gives the [`FrontEnd`] figures for the
//! report. Runs only when the profile's `channel_fit.dc_offset` or
//! `channel_fit.iq_imbalance` is on; the model and its approximation are in
//! [`crate::channel::fit_front_end`]. The DC is fitted where the receiver put it
//! — a constant at the receiver's input, a phasor at −CFO after derotation — so
//! it is found at any CFO, and the image is fitted turning at twice that rate.

use super::plan::Plan;
use crate::channel::{fit_channel, fit_front_end, ChannelFitConfig, FrontEndFit, TapSpan};
use crate::report::schema::{Warning, WarningCode};
use crate::sync::{SampleSource, SyncError};
use crate::{Cf32, Cf64};

/// What the front-end fit found in one burst and what it removed.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub(super) struct FrontEnd {
    /// DC removed at the receiver's input, full-scale units (I + jQ), when
    /// `channel_fit.dc_offset` is on.
    pub(super) dc: Option<Cf64>,
    /// The receiver DC the training shows (removed or not), full-scale units,
    /// when it stands above its estimation noise (10 standard errors); the
    /// `strong-dc` warning is judged on it, not on the samples' mean (which
    /// also holds the signal's own mean on a channel with gain at DC).
    pub(super) dc_seen: Option<Cf64>,
    /// Gain imbalance (dB) and phase imbalance (degrees), crate convention, when fitted.
    pub(super) iq: Option<(f64, f64)>,
    /// Image power relative to the signal, `20·log10|β|` dB, when fitted.
    pub(super) image_db: Option<f64>,
    /// What the decision-directed pass needs: the tap span and `ω`, when a
    /// correction was applied.
    applied: Option<(usize, usize, f64)>,
}

/// The samples of a source less a constant: what the synchroniser times a
/// burst on again when the front-end fit saw a receiver DC, so the DC does not
/// pull the timing or the training CFO (measured: −17 dB of DC at CFO 0 moved
/// the instant by 0.1 sample and cost 0.25 dB of MER). The constant is the
/// fitted DC, not the samples' mean, which also holds the signal's own mean
/// (subtracting that moved a clean burst's timing and cost 0.09 dB).
pub(super) struct LessDc<'a, S: ?Sized> {
    src: &'a S,
    dc: Cf32,
}

impl<S: SampleSource + ?Sized> SampleSource for LessDc<'_, S> {
    fn len(&self) -> usize {
        self.src.len()
    }
    fn read(&self, start: usize, out: &mut [Cf32]) -> Result<(), SyncError> {
        self.src.read(start, out)?;
        for v in out.iter_mut() {
            *v -= self.dc;
        }
        Ok(())
    }
}

impl<'a, S: ?Sized> LessDc<'a, S> {
    /// `src` less `dc` (full-scale units at the receiver's input).
    pub(super) fn new(src: &'a S, dc: Cf64) -> LessDc<'a, S> {
        LessDc {
            src,
            dc: Cf32::new(dc.re as f32, dc.im as f32),
        }
    }
}

/// Response of the real, centred pulse `p` at `f` cycles per sample.
fn pulse_response(p: &[f32], f: f64) -> f64 {
    let c = (p.len() as f64 - 1.0) / 2.0;
    p.iter()
        .enumerate()
        .map(|(m, v)| f64::from(*v) * (std::f64::consts::TAU * f * (m as f64 - c)).cos())
        .sum()
}

/// Estimation variance of the DC phasor relative to the noise, `var(d̂) ≈ σ²/M`
/// (a unit-modulus regressor nearly orthogonal to a rich training); a DC counts
/// as seen when `|d̂|² > DC_SIGNIFICANCE·σ²/M`.
const DC_SIGNIFICANCE: f64 = 100.0;

/// Fit and remove the receiver's DC and image from `y[avail]` (see the module
/// documentation). `cfo_hz` is the CFO the frame was derotated by, `pulse` the
/// matched filter's taps. With neither correction asked for, the DC is still
/// fitted (not removed) so the `strong-dc` warning can tell a receiver DC from
/// the signal's own mean. A fit the training cannot support leaves `y` as it
/// is and, when a correction was asked for, says so in a warning.
pub(super) fn correct_front_end(
    y: &mut [Cf32],
    offset: usize,
    avail: std::ops::Range<usize>,
    plan: &Plan,
    cfo_hz: f64,
    pulse: &[f32],
    warnings: &mut Vec<Warning>,
) -> FrontEnd {
    let ch = &plan.burst_cfg.channel;
    let correct = ch.dc_offset || ch.iq_imbalance;
    let f = cfo_hz / plan.sample_rate_hz;
    let omega = -std::f64::consts::TAU * f * plan.sps as f64;
    let fail = |warnings: &mut Vec<Warning>, why: String| {
        if correct {
            refused(warnings, &why);
        }
        FrontEnd::default()
    };
    // The tap span: the profile's, or the one MDL picks on the plain model.
    let (pre, post) = match ch.span {
        TapSpan::Fixed { pre, post } => (pre, post),
        TapSpan::Auto { .. } => {
            let plain = ChannelFitConfig {
                dc_offset: false,
                iq_imbalance: false,
                ..*ch
            };
            match fit_channel(y, &plan.training, offset, &plain) {
                Ok(est) => (est.pre, est.post),
                Err(e) => return fail(warnings, e.to_string()),
            }
        }
    };
    let fit = match fit_front_end(
        y,
        &plan.training,
        offset,
        0.0,
        pre,
        post,
        omega,
        ch.dc_offset || !correct,
        ch.iq_imbalance,
        ch.max_condition,
    ) {
        Ok(fit) => fit,
        Err(e) => return fail(warnings, e.to_string()),
    };
    if correct {
        fit.correct(y, offset, avail);
    }
    let mut fe = figures(&fit, plan, f, pulse);
    fe.applied = correct.then_some((pre, post, omega));
    fe
}

/// The report's figures of a fit (DC referred to the receiver's input).
fn figures(fit: &FrontEndFit, plan: &Plan, f: f64, pulse: &[f32]) -> FrontEnd {
    let ch = &plan.burst_cfg.channel;
    let gain = pulse_response(pulse, f);
    let to_input = |d: Cf64| if gain.abs() > 0.0 { d / gain } else { d };
    let dc_seen = fit
        .dc_symbol
        .filter(|d| d.norm_sqr() > DC_SIGNIFICANCE * fit.noise_var / fit.observations.max(1) as f64)
        .map(to_input);
    FrontEnd {
        dc: fit.dc_symbol.filter(|_| ch.dc_offset).map(to_input),
        dc_seen,
        iq: fit.iq_imbalance(),
        image_db: fit.beta.map(|b| 20.0 * b.norm().max(1e-15).log10()),
        applied: None,
    }
}

/// Second, decision-directed pass over the whole burst (#17): with the
/// training alone (64 symbols by default) the DC and image estimates carry
/// `σ²/M` of noise that costs a few tenths of a dB of MER; the burst's other
/// symbols are known or decided, so the same model is fitted again over every
/// symbol present, on the frame as extracted (`raw`), after taking out the
/// carrier refinement's residual rotation `delta` (radians per symbol) so the
/// channel is constant over the burst. `symbols` holds the known or decided
/// symbol at each index of `raw` inside `span`. Returns the corrected frame and
/// its figures, or `None` when the first pass applied nothing or the fit fails
/// (the first pass's correction then stands).
#[allow(clippy::too_many_arguments)]
pub(super) fn refine_front_end(
    first: &FrontEnd,
    raw: &[Cf32],
    symbols: &[Cf32],
    span: std::ops::Range<usize>,
    avail: std::ops::Range<usize>,
    offset: usize,
    delta: f64,
    plan: &Plan,
    cfo_hz: f64,
    pulse: &[f32],
) -> Option<(Vec<Cf32>, FrontEnd)> {
    let (pre, post, omega) = first.applied?;
    let ch = &plan.burst_cfg.channel;
    if span.end > raw.len() || span.end > symbols.len() || span.start >= span.end {
        return None;
    }
    // raw · e^{−jδ(k − offset)}: the signal stands still, the DC turns at ω − δ
    // and the image at 2(ω − δ) (see crate::channel::fit_front_end).
    let still: Vec<Cf32> = raw
        .iter()
        .enumerate()
        .map(|(k, v)| {
            let r = Cf64::from_polar(1.0, -delta * (k as f64 - offset as f64));
            let w = Cf64::new(f64::from(v.re), f64::from(v.im)) * r;
            Cf32::new(w.re as f32, w.im as f32)
        })
        .collect();
    let t0 = span.start as f64 - offset as f64;
    let fit = fit_front_end(
        &still,
        &symbols[span.clone()],
        span.start,
        t0,
        pre,
        post,
        omega - delta,
        ch.dc_offset,
        ch.iq_imbalance,
        ch.max_condition,
    )
    .ok()?;
    // The same DC and image, on the frame as extracted: rotation ω again.
    let on_raw = FrontEndFit { omega, ..fit };
    let mut y = raw.to_vec();
    on_raw.correct(&mut y, offset, avail);
    let f = cfo_hz / plan.sample_rate_hz;
    let mut fe = figures(&on_raw, plan, f, pulse);
    fe.applied = first.applied;
    Some((y, fe))
}

fn refused(warnings: &mut Vec<Warning>, why: &str) {
    warnings.push(Warning::new(
        WarningCode::StrongDc,
        format!("the receiver DC/IQ-imbalance fit was refused ({why}); nothing was removed — lengthen the training or turn channel_fit.dc_offset / iq_imbalance off"),
    ));
}

#[cfg(test)]
mod tests {
    use super::*;

    // A symmetric pulse's response at f = 0 is the sum of its taps, and a
    // two-tap-apart cosine sum at other f (direct evaluation; common practice).
    #[test]
    fn the_pulse_response_is_the_cosine_sum_about_the_centre() {
        let p = [0.25f32, 0.5, 1.0, 0.5, 0.25];
        assert!((pulse_response(&p, 0.0) - 2.5).abs() < 1e-12);
        let f = 0.1f64;
        let w = std::f64::consts::TAU * f;
        let want = 1.0 + 2.0 * 0.5 * w.cos() + 2.0 * 0.25 * (2.0 * w).cos();
        assert!((pulse_response(&p, f) - want).abs() < 1e-12);
    }
}
