//! Figures of a comparison of conditions (plain series in): the estimation plot of one
//! metric (every unit's value per condition, paired lines for paired designs, and each
//! condition's difference from the reference with its 95% interval, drawn from the
//! reference's median in the metric's own unit), and the curve of an ordered condition
//! (median and quartiles of the units at each numeric level). Written by
//! [`compare_output_files`] beside comparisons.csv.

use super::figures::{
    chart, empty, padded, Figure, FigureError, Size, BLACK, BLUE, GREEN, GREY, VERMILLION,
};
use super::svg::{LegendMark, Plot};
use crate::stats::{median, quantile};
use crate::study::compare::{CompareReport, TestKind};

/// An axis label with its unit for the metrics of recordings.csv (the column name as is
/// for others; their unit is in the name).
pub fn metric_label(metric: &str) -> String {
    let known = match metric {
        "median_speed_mm_s" => "median front speed (mm/s)",
        "speed_mm_s" => "front speed (mm/s)",
        "direction_first_fraction" => "share of fronts in the first direction",
        "burst_rate_per_min" => "bursts per minute",
        "ibi_median_s" => "median interburst interval (s)",
        "ibi_cv" => "CV of interburst intervals",
        "reaching_end_fraction" => "share of fronts reaching the end",
        "mean_sttc" => "mean STTC (no unit)",
        "kuramoto_r" => "Kuramoto R (no unit)",
        "recruit_10_ms" | "recruit_50_ms" | "recruit_90_ms" => {
            return format!(
                "time to recruit {}% of the active sites (ms)",
                &metric["recruit_".len()..metric.len() - 3]
            )
        }
        _ => "",
    };
    if !known.is_empty() {
        return known.to_string();
    }
    // Any other column: its words, and the unit its name ends with.
    const UNITS: [(&str, &str); 9] = [
        ("_mm_s", "mm/s"),
        ("_per_min", "per minute"),
        ("_ms", "ms"),
        ("_um", "µm"),
        ("_mm", "mm"),
        ("_hz", "Hz"),
        ("_s", "s"),
        ("_fraction", "share"),
        ("_count", "count"),
    ];
    let lower = metric.to_ascii_lowercase();
    match UNITS.iter().find(|(suffix, _)| lower.ends_with(suffix)) {
        Some((suffix, unit)) => format!(
            "{} ({unit})",
            metric[..metric.len() - suffix.len()].replace('_', " ")
        ),
        None => metric.replace('_', " "),
    }
}

/// One condition's unit values.
#[derive(Debug, Clone, PartialEq)]
pub struct ConditionUnits {
    pub name: String,
    /// (unit, value).
    pub units: Vec<(String, f64)>,
}

/// A condition's difference from the reference (condition index, effect, interval).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EffectMark {
    pub condition: usize,
    pub effect: f64,
    pub interval: Option<[f64; 2]>,
}

/// The estimation plot of one metric; the first condition is the reference.
pub fn estimation_plot(
    metric: &str,
    conditions: &[ConditionUnits],
    paired: bool,
    effects: &[EffectMark],
    size: Size,
) -> Result<Figure, FigureError> {
    let reference = conditions
        .first()
        .and_then(|c| median(&c.units.iter().map(|u| u.1).collect::<Vec<_>>()))
        .ok_or_else(|| empty("the reference condition has no values"))?;
    let values = conditions
        .iter()
        .flat_map(|c| c.units.iter().map(|u| u.1))
        .chain(effects.iter().flat_map(|e| {
            let mut v = vec![reference + e.effect];
            v.extend(e.interval.into_iter().flatten().map(|x| reference + x));
            v
        }));
    let (y0, y1) = padded(values).ok_or_else(|| empty("no values"))?;
    // Room above for the legend (4 rows: about a quarter of the plot's height).
    let y1 = y1 + 0.45 * (y1 - y0);
    let names: Vec<String> = conditions
        .iter()
        .map(|c| format!("{} (n = {})", c.name, c.units.len()))
        .collect();
    let mut plot = Plot::with_categories(
        size.width_px,
        size.height_px,
        &format!(
            "{}: each unit, and the difference from {}",
            metric_label(metric),
            conditions[0].name
        ),
        &names,
        "condition (n = replication units)",
        (y0, y1, &metric_label(metric)),
    );
    let jitter = |i: usize| ((i % 5) as f64 - 2.0) * 0.04;
    plot.dashed(
        (-0.5, reference),
        (conditions.len() as f64 - 0.5, reference),
        GREY,
        1.0,
    );
    if paired {
        for pair in conditions.windows(2) {
            for (i, (u, v)) in pair[0].units.iter().enumerate() {
                if let Some((j, (_, w))) = pair[1].units.iter().enumerate().find(|x| &x.1 .0 == u) {
                    let k = conditions
                        .iter()
                        .position(|c| c.name == pair[0].name)
                        .unwrap_or(0) as f64;
                    plot.segment((k + jitter(i), *v), (k + 1.0 + jitter(j), *w), GREY, 1.0);
                }
            }
        }
    }
    for (k, c) in conditions.iter().enumerate() {
        for (i, (_, v)) in c.units.iter().enumerate() {
            plot.circle(k as f64 + jitter(i), *v, 3.5, BLUE, true);
        }
        if let Some(m) = median(&c.units.iter().map(|u| u.1).collect::<Vec<_>>()) {
            plot.segment((k as f64 - 0.2, m), (k as f64 + 0.2, m), BLACK, 2.5);
        }
    }
    for e in effects {
        let x = e.condition as f64 + 0.3;
        if let Some([lo, hi]) = e.interval {
            plot.segment((x, reference + lo), (x, reference + hi), VERMILLION, 2.0);
        }
        plot.circle(x, reference + e.effect, 4.0, VERMILLION, true);
    }
    // The legend goes in the top corner over the lower end of the data.
    let end_median = |c: Option<&ConditionUnits>| {
        c.and_then(|c| median(&c.units.iter().map(|u| u.1).collect::<Vec<_>>()))
    };
    let left = end_median(conditions.first()) < end_median(conditions.last());
    plot.legend_in(
        &[
            ("replication unit", BLUE, LegendMark::Dot),
            ("median of the units", BLACK, LegendMark::Line),
            ("reference median", GREY, LegendMark::Dashed),
            (
                "difference from the reference, 95% CI",
                VERMILLION,
                LegendMark::Line,
            ),
        ],
        left,
    );
    Ok(Figure {
        x_axis: Some(plot.x_span()),
        svg: plot.finish(),
        width_px: size.width_px,
        height_px: size.height_px,
        points: Vec::new(),
    })
}

