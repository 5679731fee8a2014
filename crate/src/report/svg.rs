//! A small SVG writer for the figures: a plot area with linear axes, ticks at "nice" numbers
//! (Heckbert 1990, "Nice numbers for graph labels", Graphics Gems I), and the few marks the
//! figures need.
//!
//! Why not `plotters`: its text layout on wasm32 (0.3.7) measures strings through the DOM's
//! `window`, which a Web Worker does not have, so every figure with a label panicked in the
//! page's worker. SVG text needs no measuring (the viewer lays it out), so the figures write
//! SVG themselves; the output is the same natively and in wasm.

use std::fmt::Write;

/// An sRGB colour.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Colour(pub u8, pub u8, pub u8);

impl Colour {
    fn hex(self) -> String {
        format!("#{:02x}{:02x}{:02x}", self.0, self.1, self.2)
    }
}

/// Escapes text for SVG content and attribute values.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '&' => out.push_str("&amp;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&apos;"),
            c if (c as u32) < 0x20 && c != '\t' && c != '\n' => out.push(' '),
            c => out.push(c),
        }
    }
    out
}

/// Font size of a title, pixels: 15, or smaller (down to 9) so that a long title fits the
/// figure's width with 8 px either side. Without measuring text (there is none in a worker),
/// a sans-serif character is taken as 0.56 of the font size wide on average (common
/// practice, no source), which errs towards fitting.
fn title_font_px(title: &str, width: f64) -> f64 {
    let chars = title.chars().count().max(1) as f64;
    ((width - 16.0) / (0.56 * chars)).clamp(9.0, 15.0)
}

/// Ticks at nice numbers (1, 2 or 5 times a power of ten) covering [lo, hi], about `target`
/// of them (Heckbert 1990). Returns the tick values and the decimals needed to print them.
pub fn nice_ticks(lo: f64, hi: f64, target: usize) -> (Vec<f64>, usize) {
    if !(lo.is_finite() && hi.is_finite()) || hi <= lo {
        return (vec![lo], 0);
    }
    let range = nice_number(hi - lo, false);
    let step = nice_number(range / (target.max(2) - 1) as f64, true);
    // step = mantissa * 10^exponent with mantissa 1, 2 or 5: ticks are whole multiples
    // k * mantissa, scaled by an exact power of ten (dividing by 10^-e rounds correctly, so
    // 3 * 0.2 comes out as 0.6).
    let exponent = step.log10().floor() as i32;
    let mantissa = (step / 10f64.powi(exponent)).round();
    let scale = |k: f64| {
        if exponent < 0 {
            k * mantissa / 10f64.powi(-exponent)
        } else {
            k * mantissa * 10f64.powi(exponent)
        }
    };
    let first = (lo / step).ceil();
    let decimals = (-exponent).max(0) as usize;
    let mut ticks = Vec::new();
    let mut k = 0.0;
    loop {
        let t = scale(first + k);
        if t > hi + step * 1e-9 || k > 1000.0 {
            break;
        }
        ticks.push(t);
        k += 1.0;
    }
    (ticks, decimals)
}

/// Heckbert's nice number near `x`: rounded to the nearest of 1, 2, 5, 10 times a power of
/// ten when `round`, otherwise the smallest of them not below `x`.
fn nice_number(x: f64, round: bool) -> f64 {
    let exponent = x.log10().floor();
    let fraction = x / 10f64.powf(exponent);
    let nice = if round {
        if fraction < 1.5 {
            1.0
        } else if fraction < 3.0 {
            2.0
        } else if fraction < 7.0 {
            5.0
        } else {
            10.0
        }
    } else if fraction <= 1.0 {
        1.0
    } else if fraction <= 2.0 {
        2.0
    } else if fraction <= 5.0 {
        5.0
    } else {
        10.0
    };
    nice * 10f64.powf(exponent)
}

/// A figure being written: a title, a plot area with two linear axes, and marks in data
/// coordinates.
pub struct Plot {
    body: String,
    width: f64,
    height: f64,
    left: f64,
    top: f64,
    right: f64,
    bottom: f64,
    x: (f64, f64),
    y: (f64, f64),
    /// Names drawn under x = 0, 1, 2, ... instead of numeric ticks.
    categories: Vec<String>,
    /// Names drawn left of y = 0, 1, 2, ... instead of numeric ticks.
    y_categories: Vec<String>,
}

