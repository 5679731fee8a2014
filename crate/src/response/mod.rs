//! Responses to stimulation: which sites fired after each stimulus, how that grows with the
//! amplitude, and the cumulative-Gaussian curve of it per site and for the population.
//!
//! For each stimulus and site, the site **responded** when it has an event after the
//! artefact blanking (`blank_ms`) and no later than `window_ms` after the stimulus; the
//! **latency** is the time of that first event. Both defaults are `common practice, no
//! source`: 2 ms covers the artefact of a field or electrode pulse on a typical array, and
//! 200 ms covers a network burst sweeping a few millimetres at tens of mm/s.
//!
//! Chance: each site's **spontaneous probability** is the share of windows of the same
//! length (`window_ms - blank_ms`), laid end to end before the first stimulus, that hold an
//! event. Each curve point says how likely its responders would be from spontaneous firing
//! alone (the binomial upper tail).
//!
//! Curves: fitted with the spontaneous probability as the floor a curve starts from
//! (Abbott's formula, [`probit::fit_probit_above`]), so chance firing is not read as a
//! wider spread of thresholds. Per site, `trials` are the stimuli at an amplitude; for the
//! population, every
//! site at every stimulus (responders within one stimulus are not independent in a
//! connected network, so the population fit's intervals are too narrow there; the
//! per-amplitude fractions and their Wilson intervals are what to read). Fits are by
//! [`probit::fit_probit`].

pub mod percolation;
pub mod probit;

use crate::place::{Notice, Place};
use crate::recording::{AmplitudeUnit, StimulusProtocol};
use crate::stats::{median, wilson_interval};
use probit::{fit_probit_above, CurveFit, DosePoint};
use serde::{Deserialize, Serialize};

/// How responses are judged.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct ResponseSettings {
    /// Events this soon after a stimulus are taken as its artefact and left out, ms.
    pub blank_ms: f64,
    /// The response window ends this long after the stimulus, ms.
    pub window_ms: f64,
    /// Level of the Wilson and profile-likelihood intervals.
    pub confidence: f64,
    /// Fewest baseline windows before the first stimulus for a spontaneous probability.
    pub min_baseline_windows: usize,
}

impl Default for ResponseSettings {
    fn default() -> Self {
        ResponseSettings {
            blank_ms: 2.0,
            window_ms: 200.0,
            confidence: 0.95,
            min_baseline_windows: 10,
        }
    }
}

/// What happened after one stimulus.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StimulusOutcome {
    /// Index in the protocol (time order), from 0.
    pub stimulus: usize,
    pub time_s: f64,
    pub amplitude: f64,
    pub site: Option<String>,
    pub label: Option<String>,
    /// Per site (recording order): the latency of its first event in the window, ms, or
    /// `None` when it did not respond.
    pub latency_ms: Vec<Option<f64>>,
    /// Sites that responded.
    pub responding: usize,
}

/// One amplitude of a response curve.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CurvePoint {
    pub amplitude: f64,
    pub trials: usize,
    pub responders: usize,
    pub fraction: f64,
    /// Wilson interval of the fraction.
    pub fraction_ci: Option<[f64; 2]>,
    /// Median latency of the responses, ms.
    pub median_latency_ms: Option<f64>,
    /// P(at least this many responders from spontaneous firing alone); `None` without a
    /// spontaneous probability.
    pub chance_p: Option<f64>,
}

/// A response curve (one site's, or the population's) and its fit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ResponseCurve {
    /// The site's id, or `population`.
    pub name: String,
    /// Probability of an event in a window of the response window's length without a
    /// stimulus (for the population, the mean over sites).
    pub spontaneous_probability: Option<f64>,
    pub points: Vec<CurvePoint>,
    pub fit: CurveFit,
}

/// Everything measured on the stimuli of a recording.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ResponseReport {
    pub settings: ResponseSettings,
    /// The protocol's file and amplitude unit.
    pub protocol_file: String,
    pub unit: AmplitudeUnit,
    /// Time before the first stimulus used for the spontaneous probabilities, s.
    pub baseline_s: f64,
    pub stimuli: Vec<StimulusOutcome>,
    pub population: ResponseCurve,
    /// One curve per site, in recording order.
    pub sites: Vec<ResponseCurve>,
    pub notices: Vec<Notice>,
}

