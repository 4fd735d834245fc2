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
    /// Quiet secondary lines (largest bin, phase).
    pub const SLATE: &str = "#8a96a3";
    /// A fourth series (group delay, combined response).
    pub const MOSS: &str = "#5e7d2b";
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
///
/// The chart keeps three layers: the grid and tick labels (drawn first), the
/// data marks (drawn inside a `<g clip-path>` bound to the frame, so nothing
/// plotted can spill over the axes, labels or legend), and the frame, titles
/// and legend (drawn last, outside the clip). A chart is either a whole SVG
/// document ([`Chart::finish`]) or one panel of a [`Figure`].
pub struct Chart {
    width: f64,
    height: f64,
    ox: f64,
    oy: f64,
    clip_id: String,
    left: f64,
    right: f64,
    top: f64,
    bottom: f64,
    x: Range,
    y: Range,
    under: String,
    marks: String,
    over: String,
    legend_x: f64,
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

/// The SVG document around `body` (`width`×`height` pixels, no external resources).
fn document(width: f64, height: f64, body: &str) -> String {
    format!(
        r#"<?xml version="1.0" encoding="UTF-8"?>
<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" viewBox="0 0 {width} {height}" font-family="sans-serif"><rect x="0" y="0" width="{width}" height="{height}" fill="{paper}"/>{body}</svg>
"#,
        paper = palette::PAPER
    )
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
        Chart::panel(0.0, 0.0, 0, width, height, title, x_label, y_label, x, y)
    }