/// Longest row name drawn on a y axis, in characters (longer ones end in "…").
const MAX_ROW_NAME_CHARS: usize = 14;

/// Smallest spacing of row names on a y axis, pixels (12 px text); rows closer than this are
/// named every k-th.
const MIN_ROW_NAME_SPACING_PX: f64 = 12.0;

/// Extra room above the plot area of a plot of rows, for a legend in one line
/// ([`Plot::legend_above`]) that covers no data.
pub(crate) const ROOM_FOR_LEGEND_ROW_PX: f64 = 18.0;

/// A row name shortened to [`MAX_ROW_NAME_CHARS`].
fn row_name(name: &str) -> String {
    if name.chars().count() <= MAX_ROW_NAME_CHARS {
        name.to_string()
    } else {
        let mut short: String = name.chars().take(MAX_ROW_NAME_CHARS - 1).collect();
        short.push('…');
        short
    }
}

const FONT: &str = "font-family=\"sans-serif\"";

/// How a legend entry is drawn.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LegendMark {
    Line,
    Dashed,
    Dot,
    /// A hollow circle.
    Ring,
    Band,
}

impl Plot {
    /// A plot of `width` x `height` pixels showing x in [x0, x1] and y in [y0, y1], with the
    /// title and axis labels (units in the labels).
    pub fn new(
        width: u32,
        height: u32,
        title: &str,
        x: (f64, f64, &str),
        y: (f64, f64, &str),
    ) -> Plot {
        Plot::with_right_margin(width, height, title, x, y, 16.0)
    }

    /// [`Plot::new`] with `right_px` of room right of the plot area (for a colour bar).
    pub fn with_right_margin(
        width: u32,
        height: u32,
        title: &str,
        x: (f64, f64, &str),
        y: (f64, f64, &str),
        right_px: f64,
    ) -> Plot {
        Plot::build((width, height, right_px), title, x, y, Vec::new())
    }

    /// A plot whose x axis names `categories` at x = 0, 1, 2, ... (shown from -0.5 to n -
    /// 0.5), with y in [y0, y1].
    pub fn with_categories(
        width: u32,
        height: u32,
        title: &str,
        categories: &[String],
        x_label: &str,
        y: (f64, f64, &str),
    ) -> Plot {
        let n = categories.len().max(1) as f64;
        let x = (-0.5, n - 0.5, x_label);
        Plot::build((width, height, 16.0), title, x, y, categories.to_vec())
    }

    /// [`Plot::new`] with room above the plot area for [`Plot::legend_above`].
    pub fn with_legend_row(
        width: u32,
        height: u32,
        title: &str,
        x: (f64, f64, &str),
        y: (f64, f64, &str),
    ) -> Plot {
        let room = ROOM_FOR_LEGEND_ROW_PX;
        Plot::build_with(
            (width, height, 16.0),
            title,
            x,
            y,
            Vec::new(),
            Vec::new(),
            room,
        )
    }

    /// A plot whose y axis names `rows` at y = 0, 1, 2, ... (shown from -0.5 to n - 0.5,
    /// the first row at the bottom), with x in [x0, x1]. Names are drawn when rows are at
    /// least 12 px apart, else every k-th; the left margin widens for long names.
    pub fn with_rows(
        width: u32,
        height: u32,
        title: &str,
        x: (f64, f64, &str),
        rows: &[String],
        y_label: &str,
    ) -> Plot {
        let n = rows.len().max(1) as f64;
        let y = (-0.5, n - 0.5, y_label);
        let names = rows.iter().map(|r| row_name(r)).collect();
        Plot::build_with(
            (width, height, 16.0),
            title,
            x,
            y,
            Vec::new(),
            names,
            ROOM_FOR_LEGEND_ROW_PX,
        )
    }