/// The curve of an ordered condition: at each numeric level, the units' median with their
/// quartiles, and every unit.
pub fn level_curve(
    metric: &str,
    condition_label: &str,
    levels: &[(f64, Vec<f64>)],
    size: Size,
) -> Result<Figure, FigureError> {
    let (x0, x1) = padded(levels.iter().map(|l| l.0)).ok_or_else(|| empty("no levels"))?;
    let (y0, y1) = padded(levels.iter().flat_map(|l| l.1.iter().copied()))
        .ok_or_else(|| empty("no values"))?;
    chart(
        size,
        &format!("{} across {condition_label}", metric_label(metric)),
        (x0, x1, condition_label),
        (y0, y1 + 0.3 * (y1 - y0), &metric_label(metric)),
        |c| {
            let mut line = Vec::new();
            for (x, v) in levels {
                for y in v {
                    c.circle(*x, *y, 3.0, GREY, false);
                }
                if let (Some(m), Some(q1), Some(q3)) =
                    (median(v), quantile(v, 0.25), quantile(v, 0.75))
                {
                    c.segment((*x, q1), (*x, q3), GREEN, 2.0);
                    line.push((*x, m));
                }
            }
            c.polyline(&line, GREEN, 2.0);
            for (x, m) in &line {
                c.circle(*x, *m, 4.0, GREEN, true);
            }
            c.legend(&[
                ("replication unit", GREY, LegendMark::Ring),
                ("median with quartiles", GREEN, LegendMark::Line),
            ]);
            Ok(line
                .iter()
                .map(|(x, m)| (*x, *m, format!("{x}: median {m:.4}")))
                .collect())
        },
    )
}

/// The files of `ringline compare`: comparisons.csv, an estimation plot per metric
/// (`estimation-METRIC.svg`) and, for an ordered condition with numeric levels, the curve
/// per metric (`levels-METRIC.svg`).
pub fn compare_output_files(report: &CompareReport) -> Vec<(String, String)> {
    let mut files = vec![("comparisons.csv".to_string(), report.comparisons_csv())];
    let size = Size {
        width_px: 760,
        height_px: 380,
    };
    for m in &report.units {
        let conditions: Vec<ConditionUnits> = report
            .conditions
            .iter()
            .zip(&m.conditions)
            .map(|(name, units)| ConditionUnits {
                name: name.clone(),
                units: units.clone(),
            })
            .collect();
        let effects: Vec<EffectMark> = report
            .comparisons
            .iter()
            .filter(|c| c.metric == m.metric && c.test != TestKind::JonckheereTerpstra)
            .filter_map(|c| {
                let k = report.conditions.iter().position(|n| *n == c.condition)?;
                c.effect.map(|effect| EffectMark {
                    condition: k,
                    effect,
                    interval: c.effect_ci,
                })
            })
            .collect();
        if let Ok(f) = estimation_plot(
            &m.metric,
            &conditions,
            report.settings.paired,
            &effects,
            size,
        ) {
            files.push((format!("estimation-{}.svg", m.metric), f.svg));
        }
        if report.ordered {
            let levels: Vec<(f64, Vec<f64>)> = report
                .conditions
                .iter()
                .zip(&m.conditions)
                .filter_map(|(name, units)| {
                    name.trim()
                        .parse::<f64>()
                        .ok()
                        .map(|x| (x, units.iter().map(|u| u.1).collect()))
                })
                .collect();
            if let Ok(f) = level_curve(&m.metric, &report.settings.by, &levels, size) {
                files.push((format!("levels-{}.svg", m.metric), f.svg));
            }
        }
    }
    files
}
