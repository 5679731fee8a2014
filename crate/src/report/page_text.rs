//! The page's sentences and tables, worded here so the page only places them: the track, a
//! burst's front, the bursts, rhythm and synchrony paragraphs (the lines of the text report),
//! the responses and the comparison with a simulation's truth. Every number carries its unit.

use super::document::{FactKey, Table};
use super::{AnalysisReport, Inspection};
use crate::fronts::BurstResult;
use serde::{Deserialize, Serialize};

/// A value with `digits` decimals and its unit, or a dash when there is none.
fn num(value: Option<f64>, digits: usize, unit: &str) -> String {
    match value.filter(|v| v.is_finite()) {
        Some(v) if unit.is_empty() => format!("{v:.digits$}"),
        Some(v) => format!("{v:.digits$} {unit}"),
        None => "—".into(),
    }
}

/// A speed with [`super::speed_text`]'s digits, its unit, or a dash when missing.
fn speed(value: Option<f64>, unit: &str) -> String {
    match value.filter(|v| v.is_finite()) {
        Some(v) if unit.is_empty() => super::speed_text(v),
        Some(v) => format!("{} {unit}", super::speed_text(v)),
        None => "—".into(),
    }
}

/// A serialised enum's name in words (`line_one_way` -> `line one way`).
fn words<T: Serialize>(value: &T) -> String {
    serde_json::to_value(value)
        .ok()
        .and_then(|v| v.as_str().map(|s| s.replace('_', " ")))
        .unwrap_or_default()
}

/// The layout and track step: sites, events, span and the track with its fit.
pub fn track_sentence(i: &Inspection) -> String {
    let t = &i.track;
    let mut parts = vec![
        format!("{} sites ({} silent)", i.site_count, i.silent_sites.len()),
        format!(
            "{} spikes over {}",
            i.spike_count.unwrap_or(0),
            num(i.duration_s, 1, "s")
        ),
        format!(
            "track: {} ({}; {})",
            t.kind,
            if t.chosen_by == "auto" {
                "detected"
            } else {
                "chosen"
            },
            t.reason
        ),
    ];
    let mut add = |label: &str, v: Option<f64>, digits: usize, unit: &str| {
        if v.is_some() {
            parts.push(format!("{label} {}", num(v, digits, unit)));
        }
    };
    add("length", t.length_um, 0, "µm");
    add("radius", t.radius_um, 0, "µm");
    add("residual", t.residual_rms_um, 1, "µm RMS");
    add("site spacing", t.site_spacing_um, 0, "µm");
    if !t.off_track_sites.is_empty() {
        parts.push(format!("off the track: {}", t.off_track_sites.join(", ")));
    }
    format!("{}.", parts.join("; "))
}

/// One burst and its front (or why it has none).
pub fn burst_sentence(b: &BurstResult) -> String {
    let when = format!(
        "Burst {} ({} to {})",
        b.burst,
        num(Some(b.start_s), 3, "s"),
        num(Some(b.end_s), 3, "s")
    );
    match &b.front {
        Some(f) => {
            let mut text = format!(
                "{when}: {} front at {} (95% interval {} to {}), from site {}",
                words(&f.model),
                speed(Some(f.speed_mm_s), "mm/s"),
                speed(Some(f.speed_ci95_mm_s[0]), ""),
                speed(Some(f.speed_ci95_mm_s[1]), "mm/s"),
                f.origin_site
            );
            if let Some(t) = &f.travel {
                text.push_str(&format!(
                    ", travelling towards {} track coordinate",
                    words(t)
                ));
            }
            if let Some(r) = &f.rotation {
                text.push_str(&format!(", rotation {}", words(r)));
            }
            text.push_str(&format!(
                "; {} sites, residual {} RMS{}.",
                f.sites_used,
                num(Some(f.residual_rms_ms), 2, "ms"),
                if f.failed {
                    "; stopped short (propagation failure)"
                } else {
                    ""
                }
            ));
            text
        }
        None => format!(
            "{when}: no front: {}.",
            b.no_front_reason.as_deref().unwrap_or("no reason given")
        ),
    }
}

/// The paragraphs of the bursts and rhythm steps: the text report's lines.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StepTexts {
    pub bursts: String,
    pub rhythm: String,
    pub sites: String,
    pub synchrony: String,
    pub lags: String,
}