    /// The plot with its frame drawn: (width, height, right margin) in pixels.
    fn build(
        (width, height, right_px): (u32, u32, f64),
        title: &str,
        x: (f64, f64, &str),
        y: (f64, f64, &str),
        categories: Vec<String>,
    ) -> Plot {
        Plot::build_with(
            (width, height, right_px),
            title,
            x,
            y,
            categories,
            Vec::new(),
            0.0,
        )
    }

    /// [`Plot::build`] with names on the y axis.
    fn build_with(
        (width, height, right_px): (u32, u32, f64),
        title: &str,
        x: (f64, f64, &str),
        y: (f64, f64, &str),
        categories: Vec<String>,
        y_categories: Vec<String>,
        extra_top_px: f64,
    ) -> Plot {
        let (width, height) = (f64::from(width), f64::from(height));
        // Room for the longest row name at about 7 px per character, and the axis label.
        let longest = y_categories
            .iter()
            .map(|n| n.chars().count())
            .max()
            .unwrap_or(0);
        let left = (34.0 + 7.0 * longest as f64).max(72.0).min(width / 3.0);
        let mut p = Plot {
            body: String::new(),
            width,
            height,
            left,
            top: 34.0 + extra_top_px,
            right: (width - right_px).max(73.0),
            bottom: height - 48.0,
            x: (x.0, x.1),
            y: (y.0, y.1),
            categories,
            y_categories,
        };
        p.frame(title, x.2, y.2);
        p
    }

    /// The x axis: its pixel span and data range.
    pub fn x_span(&self) -> crate::report::figures::AxisSpan {
        crate::report::figures::AxisSpan {
            from_px: self.left,
            to_px: self.right,
            from: self.x.0,
            to: self.x.1,
        }
    }

    /// Pixel position of a data point.
    pub fn at(&self, x: f64, y: f64) -> (f64, f64) {
        let fx = (x - self.x.0) / (self.x.1 - self.x.0);
        let fy = (y - self.y.0) / (self.y.1 - self.y.0);
        (
            self.left + fx * (self.right - self.left),
            self.bottom - fy * (self.bottom - self.top),
        )
    }

