//! One burst through the stages: extraction, channel fit and equalisers, figures.
//!
//! Takes a synchronised burst ([`BurstSync`]), the capture's [`Plan`] and the
//! sample source; gives the burst's [`BurstReport`]. The symbol-rate samples are
//! cut out around the frame, every equaliser runs on them
//! ([`process_burst`]), the profile's choice (or the MMSE-DFE when it refused) is
//! reported, and the payload figures come from
//! [`crate::report::metrics::payload_figures`]; with `equaliser.mlse` on, the
//! Viterbi MLSE runs beside it ([`super::mlse`]). The trace and the channel
//! response are computed only when `want_detail` says the burst may be traced.

use super::clock::follow_clock;
use super::detail::{channel_report, trace};
use super::frontend::{correct_front_end, FrontEnd};
use super::mlse::{burst_mlse, mlse_warning};
use super::plan::{chosen_name, tracking_name, usage, Plan};
use super::CONFIDENCE;
use crate::capture::Capture;
use crate::channel::{fit_channel, ChannelFitConfig, TapSpan};
use crate::equalise::{process_burst, BurstOutput, BurstView, DfeFilters, EqualisedSymbols};
use crate::profile::ResolvedProfile;
use crate::report::metrics::RunAwareRate;
use crate::report::metrics::{
    payload_figures, run_length_histogram, PayloadDecisions, PayloadFigures,
};
use crate::report::schema::{
    BurstMetrics, BurstReport, EqualiserReport, TheoryReport, Warning, WarningCode,
};
use crate::sync::{BurstSync, SampleSource, Synchroniser};
use crate::{Cf32, Cf64, Error};

/// A burst's symbol-rate samples cut out around its frame, and what is in them.
pub(super) struct Frame {
    /// Matched-filtered, timing- and CFO-corrected samples at the symbol rate:
    /// the frame with `plan.margin` symbols of padding either side.
    pub(super) y: Vec<Cf32>,
    /// Index in `y` of the first training symbol.
    pub(super) offset: usize,
    /// Indices in `y` that lie inside the capture.
    pub(super) avail: std::ops::Range<usize>,
    /// `(payload symbol number, index in y)` of every payload symbol present.
    pub(super) present: Vec<(usize, usize)>,
    /// The capture cuts the payload.
    pub(super) truncated: bool,
    /// The known frame laid out like `y` (zeros in the margins), if known.
    pub(super) known: Option<Vec<Cf32>>,
}

/// Indices (into the extracted vector) of the payload symbols, in payload order.
fn payload_indices(plan: &Plan, offset: usize) -> impl Iterator<Item = usize> + '_ {
    let before = offset - plan.before..offset;
    let t_end = offset + plan.training.len();
    before.chain(t_end..t_end + plan.after)
}

/// Cut the frame out of the capture and lay the known symbols beside it; with
/// `limit`, only its first `limit` symbols (`y` indices) are cut out.
pub(super) fn extract_frame<S: SampleSource + ?Sized>(
    bs: &BurstSync,
    plan: &Plan,
    sync: &Synchroniser,
    src: &S,
    limit: Option<usize>,
) -> Result<Frame, Error> {
    let l = plan.training.len();
    let offset = plan.margin + plan.before;
    let first = -((plan.before + plan.margin) as i64);
    let mut last = (l + plan.after + plan.margin) as i64;
    if let Some(n) = limit {
        last = last.min(first + n.max(offset + l) as i64);
    }
    let mut y = vec![Cf32::new(0.0, 0.0); (last - first) as usize];
    let span = sync.extract_symbols(src, bs, first..last, &mut y)?;
    let avail = (span.available.start - first) as usize..(span.available.end - first) as usize;
    let all_payload: Vec<usize> = payload_indices(plan, offset).collect();
    let present: Vec<(usize, usize)> = all_payload
        .iter()
        .enumerate()
        .filter(|(_, i)| avail.contains(i))
        .map(|(p, &i)| (plan.payload_number(p), i))
        .collect();
    let truncated = present.len() < all_payload.len() || plan.payload_cut();
    let known = match (&plan.known_before, &plan.known_after) {
        (Some(b), Some(a)) => {
            let mut k = vec![Cf32::new(0.0, 0.0); offset + l + a.len() + plan.margin];
            k[offset - b.len()..offset].copy_from_slice(b);
            k[offset..offset + l].copy_from_slice(&plan.training);
            k[offset + l..offset + l + a.len()].copy_from_slice(a);
            k.truncate(y.len());
            Some(k)
        }
        _ => None,
    };
    Ok(Frame {
        y,
        offset,
        avail,
        present,
        truncated,
        known,
    })
}

