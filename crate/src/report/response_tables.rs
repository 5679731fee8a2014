//! The response stage's output files (`responses.csv`, `curves.csv`) and its part of the
//! text report.

use super::AnalysisReport;
use crate::csv_out::{number, CsvOut};
use crate::response::probit::CurveFit;
use crate::response::{ResponseCurve, ResponseReport};

impl ResponseReport {
    /// `responses.csv`: one row per stimulus and site.
    pub fn responses_csv(&self) -> String {
        let amplitude = format!("amplitude_{}", self.unit.column_suffix());
        let mut out = CsvOut::new([
            "stimulus",
            "time_s",
            amplitude.as_str(),
            "stimulus_site",
            "label",
            "site",
            "responded",
            "latency_ms",
        ]);
        for s in &self.stimuli {
            for (curve, latency) in self.sites.iter().zip(&s.latency_ms) {
                out.row([
                    s.stimulus.to_string(),
                    s.time_s.to_string(),
                    s.amplitude.to_string(),
                    s.site.clone().unwrap_or_default(),
                    s.label.clone().unwrap_or_default(),
                    curve.name.clone(),
                    latency.is_some().to_string(),
                    number(*latency),
                ]);
            }
        }
        out.finish()
    }

    /// `curves.csv`: one row per curve (the population, then each site) and amplitude,
    /// with the curve's fit repeated on each of its rows.
    pub fn curves_csv(&self) -> String {
        let amplitude = format!("amplitude_{}", self.unit.column_suffix());
        let u = self.unit.column_suffix();
        let header: Vec<String> = [
            "curve",
            amplitude.as_str(),
            "trials",
            "responders",
            "fraction",
            "fraction_ci95_low",
            "fraction_ci95_high",
            "median_latency_ms",
            "chance_p",
            "spontaneous_probability",
            "fit",
        ]
        .iter()
        .map(|s| s.to_string())
        .chain(
            [
                "threshold",
                "threshold_se",
                "threshold_ci95_low",
                "threshold_ci95_high",
                "width",
                "width_ci95_low",
                "width_ci95_high",
            ]
            .iter()
            .map(|s| format!("{s}_{u}")),
        )
        .chain(
            [
                "deviance",
                "degrees_of_freedom",
                "fit_p",
                &format!("threshold_above_{u}"),
                &format!("threshold_below_{u}"),
            ]
            .iter()
            .map(|s| s.to_string()),
        )
        .collect();
        let mut out = CsvOut::new(&header);
        for curve in std::iter::once(&self.population).chain(&self.sites) {
            let fit = curve_fit_fields(curve);
            for p in &curve.points {
                let mut row = vec![
                    curve.name.clone(),
                    p.amplitude.to_string(),
                    p.trials.to_string(),
                    p.responders.to_string(),
                    p.fraction.to_string(),
                    number(p.fraction_ci.map(|c| c[0])),
                    number(p.fraction_ci.map(|c| c[1])),
                    number(p.median_latency_ms),
                    number(p.chance_p),
                    number(curve.spontaneous_probability),
                ];
                row.extend(fit.iter().cloned());
                out.row(&row);
            }
        }
        out.finish()
    }

    /// The text report's lines on the stimuli.
    pub fn to_text(&self) -> String {
        use std::fmt::Write;
        let mut out = String::new();
        let unit = self.unit.symbol();
        let _ = writeln!(
            out,
            "Stimuli        {} from {} ({} amplitudes); response {}-{} ms after each",
            self.stimuli.len(),
            self.protocol_file,
            self.population.points.len(),
            self.settings.blank_ms,
            self.settings.window_ms
        );
        for p in &self.population.points {
            let ci = p.fraction_ci.map_or(String::new(), |c| {
                format!(" (95% CI {:.2}-{:.2})", c[0], c[1])
            });
            let _ = writeln!(
                out,
                "  {:>10} {unit}: {:.2} of sites responded{ci}, {} of {}",
                p.amplitude, p.fraction, p.responders, p.trials
            );
        }
        let _ = writeln!(
            out,
            "  population: {}",
            describe(&self.population.fit, unit)
        );
        let fitted = self
            .sites
            .iter()
            .filter(|c| matches!(c.fit, CurveFit::Fitted(_)))
            .count();
        let _ = writeln!(
            out,
            "  sites: {fitted} of {} with a fitted threshold (curves.csv)",
            self.sites.len()
        );
        out
    }
}

/// A curve's fit in words.
pub(crate) fn describe(fit: &CurveFit, unit: &str) -> String {
    let bound = |v: Option<f64>| v.map_or("open".to_string(), |v| format!("{v:.4}"));
    match fit {
        CurveFit::Fitted(f) => format!(
            "50% at {:.4} {unit} (95% profile CI {} to {}), width {:.4} {unit} ({} to {}); deviance {:.2} on {} df{}",
            f.threshold,
            bound(f.threshold_ci[0]),
            bound(f.threshold_ci[1]),
            f.width,
            bound(f.width_ci[0]),
            bound(f.width_ci[1]),
            f.deviance,
            f.degrees_of_freedom,
            f.fit_p.map_or(String::new(), |p| format!(", fit p {p:.3}"))
        ),
        CurveFit::Separated { below, above } => format!(
            "an all-or-none step: the threshold lies between {below} and {above} {unit} (no curve can be fitted)"
        ),
        CurveFit::NoneResponded { highest } => {
            format!("no response: the threshold is above {highest} {unit}")
        }
        CurveFit::AllResponded { lowest } => {
            format!("every trial responded: the threshold is below {lowest} {unit}")
        }
        CurveFit::OneAmplitude {
            amplitude,
            fraction,
        } => format!("one amplitude only ({amplitude} {unit}: {fraction:.2} responded)"),
        CurveFit::NoRise { slope } => {
            format!("the share does not rise with amplitude (slope {slope:.3})")
        }
        CurveFit::NotFitted { reason } => format!("not fitted: {reason}"),
    }
}

/// The fit's columns of `curves.csv`.
fn curve_fit_fields(curve: &ResponseCurve) -> Vec<String> {
    let mut fields = vec![curve.fit.kind().to_string()];
    match &curve.fit {
        CurveFit::Fitted(f) => fields.extend([
            f.threshold.to_string(),
            f.threshold_se.to_string(),
            number(f.threshold_ci[0]),
            number(f.threshold_ci[1]),
            f.width.to_string(),
            number(f.width_ci[0]),
            number(f.width_ci[1]),
            f.deviance.to_string(),
            f.degrees_of_freedom.to_string(),
            number(f.fit_p),
        ]),
        _ => fields.extend(std::iter::repeat_n(String::new(), 10)),
    }
    let (above, below) = curve.fit.threshold_bounds();
    fields.extend([number(above), number(below)]);
    fields
}

impl AnalysisReport {
    /// `responses.csv` and `curves.csv` when the recording came with stimuli.
    pub fn response_files(&self) -> Vec<(&'static str, String)> {
        self.response
            .as_ref()
            .map(|r| {
                vec![
                    ("responses.csv", r.responses_csv()),
                    ("curves.csv", r.curves_csv()),
                ]
            })
            .unwrap_or_default()
    }
}
