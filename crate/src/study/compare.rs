//! Conditions compared: every chosen metric of a study's `recordings.csv`, condition against
//! the reference condition (the first in the manifest), at the level of the replication
//! unit (a culture or well column; each recording is its own unit when none is named).
//!
//! Estimation first: the difference of the conditions' medians over units with its
//! percentile bootstrap interval, and the Hodges-Lehmann shift with its distribution-free
//! interval; then the test (Mann-Whitney for independent units, Wilcoxon signed-rank for
//! paired ones, and Jonckheere-Terpstra across all levels when the condition is ordered:
//! numeric values under a column whose name carries a unit). p-values over all metrics and
//! comparisons are adjusted together (Holm by default, or Benjamini-Hochberg).

use super::bootstrap::{
    hierarchical_median_difference, percentile_difference, percentile_one, Nested,
};
use super::inference::{
    adjust, jonckheere_terpstra, mann_whitney_u, shift_paired, shift_two_sample,
    wilcoxon_signed_rank, Adjustment, TestOutcome,
};
use super::StudyError;
use crate::csv_out::{number, CsvOut};
use crate::place::Place;
use crate::stats::median;
use serde::{Deserialize, Serialize};

/// What to compare and how.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct CompareSettings {
    /// The condition column of the manifest.
    pub by: String,
    /// The replication unit's column (culture, well); `None`: each recording.
    pub unit: Option<String>,
    /// The same units in every condition: paired differences.
    pub paired: bool,
    /// Metrics (columns of recordings.csv, fronts.csv or bursts.csv); empty:
    /// [`DEFAULT_METRICS`].
    pub metrics: Vec<String>,
    pub adjustment: Adjustment,
    pub confidence: f64,
    pub resamples: usize,
    pub seed: u64,
}

impl Default for CompareSettings {
    fn default() -> Self {
        CompareSettings {
            by: "condition".into(),
            unit: None,
            paired: false,
            metrics: Vec::new(),
            adjustment: Adjustment::Holm,
            confidence: 0.95,
            resamples: 2000,
            seed: 3,
        }
    }
}

/// Metrics compared when none are named.
pub const DEFAULT_METRICS: [&str; 8] = [
    "median_speed_mm_s",
    "direction_first_fraction",
    "burst_rate_per_min",
    "ibi_median_s",
    "ibi_cv",
    "reaching_end_fraction",
    "mean_sttc",
    "kuramoto_r",
];

/// Which test a comparison used.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum TestKind {
    MannWhitney,
    WilcoxonSignedRank,
    JonckheereTerpstra,
}

impl TestKind {
    pub fn as_str(self) -> &'static str {
        match self {
            TestKind::MannWhitney => "Mann-Whitney U",
            TestKind::WilcoxonSignedRank => "Wilcoxon signed-rank",
            TestKind::JonckheereTerpstra => "Jonckheere-Terpstra trend",
        }
    }
}

/// One comparison of one metric.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Comparison {
    pub metric: String,
    /// The reference condition and the one compared with it (for a trend: the first and
    /// last levels).
    pub reference: String,
    pub condition: String,
    /// Units with a value in each.
    pub n_reference: usize,
    pub n_condition: usize,
    /// Median over the condition's units minus the reference's (for paired units, the
    /// median of the paired differences), in the metric's unit; with its interval.
    pub effect: Option<f64>,
    pub effect_ci: Option<[f64; 2]>,
    /// Hodges-Lehmann shift and its interval.
    pub shift: Option<f64>,
    pub shift_ci: Option<[f64; 2]>,
    pub test: TestKind,
    pub outcome: TestOutcome,
    /// Adjusted over every comparison of the report.
    pub p_adjusted: Option<f64>,
    /// What the effect and its interval were computed on.
    pub values: ValueLevel,
}

