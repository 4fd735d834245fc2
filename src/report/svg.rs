//! A small SVG chart writer for the report plots.
//!
//! Takes data in plot units and gives a self-contained SVG document (no external
//! fonts, scripts or stylesheets), so the plots open offline in any browser. The
//! look is iqaudit's own: warm paper background, slate axes, a teal/amber/brick
//! palette, and a thin frame around the plotting area.

use std::fmt::Write as _;

/// Colours used by every plot.
pub mod palette {
    /// Page background.
    pub const PAPER: &str = "#fbfaf6";
    /// Axes, ticks and labels.
    pub const INK: &str = "#33404d";
    /// Grid lines.
    pub const GRID: &str = "#e4e1d8";
    /// The main data series.
    pub const TEAL: &str = "#0f7173";
    /// Secondary series / pre-cursor.
    pub const AMBER: &str = "#d89a00";
    /// Errors and warnings.
    pub const BRICK: &str = "#b4432d";
    /// Reference marks (ideal points, main tap).
    pub const PLUM: &str = "#5b3f8c";
}

/// Linear axis range.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Range {
    /// Lower end.
    pub lo: f64,
    /// Upper end.
    pub hi: f64,
}

impl Range {
    /// A range covering `values` with a margin, never empty; `fallback` when no finite value.
    pub fn covering(values: impl IntoIterator<Item = f64>, margin: f64, fallback: Range) -> Range {
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        for v in values.into_iter().filter(|v| v.is_finite()) {
            lo = lo.min(v);
            hi = hi.max(v);
        }
        if !lo.is_finite() {
            return fallback;
        }
        if hi - lo < 1e-12 {
            lo -= 0.5;
            hi += 0.5;
        }
        let m = (hi - lo) * margin;
        Range {
            lo: lo - m,
            hi: hi + m,
        }
    }

    /// "Nice" tick positions (1-2-5 steps), about `n` of them.
    pub fn ticks(&self, n: usize) -> Vec<f64> {
        let span = self.hi - self.lo;
        if !(span.is_finite() && span > 0.0) || n == 0 {
            return Vec::new();
        }
        let raw = span / n as f64;
        let mag = 10f64.powf(raw.log10().floor());
        let step = [1.0, 2.0, 5.0, 10.0]
            .iter()
            .map(|m| m * mag)
            .find(|s| *s >= raw)
            .unwrap_or(10.0 * mag);
        let first = (self.lo / step).ceil() as i64;
        let last = (self.hi / step).floor() as i64;
        (first..=last).map(|i| i as f64 * step).collect()
    }
}

/// A chart under construction: a frame with two linear axes.
pub struct Chart {
    width: f64,
    height: f64,
    left: f64,
    right: f64,
    top: f64,
    bottom: f64,
    x: Range,
    y: Range,
    body: String,
}

fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

fn fmt_tick(v: f64) -> String {
    if v == 0.0 {
        return "0".into();
    }
    let a = v.abs();
    if (1e-3..1e5).contains(&a) {
        let s = format!("{v:.3}");
        let s = s.trim_end_matches('0').trim_end_matches('.');
        s.to_string()
    } else {
        format!("{v:.1e}")
    }
}

impl Chart {
    /// A chart of `width`×`height` pixels with a title and axis labels.
    pub fn new(
        width: f64,
        height: f64,
        title: &str,
        x_label: &str,
        y_label: &str,
        x: Range,
        y: Range,
    ) -> Chart {
        let mut c = Chart {
            width,
            height,
            left: 64.0,
            right: 18.0,
            top: 52.0,
            bottom: 48.0,
            x,
            y,
            body: String::new(),
        };
        c.frame(title, x_label, y_label);
        c
    }

    fn px(&self, x: f64) -> f64 {
        let w = self.width - self.left - self.right;
        self.left + (x - self.x.lo) / (self.x.hi - self.x.lo) * w
    }

    fn py(&self, y: f64) -> f64 {
        let h = self.height - self.top - self.bottom;
        self.top + (self.y.hi - y) / (self.y.hi - self.y.lo) * h
    }