/// Run every equaliser on the frame; the carrier-frequency fit uses only the
/// frame's symbols present in the capture, not the padding around it.
pub(super) fn equalise_frame(
    frame: &Frame,
    plan: &Plan,
    profile: &ResolvedProfile,
) -> Result<BurstOutput, Error> {
    let view = BurstView {
        y: &frame.y,
        training: &plan.training,
        offset: frame.offset,
        slicer: &plan.constellation,
        known: frame.known.as_deref(),
    };
    let mut cfg = plan.burst_cfg;
    // The receiver's DC and image were removed from the frame beforehand
    // (`super::frontend`); the fits that follow model the channel only.
    cfg.channel.dc_offset = false;
    cfg.channel.iq_imbalance = false;
    let l = plan.training.len();
    let span = frame.offset - plan.before..frame.offset + l + plan.after;
    let start = span.start.max(frame.avail.start);
    cfg.carrier.fit_range = Some((start, span.end.min(frame.avail.end).max(start)));
    // The ZF-DFE's pass is needed only when it is the choice.
    cfg.run_zf_dfe = chosen_name(profile) == "zf-dfe";
    Ok(process_burst(&view, &cfg)?)
}

/// The burst's symbols laid out like the frame — training, then the known
/// payload or else the decisions of the profile's equaliser (the MMSE-DFE's if
/// it refused) — and the DC/IQ fit over all of them
/// ([`super::frontend::refine_front_end`]).
#[allow(clippy::too_many_arguments)]
fn refine_pass(
    frame: &Frame,
    raw: &[Cf32],
    out: &BurstOutput,
    first: &FrontEnd,
    bs: &BurstSync,
    plan: &Plan,
    profile: &ResolvedProfile,
    sync: &Synchroniser,
) -> Option<(Vec<Cf32>, FrontEnd)> {
    let l = plan.training.len();
    let span = (frame.offset - plan.before).max(frame.avail.start)
        ..(frame.offset + l + plan.after).min(frame.avail.end);
    let symbols: Vec<Cf32> = match &frame.known {
        Some(k) => k.clone(),
        None => {
            let (_, s) = pick(out, chosen_name(profile)).or_else(|| pick(out, "mmse-dfe"))?;
            let points = plan.constellation.points();
            let mut v: Vec<Cf32> = s.labels.iter().map(|&i| points[i]).collect();
            v.resize(raw.len(), Cf32::new(0.0, 0.0));
            v[frame.offset..frame.offset + l].copy_from_slice(&plan.training);
            v
        }
    };
    let delta = std::f64::consts::TAU * out.carrier.refined_cfo_cycles_per_symbol;
    super::frontend::refine_front_end(
        first,
        raw,
        &symbols,
        span,
        frame.avail.clone(),
        frame.offset,
        delta,
        plan,
        bs.cfo_hz,
        sync.pulse(),
    )
}

/// The reported equaliser: the profile's choice, or the MMSE-DFE if it refused
/// (with a warning saying why).
fn chosen_result<'a>(
    out: &'a BurstOutput,
    profile: &ResolvedProfile,
    index: usize,
    warnings: &mut Vec<Warning>,
) -> Result<(&'static str, &'a DfeFilters, &'a EqualisedSymbols), Error> {
    let wanted = chosen_name(profile);
    if let Some((f, s)) = pick(out, wanted) {
        return Ok((wanted, f, s));
    }
    let why = match out.get(wanted).map(|r| &r.outcome) {
        Some(Err(e)) => e.to_string(),
        _ => "it did not run".to_string(),
    };
    warnings.push(Warning::new(
        WarningCode::MainTapWeak,
        format!("{wanted} refused ({why}); figures are from the mmse-dfe"),
    ));
    let (f, s) = pick(out, "mmse-dfe").ok_or_else(|| {
        usage(format!(
            "burst {index}: no equaliser could run on this burst ({why})"
        ))
    })?;
    Ok(("mmse-dfe", f, s))
}

/// Labels of the equaliser called `name` at the payload symbols present.
fn labels_at(out: &BurstOutput, name: &str, present: &[(usize, usize)]) -> Option<Vec<usize>> {
    pick(out, name).map(|(_, s)| present.iter().map(|&(_, i)| s.labels[i]).collect())
}