/// What a comparison's effect was computed on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ValueLevel {
    /// One value per replication unit (the median of its recordings).
    Units,
    /// Every front, nested in recordings nested in units: the difference of the pooled
    /// medians with a hierarchical bootstrap interval (Saravanan et al. 2020); the shift
    /// and the test still use one value per unit.
    NestedFronts,
    /// Every burst, nested likewise.
    NestedBursts,
}

impl ValueLevel {
    pub fn as_str(self) -> &'static str {
        match self {
            ValueLevel::Units => "one value per unit",
            ValueLevel::NestedFronts => {
                "fronts nested in recordings and units (hierarchical bootstrap)"
            }
            ValueLevel::NestedBursts => {
                "bursts nested in recordings and units (hierarchical bootstrap)"
            }
        }
    }
}

/// Where a metric's values come from.
enum Source {
    /// A column of recordings.csv.
    Recordings(usize),
    /// A column of the n-th table per event (fronts.csv, bursts.csv).
    Nested(usize, usize),
}

/// One condition's (unit, value) pairs.
type UnitValues = Vec<(String, f64)>;

/// A table of the study, read whole.
pub(super) struct Table {
    pub(super) name: &'static str,
    pub(super) header: Vec<String>,
    pub(super) rows: Vec<Vec<String>>,
}

impl Table {
    fn find(&self, column: &str) -> Option<usize> {
        self.header
            .iter()
            .position(|h| h.eq_ignore_ascii_case(column))
    }

    pub(super) fn col(&self, column: &str) -> Result<usize, StudyError> {
        self.find(column).ok_or_else(|| {
            StudyError::new(
                Place::file(self.name).at_line(1),
                format!(
                    "there is no column {column:?}; the columns are {}",
                    self.header.join(", ")
                ),
            )
        })
    }
}

pub(super) fn read_table(name: &'static str, text: &str) -> Result<Table, StudyError> {
    let mut reader = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .from_reader(text.as_bytes());
    let header = reader
        .headers()
        .map_err(|e| StudyError::new(Place::file(name), e.to_string()))?
        .iter()
        .map(str::to_string)
        .collect();
    let mut rows = Vec::new();
    for (k, r) in reader.records().enumerate() {
        let r =
            r.map_err(|e| StudyError::new(Place::file(name).at_line(k as u64 + 2), e.to_string()))?;
        rows.push(r.iter().map(str::to_string).collect());
    }
    Ok(Table { name, header, rows })
}

/// Per condition: the units' names and their values nested as units -> recordings -> fronts,
/// from a table per event (fronts.csv or bursts.csv, which carry the manifest's columns).
fn nested_values(
    fronts: &Table,
    metric: usize,
    settings: &CompareSettings,
    conditions: &[String],
    analysed: &[&String],
) -> Result<Vec<(Vec<String>, Nested)>, StudyError> {
    let by = fronts.col(&settings.by)?;
    let unit = settings
        .unit
        .as_deref()
        .map(|u| fronts.col(u))
        .transpose()?;
    let recording = fronts.col("recording")?;
    Ok(conditions
        .iter()
        .map(|c| {
            let mut names: Vec<String> = Vec::new();
            let mut cultures: Nested = Vec::new();
            let mut recordings: Vec<Vec<String>> = Vec::new();
            for r in fronts
                .rows
                .iter()
                .filter(|r| &r[by] == c && analysed.contains(&&r[recording]))
            {
                let Some(v) = finite(&r[metric]) else {
                    continue;
                };
                let u = unit.map_or_else(|| r[recording].clone(), |k| r[k].clone());
                let ui = match names.iter().position(|n| *n == u) {
                    Some(i) => i,
                    None => {
                        names.push(u);
                        cultures.push(Vec::new());
                        recordings.push(Vec::new());
                        names.len() - 1
                    }
                };
                let ri = match recordings[ui].iter().position(|n| *n == r[recording]) {
                    Some(i) => i,
                    None => {
                        recordings[ui].push(r[recording].clone());
                        cultures[ui].push(Vec::new());
                        recordings[ui].len() - 1
                    }
                };
                cultures[ui][ri].push(v);
            }
            (names, cultures)
        })
        .collect())
}

