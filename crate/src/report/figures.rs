//! Figures of the page and of exports, written as SVG text (see [`super::svg`]): the same
//! figure code serves the screen (the page shows the SVG as an image) and the SVG export.
//!
//! Every axis carries its unit. Colours are the Okabe-Ito palette (Okabe & Ito 2008, "Color
//! Universal Design"), which stays distinguishable under the common colour-vision
//! deficiencies. Figures that offer a read-out return the pixel position and label of every
//! data point, and [`Figure::nearest`] names the point under the pointer.

use super::svg::{Colour, LegendMark, Plot};
use super::Inspection;
use crate::detect::PopulationRate;
use crate::fronts::{BurstResult, FrontReport};
use crate::fronts::{FrontModel, LineTravel};
use crate::geometry::Track;
use serde::Serialize;
use std::f64::consts::TAU;

/// Okabe-Ito colours.
pub const BLACK: Colour = Colour(0, 0, 0);
pub const ORANGE: Colour = Colour(230, 159, 0);
pub const SKY_BLUE: Colour = Colour(86, 180, 233);
pub const GREEN: Colour = Colour(0, 158, 115);
pub const BLUE: Colour = Colour(0, 114, 178);
pub const VERMILLION: Colour = Colour(213, 94, 0);
pub const PURPLE: Colour = Colour(204, 121, 167);
pub const GREY: Colour = Colour(150, 150, 150);

/// A drawn figure.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Figure {
    /// The whole figure as an SVG document.
    pub svg: String,
    pub width_px: u32,
    pub height_px: u32,
    /// Data points a pointer can be read out at (empty for figures without a read-out).
    pub points: Vec<ReadoutPoint>,
    /// Where the x axis lies in the figure, for turning a dragged span into data values.
    pub x_axis: Option<AxisSpan>,
}

/// An axis's data range and where it is drawn, in figure pixels.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct AxisSpan {
    pub from_px: f64,
    pub to_px: f64,
    pub from: f64,
    pub to: f64,
}

impl AxisSpan {
    /// The data value at pixel `px`, clamped to the axis.
    pub fn value_at(&self, px: f64) -> f64 {
        let f = ((px - self.from_px) / (self.to_px - self.from_px)).clamp(0.0, 1.0);
        self.from + f * (self.to - self.from)
    }
}

/// One data point's place in the figure and its description.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ReadoutPoint {
    pub x_px: f64,
    pub y_px: f64,
    pub label: String,
}

impl Figure {
    /// The point nearest to (x, y) pixels, if one is within `radius_px`.
    pub fn nearest(&self, x_px: f64, y_px: f64, radius_px: f64) -> Option<&ReadoutPoint> {
        self.points
            .iter()
            .map(|p| (p, (p.x_px - x_px).hypot(p.y_px - y_px)))
            .filter(|(_, d)| *d <= radius_px)
            .min_by(|a, b| a.1.total_cmp(&b.1))
            .map(|(p, _)| p)
    }
}

/// Why a figure could not be drawn.
#[derive(Debug, Clone, PartialEq, Serialize, thiserror::Error)]
#[error("{message}")]
pub struct FigureError {
    pub message: String,
}

pub(crate) fn empty(what: &str) -> FigureError {
    FigureError {
        message: format!("nothing to draw: {what}"),
    }
}

/// Size of a figure, pixels.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Size {
    pub width_px: u32,
    pub height_px: u32,
}

impl Default for Size {
    fn default() -> Self {
        Size {
            width_px: 760,
            height_px: 340,
        }
    }
}

/// Range covering `values` with 5% of padding each side (a unit range around a single value).
pub(crate) fn padded(values: impl Iterator<Item = f64>) -> Option<(f64, f64)> {
    let (lo, hi) = values
        .filter(|v| v.is_finite())
        .fold(None, |acc: Option<(f64, f64)>, v| match acc {
            None => Some((v, v)),
            Some((a, b)) => Some((a.min(v), b.max(v))),
        })?;
    let span = hi - lo;
    if span <= 0.0 {
        let d = if lo == 0.0 { 1.0 } else { lo.abs() * 0.1 };
        return Some((lo - d, hi + d));
    }
    Some((lo - 0.05 * span, hi + 0.05 * span))
}

/// Draws a chart with the given axes; `draw` adds the marks and returns the read-out points
/// (data coordinates plus label), which are mapped to pixels.
pub(crate) fn chart(
    size: Size,
    title: &str,
    x: (f64, f64, &str),
    y: (f64, f64, &str),
    draw: impl FnOnce(&mut Plot) -> Result<Vec<(f64, f64, String)>, FigureError>,
) -> Result<Figure, FigureError> {
    check_axes(x, y)?;
    chart_on(
        Plot::new(size.width_px, size.height_px, title, x, y),
        size,
        draw,
    )
}

/// Refuses axes without a finite, positive extent.
fn check_axes(x: (f64, f64, &str), y: (f64, f64, &str)) -> Result<(), FigureError> {
    if !(x.0.is_finite() && x.1.is_finite() && y.0.is_finite() && y.1.is_finite())
        || x.1 <= x.0
        || y.1 <= y.0
    {
        return Err(empty("the axes have no extent"));
    }
    Ok(())
}

/// [`chart`] with a row above the plot area for a legend ([`Plot::legend_above`]), so the
/// legend hides no data.
pub(crate) fn chart_with_legend_row(
    size: Size,
    title: &str,
    x: (f64, f64, &str),
    y: (f64, f64, &str),
    draw: impl FnOnce(&mut Plot) -> Result<Vec<(f64, f64, String)>, FigureError>,
) -> Result<Figure, FigureError> {
    check_axes(x, y)?;
    let plot = Plot::with_legend_row(size.width_px, size.height_px, title, x, y);
    chart_on(plot, size, draw)
}