/// The population curve in a few numbers (summary.json's `response`, the study's
/// `recordings.csv`).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ResponseSummary {
    pub unit: AmplitudeUnit,
    pub stimuli: usize,
    /// The fit's kind (`fitted`, `all_or_none_step`, ...).
    pub fit: &'static str,
    /// The 50% point and spread with their profile intervals, when fitted.
    pub threshold: Option<f64>,
    pub threshold_ci: Option<[Option<f64>; 2]>,
    pub width: Option<f64>,
    /// Where the threshold lies when no curve was fitted.
    pub threshold_above: Option<f64>,
    pub threshold_below: Option<f64>,
    pub spontaneous_probability: Option<f64>,
}

impl ResponseReport {
    /// The population curve in a few numbers.
    pub fn summary(&self) -> ResponseSummary {
        let fit = &self.population.fit;
        let fitted = match fit {
            CurveFit::Fitted(f) => Some(f),
            _ => None,
        };
        let (above, below) = fit.threshold_bounds();
        ResponseSummary {
            unit: self.unit,
            stimuli: self.stimuli.len(),
            fit: fit.kind(),
            threshold: fitted.map(|f| f.threshold),
            threshold_ci: fitted.map(|f| f.threshold_ci),
            width: fitted.map(|f| f.width),
            threshold_above: above,
            threshold_below: below,
            spontaneous_probability: self.population.spontaneous_probability,
        }
    }
}

/// Responses of `sites` (id, sorted event times in s) to every stimulus of `protocol`.
pub fn responses(
    sites: &[(&str, &[f64])],
    protocol: &StimulusProtocol,
    settings: &ResponseSettings,
) -> ResponseReport {
    let blank_s = settings.blank_ms.max(0.0) / 1000.0;
    let window_s = (settings.window_ms / 1000.0).max(blank_s);
    let confidence = settings.confidence.clamp(0.5, 0.999_999);
    let mut notices = Vec::new();
    let place = || Place::file(&protocol.file);
    if window_s <= blank_s {
        notices.push(Notice::new(
            place(),
            format!(
                "the response window ({} ms) is not longer than the blanking ({} ms): no response can be seen",
                settings.window_ms, settings.blank_ms
            ),
        ));
    }
    let closest = protocol
        .stimuli
        .windows(2)
        .map(|w| w[1].time_s - w[0].time_s)
        .fold(f64::INFINITY, f64::min);
    if closest < window_s {
        notices.push(Notice::new(
            place(),
            format!(
                "two stimuli are {:.1} ms apart, less than the response window ({} ms): an event may be counted as a response to both",
                closest * 1000.0,
                settings.window_ms
            ),
        ));
    }
    // Spontaneous probabilities, from the time before the first stimulus.
    let baseline_s = protocol.stimuli.first().map_or(0.0, |s| s.time_s);
    let length = window_s - blank_s;
    let windows = if length > 0.0 {
        (baseline_s / length).floor().min(1e7) as usize
    } else {
        0
    };
    let spontaneous: Vec<Option<f64>> = sites
        .iter()
        .map(|(_, events)| {
            (windows >= settings.min_baseline_windows.max(1)).then(|| {
                let mut hit = 0usize;
                let mut k = 0usize;
                for w in 0..windows {
                    let (a, b) = (w as f64 * length, (w + 1) as f64 * length);
                    while k < events.len() && events[k] < a {
                        k += 1;
                    }
                    if k < events.len() && events[k] < b {
                        hit += 1;
                    }
                }
                hit as f64 / windows as f64
            })
        })
        .collect();
    if windows < settings.min_baseline_windows.max(1) {
        notices.push(Notice::new(
            place(),
            format!(
                "the first stimulus comes {baseline_s:.2} s into the recording, {windows} response windows of {:.0} ms; at least {} are needed to measure spontaneous firing, so the curves carry no chance level",
                length * 1000.0,
                settings.min_baseline_windows
            ),
        ));
    }
    let stimuli: Vec<StimulusOutcome> = protocol
        .stimuli
        .iter()
        .enumerate()
        .map(|(i, s)| {
            let latency_ms: Vec<Option<f64>> = sites
                .iter()
                .map(|(_, events)| {
                    let from = events.partition_point(|&t| t <= s.time_s + blank_s);
                    events
                        .get(from)
                        .filter(|&&t| t <= s.time_s + window_s)
                        .map(|&t| (t - s.time_s) * 1000.0)
                })
                .collect();
            StimulusOutcome {
                stimulus: i,
                time_s: s.time_s,
                amplitude: s.amplitude,
                site: s.site.clone(),
                label: s.label.clone(),
                responding: latency_ms.iter().filter(|l| l.is_some()).count(),
                latency_ms,
            }
        })
        .collect();
    let mut amplitudes: Vec<f64> = stimuli.iter().map(|s| s.amplitude).collect();
    amplitudes.sort_by(f64::total_cmp);
    amplitudes.dedup();
    // Per amplitude: the stimuli given at it.
    let at: Vec<Vec<&StimulusOutcome>> = amplitudes
        .iter()
        .map(|&a| stimuli.iter().filter(|s| s.amplitude == a).collect())
        .collect();
    let known: Vec<f64> = spontaneous.iter().flatten().copied().collect();
    let population_p0 = (known.len() == sites.len() && !known.is_empty())
        .then(|| known.iter().sum::<f64>() / known.len() as f64);
    let population_groups = at
        .iter()
        .map(|group| {
            let trials = group.iter().map(|s| s.latency_ms.len()).sum();
            let latencies = group
                .iter()
                .flat_map(|s| s.latency_ms.iter().flatten().copied())
                .collect();
            (trials, latencies)
        })
        .collect();
    let population = curve(
        "population".into(),
        &amplitudes,
        population_groups,
        population_p0,
        confidence,
    );
    let site_curves = sites
        .iter()
        .enumerate()
        .map(|(j, (id, _))| {
            let groups = at
                .iter()
                .map(|group| {
                    let latencies = group.iter().filter_map(|s| s.latency_ms[j]).collect();
                    (group.len(), latencies)
                })
                .collect();
            curve(
                id.to_string(),
                &amplitudes,
                groups,
                spontaneous[j],
                confidence,
            )
        })
        .collect();
    ResponseReport {
        settings: settings.clone(),
        protocol_file: protocol.file.clone(),
        unit: protocol.unit,
        baseline_s,
        stimuli,
        population,
        sites: site_curves,
        notices,
    }
}

