//! The terminal summary of a report.
//!
//! Takes a [`Report`] and gives human-readable text grouped by pipeline stage:
//! what was found in the capture, what the channel did, what the equaliser
//! achieved, and the verdict. Colour (ANSI) only when the caller says the
//! output is a terminal that wants it. Machines read the JSON, not this.

use super::schema::{BurstReport, Report, VerdictResult};
use std::fmt::Write as _;

struct Style {
    on: bool,
    /// Warnings are printed in place (else [`warning_lines`] gives them).
    warnings: bool,
}

impl Style {
    fn paint(&self, code: &str, s: &str) -> String {
        if self.on {
            format!("\x1b[{code}m{s}\x1b[0m")
        } else {
            s.to_string()
        }
    }
    fn head(&self, s: &str) -> String {
        self.paint("1;36", s)
    }
    fn good(&self, s: &str) -> String {
        self.paint("32", s)
    }
    fn bad(&self, s: &str) -> String {
        self.paint("1;31", s)
    }
    fn note(&self, s: &str) -> String {
        self.paint("33", s)
    }
}

fn opt(v: Option<f64>, prec: usize, unit: &str) -> String {
    match v {
        Some(x) => format!("{x:.prec$}{unit}"),
        None => "n/a".into(),
    }
}

fn burst_lines(out: &mut String, b: &BurstReport, st: &Style) {
    let m = &b.metrics;
    let _ = writeln!(
        out,
        "  #{:<3} at sample {:>11}{:+.2}  metric {:.3}  CFO {:+.1} Hz{}  {}",
        b.index,
        b.start_sample,
        b.timing_frac_samples,
        b.sync_metric,
        b.cfo_hz,
        b.sco_ppm
            .map(|v| format!("  clock {v:+.2} ppm"))
            .unwrap_or_default(),
        if b.truncated {
            st.note("(cut short)")
        } else {
            String::new()
        }
    );
    let ch = &b.channel;
    let _ = writeln!(
        out,
        "       channel: {} taps ({} pre, {} post; {} significant), spread {:.2} sym, SNR {:.1} dB",
        ch.taps.len(),
        ch.pre_cursor,
        ch.post_cursor,
        ch.significant_taps,
        ch.delay_spread_symbols,
        ch.snr_db
    );
    let e = &b.equaliser;
    let _ = writeln!(
        out,
        "       {} Nf={} Nb={} Δ={}: EVM {:.2} % ({}), MER {}, predicted {} / achieved {}; linear MMSE would give {}",
        e.kind,
        e.feedforward_taps,
        e.feedback_taps,
        e.decision_delay,
        m.evm_rms_percent,
        m.reference,
        opt(m.mer_db, 1, " dB"),
        opt(e.predicted_snr_db, 1, " dB"),
        opt(e.achieved_snr_db, 1, " dB"),
        opt(e.linear_mmse_evm_percent, 2, " %"),
    );
    if let Some(ser) = &m.ser {
        let longest = m.longest_error_run();
        let _ = writeln!(
            out,
            "       errors: {} of {} symbols (SER {:.2e}, 95 % {:.1e}…{:.1e}), {} runs, longest {}",
            ser.errors,
            ser.trials,
            ser.rate,
            ser.ci_low,
            ser.ci_high,
            m.error_run_count(),
            longest
        );
    }
    if let Some(p) = &m.error_propagation {
        let _ = writeln!(
            out,
            "       feedback: {} errors with decisions fed back, {} with true symbols{}",
            p.dfe_errors,
            p.genie_errors,
            p.multiplication
                .map(|x| format!(" ({x:.2}×)"))
                .unwrap_or_default()
        );
    }
    if let Some(ml) = &m.mlse {
        let _ = writeln!(out, "       {}", mlse_line(ml));
    }
    if st.warnings {
        for w in &b.warnings {
            let _ = writeln!(out, "       {}", st.note(&format!("! {w}")));
        }
    }
}

/// One line for the MLSE comparison of a burst.
fn mlse_line(ml: &crate::report::metrics::MlseReport) -> String {
    let rate = |r: &Option<crate::report::metrics::ErrorRate>| {
        r.map(|r| format!("{} ({:.2e})", r.errors, r.rate))
            .unwrap_or_else(|| "n/a".into())
    };
    if ml.status == "skipped" {
        return format!("mlse: {}", ml.detail);
    }
    match (&ml.ser, &ml.agreement) {
        (Some(_), _) => format!(
            "symbol errors: dfe {}, genie dfe {}, mlse {} [{}]",
            rate(&ml.dfe_ser),
            rate(&ml.genie_ser),
            rate(&ml.ser),
            ml.detail
        ),
        (None, Some(a)) => format!(
            "dfe and mlse decisions agree on {} of {} symbols{} [{}]",
            a.agree,
            a.symbols,
            a.rate
                .map(|r| format!(" ({:.2} %)", 100.0 * r))
                .unwrap_or_default(),
            ml.detail
        ),
        (None, None) => format!("mlse: {}", ml.detail),
    }
}

