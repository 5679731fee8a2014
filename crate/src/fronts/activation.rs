//! When the front reached each site in a burst.

use crate::detect::NetworkBurst;
use serde::{Deserialize, Serialize};

/// How a site's activation time is read from its spikes in a burst.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ActivationRule {
    /// The first spike that opens a cluster (as `FirstOfCluster`) when the site fires one in
    /// the burst, otherwise its first spike: a multi-unit site's lone stray spike is passed
    /// over, and a single unit's only spike still counts. The other sites' consensus then
    /// checks every time (see `consensus` in [`ActivationSettings`]).
    #[default]
    Adaptive,
    /// The site's first spike in the burst window.
    FirstSpike,
    /// The first spike that opens a cluster of `cluster_spikes` spikes within
    /// `cluster_window_s`: a lone stray spike before the front is passed over (but so is a
    /// single unit's only spike).
    FirstOfCluster,
    /// The median of the site's first `median_of_first` spikes in the burst.
    MedianOfFirst,
}

/// Activation settings. Times in seconds.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct ActivationSettings {
    pub rule: ActivationRule,
    /// Spikes that make a cluster (the first included).
    pub cluster_spikes: usize,
    /// Span of a cluster.
    pub cluster_window_s: f64,
    /// k for the median-of-first-k rule.
    pub median_of_first: usize,
    /// The search starts this long before the burst window (the origin fires before the
    /// population rate crosses its threshold), but never before the previous burst ended.
    pub lead_s: f64,
    /// Check every site against the front the other sites make: a site whose time lies more
    /// than `outlier_sd` robust residual SDs (and `min_outlier_s`) before the front is
    /// re-timed to its first spike that fits, or set aside; one that lies as far after it is
    /// set aside.
    pub consensus: bool,
    /// Outlier bound in robust SDs of the front's residuals (the Hampel identifier; Leys et
    /// al. 2013, J Exp Soc Psychol 49:764, discuss 2.5 to 3; 3.5 sets aside fewer good sites).
    pub outlier_sd: f64,
    /// ... and never closer to the front than this, seconds (common practice, no source).
    pub min_outlier_s: f64,
}

impl Default for ActivationSettings {
    fn default() -> Self {
        ActivationSettings {
            rule: ActivationRule::Adaptive,
            cluster_spikes: 2,
            cluster_window_s: 0.02,
            median_of_first: 3,
            lead_s: 0.1,
            consensus: true,
            outlier_sd: 3.5,
            min_outlier_s: 0.002,
        }
    }
}

/// The window (seconds) in which a site's activation is sought: from `lead_s` before the
/// burst (never before the previous burst's end, `not_before_s`) to the burst's end.
pub fn activation_window(
    burst: &NetworkBurst,
    not_before_s: f64,
    settings: &ActivationSettings,
) -> (f64, f64) {
    (
        (burst.start_s - settings.lead_s).max(not_before_s),
        burst.end_s,
    )
}

/// Activation time of every site (seconds) in `burst`; `None` for sites that do not take
/// part. `not_before_s` is the end of the previous burst.
pub fn activation_times(
    trains_s: &[Vec<f64>],
    burst: &NetworkBurst,
    not_before_s: f64,
    settings: &ActivationSettings,
) -> Vec<Option<f64>> {
    let (from, to) = activation_window(burst, not_before_s, settings);
    trains_s
        .iter()
        .map(|train| {
            let a = train.partition_point(|&t| t < from);
            let b = train.partition_point(|&t| t <= to);
            if a == b {
                return None;
            }
            let first_of_cluster = || {
                let k = settings.cluster_spikes.max(1);
                (a..b)
                    .find(|&j| {
                        let end =
                            train.partition_point(|&t| t <= train[j] + settings.cluster_window_s);
                        end - j >= k
                    })
                    .map(|j| train[j])
            };
            match settings.rule {
                ActivationRule::Adaptive => first_of_cluster().or(Some(train[a])),
                ActivationRule::FirstSpike => Some(train[a]),
                ActivationRule::FirstOfCluster => first_of_cluster(),
                ActivationRule::MedianOfFirst => {
                    let k = settings.median_of_first.max(1).min(b - a);
                    crate::stats::median(&train[a..a + k])
                }
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn burst(start_s: f64, end_s: f64) -> NetworkBurst {
        NetworkBurst {
            start_s,
            end_s,
            peak_s: start_s,
            sites: vec![0],
            spike_count: 0,
        }
    }

    #[test]
    fn a_stray_spike_before_the_cluster_is_passed_over() {
        // Stray at 0.95 s, the site's own burst from 1.00 s.
        let trains = vec![vec![0.95, 1.0, 1.004, 1.01, 1.2], vec![], vec![1.3]];
        let settings = ActivationSettings {
            rule: ActivationRule::FirstOfCluster,
            ..ActivationSettings::default()
        };
        let t = activation_times(&trains, &burst(1.0, 1.5), f64::NEG_INFINITY, &settings);
        assert_eq!(t, vec![Some(1.0), None, None]);
    }

    #[test]
    fn median_of_first_k_and_the_previous_burst_bound() {
        let trains = vec![vec![0.5, 1.0, 1.004, 1.01, 1.2]];
        let settings = ActivationSettings {
            rule: ActivationRule::MedianOfFirst,
            ..ActivationSettings::default()
        };
        // The previous burst ended at 0.9 s, so 0.5 s is out of reach even with the lead.
        let t = activation_times(&trains, &burst(1.0, 1.5), 0.9, &settings);
        assert_eq!(t, vec![Some(1.004)]);
    }
}