/// A curve from, per amplitude, the trials and the latencies of the responses (ms).
fn curve(
    name: String,
    amplitudes: &[f64],
    groups: Vec<(usize, Vec<f64>)>,
    p0: Option<f64>,
    confidence: f64,
) -> ResponseCurve {
    let points: Vec<CurvePoint> = amplitudes
        .iter()
        .zip(groups)
        .map(|(&amplitude, (trials, latencies))| {
            let responders = latencies.len();
            CurvePoint {
                amplitude,
                trials,
                responders,
                fraction: if trials > 0 {
                    responders as f64 / trials as f64
                } else {
                    0.0
                },
                fraction_ci: wilson_interval(responders, trials, confidence),
                median_latency_ms: median(&latencies),
                chance_p: p0.map(|p| binomial_upper_tail(trials, responders, p)),
            }
        })
        .collect();
    let dose: Vec<DosePoint> = points
        .iter()
        .map(|p| DosePoint {
            amplitude: p.amplitude,
            trials: p.trials,
            responders: p.responders,
        })
        .collect();
    ResponseCurve {
        name,
        spontaneous_probability: p0,
        fit: fit_probit_above(&dose, confidence, p0.unwrap_or(0.0)),
        points,
    }
}

/// P(X >= k) for X ~ Binomial(n, p): the terms from k up, each from `libm`'s log-gamma
/// (so native and WebAssembly builds agree to the bit), summed until they no longer change
/// the total.
pub fn binomial_upper_tail(n: usize, k: usize, p: f64) -> f64 {
    if k == 0 {
        return 1.0;
    }
    if k > n || p.is_nan() || p <= 0.0 {
        return 0.0;
    }
    if p >= 1.0 {
        return 1.0;
    }
    let (nf, lp, lq) = (n as f64, libm::log(p), libm::log1p(-p));
    let ln_choose =
        |j: f64| libm::lgamma(nf + 1.0) - libm::lgamma(j + 1.0) - libm::lgamma(nf - j + 1.0);
    let mode = (nf * p).floor();
    let mut total = 0.0;
    for j in k..=n {
        let jf = j as f64;
        let term = libm::exp(ln_choose(jf) + jf * lp + (nf - jf) * lq);
        total += term;
        // Past the mode the terms only fall: stop once they no longer count.
        if jf > mode && term < total * 1e-17 {
            break;
        }
    }
    total.min(1.0)
}
