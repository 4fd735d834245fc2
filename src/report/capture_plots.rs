//! Capture plots: the spectrum (Welch PSD in dBFS/Hz around the centre
//! frequency, with the occupied bandwidth, the spurs and an optional spectral
//! mask) and the power over the whole capture (min/mean/max envelope) with the
//! detected bursts marked.
//!
//! Takes in: [`CaptureViews`] (from `info` or from a report's `capture` key),
//! burst extents and mask segments — plain data, never samples. Gives out: SVG
//! documents (see [`super::svg`]). Byte-identical output for the same input.

use super::svg::{palette, Chart, Range};
use crate::capture::views::CaptureViews;

const W: f64 = 760.0;
const H: f64 = 420.0;

/// A detected burst as the power plot marks it: a band from `first_sample`
/// to `end_sample` labelled `#index`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BurstMark {
    /// Burst number in the report.
    pub index: usize,
    /// First sample of the burst's frame.
    pub first_sample: f64,
    /// One past its last sample.
    pub end_sample: f64,
}

/// One segment of a spectral mask: for offsets `from ≤ |f − fc| ≤ to` (Hz) the
/// PSD may not exceed its own peak by more than `max_db_rel_peak` (a negative number).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MaskLine {
    /// Lower end of the offset range, Hz (≥ 0).
    pub from_hz: f64,
    /// Upper end of the offset range, Hz.
    pub to_hz: f64,
    /// Largest level allowed, dB relative to the PSD's peak.
    pub max_db_rel_peak: f64,
}

/// A unit for an axis: divide values by `scale`, print `name`.
fn unit_for(span: f64, base: &str) -> (f64, String) {
    if base != "Hz" && base != "s" {
        return (1.0, base.to_string());
    }
    let a = span.abs();
    let (scale, prefix) = if base == "Hz" {
        if a >= 2e6 {
            (1e6, "M")
        } else if a >= 2e3 {
            (1e3, "k")
        } else {
            (1.0, "")
        }
    } else if a >= 2.0 {
        (1.0, "")
    } else if a >= 2e-3 {
        (1e-3, "m")
    } else {
        (1e-6, "µ")
    };
    (scale, format!("{prefix}{base}"))
}

/// Format a frequency in Hz with a unit chosen for its size.
pub fn fmt_hz(v: f64) -> String {
    let a = v.abs();
    let (x, u) = if a >= 1e6 {
        (v / 1e6, "MHz")
    } else if a >= 1e3 {
        (v / 1e3, "kHz")
    } else {
        (v, "Hz")
    };
    let s = match u {
        "MHz" => format!("{x:.6}"),
        "kHz" => format!("{x:.3}"),
        _ => format!("{x:.1}"),
    };
    let s = if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.')
    } else {
        &s
    };
    format!("{s} {u}")
}

