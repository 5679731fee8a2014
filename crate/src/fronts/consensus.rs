//! Sites checked against the front the other sites make.
//!
//! A site's first spike in a burst is usually when the front reached it, but not always: a
//! stray spike can come before the front (background firing, a unit that fires on its own),
//! a unit can miss the front and fire late, and an electrode can lie. The robust fit of all
//! sites tells which times are implausible: a site more than `outlier_sd` robust residual SDs
//! from the fitted front is re-timed to its earliest spike within that bound (past a stray,
//! or back to a single spike the activation rule passed over), or set aside when none lies
//! there. The fit is then repeated without the set-aside sites, until the verdicts settle.
//!
//! Theil-Sen, which times the fit, tolerates up to 29% of points anywhere (Sen 1968); the
//! model choice uses a bounded loss. When more than a third of the sites would be re-timed or
//! set aside, no single front describes the burst and the first spikes stand as they are.

use super::activation::ActivationSettings;
use super::models::{
    choose_model, residual_scale, FrontPoints, FrontSettings, ModelChoice, NoFront,
};
use crate::geometry::Track;
use serde::Serialize;

/// What became of a site's activation in the front fit.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ActivationStatus {
    /// Used as timed by the activation rule.
    Used,
    /// Its time by the activation rule lay implausibly far from the front the other sites
    /// make (a stray spike before the front, or a single spike passed over) and it was
    /// re-timed to its earliest spike that fits the front; used.
    Retimed,
    /// Set aside: its time came implausibly early and none of its spikes fits the front.
    EarlyOutlier,
    /// Set aside: it activated implausibly late for the front the other sites make.
    LateOutlier,
    /// Off the track: not used for the fit.
    OffTrack,
}

impl ActivationStatus {
    /// Whether the front fit uses the site.
    pub fn used(self) -> bool {
        matches!(self, ActivationStatus::Used | ActivationStatus::Retimed)
    }

    /// Whether the front check set the site aside as an outlier (early or late).
    pub fn set_aside(self) -> bool {
        matches!(
            self,
            ActivationStatus::EarlyOutlier | ActivationStatus::LateOutlier
        )
    }

    /// The name used in the JSON and CSV outputs.
    pub fn as_str(self) -> &'static str {
        match self {
            ActivationStatus::Used => "used",
            ActivationStatus::Retimed => "retimed",
            ActivationStatus::EarlyOutlier => "early_outlier",
            ActivationStatus::LateOutlier => "late_outlier",
            ActivationStatus::OffTrack => "off_track",
        }
    }

    /// A short phrase for the user.
    pub fn describe(self) -> &'static str {
        match self {
            ActivationStatus::Used => "used",
            ActivationStatus::Retimed => "re-timed to its earliest spike that fits the front",
            ActivationStatus::EarlyOutlier => {
                "set aside: activated far before the front and no spike near it"
            }
            ActivationStatus::LateOutlier => "set aside: activated far after the front",
            ActivationStatus::OffTrack => "off the track: not used",
        }
    }
}

/// The outcome of checking one burst's sites against each other.
#[derive(Debug, Clone)]
pub struct Settled {
    /// The points the front is fitted to: used and re-timed sites.
    pub points: FrontPoints,
    /// Per input point: its status and the time it was given (s).
    pub status: Vec<ActivationStatus>,
    pub time_s: Vec<f64>,
    /// The model choice on `points`.
    pub choice: Result<ModelChoice, NoFront>,
    /// More than a third of the sites disagreed with the front the others make, so the
    /// check gave up and left the times as they came.
    pub gave_up: bool,
}

impl Settled {
    /// Sites re-timed or set aside (all of them when the check gave up): how far the
    /// activation rule's times were from one consistent front.
    pub fn disagreements(&self) -> usize {
        if self.gave_up {
            self.status.len()
        } else {
            self.status
                .iter()
                .filter(|s| **s != ActivationStatus::Used)
                .count()
        }
    }
}

/// Most rounds of re-fitting before the verdicts are taken as they stand.
const MAX_ROUNDS: usize = 4;