    fn frame(&mut self, title: &str, x_label: &str, y_label: &str) {
        let (x0, x1) = (self.left, self.width - self.right);
        let (y0, y1) = (self.top, self.height - self.bottom);
        let mut s = String::new();
        let _ = write!(
            s,
            r#"<rect x="0" y="0" width="{w}" height="{h}" fill="{paper}"/>"#,
            w = self.width,
            h = self.height,
            paper = palette::PAPER
        );
        for t in self.x.ticks(8) {
            let px = self.px(t);
            let _ = write!(
                s,
                r#"<line x1="{px:.1}" y1="{y0}" x2="{px:.1}" y2="{y1}" stroke="{g}" stroke-width="1"/><text x="{px:.1}" y="{ty:.1}" font-size="11" text-anchor="middle" fill="{ink}">{l}</text>"#,
                g = palette::GRID,
                ink = palette::INK,
                ty = y1 + 15.0,
                l = fmt_tick(t)
            );
        }
        for t in self.y.ticks(6) {
            let py = self.py(t);
            let _ = write!(
                s,
                r#"<line x1="{x0}" y1="{py:.1}" x2="{x1}" y2="{py:.1}" stroke="{g}" stroke-width="1"/><text x="{tx:.1}" y="{ty:.1}" font-size="11" text-anchor="end" fill="{ink}">{l}</text>"#,
                g = palette::GRID,
                ink = palette::INK,
                tx = x0 - 6.0,
                ty = py + 4.0,
                l = fmt_tick(t)
            );
        }
        let _ = write!(
            s,
            r#"<rect x="{x0}" y="{y0}" width="{w:.1}" height="{h:.1}" fill="none" stroke="{ink}" stroke-width="1.2"/>"#,
            w = x1 - x0,
            h = y1 - y0,
            ink = palette::INK
        );
        let _ = write!(
            s,
            r#"<text x="{x0}" y="22" font-size="15" font-weight="bold" fill="{ink}">{t}</text><text x="{cx:.1}" y="{by:.1}" font-size="12" text-anchor="middle" fill="{ink}">{xl}</text><text transform="translate(16 {cy:.1}) rotate(-90)" font-size="12" text-anchor="middle" fill="{ink}">{yl}</text>"#,
            ink = palette::INK,
            t = esc(title),
            cx = (x0 + x1) / 2.0,
            by = self.height - 10.0,
            cy = (y0 + y1) / 2.0,
            xl = esc(x_label),
            yl = esc(y_label)
        );
        self.body.push_str(&s);
    }

    /// A polyline through the points (non-finite points break the line).
    pub fn line(&mut self, pts: &[(f64, f64)], colour: &str, width: f64, class: &str) {
        let mut d = String::new();
        let mut pen_down = false;
        for &(x, y) in pts {
            if !(x.is_finite() && y.is_finite()) {
                pen_down = false;
                continue;
            }
            let y = y.clamp(self.y.lo, self.y.hi);
            let _ = write!(
                d,
                "{}{:.2},{:.2} ",
                if pen_down { "L" } else { "M" },
                self.px(x),
                self.py(y)
            );
            pen_down = true;
        }
        if !d.is_empty() {
            let _ = write!(
                self.body,
                r#"<path class="{class}" d="{d}" fill="none" stroke="{colour}" stroke-width="{width}"/>"#
            );
        }
    }

