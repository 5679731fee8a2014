//! Events from calcium-imaging traces: dF/F against a running low percentile, a robust noise
//! estimate, hysteresis thresholds, and sub-frame onset times.
//!
//! The default onset is the **half-maximum crossing** of the rising edge, interpolated between
//! the two frames around it: the rise is steepest there, so noise moves the crossing least
//! (timing error ~ noise / slope), while the intercept of the rise with the baseline
//! extrapolates into the noise. For front speeds what matters is that every ROI is timed by
//! the same marker; the half-rise delay is common to all and drops out of the slope.

use serde::{Deserialize, Serialize};

/// Which point of the rising edge times an event.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum OnsetRule {
    /// Where dF/F first reaches half the event's peak (above its local baseline).
    #[default]
    HalfMaximum,
    /// Where the line through the 20% and 80% points of the rise meets the local baseline.
    BaselineIntercept,
}

/// Settings of event detection on fluorescence. Defaults are common practice, no source.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct CalciumSettings {
    /// Window of the running baseline F0, seconds (centred).
    pub baseline_window_s: f64,
    /// Percentile of F within the window taken as F0.
    pub baseline_percentile: f64,
    /// An event starts where dF/F exceeds this many noise SDs...
    pub high_sd: f64,
    /// ...and lasts while it stays above this many.
    pub low_sd: f64,
    pub onset: OnsetRule,
}

impl Default for CalciumSettings {
    fn default() -> Self {
        CalciumSettings {
            baseline_window_s: 10.0,
            baseline_percentile: 8.0,
            high_sd: 4.0,
            low_sd: 1.5,
            onset: OnsetRule::HalfMaximum,
        }
    }
}

/// Running `percentile` (0-100) of `f` over a centred window of `window` frames; NaN frames
/// are left out of every window and get NaN. Sliding sorted window: O(n w) moves, which is
/// small for imaging lengths.
pub fn running_percentile(f: &[f64], window: usize, percentile: f64) -> Vec<f64> {
    let half = window.max(1) / 2;
    let mut sorted: Vec<f64> = Vec::with_capacity(2 * half + 1);
    let insert = |sorted: &mut Vec<f64>, v: f64| {
        if !v.is_nan() {
            let at = sorted.partition_point(|&x| x < v);
            sorted.insert(at, v);
        }
    };
    let remove = |sorted: &mut Vec<f64>, v: f64| {
        if !v.is_nan() {
            let at = sorted.partition_point(|&x| x < v);
            if at < sorted.len() {
                sorted.remove(at);
            }
        }
    };
    for &v in f.iter().take(half) {
        insert(&mut sorted, v);
    }
    let q = (percentile / 100.0).clamp(0.0, 1.0);
    let mut out = Vec::with_capacity(f.len());
    for k in 0..f.len() {
        if k + half < f.len() {
            insert(&mut sorted, f[k + half]);
        }
        if k > half {
            remove(&mut sorted, f[k - half - 1]);
        }
        out.push(if f[k].is_nan() || sorted.is_empty() {
            f64::NAN
        } else {
            // Linear interpolation between order statistics (numpy's default).
            let pos = q * (sorted.len() - 1) as f64;
            let lo = pos.floor() as usize;
            let hi = (lo + 1).min(sorted.len() - 1);
            sorted[lo] + (pos - lo as f64) * (sorted[hi] - sorted[lo])
        });
    }
    out
}

/// dF/F = (F - F0) / F0 with F0 the running low percentile.
pub fn delta_f_over_f(f: &[f64], frame_rate_hz: f64, s: &CalciumSettings) -> Vec<f64> {
    // Never wider than the trace (a window of 1e9 s, or a 1 ps frame interval, would
    // otherwise ask for terabytes).
    let window = ((s.baseline_window_s * frame_rate_hz).round() as usize)
        .min(f.len())
        .max(3);
    let f0 = running_percentile(f, window, s.baseline_percentile);
    f.iter()
        .zip(&f0)
        .map(|(&v, &b)| if b.abs() > 0.0 { (v - b) / b } else { f64::NAN })
        .collect()
}