    /// A panel of a [`Figure`]: placed at (`ox`, `oy`), number `k` in the figure
    /// (it names the panel's clip path).
    #[allow(clippy::too_many_arguments)]
    pub fn panel(
        ox: f64,
        oy: f64,
        k: usize,
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
            ox,
            oy,
            clip_id: format!("frame-{k}"),
            left: 70.0,
            right: 20.0,
            top: 52.0,
            bottom: 48.0,
            x,
            y,
            under: String::new(),
            marks: String::new(),
            over: String::new(),
            legend_x: 70.0,
        };
        c.frame(title, x_label, y_label);
        c
    }

    /// The x range of the frame.
    pub fn x_range(&self) -> Range {
        self.x
    }

    /// The y range of the frame.
    pub fn y_range(&self) -> Range {
        self.y
    }

    fn px(&self, x: f64) -> f64 {
        let w = self.width - self.left - self.right;
        self.left + (x - self.x.lo) / (self.x.hi - self.x.lo) * w
    }

    fn py(&self, y: f64) -> f64 {
        let h = self.height - self.top - self.bottom;
        self.top + (self.y.hi - y) / (self.y.hi - self.y.lo) * h
    }

    /// Pixel coordinates are kept within a few frames of the plot so that a
    /// wild value (−300 dB for zero power) stays a finite, clipped mark.
    fn cx(&self, x: f64) -> f64 {
        let w = self.width;
        self.px(x).clamp(-2.0 * w, 3.0 * w)
    }

    fn cy(&self, y: f64) -> f64 {
        let h = self.height;
        self.py(y).clamp(-2.0 * h, 3.0 * h)
    }

    fn frame(&mut self, title: &str, x_label: &str, y_label: &str) {
        let (x0, x1) = (self.left, self.width - self.right);
        let (y0, y1) = (self.top, self.height - self.bottom);
        let mut s = String::new();
        for t in self.x.ticks(8) {
            let px = self.px(t);
            let _ = write!(
                s,
                r#"<line class="grid" x1="{px:.1}" y1="{y0}" x2="{px:.1}" y2="{y1}" stroke="{g}" stroke-width="1"/><text x="{px:.1}" y="{ty:.1}" font-size="12" text-anchor="middle" fill="{ink}">{l}</text>"#,
                g = palette::GRID,
                ink = palette::INK,
                ty = y1 + 16.0,
                l = fmt_tick(t)
            );
        }
        for t in self.y.ticks(6) {
            let py = self.py(t);
            let _ = write!(
                s,
                r#"<line class="grid" x1="{x0}" y1="{py:.1}" x2="{x1}" y2="{py:.1}" stroke="{g}" stroke-width="1"/><text x="{tx:.1}" y="{ty:.1}" font-size="12" text-anchor="end" fill="{ink}">{l}</text>"#,
                g = palette::GRID,
                ink = palette::INK,
                tx = x0 - 6.0,
                ty = py + 4.0,
                l = fmt_tick(t)
            );
        }
        self.under.push_str(&s);
        let _ = write!(
            self.over,
            r#"<rect class="frame" x="{x0}" y="{y0}" width="{w:.1}" height="{h:.1}" fill="none" stroke="{ink}" stroke-width="1.2"/><text class="title" x="{x0}" y="22" font-size="15" font-weight="bold" fill="{ink}">{t}</text><text class="x-label" x="{cx:.1}" y="{by:.1}" font-size="13" text-anchor="middle" fill="{ink}">{xl}</text><text class="y-label" transform="translate(17 {cy:.1}) rotate(-90)" font-size="13" text-anchor="middle" fill="{ink}">{yl}</text>"#,
            w = x1 - x0,
            h = y1 - y0,
            ink = palette::INK,
            t = esc(title),
            cx = (x0 + x1) / 2.0,
            by = self.height - 10.0,
            cy = (y0 + y1) / 2.0,
            xl = esc(x_label),
            yl = esc(y_label)
        );
    }

    /// A polyline through the points (non-finite points break the line).
    pub fn line(&mut self, pts: &[(f64, f64)], colour: &str, width: f64, class: &str) {
        self.styled_line(pts, colour, width, class, "");
    }

    /// A dashed polyline.
    pub fn dashed_line(&mut self, pts: &[(f64, f64)], colour: &str, width: f64, class: &str) {
        self.styled_line(pts, colour, width, class, r#" stroke-dasharray="7 4""#);
    }

    fn styled_line(
        &mut self,
        pts: &[(f64, f64)],
        colour: &str,
        width: f64,
        class: &str,
        extra: &str,
    ) {
        let mut d = String::new();
        let mut pen_down = false;
        for &(x, y) in pts {
            if !(x.is_finite() && y.is_finite()) {
                pen_down = false;
                continue;
            }
            let _ = write!(
                d,
                "{}{:.2},{:.2} ",
                if pen_down { "L" } else { "M" },
                self.cx(x),
                self.cy(y)
            );
            pen_down = true;
        }
        if !d.is_empty() {
            let _ = write!(
                self.marks,
                r#"<path class="{class}" d="{d}" fill="none" stroke="{colour}" stroke-width="{width}" stroke-linejoin="round"{extra}/>"#
            );
        }
    }

    /// A filled area between a lower and an upper curve sampled at the same x.
    pub fn area(
        &mut self,
        x: &[f64],
        lo: &[f64],
        hi: &[f64],
        colour: &str,
        opacity: f64,
        class: &str,
    ) {
        let pts: Vec<(f64, f64, f64)> = x
            .iter()
            .zip(lo)
            .zip(hi)
            .map(|((&x, &l), &h)| (x, l, h))
            .filter(|(x, l, h)| x.is_finite() && l.is_finite() && h.is_finite())
            .collect();
        if pts.is_empty() {
            return;
        }
        let mut d = String::new();
        for (i, &(x, _, h)) in pts.iter().enumerate() {
            let _ = write!(
                d,
                "{}{:.2},{:.2} ",
                if i == 0 { "M" } else { "L" },
                self.cx(x),
                self.cy(h)
            );
        }
        for &(x, l, _) in pts.iter().rev() {
            let _ = write!(d, "L{:.2},{:.2} ", self.cx(x), self.cy(l));
        }
        let _ = write!(
            self.marks,
            r#"<path class="{class}" d="{d}Z" fill="{colour}" fill-opacity="{opacity}" stroke="none"/>"#
        );
    }

    /// Round markers.
    pub fn dots(&mut self, pts: &[(f64, f64)], colour: &str, radius: f64, class: &str) {
        let _ = write!(self.marks, r#"<g class="{class}" fill="{colour}">"#);
        for &(x, y) in pts {
            if x.is_finite() && y.is_finite() {
                let _ = write!(
                    self.marks,
                    r#"<circle cx="{:.2}" cy="{:.2}" r="{radius}"/>"#,
                    self.cx(x),
                    self.cy(y)
                );
            }
        }
        self.marks.push_str("</g>");
    }

    /// Point density as shaded cells: the plane is cut into `cells`×`cells`
    /// squares and each non-empty one is filled with an opacity that grows with
    /// the logarithm of its count (so a few stray points stay visible next to
    /// dense clusters).
    pub fn density(&mut self, pts: &[(f64, f64)], cells: usize, colour: &str, class: &str) {
        let cells = cells.max(1);
        let mut count = vec![0u32; cells * cells];
        let (xs, ys) = (self.x.hi - self.x.lo, self.y.hi - self.y.lo);
        for &(x, y) in pts {
            if !(x.is_finite() && y.is_finite()) {
                continue;
            }
            let u = (x - self.x.lo) / xs;
            let v = (y - self.y.lo) / ys;
            if !(0.0..1.0).contains(&u) || !(0.0..1.0).contains(&v) {
                continue;
            }
            let (i, j) = ((u * cells as f64) as usize, (v * cells as f64) as usize);
            count[j.min(cells - 1) * cells + i.min(cells - 1)] += 1;
        }
        let max = count.iter().copied().max().unwrap_or(0).max(1) as f64;
        let _ = write!(self.marks, r#"<g class="{class}" fill="{colour}">"#);
        let (cw, ch) = (xs / cells as f64, ys / cells as f64);
        for j in 0..cells {
            for i in 0..cells {
                let n = count[j * cells + i];
                if n == 0 {
                    continue;
                }
                let a = 0.15 + 0.85 * (1.0 + f64::from(n)).ln() / (1.0 + max).ln();
                let (x0, y1) = (self.x.lo + i as f64 * cw, self.y.lo + (j + 1) as f64 * ch);
                let (px, py) = (self.px(x0), self.py(y1));
                let _ = write!(
                    self.marks,
                    r#"<rect x="{px:.2}" y="{py:.2}" width="{w:.2}" height="{h:.2}" fill-opacity="{a:.3}"/>"#,
                    w = self.px(x0 + cw) - px,
                    h = self.py(y1 - ch) - py
                );
            }
        }
        self.marks.push_str("</g>");
    }

    /// Cross markers.
    pub fn crosses(&mut self, pts: &[(f64, f64)], colour: &str, size: f64, class: &str) {
        let _ = write!(
            self.marks,
            r#"<g class="{class}" stroke="{colour}" stroke-width="1.6">"#
        );
        for &(x, y) in pts {
            if x.is_finite() && y.is_finite() {
                let (cx, cy) = (self.cx(x), self.cy(y));
                let _ = write!(
                    self.marks,
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
        self.marks.push_str("</g>");
    }

    /// Vertical stems from `base` to each point, with a head dot.
    pub fn stems(&mut self, pts: &[(f64, f64)], base: f64, colour: &str, class: &str) {
        let _ = write!(
            self.marks,
            r#"<g class="{class}" stroke="{colour}" fill="{colour}" stroke-width="2">"#
        );
        for &(x, y) in pts {
            if x.is_finite() && y.is_finite() {
                let (px, py, pb) = (self.cx(x), self.cy(y), self.cy(base));
                let _ = write!(
                    self.marks,
                    r#"<path d="M{px:.2},{pb:.2}L{px:.2},{py:.2}"/><circle cx="{px:.2}" cy="{py:.2}" r="4"/>"#
                );
            }
        }
        self.marks.push_str("</g>");
    }

    /// Shaded vertical bands between x pairs.
    pub fn bands(&mut self, spans: &[(f64, f64)], colour: &str, class: &str) {
        self.bands_with(spans, colour, 0.22, class);
    }

    /// Shaded vertical bands with a given opacity.
    pub fn bands_with(&mut self, spans: &[(f64, f64)], colour: &str, opacity: f64, class: &str) {
        let _ = write!(
            self.marks,
            r#"<g class="{class}" fill="{colour}" fill-opacity="{opacity}">"#
        );
        for &(a, b) in spans {
            let (a, b) = (a.max(self.x.lo), b.min(self.x.hi));
            if b >= a {
                let _ = write!(
                    self.marks,
                    r#"<rect x="{:.2}" y="{:.2}" width="{:.2}" height="{:.2}"/>"#,
                    self.px(a),
                    self.top,
                    (self.px(b) - self.px(a)).max(1.0),
                    self.height - self.top - self.bottom
                );
            }
        }
        self.marks.push_str("</g>");
    }

    /// A horizontal reference line with a label at its right end.
    pub fn hline(&mut self, y: f64, colour: &str, label: &str) {
        self.hline_at(y, colour, label, true);
    }

    /// A horizontal reference line; the label goes above it at the right end
    /// (`right`) or at the left end.
    pub fn hline_at(&mut self, y: f64, colour: &str, label: &str, right: bool) {
        if !(y.is_finite() && y >= self.y.lo && y <= self.y.hi) {
            return;
        }
        let py = self.py(y);
        let (tx, anchor) = if right {
            (self.width - self.right - 4.0, "end")
        } else {
            (self.left + 4.0, "start")
        };
        // A label near the top edge goes under the line to stay in the frame.
        let ty = if py - self.top < 16.0 {
            py + 14.0
        } else {
            py - 4.0
        };
        let _ = write!(
            self.marks,
            r#"<path class="reference" d="M{x0},{py:.2}L{x1},{py:.2}" stroke="{colour}" stroke-dasharray="6 4" stroke-width="1.4"/><text x="{tx}" y="{ty:.2}" font-size="12" text-anchor="{anchor}" fill="{colour}">{l}</text>"#,
            x0 = self.left,
            x1 = self.width - self.right,
            l = esc(label)
        );
    }

    /// A vertical marker line with an optional label near the top of the frame.
    pub fn vline(&mut self, x: f64, colour: &str, label: &str, class: &str) {
        if !(x.is_finite() && x >= self.x.lo && x <= self.x.hi) {
            return;
        }
        let px = self.px(x);
        let _ = write!(
            self.marks,
            r#"<path class="{class}" d="M{px:.2},{y0}L{px:.2},{y1}" stroke="{colour}" stroke-width="1.2" stroke-dasharray="3 3"/>"#,
            y0 = self.top,
            y1 = self.height - self.bottom
        );
        if !label.is_empty() {
            // Near the right edge the label goes to the left of the line.
            let wide = 7.0 * label.chars().count() as f64;
            let (tx, anchor) = if px + 3.0 + wide > self.width - self.right {
                (px - 3.0, "end")
            } else {
                (px + 3.0, "start")
            };
            let _ = write!(
                self.marks,
                r#"<text class="data-label" x="{tx:.2}" y="{ty:.2}" font-size="12" text-anchor="{anchor}" fill="{colour}">{l}</text>"#,
                ty = self.top + 14.0,
                l = esc(label)
            );
        }
    }

    /// A text label at a data position (clipped with the marks).
    pub fn label(&mut self, x: f64, y: f64, text: &str, colour: &str) {
        if !(x.is_finite() && y.is_finite()) {
            return;
        }
        let (px, py) = (self.cx(x), self.cy(y));
        // Keep the text inside the frame: flip it to the left near the right edge.
        let right_edge = self.width - self.right;
        let (tx, anchor) = if px > right_edge - 60.0 {
            (px - 5.0, "end")
        } else {
            (px + 5.0, "start")
        };
        let ty = if py - self.top < 14.0 {
            py + 14.0
        } else {
            py - 5.0
        };
        let _ = write!(
            self.marks,
            r#"<text class="data-label" x="{tx:.2}" y="{ty:.2}" font-size="12" text-anchor="{anchor}" fill="{colour}">{l}</text>"#,
            l = esc(text)
        );
    }

    /// Legend entries in one row between the title and the frame; entries are
    /// added after any already there.
    pub fn legend(&mut self, entries: &[(&str, &str)]) {
        let y = self.top - 12.0;
        for (colour, label) in entries {
            let x = self.legend_x;
            let _ = write!(
                self.over,
                r#"<rect class="legend" x="{x}" y="{ry}" width="11" height="11" fill="{colour}"/><text x="{tx}" y="{y}" font-size="12" fill="{ink}">{l}</text>"#,
                ry = y - 10.0,
                tx = x + 15.0,
                ink = palette::INK,
                l = esc(label)
            );
            self.legend_x += 15.0 + 6.8 * label.chars().count() as f64 + 16.0;
        }
    }

    /// A short note under the title, right-aligned (e.g. what a band means).
    pub fn note(&mut self, text: &str) {
        let _ = write!(
            self.over,
            r#"<text class="note" x="{x}" y="22" font-size="12" text-anchor="end" fill="{ink}">{t}</text>"#,
            x = self.width - self.right,
            ink = palette::INK,
            t = esc(text)
        );
    }

    /// The chart as a group placed at its origin, with its own clip path.
    fn fragment(&self) -> String {
        let (x0, y0) = (self.left, self.top);
        let (w, h) = (
            self.width - self.left - self.right,
            self.height - self.top - self.bottom,
        );
        format!(
            r#"<g class="chart" transform="translate({ox} {oy})"><defs><clipPath id="{id}"><rect x="{x0}" y="{y0}" width="{w:.1}" height="{h:.1}"/></clipPath></defs>{under}<g class="marks" clip-path="url(#{id})">{marks}</g>{over}</g>"#,
            ox = self.ox,
            oy = self.oy,
            id = self.clip_id,
            under = self.under,
            marks = self.marks,
            over = self.over
        )
    }

    /// The finished SVG document.
    pub fn finish(self) -> String {
        document(self.width, self.height, &self.fragment())
    }
}

/// Several charts stacked in one SVG document (panels made with [`Chart::panel`]).
pub struct Figure {
    width: f64,
    height: f64,
    panels: Vec<Chart>,
}

impl Figure {
    /// An empty figure of `width`×`height` pixels.
    pub fn new(width: f64, height: f64) -> Figure {
        Figure {
            width,
            height,
            panels: Vec::new(),
        }
    }

    /// Add a panel.
    pub fn push(&mut self, c: Chart) {
        self.panels.push(c);
    }

    /// The finished SVG document.
    pub fn finish(self) -> String {
        let body: String = self.panels.iter().map(Chart::fragment).collect();
        document(self.width, self.height, &body)
    }
}

/// SVG structure checks shared by the plot tests.
#[cfg(test)]
pub(crate) mod check {
    fn attr(tag: &str, name: &str) -> Option<String> {
        let key = format!(" {name}=\"");
        let i = tag.find(&key)? + key.len();
        let j = tag[i..].find('"')? + i;
        Some(tag[i..j].to_string())
    }

    fn num(tag: &str, name: &str) -> Option<f64> {
        attr(tag, name).and_then(|v| v.parse().ok())
    }

    /// Every drawn mark (circle, path, data label, data rect) lies inside a
    /// group clipped to its chart's frame; everything drawn outside the clip
    /// (background, grid, frame, legend, titles, tick labels) lies within the
    /// document, and grid lines within their frame. Tags are balanced.
    pub(crate) fn marks_are_clipped(svg: &str) -> Result<(), String> {
        let width = svg
            .find("<svg ")
            .and_then(|i| num(&svg[i..], "width"))
            .ok_or("no svg width")?;
        let height = svg
            .find("<svg ")
            .and_then(|i| num(&svg[i..], "height"))
            .ok_or("no svg height")?;
        // (is clip group, x offset, y offset)
        let mut stack: Vec<(&str, bool, f64, f64)> = Vec::new();
        let mut frame: Option<(f64, f64, f64, f64)> = None;
        let mut in_defs = 0;
        let mut marks = 0usize;
        let mut rest = svg;
        while let Some(i) = rest.find('<') {
            rest = &rest[i..];
            let j = rest.find('>').ok_or("unclosed tag")?;
            let tag = &rest[..=j];
            rest = &rest[j + 1..];
            if tag.starts_with("<?") || tag.starts_with("<svg") || tag == "</svg>" {
                continue;
            }
            let name: String = tag[1..]
                .chars()
                .take_while(|c| c.is_ascii_alphanumeric() || *c == '/')
                .collect();
            let self_closing = tag.ends_with("/>");
            let clipped = stack.iter().any(|e| e.1);
            let (ox, oy) = stack.last().map_or((0.0, 0.0), |e| (e.2, e.3));
            match name.as_str() {
                "g" => {
                    let (mut dx, mut dy) = (0.0, 0.0);
                    if let Some(t) = attr(tag, "transform") {
                        if let Some(inner) = t
                            .strip_prefix("translate(")
                            .and_then(|t| t.strip_suffix(')'))
                        {
                            let v: Vec<f64> =
                                inner.split(' ').filter_map(|x| x.parse().ok()).collect();
                            dx = v.first().copied().unwrap_or(0.0);
                            dy = v.get(1).copied().unwrap_or(0.0);
                        }
                    }
                    let is_clip = attr(tag, "clip-path").is_some();
                    if !self_closing {
                        stack.push(("g", is_clip, ox + dx, oy + dy));
                    }
                }
                "/g" => {
                    stack
                        .pop()
                        .filter(|e| e.0 == "g")
                        .ok_or("unbalanced </g>")?;
                }
                "defs" => in_defs += 1,
                "/defs" => in_defs -= 1,
                "clipPath" | "/clipPath" | "/text" => {}
                "rect" if in_defs > 0 => {
                    frame = Some((
                        ox + num(tag, "x").unwrap_or(0.0),
                        oy + num(tag, "y").unwrap_or(0.0),
                        num(tag, "width").unwrap_or(0.0),
                        num(tag, "height").unwrap_or(0.0),
                    ));
                }
                "circle" | "path" => {
                    if !clipped {
                        return Err(format!("unclipped mark: {tag}"));
                    }
                    marks += 1;
                }
                "rect" => {
                    let class = attr(tag, "class").unwrap_or_default();
                    if clipped {
                        marks += 1;
                        continue;
                    }
                    let (x, y) = (
                        ox + num(tag, "x").unwrap_or(0.0),
                        oy + num(tag, "y").unwrap_or(0.0),
                    );
                    let (w, h) = (
                        num(tag, "width").unwrap_or(0.0),
                        num(tag, "height").unwrap_or(0.0),
                    );
                    let inside =
                        x >= 0.0 && y >= 0.0 && x + w <= width + 1e-9 && y + h <= height + 1e-9;
                    if !inside || !(class == "frame" || class == "legend" || (x == 0.0 && y == 0.0))
                    {
                        return Err(format!(
                            "rect outside the clip that is not background, frame or legend: {tag}"
                        ));
                    }
                }
                "line" => {
                    let (fx, fy, fw, fh) = frame.ok_or("grid line before any frame")?;
                    for (a, lo, hi) in [
                        ("x1", fx, fx + fw),
                        ("x2", fx, fx + fw),
                        ("y1", fy, fy + fh),
                        ("y2", fy, fy + fh),
                    ] {
                        let off = if a.starts_with('x') { ox } else { oy };
                        let v = off + num(tag, a).unwrap_or(f64::NAN);
                        if !(v >= lo - 0.06 && v <= hi + 0.06) {
                            return Err(format!("grid line leaves its frame: {tag}"));
                        }
                    }
                }
                "text" => {
                    let class = attr(tag, "class").unwrap_or_default();
                    if class == "data-label" && !clipped {
                        return Err(format!("unclipped data label: {tag}"));
                    }
                    if !clipped && attr(tag, "transform").is_none() {
                        let (x, y) = (
                            ox + num(tag, "x").unwrap_or(-1.0),
                            oy + num(tag, "y").unwrap_or(-1.0),
                        );
                        if !(0.0..=width).contains(&x) || !(0.0..=height).contains(&y) {
                            return Err(format!("text outside the document: {tag}"));
                        }
                    }
                    if !self_closing {
                        stack.push(("text", false, ox, oy));
                        // Skip to the closing tag (text content has no tags).
                        let k = rest.find("</text>").ok_or("unclosed text")?;
                        rest = &rest[k + "</text>".len()..];
                        stack.pop();
                    }
                }
                other => return Err(format!("unexpected element <{other}>")),
            }
        }
        if !stack.is_empty() {
            return Err("unclosed groups".into());
        }
        if marks == 0 {
            return Err("no marks drawn".into());
        }
        Ok(())
    }

    /// Every axis label names its unit in parentheses.
    pub(crate) fn axes_have_units(svg: &str) -> Result<(), String> {
        let mut n = 0;
        for class in ["x-label", "y-label"] {
            for part in svg.split(&format!("class=\"{class}\"")).skip(1) {
                let text = part
                    .split_once('>')
                    .and_then(|(_, t)| t.split_once("</text>"))
                    .map(|(t, _)| t)
                    .ok_or("axis label without text")?;
                let open = text
                    .rfind('(')
                    .ok_or_else(|| format!("no unit in '{text}'"))?;
                let close = text
                    .rfind(')')
                    .ok_or_else(|| format!("no unit in '{text}'"))?;
                if close <= open + 1 {
                    return Err(format!("empty unit in '{text}'"));
                }
                n += 1;
            }
        }
        if n < 2 {
            return Err("fewer than two axis labels".into());
        }
        Ok(())
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

    #[test]
    fn marks_far_outside_the_ranges_stay_inside_the_clip_and_the_checker_sees_a_stray_mark() {
        let r = Range { lo: 0.0, hi: 1.0 };
        let mut c = Chart::new(300.0, 200.0, "t", "x (V)", "y (A)", r, r);
        c.dots(&[(5.0, -7.0), (0.5, 0.5)], palette::TEAL, 2.0, "d");
        c.line(&[(0.0, -300.0), (1.0, 1e9)], palette::TEAL, 1.0, "l");
        c.label(2.0, 2.0, "far", palette::INK);
        c.legend(&[(palette::TEAL, "dots")]);
        let svg = c.finish();
        check::marks_are_clipped(&svg).unwrap();
        check::axes_have_units(&svg).unwrap();
        // The checker itself: a circle outside the clip group is caught.
        let bad = svg.replace("</svg>", r#"<circle cx="1" cy="1" r="2"/></svg>"#);
        assert!(check::marks_are_clipped(&bad).is_err());
        let no_unit = Chart::new(300.0, 200.0, "t", "x", "y", r, r).finish();
        assert!(check::axes_have_units(&no_unit).is_err());
    }
}
