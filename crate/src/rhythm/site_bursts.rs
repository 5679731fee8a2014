//! Bursts within one site's train: runs of closely spaced spikes at a single electrode or
//! unit, as opposed to the network bursts that sweep the culture. Two methods, the two that
//! Cotterill et al. 2016 (J. Neurophysiol. 116:306) found most reliable on real and
//! simulated trains:
//!
//! - **MaxInterval** (the fixed-threshold method of the NeuroExplorer manual, as described
//!   by Cotterill et al. 2016): a burst starts at an interval no longer than
//!   `max_start_isi_s`, goes on while intervals are no longer than `max_end_isi_s`, bursts
//!   closer than `min_gap_s` are merged, and bursts shorter than `min_duration_s` or with
//!   fewer than `min_spikes` spikes are dropped.
//! - **logISI** (Pasquale et al. 2010, J. Comput. Neurosci. 29:213): the histogram of
//!   log10 intervals has an intra-burst peak below `isi_cutoff_s`; the first trough after
//!   it that is deep enough (void parameter at least `min_void`) sets the train's own
//!   interval threshold.
//!
//! Defaults are the parameters Cotterill et al. 2016 used (their Table 1; values from
//! memory). Trains are event times in seconds, ascending.

use crate::stats::{mean, quantile};
use serde::{Deserialize, Serialize};

/// MaxInterval parameters (Cotterill et al. 2016, Table 1; from memory).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct MaxIntervalSettings {
    /// Longest interval that starts a burst, seconds (170 ms).
    pub max_start_isi_s: f64,
    /// Longest interval inside a burst, seconds (300 ms).
    pub max_end_isi_s: f64,
    /// Bursts whose gap (last spike to next first spike) is shorter are merged, seconds
    /// (200 ms).
    pub min_gap_s: f64,
    /// Shortest burst kept, seconds (10 ms).
    pub min_duration_s: f64,
    /// Fewest spikes in a burst kept (3).
    pub min_spikes: usize,
}

impl Default for MaxIntervalSettings {
    fn default() -> Self {
        MaxIntervalSettings {
            max_start_isi_s: 0.17,
            max_end_isi_s: 0.3,
            min_gap_s: 0.2,
            min_duration_s: 0.01,
            min_spikes: 3,
        }
    }
}

/// logISI parameters (Pasquale et al. 2010; defaults as used by Cotterill et al. 2016,
/// from memory).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct LogIsiSettings {
    /// The intra-burst peak must lie at or below this interval, seconds (100 ms). A
    /// threshold above it only extends bursts found with it.
    pub isi_cutoff_s: f64,
    /// Smallest void parameter 1 - g_min / sqrt(g_1 g_2) for a trough to separate the
    /// intra-burst peak from a later peak (0.7).
    pub min_void: f64,
    /// Fewest spikes in a burst (3).
    pub min_spikes: usize,
    /// Histogram bin width in decades of interval (0.1, Pasquale et al. 2010).
    pub bin_decades: f64,
}

impl Default for LogIsiSettings {
    fn default() -> Self {
        LogIsiSettings {
            isi_cutoff_s: 0.1,
            min_void: 0.7,
            min_spikes: 3,
            bin_decades: 0.1,
        }
    }
}

/// Both methods' parameters.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct SiteBurstSettings {
    pub max_interval: MaxIntervalSettings,
    pub log_isi: LogIsiSettings,
}

/// One burst in one train: the indices of its first and last spikes (inclusive) and their
/// times, seconds.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct SpikeBurst {
    pub first: usize,
    pub last: usize,
    pub start_s: f64,
    pub end_s: f64,
}

impl SpikeBurst {
    fn new(train: &[f64], first: usize, last: usize) -> Self {
        SpikeBurst {
            first,
            last,
            start_s: train[first],
            end_s: train[last],
        }
    }

    pub fn spikes(&self) -> usize {
        self.last - self.first + 1
    }

    pub fn duration_s(&self) -> f64 {
        self.end_s - self.start_s
    }
}