/// RMS EVM of the linear MMSE equaliser, with the same kind of reference.
fn linear_evm(
    out: &BurstOutput,
    frame: &Frame,
    known_payload: Option<&[Cf32]>,
    plan: &Plan,
) -> Option<f64> {
    let (_, s) = pick(out, "linear-mmse")?;
    let z: Vec<Cf32> = frame.present.iter().map(|&(_, i)| s.soft[i]).collect();
    let reference: Vec<Cf32> = match known_payload {
        Some(k) => k.to_vec(),
        None => frame
            .present
            .iter()
            .map(|&(_, i)| plan.constellation.points()[s.labels[i]])
            .collect(),
    };
    crate::report::metrics::evm(&z, &reference).map(|f| f.evm_rms_percent)
}

/// The receiver DC (full-scale units) the front-end fit sees in the burst timed
/// at `bs`, if it stands above its estimation noise.
pub(super) fn probe_dc<S: SampleSource + ?Sized>(
    bs: &BurstSync,
    plan: &Plan,
    sync: &Synchroniser,
    src: &S,
) -> Result<Option<Cf64>, Error> {
    let mut frame = extract_frame(bs, plan, sync, src, None)?;
    let fe = correct_front_end(
        &mut frame.y,
        frame.offset,
        frame.avail.clone(),
        plan,
        bs.cfo_hz,
        sync.pulse(),
        &mut Vec::new(),
    );
    Ok(fe.dc_seen)
}