/// All comparisons of a study.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CompareReport {
    pub settings: CompareSettings,
    /// Conditions in manifest order; `ordered` when numeric under a column with a unit.
    pub conditions: Vec<String>,
    pub ordered: bool,
    pub comparisons: Vec<Comparison>,
    /// Each metric's unit values per condition (in `conditions` order), for the figures.
    pub units: Vec<MetricUnits>,
    /// Recordings left out (failed, or no value), with the reason.
    pub left_out: Vec<String>,
}

/// One metric's values per replication unit, per condition.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MetricUnits {
    pub metric: String,
    /// (unit, median of its recordings' values) per condition.
    pub conditions: Vec<Vec<(String, f64)>>,
}

/// Whether a column name carries a unit: `calcium_mM`, `dose (uM)`, `div_days`, ...
fn has_unit(name: &str) -> bool {
    let lower = name.to_ascii_lowercase();
    name.contains('(')
        || name.contains('[')
        || [
            "_mm", "_um", "_nm", "_m", "_mg", "_ug", "_days", "_day", "_div", "_h", "_hz", "_pct",
            "_percent", "_s", "_ms", "_mv",
        ]
        .iter()
        .any(|u| lower.ends_with(u))
}

/// The study's tables as text, as `batch` or `combine` wrote them. `fronts` and `bursts`
/// are needed only for metrics measured per front or per burst.
#[derive(Debug, Clone, Copy, Default)]
pub struct StudyTexts<'a> {
    pub recordings: &'a str,
    pub fronts: Option<&'a str>,
    pub bursts: Option<&'a str>,
}