/// The step paragraphs of an analysis, from [`AnalysisReport::facts`].
pub fn step_texts(r: &AnalysisReport) -> StepTexts {
    let facts = r.facts();
    let say = |keys: &[FactKey]| -> String {
        facts
            .iter()
            .filter(|f| keys.contains(&f.key))
            .map(|f| format!("{}: {}.", f.label, f.text))
            .collect::<Vec<_>>()
            .join(" ")
    };
    let lags = say(&[FactKey::Lags]);
    StepTexts {
        bursts: say(&[FactKey::Bursts, FactKey::Interburst, FactKey::Fronts]),
        rhythm: say(&[FactKey::Rhythm]),
        sites: say(&[FactKey::SitesAlone, FactKey::SiteBursts]),
        synchrony: say(&[FactKey::Synchrony]),
        lags: if lags.is_empty() {
            "No lags: they need sites on a track (a line or a ring).".into()
        } else {
            lags
        },
    }
}

/// The response step's sentence: the protocol, the window, the chance level and the fit.
pub fn response_sentence(r: &crate::response::ResponseReport) -> String {
    format!(
        "{} stimuli from {}; a site responds with an event {} to {} after a stimulus. Spontaneous chance of an event in such a window: {} (from the {} before the first stimulus). Population: {}.",
        r.stimuli.len(),
        r.protocol_file,
        num(Some(r.settings.blank_ms), 1, ""),
        num(Some(r.settings.window_ms), 0, "ms"),
        num(r.population.spontaneous_probability, 3, ""),
        num(Some(r.baseline_s), 1, "s"),
        super::response_tables::describe(&r.population.fit, r.unit.symbol())
    )
}

/// The response step's table: one row per amplitude.
pub fn response_table(r: &crate::response::ResponseReport) -> Table {
    let unit = r.unit.symbol();
    Table {
        caption: format!("Share of sites responding at each amplitude ({unit})"),
        header: [
            "amplitude",
            "stimuli",
            "sites responding [95% CI]",
            "median latency (ms)",
            "chance of as many from spontaneous firing",
        ]
        .map(String::from)
        .to_vec(),
        rows: r
            .population
            .points
            .iter()
            .map(|p| {
                let n = r
                    .stimuli
                    .iter()
                    .filter(|s| s.amplitude == p.amplitude)
                    .count();
                let ci = p.fraction_ci.map_or(String::new(), |c| {
                    format!(" [{}, {}]", num(Some(c[0]), 3, ""), num(Some(c[1]), 3, ""))
                });
                vec![
                    num(Some(p.amplitude), 4, unit),
                    n.to_string(),
                    format!(
                        "{} ({} of {}){ci}",
                        num(Some(p.fraction), 3, ""),
                        p.responders,
                        p.trials
                    ),
                    num(p.median_latency_ms, 1, ""),
                    num(p.chance_p, 4, ""),
                ]
            })
            .collect(),
        collapsed: false,
    }
}

/// The comparison with a simulation's truth, in one sentence.
pub fn truth_sentence(c: &super::truth::TruthComparison) -> String {
    format!(
        "{} true fronts, {} measured; median speed {} against {} true; median |error| {}; the 95% interval holds the true speed for {} of measured fronts.",
        c.true_fronts,
        c.measured,
        speed(c.median_speed_mm_s, "mm/s"),
        speed(c.median_true_speed_mm_s, "mm/s"),
        num(c.median_abs_relative_error.map(|e| 100.0 * e), 1, "%"),
        num(c.interval_coverage.map(|e| 100.0 * e), 0, "%"),
    )
}

/// Every true front beside the measured one.
pub fn truth_table(c: &super::truth::TruthComparison) -> Table {
    Table {
        caption: "Every true front beside the measured one".into(),
        header: [
            "true front",
            "start (s)",
            "true speed (mm/s)",
            "burst",
            "measured (mm/s)",
            "95% CI (mm/s)",
            "error",
        ]
        .map(String::from)
        .to_vec(),
        rows: c
            .rows
            .iter()
            .map(|r| {
                vec![
                    r.truth_burst.to_string(),
                    num(Some(r.true_start_s), 3, ""),
                    speed(Some(r.true_speed_mm_s), ""),
                    r.burst.map_or("—".into(), |b| b.to_string()),
                    speed(r.speed_mm_s, ""),
                    r.speed_ci95_mm_s.map_or("—".into(), |[a, b]| {
                        format!("{} to {}", num(Some(a), 1, ""), num(Some(b), 1, ""))
                    }),
                    r.relative_error
                        .map_or("—".into(), |e| format!("{:+.1}%", 100.0 * e)),
                ]
            })
            .collect(),
        collapsed: false,
    }
}

