//! Plots of a report: SVG files and an offline `index.html`.
//!
//! Every plot is drawn from the report document alone (plus the ideal
//! constellation points of the profile's payload modulation), never from the
//! analysis' internal state, so a report re-read months later draws the same
//! pictures. Files written per burst `k` that carries a trace (the report's
//! traced set: the first `provenance.traced_bursts` bursts and as many again
//! with the largest RMS EVM): `burst-k-constellation.svg`, `burst-k-taps.svg`,
//! `burst-k-response.svg`, `burst-k-evm.svg`, `burst-k-sync.svg`; and
//! `index.html` linking them all with the summary. A burst without a trace draws
//! empty constellation, EVM and sync charts if asked directly.

use super::schema::{BurstReport, Report, Trace, VerdictResult};
use super::svg::{palette, Chart, Range};
use crate::atomic::{write_atomic, WriteError};
use crate::Cf32;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

const W: f64 = 560.0;
const H: f64 = 380.0;

/// The burst's trace, or an empty one when the burst is outside the traced set.
fn trace_of(b: &BurstReport) -> std::borrow::Cow<'_, Trace> {
    match &b.trace {
        Some(t) => std::borrow::Cow::Borrowed(t),
        None => std::borrow::Cow::Owned(Trace::default()),
    }
}

/// Constellation of the equalised payload with ideal points and wrong decisions.
pub fn constellation_svg(b: &BurstReport, ideal: &[Cf32]) -> String {
    let lim = ideal
        .iter()
        .map(|p| p.re.abs().max(p.im.abs()) as f64)
        .fold(0.0f64, f64::max)
        .max(0.5)
        * 1.45;
    let r = Range { lo: -lim, hi: lim };
    let mut c = Chart::new(
        H + 60.0,
        H + 20.0,
        &format!("Burst {} · equalised payload", b.index),
        "in-phase",
        "quadrature",
        r,
        r,
    );
    let trace = trace_of(b);
    let wrong: std::collections::BTreeSet<usize> = trace.wrong.iter().copied().collect();
    let (mut good, mut bad) = (Vec::new(), Vec::new());
    for p in &trace.constellation {
        let pt = (p[1], p[2]);
        if wrong.contains(&(p[0] as usize)) {
            bad.push(pt);
        } else {
            good.push(pt);
        }
    }
    c.dots(&good, palette::TEAL, 1.6, "symbols");
    let ideal_pts: Vec<(f64, f64)> = ideal.iter().map(|p| (p.re as f64, p.im as f64)).collect();
    c.crosses(&ideal_pts, palette::PLUM, 4.0, "ideal");
    c.dots(&bad, palette::BRICK, 3.0, "wrong-decisions");
    c.legend(&[
        (palette::TEAL, "equalised symbol"),
        (palette::PLUM, "ideal point"),
        (palette::BRICK, "wrong decision"),
    ]);
    c.finish()
}

/// Tap magnitudes in dB relative to the main tap; pre-cursor, main and post-cursor coloured apart.
pub fn taps_svg(b: &BurstReport) -> String {
    let ch = &b.channel;
    let idx = |i: usize| i as f64 - ch.main_index as f64;
    let floor = ch
        .taps_db
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .fold(0.0f64, f64::min)
        .max(-60.0)
        - 6.0;
    let x = Range {
        lo: idx(0) - 1.0,
        hi: idx(ch.taps.len().saturating_sub(1)) + 1.0,
    };
    let y = Range { lo: floor, hi: 6.0 };
    let mut c = Chart::new(
        W,
        H,
        &format!("Burst {} · channel taps", b.index),
        "tap index (symbols, 0 = main)",
        "magnitude (dB re main tap)",
        x,
        y,
    );
    let pick = |sel: &dyn Fn(usize) -> bool| -> Vec<(f64, f64)> {
        ch.taps_db
            .iter()
            .enumerate()
            .filter(|(i, _)| sel(*i))
            .map(|(i, v)| (idx(i), v.max(floor)))
            .collect()
    };
    c.stems(
        &pick(&|i| i < ch.main_index),
        floor,
        palette::AMBER,
        "pre-cursor",
    );
    c.stems(
        &pick(&|i| i == ch.main_index),
        floor,
        palette::PLUM,
        "main-tap",
    );
    c.stems(
        &pick(&|i| i > ch.main_index),
        floor,
        palette::TEAL,
        "post-cursor",
    );
    let noise_db = 10.0 * (ch.noise_variance.max(1e-300)).log10()
        - 10.0
            * ch.taps
                .get(ch.main_index)
                .map(|t| t[0] * t[0] + t[1] * t[1])
                .unwrap_or(1.0)
                .max(1e-300)
                .log10();
    c.hline(noise_db, palette::BRICK, "noise variance");
    c.legend(&[
        (palette::AMBER, "pre-cursor"),
        (palette::PLUM, "main tap"),
        (palette::TEAL, "post-cursor"),
    ]);
    c.finish()
}