/// Compares the conditions of a study. Metrics are looked up in `recordings.csv` first (one
/// value per recording), then in `fronts.csv` (one per front) and `bursts.csv` (one per
/// burst); the last two are compared with the events nested in recordings and units.
pub fn compare(texts: StudyTexts, settings: &CompareSettings) -> Result<CompareReport, StudyError> {
    let mut nested_tables: Vec<(Table, ValueLevel)> = Vec::new();
    if let Some(t) = texts.fronts {
        nested_tables.push((read_table("fronts.csv", t)?, ValueLevel::NestedFronts));
    }
    if let Some(t) = texts.bursts {
        nested_tables.push((read_table("bursts.csv", t)?, ValueLevel::NestedBursts));
    }
    let mut table = read_table("recordings.csv", texts.recordings)?;
    let col = |name: &str| table.col(name);
    let header = &table.header;
    let by = col(&settings.by)?;
    let unit = settings.unit.as_deref().map(col).transpose()?;
    let recording = col("recording")?;
    let outcome = col("outcome").ok();
    let metrics: Vec<String> = if settings.metrics.is_empty() {
        DEFAULT_METRICS.iter().map(|m| m.to_string()).collect()
    } else {
        settings.metrics.clone()
    };
    // Each metric from recordings.csv, or else from the first table per event that has it.
    let sources: Vec<Source> = metrics
        .iter()
        .map(|m| {
            col(m).map(Source::Recordings).or_else(|e| {
                nested_tables
                    .iter()
                    .enumerate()
                    .find_map(|(t, (table, _))| table.find(m).map(|c| Source::Nested(t, c)))
                    .ok_or_else(|| {
                        let mut message = e.message;
                        for (t, _) in &nested_tables {
                            message.push_str(&format!("; {} has {}", t.name, t.header.join(", ")));
                        }
                        StudyError::new(*e.place, message)
                    })
            })
        })
        .collect::<Result<_, _>>()?;
    let mut rows = std::mem::take(&mut table.rows);
    let mut left_out = Vec::new();
    rows.retain(|r| {
        let ok = outcome.is_none_or(|o| r.get(o).is_some_and(|v| v == "analysed"));
        if !ok {
            left_out.push(format!("{}: not analysed", r[recording]));
        }
        ok
    });
    let mut conditions: Vec<String> = Vec::new();
    for r in &rows {
        if !conditions.contains(&r[by]) {
            conditions.push(r[by].clone());
        }
    }
    if conditions.len() < 2 {
        return Err(StudyError::new(
            Place::file("recordings.csv"),
            format!(
                "column {:?} holds {} condition(s) among the analysed recordings; a comparison needs two",
                settings.by,
                conditions.len()
            ),
        ));
    }
    let numeric: Option<Vec<f64>> = conditions.iter().map(|c| c.trim().parse().ok()).collect();
    let ordered = numeric.is_some() && has_unit(&header[by]);
    if let Some(levels) = numeric.filter(|_| ordered) {
        let mut order: Vec<usize> = (0..conditions.len()).collect();
        order.sort_by(|&a, &b| levels[a].total_cmp(&levels[b]));
        conditions = order.into_iter().map(|i| conditions[i].clone()).collect();
    }
    let unit_of = |r: &Vec<String>| unit.map_or_else(|| r[recording].clone(), |u| r[u].clone());
    let mut comparisons = Vec::new();
    let mut units = Vec::new();
    let analysed: Vec<&String> = rows.iter().map(|r| &r[recording]).collect();
    for (metric, source) in metrics.iter().zip(&sources) {
        // Per condition: each unit's value (the median of its recordings' values, or of all
        // its events), and for events the values nested as units -> recordings -> events.
        let (per_condition, nested): (Vec<UnitValues>, Option<(Vec<Nested>, ValueLevel)>) =
            match *source {
                Source::Recordings(mc) => {
                    let per_condition = conditions
                        .iter()
                        .map(|c| {
                            let mut units: Vec<(String, Vec<f64>)> = Vec::new();
                            for r in rows.iter().filter(|r| &r[by] == c) {
                                let Some(v) = finite(&r[mc]) else { continue };
                                let u = unit_of(r);
                                match units.iter_mut().find(|x| x.0 == u) {
                                    Some(x) => x.1.push(v),
                                    None => units.push((u, vec![v])),
                                }
                            }
                            units
                                .into_iter()
                                .filter_map(|(u, v)| median(&v).map(|m| (u, m)))
                                .collect()
                        })
                        .collect();
                    (per_condition, None)
                }
                Source::Nested(t, c) => {
                    let (table, level) = &nested_tables[t];
                    let nested = nested_values(table, c, settings, &conditions, &analysed)?;
                    let per_condition = nested
                        .iter()
                        .map(|(names, cultures)| {
                            names
                                .iter()
                                .zip(cultures)
                                .filter_map(|(u, recs)| {
                                    let all: Vec<f64> = recs.iter().flatten().copied().collect();
                                    median(&all).map(|m| (u.clone(), m))
                                })
                                .collect()
                        })
                        .collect();
                    (
                        per_condition,
                        Some((nested.into_iter().map(|x| x.1).collect(), *level)),
                    )
                }
            };
        for k in 1..conditions.len() {
            let mut c = pairwise(
                metric,
                (&conditions[0], &per_condition[0]),
                (&conditions[k], &per_condition[k]),
                settings,
                (k * 1000 + comparisons.len()) as u64,
            );
            // Events nested in independent units: the pooled medians' difference with a
            // hierarchical bootstrap interval (paired designs keep the paired differences).
            if let Some((nested, level)) = nested.as_ref().filter(|_| !settings.paired) {
                let pooled =
                    |n: &Nested| median(&n.iter().flatten().flatten().copied().collect::<Vec<_>>());
                c.effect = pooled(&nested[k])
                    .zip(pooled(&nested[0]))
                    .map(|(a, b)| a - b);
                c.effect_ci = hierarchical_median_difference(
                    &nested[k],
                    &nested[0],
                    settings.confidence,
                    settings.resamples,
                    settings.seed ^ (k as u64 * 7919),
                );
                c.values = *level;
            }
            comparisons.push(c);
        }
        if ordered && conditions.len() >= 3 {
            let groups: Vec<Vec<f64>> = per_condition
                .iter()
                .map(|g| g.iter().map(|x| x.1).collect())
                .collect();
            let last = conditions.len() - 1;
            comparisons.push(Comparison {
                metric: metric.clone(),
                reference: conditions[0].clone(),
                condition: conditions[last].clone(),
                n_reference: groups[0].len(),
                n_condition: groups[last].len(),
                effect: None,
                effect_ci: None,
                shift: None,
                shift_ci: None,
                test: TestKind::JonckheereTerpstra,
                outcome: jonckheere_terpstra(&groups),
                p_adjusted: None,
                values: ValueLevel::Units,
            });
        }
        units.push(MetricUnits {
            metric: metric.clone(),
            conditions: per_condition,
        });
    }
    let ps: Vec<(usize, f64)> = comparisons
        .iter()
        .enumerate()
        .filter_map(|(i, c)| match c.outcome {
            TestOutcome::Computed { p, .. } => Some((i, p)),
            _ => None,
        })
        .collect();
    let adjusted = adjust(
        &ps.iter().map(|x| x.1).collect::<Vec<_>>(),
        settings.adjustment,
    );
    for ((i, _), q) in ps.iter().zip(adjusted) {
        comparisons[*i].p_adjusted = Some(q);
    }
    Ok(CompareReport {
        settings: settings.clone(),
        conditions,
        ordered,
        comparisons,
        units,
        left_out,
    })
}