/// MaxInterval bursts of one train (see the module notes). Comparisons are inclusive: an
/// interval equal to a limit counts as within it.
pub fn max_interval(train: &[f64], settings: &MaxIntervalSettings) -> Vec<SpikeBurst> {
    let n = train.len();
    // Phase 1: start at a short interval, go on while intervals stay under the end limit.
    let mut found: Vec<(usize, usize)> = Vec::new();
    let mut i = 0;
    while i + 1 < n {
        if train[i + 1] - train[i] <= settings.max_start_isi_s {
            let first = i;
            let mut last = i + 1;
            while last + 1 < n && train[last + 1] - train[last] <= settings.max_end_isi_s {
                last += 1;
            }
            found.push((first, last));
            i = last + 1;
        } else {
            i += 1;
        }
    }
    // Phase 2: merge bursts whose gap is shorter than the minimum.
    let mut merged: Vec<(usize, usize)> = Vec::with_capacity(found.len());
    for (first, last) in found {
        match merged.last_mut() {
            Some(prev) if train[first] - train[prev.1] < settings.min_gap_s => prev.1 = last,
            _ => merged.push((first, last)),
        }
    }
    // Phase 3: drop the short and the sparse.
    merged
        .into_iter()
        .map(|(f, l)| SpikeBurst::new(train, f, l))
        .filter(|b| b.duration_s() >= settings.min_duration_s && b.spikes() >= settings.min_spikes)
        .collect()
}

/// How the logISI method set a train's interval threshold.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "snake_case", tag = "kind")]
pub enum LogIsiThreshold {
    /// A trough after the intra-burst peak with a void parameter at least the minimum: the
    /// threshold is the interval at the trough, seconds.
    Trough { threshold_s: f64, void: f64 },
    /// An intra-burst peak but no trough deep enough: the cutoff is used as the threshold.
    NoTrough { threshold_s: f64 },
    /// No peak of the histogram at or below the cutoff: the train has no bursts by this
    /// method.
    NoIntraBurstPeak,
    /// Fewer than two intervals.
    TooFewIntervals,
}

impl LogIsiThreshold {
    /// How the threshold was set, for tables: `trough`, `no_trough`, `no_intra_burst_peak`
    /// or `too_few_intervals`.
    pub fn label(&self) -> &'static str {
        match self {
            LogIsiThreshold::Trough { .. } => "trough",
            LogIsiThreshold::NoTrough { .. } => "no_trough",
            LogIsiThreshold::NoIntraBurstPeak => "no_intra_burst_peak",
            LogIsiThreshold::TooFewIntervals => "too_few_intervals",
        }
    }

    pub fn threshold_s(&self) -> Option<f64> {
        match self {
            LogIsiThreshold::Trough { threshold_s, .. }
            | LogIsiThreshold::NoTrough { threshold_s } => Some(*threshold_s),
            _ => None,
        }
    }
}

/// Intervals are placed on the histogram between 1 us and 1e6 s, so the number of bins is
/// bounded whatever the times.
const LOG_ISI_RANGE_S: (f64, f64) = (1e-6, 1e6);

/// The smoothed histogram of log10 intervals: (log10 of each bin's centre, fraction of
/// intervals). Bins are `bin_decades` wide from the floor of the shortest interval; the
/// histogram is smoothed with a centred three-bin mean (our choice: Pasquale et al. smooth
/// theirs, and a three-bin mean keeps a one-bin spike from posing as a peak).
pub fn log_isi_histogram(train: &[f64], bin_decades: f64) -> Vec<(f64, f64)> {
    let logs: Vec<f64> = train
        .windows(2)
        .map(|w| libm::log10((w[1] - w[0]).clamp(LOG_ISI_RANGE_S.0, LOG_ISI_RANGE_S.1)))
        .collect();
    let width = if bin_decades.is_finite() && bin_decades > 0.0 {
        bin_decades.max(1e-3)
    } else {
        0.1
    };
    let Some(lo) = logs.iter().copied().reduce(f64::min) else {
        return Vec::new();
    };
    let hi = logs.iter().copied().fold(lo, f64::max);
    let origin = (lo / width).floor() * width;
    // At most (12 decades / 1e-3) + 1 bins.
    let bins = ((hi - origin) / width).floor() as usize + 1;
    let mut counts = vec![0.0; bins];
    for &l in &logs {
        let k = (((l - origin) / width).floor() as usize).min(bins - 1);
        counts[k] += 1.0;
    }
    let total = logs.len() as f64;
    (0..bins)
        .map(|k| {
            let (a, b) = (k.saturating_sub(1), (k + 1).min(bins - 1));
            let sum: f64 = counts[a..=b].iter().sum();
            (
                origin + (k as f64 + 0.5) * width,
                sum / (b - a + 1) as f64 / total,
            )
        })
        .collect()
}