/// Analyse one synchronised burst (see the module documentation).
#[allow(clippy::too_many_arguments)]
pub(super) fn analyse_burst<S: SampleSource + ?Sized>(
    index: usize,
    bs: &BurstSync,
    plan: &Plan,
    profile: &ResolvedProfile,
    sync: &Synchroniser,
    src: &S,
    capture: &Capture,
    want_detail: &(dyn Fn(f64) -> bool + Sync),
) -> Result<BurstReport, Error> {
    let mut warnings = Vec::new();
    let ch = &plan.burst_cfg.channel;
    let front_on = ch.dc_offset || ch.iq_imbalance;
    // The burst timed at `b` (its first `limit` symbols): extracted, the receiver
    // front end corrected (with the decision-directed second pass when the fit
    // has DC/IQ terms), equalised.
    let prepare = |b: &BurstSync,
                   limit: Option<usize>,
                   warnings: &mut Vec<Warning>|
     -> Result<(Frame, BurstOutput, FrontEnd), Error> {
        let mut frame = extract_frame(b, plan, sync, src, limit)?;
        let raw = front_on.then(|| frame.y.clone());
        let mut front_end = correct_front_end(
            &mut frame.y,
            frame.offset,
            frame.avail.clone(),
            plan,
            b.cfo_hz,
            sync.pulse(),
            warnings,
        );
        let mut out = equalise_frame(&frame, plan, profile)?;
        if let Some(raw) = &raw {
            // Decision-directed second pass of the DC/IQ fit over the whole burst.
            if let Some((y, fe)) =
                refine_pass(&frame, raw, &out, &front_end, b, plan, profile, sync)
            {
                frame.y = y;
                front_end = fe;
                out = equalise_frame(&frame, plan, profile)?;
            }
        }
        Ok((frame, out, front_end))
    };
    let (mut frame, mut out, mut front_end) = prepare(bs, None, &mut warnings)?;
    // The sample clock: when it is followed, the burst is prepared again and the
    // last preparation's front end and warnings replace the first's.
    let mut again: Option<(FrontEnd, Vec<Warning>)> = None;
    let clock = follow_clock(
        bs,
        plan,
        profile,
        sync,
        src,
        &mut frame,
        &mut out,
        &mut |b, limit| {
            let mut w = Vec::new();
            let (f, o, fe) = prepare(b, limit, &mut w)?;
            again = Some((fe, w));
            Ok((f, o))
        },
    )?;
    if let Some((fe, w)) = again {
        front_end = fe;
        warnings = w;
    }
    let bs = &clock.burst;
    if frame.truncated {
        warnings.push(Warning::new(
            WarningCode::BurstTruncated,
            format!(
                "the capture cuts this burst: {} of {} payload symbols present",
                frame.present.len(),
                plan.before_nominal + plan.after_nominal
            ),
        ));
    }
    let (name, filters, eq) = chosen_result(&out, profile, index, &mut warnings)?;

    // Figures of merit over the payload present.
    let present = &frame.present;
    let known_payload: Option<Vec<Cf32>> = frame
        .known
        .as_ref()
        .map(|k| present.iter().map(|&(_, i)| k[i]).collect());
    let z: Vec<Cf32> = present.iter().map(|&(_, i)| eq.soft[i]).collect();
    let labels: Vec<usize> = present.iter().map(|&(_, i)| eq.labels[i]).collect();
    let numbers: Vec<usize> = present.iter().map(|&(p, _)| p).collect();
    let (dfe, genie) = match known_payload {
        Some(_) => (
            labels_at(&out, "mmse-dfe", present),
            labels_at(&out, "genie-mmse-dfe", present),
        ),
        None => (None, None),
    };
    let fig = payload_figures(
        &PayloadDecisions {
            soft: &z,
            labels: &labels,
            numbers: &numbers,
            known: known_payload.as_deref(),
            dfe_and_genie: dfe.as_deref().zip(genie.as_deref()),
        },
        &plan.constellation,
        CONFIDENCE,
    );
    let evm = fig.evm;
    // The trace and the channel response only where the caller may keep them
    // (the value judged is `metrics.evm_rms_percent` below).
    let detail = want_detail(evm.map(|f| f.evm_rms_percent).unwrap_or(0.0));
    propagation_warning(&fig, &mut warnings);
    // The MLSE reference detector beside the reported equaliser (when asked for).
    let mlse = plan.mlse.as_ref().map(|mc| {
        let l = plan.training.len();
        let (f0, f1) = (frame.offset - plan.before, frame.offset + l + plan.after);
        let span = f0.max(frame.avail.start).min(frame.offset)
            ..f1.min(frame.avail.end).max(frame.offset + l);
        let truth: Option<Vec<usize>> = known_payload
            .as_ref()
            .map(|kp| kp.iter().map(|s| plan.constellation.slice(*s)).collect());
        burst_mlse(
            mc,
            &out,
            plan,
            frame.offset,
            span,
            present,
            eq,
            truth.as_deref(),
        )
    });
    if let Some(ml) = &mlse {
        mlse_warning(ml, name, &mut warnings);
    }
    let linear_evm = linear_evm(&out, &frame, known_payload.as_deref(), plan);
    let mut channel = channel_report(&out.channel, detail);
    channel.training_symbols = plan.training.len();
    let received_power = region_warnings(bs, plan, capture, &front_end, &mut warnings)?;
    channel.dc = front_end.dc.map(|d| [d.re, d.im]);
    channel.dc_relative_db = front_end
        .dc
        .zip(received_power)
        .map(|(d, p)| 10.0 * d.norm_sqr().max(1e-300).log10() - p);
    channel.iq_gain_imbalance_db = front_end.iq.map(|(g, _)| g);
    channel.iq_phase_imbalance_deg = front_end.iq.map(|(_, p)| p);
    channel.image_level_db = front_end.image_db;
    channel_warnings(&out, bs, sync, &mut warnings);
    window_warning(&out, frame.offset, plan, &mut warnings);

    let center_freq_hz = segment_frequency(bs, plan, capture, &mut warnings);
    let refined_hz = out.carrier.refined_cfo_cycles_per_symbol * plan.symbol_rate_hz;
    let cfo_hz = bs.cfo_hz + refined_hz;
    lock_warnings(
        &LockInputs {
            out: &out,
            filters,
            fig: &fig,
            bs,
            cfo_hz,
            max_cfo_hz: profile
                .search
                .max_cfo_hz_at(plan.sample_rate_hz, plan.sps)
                .min(0.25 * plan.symbol_rate_hz),
            plan,
            known: known_payload.is_some(),
        },
        &mut warnings,
    );
    let mut metrics = burst_metrics(&fig, &z, &numbers, known_payload.is_some());
    metrics.mlse = mlse;
    let trace = if detail {
        Some(trace(
            bs,
            sync,
            src,
            plan,
            &z,
            &numbers,
            &fig.reference,
            fig.wrong,
            out.channel.taps[out.channel.pre],
        )?)
    } else {
        None
    };
    Ok(BurstReport {
        index,
        start_sample: bs.start_sample.max(0) as u64,
        timing_frac_samples: bs.timing_frac,
        correlation_peak_samples: bs.peak_instant,
        sync_metric: bs.metric,
        cfo_hz,
        cfo_training_hz: bs.cfo_hz,
        cfo_ppm: center_freq_hz
            .filter(|f| *f > 0.0)
            .map(|f| cfo_hz / f * 1e6),
        center_freq_hz,
        phase_rad: bs.phase_rad,
        received_power_dbfs: received_power,
        sco_ppm: clock.sco_ppm,
        truncated: frame.truncated,
        payload_symbols: present.len(),
        channel,
        equaliser: EqualiserReport {
            kind: name.to_string(),
            feedforward_taps: filters.ff.len(),
            feedback_taps: filters.fb.len(),
            decision_delay: filters.delay,
            predicted_snr_db: finite(filters.predicted_snr_unbiased_db),
            achieved_snr_db: metrics.mer_db,
            linear_mmse_evm_percent: linear_evm,
            theory: Some(theory_report(&out.channel)),
            tracking: tracking_name(profile.equaliser.tracking).to_string(),
            feedforward: filters
                .ff
                .iter()
                .map(|c| [f64::from(c.re), f64::from(c.im)])
                .collect(),
            feedback: filters
                .fb
                .iter()
                .map(|c| [f64::from(c.re), f64::from(c.im)])
                .collect(),
        },
        metrics,
        trace,
        warnings,
    })
}