/// The PSD plot. Without a sample rate the frequency axis is in cycles per
/// sample (the views say which); the mask is drawn only with a sample rate.
pub fn psd_svg(v: &CaptureViews, mask: &[MaskLine]) -> String {
    let Some(psd) = &v.psd else {
        let mut c = Chart::new(
            W,
            H,
            "Spectrum (Welch PSD)",
            "frequency offset (no spectrum: fewer than 2 samples)",
            "PSD (dBFS/Hz)",
            Range { lo: -0.5, hi: 0.5 },
            Range {
                lo: -120.0,
                hi: 0.0,
            },
        );
        c.note("the capture is too short for a spectrum");
        return c.finish();
    };
    let in_hz = psd.frequency_unit == "Hz";
    let fmax = psd
        .points
        .iter()
        .map(|p| p[0].abs())
        .fold(0.0f64, f64::max)
        .max(psd.resolution / 2.0);
    let (scale, unit) = unit_for(fmax, if in_hz { "Hz" } else { "cycles/sample" });
    let x_label = match (in_hz, v.center_freq_hz) {
        (true, Some(fc)) => format!("frequency offset from {} ({unit})", fmt_hz(fc)),
        (true, None) => format!("frequency offset, centre unknown ({unit})"),
        (false, _) => "frequency (cycles/sample; no sample rate given)".to_string(),
    };
    // Level axis: from a little under the floor (the 2nd percentile of the
    // point means) to a little above the peak.
    let mut levels: Vec<f64> = psd
        .points
        .iter()
        .map(|p| p[1])
        .filter(|l| *l > crate::capture::views::ZERO_POWER_DB)
        .collect();
    levels.sort_by(|a, b| a.total_cmp(b));
    let floor = levels
        .get(levels.len() / 50)
        .copied()
        .unwrap_or(psd.peak_level - 60.0);
    let lo = ((floor - 10.0) / 10.0).floor() * 10.0;
    let hi = ((psd.peak_level + 6.0) / 10.0).ceil() * 10.0;
    let y = Range {
        lo: lo.min(hi - 20.0),
        hi,
    };
    let x = Range {
        lo: -fmax / scale,
        hi: fmax / scale,
    };
    let mut c = Chart::new(
        W,
        H,
        "Spectrum (Welch PSD, Hann window)",
        &x_label,
        &format!("PSD ({})", psd.level_unit),
        x,
        y,
    );
    if let (Some(a), Some(b)) = (psd.obw_lower, psd.obw_upper) {
        c.bands_with(&[(a / scale, b / scale)], palette::AMBER, 0.13, "obw");
        c.vline(a / scale, palette::AMBER, "", "obw-edge");
        c.vline(
            b / scale,
            palette::AMBER,
            &format!(
                "{:.0} % OBW {}",
                100.0 * psd.obw_fraction,
                if in_hz {
                    fmt_hz(b - a)
                } else {
                    format!("{:.4} cyc/sample", b - a)
                }
            ),
            "obw-edge",
        );
    }
    let xs: Vec<f64> = psd.points.iter().map(|p| p[0] / scale).collect();
    if psd.bins_per_point > 1 {
        let peaks: Vec<(f64, f64)> = xs
            .iter()
            .zip(&psd.points)
            .map(|(&x, p)| (x, p[2]))
            .collect();
        c.line(&peaks, palette::SLATE, 1.0, "psd-largest-bin");
    }
    let means: Vec<(f64, f64)> = xs
        .iter()
        .zip(&psd.points)
        .map(|(&x, p)| (x, p[1]))
        .collect();
    c.line(&means, palette::TEAL, 1.8, "psd");
    if in_hz && !mask.is_empty() {
        for (side, sign) in [("upper", 1.0), ("lower", -1.0)] {
            let mut pts = Vec::new();
            for m in mask {
                let level = psd.peak_level + m.max_db_rel_peak;
                pts.push((sign * m.from_hz / scale, level));
                pts.push((sign * m.to_hz / scale, level));
                pts.push((f64::NAN, f64::NAN));
            }
            c.dashed_line(&pts, palette::BRICK, 2.0, &format!("mask-{side}"));
        }
    }
    let spur_pts: Vec<(f64, f64)> = v
        .spurs
        .iter()
        .map(|s| (s.frequency / scale, s.level))
        .collect();
    c.crosses(&spur_pts, palette::BRICK, 4.0, "spurs");
    for s in v.spurs.iter().take(8) {
        let f = if in_hz {
            format!("{:+.1} {unit}", s.frequency / scale)
        } else {
            format!("{:+.4}", s.frequency)
        };
        c.label(
            s.frequency / scale,
            s.level,
            &format!("{f}: {:.1} dBFS", s.power_dbfs),
            palette::BRICK,
        );
    }
    let mut legend = vec![(palette::TEAL, "PSD (mean per point)")];
    if psd.bins_per_point > 1 {
        legend.push((palette::SLATE, "largest bin"));
    }
    legend.push((palette::AMBER, "occupied bandwidth"));
    legend.push((
        palette::BRICK,
        if mask.is_empty() {
            "spurs"
        } else {
            "spurs, mask"
        },
    ));
    c.legend(&legend);
    c.note(&format!(
        "{} bins, {} segments, RBW {}",
        psd.fft_len,
        psd.segments_averaged,
        if in_hz {
            fmt_hz(psd.enbw)
        } else {
            format!("{:.2e} cyc/sample", psd.enbw)
        }
    ));
    c.finish()
}