/// [`chart`] on a plot already framed (for axes of names).
pub(crate) fn chart_on(
    mut plot: Plot,
    size: Size,
    draw: impl FnOnce(&mut Plot) -> Result<Vec<(f64, f64, String)>, FigureError>,
) -> Result<Figure, FigureError> {
    let marks = draw(&mut plot)?;
    let points = marks
        .into_iter()
        .map(|(px, py, label)| {
            let (u, v) = plot.at(px, py);
            ReadoutPoint {
                x_px: u,
                y_px: v,
                label,
            }
        })
        .collect();
    let x_axis = Some(plot.x_span());
    Ok(Figure {
        svg: plot.finish(),
        width_px: size.width_px,
        height_px: size.height_px,
        points,
        x_axis,
    })
}

/// Most sites a map names (beyond, names are read out by pointing).
const MAX_NAMED_SITES: usize = 96;

/// Sites closer than this on a map (pixels) are not named: a short name at 10 px needs it.
const MIN_NAMED_SITE_SPACING_PX: f64 = 26.0;

/// Widens the shorter of two axis ranges so that a micrometre is as long on both axes (a
/// ring looks round, a line of sites stays a line), for a plot with `extra_top_px` above its
/// area (a legend row).
fn equal_scale_in(
    x: (f64, f64),
    y: (f64, f64),
    size: Size,
    extra_top_px: f64,
) -> ((f64, f64), (f64, f64)) {
    let plot_w = f64::from(size.width_px.saturating_sub(100).max(1));
    let plot_h = (f64::from(size.height_px) - 82.0 - extra_top_px).max(1.0);
    let scale = ((x.1 - x.0) / plot_w).max((y.1 - y.0) / plot_h);
    let (cx, cy) = ((x.0 + x.1) / 2.0, (y.0 + y.1) / 2.0);
    let (hw, hh) = (scale * plot_w / 2.0, scale * plot_h / 2.0);
    ((cx - hw, cx + hw), (cy - hh, cy + hh))
}

/// Map of the sites in the layout's axes with the track drawn over them: active sites filled,
/// silent sites hollow, off-track sites in vermillion, the track's start marked.
pub fn site_map(inspection: &Inspection, size: Size) -> Result<Figure, FigureError> {
    let sites = &inspection.sites;
    if sites.is_empty() {
        return Err(empty("the layout has no sites"));
    }
    let track = &inspection.track.track;
    let mut track_path: Vec<(f64, f64)> = Vec::new();
    match track {
        Track::Line {
            start_um,
            direction,
            length_um,
        } => {
            track_path.push((start_um[0], start_um[1]));
            track_path.push((
                start_um[0] + direction[0] * length_um,
                start_um[1] + direction[1] * length_um,
            ));
        }
        Track::Polyline { waypoints_um, .. } => {
            track_path.extend(waypoints_um.iter().map(|w| (w[0], w[1])));
        }
        Track::Ring {
            centre_um,
            radius_um,
            ..
        } => {
            track_path.extend((0..=180).map(|k| {
                let a = TAU * k as f64 / 180.0;
                (
                    centre_um[0] + radius_um * a.cos(),
                    centre_um[1] + radius_um * a.sin(),
                )
            }));
        }
        Track::Plane => {}
    }
    let xs = sites
        .iter()
        .map(|s| s.x_um)
        .chain(track_path.iter().map(|p| p.0));
    let ys = sites
        .iter()
        .map(|s| s.y_um)
        .chain(track_path.iter().map(|p| p.1));
    let (x0, x1) = padded(xs).ok_or_else(|| empty("no finite site positions"))?;
    let (y0, y1) = padded(ys).ok_or_else(|| empty("no finite site positions"))?;
    // Equal scales on both axes, so a ring looks round.
    let ((ex0, ex1), (ey0, ey1)) =
        equal_scale_in((x0, x1), (y0, y1), size, super::svg::ROOM_FOR_LEGEND_ROW_PX);
    let title = format!("Sites and track ({})", inspection.track.kind);
    chart_on(
        Plot::with_legend_row(
            size.width_px,
            size.height_px,
            &title,
            (ex0, ex1, "x (µm)"),
            (ey0, ey1, "y (µm)"),
        ),
        size,
        |c| {
            if track_path.len() >= 2 {
                c.polyline(&track_path, SKY_BLUE, 3.0);
                // Start of the coordinate and its direction.
                let start = track_start_and_step(track);
                if let Some(((sx, sy), (dx, dy))) = start {
                    c.triangle(sx, sy, 12.0, GREEN);
                    let len = 0.08 * (x1 - x0).max(y1 - y0);
                    c.segment((sx, sy), (sx + dx * len, sy + dy * len), GREEN, 2.0);
                }
            }
            let mut legend = vec![("site", BLUE, LegendMark::Dot)];
            if sites.iter().any(|s| s.silent) {
                legend.push(("silent site", BLUE, LegendMark::Ring));
            }
            if sites.iter().any(|s| s.off_track) {
                legend.push(("off the track", VERMILLION, LegendMark::Dot));
            }
            if track_path.len() >= 2 {
                legend.push((
                    "track (start and direction in green)",
                    SKY_BLUE,
                    LegendMark::Line,
                ));
            }
            c.legend_above(&legend);
            // Site names beside the sites when no two sites are closer than a name needs.
            let pixels: Vec<(f64, f64)> = sites.iter().map(|s| c.at(s.x_um, s.y_um)).collect();
            let names_fit = sites.len() <= MAX_NAMED_SITES
                && pixels.iter().enumerate().all(|(i, a)| {
                    pixels[i + 1..]
                        .iter()
                        .all(|b| (a.0 - b.0).hypot(a.1 - b.1) >= MIN_NAMED_SITE_SPACING_PX)
                });
            if names_fit {
                for s in sites {
                    c.label(s.x_um, s.y_um, &s.site);
                }
            }
            let mut out = Vec::new();
            for s in sites {
                let colour = if s.off_track { VERMILLION } else { BLUE };
                c.circle(s.x_um, s.y_um, 5.0, colour, !s.silent);
                let state = match (s.silent, s.off_track) {
                    (true, _) => ", silent",
                    (false, true) => ", off the track",
                    _ => "",
                };
                let along = s
                    .along_um
                    .map(|a| format!(", {a:.0} µm along the track"))
                    .unwrap_or_default();
                out.push((
                    s.x_um,
                    s.y_um,
                    format!(
                        "site {}: ({:.0}, {:.0}) µm{along}{state}",
                        s.site, s.x_um, s.y_um
                    ),
                ));
            }
            Ok(out)
        },
    )
}