/// The logISI threshold of one train (see the module notes).
pub fn log_isi_threshold(train: &[f64], settings: &LogIsiSettings) -> LogIsiThreshold {
    if train.len() < 3 {
        return LogIsiThreshold::TooFewIntervals;
    }
    let h = log_isi_histogram(train, settings.bin_decades);
    let n = h.len();
    let is_peak = |k: usize| {
        let g = h[k].1;
        g > 0.0 && (k == 0 || g > h[k - 1].1) && (k + 1 == n || g >= h[k + 1].1)
    };
    let peaks: Vec<usize> = (0..n).filter(|&k| is_peak(k)).collect();
    let cutoff_log = libm::log10(settings.isi_cutoff_s.max(LOG_ISI_RANGE_S.0));
    let Some(&intra) = peaks
        .iter()
        .filter(|&&k| h[k].0 <= cutoff_log)
        .max_by(|a, b| h[**a].1.total_cmp(&h[**b].1).then(b.cmp(a)))
    else {
        return LogIsiThreshold::NoIntraBurstPeak;
    };
    for &p in peaks.iter().filter(|&&p| p > intra) {
        let (trough, g_min) = (intra..=p)
            .map(|k| (k, h[k].1))
            .min_by(|a, b| a.1.total_cmp(&b.1).then(a.0.cmp(&b.0)))
            .unwrap_or((intra, h[intra].1));
        let void = 1.0 - g_min / (h[intra].1 * h[p].1).sqrt();
        if void >= settings.min_void {
            return LogIsiThreshold::Trough {
                threshold_s: libm::pow(10.0, h[trough].0),
                void,
            };
        }
    }
    LogIsiThreshold::NoTrough {
        threshold_s: settings.isi_cutoff_s,
    }
}

/// Runs of at least `min_spikes` spikes whose successive intervals are all at most
/// `threshold_s`.
fn runs(train: &[f64], threshold_s: f64, min_spikes: usize) -> Vec<(usize, usize)> {
    let mut out = Vec::new();
    let mut first = 0;
    for i in 1..=train.len() {
        let joined = i < train.len() && train[i] - train[i - 1] <= threshold_s;
        if !joined {
            if i - first >= min_spikes.max(2) {
                out.push((first, i - 1));
            }
            first = i;
        }
    }
    out
}

/// logISI bursts of one train, with the threshold that found them. With a threshold at or
/// under the cutoff, bursts are the runs under the threshold; above it, runs under the
/// cutoff are found first and then extended at both ends over intervals under the
/// threshold, merging bursts that come to touch (Pasquale et al. 2010).
pub fn log_isi(train: &[f64], settings: &LogIsiSettings) -> (Vec<SpikeBurst>, LogIsiThreshold) {
    let threshold = log_isi_threshold(train, settings);
    let Some(th) = threshold.threshold_s() else {
        return (Vec::new(), threshold);
    };
    let bursts = if th <= settings.isi_cutoff_s {
        runs(train, th, settings.min_spikes)
    } else {
        let mut extended: Vec<(usize, usize)> = Vec::new();
        for (mut f, mut l) in runs(train, settings.isi_cutoff_s, settings.min_spikes) {
            while f > 0 && train[f] - train[f - 1] <= th {
                f -= 1;
            }
            while l + 1 < train.len() && train[l + 1] - train[l] <= th {
                l += 1;
            }
            match extended.last_mut() {
                // Extension over intervals under the threshold makes bursts that a short
                // interval joins overlap; bursts merely adjacent in index stay apart.
                Some(prev) if f <= prev.1 => prev.1 = prev.1.max(l),
                _ => extended.push((f, l)),
            }
        }
        extended
    };
    (
        bursts
            .into_iter()
            .map(|(f, l)| SpikeBurst::new(train, f, l))
            .collect(),
        threshold,
    )
}

/// One train's bursts summed up.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BurstStats {
    pub bursts: usize,
    /// Bursts per minute over the recording.
    pub rate_per_min: f64,
    /// Median burst duration (first to last spike), seconds.
    pub median_duration_s: Option<f64>,
    /// Mean spikes per burst.
    pub mean_spikes: Option<f64>,
    /// Share of the train's spikes that lie in bursts.
    pub fraction_in_bursts: Option<f64>,
}