/// The power-over-time plot of the whole capture, bursts marked.
pub fn power_svg(v: &CaptureViews, bursts: &[BurstMark]) -> String {
    let fs = v.sample_rate_hz;
    let total = v.power.samples.max(1) as f64;
    let (scale, unit, per) = match fs {
        Some(r) => {
            let (s, u) = unit_for(total / r, "s");
            (s, u, 1.0 / r)
        }
        None => (1.0, "samples".to_string(), 1.0),
    };
    let t = |sample: f64| sample * per / scale;
    let pts = &v.power.points;
    let lo_all = pts
        .iter()
        .map(|p| p[2])
        .filter(|l| *l > crate::capture::views::ZERO_POWER_DB)
        .fold(f64::INFINITY, f64::min);
    let hi_all = pts.iter().map(|p| p[3]).fold(f64::NEG_INFINITY, f64::max);
    let (lo, hi) = if lo_all.is_finite() && hi_all.is_finite() {
        (
            ((lo_all - 5.0) / 10.0).floor() * 10.0,
            ((hi_all + 8.0) / 10.0).ceil() * 10.0,
        )
    } else {
        (-100.0, 0.0)
    };
    let mut c = Chart::new(
        W,
        H,
        "Power over time (whole capture)",
        &format!("time from the first sample ({unit})"),
        "power (dBFS)",
        Range {
            lo: 0.0,
            hi: t(total),
        },
        Range {
            lo: lo.max(hi - 120.0),
            hi: hi.max(lo + 10.0),
        },
    );
    let spans: Vec<(f64, f64)> = bursts
        .iter()
        .map(|b| (t(b.first_sample), t(b.end_sample)))
        .collect();
    c.bands_with(&spans, palette::PLUM, 0.14, "bursts");
    // Each point spans from its first sample to the next point's.
    let mut xs = Vec::with_capacity(2 * pts.len());
    let (mut lo_v, mut hi_v, mut mean) = (Vec::new(), Vec::new(), Vec::new());
    for (i, p) in pts.iter().enumerate() {
        let end = pts.get(i + 1).map_or(total, |q| q[0]);
        for x in [p[0], end] {
            xs.push(t(x));
            lo_v.push(p[2]);
            hi_v.push(p[3]);
            mean.push((t(x), p[1]));
        }
    }
    c.area(&xs, &lo_v, &hi_v, palette::TEAL, 0.28, "power-range");
    c.line(&mean, palette::TEAL, 1.4, "power-mean");
    let every = bursts.len().div_ceil(40).max(1);
    for b in bursts.iter().step_by(every) {
        c.vline(
            t(b.first_sample),
            palette::PLUM,
            &format!("#{}", b.index),
            "burst-start",
        );
    }
    c.legend(&[
        (palette::TEAL, "mean power"),
        (palette::TEAL, "lowest…highest block (shaded)"),
        (palette::PLUM, "detected burst"),
    ]);
    c.note(&format!(
        "blocks of {} samples{}",
        v.power.block_samples,
        if every > 1 {
            format!("; every {every}th burst labelled")
        } else {
            String::new()
        }
    ));
    c.finish()
}