/// The start point of the track coordinate and the unit direction in which it grows.
fn track_start_and_step(track: &Track) -> Option<((f64, f64), (f64, f64))> {
    match track {
        Track::Line {
            start_um,
            direction,
            ..
        } => Some(((start_um[0], start_um[1]), (direction[0], direction[1]))),
        Track::Polyline { waypoints_um, .. } => {
            let (a, b) = (waypoints_um.first()?, waypoints_um.get(1)?);
            let d = (b[0] - a[0]).hypot(b[1] - a[1]);
            (d > 0.0).then(|| ((a[0], a[1]), ((b[0] - a[0]) / d, (b[1] - a[1]) / d)))
        }
        Track::Ring {
            centre_um,
            radius_um,
            start_angle_rad,
            rotation,
        } => {
            let a = *start_angle_rad;
            let sense = rotation.sign();
            Some((
                (
                    centre_um[0] + radius_um * a.cos(),
                    centre_um[1] + radius_um * a.sin(),
                ),
                (-a.sin() * sense, a.cos() * sense),
            ))
        }
        Track::Plane => None,
    }
}

/// One site's row in the raster.
pub struct RasterRow<'a> {
    pub site: &'a str,
    /// Track coordinate, µm (`None` on a plane).
    pub along_um: Option<f64>,
    /// Spike times, seconds, ascending.
    pub spikes_s: &'a [f64],
}

/// What the trains of a raster or a population rate hold.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TrainKind {
    Spikes,
    /// Calcium event onsets (imaging).
    Events,
}

