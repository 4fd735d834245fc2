//! The summary over bursts and the verdict against the profile's limits.
//!
//! Takes every burst's report and the resolved profile; gives the [`Summary`]
//! (pooled EVM and MER, pooled SER/BER, largest |CFO|, longest error run) and the
//! [`Verdict`] (one [`LimitCheck`] per limit the profile sets).

use super::CONFIDENCE;
use crate::profile::ResolvedProfile;
use crate::report::metrics::ErrorRate;
use crate::report::schema::{
    BurstMetrics, BurstReport, LimitCheck, Summary, Verdict, VerdictResult, ERROR_RUNS_KEPT,
};

/// Keep the first [`ERROR_RUNS_KEPT`] error runs (the histogram covers them all).
pub(super) fn cap_error_runs(m: &mut BurstMetrics) {
    if m.error_runs.len() > ERROR_RUNS_KEPT {
        m.error_runs.truncate(ERROR_RUNS_KEPT);
        m.error_runs.shrink_to_fit();
    }
}

pub(super) fn summarise(bursts: &[BurstReport]) -> Summary {
    let mut s = Summary {
        bursts: bursts.len(),
        ..Summary::default()
    };
    if bursts.is_empty() {
        return s;
    }
    // Combine per-burst EVM exactly: Σ|e|² = EVM²·Σ|s|², Σ|s|² ≈ n·P (weights by symbols).
    let (mut err, mut refp, mut worst) = (0.0f64, 0.0f64, 0.0f64);
    for b in bursts {
        let n = b.metrics.symbols as f64;
        let e = (b.metrics.evm_rms_percent / 100.0).powi(2);
        err += e * n;
        refp += n;
        worst = worst.max(b.metrics.evm_rms_percent);
    }
    if refp > 0.0 {
        let evm = (err / refp).sqrt();
        s.evm_rms_percent = Some(100.0 * evm);
        s.mer_db = (evm > 0.0).then(|| -20.0 * evm.log10());
    }
    s.evm_worst_percent = Some(worst);
    let total = |f: &dyn Fn(&BurstReport) -> Option<ErrorRate>| -> Option<ErrorRate> {
        let mut any = false;
        let (mut e, mut t) = (0u64, 0u64);
        for b in bursts {
            if let Some(r) = f(b) {
                any = true;
                e += r.errors;
                t += r.trials;
            }
        }
        if any {
            ErrorRate::new(e, t, CONFIDENCE)
        } else {
            None
        }
    };
    s.ser = total(&|b| b.metrics.ser);
    s.ser_run_aware = s.ser.and_then(|r| {
        // Every burst's runs pooled: the histograms add entry by entry.
        let mut hist: Vec<u64> = Vec::new();
        for b in bursts.iter().filter(|b| b.metrics.ser.is_some()) {
            let h = &b.metrics.run_length_histogram;
            if hist.len() < h.len() {
                hist.resize(h.len(), 0);
            }
            for (acc, &n) in hist.iter_mut().zip(h) {
                *acc += n;
            }
        }
        crate::report::metrics::RunAwareRate::new(&hist, r.trials, CONFIDENCE)
    });
    s.ber = total(&|b| b.metrics.ber);
    s.cfo_abs_max_hz = bursts.iter().map(|b| b.cfo_hz.abs()).reduce(f64::max);
    let sco: Vec<f64> = bursts.iter().filter_map(|b| b.sco_ppm).collect();
    if !sco.is_empty() {
        s.sco_mean_ppm = Some(sco.iter().sum::<f64>() / sco.len() as f64);
        s.sco_abs_max_ppm = sco.iter().map(|v| v.abs()).reduce(f64::max);
    }
    s.longest_error_run = bursts
        .iter()
        .map(|b| b.metrics.longest_error_run())
        .max()
        .unwrap_or(0);
    s
}

pub(super) fn judge(
    profile: &ResolvedProfile,
    bursts: &[BurstReport],
    summary: &Summary,
    views: &crate::capture::views::CaptureViews,
) -> Verdict {
    if bursts.is_empty() {
        return Verdict {
            result: VerdictResult::NoTraining,
            checks: Vec::new(),
        };
    }
    let lim = &profile.limits;
    let mut checks = Vec::new();
    let mut check = |name: &str, threshold: Option<f64>, measured: Option<f64>, upper: bool| {
        if let (Some(t), Some(m)) = (threshold, measured) {
            checks.push(LimitCheck {
                limit: name.to_string(),
                threshold: t,
                measured: m,
                pass: if upper { m <= t } else { m >= t },
                margin: if upper { t - m } else { m - t },
            });
        }
    };
    check(
        "limits.evm_rms_percent_max",
        lim.evm_rms_percent_max,
        summary.evm_worst_percent,
        true,
    );
    let worst_mer = bursts
        .iter()
        .map(|b| b.metrics.mer_db.unwrap_or(f64::INFINITY))
        .reduce(f64::min);
    check("limits.mer_db_min", lim.mer_db_min, worst_mer, false);
    // With `limits.ser_max_on_upper_bound` the SER limit is judged on the upper
    // end of the run-aware interval: 0 errors in 1024 symbols does not pass 1e-3.
    let ser = if lim.ser_max_on_upper_bound {
        summary.ser_run_aware.map(|r| r.ci_high)
    } else {
        summary.ser.map(|r| r.rate)
    };
    check("limits.ser_max", lim.ser_max, ser, true);
    check(
        "limits.cfo_hz_abs_max",
        lim.cfo_hz_abs_max,
        summary.cfo_abs_max_hz,
        true,
    );
    // The spectral mask, judged on the report's own PSD points (largest bin per
    // point, relative to the PSD's peak), so the plot shows what was judged.
    if let Some(psd) = &views.psd {
        let segs: Vec<(f64, f64)> = lim
            .spectral_mask
            .iter()
            .map(|m| (m.from_offset_hz, m.to_offset_hz))
            .collect();
        let worst = crate::capture::views::mask_excess(psd, &segs);
        for (i, (m, w)) in lim.spectral_mask.iter().zip(worst).enumerate() {
            check(
                &format!("limits.spectral_mask[{i}].max_db_rel_peak"),
                Some(m.max_db_rel_peak),
                w,
                true,
            );
        }
    }
    let result = if checks.iter().all(|c| c.pass) {
        VerdictResult::Pass
    } else {
        VerdictResult::Fail
    };
    Verdict { result, checks }
}
