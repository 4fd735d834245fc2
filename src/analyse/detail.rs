//! What a burst shows beyond its figures: the channel section and the plot trace.
//!
//! Takes a burst's channel estimate, or its equalised payload symbols with their
//! reference and symbol numbers; gives the report's [`ChannelReport`] (taps,
//! delay spread, optional frequency response) and [`Trace`] (decimated
//! constellation, EVM blocks, sync metric around the burst start).

use super::plan::Plan;
use super::{SYNC_TRACE_SYMBOLS, TRACE_POINTS};
use crate::channel::{ChannelEstimate, SpanChoice};
use crate::report::schema::{ChannelReport, EyeTrace, Trace};
use crate::sync::{BurstSync, SampleSource, Synchroniser};
use crate::{Cf32, Cf64, Error};

/// Channel figures for the report.
/// The frequency response (`response_db`) only with `detail`.
pub(super) fn channel_report(ch: &ChannelEstimate, detail: bool) -> ChannelReport {
    let main = ch.taps[ch.pre].norm().max(1e-300);
    let powers: Vec<f64> = ch.taps.iter().map(|t| t.norm_sqr()).collect();
    let total: f64 = powers.iter().sum::<f64>().max(1e-300);
    let mean: f64 = powers
        .iter()
        .enumerate()
        .map(|(i, p)| i as f64 * p)
        .sum::<f64>()
        / total;
    let spread = (powers
        .iter()
        .enumerate()
        .map(|(i, p)| (i as f64 - mean).powi(2) * p)
        .sum::<f64>()
        / total)
        .sqrt();
    const GRID: usize = 128;
    let response_db = detail.then(|| {
        (0..=GRID)
            .map(|g| {
                let f = g as f64 / GRID as f64 - 0.5;
                let h: Cf64 = ch
                    .taps
                    .iter()
                    .enumerate()
                    .map(|(i, t)| {
                        let k = i as f64 - ch.pre as f64;
                        t * Cf64::from_polar(1.0, -2.0 * std::f64::consts::PI * f * k)
                    })
                    .sum();
                [f, 20.0 * h.norm().max(1e-12).log10()]
            })
            .collect()
    });
    ChannelReport {
        taps: ch.taps.iter().map(|t| [t.re, t.im]).collect(),
        taps_db: ch
            .taps
            .iter()
            .map(|t| 20.0 * (t.norm().max(1e-300) / main).log10())
            .collect(),
        main_index: ch.pre,
        pre_cursor: ch.pre,
        post_cursor: ch.post,
        significant_taps: ch.significant_taps,
        delay_spread_symbols: spread,
        noise_variance: ch.noise_var,
        snr_db: ch.snr_db,
        dc: ch.dc.map(|d| [d.re, d.im]),
        dc_relative_db: None,
        image_level_db: ch.conj_taps.as_ref().map(|g| {
            let gp: f64 = g.iter().map(|v| v.norm_sqr()).sum();
            10.0 * (gp.max(1e-300) / total).log10()
        }),
        iq_gain_imbalance_db: None,
        iq_phase_imbalance_deg: None,
        training_symbols: 0,
        span_choice: match ch.span_choice {
            SpanChoice::Fixed => "fixed".into(),
            SpanChoice::Mdl { .. } => "mdl".into(),
        },
        response_db,
    }
}