/// Raster of spikes (or calcium event onsets) between `from_s` and `to_s`, one row per site
/// ordered by track coordinate (sites without one keep their order, below), with burst
/// windows shaded.
pub fn raster(
    rows: &[RasterRow<'_>],
    kind: TrainKind,
    bursts: &[BurstResult],
    selected: Option<&BurstResult>,
    from_s: f64,
    to_s: f64,
    size: Size,
) -> Result<Figure, FigureError> {
    if rows.is_empty() {
        return Err(empty("no sites"));
    }
    if to_s.partial_cmp(&from_s) != Some(std::cmp::Ordering::Greater) {
        return Err(empty("the time window is empty"));
    }
    let mut order: Vec<usize> = (0..rows.len()).collect();
    order.sort_by(|&a, &b| {
        let key = |i: usize| rows[i].along_um.unwrap_or(f64::INFINITY);
        key(a).total_cmp(&key(b)).then(a.cmp(&b))
    });
    let n = rows.len() as f64;
    // Each row's ticks fill 80% of its height (the plot of rows is 100 px shorter than the
    // figure: title, legend row and time axis).
    let row_half_px = 0.4 * f64::from(size.height_px.saturating_sub(100)) / n;
    let ticks = match kind {
        TrainKind::Spikes => "Spikes",
        TrainKind::Events => "Calcium event onsets",
    };
    let title = format!("{ticks} by site (ordered along the track), {from_s:.1}-{to_s:.1} s");
    let names: Vec<String> = order.iter().map(|&i| rows[i].site.to_string()).collect();
    let rank_of: std::collections::HashMap<&str, usize> = order
        .iter()
        .enumerate()
        .map(|(rank, &i)| (rows[i].site, rank))
        .collect();
    let plot = Plot::with_rows(
        size.width_px,
        size.height_px,
        &title,
        (from_s, to_s, "time (s)"),
        &names,
        "site (ordered along the track)",
    );
    chart_on(plot, size, |c| {
        for b in bursts
            .iter()
            .filter(|b| b.end_s >= from_s && b.start_s <= to_s)
        {
            c.rect(
                (b.start_s.max(from_s), -0.5),
                (b.end_s.min(to_s), n - 0.5),
                ORANGE,
                0.25,
            );
        }
        for (rank, &i) in order.iter().enumerate() {
            let y = rank as f64;
            let spikes = rows[i].spikes_s;
            let lo = spikes.partition_point(|&t| t < from_s);
            let hi = spikes.partition_point(|&t| t <= to_s);
            c.ticks(spikes[lo..hi].iter().map(|&t| (t, y)), row_half_px, BLACK);
        }
        let mut legend = vec![
            (ticks, BLACK, LegendMark::Line),
            ("network burst", ORANGE, LegendMark::Band),
        ];
        let mut marked = Vec::new();
        let selected = selected.filter(|b| b.end_s >= from_s && b.start_s <= to_s);
        let marks_label = selected.map(|b| format!("activation times of burst {}", b.burst));
        if let (Some(b), Some(label)) = (selected, &marks_label) {
            for a in &b.activations {
                if let Some(&rank) = rank_of.get(a.site.as_str()) {
                    let colour = if a.used { VERMILLION } else { GREY };
                    c.circle(a.time_s, rank as f64, 3.5, colour, a.used);
                    marked.push((a.time_s, rank as f64, a));
                }
            }
            legend.push((label, VERMILLION, LegendMark::Dot));
        }
        c.legend_above(&legend);
        let mut points: Vec<(f64, f64, String)> = order
            .iter()
            .enumerate()
            .map(|(rank, &i)| {
                let along = rows[i]
                    .along_um
                    .map(|a| format!(" at {a:.0} µm"))
                    .unwrap_or_default();
                (from_s, rank as f64, format!("site {}{along}", rows[i].site))
            })
            .collect();
        points.extend(marked.into_iter().map(|(t, y, a)| {
            (
                t,
                y,
                format!(
                    "site {}: activation at {:.4} s ({})",
                    a.site,
                    a.time_s,
                    a.status.describe()
                ),
            )
        }));
        Ok(points)
    })
}

/// Smoothed population rate between `from_s` and `to_s` with the detector's threshold and
/// edge levels.
pub fn population_rate(
    rate: &PopulationRate,
    kind: TrainKind,
    from_s: f64,
    to_s: f64,
    size: Size,
) -> Result<Figure, FigureError> {
    let samples: Vec<(f64, f64)> = (0..rate.rate_hz.len())
        .map(|k| (rate.time_s(k), rate.rate_hz[k]))
        .filter(|(t, _)| *t >= from_s && *t <= to_s)
        .collect();
    if samples.is_empty() {
        return Err(empty("no rate samples in the time window"));
    }
    let top = samples
        .iter()
        .map(|s| s.1)
        .fold(rate.threshold_hz, f64::max)
        * 1.05;
    chart(
        size,
        "Population rate (all sites)",
        (from_s, to_s, "time (s)"),
        (
            0.0,
            top.max(1e-9),
            match kind {
                TrainKind::Spikes => "rate (spikes/s)",
                TrainKind::Events => "rate (events/s)",
            },
        ),
        |c| {
            c.polyline(&samples, BLUE, 1.0);
            for (level, colour) in [(rate.threshold_hz, VERMILLION), (rate.edge_hz, ORANGE)] {
                c.segment((from_s, level), (to_s, level), colour, 1.0);
            }
            let threshold = format!("burst threshold ({:.1}/s)", rate.threshold_hz);
            let edge = format!("burst edges ({:.1}/s)", rate.edge_hz);
            c.legend(&[
                ("population rate", BLUE, LegendMark::Line),
                (&threshold, VERMILLION, LegendMark::Line),
                (&edge, ORANGE, LegendMark::Line),
            ]);
            Ok(Vec::new())
        },
    )
}

/// Most bins a histogram draws (a bound on work and on bars too thin to see).
pub const MAX_HISTOGRAM_BINS: usize = 200;

/// How a histogram's bins are chosen.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum BinRule {
    /// Freedman & Diaconis (1981): width 2 IQR n^(-1/3), as numpy's `bins='fd'`; Sturges's
    /// rule when the IQR is zero (numpy would draw one bar).
    FreedmanDiaconis,
    /// Sturges (1926): ceil(log2 n + 1) bins, as numpy's `bins='sturges'`.
    Sturges,
    /// This many equal bins (1 to [`MAX_HISTOGRAM_BINS`]).
    Count(usize),
}

/// Bin edges of `values` under `rule`, as `numpy.histogram_bin_edges` computes them: equal
/// bins from the smallest to the largest value. `None` without a finite value.
pub fn bin_edges(values: &[f64], rule: BinRule) -> Option<Vec<f64>> {
    let finite: Vec<f64> = values.iter().copied().filter(|v| v.is_finite()).collect();
    let lo = finite.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = finite.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    if finite.is_empty() {
        return None;
    }
    // numpy widens an empty range to [lo - 0.5, hi + 0.5].
    let (lo, hi) = if hi > lo {
        (lo, hi)
    } else {
        (lo - 0.5, hi + 0.5)
    };
    let n = finite.len() as f64;
    let sturges = || (n.log2() + 1.0).ceil().max(1.0) as usize;
    let bins = match rule {
        BinRule::Count(k) => k,
        BinRule::Sturges => sturges(),
        BinRule::FreedmanDiaconis => {
            let mut sorted = finite.clone();
            sorted.sort_by(f64::total_cmp);
            let iqr = crate::stats::quantile_sorted(&sorted, 0.75)
                - crate::stats::quantile_sorted(&sorted, 0.25);
            let width = 2.0 * iqr * n.powf(-1.0 / 3.0);
            if width > 0.0 {
                ((hi - lo) / width).ceil() as usize
            } else {
                sturges()
            }
        }
    }
    .clamp(1, MAX_HISTOGRAM_BINS);
    let step = (hi - lo) / bins as f64;
    let mut edges: Vec<f64> = (0..bins).map(|k| lo + k as f64 * step).collect();
    edges.push(hi);
    Some(edges)
}

/// Counts of `values` in the bins of `edges` (the last bin holds its right edge, as numpy).
fn histogram(values: &[f64], edges: &[f64]) -> Vec<usize> {
    let bins = edges.len() - 1;
    let (lo, hi) = (edges[0], edges[bins]);
    let mut counts = vec![0usize; bins];
    for &v in values.iter().filter(|v| v.is_finite()) {
        let k = (((v - lo) / (hi - lo) * bins as f64) as usize).min(bins - 1);
        // The arithmetic can land one bin off at an edge; settle it against the edges.
        let k = if v < edges[k] {
            k.saturating_sub(1)
        } else if k + 1 < bins && v >= edges[k + 1] {
            k + 1
        } else {
            k
        };
        counts[k] += 1;
    }
    counts
}