/// Checks every point of `all` against the front fitted to the others.
///
/// The model is chosen once, on the activation rule's times; the rounds refit that model
/// (or, when one common time scored best, choose again among all).
///
/// `spikes_s[i]` are point i's spikes in the activation window (ascending, seconds), from
/// which a re-timed site takes its new time; `all.t_s[i]` is its time by the activation rule.
pub fn settle(
    all: &FrontPoints,
    spikes_s: &[&[f64]],
    track: &Track,
    fronts: &FrontSettings,
    activation: &ActivationSettings,
    time_step_s: Option<f64>,
) -> Settled {
    let n = all.len();
    let mut status = vec![ActivationStatus::Used; n];
    let mut time_s = all.t_s.clone();
    let mut points = all.clone();
    let mut choice = choose_model(&points, track, fronts, time_step_s);
    // The model chosen on the sites' own first spikes (a bounded loss keeps strays from
    // deciding it) is the one they are checked against; choosing again after re-timing
    // would let re-timed sites vote for the model that re-timed them.
    let initial_scores = choice.as_ref().ok().map(|c| c.scores.clone());
    let restricted;
    let fronts = match &choice {
        Ok(ModelChoice { model: Some(m), .. }) => {
            restricted = FrontSettings {
                models: vec![*m],
                ..fronts.clone()
            };
            &restricted
        }
        _ => fronts,
    };
    let mut gave_up = false;
    if !activation.consensus {
        return Settled {
            points,
            status,
            time_s,
            choice,
            gave_up,
        };
    }
    for _ in 0..MAX_ROUNDS {
        let Ok(current) = &choice else { break };
        // The chosen model's own residual scale on the points it was fitted to.
        let residuals: Vec<f64> = points
            .t_s
            .iter()
            .zip(&current.predicted_s)
            .map(|(t, p)| t - p)
            .collect();
        let bound =
            (activation.outlier_sd * residual_scale(&residuals)).max(activation.min_outlier_s);
        let mut next_status = vec![ActivationStatus::Used; n];
        let mut next_time = all.t_s.clone();
        for i in 0..n {
            let predicted =
                current.predict_at(track, all.along_um[i], all.angle_rad[i], all.xy_um[i]);
            let r = all.t_s[i] - predicted;
            if r.abs() <= bound {
                continue;
            }
            // The site's earliest spike that fits the front: past a stray that came early,
            // or back to a single spike that the activation rule passed over.
            let fitting = spikes_s[i]
                .iter()
                .copied()
                .find(|&s| (s - predicted).abs() <= bound);
            match fitting {
                Some(s) => {
                    next_status[i] = ActivationStatus::Retimed;
                    next_time[i] = s;
                }
                None if r < 0.0 => next_status[i] = ActivationStatus::EarlyOutlier,
                None => next_status[i] = ActivationStatus::LateOutlier,
            }
        }
        let changed = next_status
            .iter()
            .filter(|s| **s != ActivationStatus::Used)
            .count();
        if 3 * changed > n {
            // No single front: leave the sites as the activation rule timed them.
            status = vec![ActivationStatus::Used; n];
            time_s = all.t_s.clone();
            points = all.clone();
            choice = choose_model(&points, track, fronts, time_step_s);
            gave_up = true;
            break;
        }
        if next_status == status && next_time == time_s {
            break;
        }
        status = next_status;
        time_s = next_time;
        points = subset(all, &status, &time_s);
        choice = choose_model(&points, track, fronts, time_step_s);
    }
    // Report every model's score on the sites' own first spikes, where all were compared.
    if let (Ok(final_choice), Some(scores)) = (&mut choice, initial_scores) {
        final_choice.scores = scores;
    }
    Settled {
        points,
        status,
        time_s,
        choice,
        gave_up,
    }
}

/// The used points of `all`, with their settled times.
fn subset(all: &FrontPoints, status: &[ActivationStatus], time_s: &[f64]) -> FrontPoints {
    let keep: Vec<usize> = (0..all.len()).filter(|&i| status[i].used()).collect();
    FrontPoints {
        site: keep.iter().map(|&i| all.site[i]).collect(),
        along_um: keep.iter().map(|&i| all.along_um[i]).collect(),
        angle_rad: keep.iter().map(|&i| all.angle_rad[i]).collect(),
        xy_um: keep.iter().map(|&i| all.xy_um[i]).collect(),
        t_s: keep.iter().map(|&i| time_s[i]).collect(),
    }
}