/// The infinite-length bounds of the fitted channel at its fitted noise level.
fn theory_report(ch: &crate::channel::ChannelEstimate) -> TheoryReport {
    let energy: f64 = ch.taps.iter().map(|t| t.norm_sqr()).sum();
    let snr = ch.snr_linear() / energy.max(1e-300);
    let b = crate::equalise::theory::bounds(&ch.taps, snr, crate::equalise::theory::DEFAULT_GRID);
    TheoryReport {
        input_snr_db: finite(b.input_snr_db),
        matched_filter_bound_db: finite(b.matched_filter_bound_db),
        mmse_dfe_unbiased_db: finite(b.mmse_dfe_unbiased_db),
        zf_dfe_db: finite(b.zf_dfe_db),
        mmse_le_unbiased_db: finite(b.mmse_le_unbiased_db),
    }
}

/// RMS of `arg(z·conj(r))` over the symbols with a non-zero reference, degrees.
fn phase_error_rms_deg(z: &[Cf32], reference: &[Cf32]) -> Option<f64> {
    let (mut sum, mut n) = (0.0f64, 0usize);
    for (a, r) in z.iter().zip(reference) {
        if r.norm_sqr() > 0.0 && a.norm_sqr() > 0.0 {
            let e = Cf64::new(f64::from(a.re), f64::from(a.im))
                * Cf64::new(f64::from(r.re), -f64::from(r.im));
            sum += e.arg().powi(2);
            n += 1;
        }
    }
    (n > 0).then(|| (sum / n as f64).sqrt().to_degrees())
}

/// The report's figures of the payload.
fn burst_metrics(fig: &PayloadFigures, z: &[Cf32], numbers: &[usize], known: bool) -> BurstMetrics {
    let evm = fig.evm;
    BurstMetrics {
        reference: if known {
            "known-payload".into()
        } else {
            "decisions".into()
        },
        symbols: numbers.len(),
        evm_rms_percent: evm.map(|f| f.evm_rms_percent).unwrap_or(0.0),
        evm_rms_db: evm.and_then(|f| f.evm_rms_db),
        evm_peak_percent: evm.map(|f| f.evm_peak_percent).unwrap_or(0.0),
        evm_peak_symbol: evm
            .map(|f| numbers.get(f.evm_peak_index).copied().unwrap_or(0))
            .unwrap_or(0),
        mer_db: evm.and_then(|f| f.mer_db),
        phase_error_rms_deg: phase_error_rms_deg(z, &fig.reference),
        ser: fig.ser,
        ser_run_aware: fig.ser.and_then(|r| {
            RunAwareRate::new(&run_length_histogram(&fig.runs), r.trials, r.confidence)
        }),
        ber: fig.ber,
        run_length_histogram: run_length_histogram(&fig.runs),
        error_runs: fig.runs.clone(),
        error_propagation: fig.propagation,
        mlse: None,
    }
}

/// Decision feedback that multiplied the errors more than twofold (at least
/// ten DFE errors, so chance alone does not trip it).
fn propagation_warning(fig: &PayloadFigures, warnings: &mut Vec<Warning>) {
    let Some(p) = &fig.propagation else {
        return;
    };
    if let Some(m) = p.multiplication {
        if m > 2.0 && p.dfe_errors >= 10 {
            warnings.push(Warning::new(
                WarningCode::ErrorPropagation,
                format!(
                    "decision feedback multiplied the errors {:.1}× ({} against {} with true symbols fed back)",
                    m, p.dfe_errors, p.genie_errors
                ),
            ));
        }
    }
}

/// A weak main tap and a correlation peak close to the threshold.
fn channel_warnings(
    out: &BurstOutput,
    bs: &BurstSync,
    sync: &Synchroniser,
    warnings: &mut Vec<Warning>,
) {
    let ch = &out.channel;
    let main_power = ch.taps[ch.pre].norm_sqr();
    let strongest = ch.taps.iter().map(|t| t.norm_sqr()).fold(0.0, f64::max);
    if main_power < 0.5 * strongest {
        warnings.push(Warning::new(
            WarningCode::MainTapWeak,
            format!(
                "the main tap is {:.1} dB below the strongest tap; consider more pre-cursor taps",
                10.0 * (strongest / main_power.max(1e-300)).log10()
            ),
        ));
    }
    if bs.metric < 1.25 * sync.threshold() {
        warnings.push(Warning::new(
            WarningCode::WeakCorrelation,
            format!(
                "correlation peak {:.3} is close to the threshold {:.3}",
                bs.metric,
                sync.threshold()
            ),
        ));
    }
}

