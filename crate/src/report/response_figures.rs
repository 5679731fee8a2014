//! Figures of stimulus responses (plain series in): response curves (the share responding
//! at each amplitude with its Wilson interval, and the fitted cumulative Gaussian), and a
//! block series read as percolation (network threshold, ignition fraction and giant
//! component against the level).

use super::figures::{
    empty, padded, Figure, FigureError, Size, BLACK, BLUE, GREEN, ORANGE, PURPLE, SKY_BLUE,
    VERMILLION,
};
use super::svg::{Colour, LegendMark, Plot};
use crate::response::percolation::PercolationReport;
use crate::response::probit::{CurveFit, DosePoint};
use crate::stats::wilson_interval;

/// One curve to draw: its name, its points and its fit.
#[derive(Debug, Clone, PartialEq)]
pub struct CurveSeries {
    pub name: String,
    pub points: Vec<DosePoint>,
    pub fit: CurveFit,
}

const PALETTE: [Colour; 7] = [BLACK, BLUE, VERMILLION, GREEN, ORANGE, PURPLE, SKY_BLUE];

/// Response curves: per curve, the share responding at each amplitude (dots, with the
/// Wilson 95% interval) and its fit (a line; an all-or-none step is drawn as a dashed
/// vertical at its bounds' middle). `unit` names the amplitude's unit.
pub fn response_curves(
    title: &str,
    curves: &[CurveSeries],
    unit: &str,
    size: Size,
) -> Result<Figure, FigureError> {
    let (x0, x1) = padded(
        curves
            .iter()
            .flat_map(|c| c.points.iter().map(|p| p.amplitude)),
    )
    .ok_or_else(|| empty("no amplitudes"))?;
    let mut plot = Plot::new(
        size.width_px,
        size.height_px,
        title,
        (x0, x1, &format!("stimulus amplitude ({unit})")),
        (0.0, 1.18, "share of sites responding"),
    );
    let mut legend: Vec<(String, Colour)> = Vec::new();
    for (k, c) in curves.iter().enumerate() {
        let colour = PALETTE[k % PALETTE.len()];
        for p in c.points.iter().filter(|p| p.trials > 0) {
            if let Some([lo, hi]) = wilson_interval(p.responders, p.trials, 0.95) {
                plot.segment((p.amplitude, lo), (p.amplitude, hi), colour, 1.0);
            }
            plot.circle(
                p.amplitude,
                p.responders as f64 / p.trials as f64,
                3.5,
                colour,
                true,
            );
        }
        match &c.fit {
            CurveFit::Fitted(f) => {
                let line: Vec<(f64, f64)> = (0..=120)
                    .map(|i| {
                        let x = x0 + (x1 - x0) * i as f64 / 120.0;
                        (
                            x,
                            crate::response::probit::normal_cdf(f.intercept + f.slope * x),
                        )
                    })
                    .collect();
                plot.polyline(&line, colour, 1.8);
            }
            CurveFit::Separated { below, above } => {
                let x = 0.5 * (below + above);
                plot.dashed((x, 0.0), (x, 1.0), colour, 1.5);
            }
            _ => {}
        }
        legend.push((format!("{} ({})", c.name, describe(&c.fit, unit)), colour));
    }
    let entries: Vec<(&str, Colour, LegendMark)> = legend
        .iter()
        .map(|(t, c)| (t.as_str(), *c, LegendMark::Line))
        .take(8)
        .collect();
    plot.legend_in(&entries, true);
    Ok(Figure {
        x_axis: Some(plot.x_span()),
        svg: plot.finish(),
        width_px: size.width_px,
        height_px: size.height_px,
        points: Vec::new(),
    })
}

fn describe(fit: &CurveFit, unit: &str) -> String {
    match fit {
        CurveFit::Fitted(f) => format!("50% at {:.3} {unit}", f.threshold),
        CurveFit::Separated { below, above } => format!("step {below}-{above} {unit}"),
        other => other.kind().replace('_', " "),
    }
}