/// A number with (at least) four significant digits and no exponent, or a dash.
fn sig4(value: Option<f64>) -> String {
    match value.filter(|v| v.is_finite()) {
        Some(0.0) => "0".into(),
        Some(v) => {
            let digits = (3 - v.abs().log10().floor() as i32).max(0) as usize;
            format!("{v:.digits$}")
        }
        None => "—".into(),
    }
}

/// The comparison of conditions in one sentence: the conditions, the reference, the unit,
/// the adjustment and what was left out.
pub fn compare_sentence(r: &crate::study::compare::CompareReport) -> String {
    use crate::study::inference::Adjustment;
    let mut text = format!(
        "Conditions {} ({}), compared with {} by {}, one value per {}{}; p-values adjusted by {}",
        r.conditions.join(", "),
        if r.ordered { "ordered" } else { "not ordered" },
        r.conditions.first().map_or("", String::as_str),
        r.settings.by,
        r.settings.unit.as_deref().unwrap_or("recording"),
        if r.settings.paired { ", paired" } else { "" },
        match r.settings.adjustment {
            Adjustment::Holm => "Holm",
            Adjustment::BenjaminiHochberg => "Benjamini-Hochberg",
        }
    );
    if !r.left_out.is_empty() {
        text.push_str(&format!("; left out: {}", r.left_out.join("; ")));
    }
    text.push('.');
    text
}

/// The comparisons as the page shows them: effect and shift with their intervals, the test,
/// p and adjusted p, and what each effect was computed on.
pub fn compare_table(r: &crate::study::compare::CompareReport) -> Table {
    use crate::study::compare::{TestKind, ValueLevel};
    use crate::study::inference::{PMethod, TestOutcome};
    let ci = |v: Option<[f64; 2]>| {
        v.map_or(String::new(), |[a, b]| {
            format!(" [{}, {}]", sig4(Some(a)), sig4(Some(b)))
        })
    };
    let rows = r
        .comparisons
        .iter()
        .map(|c| {
            let trend = c.test == TestKind::JonckheereTerpstra;
            let (p, method) = match &c.outcome {
                TestOutcome::Computed { p, method, .. } => (
                    sig4(Some(*p)),
                    match method {
                        PMethod::Exact => "exact".to_string(),
                        PMethod::Normal => "normal approximation".to_string(),
                    },
                ),
                TestOutcome::Degenerate { reason } => ("—".into(), format!("not tested: {reason}")),
                TestOutcome::TooFew { needed, given } => (
                    "—".into(),
                    format!("not tested: {given} units, {needed} needed"),
                ),
            };
            vec![
                c.metric.clone(),
                if trend {
                    format!("trend over {}", r.conditions.join(" < "))
                } else {
                    format!("{} vs {}", c.condition, c.reference)
                },
                format!("{} and {}", c.n_condition, c.n_reference),
                if trend {
                    "—".into()
                } else {
                    format!("{}{}", sig4(c.effect), ci(c.effect_ci))
                },
                if trend {
                    "—".into()
                } else {
                    format!("{}{}", sig4(c.shift), ci(c.shift_ci))
                },
                match c.test {
                    TestKind::MannWhitney => "Mann-Whitney U",
                    TestKind::WilcoxonSignedRank => "Wilcoxon signed-rank",
                    TestKind::JonckheereTerpstra => "Jonckheere-Terpstra",
                }
                .into(),
                p,
                sig4(c.p_adjusted),
                method,
                match c.values {
                    ValueLevel::Units => "one value per unit",
                    ValueLevel::NestedFronts => "every front, nested (hierarchical bootstrap)",
                    ValueLevel::NestedBursts => "every burst, nested (hierarchical bootstrap)",
                }
                .into(),
            ]
        })
        .collect();
    Table {
        caption: "Comparisons".into(),
        header: [
            "metric",
            "condition vs reference",
            "units (n)",
            "effect [95% CI]",
            "Hodges-Lehmann shift [95% CI]",
            "test",
            "p",
            "adjusted p",
            "method",
            "effect computed on",
        ]
        .map(String::from)
        .to_vec(),
        rows,
        collapsed: false,
    }
}

/// One manifest row as the page holds it: its status (the text of its `status.json`) once
/// analysed or tried, its `summary.json` text when analysed, or why it cannot run.
#[derive(Debug, Clone, Default, PartialEq, Deserialize)]
#[serde(default)]
pub struct StudyRowState {
    pub status_json: Option<String>,
    pub summary_json: Option<String>,
    pub problem: Option<String>,
}