/// Taps added each side of the fitted window to measure the energy outside it.
const WINDOW_PROBE_TAPS: usize = 3;

/// Smallest fraction of the channel's energy outside the window that is reported.
const WINDOW_MIN_FRACTION: f64 = 0.01;

/// Energy of the channel outside the fitted tap window at the chosen instant (#15).
///
/// The channel is fitted again with up to [`WINDOW_PROBE_TAPS`] more taps each side
/// (fewer if the training would give fewer than 4 observations per unknown) on the
/// same carrier-corrected samples. A tap's energy is counted above its estimation
/// variance, `max(|ĥ_i|² − var(ĥ_i), 0)` (the fit's noise inflates every `|ĥ_i|²` by
/// `var(ĥ_i)` on average). The warning fires when (a) some tap outside the window is
/// significant by the fit's own rule (`|ĥ_i|² > significance·var(ĥ_i)`, default 10)
/// and (b) the energy outside, left unmodelled, raises the noise the equaliser is
/// designed for by at least 1 dB: `E_out·Es ≥ (10^0.1 − 1)·σ²` with `σ²` the wider
/// fit's noise variance (common practice: a 1 dB loss is where it matters), and
/// (c) it is at least [`WINDOW_MIN_FRACTION`] of the channel's energy (tails of the
/// truncated pulse and the noise of six probe taps reach a few 0.01 % at 30 dB).
fn window_warning(out: &BurstOutput, offset: usize, plan: &Plan, warnings: &mut Vec<Warning>) {
    let ch = &out.channel;
    let n = plan.training.len();
    let k0 = ch.pre + ch.post + 1;
    let Some(e) = (1..=WINDOW_PROBE_TAPS)
        .rev()
        .find(|&e| n.saturating_sub(k0 - 1 + 2 * e) >= 4 * (k0 + 2 * e))
    else {
        return;
    };
    let cfg = ChannelFitConfig {
        span: TapSpan::Fixed {
            pre: ch.pre + e,
            post: ch.post + e,
        },
        ..plan.burst_cfg.channel
    };
    let Ok(w) = fit_channel(&out.corrected, &plan.training, offset, &cfg) else {
        return;
    };
    let excess = |i: usize| (w.taps[i].norm_sqr() - w.tap_variance[i]).max(0.0);
    let inside = e..e + k0;
    let (mut before, mut after, mut total, mut significant) = (0.0, 0.0, 0.0, false);
    for i in 0..w.taps.len() {
        let x = excess(i);
        total += x;
        if inside.contains(&i) {
            continue;
        }
        if i < e {
            before += x;
        } else {
            after += x;
        }
        significant |= w.taps[i].norm_sqr() > cfg.significance * w.tap_variance[i];
    }
    let outside = before + after;
    let rise = outside * w.es / w.noise_var.max(f64::MIN_POSITIVE);
    if significant
        && rise >= 10f64.powf(0.1) - 1.0
        && total > 0.0
        && outside >= WINDOW_MIN_FRACTION * total
    {
        warnings.push(Warning::new(
            WarningCode::EnergyOutsideWindow,
            format!(
                "{:.1} % of the channel's energy lies outside the fitted window of {} pre- and {} post-cursor taps ({:.1} % before it, {:.1} % after it); unmodelled, it raises the equaliser's noise by {:.1} dB: raise channel_fit.pre_cursor_taps / post_cursor_taps",
                100.0 * outside / total,
                ch.pre,
                ch.post,
                100.0 * before / total,
                100.0 * after / total,
                10.0 * (1.0 + rise).log10()
            ),
        ));
    }
}

/// What [`lock_warnings`] judges.
struct LockInputs<'a> {
    out: &'a BurstOutput,
    filters: &'a DfeFilters,
    fig: &'a PayloadFigures,
    bs: &'a BurstSync,
    cfo_hz: f64,
    max_cfo_hz: f64,
    plan: &'a Plan,
    known: bool,
}