/// Channel frequency response |H(f)| in dB over one symbol-rate period.
pub fn response_svg(b: &BurstReport) -> String {
    let pts: Vec<(f64, f64)> = b
        .channel
        .response_db
        .iter()
        .flatten()
        .map(|p| (p[0], p[1]))
        .collect();
    let y = Range::covering(pts.iter().map(|p| p.1), 0.1, Range { lo: -20.0, hi: 5.0 });
    let mut c = Chart::new(
        W,
        H,
        &format!("Burst {} · channel frequency response", b.index),
        "frequency (cycles per symbol)",
        "|H(f)| (dB)",
        Range { lo: -0.5, hi: 0.5 },
        y,
    );
    c.line(&pts, palette::TEAL, 2.0, "response");
    c.finish()
}

/// RMS EVM over consecutive blocks of the burst, with decision-error runs shaded.
pub fn evm_svg(b: &BurstReport) -> String {
    let pts: Vec<(f64, f64)> = trace_of(b)
        .evm_blocks
        .iter()
        .map(|p| (p[0], p[1]))
        .collect();
    let x = Range {
        lo: 0.0,
        hi: (b.metrics.symbols.max(1)) as f64,
    };
    let y = Range::covering(
        pts.iter()
            .map(|p| p.1)
            .chain([0.0, b.metrics.evm_rms_percent]),
        0.1,
        Range { lo: 0.0, hi: 10.0 },
    );
    let y = Range { lo: 0.0, hi: y.hi };
    let mut c = Chart::new(
        W,
        H,
        &format!("Burst {} · EVM along the payload", b.index),
        "payload symbol",
        "RMS EVM (%)",
        x,
        y,
    );
    let spans: Vec<(f64, f64)> = b
        .metrics
        .error_runs
        .iter()
        .map(|r| (r.start as f64, (r.start + r.length) as f64))
        .collect();
    c.bands(&spans, palette::BRICK, "error-runs");
    c.line(&pts, palette::TEAL, 2.0, "evm");
    c.hline(
        b.metrics.evm_rms_percent,
        palette::PLUM,
        &format!("burst RMS {:.2} %", b.metrics.evm_rms_percent),
    );
    c.finish()
}

/// The normalised sync metric around the burst's training block.
pub fn sync_svg(b: &BurstReport, threshold: f64) -> String {
    let pts: Vec<(f64, f64)> = trace_of(b)
        .sync_metric
        .iter()
        .map(|p| (p[0], p[1]))
        .collect();
    let x = Range::covering(pts.iter().map(|p| p.0), 0.0, Range { lo: -1.0, hi: 1.0 });
    let mut c = Chart::new(
        W,
        H,
        &format!("Burst {} · training correlation", b.index),
        "samples from start_sample",
        "normalised metric",
        x,
        Range { lo: 0.0, hi: 1.05 },
    );
    c.line(&pts, palette::TEAL, 1.6, "sync-metric");
    c.hline(threshold, palette::BRICK, "threshold");
    c.finish()
}

fn fmt_opt(v: Option<f64>, unit: &str) -> String {
    v.map(|v| format!("{v:.2} {unit}"))
        .unwrap_or_else(|| "—".into())
}