fn bars(
    values: &[f64],
    rule: BinRule,
    size: Size,
    title: &str,
    x_label: &str,
    unit: &str,
    colour: Colour,
) -> Result<Figure, FigureError> {
    let edges = bin_edges(values, rule).ok_or_else(|| empty("no values"))?;
    let counts = histogram(values, &edges);
    let top = counts.iter().copied().max().unwrap_or(1).max(1) as f64 * 1.1;
    let (x0, x1) = (edges[0], edges[edges.len() - 1]);
    let rule_words = match rule {
        BinRule::FreedmanDiaconis => "Freedman-Diaconis bins".to_string(),
        BinRule::Sturges => "Sturges bins".to_string(),
        BinRule::Count(_) => format!("{} bins", counts.len()),
    };
    let title = format!("{title} ({}, {rule_words})", values.len());
    chart(size, &title, (x0, x1, x_label), (0.0, top, "count"), |c| {
        for (w, &k) in edges.windows(2).zip(&counts) {
            c.rect((w[0], 0.0), (w[1], k as f64), colour, 1.0);
        }
        Ok(edges
            .windows(2)
            .zip(&counts)
            .map(|(w, &k)| {
                (
                    (w[0] + w[1]) / 2.0,
                    k as f64,
                    format!("{:.3}-{:.3} {unit}: {k}", w[0], w[1]),
                )
            })
            .collect())
    })
}

/// Histogram of interburst intervals (from burst start to next burst start), seconds.
pub fn interval_histogram(ibis: &[f64], rule: BinRule, size: Size) -> Result<Figure, FigureError> {
    if ibis.is_empty() {
        return Err(empty("fewer than two bursts, so no interburst intervals"));
    }
    bars(
        ibis,
        rule,
        size,
        "Interburst intervals",
        "interval (s)",
        "s",
        BLUE,
    )
}

/// Histogram of front speeds, mm/s.
pub fn speed_histogram(
    speeds_mm_s: &[f64],
    rule: BinRule,
    size: Size,
) -> Result<Figure, FigureError> {
    if speeds_mm_s.is_empty() {
        return Err(empty("no fronts"));
    }
    bars(
        speeds_mm_s,
        rule,
        size,
        "Front speeds",
        "speed (mm/s)",
        "mm/s",
        GREEN,
    )
}

/// Speed of every front against its start time with its 95% bootstrap interval: the
/// fronts with the burst (counted from 1) each belongs to.
pub fn speed_over_time(
    fronts: &[(usize, &FrontReport)],
    size: Size,
) -> Result<Figure, FigureError> {
    if fronts.is_empty() {
        return Err(empty("no fronts"));
    }
    let (t0, t1) =
        padded(fronts.iter().map(|(_, f)| f.start_s)).ok_or_else(|| empty("no times"))?;
    let top = fronts
        .iter()
        .map(|(_, f)| f.speed_ci95_mm_s[1].max(f.speed_mm_s))
        .filter(|v| v.is_finite())
        .fold(0.0, f64::max)
        * 1.1;
    chart_with_legend_row(
        size,
        "Front speed over the recording (95% intervals)",
        (t0, t1, "front start (s)"),
        (0.0, top.max(1e-9), "speed (mm/s)"),
        |c| {
            c.legend_above(&[
                ("front speed", BLUE, LegendMark::Dot),
                ("95% interval", SKY_BLUE, LegendMark::Line),
            ]);
            for (_, f) in fronts {
                c.segment(
                    (f.start_s, f.speed_ci95_mm_s[0]),
                    (f.start_s, f.speed_ci95_mm_s[1]),
                    SKY_BLUE,
                    2.0,
                );
            }
            for (_, f) in fronts {
                c.circle(f.start_s, f.speed_mm_s, 3.0, BLUE, true);
            }
            Ok(fronts
                .iter()
                .map(|(b, f)| {
                    (
                        f.start_s,
                        f.speed_mm_s,
                        format!(
                            "burst {} at {:.2} s: {} mm/s (95% {}-{})",
                            b,
                            f.start_s,
                            super::speed_text(f.speed_mm_s),
                            super::speed_text(f.speed_ci95_mm_s[0]),
                            super::speed_text(f.speed_ci95_mm_s[1])
                        ),
                    )
                })
                .collect())
        },
    )
}

/// The giant component's share of the neurons against the target mean in-degree K, from an
/// in-degree sweep of one culture (`ringline simulate --in-degree-sweep`): plain series, one
/// entry per in-degree (`k`, `giant_fraction` between 0 and 1, and the read-out text).
pub fn in_degree_sweep(
    k: &[f64],
    giant_fraction: &[f64],
    readouts: &[String],
    size: Size,
) -> Result<Figure, FigureError> {
    let mut sorted: Vec<(f64, f64, &str)> = k
        .iter()
        .zip(giant_fraction)
        .zip(readouts)
        .filter(|((k, _), _)| k.is_finite())
        .map(|((&k, &g), r)| (k, g, r.as_str()))
        .collect();
    sorted.sort_by(|a, b| a.0.total_cmp(&b.0));
    let (k0, k1) = padded(sorted.iter().map(|p| p.0)).ok_or_else(|| empty("no in-degrees"))?;
    chart(
        size,
        "Giant component against mean in-degree",
        (k0, k1, "target mean in-degree K (inputs per neuron)"),
        (0.0, 1.05, "giant component (fraction of neurons)"),
        |c| {
            for pair in sorted.windows(2) {
                c.segment(
                    (pair[0].0, pair[0].1),
                    (pair[1].0, pair[1].1),
                    SKY_BLUE,
                    1.5,
                );
            }
            for p in &sorted {
                c.circle(p.0, p.1, 3.0, BLUE, true);
            }
            Ok(sorted.iter().map(|p| (p.0, p.1, p.2.to_string())).collect())
        },
    )
}