/// Escape text for HTML.
pub fn esc_html(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// The page style shared by the `info` and `analyse` index pages: one
/// self-contained stylesheet, no external fonts or scripts; images at their
/// natural size.
pub fn page_style() -> String {
    format!(
        "body{{background:{paper};color:{ink};font-family:sans-serif;font-size:15px;line-height:1.4;margin:1.5em 2em;max-width:1600px}}\
h1{{font-size:1.45em;margin:.2em 0}}h2{{font-size:1.2em;margin:1.2em 0 .4em}}h3{{font-size:1.05em}}\
table{{border-collapse:collapse;margin:.4em 0}}th,td{{padding:.25em .8em;border-bottom:1px solid {grid};text-align:left;vertical-align:top}}\
th{{font-weight:600}}td.num{{text-align:right;font-variant-numeric:tabular-nums}}code{{font-size:.95em}}\
.badge{{display:inline-block;padding:.15em .7em;border-radius:.3em;color:#fff;font-weight:600}}\
.pass{{background:{teal}}}.fail{{background:{brick}}}.none{{background:{amber}}}\
.bad{{color:{brick};font-weight:600}}.ok{{color:{teal}}}\
section{{border-top:2px solid {grid};margin-top:1.4em;padding-top:.3em}}\
figure{{display:inline-block;margin:.4em .8em .4em 0;vertical-align:top}}figure img{{display:block;border:1px solid {grid};max-width:none}}\
figcaption{{font-size:.9em;margin-top:.2em}}.warn{{color:{brick}}}",
        paper = super::svg::palette::PAPER,
        ink = super::svg::palette::INK,
        grid = super::svg::palette::GRID,
        teal = super::svg::palette::TEAL,
        brick = super::svg::palette::BRICK,
        amber = super::svg::palette::AMBER,
    )
}

/// The spur table rows (`<tr>`…) of capture views.
pub fn spur_rows(v: &CaptureViews) -> String {
    let in_hz = v.psd.as_ref().is_some_and(|p| p.frequency_unit == "Hz");
    let unit = v.psd.as_ref().map_or("dBFS/Hz", |p| p.level_unit.as_str());
    v.spurs
        .iter()
        .map(|s| {
            let f = if in_hz {
                fmt_hz(s.frequency)
            } else {
                format!("{:+.5} cycles/sample", s.frequency)
            };
            format!(
                "<tr><td class=\"num\">{}</td><td class=\"num\">{:.1} dBFS</td><td class=\"num\">{:.1} {}</td><td class=\"num\">{:.1} dB</td></tr>",
                esc_html(&f),
                s.power_dbfs,
                s.level,
                esc_html(unit),
                s.above_floor_db
            )
        })
        .collect()
}

/// The offline page `info --plots` writes: the capture's figures, its spurs
/// and the two capture plots.
pub fn info_index_html(r: &crate::capture::stats::InfoReport) -> String {
    use std::fmt::Write as _;
    let opt = |v: Option<f64>, d: usize, u: &str| {
        v.map(|x| format!("{x:.d$} {u}"))
            .unwrap_or_else(|| "unknown".into())
    };
    let mut h = String::new();
    let _ = write!(
        h,
        "<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>iqaudit info · {p}</title><style>{css}</style></head><body>\
<h1>iqaudit info · {p}</h1><p>Written by iqaudit {ver}. The figures below come from <code>iqaudit info --json</code> (schema {schema}).</p><table>",
        p = esc_html(&r.path),
        css = page_style(),
        ver = esc_html(&r.tool.version),
        schema = esc_html(r.schema)
    );
    let fmt_src = match r.format_source {
        crate::capture::FormatSource::Option => "the --format option",
        crate::capture::FormatSource::Sigmf => "the SigMF sidecar",
        crate::capture::FormatSource::WavHeader => "the WAV header",
        crate::capture::FormatSource::Extension => "the file extension",
        crate::capture::FormatSource::Memory => "memory",
    };
    let rows = [
        ("file", format!("{} ({} bytes)", r.path, r.file_size_bytes)),
        ("format", format!("{} (from {fmt_src})", r.format)),
        ("samples", r.samples.to_string()),
        (
            "sample rate",
            r.sample_rate_hz
                .map(fmt_hz)
                .unwrap_or_else(|| "unknown".into()),
        ),
        (
            "centre frequency",
            r.center_freq_hz
                .map(fmt_hz)
                .unwrap_or_else(|| "unknown".into()),
        ),
        ("duration", opt(r.duration_s, 6, "s")),
        ("mean power", opt(r.mean_power_dbfs, 2, "dBFS")),
        ("peak power", opt(r.peak_power_dbfs, 2, "dBFS")),
        (
            "DC offset",
            format!(
                "I {:+.6}, Q {:+.6} ({} re mean power)",
                r.dc_i,
                r.dc_q,
                opt(r.dc_relative_db, 1, "dB")
            ),
        ),
        match r.above_full_scale_samples {
            Some(n) => ("above full scale (float)", n.to_string()),
            None => (
                "clipped",
                format!("{} ({:.4} %)", r.clipped_samples, r.clipped_percent),
            ),
        },
        (
            "occupied bandwidth",
            match r.obw_hz {
                Some(b) => format!(
                    "{} ({:.0} % of the power)",
                    fmt_hz(b),
                    100.0 * r.obw_fraction
                ),
                None => opt(r.obw_fraction_of_rate, 5, "× sample rate"),
            },
        ),
    ];
    for (k, v) in rows {
        let _ = write!(
            h,
            "<tr><th>{}</th><td>{}</td></tr>",
            esc_html(k),
            esc_html(&v)
        );
    }
    h.push_str("</table>");
    for w in &r.warnings {
        let _ = write!(
            h,
            "<p class=\"warn\">warning ({}): {}</p>",
            esc_html(w.kind),
            esc_html(&w.message)
        );
    }
    let _ = write!(
        h,
        "<h2>Spurs</h2><p>Narrow peaks at least {:.0} dB above the local floor (median of the bins 4 to 32 bins away).</p>",
        r.views.spur_margin_db
    );
    if r.views.spurs.is_empty() {
        h.push_str("<p>None.</p>");
    } else {
        let _ = write!(
            h,
            "<table><tr><th>frequency offset</th><th>power</th><th>peak level</th><th>above floor</th></tr>{}</table>",
            spur_rows(&r.views)
        );
    }
    h.push_str(
        "<section><h2>Capture views</h2>\
<figure><img src=\"psd.svg\" alt=\"spectrum\" width=\"760\" height=\"420\"><figcaption><a href=\"psd.svg\">psd.svg</a></figcaption></figure>\
<figure><img src=\"power.svg\" alt=\"power over time\" width=\"760\" height=\"420\"><figcaption><a href=\"power.svg\">power.svg</a></figcaption></figure></section></body></html>\n",
    );
    h
}

/// Write `psd.svg`, `power.svg` and `index.html` for `info --plots DIR`
/// (`dir` is created if needed). Returns the paths written.
pub fn write_info_plots(
    r: &crate::capture::stats::InfoReport,
    bursts: &[BurstMark],
    mask: &[MaskLine],
    dir: &std::path::Path,
) -> Result<Vec<std::path::PathBuf>, crate::atomic::WriteError> {
    std::fs::create_dir_all(dir).map_err(|source| crate::atomic::WriteError::Io {
        path: dir.to_path_buf(),
        source,
    })?;
    let mut out = Vec::new();
    for (name, body) in [
        ("psd.svg", psd_svg(&r.views, mask)),
        ("power.svg", power_svg(&r.views, bursts)),
        ("index.html", info_index_html(r)),
    ] {
        let p = dir.join(name);
        crate::atomic::write_atomic(&p, body.as_bytes())?;
        out.push(p);
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::capture::stats::{capture_stats, info_report, StatsOptions};
    use crate::capture::views::capture_views;
    use crate::capture::{encode_raw, Capture, SampleFormat};
    use crate::report::svg::check;
    use crate::Cf32;

    fn views(fs: Option<f64>) -> CaptureViews {
        // A tone, a burst of stronger noise-like signal, and silence.
        let x: Vec<Cf32> = (0..50_000)
            .map(|t| {
                let a = 2.0 * std::f64::consts::PI * 0.1 * t as f64;
                let g = if (10_000..20_000).contains(&t) {
                    0.3
                } else {
                    0.01
                };
                let n = ((t * 7919) % 1000) as f32 / 1000.0 - 0.5;
                Cf32::new(
                    (g * a.cos()) as f32 + 0.001 * n,
                    (g * a.sin()) as f32 - 0.001 * n,
                )
            })
            .collect();
        let mut b = Vec::new();
        encode_raw(&x, SampleFormat::Cf32Le, &mut b);
        let c = Capture::from_bytes(b, SampleFormat::Cf32Le);
        let st = capture_stats(&c, &StatsOptions::default(), &|_| {}).unwrap();
        capture_views(&st, fs, fs.map(|_| 433.92e6), 0.99)
    }

    #[test]
    fn capture_plots_clip_every_mark_and_label_their_axes_with_units() {
        let mask = [MaskLine {
            from_hz: 50e3,
            to_hz: 400e3,
            max_db_rel_peak: -30.0,
        }];
        let marks = [BurstMark {
            index: 0,
            first_sample: 10_000.0,
            end_sample: 20_000.0,
        }];
        for fs in [Some(1e6), None] {
            let v = views(fs);
            for svg in [psd_svg(&v, &mask), psd_svg(&v, &[]), power_svg(&v, &marks)] {
                check::marks_are_clipped(&svg).unwrap();
                check::axes_have_units(&svg).unwrap();
            }
        }
        let v = views(Some(1e6));
        let p = psd_svg(&v, &mask);
        assert!(p.contains("frequency offset from 433.92 MHz (kHz)"), "{p}");
        assert!(p.contains("PSD (dBFS/Hz)") && p.contains("class=\"mask-upper\""));
        let w = power_svg(&v, &marks);
        assert!(w.contains(">#0<") && w.contains("time from the first sample (ms)"));
        assert!(psd_svg(&views(None), &[]).contains("cycles/sample"));
    }

    #[test]
    fn capture_plots_are_byte_identical_for_one_and_three_threads() {
        let run = |n| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(n)
                .build()
                .unwrap()
                .install(|| {
                    let v = views(Some(2e6));
                    (psd_svg(&v, &[]), power_svg(&v, &[]))
                })
        };
        assert_eq!(run(1), run(3));
    }

    #[test]
    fn the_info_page_is_self_contained_and_lists_the_spurs() {
        let path = concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/sample-captures/bench-noise-floor.cf32"
        );
        let c = Capture::open(std::path::Path::new(path), &Default::default()).unwrap();
        let o = StatsOptions::default();
        let st = capture_stats(&c, &o, &|_| {}).unwrap();
        let r = info_report(&c, &st, &o);
        let h = info_index_html(&r);
        assert!(h.contains("125 kHz") && h.contains("869.525 MHz"), "{h}");
        for external in ["<script", "http://", "https://", "@import", "url("] {
            assert!(!h.contains(external), "{external}");
        }
        assert!(
            fmt_hz(1e6) == "1 MHz"
                && fmt_hz(366.2109) == "366.2 Hz"
                && fmt_hz(-125e3) == "-125 kHz"
        );
    }
}
