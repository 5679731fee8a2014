//! A simulated recording's analysis beside its ground truth (the `truth.json` that
//! `ringline simulate` writes, from either simulator): each true front is matched to the
//! analysed burst around its start, and the measured speed is set against the true one.

use super::AnalysisReport;
use serde::{Deserialize, Serialize};

/// Seconds either side of an analysed burst's window within which a true front's start makes
/// it that burst's front (common practice, no source: a burst is found from its first spikes,
/// so the true start can fall just before the window).
pub const MATCH_S: f64 = 0.2;

/// Why a truth file cannot be compared.
#[derive(Debug, Clone, PartialEq, Serialize, thiserror::Error)]
#[error("{message}")]
pub struct TruthError {
    pub message: String,
}

/// The fields both simulators write for every burst of the truth.
#[derive(Deserialize)]
struct TrueBurst {
    start_s: f64,
    /// `null` where the network truth found no front.
    speed_mm_s: Option<f64>,
}

#[derive(Deserialize)]
struct TruthFile {
    bursts: Vec<TrueBurst>,
}

/// One true front and what the analysis measured for it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TruthRow {
    /// The true front, counted from 1 among the truth's bursts.
    pub truth_burst: usize,
    pub true_start_s: f64,
    pub true_speed_mm_s: f64,
    /// The analysed burst it falls in, counted from 1 (`None`: no burst there).
    pub burst: Option<usize>,
    /// Measured speed (`None`: no burst, or a burst without a front).
    pub speed_mm_s: Option<f64>,
    pub speed_ci95_mm_s: Option<[f64; 2]>,
    /// speed / true speed - 1.
    pub relative_error: Option<f64>,
    /// The 95% interval holds the true speed.
    pub covered: Option<bool>,
}

/// The analysis against the truth, front by front and in summary.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TruthComparison {
    pub rows: Vec<TruthRow>,
    /// True fronts (truth bursts with a speed).
    pub true_fronts: usize,
    /// Of those, the ones the analysis measured.
    pub measured: usize,
    /// Median true speed over the measured fronts, mm/s.
    pub median_true_speed_mm_s: Option<f64>,
    /// Median measured speed over the same fronts, mm/s.
    pub median_speed_mm_s: Option<f64>,
    /// Median of |relative error| over the measured fronts.
    pub median_abs_relative_error: Option<f64>,
    /// Share of the measured fronts whose 95% interval holds the true speed.
    pub interval_coverage: Option<f64>,
}

/// Sets `report` beside the truth in `truth_json` (`truth.json` of `ringline simulate`).
pub fn compare_with_truth(
    report: &AnalysisReport,
    truth_json: &str,
) -> Result<TruthComparison, TruthError> {
    let truth: TruthFile = serde_json::from_str(truth_json).map_err(|e| TruthError {
        message: format!(
            "truth file, line {}, column {}: {e} (expected the truth.json of `ringline simulate`)",
            e.line(),
            e.column()
        ),
    })?;
    let rows: Vec<TruthRow> = truth
        .bursts
        .iter()
        .enumerate()
        .filter_map(|(k, t)| {
            let true_speed = t.speed_mm_s?;
            let burst = report
                .bursts
                .iter()
                .find(|b| b.start_s - MATCH_S <= t.start_s && t.start_s <= b.end_s + MATCH_S);
            let front = burst.and_then(|b| b.front.as_ref());
            Some(TruthRow {
                truth_burst: k + 1,
                true_start_s: t.start_s,
                true_speed_mm_s: true_speed,
                burst: burst.map(|b| b.burst),
                speed_mm_s: front.map(|f| f.speed_mm_s),
                speed_ci95_mm_s: front.map(|f| f.speed_ci95_mm_s),
                relative_error: front.map(|f| f.speed_mm_s / true_speed - 1.0),
                covered: front.map(|f| {
                    f.speed_ci95_mm_s[0] <= true_speed && true_speed <= f.speed_ci95_mm_s[1]
                }),
            })
        })
        .collect();
    let measured: Vec<&TruthRow> = rows.iter().filter(|r| r.speed_mm_s.is_some()).collect();
    let of = |f: &dyn Fn(&TruthRow) -> Option<f64>| -> Vec<f64> {
        measured.iter().filter_map(|r| f(r)).collect()
    };
    let covered = measured.iter().filter(|r| r.covered == Some(true)).count();
    Ok(TruthComparison {
        true_fronts: rows.len(),
        measured: measured.len(),
        median_true_speed_mm_s: crate::stats::median(&of(&|r| Some(r.true_speed_mm_s))),
        median_speed_mm_s: crate::stats::median(&of(&|r| r.speed_mm_s)),
        median_abs_relative_error: crate::stats::median(&of(&|r| r.relative_error.map(f64::abs))),
        interval_coverage: (!measured.is_empty()).then(|| covered as f64 / measured.len() as f64),
        rows,
    })
}

impl TruthComparison {
    /// The comparison as text for the terminal, every number with its unit.
    pub fn to_text(&self) -> String {
        let number =
            |v: Option<f64>, digits: usize| v.map_or("-".to_string(), |x| format!("{x:.digits$}"));
        let mut out = format!(
            "Truth          {} true fronts, {} measured; median speed {} mm/s against {} mm/s true; median |error| {}%; 95% intervals hold the true speed for {}% of fronts\n",
            self.true_fronts,
            self.measured,
            number(self.median_speed_mm_s, 1),
            number(self.median_true_speed_mm_s, 1),
            number(self.median_abs_relative_error.map(|e| 100.0 * e), 1),
            number(self.interval_coverage.map(|c| 100.0 * c), 0),
        );
        out.push_str("\ntrue front  start (s)  true speed (mm/s)  burst  speed (mm/s)   95% CI (mm/s)     error\n");
        for r in &self.rows {
            let ci = r
                .speed_ci95_mm_s
                .map_or("-".to_string(), |[lo, hi]| format!("{lo:.1} to {hi:.1}"));
            out.push_str(&format!(
                "{:>10}  {:>9.3}  {:>17.1}  {:>5}  {:>12}  {:>16}  {:>7}\n",
                r.truth_burst,
                r.true_start_s,
                r.true_speed_mm_s,
                r.burst.map_or("-".to_string(), |b| b.to_string()),
                number(r.speed_mm_s, 1),
                ci,
                r.relative_error
                    .map_or("-".to_string(), |e| format!("{:+.1}%", 100.0 * e)),
            ));
        }
        out
    }
}