    fn frame(&mut self, title: &str, x_label: &str, y_label: &str) {
        let (l, t, r, b) = (self.left, self.top, self.right, self.bottom);
        let body = &mut self.body;
        let _ = write!(
            body,
            "<rect width=\"{w}\" height=\"{h}\" fill=\"#ffffff\"/>\
             <text x=\"{cx:.1}\" y=\"20\" text-anchor=\"middle\" font-size=\"{size:.1}\" {FONT}>{title}</text>",
            w = self.width,
            h = self.height,
            cx = self.width / 2.0,
            size = title_font_px(title, self.width),
            title = escape(title)
        );
        let (xticks, xdec) = if self.categories.is_empty() {
            nice_ticks(self.x.0, self.x.1, 8)
        } else {
            (Vec::new(), 0)
        };
        let (yticks, ydec) = if self.y_categories.is_empty() {
            nice_ticks(self.y.0, self.y.1, 6)
        } else {
            (Vec::new(), 0)
        };
        let row_px = (b - t) / (self.y.1 - self.y.0);
        let every = (MIN_ROW_NAME_SPACING_PX / row_px.max(1e-9)).ceil().max(1.0) as usize;
        for (k, name) in self.y_categories.iter().enumerate().step_by(every) {
            let py = b - (k as f64 - self.y.0) / (self.y.1 - self.y.0) * (b - t);
            let _ = write!(
                self.body,
                "<line x1=\"{l5:.1}\" y1=\"{py:.1}\" x2=\"{l:.1}\" y2=\"{py:.1}\" stroke=\"#000000\"/>\
                 <text x=\"{l8:.1}\" y=\"{py4:.1}\" text-anchor=\"end\" font-size=\"12\" {FONT}>{}</text>",
                escape(name),
                l5 = l - 5.0,
                l8 = l - 8.0,
                py4 = py + 4.0,
            );
        }
        for (k, name) in self.categories.iter().enumerate() {
            let px = l + (k as f64 - self.x.0) / (self.x.1 - self.x.0) * (r - l);
            let _ = write!(
                self.body,
                "<line x1=\"{px:.1}\" y1=\"{b:.1}\" x2=\"{px:.1}\" y2=\"{b5:.1}\" stroke=\"#000000\"/>\
                 <text x=\"{px:.1}\" y=\"{b18:.1}\" text-anchor=\"middle\" font-size=\"12\" {FONT}>{}</text>",
                escape(name),
                b5 = b + 5.0,
                b18 = b + 18.0,
            );
        }
        for &v in &xticks {
            let px = l + (v - self.x.0) / (self.x.1 - self.x.0) * (r - l);
            let _ = write!(
                self.body,
                "<line x1=\"{px:.1}\" y1=\"{t:.1}\" x2=\"{px:.1}\" y2=\"{b:.1}\" stroke=\"#ebebeb\"/>\
                 <line x1=\"{px:.1}\" y1=\"{b:.1}\" x2=\"{px:.1}\" y2=\"{b5:.1}\" stroke=\"#000000\"/>\
                 <text x=\"{px:.1}\" y=\"{b18:.1}\" text-anchor=\"middle\" font-size=\"12\" {FONT}>{v:.xdec$}</text>",
                b5 = b + 5.0,
                b18 = b + 18.0,
            );
        }
        for &v in &yticks {
            let py = b - (v - self.y.0) / (self.y.1 - self.y.0) * (b - t);
            let _ = write!(
                self.body,
                "<line x1=\"{l:.1}\" y1=\"{py:.1}\" x2=\"{r:.1}\" y2=\"{py:.1}\" stroke=\"#ebebeb\"/>\
                 <line x1=\"{l5:.1}\" y1=\"{py:.1}\" x2=\"{l:.1}\" y2=\"{py:.1}\" stroke=\"#000000\"/>\
                 <text x=\"{l8:.1}\" y=\"{py4:.1}\" text-anchor=\"end\" font-size=\"12\" {FONT}>{v:.ydec$}</text>",
                l5 = l - 5.0,
                l8 = l - 8.0,
                py4 = py + 4.0,
            );
        }
        let _ = write!(
            self.body,
            "<rect x=\"{l:.1}\" y=\"{t:.1}\" width=\"{w:.1}\" height=\"{h:.1}\" fill=\"none\" stroke=\"#000000\"/>\
             <text x=\"{cx:.1}\" y=\"{xy:.1}\" text-anchor=\"middle\" font-size=\"13\" {FONT}>{xl}</text>\
             <text transform=\"translate(16 {cy:.1}) rotate(-90)\" text-anchor=\"middle\" font-size=\"13\" {FONT}>{yl}</text>",
            w = r - l,
            h = b - t,
            cx = (l + r) / 2.0,
            xy = self.height - 10.0,
            cy = (t + b) / 2.0,
            xl = escape(x_label),
            yl = escape(y_label),
        );
        // Marks are clipped to the plot area.
        let _ = write!(
            self.body,
            "<clipPath id=\"plot-area\"><rect x=\"{l:.1}\" y=\"{t:.1}\" width=\"{w:.1}\" height=\"{h:.1}\"/></clipPath><g clip-path=\"url(#plot-area)\">",
            w = r - l,
            h = b - t,
        );
    }

    /// A short name beside a data point (10 px text, up and to the right of it).
    pub fn label(&mut self, x: f64, y: f64, text: &str) {
        let (u, v) = self.at(x, y);
        let _ = write!(
            self.body,
            "<text x=\"{:.1}\" y=\"{:.1}\" font-size=\"10\" fill=\"#333333\" {FONT}>{}</text>",
            u + 6.0,
            v - 6.0,
            escape(text)
        );
    }

    /// A polyline through data points.
    pub fn polyline(&mut self, points: &[(f64, f64)], colour: Colour, width_px: f64) {
        if points.len() < 2 {
            return;
        }
        let mut d = String::new();
        for (k, &(x, y)) in points.iter().enumerate() {
            let (px, py) = self.at(x, y);
            let _ = write!(d, "{}{px:.2},{py:.2}", if k == 0 { "" } else { " " });
        }
        let _ = write!(
            self.body,
            "<polyline points=\"{d}\" fill=\"none\" stroke=\"{}\" stroke-width=\"{width_px}\"/>",
            colour.hex()
        );
    }