/// How many fronts started at each site, against the site's track coordinate (or rank on a
/// plane); bars are 0.6 site spacings wide.
pub fn initiation_sites(
    counts: &[crate::fronts::InitiationCount],
    site_spacing_um: Option<f64>,
    size: Size,
) -> Result<Figure, FigureError> {
    if counts.is_empty() {
        return Err(empty("no fronts, so no initiation sites"));
    }
    let on_track = counts.iter().all(|c| c.along_um.is_some());
    let xs: Vec<f64> = counts
        .iter()
        .enumerate()
        .map(|(k, c)| c.along_um.filter(|_| on_track).unwrap_or(k as f64))
        .collect();
    let (x0, x1) = padded(xs.iter().copied()).ok_or_else(|| empty("no positions"))?;
    let top = counts.iter().map(|c| c.count).max().unwrap_or(1).max(1) as f64 * 1.15;
    let width = if on_track {
        site_spacing_um.unwrap_or((x1 - x0) / 40.0).max(1e-9) * 0.6
    } else {
        0.6
    };
    let x_label = if on_track {
        "origin along the track (µm)"
    } else {
        "origin site (rank)"
    };
    chart(
        size,
        "Where fronts start",
        (x0 - width, x1 + width, x_label),
        (0.0, top, "fronts"),
        |c| {
            for (&x, k) in xs.iter().zip(counts) {
                c.rect(
                    (x - width / 2.0, 0.0),
                    (x + width / 2.0, k.count as f64),
                    PURPLE,
                    1.0,
                );
            }
            Ok(xs
                .iter()
                .zip(counts)
                .map(|(&x, k)| {
                    (
                        x,
                        k.count as f64,
                        format!(
                            "site {}: {} fronts ({:.0}%)",
                            k.site,
                            k.count,
                            100.0 * k.fraction
                        ),
                    )
                })
                .collect())
        },
    )
}

/// One site on the map of where bursts start.
#[derive(Debug, Clone, PartialEq)]
pub struct LeaderPoint {
    pub site: String,
    pub x_um: f64,
    pub y_um: f64,
    /// Bursts in which the site was among the leading sites, and all bursts.
    pub bursts_leading: usize,
    pub bursts: usize,
    /// Wilson 95% interval of the leading share.
    pub ci95: Option<[f64; 2]>,
}

/// Map of where bursts start: every site that activated at its layout position, with a disc
/// whose area is proportional to the share of bursts it led (hollow grey when it never led).
pub fn leader_map(points: &[LeaderPoint], size: Size) -> Result<Figure, FigureError> {
    if points.is_empty() {
        return Err(empty("no site activated in any burst"));
    }
    let x = padded(points.iter().map(|p| p.x_um)).ok_or_else(|| empty("no positions"))?;
    let y = padded(points.iter().map(|p| p.y_um)).ok_or_else(|| empty("no positions"))?;
    let ((x0, x1), (y0, y1)) = equal_scale_in(x, y, size, super::svg::ROOM_FOR_LEGEND_ROW_PX);
    let top = points
        .iter()
        .map(|p| p.bursts_leading)
        .max()
        .unwrap_or(0)
        .max(1) as f64;
    chart_with_legend_row(
        size,
        "Where bursts start: disc area = share of bursts the site led",
        (x0, x1, "x (µm)"),
        (y0, y1, "y (µm)"),
        |c| {
            c.legend_above(&[
                ("led bursts (area = share)", VERMILLION, LegendMark::Dot),
                ("never led", GREY, LegendMark::Ring),
            ]);
            for p in points {
                if p.bursts_leading == 0 {
                    c.circle(p.x_um, p.y_um, 2.5, GREY, false);
                } else {
                    let r = 3.0 + 11.0 * (p.bursts_leading as f64 / top).sqrt();
                    c.circle(p.x_um, p.y_um, r, VERMILLION, true);
                }
            }
            Ok(points
                .iter()
                .map(|p| {
                    let share = p.bursts_leading as f64 / p.bursts.max(1) as f64;
                    let ci = p.ci95.map_or(String::new(), |[a, b]| {
                        format!(", 95% {:.0}-{:.0}%", 100.0 * a, 100.0 * b)
                    });
                    (
                        p.x_um,
                        p.y_um,
                        format!(
                            "site {}: led {} of {} bursts ({:.0}%{ci})",
                            p.site,
                            p.bursts_leading,
                            p.bursts,
                            100.0 * share
                        ),
                    )
                })
                .collect())
        },
    )
}

/// Most bursts drawn as curves in the recruitment figure (the median uses all).
const RECRUITMENT_CURVES_DRAWN: usize = 200;

