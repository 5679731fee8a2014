//! Percolation analysis over a series of progressively blocked synapses (Breskin, Soriano,
//! Moses & Tlusty 2006, Phys. Rev. Lett. 97:188102; Soriano et al. 2008, PNAS 105:13758).
//!
//! The fully blocked level gives the **disconnected curve** f(V): the share of neurons a
//! stimulus of amplitude V fires directly, fitted as a cumulative Gaussian. At every other
//! level the network's own curve Phi(V) is read against it:
//!
//! - **Network threshold** V*: the 50% point of Phi (its fit, or the middle of its
//!   all-or-none step).
//! - **Ignition fraction** f* = f(V*): the share of neurons that must fire directly for the
//!   network to ignite, read on the disconnected curve.
//! - **Giant component** g: in the bond-percolation picture a neuron fires when the stimulus
//!   reaches it directly or when it belongs to the giant component once that has ignited,
//!   so above ignition Phi = f + (1 - f) g (the relation the 2006 paper measures g by, as
//!   we recall it: from memory, check against the paper before relying on it). Here g is
//!   the pooled estimate over the amplitudes at or above V*: sum n (Phi - f) / sum n (1 - f),
//!   with an interval from the Wilson interval of the pooled share, f held fixed.
//!
//! What the data cannot show, and the inference assumes:
//! - that the blocker acts on the synapses only, so the directly evoked share f(V) is the
//!   same at every level (the thresholds of single neurons do not change);
//! - that the recorded sites are a fair sample of neurons (electrodes hearing several
//!   neurons respond at the lowest of their thresholds, which shifts f and f* down);
//! - that all of the giant component fires once ignited and nothing else does (quorum
//!   effects, Cohen et al. 2010 EPL 89:18008, make part of it need more than one input);
//! - the interval of g ignores the uncertainty of f and the correlation of sites within one
//!   stimulus, so it is too narrow.

use super::probit::{fit_probit, CurveFit, DosePoint};
use crate::stats::wilson_interval;
use serde::Serialize;

/// One level of the block series: its value (the blocker's concentration, or 1 - the
/// scale of the weights) and the network curve's points, pooled over its recordings.
#[derive(Debug, Clone, PartialEq)]
pub struct BlockLevel {
    pub name: String,
    pub points: Vec<DosePoint>,
}

/// What one level says.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PercolationLevel {
    pub name: String,
    pub fit: CurveFit,
    /// The network threshold V*, in the amplitude's unit.
    pub threshold: Option<f64>,
    /// The disconnected curve at V*: the ignition fraction.
    pub ignition_fraction: Option<f64>,
    /// The giant component and its interval.
    pub giant_component: Option<f64>,
    pub giant_component_ci: Option<[f64; 2]>,
    /// Trials pooled for g (amplitudes at or above V*).
    pub giant_trials: usize,
}

/// The analysis of a block series.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PercolationReport {
    /// The fully blocked level and its fit (the disconnected curve).
    pub disconnected: String,
    pub disconnected_fit: CurveFit,
    pub levels: Vec<PercolationLevel>,
    /// Each level's points as given (for the figures).
    #[serde(skip)]
    pub levels_points: Vec<Vec<DosePoint>>,
}

/// Why a series cannot be analysed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum PercolationError {
    #[error("the fully blocked level {0:?} gives no cumulative Gaussian ({1}); the disconnected curve needs responses that rise over the amplitudes tried")]
    NoDisconnectedCurve(String, &'static str),
    #[error("no level is named {0:?}; the levels are {1}")]
    NoSuchLevel(String, String),
}

/// Reads every level against the disconnected curve of `levels[disconnected]`.
pub fn percolation(
    levels: &[BlockLevel],
    disconnected: usize,
    confidence: f64,
) -> Result<PercolationReport, PercolationError> {
    let Some(blocked) = levels.get(disconnected) else {
        return Err(PercolationError::NoSuchLevel(
            disconnected.to_string(),
            levels
                .iter()
                .map(|l| l.name.as_str())
                .collect::<Vec<_>>()
                .join(", "),
        ));
    };
    let disconnected_fit = fit_probit(&blocked.points, confidence);
    let CurveFit::Fitted(f0) = &disconnected_fit else {
        return Err(PercolationError::NoDisconnectedCurve(
            blocked.name.clone(),
            disconnected_fit.kind(),
        ));
    };
    let f = |v: f64| crate::response::probit::normal_cdf((v - f0.threshold) / f0.width);
    let out = levels
        .iter()
        .map(|level| {
            let fit = fit_probit(&level.points, confidence);
            let threshold = match &fit {
                CurveFit::Fitted(p) => Some(p.threshold),
                CurveFit::Separated { below, above } => Some(0.5 * (below + above)),
                CurveFit::AllResponded { lowest } => Some(*lowest),
                _ => None,
            };
            let mut giant = (None, None, 0);
            if let Some(v_star) = threshold {
                let above: Vec<&DosePoint> = level
                    .points
                    .iter()
                    .filter(|p| p.amplitude >= v_star && p.trials > 0)
                    .collect();
                let n: f64 = above.iter().map(|p| p.trials as f64).sum();
                let k: usize = above.iter().map(|p| p.responders).sum();
                // Trials-weighted mean of f over the pooled amplitudes.
                let f_bar = above
                    .iter()
                    .map(|p| p.trials as f64 * f(p.amplitude))
                    .sum::<f64>()
                    / n.max(1.0);
                if n > 0.0 && f_bar < 1.0 - 1e-9 {
                    let g = |share: f64| ((share - f_bar) / (1.0 - f_bar)).clamp(0.0, 1.0);
                    giant = (
                        Some(g(k as f64 / n)),
                        wilson_interval(k, n as usize, confidence).map(|[lo, hi]| [g(lo), g(hi)]),
                        n as usize,
                    );
                }
            }
            PercolationLevel {
                name: level.name.clone(),
                threshold,
                ignition_fraction: threshold.map(f),
                giant_component: giant.0,
                giant_component_ci: giant.1,
                giant_trials: giant.2,
                fit,
            }
        })
        .collect();
    Ok(PercolationReport {
        disconnected: blocked.name.clone(),
        disconnected_fit,
        levels: out,
        levels_points: levels.iter().map(|l| l.points.clone()).collect(),
    })
}