    /// A straight segment between two data points.
    pub fn segment(&mut self, a: (f64, f64), b: (f64, f64), colour: Colour, width_px: f64) {
        self.polyline(&[a, b], colour, width_px);
    }

    /// Many vertical ticks of `half_px` above and below each point (a raster row), as one path.
    pub fn ticks(
        &mut self,
        points: impl Iterator<Item = (f64, f64)>,
        half_px: f64,
        colour: Colour,
    ) {
        let mut d = String::new();
        for (x, y) in points {
            let (px, py) = self.at(x, y);
            let _ = write!(d, "M{px:.2} {:.2}v{:.2}", py - half_px, 2.0 * half_px);
        }
        if !d.is_empty() {
            let _ = write!(
                self.body,
                "<path d=\"{d}\" stroke=\"{}\" stroke-width=\"1\"/>",
                colour.hex()
            );
        }
    }

    /// A circle of `radius_px` at a data point, filled or as an outline.
    pub fn circle(&mut self, x: f64, y: f64, radius_px: f64, colour: Colour, filled: bool) {
        let (px, py) = self.at(x, y);
        let paint = if filled {
            format!("fill=\"{}\"", colour.hex())
        } else {
            format!(
                "fill=\"#ffffff\" stroke=\"{}\" stroke-width=\"1.5\"",
                colour.hex()
            )
        };
        let _ = write!(
            self.body,
            "<circle cx=\"{px:.2}\" cy=\"{py:.2}\" r=\"{radius_px}\" {paint}/>"
        );
    }

    /// A triangle pointing up, `size_px` high, at a data point.
    pub fn triangle(&mut self, x: f64, y: f64, size_px: f64, colour: Colour) {
        let (px, py) = self.at(x, y);
        let h = size_px / 2.0;
        let _ = write!(
            self.body,
            "<path d=\"M{:.2} {:.2}L{:.2} {:.2}L{:.2} {:.2}Z\" fill=\"{}\"/>",
            px,
            py - h,
            px - h,
            py + h,
            px + h,
            py + h,
            colour.hex()
        );
    }

    /// A rectangle between two data corners, with an opacity in [0, 1].
    pub fn rect(&mut self, a: (f64, f64), b: (f64, f64), colour: Colour, opacity: f64) {
        let (ax, ay) = self.at(a.0, a.1);
        let (bx, by) = self.at(b.0, b.1);
        let _ = write!(
            self.body,
            "<rect x=\"{:.2}\" y=\"{:.2}\" width=\"{:.2}\" height=\"{:.2}\" fill=\"{}\" fill-opacity=\"{opacity}\"/>",
            ax.min(bx),
            ay.min(by),
            (bx - ax).abs(),
            (by - ay).abs(),
            colour.hex()
        );
    }

    /// A dashed straight segment between two data points.
    pub fn dashed(&mut self, a: (f64, f64), b: (f64, f64), colour: Colour, width_px: f64) {
        let (ax, ay) = self.at(a.0, a.1);
        let (bx, by) = self.at(b.0, b.1);
        let _ = write!(
            self.body,
            "<line x1=\"{ax:.2}\" y1=\"{ay:.2}\" x2=\"{bx:.2}\" y2=\"{by:.2}\" stroke=\"{}\" stroke-width=\"{width_px}\" stroke-dasharray=\"6 4\"/>",
            colour.hex()
        );
    }

    /// A legend in the plot area's top-right corner, on a white box: one row per entry.
    pub fn legend(&mut self, entries: &[(&str, Colour, LegendMark)]) {
        self.legend_in(entries, false);
    }

