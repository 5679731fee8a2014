//! A study's block series read as percolation: the recordings' population response curves
//! (each recording's `curves.csv`) pooled per level of a condition column, then
//! [`crate::response::percolation::percolation`] against the fully blocked level.

use super::StudyError;
use crate::csv_out::{number, CsvOut};
use crate::place::Place;
use crate::response::percolation::{percolation, BlockLevel, PercolationReport};
use crate::response::probit::DosePoint;

/// The series as read from the study, and the report on it.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct BlockSeries {
    pub by: String,
    /// The amplitude column's unit as `curves.csv` names it (`V`, `V_per_m`, ...).
    pub unit: String,
    /// Recordings pooled into each level, in level order.
    pub recordings: Vec<Vec<String>>,
    pub report: PercolationReport,
    /// Recordings left out (not analysed, or without stimuli), with the reason.
    pub left_out: Vec<String>,
}

/// Pools each recording's population curve (from its `curves.csv` text, by recording
/// name) per level of column `by` of `recordings.csv`, orders the levels (numerically when
/// every level is a number), and reads them against `blocked` (default: the last level).
pub fn block_series(
    recordings_csv: &str,
    curves: &[(String, String)],
    by: &str,
    blocked: Option<&str>,
) -> Result<BlockSeries, StudyError> {
    let place = || Place::file("recordings.csv");
    let table = super::compare::read_table("recordings.csv", recordings_csv)?;
    let (by_col, rec_col) = (table.col(by)?, table.col("recording")?);
    let mut levels: Vec<(String, Vec<String>)> = Vec::new();
    let mut left_out = Vec::new();
    let mut unit: Option<String> = None;
    let mut pooled: Vec<Vec<DosePoint>> = Vec::new();
    for row in &table.rows {
        let name = row.get(rec_col).cloned().unwrap_or_default();
        let level = row.get(by_col).cloned().unwrap_or_default();
        let Some((_, text)) = curves.iter().find(|c| c.0 == name) else {
            left_out.push(format!(
                "{name}: no curves.csv (not analysed, or no stimuli)"
            ));
            continue;
        };
        let (points, curve_unit) = population_points(text)
            .map_err(|m| StudyError::new(Place::file(&format!("{name}/curves.csv")), m))?;
        match &unit {
            Some(u) if *u != curve_unit => {
                return Err(StudyError::new(
                    Place::file(&format!("{name}/curves.csv")),
                    format!("amplitudes in {curve_unit}, where the other recordings use {u}; give every protocol in the same unit"),
                ))
            }
            _ => unit = Some(curve_unit),
        }
        let i = match levels.iter().position(|l| l.0 == level) {
            Some(i) => i,
            None => {
                levels.push((level.clone(), Vec::new()));
                pooled.push(Vec::new());
                levels.len() - 1
            }
        };
        levels[i].1.push(name);
        for p in points {
            match pooled[i].iter_mut().find(|q| q.amplitude == p.amplitude) {
                Some(q) => {
                    q.trials += p.trials;
                    q.responders += p.responders;
                }
                None => pooled[i].push(p),
            }
        }
    }
    if levels.len() < 2 {
        return Err(StudyError::new(
            place(),
            format!(
                "column {by:?} holds {} level(s) among the recordings with stimuli; a block series needs two or more, one of them fully blocked",
                levels.len()
            ),
        ));
    }
    let mut order: Vec<usize> = (0..levels.len()).collect();
    let numeric: Option<Vec<f64>> = levels.iter().map(|l| l.0.trim().parse().ok()).collect();
    if let Some(v) = &numeric {
        order.sort_by(|&a, &b| v[a].total_cmp(&v[b]));
    }
    let series: Vec<BlockLevel> = order
        .iter()
        .map(|&i| BlockLevel {
            name: levels[i].0.clone(),
            points: pooled[i].clone(),
        })
        .collect();
    let disconnected = match blocked {
        Some(b) => series.iter().position(|l| l.name == b).ok_or_else(|| {
            StudyError::new(
                place(),
                format!(
                    "no level {b:?} in column {by:?}; the levels are {}",
                    series
                        .iter()
                        .map(|l| l.name.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            )
        })?,
        None => series.len() - 1,
    };
    let report = percolation(&series, disconnected, 0.95)
        .map_err(|e| StudyError::new(place(), e.to_string()))?;
    Ok(BlockSeries {
        by: by.to_string(),
        unit: unit.unwrap_or_default(),
        recordings: order.iter().map(|&i| levels[i].1.clone()).collect(),
        report,
        left_out,
    })
}

/// The population rows of a `curves.csv`: (points, amplitude unit as in the column name).
fn population_points(text: &str) -> Result<(Vec<DosePoint>, String), String> {
    let mut reader = csv::Reader::from_reader(text.as_bytes());
    let header = reader.headers().map_err(|e| e.to_string())?.clone();
    let find = |n: &str| header.iter().position(|h| h == n);
    let amp = header
        .iter()
        .position(|h| h.starts_with("amplitude_"))
        .ok_or("expected an amplitude column")?;
    let (curve, trials, responders) = (
        find("curve").ok_or("expected a curve column")?,
        find("trials").ok_or("expected a trials column")?,
        find("responders").ok_or("expected a responders column")?,
    );
    let mut points = Vec::new();
    for (k, r) in reader.records().enumerate() {
        let r = r.map_err(|e| e.to_string())?;
        if r.get(curve) != Some("population") {
            continue;
        }
        let field = |i: usize| r.get(i).unwrap_or_default();
        let bad = |what: &str| format!("line {}: expected {what}", k + 2);
        points.push(DosePoint {
            amplitude: field(amp).parse().map_err(|_| bad("an amplitude"))?,
            trials: field(trials)
                .parse()
                .map_err(|_| bad("a count of trials"))?,
            responders: field(responders)
                .parse()
                .map_err(|_| bad("a count of responders"))?,
        });
    }
    Ok((points, header[amp]["amplitude_".len()..].to_string()))
}

impl BlockSeries {
    /// A text summary, one line per level.
    pub fn to_text(&self) -> String {
        use std::fmt::Write;
        let unit = self.unit.replace("_per_", "/");
        let mut out = format!(
            "Block series   {} levels of {:?}; disconnected curve: {}\n",
            self.report.levels.len(),
            self.by,
            self.report.disconnected
        );
        let f = |v: Option<f64>| v.map_or("-".to_string(), |v| format!("{v:.3}"));
        for (l, recs) in self.report.levels.iter().zip(&self.recordings) {
            let _ = writeln!(
                out,
                "  {:<12} ({} recordings): network threshold {} {unit}, ignition fraction {}, giant component {}{}",
                l.name,
                recs.len(),
                f(l.threshold),
                f(l.ignition_fraction),
                f(l.giant_component),
                l.giant_component_ci
                    .map_or(String::new(), |c| format!(" (95% CI {:.3}-{:.3})", c[0], c[1]))
            );
        }
        for l in &self.left_out {
            let _ = writeln!(out, "left out: {l}");
        }
        out
    }

    /// `percolation.csv`: one row per level.
    pub fn percolation_csv(&self) -> String {
        let u = &self.unit;
        let header = [
            self.by.clone(),
            "recordings".into(),
            "fit".into(),
            format!("network_threshold_{u}"),
            "ignition_fraction".into(),
            "giant_component".into(),
            "giant_component_ci95_low".into(),
            "giant_component_ci95_high".into(),
            "giant_trials".into(),
            "disconnected".into(),
        ];
        let mut out = CsvOut::new(&header);
        for (l, recs) in self.report.levels.iter().zip(&self.recordings) {
            out.row([
                l.name.clone(),
                recs.join(";"),
                l.fit.kind().to_string(),
                number(l.threshold),
                number(l.ignition_fraction),
                number(l.giant_component),
                number(l.giant_component_ci.map(|c| c[0])),
                number(l.giant_component_ci.map(|c| c[1])),
                l.giant_trials.to_string(),
                (l.name == self.report.disconnected).to_string(),
            ]);
        }
        out.finish()
    }
}