#[allow(clippy::too_many_arguments)]
pub(super) fn trace<S: SampleSource + ?Sized>(
    bs: &BurstSync,
    sync: &Synchroniser,
    src: &S,
    plan: &Plan,
    z: &[Cf32],
    numbers: &[usize],
    reference: &[Cf32],
    wrong: Vec<usize>,
    main_tap: Cf64,
) -> Result<Trace, Error> {
    let n = z.len();
    let stride = n.div_ceil(TRACE_POINTS).max(1);
    let constellation: Vec<[f64; 3]> = (0..n)
        .step_by(stride)
        .map(|j| [numbers[j] as f64, f64::from(z[j].re), f64::from(z[j].im)])
        .collect();
    let shown: std::collections::BTreeSet<usize> =
        constellation.iter().map(|p| p[0] as usize).collect();
    let wrong: Vec<usize> = wrong.into_iter().filter(|w| shown.contains(w)).collect();
    let block = (n / 200).max(16);
    let mut evm_blocks = Vec::new();
    let mut j = 0;
    while j < n {
        let e = (j + block).min(n);
        if let Some(f) = crate::report::metrics::evm(&z[j..e], &reference[j..e]) {
            evm_blocks.push([numbers[j] as f64, f.evm_rms_percent]);
        }
        j = e;
    }
    let half = SYNC_TRACE_SYMBOLS * plan.sps;
    let centre = bs.start_sample.max(0) as usize;
    let from = centre.saturating_sub(half);
    let values = sync.metric(src, from..centre + half + 1)?;
    let sync_metric = values
        .iter()
        .enumerate()
        .map(|(i, v)| [(from + i) as f64 - centre as f64, *v])
        .collect();
    let eye_matched = Some(eye_trace(bs, sync, src, plan, main_tap)?);
    // The first payload symbols after the training, in time order (payload
    // numbers count the symbols before the training first).
    let eye_equalised = numbers
        .iter()
        .zip(z)
        .filter(|(&p, _)| p >= plan.before_nominal)
        .take(EYE_SYMBOLS)
        .map(|(_, s)| [f64::from(s.re), f64::from(s.im)])
        .collect();
    Ok(Trace {
        constellation,
        wrong,
        evm_blocks,
        sync_metric,
        eye_matched,
        eye_equalised,
    })
}

/// Symbols (traces) in each eye diagram.
const EYE_SYMBOLS: usize = 128;
/// Points per symbol period of the matched-filter eye.
const EYE_POINTS_PER_SYMBOL: usize = 12;

/// The matched-filter output around the first [`EYE_SYMBOLS`] payload symbols
/// after the training (or before it, for a postamble frame), at
/// [`EYE_POINTS_PER_SYMBOL`] instants per symbol over ±1 symbol, divided by
/// the main tap. Each instant is the burst's symbol instant moved by a
/// fraction of a symbol; the carrier derotation is referred back to the
/// burst's own instant.
fn eye_trace<S: SampleSource + ?Sized>(
    bs: &BurstSync,
    sync: &Synchroniser,
    src: &S,
    plan: &Plan,
    main_tap: Cf64,
) -> Result<EyeTrace, Error> {
    let l = plan.training.len() as i64;
    let (first, n) = if plan.after > 0 {
        (l, plan.after.min(EYE_SYMBOLS))
    } else {
        let n = plan.before.min(EYE_SYMBOLS);
        (-(n as i64), n)
    };
    let p = EYE_POINTS_PER_SYMBOL;
    let h0 = if main_tap.norm() > 0.0 {
        main_tap
    } else {
        Cf64::new(1.0, 0.0)
    };
    let f = bs.cfo_hz / plan.sample_rate_hz;
    let mut columns = Vec::with_capacity(2 * p + 1);
    let mut out = vec![Cf32::new(0.0, 0.0); n];
    for j in 0..=2 * p {
        let shift = (j as f64 / p as f64 - 1.0) * plan.sps as f64;
        let mut moved = bs.clone();
        let instant = bs.instant() + shift;
        moved.start_sample = instant.round() as i64;
        moved.timing_frac = instant - moved.start_sample as f64;
        sync.extract_symbols(src, &moved, first..first + n as i64, &mut out)?;
        let undo = Cf64::from_polar(1.0, -2.0 * std::f64::consts::PI * f * shift) / h0;
        columns.push(
            out.iter()
                .map(|v| {
                    let c = Cf64::new(f64::from(v.re), f64::from(v.im)) * undo;
                    [c.re, c.im]
                })
                .collect::<Vec<_>>(),
        );
    }
    let traces = (0..n)
        .map(|k| columns.iter().map(|c| c[k]).collect())
        .collect();
    Ok(EyeTrace {
        points_per_symbol: p,
        traces,
    })
}