/// Robust SD about the median, median(|x - median|) / 0.6745, ignoring NaN.
pub fn robust_sd(x: &[f64]) -> Option<f64> {
    let v: Vec<f64> = x.iter().copied().filter(|v| !v.is_nan()).collect();
    crate::stats::mad_sd(&v)
}

/// The levels events are found at in one dF/F trace (dimensionless, as dF/F).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct EventLevels {
    /// Median of the trace.
    pub centre: f64,
    /// An event lasts while dF/F stays above this...
    pub low: f64,
    /// ...and counts when it reaches this.
    pub high: f64,
}

/// The median of a dF/F trace and the two thresholds `low_sd` and `high_sd` robust SDs above
/// it; `None` for a trace without spread.
pub fn event_levels(dff: &[f64], s: &CalciumSettings) -> Option<EventLevels> {
    let sigma = robust_sd(dff)?;
    if sigma <= 0.0 {
        return None;
    }
    let centre = crate::stats::median(
        &dff.iter()
            .copied()
            .filter(|v| !v.is_nan())
            .collect::<Vec<_>>(),
    )
    .unwrap_or(0.0);
    Some(EventLevels {
        centre,
        low: centre + s.low_sd * sigma,
        high: centre + s.high_sd * sigma,
    })
}

/// Onset times (seconds) of the events in one dF/F trace on the time base `time_s`: runs
/// above `low_sd` noise SDs that reach `high_sd`, each timed on its rising edge by `onset`
/// relative to its local baseline (the median of the second before the run).
pub fn event_onsets(
    dff: &[f64],
    time_s: &[f64],
    frame_rate_hz: f64,
    s: &CalciumSettings,
) -> Vec<f64> {
    let Some(EventLevels { centre, low, high }) = event_levels(dff, s) else {
        return Vec::new();
    };
    let lookback = (frame_rate_hz.round() as usize).max(3);
    let at = |k: usize| -> f64 { time_s[k] };
    let mut onsets = Vec::new();
    let mut k = 0;
    while k < dff.len() {
        // NaN (a gap) is never above the threshold.
        let above = |v: f64| v.partial_cmp(&low) == Some(std::cmp::Ordering::Greater);
        if !above(dff[k]) {
            k += 1;
            continue;
        }
        // A run above the low threshold: [start, end).
        let start = k;
        let mut end = k;
        while end < dff.len() && above(dff[end]) {
            end += 1;
        }
        k = end;
        let peak = (start..end)
            .max_by(|&a, &b| dff[a].total_cmp(&dff[b]))
            .unwrap_or(start);
        if dff[peak].partial_cmp(&high) != Some(std::cmp::Ordering::Greater) {
            continue;
        }
        let before: Vec<f64> = dff[start.saturating_sub(lookback)..start]
            .iter()
            .copied()
            .filter(|v| !v.is_nan())
            .collect();
        let base = crate::stats::median(&before).unwrap_or(centre);
        let amplitude = dff[peak] - base;
        // Last frame before the peak at or below a level, and the sub-frame crossing after it.
        let crossing = |level: f64| -> Option<f64> {
            let from = start.saturating_sub(1);
            let i = (from..peak).rev().find(|&i| dff[i] <= level)?;
            let (a, b) = (dff[i], dff[i + 1]);
            let frac = if b > a { (level - a) / (b - a) } else { 0.0 };
            Some(at(i) + frac * (at(i + 1) - at(i)))
        };
        let onset = match s.onset {
            OnsetRule::HalfMaximum => crossing(base + 0.5 * amplitude),
            OnsetRule::BaselineIntercept => {
                match (
                    crossing(base + 0.2 * amplitude),
                    crossing(base + 0.8 * amplitude),
                ) {
                    (Some(t20), Some(t80)) if t80 > t20 => {
                        // The line through (t20, 0.2) and (t80, 0.8) meets 0 at t20 - (t80 - t20) / 3.
                        Some(t20 - (t80 - t20) / 3.0)
                    }
                    _ => None,
                }
            }
        };
        if let Some(t) = onset {
            onsets.push(t);
        }
    }
    onsets
}
