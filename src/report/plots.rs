//! Plots of a report: SVG files and an offline `index.html`.
//!
//! Every plot is drawn from the report document alone (plus the ideal
//! constellation points of the profile's payload modulation), never from the
//! analysis' internal state, so a report re-read months later draws the same
//! pictures, byte for byte.
//!
//! Files (see docs/user-guide.md, "The plots"):
//!
//! * capture views: `psd.svg` and `power.svg` (from the report's `capture`
//!   key; see [`super::capture_plots`]), and `trend.svg` when there are at
//!   least two bursts (EVM, MER, CFO, SNR, received power and sync metric
//!   against the burst start time, limits drawn, the worst bursts labelled);
//! * per burst `k` that carries a trace (the traced set: the first
//!   `provenance.traced_bursts` bursts and as many again with the largest RMS
//!   EVM): `burst-k-constellation.svg`, `burst-k-eye.svg`, `burst-k-taps.svg`,
//!   `burst-k-response.svg`, `burst-k-evm.svg`, `burst-k-sync.svg`;
//! * `report.json` (the report itself) and `index.html`, one self-contained
//!   page linking all of them.
//!
//! **Frequency responses.** With the crate's tap convention (`src/lib.rs`) the
//! channel is `H(f) = Σ_k h[k]·e^{−j2πfk}` (k from −P, f in cycles per
//! symbol), the feedforward filter in apply form is
//! `W(f) = Σ_r ff[r]·e^{−j2πf(r − (Δ − P))}`, the feedback filter
//! `B(f) = Σ_j fb[j−1]·e^{−j2πfj}`, and the combined response seen by the
//! slicer with correct decisions fed back is `C(f) = W(f)·H(f) − B(f)`. Group
//! delay is `τ(f) = −(1/2π)·dφ/df`, computed exactly as
//! `Re{Σ k·c_k·e^{−j2πfk} / Σ c_k·e^{−j2πfk}}` (symbols; seconds when divided
//! by the symbol rate).

use super::capture_plots::{
    esc_html, fmt_hz, page_style, power_svg, psd_svg, spur_rows, BurstMark, MaskLine,
};
use super::schema::{BurstReport, LimitCheck, Report, Trace, VerdictResult};
use super::svg::{palette, Chart, Figure, Range};
use crate::atomic::{write_atomic, WriteError};
use crate::{Cf32, Cf64};
use std::f64::consts::PI;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

const W: f64 = 760.0;
const H: f64 = 420.0;
/// Above this many points the constellation is drawn as a density.
const DENSITY_MIN_POINTS: usize = 600;

/// The burst's trace, or an empty one when the burst is outside the traced set.
fn trace_of(b: &BurstReport) -> std::borrow::Cow<'_, Trace> {
    match &b.trace {
        Some(t) => std::borrow::Cow::Borrowed(t),
        None => std::borrow::Cow::Owned(Trace::default()),
    }
}

fn get_f64(v: &serde_json::Value, path: &[&str]) -> Option<f64> {
    path.iter().try_fold(v, |v, k| v.get(k))?.as_f64()
}

/// Samples per symbol from the report's resolved profile (1 when absent).
pub fn samples_per_symbol(report: &Report) -> usize {
    get_f64(&report.profile, &["samples_per_symbol"]).map_or(1, |v| v.max(1.0) as usize)
}

/// The symbol rate in Hz: the profile's `symbol_rate_hz`, else the sample rate
/// over the samples per symbol; `None` without a positive rate.
pub fn symbol_rate_hz(report: &Report) -> Option<f64> {
    get_f64(&report.profile, &["symbol_rate_hz"])
        .or_else(|| Some(report.input.sample_rate_hz / samples_per_symbol(report) as f64))
        .filter(|r| r.is_finite() && *r > 0.0)
}

/// Where each burst's frame lies in the capture (from `start_sample` and the
/// profile's payload and training lengths).
pub fn burst_marks(report: &Report) -> Vec<BurstMark> {
    let sps = samples_per_symbol(report) as f64;
    let p = &report.profile;
    let before = get_f64(p, &["payload", "before_symbols"]).unwrap_or(0.0);
    let after = get_f64(p, &["payload", "after_symbols"]).unwrap_or(0.0);
    report
        .bursts
        .iter()
        .map(|b| {
            let train = b.channel.training_symbols as f64;
            let s = b.start_sample as f64;
            BurstMark {
                index: b.index,
                first_sample: (s - before * sps).max(0.0),
                end_sample: s + (train + after) * sps,
            }
        })
        .collect()
}

/// The spectral mask in the report's profile (`limits.spectral_mask`).
pub fn mask_lines(report: &Report) -> Vec<MaskLine> {
    report
        .profile
        .get("limits")
        .and_then(|l| l.get("spectral_mask"))
        .and_then(|m| m.as_array())
        .map(|a| {
            a.iter()
                .filter_map(|s| {
                    Some(MaskLine {
                        from_hz: s.get("from_offset_hz")?.as_f64()?,
                        to_hz: s.get("to_offset_hz")?.as_f64()?,
                        max_db_rel_peak: s.get("max_db_rel_peak")?.as_f64()?,
                    })
                })
                .collect()
        })
        .unwrap_or_default()
}

/// Constellation of the equalised payload with ideal points and wrong
/// decisions; a density of cells when the points are many. Everything is
/// clipped to the frame.
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
        H + 40.0,
        &format!("Burst {} · equalised payload", b.index),
        "in-phase (re ideal unit power)",
        "quadrature (re ideal unit power)",
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
    let dense = good.len() > DENSITY_MIN_POINTS;
    if dense {
        c.density(&good, 90, palette::TEAL, "symbol-density");
    } else {
        c.dots(&good, palette::TEAL, 1.8, "symbols");
    }
    let ideal_pts: Vec<(f64, f64)> = ideal.iter().map(|p| (p.re as f64, p.im as f64)).collect();
    c.crosses(&ideal_pts, palette::PLUM, 4.0, "ideal");
    c.dots(&bad, palette::BRICK, 3.0, "wrong-decisions");
    c.legend(&[
        (
            palette::TEAL,
            if dense {
                "symbol density"
            } else {
                "equalised symbol"
            },
        ),
        (palette::PLUM, "ideal"),
        (palette::BRICK, "wrong decision"),
    ]);
    c.note(&format!(
        "{} of {} symbols",
        trace.constellation.len(),
        b.metrics.symbols
    ));
    c.finish()
}