/// The offline index page: summary figures and every plot.
pub fn index_html(report: &Report, files: &[(usize, Vec<String>)]) -> String {
    let esc = |s: &str| {
        s.replace('&', "&amp;")
            .replace('<', "&lt;")
            .replace('>', "&gt;")
    };
    let verdict = match report.verdict.result {
        VerdictResult::Pass => ("within limits", palette::TEAL),
        VerdictResult::Fail => ("limit failed", palette::BRICK),
        VerdictResult::NoTraining => ("no training block found", palette::AMBER),
    };
    let mut h = String::new();
    let _ = write!(
        h,
        r#"<!DOCTYPE html><html lang="en"><head><meta charset="utf-8"><title>iqaudit · {path}</title>
<style>body{{background:{paper};color:{ink};font-family:sans-serif;margin:2em}}h1{{font-size:1.3em}}
.verdict{{display:inline-block;padding:.2em .7em;border-radius:.3em;color:#fff;background:{vc}}}
dl{{display:grid;grid-template-columns:max-content auto;gap:.2em 1.2em}}dt{{font-weight:bold}}
section{{border-top:2px solid {grid};margin-top:1.5em;padding-top:.5em}}img{{margin:.3em;border:1px solid {grid}}}</style></head><body>
<h1>iqaudit report · {path}</h1><p><span class="verdict">{v}</span></p><dl>"#,
        path = esc(&report.input.path),
        paper = palette::PAPER,
        ink = palette::INK,
        grid = palette::GRID,
        vc = verdict.1,
        v = verdict.0
    );
    let s = &report.summary;
    let rows = [
        ("bursts found", s.bursts.to_string()),
        ("RMS EVM (all bursts)", fmt_opt(s.evm_rms_percent, "%")),
        ("worst burst EVM", fmt_opt(s.evm_worst_percent, "%")),
        ("MER", fmt_opt(s.mer_db, "dB")),
        (
            "SER",
            s.ser
                .map(|r| format!("{:.3e} ({} / {})", r.rate, r.errors, r.trials))
                .unwrap_or_else(|| "payload unknown".into()),
        ),
        ("largest |CFO|", fmt_opt(s.cfo_abs_max_hz, "Hz")),
        (
            "longest error run",
            format!("{} symbols", s.longest_error_run),
        ),
    ];
    for (k, v) in rows {
        let _ = write!(h, "<dt>{}</dt><dd>{}</dd>", esc(k), esc(&v));
    }
    h.push_str("</dl>");
    for w in &report.warnings {
        let _ = write!(h, "<p>⚠ {}</p>", esc(&w.to_string()));
    }
    if files.len() < report.bursts.len() {
        let k = report.provenance.traced_bursts;
        let _ = write!(
            h,
            "<p>Plots for {} of {} bursts: the first {k} and the {k} with the largest RMS EVM \
             (<code>--traced-bursts</code>). Every burst's figures are in the JSON report.</p>",
            files.len(),
            report.bursts.len()
        );
    }
    for (k, names) in files {
        let _ = write!(h, "<section><h2>Burst {k}</h2>");
        for n in names {
            let _ = write!(
                h,
                r#"<a href="{n}"><img src="{n}" alt="{n}" width="420"></a>"#
            );
        }
        h.push_str("</section>");
    }
    h.push_str("</body></html>\n");
    h
}

/// Write the plots of every burst that carries a trace, and `index.html`, into
/// `dir` (created if needed). Returns the paths written.
pub fn write_plots(
    report: &Report,
    ideal: &[Cf32],
    threshold: f64,
    dir: &Path,
) -> Result<Vec<PathBuf>, WriteError> {
    std::fs::create_dir_all(dir).map_err(|source| WriteError::Io {
        path: dir.to_path_buf(),
        source,
    })?;
    let mut written = Vec::new();
    let mut index = Vec::new();
    for b in report.bursts.iter().filter(|b| b.trace.is_some()) {
        let k = b.index;
        let plots = [
            (
                format!("burst-{k}-constellation.svg"),
                constellation_svg(b, ideal),
            ),
            (format!("burst-{k}-taps.svg"), taps_svg(b)),
            (format!("burst-{k}-response.svg"), response_svg(b)),
            (format!("burst-{k}-evm.svg"), evm_svg(b)),
            (format!("burst-{k}-sync.svg"), sync_svg(b, threshold)),
        ];
        let mut names = Vec::new();
        for (name, svg) in plots {
            let p = dir.join(&name);
            write_atomic(&p, svg.as_bytes())?;
            written.push(p);
            names.push(name);
        }
        index.push((k, names));
    }
    let p = dir.join("index.html");
    write_atomic(&p, index_html(report, &index).as_bytes())?;
    written.push(p);
    Ok(written)
}