    /// A legend in the top-left corner (`left`) or the top-right one.
    pub fn legend_in(&mut self, entries: &[(&str, Colour, LegendMark)], left: bool) {
        if entries.is_empty() {
            return;
        }
        let longest = entries
            .iter()
            .map(|e| e.0.chars().count())
            .max()
            .unwrap_or(0);
        // About 6.5 px per character at 12 px (no text measuring; the box errs wide).
        let w = 34.0 + 6.5 * longest as f64;
        let h = 8.0 + 17.0 * entries.len() as f64;
        let x0 = if left {
            self.left + 6.0
        } else {
            (self.right - w - 6.0).max(self.left + 2.0)
        };
        let y0 = self.top + 6.0;
        let _ = write!(
            self.body,
            "<g class=\"legend\"><rect x=\"{x0:.1}\" y=\"{y0:.1}\" width=\"{w:.1}\" height=\"{h:.1}\" fill=\"#ffffff\" fill-opacity=\"0.9\" stroke=\"#999999\"/>"
        );
        for (k, (label, colour, mark)) in entries.iter().enumerate() {
            let cy = y0 + 12.5 + 17.0 * k as f64;
            let (a, b) = (x0 + 6.0, x0 + 24.0);
            self.legend_mark(*mark, *colour, (a, b), cy);
            let _ = write!(
                self.body,
                "<text x=\"{:.1}\" y=\"{:.1}\" font-size=\"12\" {FONT}>{}</text>",
                b + 6.0,
                cy + 4.0,
                escape(label)
            );
        }
        self.body.push_str("</g>");
    }

    /// One legend entry's mark between x = a and b at height cy (pixels).
    fn legend_mark(&mut self, mark: LegendMark, colour: Colour, (a, b): (f64, f64), cy: f64) {
        let c = colour.hex();
        let _ = match mark {
            LegendMark::Line => write!(self.body, "<line x1=\"{a:.1}\" y1=\"{cy:.1}\" x2=\"{b:.1}\" y2=\"{cy:.1}\" stroke=\"{c}\" stroke-width=\"2\"/>"),
            LegendMark::Dashed => write!(self.body, "<line x1=\"{a:.1}\" y1=\"{cy:.1}\" x2=\"{b:.1}\" y2=\"{cy:.1}\" stroke=\"{c}\" stroke-width=\"2\" stroke-dasharray=\"6 4\"/>"),
            LegendMark::Dot => write!(self.body, "<circle cx=\"{:.1}\" cy=\"{cy:.1}\" r=\"4\" fill=\"{c}\"/>", (a + b) / 2.0),
            LegendMark::Ring => write!(self.body, "<circle cx=\"{:.1}\" cy=\"{cy:.1}\" r=\"3.5\" fill=\"#ffffff\" stroke=\"{c}\" stroke-width=\"1.5\"/>", (a + b) / 2.0),
            LegendMark::Band => write!(self.body, "<rect x=\"{a:.1}\" y=\"{:.1}\" width=\"18\" height=\"10\" fill=\"{c}\" fill-opacity=\"0.35\"/>", cy - 5.0),
        };
    }

    /// A legend in one line above the plot area (plots of rows leave room for it), so it
    /// hides no data.
    pub fn legend_above(&mut self, entries: &[(&str, Colour, LegendMark)]) {
        let cy = self.top - 10.0;
        let mut x = self.left;
        // Outside the plot area, so outside its clipping group.
        self.body.push_str("</g><g class=\"legend\">");
        for (label, colour, mark) in entries {
            let (a, b) = (x, x + 18.0);
            self.legend_mark(*mark, *colour, (a, b), cy);
            let _ = write!(
                self.body,
                "<text x=\"{:.1}\" y=\"{:.1}\" font-size=\"12\" {FONT}>{}</text>",
                b + 5.0,
                cy + 4.0,
                escape(label)
            );
            // About 6.5 px per character at 12 px, then a gap.
            x = b + 5.0 + 6.5 * label.chars().count() as f64 + 16.0;
        }
        self.body.push_str("</g><g clip-path=\"url(#plot-area)\">");
    }