/// Eye opening at point `at` of the traces: the traces' in-phase values there
/// are assigned to the nearest of `levels`; for each pair of adjacent levels
/// the opening is (lowest value of the upper group − highest of the lower) over
/// the level spacing. Returns the smallest opening (1 = fully open, ≤ 0 =
/// closed); `None` with fewer than two levels in use.
pub fn eye_opening(values: &[f64], levels: &[f64]) -> Option<f64> {
    let mut lv: Vec<f64> = levels.to_vec();
    lv.sort_by(|a, b| a.total_cmp(b));
    lv.dedup_by(|a, b| (*a - *b).abs() < 1e-9);
    if lv.len() < 2 {
        return None;
    }
    let mut lo = vec![f64::INFINITY; lv.len()];
    let mut hi = vec![f64::NEG_INFINITY; lv.len()];
    for &v in values {
        let k = (0..lv.len())
            .min_by(|&a, &b| (v - lv[a]).abs().total_cmp(&(v - lv[b]).abs()))
            .unwrap_or(0);
        lo[k] = lo[k].min(v);
        hi[k] = hi[k].max(v);
    }
    let mut worst: Option<f64> = None;
    for k in 0..lv.len() - 1 {
        if hi[k].is_finite() && lo[k + 1].is_finite() {
            let o = (lo[k + 1] - hi[k]) / (lv[k + 1] - lv[k]);
            worst = Some(worst.map_or(o, |w: f64| w.min(o)));
        }
    }
    worst
}

/// In-phase levels of a constellation.
pub fn in_phase_levels(ideal: &[Cf32]) -> Vec<f64> {
    let mut v: Vec<f64> = ideal.iter().map(|p| f64::from(p.re)).collect();
    v.sort_by(|a, b| a.total_cmp(b));
    v.dedup_by(|a, b| (*a - *b).abs() < 1e-6);
    v
}

/// Eye diagrams: the matched-filter output before equalisation (over two
/// symbol periods around each instant) and the equalised symbols (symbol
/// spaced, consecutive symbols joined), in-phase component.
pub fn eye_svg(b: &BurstReport, ideal: &[Cf32]) -> String {
    let trace = trace_of(b);
    let levels = in_phase_levels(ideal);
    let lim = levels.iter().map(|l| l.abs()).fold(0.5f64, f64::max) * 1.6;
    let y = Range { lo: -lim, hi: lim };
    let x = Range { lo: -1.0, hi: 1.0 };
    let pw = 500.0;
    let mut fig = Figure::new(2.0 * pw, H);
    let mut a = Chart::panel(
        0.0,
        0.0,
        0,
        pw,
        H,
        &format!("Burst {} · eye before equalisation", b.index),
        "time from the symbol instant (symbols)",
        "in-phase ÷ main tap (re ideal)",
        x,
        y,
    );
    let mut opening_mf = None;
    if let Some(eye) = &trace.eye_matched {
        let p = eye.points_per_symbol.max(1);
        let mut pts = Vec::new();
        let mut mid = Vec::new();
        for t in &eye.traces {
            for (i, v) in t.iter().enumerate() {
                pts.push((i as f64 / p as f64 - 1.0, v[0]));
            }
            pts.push((f64::NAN, f64::NAN));
            if let Some(v) = t.get(p) {
                mid.push(v[0]);
            }
        }
        opening_mf = eye_opening(&mid, &levels);
        a.line(&pts, palette::TEAL, 0.7, "eye-matched");
    }
    for l in &levels {
        a.hline_at(*l, palette::SLATE, "", true);
    }
    a.vline(0.0, palette::PLUM, "instant", "instant");
    a.note(&match opening_mf {
        Some(o) => format!("opening {:.0} %", 100.0 * o.max(0.0)),
        None => "no eye data".into(),
    });
    fig.push(a);
    let mut e = Chart::panel(
        pw,
        0.0,
        1,
        pw,
        H,
        &format!("Burst {} · eye after equalisation", b.index),
        "time from the symbol instant (symbols)",
        "equalised in-phase (re ideal)",
        x,
        y,
    );
    let z = &trace.eye_equalised;
    let mut pts = Vec::new();
    for w in z.windows(3) {
        pts.extend([
            (-1.0, w[0][0]),
            (0.0, w[1][0]),
            (1.0, w[2][0]),
            (f64::NAN, f64::NAN),
        ]);
    }
    e.line(&pts, palette::TEAL, 0.7, "eye-equalised");
    let mid: Vec<f64> = z.iter().map(|v| v[0]).collect();
    for l in &levels {
        e.hline_at(*l, palette::SLATE, "", true);
    }
    e.vline(0.0, palette::PLUM, "instant", "instant");
    e.note(&match eye_opening(&mid, &levels) {
        Some(o) => format!("{} symbols, opening {:.0} %", z.len(), 100.0 * o.max(0.0)),
        None => "no eye data".into(),
    });
    fig.push(e);
    fig.finish()
}