/// A table cell as a finite number.
fn finite(cell: &str) -> Option<f64> {
    cell.trim().parse::<f64>().ok().filter(|v| v.is_finite())
}

/// One condition against the reference, from (unit, value) lists.
fn pairwise(
    metric: &str,
    reference: (&String, &[(String, f64)]),
    condition: (&String, &[(String, f64)]),
    settings: &CompareSettings,
    seed: u64,
) -> Comparison {
    let (ra, ca) = (reference.1, condition.1);
    let mut c = Comparison {
        metric: metric.to_string(),
        reference: reference.0.clone(),
        condition: condition.0.clone(),
        n_reference: ra.len(),
        n_condition: ca.len(),
        effect: None,
        effect_ci: None,
        shift: None,
        shift_ci: None,
        test: TestKind::MannWhitney,
        outcome: TestOutcome::TooFew {
            needed: 1,
            given: 0,
        },
        p_adjusted: None,
        values: ValueLevel::Units,
    };
    let seed = settings.seed ^ seed;
    if settings.paired {
        let d: Vec<f64> = ca
            .iter()
            .filter_map(|(u, v)| ra.iter().find(|x| &x.0 == u).map(|x| v - x.1))
            .collect();
        c.test = TestKind::WilcoxonSignedRank;
        c.n_reference = d.len();
        c.n_condition = d.len();
        if d.is_empty() {
            return c;
        }
        c.effect = median(&d);
        c.effect_ci = percentile_one(&d, median, settings.confidence, settings.resamples, seed);
        if let Some(s) = shift_paired(&d, settings.confidence) {
            c.shift = Some(s.estimate);
            c.shift_ci = s.interval;
        }
        c.outcome = wilcoxon_signed_rank(&d);
        return c;
    }
    let (a, b): (Vec<f64>, Vec<f64>) = (
        ra.iter().map(|x| x.1).collect(),
        ca.iter().map(|x| x.1).collect(),
    );
    if a.is_empty() || b.is_empty() {
        return c;
    }
    c.effect = median(&b).zip(median(&a)).map(|(x, y)| x - y);
    c.effect_ci = percentile_difference(
        &b,
        &a,
        median,
        settings.confidence,
        settings.resamples,
        seed,
    );
    if let Some(s) = shift_two_sample(&b, &a, settings.confidence) {
        c.shift = Some(s.estimate);
        c.shift_ci = s.interval;
    }
    c.outcome = mann_whitney_u(&b, &a);
    c
}