/// The block series against its level (levels in order, at x = 0, 1, ...): the ignition
/// fraction and the giant component with its interval (left panel's shares), beside the
/// network threshold (written in the legend per level).
pub fn percolation_figure(
    report: &PercolationReport,
    level_label: &str,
    unit: &str,
    size: Size,
) -> Result<Figure, FigureError> {
    if report.levels.is_empty() {
        return Err(empty("no levels"));
    }
    let names: Vec<String> = report
        .levels
        .iter()
        .map(|l| match l.threshold {
            Some(t) => format!("{} (V* {t:.3} {unit})", l.name),
            None => format!("{} (no threshold)", l.name),
        })
        .collect();
    let mut plot = Plot::with_categories(
        size.width_px,
        size.height_px,
        "Ignition fraction and giant component across the block series",
        &names,
        level_label,
        (0.0, 1.25, "share of neurons"),
    );
    let mut ignition = Vec::new();
    let mut giant = Vec::new();
    for (k, l) in report.levels.iter().enumerate() {
        let x = k as f64;
        if let Some(f) = l.ignition_fraction {
            plot.circle(x - 0.06, f, 4.0, BLUE, true);
            ignition.push((x - 0.06, f));
        }
        if let Some(g) = l.giant_component {
            if let Some([lo, hi]) = l.giant_component_ci {
                plot.segment((x + 0.06, lo), (x + 0.06, hi), VERMILLION, 1.5);
            }
            plot.circle(x + 0.06, g, 4.0, VERMILLION, true);
            giant.push((x + 0.06, g));
        }
    }
    plot.polyline(&ignition, BLUE, 1.2);
    plot.polyline(&giant, VERMILLION, 1.2);
    plot.legend_in(
        &[
            (
                "ignition fraction f* (disconnected curve at the network threshold V*)",
                BLUE,
                LegendMark::Dot,
            ),
            ("giant component g, 95% CI", VERMILLION, LegendMark::Line),
        ],
        true,
    );
    Ok(Figure {
        x_axis: Some(plot.x_span()),
        svg: plot.finish(),
        width_px: size.width_px,
        height_px: size.height_px,
        points: Vec::new(),
    })
}

/// The network threshold V* of each level of a block series (levels in order at x = 0, 1,
/// ...), with the disconnected curve's 50% point as a dashed line for reference.
pub fn threshold_figure(
    report: &PercolationReport,
    level_label: &str,
    unit: &str,
    size: Size,
) -> Result<Figure, FigureError> {
    let values: Vec<(usize, f64)> = report
        .levels
        .iter()
        .enumerate()
        .filter_map(|(k, l)| l.threshold.map(|t| (k, t)))
        .collect();
    let (y0, y1) = padded(values.iter().map(|v| v.1)).ok_or_else(|| empty("no thresholds"))?;
    let names: Vec<String> = report.levels.iter().map(|l| l.name.clone()).collect();
    let mut plot = Plot::with_categories(
        size.width_px,
        size.height_px,
        "Network threshold across the block series",
        &names,
        level_label,
        (
            y0,
            y1 + 0.25 * (y1 - y0),
            &format!("network threshold V* ({unit})"),
        ),
    );
    let line: Vec<(f64, f64)> = values.iter().map(|&(k, t)| (k as f64, t)).collect();
    plot.polyline(&line, BLUE, 1.2);
    for &(x, y) in &line {
        plot.circle(x, y, 4.0, BLUE, true);
    }
    let mut legend = vec![(
        "network threshold (50% point of the level's curve)",
        BLUE,
        LegendMark::Dot,
    )];
    if let CurveFit::Fitted(f) = &report.disconnected_fit {
        plot.dashed(
            (-0.5, f.threshold),
            (names.len() as f64 - 0.5, f.threshold),
            BLACK,
            1.0,
        );
        legend.push(("disconnected curve's 50% point", BLACK, LegendMark::Dashed));
    }
    plot.legend_in(&legend, false);
    Ok(Figure {
        x_axis: Some(plot.x_span()),
        svg: plot.finish(),
        width_px: size.width_px,
        height_px: size.height_px,
        points: Vec::new(),
    })
}

/// The files of a block series: `percolation.csv`, `percolation.svg` (ignition fraction and
/// giant component per level), `thresholds.svg` (the network threshold per level) and
/// `curves-by-level.svg` (each level's pooled population curve with its fit).
pub fn percolation_output_files(
    series: &crate::study::percolation::BlockSeries,
) -> Vec<(String, String)> {
    let size = Size {
        width_px: 760,
        height_px: 420,
    };
    let unit = series.unit.replace("_per_", "/").replace("uA", "µA");
    let mut files = vec![("percolation.csv".to_string(), series.percolation_csv())];
    if let Ok(f) = percolation_figure(&series.report, &series.by, &unit, size) {
        files.push(("percolation.svg".into(), f.svg));
    }
    if let Ok(f) = threshold_figure(&series.report, &series.by, &unit, size) {
        files.push(("thresholds.svg".into(), f.svg));
    }
    let curves: Vec<CurveSeries> = series
        .report
        .levels
        .iter()
        .zip(&series.report.levels_points)
        .map(|(l, points)| CurveSeries {
            name: format!("{} {}", series.by, l.name),
            points: points.clone(),
            fit: l.fit.clone(),
        })
        .collect();
    if let Ok(f) = response_curves(
        "Population response curves per level, with fits",
        &curves,
        &unit,
        size,
    ) {
        files.push(("curves-by-level.svg".into(), f.svg));
    }
    files
}
