//! Each site as an oscillator: its rate, the regularity of its inter-event intervals, and
//! whether it keeps firing regularly on its own, outside the network bursts.

use super::site_bursts::{site_bursts, SiteBurstSettings, SiteBursts};
use crate::stats::{mean, quantile, sample_sd};
use serde::{Deserialize, Serialize};

/// When a site counts as firing regularly on its own.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct SiteRhythmSettings {
    /// Intervals outside bursts needed to judge (common practice, no source).
    pub min_intervals: usize,
    /// Largest CV of those intervals for a regular site (common practice, no source: a
    /// Poisson train has CV 1, a clock 0; 0.5 is halfway).
    pub max_cv: f64,
    /// Bursts within each site's train (MaxInterval and logISI).
    pub bursts: SiteBurstSettings,
}

impl Default for SiteRhythmSettings {
    fn default() -> Self {
        SiteRhythmSettings {
            min_intervals: 5,
            max_cv: 0.5,
            bursts: SiteBurstSettings::default(),
        }
    }
}

/// One site's firing.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SiteRhythm {
    pub site: String,
    /// Events per second over the recording.
    pub rate_hz: f64,
    pub events: usize,
    /// CV of all inter-event intervals (sample SD / mean).
    pub isi_cv: Option<f64>,
    /// Events outside network bursts, their intervals (both events outside, no burst between),
    /// and the CV and median of those intervals.
    pub events_alone: usize,
    pub intervals_alone: usize,
    pub isi_cv_alone: Option<f64>,
    pub isi_median_alone_s: Option<f64>,
    /// 1 / median interval outside bursts, Hz, for a site that fires regularly on its own.
    pub frequency_alone_hz: Option<f64>,
    /// At least `min_intervals` intervals outside bursts with a CV under `max_cv`.
    pub regular_alone: bool,
    /// Bursts within the site's own train, by both methods.
    pub bursts: SiteBursts,
}

/// The sites' oscillators beside the network's rhythm.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SiteRhythms {
    /// One row per site, in the recording's order; written to `sites.csv`, not the JSON.
    #[serde(skip)]
    pub sites: Vec<SiteRhythm>,
    /// Sites that fire regularly on their own.
    pub regular_sites: usize,
    /// Mean of their frequencies, Hz, with its Student t 95% interval.
    pub mean_frequency_alone_hz: Option<f64>,
    pub mean_frequency_alone_ci95_hz: Option<[f64; 2]>,
    /// The network's burst frequency, 1 / median interburst interval, Hz.
    pub network_frequency_hz: Option<f64>,
    /// Sites with at least one MaxInterval burst of their own, and over the sites with
    /// events, the median MaxInterval burst rate (bursts per minute) and the median share
    /// of spikes in those bursts.
    pub sites_bursting: usize,
    pub median_site_burst_rate_per_min: Option<f64>,
    pub median_fraction_in_site_bursts: Option<f64>,
}

/// Each site's firing over `span_s` (seconds), with `bursts_s` the network bursts' windows
/// (start, end), ascending.
pub fn site_rhythms(
    sites: &[(&str, &[f64])],
    bursts_s: &[(f64, f64)],
    span_s: (f64, f64),
    network_frequency_hz: Option<f64>,
    settings: &SiteRhythmSettings,
) -> SiteRhythms {
    let duration = span_s.1 - span_s.0;
    // Index of the burst window holding t, or of the gap before burst k (as Err(k)).
    let window = |t: f64| -> Result<usize, usize> {
        let k = bursts_s.partition_point(|b| b.1 < t);
        match bursts_s.get(k) {
            Some(b) if b.0 <= t => Ok(k),
            _ => Err(k),
        }
    };
    let rows: Vec<SiteRhythm> = sites
        .iter()
        .map(|(site, train)| {
            let all: Vec<f64> = train.windows(2).map(|w| w[1] - w[0]).collect();
            let places: Vec<Result<usize, usize>> = train.iter().map(|&t| window(t)).collect();
            let alone: Vec<f64> = train
                .windows(2)
                .zip(places.windows(2))
                .filter(|(_, p)| matches!((p[0], p[1]), (Err(a), Err(b)) if a == b))
                .map(|(w, _)| w[1] - w[0])
                .collect();
            let cv = |x: &[f64]| sample_sd(x).zip(mean(x)).map(|(s, m)| s / m);
            let isi_cv_alone = cv(&alone);
            let isi_median_alone_s = quantile(&alone, 0.5);
            let regular = alone.len() >= settings.min_intervals
                && isi_cv_alone.is_some_and(|c| c < settings.max_cv);
            SiteRhythm {
                site: site.to_string(),
                rate_hz: if duration > 0.0 {
                    train.len() as f64 / duration
                } else {
                    0.0
                },
                events: train.len(),
                isi_cv: cv(&all),
                events_alone: places.iter().filter(|p| p.is_err()).count(),
                intervals_alone: alone.len(),
                isi_cv_alone,
                isi_median_alone_s,
                frequency_alone_hz: isi_median_alone_s
                    .filter(|m| regular && *m > 0.0)
                    .map(|m| 1.0 / m),
                regular_alone: regular,
                bursts: site_bursts(train, duration.max(0.0), &settings.bursts),
            }
        })
        .collect();
    let freqs: Vec<f64> = rows.iter().filter_map(|r| r.frequency_alone_hz).collect();
    let m = mean(&freqs);
    let ci = match (m, sample_sd(&freqs)) {
        (Some(m), Some(sd)) if freqs.len() >= 2 => {
            use statrs::distribution::{ContinuousCDF, StudentsT};
            StudentsT::new(0.0, 1.0, (freqs.len() - 1) as f64)
                .ok()
                .map(|t| {
                    let h = t.inverse_cdf(0.975) * sd / (freqs.len() as f64).sqrt();
                    [m - h, m + h]
                })
        }
        _ => None,
    };
    let firing: Vec<&SiteRhythm> = rows.iter().filter(|r| r.events > 0).collect();
    let rates: Vec<f64> = firing
        .iter()
        .map(|r| r.bursts.max_interval.rate_per_min)
        .collect();
    let shares: Vec<f64> = firing
        .iter()
        .filter_map(|r| r.bursts.max_interval.fraction_in_bursts)
        .collect();
    SiteRhythms {
        sites_bursting: firing
            .iter()
            .filter(|r| r.bursts.max_interval.bursts > 0)
            .count(),
        median_site_burst_rate_per_min: quantile(&rates, 0.5),
        median_fraction_in_site_bursts: quantile(&shares, 0.5),
        regular_sites: freqs.len(),
        sites: rows,
        mean_frequency_alone_hz: m,
        mean_frequency_alone_ci95_hz: ci,
        network_frequency_hz,
    }
}