impl CompareReport {
    /// The report as JSON (`compare --json`; keys in the README).
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).unwrap_or_default()
    }

    /// `comparisons.csv`.
    pub fn comparisons_csv(&self) -> String {
        let mut out = CsvOut::new([
            "metric",
            "reference",
            "condition",
            "n_reference",
            "n_condition",
            "effect",
            "effect_ci95_low",
            "effect_ci95_high",
            "shift",
            "shift_ci95_low",
            "shift_ci95_high",
            "test",
            "statistic",
            "p",
            "p_adjusted",
            "adjustment",
            "method",
            "values",
        ]);
        for c in &self.comparisons {
            let (statistic, p, method) = match &c.outcome {
                TestOutcome::Computed {
                    statistic,
                    p,
                    method,
                } => (
                    statistic.to_string(),
                    p.to_string(),
                    method.as_str().to_string(),
                ),
                TestOutcome::Degenerate { reason } => (
                    String::new(),
                    String::new(),
                    format!("not tested: {reason}"),
                ),
                TestOutcome::TooFew { needed, given } => (
                    String::new(),
                    String::new(),
                    format!("not tested: {given} units, {needed} needed"),
                ),
            };
            out.row([
                c.metric.clone(),
                c.reference.clone(),
                c.condition.clone(),
                c.n_reference.to_string(),
                c.n_condition.to_string(),
                number(c.effect),
                number(c.effect_ci.map(|x| x[0])),
                number(c.effect_ci.map(|x| x[1])),
                number(c.shift),
                number(c.shift_ci.map(|x| x[0])),
                number(c.shift_ci.map(|x| x[1])),
                c.test.as_str().to_string(),
                statistic,
                p,
                number(c.p_adjusted),
                match self.settings.adjustment {
                    Adjustment::Holm => "Holm".to_string(),
                    Adjustment::BenjaminiHochberg => "Benjamini-Hochberg".to_string(),
                },
                method,
                c.values.as_str().to_string(),
            ]);
        }
        out.finish()
    }

    /// A text summary, one line per comparison, every number with its method.
    pub fn to_text(&self) -> String {
        use std::fmt::Write;
        let mut out = String::new();
        let _ = writeln!(
            out,
            "Conditions     {} ({}), by {:?}, units {}{}",
            self.conditions.join(", "),
            if self.ordered {
                "ordered"
            } else {
                "not ordered"
            },
            self.settings.by,
            self.settings.unit.as_deref().unwrap_or("recordings"),
            if self.settings.paired { ", paired" } else { "" }
        );
        for c in &self.comparisons {
            let effect = match (c.effect, c.effect_ci) {
                (Some(e), Some([lo, hi])) => format!("effect {e:.4} (95% CI {lo:.4} to {hi:.4})"),
                (Some(e), None) => format!("effect {e:.4}"),
                _ => "trend across all levels".to_string(),
            };
            let test = match &c.outcome {
                TestOutcome::Computed { p, method, .. } => format!(
                    "{}: p {p:.4} ({}), adjusted {}",
                    c.test.as_str(),
                    method.as_str(),
                    c.p_adjusted.map_or("-".into(), |q| format!("{q:.4}"))
                ),
                TestOutcome::Degenerate { reason } => {
                    format!("{}: not tested, {reason}", c.test.as_str())
                }
                TestOutcome::TooFew { needed, given } => {
                    format!(
                        "{}: not tested, {given} units ({needed} needed)",
                        c.test.as_str()
                    )
                }
            };
            let _ = writeln!(
                out,
                "{:<28} {} vs {} (n {} and {}): {effect}; {test}",
                c.metric, c.condition, c.reference, c.n_condition, c.n_reference
            );
        }
        for l in &self.left_out {
            let _ = writeln!(out, "left out: {l}");
        }
        out
    }
}