/// Tap magnitudes in dB relative to the main tap (with the noise variance and
/// the tap-estimation floor σ²/N drawn and labelled), and tap phases.
pub fn taps_svg(b: &BurstReport) -> String {
    let ch = &b.channel;
    let idx = |i: usize| i as f64 - ch.main_index as f64;
    let main_power = ch
        .taps
        .get(ch.main_index)
        .map(|t| t[0] * t[0] + t[1] * t[1])
        .unwrap_or(1.0)
        .max(1e-300);
    let noise_db = 10.0 * (ch.noise_variance.max(1e-300) / main_power).log10();
    let n_train = ch.training_symbols.max(1) as f64;
    let floor_db = noise_db - 10.0 * n_train.log10();
    let lowest = ch
        .taps_db
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .chain([floor_db])
        .fold(0.0f64, f64::min)
        .max(-80.0);
    let base = (lowest / 10.0).floor() * 10.0 - 5.0;
    let x = Range {
        lo: idx(0) - 1.0,
        hi: idx(ch.taps.len().saturating_sub(1)) + 1.0,
    };
    let ph = 360.0;
    let mut fig = Figure::new(W, H + ph);
    let mut c = Chart::panel(
        0.0,
        0.0,
        0,
        W,
        H,
        &format!("Burst {} · channel taps, magnitude", b.index),
        "tap index (symbols, 0 = main tap)",
        "|h[k]|² (dB re main tap)",
        x,
        Range { lo: base, hi: 6.0 },
    );
    let pick = |sel: &dyn Fn(usize) -> bool, f: &dyn Fn(usize) -> f64| -> Vec<(f64, f64)> {
        (0..ch.taps.len())
            .filter(|&i| sel(i))
            .map(|i| (idx(i), f(i)))
            .collect()
    };
    let mag = |i: usize| ch.taps_db.get(i).copied().unwrap_or(f64::NAN);
    type Group<'a> = (&'a dyn Fn(usize) -> bool, &'a str, &'a str);
    let groups: [Group; 3] = [
        (&|i| i < ch.main_index, palette::AMBER, "pre-cursor"),
        (&|i| i == ch.main_index, palette::PLUM, "main-tap"),
        (&|i| i > ch.main_index, palette::TEAL, "post-cursor"),
    ];
    for (sel, colour, class) in groups {
        c.stems(&pick(sel, &mag), base, colour, class);
    }
    c.hline_at(
        noise_db,
        palette::BRICK,
        &format!("noise variance σ² ({noise_db:.1} dB)"),
        true,
    );
    c.hline_at(
        floor_db,
        palette::MOSS,
        &format!(
            "tap estimation floor σ²/N, N = {} ({floor_db:.1} dB)",
            ch.training_symbols
        ),
        false,
    );
    c.legend(&[
        (palette::AMBER, "pre-cursor"),
        (palette::PLUM, "main tap"),
        (palette::TEAL, "post-cursor"),
        (palette::BRICK, "σ²"),
        (palette::MOSS, "σ²/N"),
    ]);
    fig.push(c);
    let mut p = Chart::panel(
        0.0,
        H,
        1,
        W,
        ph,
        "channel taps, phase",
        "tap index (symbols, 0 = main tap)",
        "arg h[k] (degrees)",
        x,
        Range {
            lo: -200.0,
            hi: 200.0,
        },
    );
    let phase = |i: usize| {
        ch.taps
            .get(i)
            .map_or(f64::NAN, |t| t[1].atan2(t[0]).to_degrees())
    };
    for (sel, colour, class) in groups {
        p.stems(&pick(sel, &phase), 0.0, colour, class);
    }
    fig.push(p);
    fig.finish()
}

/// Frequency response and group delay of `taps` placed at indices
/// `first, first + 1, …` (see the module doc): `(H(f), τ(f) in symbols)`;
/// the group delay is NaN where |H| vanishes.
pub fn response_at(taps: &[Cf64], first: f64, f: f64) -> (Cf64, Cf64) {
    let (mut h, mut d) = (Cf64::new(0.0, 0.0), Cf64::new(0.0, 0.0));
    for (i, c) in taps.iter().enumerate() {
        let k = first + i as f64;
        let e = Cf64::from_polar(1.0, -2.0 * PI * f * k);
        h += c * e;
        d += c * e * k;
    }
    (h, d)
}

/// Group delay (symbols) from `(S, Σ k·c·e)`; NaN where |S| vanishes.
pub fn group_delay(s: Cf64, d: Cf64) -> f64 {
    if s.norm_sqr() < 1e-18 {
        f64::NAN
    } else {
        (d / s).re
    }
}

fn to_c64(v: &[[f64; 2]]) -> Vec<Cf64> {
    v.iter().map(|c| Cf64::new(c[0], c[1])).collect()
}

/// One curve of the response plot: `(f, |·| dB, phase deg, group delay symbols)`.
type Curve = Vec<(f64, f64, f64, f64)>;

/// Channel, feedforward-equaliser and combined responses over one symbol-rate
/// period (see the module doc for the formulas).
pub fn responses(b: &BurstReport, grid: usize) -> (Curve, Curve, Curve) {
    let h = to_c64(&b.channel.taps);
    let ff = to_c64(&b.equaliser.feedforward);
    let fb = to_c64(&b.equaliser.feedback);
    let p = b.channel.pre_cursor as f64;
    let delta = b.equaliser.decision_delay as f64;
    let (mut ch, mut eq, mut co) = (Vec::new(), Vec::new(), Vec::new());
    let point = |s: Cf64, d: Cf64, f: f64| {
        (
            f,
            20.0 * s.norm().max(1e-15).log10(),
            s.arg().to_degrees(),
            group_delay(s, d),
        )
    };
    for g in 0..=grid {
        let f = g as f64 / grid as f64 - 0.5;
        let (hs, hd) = response_at(&h, -p, f);
        ch.push(point(hs, hd, f));
        if !ff.is_empty() {
            let (ws, wd) = response_at(&ff, p - delta, f);
            let (bs, bd) = response_at(&fb, 1.0, f);
            eq.push(point(ws, wd, f));
            // C = W·H − B; Σk·c·e of a product is W·D_H + D_W·H.
            co.push(point(ws * hs - bs, ws * hd + wd * hs - bd, f));
        }
    }
    (ch, eq, co)
}