    /// Round markers.
    pub fn dots(&mut self, pts: &[(f64, f64)], colour: &str, radius: f64, class: &str) {
        let _ = write!(self.body, r#"<g class="{class}" fill="{colour}">"#);
        for &(x, y) in pts {
            if x.is_finite() && y.is_finite() {
                let _ = write!(
                    self.body,
                    r#"<circle cx="{:.2}" cy="{:.2}" r="{radius}"/>"#,
                    self.px(x),
                    self.py(y)
                );
            }
        }
        self.body.push_str("</g>");
    }

    /// Cross markers.
    pub fn crosses(&mut self, pts: &[(f64, f64)], colour: &str, size: f64, class: &str) {
        let _ = write!(
            self.body,
            r#"<g class="{class}" stroke="{colour}" stroke-width="1.6">"#
        );
        for &(x, y) in pts {
            if x.is_finite() && y.is_finite() {
                let (cx, cy) = (self.px(x), self.py(y));
                let _ = write!(
                    self.body,
                    r#"<path d="M{:.2},{:.2}L{:.2},{:.2}M{:.2},{:.2}L{:.2},{:.2}"/>"#,
                    cx - size,
                    cy - size,
                    cx + size,
                    cy + size,
                    cx - size,
                    cy + size,
                    cx + size,
                    cy - size
                );
            }
        }
        self.body.push_str("</g>");
    }

    /// Vertical stems from `base` to each point, with a head dot.
    pub fn stems(&mut self, pts: &[(f64, f64)], base: f64, colour: &str, class: &str) {
        let _ = write!(
            self.body,
            r#"<g class="{class}" stroke="{colour}" fill="{colour}" stroke-width="2">"#
        );
        for &(x, y) in pts {
            if x.is_finite() && y.is_finite() {
                let y = y.clamp(self.y.lo, self.y.hi);
                let (px, py, pb) = (
                    self.px(x),
                    self.py(y),
                    self.py(base.clamp(self.y.lo, self.y.hi)),
                );
                let _ = write!(
                    self.body,
                    r#"<line x1="{px:.2}" y1="{pb:.2}" x2="{px:.2}" y2="{py:.2}"/><circle cx="{px:.2}" cy="{py:.2}" r="4"/>"#
                );
            }
        }
        self.body.push_str("</g>");
    }

    /// Shaded vertical bands between x pairs.
    pub fn bands(&mut self, spans: &[(f64, f64)], colour: &str, class: &str) {
        let _ = write!(
            self.body,
            r#"<g class="{class}" fill="{colour}" fill-opacity="0.22">"#
        );
        for &(a, b) in spans {
            let (a, b) = (a.max(self.x.lo), b.min(self.x.hi));
            if b > a {
                let _ = write!(
                    self.body,
                    r#"<rect x="{:.2}" y="{:.2}" width="{:.2}" height="{:.2}"/>"#,
                    self.px(a),
                    self.top,
                    (self.px(b) - self.px(a)).max(1.0),
                    self.height - self.top - self.bottom
                );
            }
        }
        self.body.push_str("</g>");
    }

    /// A horizontal reference line with a label.
    pub fn hline(&mut self, y: f64, colour: &str, label: &str) {
        if !(y.is_finite() && y >= self.y.lo && y <= self.y.hi) {
            return;
        }
        let py = self.py(y);
        let _ = write!(
            self.body,
            r#"<line class="reference" x1="{x0}" y1="{py:.2}" x2="{x1}" y2="{py:.2}" stroke="{colour}" stroke-dasharray="6 4" stroke-width="1.2"/><text x="{tx}" y="{ty:.2}" font-size="11" text-anchor="end" fill="{colour}">{l}</text>"#,
            x0 = self.left,
            x1 = self.width - self.right,
            tx = self.width - self.right - 4.0,
            ty = py - 4.0,
            l = esc(label)
        );
    }

    /// A legend in one row under the title (between the title and the frame).
    pub fn legend(&mut self, entries: &[(&str, &str)]) {
        let mut x = self.left;
        let y = self.top - 10.0;
        for (colour, label) in entries {
            let _ = write!(
                self.body,
                r#"<rect x="{x}" y="{ry}" width="10" height="10" fill="{colour}"/><text x="{tx}" y="{y}" font-size="11" fill="{ink}">{l}</text>"#,
                ry = y - 9.0,
                tx = x + 14.0,
                ink = palette::INK,
                l = esc(label)
            );
            x += 14.0 + 6.5 * label.chars().count() as f64 + 16.0;
        }
    }

    /// The finished SVG document.
    pub fn finish(self) -> String {
        format!(
            r#"<?xml version="1.0" encoding="UTF-8"?>
<svg xmlns="http://www.w3.org/2000/svg" width="{w}" height="{h}" viewBox="0 0 {w} {h}" font-family="sans-serif">{b}</svg>
"#,
            w = self.width,
            h = self.height,
            b = self.body
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ticks_fall_on_one_two_five_steps_inside_the_range() {
        let r = Range { lo: -0.3, hi: 1.7 };
        let t = r.ticks(5);
        assert_eq!(t, vec![0.0, 0.5, 1.0, 1.5]);
        assert!(Range { lo: 1.0, hi: 1.0 }.ticks(5).is_empty());
    }

    #[test]
    fn titles_are_escaped_so_the_document_stays_well_formed() {
        let r = Range { lo: 0.0, hi: 1.0 };
        let c = Chart::new(200.0, 100.0, "a<b & c", "x", "y", r, r);
        let svg = c.finish();
        assert!(svg.contains("a&lt;b &amp; c"));
    }
}
