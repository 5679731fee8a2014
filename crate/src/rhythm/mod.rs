//! Rhythm: how regularly bursts recur.

pub mod site_bursts;
pub mod sites;
pub mod spectrum;

use crate::stats::{mean, quantile, sample_sd};
use serde::Serialize;

/// Interburst intervals: times between successive burst starts, seconds.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct IntervalStats {
    /// Number of intervals (bursts - 1).
    pub count: usize,
    pub median_s: Option<f64>,
    /// 25th and 75th percentiles (numpy's default linear interpolation).
    pub q25_s: Option<f64>,
    pub q75_s: Option<f64>,
    pub iqr_s: Option<f64>,
    pub mean_s: Option<f64>,
    /// Coefficient of variation: sample SD / mean.
    pub cv: Option<f64>,
}

/// Interval statistics of event times (seconds, ascending). Fewer than two events give
/// counts of zero and `None` everywhere else.
pub fn interval_stats(starts_s: &[f64]) -> IntervalStats {
    let intervals: Vec<f64> = starts_s.windows(2).map(|w| w[1] - w[0]).collect();
    let q25 = quantile(&intervals, 0.25);
    let q75 = quantile(&intervals, 0.75);
    let m = mean(&intervals);
    IntervalStats {
        count: intervals.len(),
        median_s: quantile(&intervals, 0.5),
        q25_s: q25,
        q75_s: q75,
        iqr_s: q25.zip(q75).map(|(a, b)| b - a),
        mean_s: m,
        cv: sample_sd(&intervals).zip(m).map(|(s, m)| s / m),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn intervals_worked_by_hand() {
        // Starts 0, 2, 5, 9, 14: intervals 2, 3, 4, 5; median 3.5; numpy percentiles
        // (linear) 25% = 2.75, 75% = 4.25; mean 3.5; sample sd sqrt(5/3).
        let s = interval_stats(&[0.0, 2.0, 5.0, 9.0, 14.0]);
        assert_eq!(s.count, 4);
        assert_eq!(s.median_s, Some(3.5));
        assert_eq!(s.q25_s, Some(2.75));
        assert_eq!(s.q75_s, Some(4.25));
        assert_eq!(s.iqr_s, Some(1.5));
        let cv = s.cv.unwrap();
        assert!((cv - (5.0f64 / 3.0).sqrt() / 3.5).abs() < 1e-12);
        let none = interval_stats(&[1.0]);
        assert_eq!((none.count, none.median_s, none.cv), (0, None, None));
    }
}