/// Recruitment: the fraction of a burst's active sites that had activated against the time
/// since its first activation (ms), one grey step curve per burst, and the median over bursts
/// of the time to reach each fraction (blue). `bursts` holds each burst's activation times
/// after its first, ms, ascending.
pub fn recruitment(bursts: &[Vec<f64>], size: Size) -> Result<Figure, FigureError> {
    let usable: Vec<&Vec<f64>> = bursts.iter().filter(|b| b.len() >= 2).collect();
    if usable.is_empty() {
        return Err(empty("no burst with two or more active sites"));
    }
    let longest = usable
        .iter()
        .filter_map(|b| b.last().copied())
        .fold(0.0, f64::max);
    let x1 = if longest > 0.0 { longest * 1.05 } else { 1.0 };
    // Time (ms) at which a burst had reached fraction f of its active sites: its k-th
    // activation with k = ceil(f n).
    let reach = |b: &Vec<f64>, f: f64| -> f64 {
        let k = ((f * b.len() as f64).ceil() as usize).clamp(1, b.len());
        b[k - 1]
    };
    let fractions: Vec<f64> = (1..=50).map(|k| k as f64 / 50.0).collect();
    let median: Vec<(f64, f64)> = fractions
        .iter()
        .filter_map(|&f| {
            let times: Vec<f64> = usable.iter().map(|b| reach(b, f)).collect();
            crate::stats::median(&times).map(|t| (t, f))
        })
        .collect();
    chart_with_legend_row(
        size,
        &format!("Recruitment of the active sites ({} bursts)", usable.len()),
        (0.0, x1, "time since the burst's first activation (ms)"),
        (0.0, 1.05, "fraction of active sites activated"),
        |c| {
            c.legend_above(&[
                ("each burst", GREY, LegendMark::Line),
                ("median over bursts", BLUE, LegendMark::Line),
            ]);
            for b in usable.iter().take(RECRUITMENT_CURVES_DRAWN) {
                let n = b.len() as f64;
                let mut steps = Vec::with_capacity(2 * b.len());
                for (k, &t) in b.iter().enumerate() {
                    if k > 0 {
                        steps.push((t, k as f64 / n));
                    }
                    steps.push((t, (k + 1) as f64 / n));
                }
                c.polyline(&steps, GREY, 0.6);
            }
            c.polyline(&median, BLUE, 2.5);
            Ok([0.1, 0.5, 0.9]
                .iter()
                .filter_map(|&f| {
                    let times: Vec<f64> = usable.iter().map(|b| reach(b, f)).collect();
                    crate::stats::median(&times).map(|t| {
                        (
                            t,
                            f,
                            format!(
                                "{:.0}% of the active sites within {t:.1} ms (median of {} bursts)",
                                100.0 * f,
                                usable.len()
                            ),
                        )
                    })
                })
                .collect())
        },
    )
}

/// Fraction of fronts that reached each distance from their origin, among those that could.
pub fn reliability(
    reliability: &[crate::fronts::ReliabilityPoint],
    size: Size,
) -> Result<Figure, FigureError> {
    let points: Vec<(f64, f64, usize, usize)> = reliability
        .iter()
        .filter_map(|p| {
            p.fraction
                .map(|f| (p.distance_um, f, p.fronts_reaching, p.fronts_able))
        })
        .collect();
    if points.is_empty() {
        return Err(empty("no propagation distances"));
    }
    let (x0, x1) = padded(points.iter().map(|p| p.0)).ok_or_else(|| empty("no distances"))?;
    chart(
        size,
        "Propagation reliability",
        (x0.min(0.0), x1, "distance from the origin (µm)"),
        (0.0, 1.05, "fraction of fronts reaching it"),
        |c| {
            let line: Vec<(f64, f64)> = points.iter().map(|p| (p.0, p.1)).collect();
            c.polyline(&line, GREEN, 2.0);
            for p in &points {
                c.circle(p.0, p.1, 3.0, GREEN, true);
            }
            Ok(points
                .iter()
                .map(|p| {
                    (
                        p.0,
                        p.1,
                        format!("{:.0} µm: {} of {} fronts", p.0, p.2, p.3),
                    )
                })
                .collect())
        },
    )
}

/// Distance a front has travelled from its origin to an activation, µm, along the path its
/// model describes ([`crate::fronts::FrontPath::distance_um`]): from the track coordinate
/// `along_um` on a line or ring `track`, from the layout position `xy_um` on a plane. `None`
/// when the report lacks what the model needs.
pub fn distance_from_origin_um(
    front: &FrontReport,
    track: &Track,
    along_um: Option<f64>,
    xy_um: [f64; 2],
) -> Option<f64> {
    let xy = along_um.is_none().then_some(xy_um);
    let d = front.path()?.distance_um(track, along_um, xy)?;
    // Drawn as distance travelled: on a line, both sides of the origin count forwards.
    Some(match front.model {
        FrontModel::LineOneWay | FrontModel::LineTwoWay => d.abs(),
        _ => d,
    })
}