/// The study step: what the study is and how far it got, and its table (one row per
/// recording: the manifest's columns, the status, counts and the median speed).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StudyView {
    pub sentence: String,
    pub table: Table,
    /// Per row: it failed or cannot run (the page marks it).
    pub problem: Vec<bool>,
    /// Every row was analysed or tried: the study tables can be saved and compared.
    pub complete: bool,
}

/// The study step's sentence and table from the manifest and each row's state (`rows` in
/// the manifest's order; a missing row counts as not analysed yet).
pub fn study_view(manifest: &crate::import::Manifest, rows: &[StudyRowState]) -> StudyView {
    use crate::study::{Outcome, RecordingStatus};
    let none = StudyRowState::default();
    let states: Vec<(&StudyRowState, Option<RecordingStatus>)> = (0..manifest.rows.len())
        .map(|i| {
            let state = rows.get(i).unwrap_or(&none);
            let status = state
                .status_json
                .as_deref()
                .and_then(|t| serde_json::from_str(t).ok());
            (state, status)
        })
        .collect();
    let tried = states.iter().filter(|(_, s)| s.is_some()).count();
    let is_failed =
        |s: &Option<RecordingStatus>| s.as_ref().is_some_and(|s| s.outcome == Outcome::Failed);
    let failed = states.iter().filter(|(_, s)| is_failed(s)).count();
    let sentence = format!(
        "{} recordings from {}; {tried} analysed or tried, {failed} failed. Settings: those of the steps below (defaults until changed), with each row's own track and settings file from the manifest.",
        manifest.rows.len(),
        manifest.file
    );
    let mut header = vec!["recording".to_string()];
    header.extend(manifest.columns.iter().cloned());
    header.extend(["status", "bursts", "fronts", "median speed (mm/s) [95% CI]"].map(String::from));
    let table_rows = manifest
        .rows
        .iter()
        .zip(&states)
        .map(|(row, (state, status))| {
            let summary: Option<serde_json::Value> = state
                .summary_json
                .as_deref()
                .and_then(|t| serde_json::from_str(t).ok());
            let number = |pointer: &str| {
                summary
                    .as_ref()
                    .and_then(|s| s.pointer(pointer))
                    .and_then(serde_json::Value::as_f64)
            };
            let median = number("/summary/median_speed_mm_s").map(super::speed_text);
            let interval = number("/summary/median_speed_ci95_mm_s/0")
                .zip(number("/summary/median_speed_ci95_mm_s/1"))
                .map(|(a, b)| format!(" [{}, {}]", super::speed_text(a), super::speed_text(b)));
            let words = match (status, &state.problem) {
                (Some(s), _) if s.outcome == Outcome::Failed => {
                    format!("failed: {}", s.message.as_deref().unwrap_or(""))
                }
                (Some(_), _) => "analysed".to_string(),
                (None, Some(why)) => format!("cannot run: {why}"),
                (None, None) => "not analysed yet".to_string(),
            };
            let count = |c: Option<usize>| c.map_or(String::new(), |n| n.to_string());
            let mut cells = vec![row.recording.clone()];
            cells.extend(row.columns.iter().cloned());
            cells.extend([
                words,
                count(status.as_ref().and_then(|s| s.burst_count)),
                count(status.as_ref().and_then(|s| s.front_count)),
                median.map_or(String::new(), |m| m + &interval.unwrap_or_default()),
            ]);
            cells
        })
        .collect();
    StudyView {
        sentence,
        table: Table {
            caption: "Recordings of the study".into(),
            header,
            rows: table_rows,
            collapsed: false,
        },
        problem: states
            .iter()
            .map(|(state, status)| state.problem.is_some() || is_failed(status))
            .collect(),
        complete: tried == manifest.rows.len(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn four_significant_digits_without_exponents() {
        // Decimal places so that four significant digits show (more for 10,000 and up, never
        // an exponent); Rust's formatting rounds the exact binary value.
        assert_eq!(sig4(Some(7.25)), "7.250");
        assert_eq!(sig4(Some(0.0123456)), "0.01235");
        assert_eq!(sig4(Some(1234.4)), "1234");
        assert_eq!(sig4(Some(123456.7)), "123457");
        assert_eq!(sig4(Some(-2.71838)), "-2.718");
        assert_eq!(sig4(None), "—");
    }

    #[test]
    fn numbers_carry_their_units_and_a_dash_when_missing() {
        assert_eq!(num(Some(12.345), 1, "mm/s"), "12.3 mm/s");
        assert_eq!(num(Some(0.5), 2, ""), "0.50");
        assert_eq!(num(None, 1, "s"), "—");
        assert_eq!(num(Some(f64::NAN), 1, "s"), "—");
    }
}