    /// A vertical colour bar in the right margin from `lo` (bottom) to `hi` (top), painted
    /// by `colour_of`, with ticks and a label (units in it). Drawn outside the plot area.
    pub fn colour_bar(&mut self, lo: f64, hi: f64, label: &str, colour_of: impl Fn(f64) -> Colour) {
        const STEPS: usize = 64;
        let (x, w) = (self.right + 14.0, 14.0);
        let (t, b) = (self.top, self.bottom);
        // Leave the clipped plot group, draw, and open it again.
        self.body.push_str("</g><g class=\"colour-bar\">");
        let step_px = (b - t) / STEPS as f64;
        for k in 0..STEPS {
            let v = lo + (hi - lo) * (k as f64 + 0.5) / STEPS as f64;
            let y = b - (k as f64 + 1.0) * step_px;
            let _ = write!(
                self.body,
                "<rect x=\"{x:.1}\" y=\"{y:.2}\" width=\"{w}\" height=\"{:.2}\" fill=\"{}\"/>",
                step_px + 0.3,
                colour_of(v).hex()
            );
        }
        let _ = write!(
            self.body,
            "<rect x=\"{x:.1}\" y=\"{t:.1}\" width=\"{w}\" height=\"{:.1}\" fill=\"none\" stroke=\"#000000\"/>",
            b - t
        );
        let (ticks, dec) = nice_ticks(lo, hi, 5);
        for v in ticks {
            let y = b - (v - lo) / (hi - lo) * (b - t);
            let _ = write!(
                self.body,
                "<line x1=\"{:.1}\" y1=\"{y:.1}\" x2=\"{:.1}\" y2=\"{y:.1}\" stroke=\"#000000\"/><text x=\"{:.1}\" y=\"{:.1}\" font-size=\"11\" {FONT}>{v:.dec$}</text>",
                x + w,
                x + w + 4.0,
                x + w + 6.0,
                y + 4.0
            );
        }
        let _ = write!(
            self.body,
            "<text transform=\"translate({:.1} {:.1}) rotate(90)\" text-anchor=\"middle\" font-size=\"12\" {FONT}>{}</text></g><g clip-path=\"url(#plot-area)\">",
            x + w + 40.0,
            (t + b) / 2.0,
            escape(label)
        );
    }

    /// The finished SVG document.
    pub fn finish(self) -> String {
        format!(
            "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"{w}\" height=\"{h}\" viewBox=\"0 0 {w} {h}\">{body}</g></svg>\n",
            w = self.width,
            h = self.height,
            body = self.body
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Heckbert's example ranges: ticks are 1, 2 or 5 times a power of ten, evenly spaced,
    /// inside the range and covering most of it.
    #[test]
    fn ticks_are_nice_and_cover_the_range() {
        assert_eq!(
            nice_ticks(0.0, 100.0, 6).0,
            vec![0.0, 20.0, 40.0, 60.0, 80.0, 100.0]
        );
        assert_eq!(
            nice_ticks(0.0, 1.0, 6),
            (vec![0.0, 0.2, 0.4, 0.6, 0.8, 1.0], 1)
        );
        for (lo, hi) in [
            (-3.7, 12.2),
            (0.001, 0.0173),
            (1234.0, 98765.0),
            (-1e-3, 0.0),
        ] {
            let (t, _) = nice_ticks(lo, hi, 6);
            assert!(t.len() >= 3, "{lo}..{hi}: {t:?}");
            let step = t[1] - t[0];
            let mantissa = step / 10f64.powf(step.log10().floor());
            assert!(
                [1.0, 2.0, 5.0].iter().any(|m| (mantissa - m).abs() < 1e-9),
                "{step}"
            );
            assert!(t.iter().all(|&v| v >= lo - 1e-12 && v <= hi + 1e-12));
            assert!((t[t.len() - 1] - t[0]) >= 0.5 * (hi - lo));
        }
    }

    #[test]
    fn long_titles_shrink_to_fit_and_short_ones_keep_15_px() {
        assert_eq!(title_font_px("Population rate (all sites)", 760.0), 15.0);
        let long = "x".repeat(120);
        let size = title_font_px(&long, 760.0);
        assert!(size < 15.0 && 0.56 * size * 120.0 <= 760.0 - 16.0 + 1e-9);
        assert_eq!(title_font_px(&"x".repeat(1000), 300.0), 9.0);
    }

    #[test]
    fn text_is_escaped() {
        assert_eq!(escape("<a & \"b\">"), "&lt;a &amp; &quot;b&quot;&gt;");
    }
}