/// Gaussian tail `Q(x) = ½·erfc(x/√2)`, from Abramowitz & Stegun 7.1.26
/// (|error| ≤ 1.5·10⁻⁷ on erfc), enough to tell a predicted error rate of
/// 10⁻³ from one of 10⁻¹.
fn q_tail(x: f64) -> f64 {
    if x < 0.0 {
        return 1.0 - q_tail(-x);
    }
    let z = x / std::f64::consts::SQRT_2;
    let t = 1.0 / (1.0 + 0.327_591_1 * z);
    let poly = t
        * (0.254_829_592
            + t * (-0.284_496_736
                + t * (1.421_413_741 + t * (-1.453_152_027 + t * 1.061_405_429))));
    0.5 * poly * (-z * z).exp()
}

/// The RMS EVM (percent of the constellation's RMS amplitude) at which the
/// RMS error reaches half the minimum distance: beyond it most decisions sit
/// outside their decision region.
fn decision_region_evm_percent(plan: &Plan) -> f64 {
    let pts = plan.constellation.points();
    let es = pts.iter().map(|p| f64::from(p.norm_sqr())).sum::<f64>() / pts.len().max(1) as f64;
    100.0 * f64::from(plan.constellation.min_distance()) / 2.0 / es.sqrt()
}

/// Loss of lock and a rejected carrier refinement, each with the cause it
/// most likely has.
fn lock_warnings(i: &LockInputs<'_>, warnings: &mut Vec<Warning>) {
    let rs = i.plan.symbol_rate_hz;
    let c = &i.out.carrier;
    if let Some(r) = c.rejected_cfo_cycles_per_symbol {
        warnings.push(Warning::new(
            WarningCode::CarrierRefinementRejected,
            format!(
                "the decision-directed carrier refinement gave {:+.1} Hz, more than {:.0} Cramér–Rao σ (±{:.1} Hz) from the training estimate {:+.1} Hz; kept the training estimate. The payload decisions were likely wrong (a channel null, a timing error or a wrong payload modulation)",
                i.bs.cfo_hz + r * rs,
                i.plan.burst_cfg.carrier.max_sigmas,
                i.plan.burst_cfg.carrier.max_sigmas * c.training_sigma_cycles_per_symbol * rs,
                i.bs.cfo_hz + c.training_cfo_cycles_per_symbol * rs,
            ),
        ));
    }
    // The estimate scatters around the true offset by its Cramér–Rao σ, so a
    // transmitter at the edge of the range (or a range of 0, no search) is
    // outside only when beyond the range by more than the rejection allowance.
    let allowance_hz =
        i.plan.burst_cfg.carrier.max_sigmas * c.training_sigma_cycles_per_symbol * rs;
    if i.cfo_hz.abs() > i.max_cfo_hz + allowance_hz {
        warnings.push(Warning::new(
            WarningCode::LossOfLock,
            format!(
                "the CFO {:+.1} Hz lies outside the search range ±{:.1} Hz (search.max_cfo_hz) by more than the estimate's {:.0}σ allowance ({:.1} Hz): the carrier estimate ran away or the range is too narrow for this transmitter",
                i.cfo_hz, i.max_cfo_hz, i.plan.burst_cfg.carrier.max_sigmas, allowance_hz
            ),
        ));
    }
    let evm = i.fig.evm.map(|f| f.evm_rms_percent);
    let bound = decision_region_evm_percent(i.plan);
    let dmin = f64::from(i.plan.constellation.min_distance());
    let snr = 10f64.powf(i.filters.predicted_snr_unbiased_db / 10.0);
    // Nearest-neighbour approximation of the symbol error rate at the predicted
    // output SNR (Es = 1): at most 4 neighbours at dmin, noise σ²/2 per axis.
    let predicted_ser = (4.0 * q_tail((dmin * dmin * snr / 2.0).sqrt())).min(1.0);
    if let (Some(ser), true) = (i.fig.ser, i.known) {
        if ser.rate > 0.1 && predicted_ser < 1e-2 {
            warnings.push(Warning::new(
                WarningCode::LossOfLock,
                format!(
                    "SER {:.2e} while the training predicts {:.1} dB output SNR (SER ≈ {:.1e}): the equaliser lost lock after the training (carrier slip, timing, or a payload that does not follow the profile)",
                    ser.rate, i.filters.predicted_snr_unbiased_db, predicted_ser
                ),
            ));
        }
    }
    if let Some(e) = evm.filter(|e| *e > bound) {
        warnings.push(Warning::new(
            WarningCode::LossOfLock,
            format!(
                "EVM {e:.1} % exceeds {bound:.1} %, where the RMS error reaches half the minimum distance of the constellation: most decisions are outside their region (lost carrier or timing, or the wrong modulation)"
            ),
        ));
    }
}

fn finite(x: f64) -> Option<f64> {
    x.is_finite().then_some(x)
}