/// Channel, equaliser and combined frequency response: magnitude, phase and
/// group delay, against frequency in Hz when the symbol rate is known.
pub fn response_svg(b: &BurstReport, symbol_rate_hz: Option<f64>) -> String {
    let (ch, eq, co) = responses(b, 256);
    let (fscale, funit, xlabel) = match symbol_rate_hz {
        Some(r) if r >= 2e3 => (r / 1e3, "kHz", "frequency offset (kHz)".to_string()),
        Some(r) => (r, "Hz", "frequency offset (Hz)".to_string()),
        None => (1.0, "", "frequency (cycles per symbol)".to_string()),
    };
    let _ = funit;
    let (tscale, tlabel) = match symbol_rate_hz {
        Some(r) => (1e6 / r, "group delay (µs)"),
        None => (1.0, "group delay (symbols)"),
    };
    let x = Range {
        lo: -0.5 * fscale,
        hi: 0.5 * fscale,
    };
    let curves: [(&Curve, &str, &str); 3] = [
        (&ch, palette::TEAL, "channel H"),
        (&eq, palette::AMBER, "feedforward W"),
        (&co, palette::PLUM, "combined W·H − B"),
    ];
    let mags = curves
        .iter()
        .flat_map(|(c, _, _)| c.iter().map(|p| p.1))
        .filter(|v| *v > -100.0);
    let ym = Range::covering(mags, 0.08, Range { lo: -20.0, hi: 5.0 });
    let ym = Range {
        lo: ym.lo.max(-60.0),
        hi: ym.hi.min(60.0),
    };
    let taps_span = (b.channel.taps.len() + b.equaliser.feedforward.len()) as f64;
    let gd = curves
        .iter()
        .flat_map(|(c, _, _)| c.iter().map(|p| p.3))
        .filter(|v| v.abs() <= taps_span);
    let yg = Range::covering(gd, 0.1, Range { lo: -1.0, hi: 1.0 });
    let yg = Range {
        lo: yg.lo * tscale,
        hi: yg.hi * tscale,
    };
    let ph = 300.0;
    let mut fig = Figure::new(W, H + 2.0 * ph);
    let mut m = Chart::panel(
        0.0,
        0.0,
        0,
        W,
        H,
        &format!("Burst {} · frequency response, magnitude", b.index),
        &xlabel,
        "magnitude (dB)",
        x,
        ym,
    );
    let mut p = Chart::panel(
        0.0,
        H,
        1,
        W,
        ph,
        "phase",
        &xlabel,
        "phase (degrees)",
        x,
        Range {
            lo: -200.0,
            hi: 200.0,
        },
    );
    let mut g = Chart::panel(0.0, H + ph, 2, W, ph, "group delay", &xlabel, tlabel, x, yg);
    for (c, colour, name) in curves {
        let class = name.split_whitespace().next().unwrap_or("curve");
        m.line(
            &c.iter().map(|q| (q.0 * fscale, q.1)).collect::<Vec<_>>(),
            colour,
            2.0,
            class,
        );
        // Break the phase line where it wraps.
        let mut pts = Vec::new();
        for (i, q) in c.iter().enumerate() {
            if i > 0 && (q.2 - c[i - 1].2).abs() > 180.0 {
                pts.push((f64::NAN, f64::NAN));
            }
            pts.push((q.0 * fscale, q.2));
        }
        p.line(&pts, colour, 1.6, class);
        g.line(
            &c.iter()
                .map(|q| (q.0 * fscale, q.3 * tscale))
                .collect::<Vec<_>>(),
            colour,
            1.6,
            class,
        );
    }
    let legend: Vec<(&str, &str)> = curves
        .iter()
        .filter(|(c, _, _)| !c.is_empty())
        .map(|(_, colour, name)| (*colour, *name))
        .collect();
    m.legend(&legend);
    if let Some(r) = symbol_rate_hz {
        m.note(&format!("symbol rate {}", fmt_hz(r)));
    }
    fig.push(m);
    fig.push(p);
    fig.push(g);
    fig.finish()
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
        "payload symbol (index)",
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
    c.legend(&[
        (palette::TEAL, "block RMS EVM"),
        (palette::BRICK, "error runs"),
    ]);
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
        "offset from start_sample (samples)",
        "normalised metric (0…1)",
        x,
        Range { lo: 0.0, hi: 1.05 },
    );
    c.line(&pts, palette::TEAL, 1.6, "sync-metric");
    c.hline(
        threshold,
        palette::BRICK,
        &format!("threshold {threshold:.3}"),
    );
    c.finish()
}