/// Activation time against position for one burst (counted from 1), with the fitted model
/// and the lines of its 95% speed interval through the origin. On a track the position is
/// the track coordinate; on a plane it is the distance travelled from the origin.
pub fn activation_plot(b: &BurstResult, track: &Track, size: Size) -> Result<Figure, FigureError> {
    if b.activations.is_empty() {
        return Err(empty("no site activated in this burst"));
    }
    let circumference = match track {
        Track::Ring { .. } => track.length_um(),
        _ => None,
    };
    let on_track = !matches!(track, Track::Plane);
    let front = b.front.as_ref();
    let t_ref = b.start_s;
    // Position of each activation on the x axis.
    let position = |a: &crate::fronts::Activation| -> Option<f64> {
        if on_track {
            a.along_um
        } else {
            front.and_then(|f| distance_from_origin_um(f, track, None, [a.x_um, a.y_um]))
        }
    };
    let pts: Vec<(f64, f64, &crate::fronts::Activation)> = b
        .activations
        .iter()
        .filter_map(|a| position(a).map(|x| (x, (a.time_s - t_ref) * 1e3, a)))
        .collect();
    if pts.is_empty() {
        return Err(empty("no activation has a position to plot"));
    }
    // The model, sampled densely along the x axis.
    let (x0, x1) = padded(pts.iter().map(|p| p.0)).ok_or_else(|| empty("no positions"))?;
    let (x0, x1) = circumference.map_or((x0, x1), |c| (0.0, c));
    let model_at = |x: f64, speed_mm_s: f64| -> Option<f64> {
        let f = front?;
        let d = if on_track {
            // A one-way front on a line exists only on the side it travels to.
            if f.model == FrontModel::LineOneWay {
                let ahead = x - f.origin_along_um?;
                let forward = f.travel != Some(LineTravel::Decreasing);
                if (ahead < 0.0 && forward) || (ahead > 0.0 && !forward) {
                    return None;
                }
            }
            distance_from_origin_um(f, track, Some(x), [0.0, 0.0])?
        } else {
            x
        };
        // µm / (mm/s) = µm / (µm/ms) = ms
        Some((f.start_s - t_ref) * 1e3 + d / speed_mm_s)
    };
    let samples = 400;
    let curve = |speed: f64| -> Vec<Vec<(f64, f64)>> {
        // Split where the model jumps (a one-way ring front wraps round).
        let mut pieces: Vec<Vec<(f64, f64)>> = vec![Vec::new()];
        let mut previous: Option<f64> = None;
        for k in 0..=samples {
            let x = x0 + (x1 - x0) * k as f64 / samples as f64;
            let Some(y) = model_at(x, speed) else {
                continue;
            };
            if let Some(p) = previous {
                if (y - p).abs() > 0.25 * (x1 - x0) / speed.max(1e-9) {
                    pieces.push(Vec::new());
                }
            }
            previous = Some(y);
            if let Some(last) = pieces.last_mut() {
                last.push((x, y));
            }
        }
        pieces.retain(|p| p.len() >= 2);
        pieces
    };
    let fitted = front.map(|f| curve(f.speed_mm_s)).unwrap_or_default();
    let bounds: Vec<Vec<(f64, f64)>> = front
        .map(|f| {
            f.speed_ci95_mm_s
                .iter()
                .filter(|v| v.is_finite() && **v > 0.0)
                .flat_map(|&v| curve(v))
                .collect()
        })
        .unwrap_or_default();
    let ys = pts
        .iter()
        .map(|p| p.1)
        .chain(fitted.iter().flatten().map(|p| p.1));
    let (y0, y1) = padded(ys).ok_or_else(|| empty("no times"))?;
    let title = match front {
        Some(f) => format!(
            "Burst {}: {} front, {} mm/s (95% {}-{})",
            b.burst,
            f.model.to_string().replace('_', " "),
            super::speed_text(f.speed_mm_s),
            super::speed_text(f.speed_ci95_mm_s[0]),
            super::speed_text(f.speed_ci95_mm_s[1])
        ),
        None => format!(
            "Burst {}: no front ({})",
            b.burst,
            b.no_front_reason.as_deref().unwrap_or("no reason given")
        ),
    };
    let x_label = if on_track {
        "position along the track (µm)"
    } else {
        "distance travelled from the origin (µm)"
    };
    let y_label = format!("activation time after {:.3} s (ms)", t_ref);
    chart(size, &title, (x0, x1, x_label), (y0, y1, &y_label), |c| {
        for piece in &bounds {
            c.polyline(piece, SKY_BLUE, 1.0);
        }
        for piece in &fitted {
            c.polyline(piece, VERMILLION, 2.0);
        }
        use crate::fronts::ActivationStatus;
        for (x, y, a) in &pts {
            match a.status {
                ActivationStatus::Used => c.circle(*x, *y, 4.0, BLUE, true),
                ActivationStatus::Retimed => {
                    // Where its first spike was, joined to where the check re-timed it.
                    let first = (a.first_spike_s - t_ref) * 1e3;
                    c.polyline(&[(*x, first), (*x, *y)], GREY, 1.0);
                    c.circle(*x, first, 3.0, GREY, false);
                    c.circle(*x, *y, 4.0, BLUE, true);
                }
                ActivationStatus::EarlyOutlier | ActivationStatus::LateOutlier => {
                    c.circle(*x, *y, 4.0, ORANGE, false)
                }
                ActivationStatus::OffTrack => c.circle(*x, *y, 4.0, GREY, false),
            }
        }
        // Only the marks this burst shows.
        let mut legend: Vec<(&str, Colour, LegendMark)> =
            vec![("site used", BLUE, LegendMark::Dot)];
        if !fitted.is_empty() {
            legend.push(("fitted front", VERMILLION, LegendMark::Line));
        }
        if !bounds.is_empty() {
            legend.push(("95% interval of the speed", SKY_BLUE, LegendMark::Line));
        }
        if pts.iter().any(|p| p.2.status == ActivationStatus::Retimed) {
            legend.push(("first spike, before re-timing", GREY, LegendMark::Ring));
        }
        if pts.iter().any(|p| {
            matches!(
                p.2.status,
                ActivationStatus::EarlyOutlier | ActivationStatus::LateOutlier
            )
        }) {
            legend.push(("set aside as an outlier", ORANGE, LegendMark::Ring));
        }
        if pts.iter().any(|p| p.2.status == ActivationStatus::OffTrack) {
            legend.push(("off the track", GREY, LegendMark::Ring));
        }
        // In the upper corner the front leaves empty: left when times rise along x.
        let mid = (x0 + x1) / 2.0;
        let mean = |right: bool| {
            let ys: Vec<f64> = pts
                .iter()
                .filter(|p| (p.0 > mid) == right)
                .map(|p| p.1)
                .collect();
            ys.iter().sum::<f64>() / ys.len().max(1) as f64
        };
        c.legend_in(&legend, mean(false) <= mean(true));
        Ok(pts
            .iter()
            .map(|(x, y, a)| {
                let status = match a.status {
                    ActivationStatus::Used => String::new(),
                    ActivationStatus::Retimed => format!(
                        "; {} (its first spike: t = {:.4} s)",
                        a.status.describe(),
                        a.first_spike_s
                    ),
                    other => format!("; {}", other.describe()),
                };
                (
                    *x,
                    *y,
                    format!(
                        "site {}: {:.0} µm, {:.2} ms (t = {:.4} s){status}",
                        a.site, x, y, a.time_s
                    ),
                )
            })
            .collect())
    })
}