/// Every warning of the report, capture-level first, then each burst's in
/// burst order, one line each: `warning: [code] message` or
/// `warning: burst 3: [code] message`. The CLI prints them on stderr.
pub fn warning_lines(report: &Report) -> Vec<String> {
    let capture = report.warnings.iter().map(|w| format!("warning: {w}"));
    let bursts = report.bursts.iter().flat_map(|b| {
        b.warnings
            .iter()
            .map(move |w| format!("warning: burst {}: {w}", b.index))
    });
    capture.chain(bursts).collect()
}

/// The summary without its warnings (for stdout, with [`warning_lines`] on stderr).
pub fn render_without_warnings(report: &Report, colour: bool) -> String {
    render_with(
        report,
        Style {
            on: colour,
            warnings: false,
        },
    )
}

/// Render the summary (see the module documentation).
pub fn render(report: &Report, colour: bool) -> String {
    render_with(
        report,
        Style {
            on: colour,
            warnings: true,
        },
    )
}

fn render_with(report: &Report, st: Style) -> String {
    let mut out = String::new();
    let i = &report.input;
    let _ = writeln!(out, "{}", st.head(&format!("── capture  {}", i.path)));
    let _ = writeln!(
        out,
        "  {} samples of {} at {:.0} Hz ({:.3} s)",
        i.samples,
        i.format_description(),
        i.sample_rate_hz,
        i.samples as f64 / i.sample_rate_hz
    );
    if st.warnings {
        for w in &report.warnings {
            let _ = writeln!(out, "  {}", st.note(&format!("! {w}")));
        }
    }
    let _ = writeln!(
        out,
        "{}",
        st.head(&format!("── bursts  {} found", report.bursts.len()))
    );
    const SHOWN: usize = 20;
    for b in report.bursts.iter().take(SHOWN) {
        burst_lines(&mut out, b, &st);
    }
    if report.bursts.len() > SHOWN {
        let _ = writeln!(
            out,
            "  … {} more bursts in the JSON report",
            report.bursts.len() - SHOWN
        );
    }
    let traced = report.bursts.iter().filter(|b| b.trace.is_some()).count();
    if traced < report.bursts.len() {
        let k = report.provenance.traced_bursts;
        let _ = writeln!(
            out,
            "  plot traces kept for {traced} of {} bursts (the first {k} and the {k} worst by EVM)",
            report.bursts.len()
        );
    }
    let s = &report.summary;
    let _ = writeln!(out, "{}", st.head("── over all bursts"));
    let _ =
        writeln!(
        out,
        "  EVM {} (worst burst {}), MER {}, SER {}, BER {}, largest |CFO| {}, longest error run {}",
        opt(s.evm_rms_percent, 2, " %"),
        opt(s.evm_worst_percent, 2, " %"),
        opt(s.mer_db, 1, " dB"),
        s.ser.map(|r| format!("{:.2e}", r.rate)).unwrap_or("n/a".into()),
        s.ber.map(|r| format!("{:.2e}", r.rate)).unwrap_or("n/a".into()),
        opt(s.cfo_abs_max_hz, 1, " Hz"),
        s.longest_error_run
    );
    if let (Some(mean), Some(max)) = (s.sco_mean_ppm, s.sco_abs_max_ppm) {
        let _ = writeln!(
            out,
            "  sample-clock offset: mean {mean:+.2} ppm, largest |offset| {max:.2} ppm"
        );
    }
    let v = &report.verdict;
    let label = match v.result {
        VerdictResult::Pass => st.good("WITHIN LIMITS"),
        VerdictResult::Fail => st.bad("LIMIT FAILED"),
        VerdictResult::NoTraining => st.note("NO TRAINING BLOCK FOUND"),
    };
    let _ = writeln!(out, "{} {}", st.head("── verdict"), label);
    for c in &v.checks {
        let mark = if c.pass {
            st.good("ok  ")
        } else {
            st.bad("FAIL")
        };
        let _ = writeln!(
            out,
            "  {mark} {} = {} (measured {:.4})",
            c.limit, c.threshold, c.measured
        );
    }
    out
}