/// The trend over bursts: EVM, MER, CFO, SNR, received power and sync metric
/// against the burst start time, with the profile's limits and the detection
/// threshold drawn, and the `worst` bursts by RMS EVM labelled `#k`.
pub fn trend_svg(report: &Report, worst: usize) -> String {
    let fs = report.input.sample_rate_hz;
    let t_end = report.input.samples as f64 / fs;
    let (scale, unit) = if t_end >= 2.0 {
        (1.0, "s")
    } else if t_end >= 2e-3 {
        (1e-3, "ms")
    } else {
        (1e-6, "µs")
    };
    let t = |b: &BurstReport| b.start_sample as f64 / fs / scale;
    let x = Range {
        lo: 0.0,
        hi: (t_end / scale).max(1e-9),
    };
    let mut order: Vec<&BurstReport> = report.bursts.iter().collect();
    order.sort_by(|a, b| {
        b.metrics
            .evm_rms_percent
            .total_cmp(&a.metrics.evm_rms_percent)
            .then(a.index.cmp(&b.index))
    });
    let worst_set: Vec<usize> = order.iter().take(worst).map(|b| b.index).collect();
    let lim = |k: &str| get_f64(&report.profile, &["limits", k]);
    type Metric = fn(&BurstReport) -> Option<f64>;
    type Panel<'a> = (&'a str, &'a str, Metric, Vec<(f64, String)>);
    let panels: [Panel; 6] = [
        (
            "RMS EVM",
            "RMS EVM (%)",
            |b| Some(b.metrics.evm_rms_percent),
            lim("evm_rms_percent_max")
                .map(|v| (v, format!("limit {v} %")))
                .into_iter()
                .collect(),
        ),
        (
            "MER",
            "MER (dB)",
            |b| b.metrics.mer_db,
            lim("mer_db_min")
                .map(|v| (v, format!("limit {v} dB")))
                .into_iter()
                .collect(),
        ),
        (
            "CFO",
            "CFO (Hz)",
            |b| Some(b.cfo_hz),
            lim("cfo_hz_abs_max")
                .map(|v| vec![(v, format!("limit ±{v} Hz")), (-v, String::new())])
                .unwrap_or_default(),
        ),
        (
            "SNR of the channel fit",
            "SNR (dB)",
            |b| Some(b.channel.snr_db),
            Vec::new(),
        ),
        (
            "received power",
            "power (dBFS)",
            |b| b.received_power_dbfs,
            Vec::new(),
        ),
        (
            "sync metric",
            "metric (0…1)",
            |b| Some(b.sync_metric),
            vec![(
                report.provenance.threshold,
                format!("threshold {:.3}", report.provenance.threshold),
            )],
        ),
    ];
    let ph = 230.0;
    let mut fig = Figure::new(W, ph * panels.len() as f64);
    for (k, (title, ylabel, f, limits)) in panels.into_iter().enumerate() {
        let vals: Vec<(f64, f64, usize)> = report
            .bursts
            .iter()
            .filter_map(|b| f(b).filter(|v| v.is_finite()).map(|v| (t(b), v, b.index)))
            .collect();
        let y = Range::covering(
            vals.iter().map(|v| v.1).chain(limits.iter().map(|l| l.0)),
            0.12,
            Range { lo: 0.0, hi: 1.0 },
        );
        let mut c = Chart::panel(
            0.0,
            ph * k as f64,
            k,
            W,
            ph,
            &format!(
                "{}{title} per burst",
                if k == 0 { "Trend over bursts · " } else { "" }
            ),
            &format!("burst start, time from the first sample ({unit})"),
            ylabel,
            x,
            y,
        );
        let normal: Vec<(f64, f64)> = vals
            .iter()
            .filter(|v| !worst_set.contains(&v.2))
            .map(|v| (v.0, v.1))
            .collect();
        let bad: Vec<(f64, f64)> = vals
            .iter()
            .filter(|v| worst_set.contains(&v.2))
            .map(|v| (v.0, v.1))
            .collect();
        if vals.len() <= 400 {
            c.line(
                &vals.iter().map(|v| (v.0, v.1)).collect::<Vec<_>>(),
                palette::SLATE,
                0.8,
                "trend",
            );
        }
        c.dots(&normal, palette::TEAL, 2.6, "bursts");
        c.dots(&bad, palette::BRICK, 3.6, "worst-bursts");
        for v in vals.iter().filter(|v| worst_set.contains(&v.2)) {
            c.label(v.0, v.1, &format!("#{}", v.2), palette::BRICK);
        }
        for (v, label) in &limits {
            c.hline_at(*v, palette::BRICK, label, true);
        }
        if k == 0 {
            c.legend(&[
                (palette::TEAL, "burst"),
                (
                    palette::BRICK,
                    &format!("the {} worst by EVM", worst_set.len()),
                ),
            ]);
        }
        fig.push(c);
    }
    fig.finish()
}

fn fmt_opt(v: Option<f64>, digits: usize, unit: &str) -> String {
    v.map(|v| format!("{v:.digits$} {unit}"))
        .unwrap_or_else(|| "—".into())
}

/// A limit's margin with its sign (positive = within the limit).
fn margin_text(c: &LimitCheck) -> String {
    format!("{:+.4}", c.margin)
}

fn profile_summary(report: &Report) -> Vec<(&'static str, String)> {
    let p = &report.profile;
    let s = |path: &[&str]| {
        path.iter()
            .try_fold(p, |v, k| v.get(k))
            .map(|v| match v {
                serde_json::Value::String(s) => s.clone(),
                other => other.to_string(),
            })
            .unwrap_or_else(|| "—".into())
    };
    vec![
        (
            "symbols",
            format!(
                "{} samples per symbol, {} (roll-off {}, span {} symbols)",
                s(&["samples_per_symbol"]),
                s(&["pulse", "shape"]),
                s(&["pulse", "rolloff"]),
                s(&["pulse", "span_symbols"])
            ),
        ),
        (
            "symbol rate",
            symbol_rate_hz(report)
                .map(fmt_hz)
                .unwrap_or_else(|| "—".into()),
        ),
        (
            "training",
            format!(
                "{} {} symbols ({})",
                s(&["training", "length_symbols"]),
                s(&["training", "modulation"]),
                s(&["training", "sequence", "pattern"])
            ),
        ),
        (
            "payload",
            format!(
                "{}, {} symbols before and {} after the training, {}",
                s(&["payload", "modulation"]),
                s(&["payload", "before_symbols"]),
                s(&["payload", "after_symbols"]),
                if p.get("payload")
                    .and_then(|v| v.get("known"))
                    .is_some_and(|k| !k.is_null())
                {
                    "known (data-aided figures)"
                } else {
                    "unknown (decision-directed figures)"
                }
            ),
        ),
        (
            "channel fit",
            format!(
                "{} pre-cursor and {} post-cursor taps",
                s(&["channel_fit", "pre_cursor_taps"]),
                s(&["channel_fit", "post_cursor_taps"])
            ),
        ),
        (
            "equaliser",
            format!(
                "{}, Nf = {}, Nb = {}, delay {}, tracking {}",
                s(&["equaliser", "kind"]),
                s(&["equaliser", "feedforward_taps"]),
                s(&["equaliser", "feedback_taps"]),
                s(&["equaliser", "delay"]),
                s(&["equaliser", "tracking", "kind"])
            ),
        ),
        (
            "detection threshold",
            format!("{:.3}", report.provenance.threshold),
        ),
    ]
}