/// Statistics of `bursts` found in a train of `spikes` spikes over `duration_s` seconds.
pub fn burst_stats(bursts: &[SpikeBurst], spikes: usize, duration_s: f64) -> BurstStats {
    let durations: Vec<f64> = bursts.iter().map(|b| b.duration_s()).collect();
    let sizes: Vec<f64> = bursts.iter().map(|b| b.spikes() as f64).collect();
    let inside: usize = bursts.iter().map(|b| b.spikes()).sum();
    BurstStats {
        bursts: bursts.len(),
        rate_per_min: if duration_s > 0.0 {
            bursts.len() as f64 * 60.0 / duration_s
        } else {
            0.0
        },
        median_duration_s: quantile(&durations, 0.5),
        mean_spikes: mean(&sizes),
        fraction_in_bursts: (spikes > 0).then(|| inside as f64 / spikes as f64),
    }
}

/// Both methods on one train over `duration_s` seconds.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SiteBursts {
    pub max_interval: BurstStats,
    pub log_isi: BurstStats,
    pub log_isi_threshold: LogIsiThreshold,
}

pub fn site_bursts(train: &[f64], duration_s: f64, settings: &SiteBurstSettings) -> SiteBursts {
    let mi = max_interval(train, &settings.max_interval);
    let (li, threshold) = log_isi(train, &settings.log_isi);
    SiteBursts {
        max_interval: burst_stats(&mi, train.len(), duration_s),
        log_isi: burst_stats(&li, train.len(), duration_s),
        log_isi_threshold: threshold,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn max_interval_worked_by_hand() {
        // Worked by hand from the method's published description (Cotterill et al. 2016).
        // Intervals 0.1, 0.25, 0.35, 0.05, 0.05, 1.2, 0.1, 0.05: 0.1 starts a burst, 0.25
        // (<= 0.3) continues it, 0.35 ends it; 0.05 starts the next, 1.2 ends it; 0.1
        // starts the third. Gaps 0.35 and 1.2 exceed 0.2: no merging.
        let t = [0.0, 0.1, 0.35, 0.7, 0.75, 0.8, 2.0, 2.1, 2.15];
        let b = max_interval(&t, &MaxIntervalSettings::default());
        let spans: Vec<(usize, usize)> = b.iter().map(|b| (b.first, b.last)).collect();
        assert_eq!(spans, vec![(0, 2), (3, 5), (6, 8)]);
        // A merge gap of 0.4 s joins the first two (gap 0.35).
        let merged = max_interval(
            &t,
            &MaxIntervalSettings {
                min_gap_s: 0.4,
                ..Default::default()
            },
        );
        let spans: Vec<(usize, usize)> = merged.iter().map(|b| (b.first, b.last)).collect();
        assert_eq!(spans, vec![(0, 5), (6, 8)]);
        // Two spikes are too few; three spikes within 2 ms are too short.
        assert!(max_interval(&[0.0, 0.1, 5.0], &MaxIntervalSettings::default()).is_empty());
        assert!(max_interval(&[0.0, 0.001, 0.002], &MaxIntervalSettings::default()).is_empty());
    }

    #[test]
    fn log_isi_threshold_sits_in_the_trough() {
        // Worked by hand: 40 intervals of 10 ms (log10 -2) and 10 of 1 s (log10 0), with
        // 0.1-decade bins: peaks at -1.95 and 0.05 after smoothing, an empty trough between
        // (void 1), so the threshold is the first empty bin's interval, 10^-1.85 s.
        let mut t = Vec::new();
        let mut now = 0.0;
        for _ in 0..10 {
            for _ in 0..5 {
                t.push(now);
                now += 0.01;
            }
            t.push(now);
            now += 1.0;
        }
        let th = log_isi_threshold(&t, &LogIsiSettings::default());
        match th {
            LogIsiThreshold::Trough { threshold_s, void } => {
                assert_eq!(void, 1.0);
                assert!(threshold_s > 0.01 && threshold_s < 1.0, "{threshold_s}");
            }
            other => panic!("{other:?}"),
        }
        let (bursts, _) = log_isi(&t, &LogIsiSettings::default());
        assert_eq!(bursts.len(), 10);
        assert!(bursts.iter().all(|b| b.spikes() == 6));
        // A clock at 1 s has no intra-burst peak.
        let clock: Vec<f64> = (0..20).map(|k| k as f64).collect();
        assert_eq!(
            log_isi_threshold(&clock, &LogIsiSettings::default()),
            LogIsiThreshold::NoIntraBurstPeak
        );
    }
}