/// The filters and symbols of the equaliser called `name`, if it ran.
fn pick<'a>(out: &'a BurstOutput, name: &str) -> Option<(&'a DfeFilters, &'a EqualisedSymbols)> {
    match out.get(name).map(|r| &r.outcome) {
        Some(Ok((f, s))) => Some((f, s)),
        _ => None,
    }
}

/// The capture's own sample range under the burst (payload and training).
fn burst_range(bs: &BurstSync, plan: &Plan, capture: &Capture) -> (usize, usize) {
    let sps = plan.sps as i64;
    let lo = (bs.start_sample - plan.before as i64 * sps).max(0) as usize;
    let hi = (bs.start_sample + (plan.training.len() + plan.after) as i64 * sps).max(0) as usize;
    // The capture's own samples under the burst (#17: the analysis stream may be resampled).
    plan.capture_range(lo, hi, capture)
}

/// Centre frequency of the SigMF capture segment the burst starts in (else the
/// capture's or the profile's, [`Plan::center_freq_hz`]); a burst that runs
/// into another segment is flagged (#18).
fn segment_frequency(
    bs: &BurstSync,
    plan: &Plan,
    capture: &Capture,
    warnings: &mut Vec<Warning>,
) -> Option<f64> {
    let segments = capture.segments();
    let (lo, hi) = burst_range(bs, plan, capture);
    let first = capture.segment_index_at(lo as u64);
    let last = capture.segment_index_at(hi.saturating_sub(1).max(lo) as u64);
    if last != first {
        let at = segments.get(first + 1).map_or(0, |s| s.sample_start);
        warnings.push(Warning::new(
            WarningCode::SpansSegments,
            format!(
                "the burst (samples {lo}..{hi}) runs across the capture-segment boundary at sample {at}; its figures mix two segments (frequency {} there)",
                segments
                    .get(first + 1)
                    .and_then(|s| s.center_freq_hz)
                    .map_or_else(|| "not given".to_string(), |f| format!("{f} Hz"))
            ),
        ));
    }
    segments
        .get(first)
        .and_then(|s| s.center_freq_hz)
        .or(plan.center_freq_hz)
}

/// Clipping (integer formats: samples at the extreme codes) or samples above
/// full scale (float formats), non-finite samples, and the receiver DC the
/// front-end fit saw, over the burst's own samples; returns their mean power
/// in dBFS (`None` for zero power or no samples).
fn region_warnings(
    bs: &BurstSync,
    plan: &Plan,
    capture: &Capture,
    front_end: &FrontEnd,
    warnings: &mut Vec<Warning>,
) -> Result<Option<f64>, Error> {
    let (lo, hi) = burst_range(bs, plan, capture);
    if hi <= lo {
        return Ok(None);
    }
    let mut buf = vec![Cf32::new(0.0, 0.0); hi - lo];
    let stats = capture.read_into(lo, &mut buf)?;
    if stats.clipped > 0 {
        if capture.container().is_float() {
            warnings.push(Warning::new(
                WarningCode::AboveFullScale,
                format!(
                    "{} of the burst's {} float samples have I or Q beyond ±1.0: nothing clipped in the file, but the level is above full scale",
                    stats.clipped,
                    buf.len()
                ),
            ));
        } else {
            warnings.push(Warning::new(
                WarningCode::Clipping,
                format!(
                    "{} of the burst's {} samples sit at the format's extreme codes; reduce the receiver gain",
                    stats.clipped,
                    buf.len()
                ),
            ));
        }
    }
    if stats.non_finite > 0 {
        warnings.push(Warning::new(
            WarningCode::NonFiniteSamples,
            format!(
                "{} NaN or infinite samples in the burst were replaced by 0",
                stats.non_finite
            ),
        ));
    }
    let power = buf.iter().map(|s| f64::from(s.norm_sqr())).sum::<f64>() / buf.len() as f64;
    if let Some(dc) = front_end
        .dc_seen
        .filter(|d| power > 0.0 && d.norm_sqr() / power > 0.01)
    {
        let rel = 10.0 * (dc.norm_sqr() / power).log10();
        let what = format!(
            "receiver DC I {:+.4}, Q {:+.4} ({rel:.1} dB relative to the burst power)",
            dc.re, dc.im
        );
        let advice = if plan.burst_cfg.channel.dc_offset {
            "was removed before equalisation (channel_fit.dc_offset is on)".to_string()
        } else {
            "costs MER; enable channel_fit.dc_offset to remove it".to_string()
        };
        warnings.push(Warning::new(
            WarningCode::StrongDc,
            format!("{what} {advice}"),
        ));
    }
    Ok((power > 0.0).then(|| 10.0 * power.log10()))
}