/// The offline index page: capture metadata, profile in short, verdict with
/// every limit, capture views, trend, a per-burst table linking each traced
/// burst's plots, and a link to the JSON report. `files` lists the plot files
/// written per traced burst, `capture_files` the capture-level plots.
pub fn index_html(
    report: &Report,
    files: &[(usize, Vec<String>)],
    capture_files: &[String],
    report_link: &str,
) -> String {
    let (verdict, class) = match report.verdict.result {
        VerdictResult::Pass => ("within limits", "pass"),
        VerdictResult::Fail => ("limit failed", "fail"),
        VerdictResult::NoTraining => ("no training block found", "none"),
    };
    let mut h = String::new();
    let _ = write!(
        h,
        "<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>iqaudit · {path}</title><style>{css}</style></head><body>\
<h1>iqaudit report · {path}</h1><p><span class=\"badge {class}\">{verdict}</span> &nbsp;{n} burst(s) found. \
The figures on this page come from the JSON report <a href=\"{link}\">{link}</a> (schema {schema}); \
<code>iqaudit recheck</code> on it re-runs the analysis and compares every figure.</p>",
        path = esc_html(&report.input.path),
        css = page_style(),
        n = report.bursts.len(),
        link = esc_html(report_link),
        schema = esc_html(&report.schema),
    );
    let i = &report.input;
    h.push_str("<h2>Capture</h2><table>");
    let rows = [
        (
            "file",
            format!("{} ({} bytes, {} samples)", i.path, i.size_bytes, i.samples),
        ),
        ("format", i.format_description()),
        ("sample rate", fmt_hz(i.sample_rate_hz)),
        (
            "centre frequency",
            i.center_freq_hz
                .map(fmt_hz)
                .unwrap_or_else(|| "unknown".into()),
        ),
        (
            "duration",
            format!("{:.6} s", i.samples as f64 / i.sample_rate_hz),
        ),
        (
            "SHA-256",
            if i.sha256.is_empty() {
                "not computed".into()
            } else {
                i.sha256.clone()
            },
        ),
        (
            "tool",
            format!("{} {}", report.tool.name, report.tool.version),
        ),
        ("command", report.command.join(" ")),
        ("profile SHA-256", report.provenance.profile_sha256.clone()),
    ];
    for (k, v) in rows {
        let _ = write!(
            h,
            "<tr><th>{}</th><td><code>{}</code></td></tr>",
            esc_html(k),
            esc_html(&v)
        );
    }
    h.push_str("</table><h2>Profile in short</h2><table>");
    for (k, v) in profile_summary(report) {
        let _ = write!(
            h,
            "<tr><th>{}</th><td>{}</td></tr>",
            esc_html(k),
            esc_html(&v)
        );
    }
    h.push_str("</table><h2>Verdict</h2>");
    if report.verdict.checks.is_empty() {
        h.push_str("<p>No limit was checked.</p>");
    } else {
        h.push_str("<table><tr><th>limit</th><th>threshold</th><th>measured (worst case)</th><th>margin</th><th>result</th></tr>");
        for c in &report.verdict.checks {
            let _ = write!(
                h,
                "<tr><td><code>{}</code></td><td class=\"num\">{}</td><td class=\"num\">{:.4}</td><td class=\"num\">{}</td><td class=\"{}\">{}</td></tr>",
                esc_html(&c.limit),
                c.threshold,
                c.measured,
                margin_text(c),
                if c.pass { "ok" } else { "bad" },
                if c.pass { "within" } else { "FAILED" }
            );
        }
        h.push_str("</table>");
    }
    let s = &report.summary;
    let _ = write!(
        h,
        "<p>Over all bursts: RMS EVM {}, worst burst {}, MER {}, SER {}, largest |CFO| {}, longest error run {} symbols.</p>",
        esc_html(&fmt_opt(s.evm_rms_percent, 2, "%")),
        esc_html(&fmt_opt(s.evm_worst_percent, 2, "%")),
        esc_html(&fmt_opt(s.mer_db, 2, "dB")),
        esc_html(
            &s.ser
                .map(|r| format!("{:.3e} ({} / {})", r.rate, r.errors, r.trials))
                .unwrap_or_else(|| "— (payload unknown)".into())
        ),
        esc_html(&fmt_opt(s.cfo_abs_max_hz, 1, "Hz")),
        s.longest_error_run
    );
    for w in &report.warnings {
        let _ = write!(h, "<p class=\"warn\">{}</p>", esc_html(&w.to_string()));
    }
    let img = |name: &str, alt: &str| {
        let (w, hgt) = svg_size_of(name);
        format!(
            "<figure><a href=\"{n}\"><img src=\"{n}\" alt=\"{a}\" width=\"{w}\" height=\"{hgt}\"></a><figcaption><a href=\"{n}\">{n}</a></figcaption></figure>",
            n = esc_html(name),
            a = esc_html(alt)
        )
    };
    if !capture_files.is_empty() {
        h.push_str("<section id=\"views\"><h2>Capture views</h2>");
        for f in capture_files {
            h.push_str(&img(f, f));
        }
        if let Some(v) = &report.capture {
            if !v.spurs.is_empty() {
                let _ = write!(
                    h,
                    "<h3>Spurs ({:.0} dB or more above the local floor)</h3><table><tr><th>frequency offset</th><th>power</th><th>peak level</th><th>above floor</th></tr>{}</table>",
                    v.spur_margin_db,
                    spur_rows(v)
                );
            }
        }
        h.push_str("</section>");
    }
    h.push_str("<section id=\"bursts\"><h2>Bursts</h2>");
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
    h.push_str("<table><tr><th>burst</th><th>start (sample)</th><th>time (s)</th><th>sync</th><th>CFO (Hz)</th><th>power (dBFS)</th><th>SNR (dB)</th><th>RMS EVM (%)</th><th>MER (dB)</th><th>symbol errors</th><th>warnings</th><th>plots</th></tr>");
    const TABLE_ROWS: usize = 2000;
    let traced: std::collections::BTreeMap<usize, &Vec<String>> =
        files.iter().map(|(k, f)| (*k, f)).collect();
    for b in report.bursts.iter().take(TABLE_ROWS) {
        let link = if traced.contains_key(&b.index) {
            format!("<a href=\"#burst-{0}\">plots</a>", b.index)
        } else {
            "—".into()
        };
        let _ = write!(
            h,
            "<tr><td class=\"num\">#{}</td><td class=\"num\">{}</td><td class=\"num\">{:.6}</td><td class=\"num\">{:.3}</td><td class=\"num\">{:+.1}</td><td class=\"num\">{}</td><td class=\"num\">{:.1}</td><td class=\"num\">{:.2}</td><td class=\"num\">{}</td><td class=\"num\">{}</td><td>{}</td><td>{link}</td></tr>",
            b.index,
            b.start_sample,
            b.start_sample as f64 / i.sample_rate_hz,
            b.sync_metric,
            b.cfo_hz,
            fmt_opt(b.received_power_dbfs, 1, ""),
            b.channel.snr_db,
            b.metrics.evm_rms_percent,
            fmt_opt(b.metrics.mer_db, 2, ""),
            b.metrics.ser.map_or("—".into(), |r| r.errors.to_string()),
            esc_html(
                &b.warnings
                    .iter()
                    .map(|w| w.code.to_string())
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        );
    }
    h.push_str("</table>");
    if report.bursts.len() > TABLE_ROWS {
        let _ = write!(
            h,
            "<p>… {} more bursts in the JSON report.</p>",
            report.bursts.len() - TABLE_ROWS
        );
    }
    h.push_str("</section>");
    for (k, names) in files {
        let _ = write!(h, "<section id=\"burst-{k}\"><h2>Burst #{k}</h2>");
        if let Some(b) = report.bursts.get(*k) {
            let _ = write!(
                h,
                "<p>start sample {}, CFO {:+.1} Hz, SNR {:.1} dB, {} Nf = {} Nb = {} Δ = {}, RMS EVM {:.2} %, MER {}.</p>",
                b.start_sample,
                b.cfo_hz,
                b.channel.snr_db,
                esc_html(&b.equaliser.kind),
                b.equaliser.feedforward_taps,
                b.equaliser.feedback_taps,
                b.equaliser.decision_delay,
                b.metrics.evm_rms_percent,
                esc_html(&fmt_opt(b.metrics.mer_db, 2, "dB"))
            );
        }
        for n in names {
            h.push_str(&img(n, n));
        }
        h.push_str("</section>");
    }
    h.push_str("</body></html>\n");
    h
}

/// The natural pixel size of each plot file (as the plot functions draw it).
fn svg_size_of(name: &str) -> (f64, f64) {
    let kind = name
        .rsplit('-')
        .next()
        .unwrap_or(name)
        .trim_end_matches(".svg");
    match kind {
        "constellation" => (H + 60.0, H + 40.0),
        "eye" => (1000.0, H),
        "taps" => (W, H + 360.0),
        "response" => (W, H + 600.0),
        "trend" => (W, 6.0 * 230.0),
        _ => (W, H),
    }
}

/// Write the capture views, the trend, the plots of every burst that carries a
/// trace, `report.json` and `index.html` into `dir` (created if needed).
/// `report_json` is the report as written (linked from the page). Returns the
/// paths written.
pub fn write_plots(
    report: &Report,
    ideal: &[Cf32],
    threshold: f64,
    dir: &Path,
    report_json: &[u8],
) -> Result<Vec<PathBuf>, WriteError> {
    std::fs::create_dir_all(dir).map_err(|source| WriteError::Io {
        path: dir.to_path_buf(),
        source,
    })?;
    let mut written = Vec::new();
    let put = |name: &str, body: &[u8], written: &mut Vec<PathBuf>| -> Result<(), WriteError> {
        let p = dir.join(name);
        write_atomic(&p, body)?;
        written.push(p);
        Ok(())
    };
    let mut capture_files = Vec::new();
    if let Some(v) = &report.capture {
        put(
            "psd.svg",
            psd_svg(v, &mask_lines(report)).as_bytes(),
            &mut written,
        )?;
        put(
            "power.svg",
            power_svg(v, &burst_marks(report)).as_bytes(),
            &mut written,
        )?;
        capture_files.push("psd.svg".to_string());
        capture_files.push("power.svg".to_string());
    }
    if report.bursts.len() >= 2 {
        put("trend.svg", trend_svg(report, 3).as_bytes(), &mut written)?;
        capture_files.push("trend.svg".to_string());
    }
    let rs = symbol_rate_hz(report);
    let mut index = Vec::new();
    for b in report.bursts.iter().filter(|b| b.trace.is_some()) {
        let k = b.index;
        let plots = [
            (
                format!("burst-{k}-constellation.svg"),
                constellation_svg(b, ideal),
            ),
            (format!("burst-{k}-eye.svg"), eye_svg(b, ideal)),
            (format!("burst-{k}-taps.svg"), taps_svg(b)),
            (format!("burst-{k}-response.svg"), response_svg(b, rs)),
            (format!("burst-{k}-evm.svg"), evm_svg(b)),
            (format!("burst-{k}-sync.svg"), sync_svg(b, threshold)),
        ];
        let mut names = Vec::new();
        for (name, svg) in plots {
            put(&name, svg.as_bytes(), &mut written)?;
            names.push(name);
        }
        index.push((k, names));
    }
    put("report.json", report_json, &mut written)?;
    put(
        "index.html",
        index_html(report, &index, &capture_files, "report.json").as_bytes(),
        &mut written,
    )?;
    Ok(written)
}

#[cfg(test)]
mod tests {
    use super::*;

    // A pure delay of d symbols, h[k] = δ[k − d], has H(f) = e^{−j2πfd}: unit
    // magnitude and group delay exactly d at every frequency (definition of
    // group delay, −dφ/(2π df)). Also checked against a finite difference of
    // the unwrapped phase of a dispersive channel (slow, obviously correct).
    #[test]
    fn the_group_delay_of_a_pure_delay_equals_the_delay() {
        for d in [0usize, 1, 3] {
            let mut taps = vec![Cf64::new(0.0, 0.0); 5];
            taps[d] = Cf64::new(0.7, -0.2);
            for g in 0..=64 {
                let f = g as f64 / 64.0 - 0.5;
                let (s, dd) = response_at(&taps, 0.0, f);
                assert!((s.norm() - taps[d].norm()).abs() < 1e-12);
                assert!((group_delay(s, dd) - d as f64).abs() < 1e-9, "d {d} f {f}");
            }
            // Tap indexing from −P: the same delay counted from −2 reads d − 2.
            let (s, dd) = response_at(&taps, -2.0, 0.1);
            assert!((group_delay(s, dd) - (d as f64 - 2.0)).abs() < 1e-9);
        }
        let taps = [
            Cf64::new(0.2, 0.1),
            Cf64::new(1.0, 0.0),
            Cf64::new(0.4, -0.3),
        ];
        let phase = |f: f64| response_at(&taps, -1.0, f).0.arg();
        for g in 1..40 {
            let f = g as f64 / 40.0 - 0.5;
            let e = 1e-6;
            let mut dp = phase(f + e) - phase(f - e);
            if dp > PI {
                dp -= 2.0 * PI;
            } else if dp < -PI {
                dp += 2.0 * PI;
            }
            let numeric = -dp / (2.0 * PI * 2.0 * e);
            let (s, dd) = response_at(&taps, -1.0, f);
            assert!((group_delay(s, dd) - numeric).abs() < 1e-5, "f {f}");
        }
    }

    #[test]
    fn eye_opening_is_one_on_the_levels_and_shrinks_with_spread() {
        let levels = [-3.0, -1.0, 1.0, 3.0];
        assert_eq!(
            eye_opening(&[-3.0, -1.0, 1.0, 3.0, 1.0], &levels),
            Some(1.0)
        );
        let o = eye_opening(&[-3.0, -1.2, -0.8, 1.0, 3.0], &levels).unwrap();
        assert!((o - 0.9).abs() < 1e-12, "{o}");
        assert_eq!(eye_opening(&[1.0], &[1.0]), None);
    }

    use crate::report::svg::check;

    fn sample_report(name: &str, threads: usize) -> Report {
        let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-captures");
        let cap = root.join(name);
        let profile =
            crate::profile::load_profile(&root.join(format!("{name}.profile.json"))).unwrap();
        let opts = crate::analyse::AnalyseOptions {
            skip_input_hash: true,
            ..Default::default()
        };
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap()
            .install(|| crate::analyse::analyse_capture(&cap, &profile, &opts).unwrap())
    }

    fn every_plot(r: &Report) -> Vec<(String, String)> {
        let ideal = crate::Constellation::new(crate::Modulation::Qam16);
        let mut out = vec![
            (
                "psd".to_string(),
                psd_svg(r.capture.as_ref().unwrap(), &mask_lines(r)),
            ),
            (
                "power".to_string(),
                power_svg(r.capture.as_ref().unwrap(), &burst_marks(r)),
            ),
            ("trend".to_string(), trend_svg(r, 3)),
        ];
        for b in r.bursts.iter().filter(|b| b.trace.is_some()) {
            out.push((
                format!("constellation {}", b.index),
                constellation_svg(b, ideal.points()),
            ));
            out.push((format!("eye {}", b.index), eye_svg(b, ideal.points())));
            out.push((format!("taps {}", b.index), taps_svg(b)));
            out.push((
                format!("response {}", b.index),
                response_svg(b, symbol_rate_hz(r)),
            ));
            out.push((format!("evm {}", b.index), evm_svg(b)));
            out.push((format!("sync {}", b.index), sync_svg(b, 0.5)));
        }
        out
    }

    // Issue #20: every drawn mark lies inside its frame or is clipped, and
    // every axis names its unit; for every plot of two shipped samples (one
    // with a strong multipath fade and decision errors).
    #[test]
    fn every_plot_of_the_shipped_samples_clips_its_marks_and_labels_its_axes_with_units() {
        for name in ["crane-fade.ci16", "crane-field-containers.ci16"] {
            let r = sample_report(name, 2);
            let plots = every_plot(&r);
            assert!(plots.len() >= 3 + 6 * r.bursts.len().min(1));
            for (what, svg) in &plots {
                check::marks_are_clipped(svg).unwrap_or_else(|e| panic!("{name} {what}: {e}"));
                check::axes_have_units(svg).unwrap_or_else(|e| panic!("{name} {what}: {e}"));
            }
            // 1024 or more payload symbols per burst: the constellation is a density.
            let c = &plots
                .iter()
                .find(|p| p.0.starts_with("constellation"))
                .unwrap()
                .1;
            assert!(c.contains("class=\"symbol-density\""));
            let t = &plots.iter().find(|p| p.0 == "taps 0").unwrap().1;
            assert!(
                t.contains("noise variance σ²") && t.contains("tap estimation floor σ²/N, N = 64")
            );
            let h = index_html(&r, &[], &["psd.svg".into()], "report.json");
            for external in ["<script", "http://", "https://", "@import", "url("] {
                assert!(!h.contains(external), "{external}");
            }
        }
    }

    // Issue #20: plots are byte-identical for the same input whatever the
    // thread count of the analysis.
    #[test]
    fn plots_are_byte_identical_for_one_and_two_analysis_threads() {
        let a = every_plot(&sample_report("crane-field-containers.ci16", 1));
        let b = every_plot(&sample_report("crane-field-containers.ci16", 2));
        assert_eq!(a, b);
    }
}
