//! Network bursts: times when much of the culture fires together.

use crate::stats::{mad_sd, median};
use serde::{Deserialize, Serialize};

/// One network burst.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NetworkBurst {
    /// Window, seconds.
    pub start_s: f64,
    pub end_s: f64,
    /// Time of the highest population rate (rate detector) or of the most sites bursting at
    /// once (ISI_N detector), seconds.
    pub peak_s: f64,
    /// Sites (indices into the recording's sites) with at least one spike in the window.
    pub sites: Vec<usize>,
    /// Spikes of all sites in the window.
    pub spike_count: usize,
}

/// Which detector to use.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum BurstDetector {
    /// Thresholded population rate.
    #[default]
    PopulationRate,
    /// Per-site ISI_N bursts joined across sites.
    IsiN,
}

/// Population-rate detector settings. Times in seconds.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct PopulationRateSettings {
    /// Bin width of the population spike count.
    pub bin_s: f64,
    /// Standard deviation of the Gaussian smoothing kernel.
    pub smooth_sd_s: f64,
    /// Threshold = median + this many robust SDs (median absolute deviation / 0.6745) of the
    /// smoothed rate (common practice, no source).
    pub threshold_sd: f64,
    /// The threshold is at least the rate of this many spikes arriving together, so a
    /// silent baseline (robust SD 0) does not turn every spike into a burst.
    pub min_coincident_spikes: f64,
    /// Window edges extend outward while the rate stays above baseline + this fraction of
    /// (threshold - baseline).
    pub edge_fraction: f64,
    /// Windows closer than this are merged.
    pub merge_gap_s: f64,
}

impl Default for PopulationRateSettings {
    fn default() -> Self {
        PopulationRateSettings {
            bin_s: 0.005,
            smooth_sd_s: 0.02,
            threshold_sd: 6.0,
            min_coincident_spikes: 3.0,
            edge_fraction: 0.25,
            merge_gap_s: 0.2,
        }
    }
}

/// ISI_N detector settings (Bakkum et al. 2013, Front. Comput. Neurosci. 7:193).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct IsiNSettings {
    /// N: spikes that must fall within `max_span_s`.
    pub n: usize,
    /// ISI_N threshold: the largest span of N consecutive spikes that counts as bursting, s.
    pub max_span_s: f64,
    /// Site bursts closer than this join one network burst, s.
    pub merge_gap_s: f64,
}

impl Default for IsiNSettings {
    fn default() -> Self {
        IsiNSettings {
            n: 4,
            max_span_s: 0.1,
            merge_gap_s: 0.1,
        }
    }
}

/// Burst detection settings.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct BurstSettings {
    pub detector: BurstDetector,
    pub population_rate: PopulationRateSettings,
    pub isi_n: IsiNSettings,
    /// A burst needs at least this fraction of the active (non-silent) sites to fire in it.
    pub min_site_fraction: f64,
    /// ... and at least this many sites.
    pub min_sites: usize,
    /// A window is a burst only if fewer than this many windows as full of spikes are
    /// expected by chance over the recording from the background rate alone (see
    /// [`chance_windows`]); 0 turns the test off.
    pub max_chance_windows: f64,
}

impl Default for BurstSettings {
    fn default() -> Self {
        BurstSettings {
            detector: BurstDetector::PopulationRate,
            population_rate: PopulationRateSettings::default(),
            isi_n: IsiNSettings::default(),
            min_site_fraction: 0.3,
            min_sites: 3,
            max_chance_windows: 0.05,
        }
    }
}

/// Network bursts and what the detector set aside.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BurstDetection {
    pub bursts: Vec<NetworkBurst>,
    /// Candidate windows with enough sites but no more spikes than background firing
    /// gives by chance ([`chance_windows`] at least `max_chance_windows`).
    pub chance_windows_rejected: usize,
    /// Candidate windows with too few sites.
    pub small_windows_rejected: usize,
    /// All sites' firing rate outside the candidate windows, spikes/s.
    pub background_rate_hz: f64,
    /// The population rate over the recording (what the rate detector thresholds, and what
    /// the figures draw for either detector); `None` without spikes.
    pub population_rate: Option<PopulationRate>,
}

/// Expected number of windows of `duration_s` holding at least `spikes` spikes, over a
/// recording of `span_s`, when spikes arrive as a Poisson process of `rate_hz` (all sites
/// together) and nothing else: rate x span x P(Poisson(rate x duration) >= spikes - 1).
///
/// Given a spike at time t, the others of a Poisson process are again Poisson (Slivnyak's
/// theorem; e.g. Daley & Vere-Jones 2008, vol. II, sec. 13.1), so this counts the spikes
/// that open a run of `spikes` within `duration_s`; each chance run has at least one such
/// spike, so it bounds the expected number of chance runs from above (compare Glaz, Naus &
/// Wallenstein 2001, Scan Statistics, ch. 2). P(X >= k) for X ~ Poisson(m) is the
/// regularised lower incomplete gamma function P(k, m).
pub fn chance_windows(rate_hz: f64, span_s: f64, duration_s: f64, spikes: usize) -> f64 {
    if spikes <= 1 {
        return rate_hz * span_s;
    }
    let mean = rate_hz * duration_s;
    if mean <= 0.0 {
        return 0.0;
    }
    let tail = statrs::function::gamma::checked_gamma_lr((spikes - 1) as f64, mean).unwrap_or(1.0);
    rate_hz * span_s * tail
}

/// Finds network bursts in spike trains (seconds, ascending, one train per site).
///
/// Population rate: all spikes binned (`bin_s`) and smoothed by a Gaussian; a burst is a run
/// above median + `threshold_sd` robust SDs (at least `min_coincident_spikes` arriving at
/// once), extended to where the rate falls back near baseline, with close runs merged.
/// ISI_N: per site, runs where N consecutive spikes span at most `max_span_s`; site bursts
/// that overlap or nearly touch (`merge_gap_s`) form a network burst.
/// Both keep bursts with at least `min_site_fraction` of the active sites and `min_sites`,
/// and with more spikes than chance coincidences of the background firing would give
/// ([`chance_windows`] under `max_chance_windows`; the background rate is all spikes outside
/// the candidate windows over the time outside them).
///
/// Empty trains are allowed (silent sites); no spikes at all gives no bursts.
pub fn detect_bursts(trains_s: &[Vec<f64>], settings: &BurstSettings) -> BurstDetection {
    let rate = population_rate(trains_s, &settings.population_rate);
    let windows = match (settings.detector, &rate) {
        (BurstDetector::PopulationRate, Some(rate)) => {
            // The smoothed rate runs past the first and last event (its padding); a burst
            // does not start before the recording's first event or end after its last.
            let (first, last) = crate::recording::trains_span_s(trains_s).unwrap_or((0.0, 0.0));
            rate_windows(rate, settings.population_rate.merge_gap_s)
                .into_iter()
                .map(|(a, b, peak)| (a.max(first), b.min(last), peak.clamp(first, last)))
                .collect()
        }
        (BurstDetector::PopulationRate, None) => Vec::new(),
        (BurstDetector::IsiN, _) => isi_n_windows(trains_s, &settings.isi_n),
    };
    let active = trains_s.iter().filter(|t| !t.is_empty()).count();
    let needed = (settings.min_site_fraction * active as f64)
        .ceil()
        .max(settings.min_sites as f64) as usize;
    let candidates: Vec<NetworkBurst> = windows
        .into_iter()
        .map(|(start_s, end_s, peak_s)| {
            let mut sites = Vec::new();
            let mut spike_count = 0;
            for (i, train) in trains_s.iter().enumerate() {
                let a = train.partition_point(|&t| t < start_s);
                let b = train.partition_point(|&t| t <= end_s);
                if b > a {
                    sites.push(i);
                    spike_count += b - a;
                }
            }
            NetworkBurst {
                start_s,
                end_s,
                peak_s,
                sites,
                spike_count,
            }
        })
        .collect();
    let total: usize = trains_s.iter().map(Vec::len).sum();
    let span_s = crate::recording::trains_span_s(trains_s).map_or(0.0, |(a, b)| b - a);
    let inside_spikes: usize = candidates.iter().map(|b| b.spike_count).sum();
    let inside_s: f64 = candidates.iter().map(|b| b.end_s - b.start_s).sum();
    let outside_s = (span_s - inside_s).max(0.0);
    // Half a spike when none fell outside: a rate that is small but not zero.
    let background_rate_hz = if outside_s > 0.0 {
        (total.saturating_sub(inside_spikes) as f64).max(0.5) / outside_s
    } else {
        0.0
    };
    let mut detection = BurstDetection {
        bursts: Vec::with_capacity(candidates.len()),
        chance_windows_rejected: 0,
        small_windows_rejected: 0,
        background_rate_hz,
        population_rate: rate,
    };
    for b in candidates {
        if b.sites.len() < needed {
            detection.small_windows_rejected += 1;
            continue;
        }
        let expected = chance_windows(
            background_rate_hz,
            span_s,
            b.end_s - b.start_s,
            b.spike_count,
        );
        if settings.max_chance_windows > 0.0 && expected >= settings.max_chance_windows {
            detection.chance_windows_rejected += 1;
            continue;
        }
        detection.bursts.push(b);
    }
    detection
}

/// The smoothed population rate and the levels the rate detector uses.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PopulationRate {
    /// Start of the first bin, seconds.
    pub origin_s: f64,
    /// Bin width, seconds.
    pub bin_s: f64,
    /// Rate in each bin, spikes per second summed over all sites.
    pub rate_hz: Vec<f64>,
    /// Median rate, spikes/s.
    pub baseline_hz: f64,
    /// A burst must reach this rate, spikes/s.
    pub threshold_hz: f64,
    /// A burst's window extends while the rate is above this, spikes/s.
    pub edge_hz: f64,
}

impl PopulationRate {
    /// Centre of bin `k`, seconds.
    pub fn time_s(&self, k: usize) -> f64 {
        self.origin_s + (k as f64 + 0.5) * self.bin_s
    }
}

/// Population rate of all spikes: counts in bins of `bin_s`, smoothed by a Gaussian of SD
/// `smooth_sd_s` (normalised to spikes per second), with the median baseline, the threshold
/// `median + threshold_sd * MAD / 0.6745` (at least `min_coincident_spikes` single-spike
/// peaks) and the edge level. `None` when there are no spikes.
pub fn population_rate(
    trains_s: &[Vec<f64>],
    s: &PopulationRateSettings,
) -> Option<PopulationRate> {
    let (first, last) = crate::recording::trains_span_s(trains_s)?;
    let bin = s.bin_s;
    let pad = 4.0 * s.smooth_sd_s;
    let origin = first - pad;
    let bins = (((last + pad - origin) / bin).ceil() as usize).max(1);
    let mut counts = vec![0.0f64; bins];
    for train in trains_s {
        for &t in train {
            let k = (((t - origin) / bin) as usize).min(bins - 1);
            counts[k] += 1.0;
        }
    }
    // Gaussian kernel in bins, normalised so the result is spikes per second.
    let sd_bins = (s.smooth_sd_s / bin).max(1e-9);
    let half = (4.0 * sd_bins).ceil() as usize;
    let kernel: Vec<f64> = (0..=2 * half)
        .map(|k| {
            let d = k as f64 - half as f64;
            libm::exp(-0.5 * d * d / (sd_bins * sd_bins))
        })
        .collect();
    let norm: f64 = kernel.iter().sum::<f64>() * bin;
    let mut rate = vec![0.0f64; bins];
    for (k, &c) in counts.iter().enumerate() {
        if c == 0.0 {
            continue;
        }
        let lo = k.saturating_sub(half);
        let hi = (k + half).min(bins - 1);
        for (j, r) in rate.iter_mut().enumerate().take(hi + 1).skip(lo) {
            *r += c * kernel[j + half - k] / norm;
        }
    }
    let baseline = median(&rate).unwrap_or(0.0);
    let spread = mad_sd(&rate).unwrap_or(0.0);
    let single_spike_peak = kernel[half] / norm;
    let threshold =
        (baseline + s.threshold_sd * spread).max(s.min_coincident_spikes * single_spike_peak);
    Some(PopulationRate {
        origin_s: origin,
        bin_s: bin,
        rate_hz: rate,
        baseline_hz: baseline,
        threshold_hz: threshold,
        edge_hz: baseline + s.edge_fraction * (threshold - baseline),
    })
}

/// (start, end, peak) windows from the smoothed population rate.
fn rate_windows(pr: &PopulationRate, merge_gap_s: f64) -> Vec<(f64, f64, f64)> {
    let (bin, bins, threshold, edge) = (pr.bin_s, pr.rate_hz.len(), pr.threshold_hz, pr.edge_hz);
    let rate = &pr.rate_hz;
    let time = |k: usize| pr.time_s(k);

    let mut windows: Vec<(usize, usize, usize)> = Vec::new();
    let mut k = 0;
    while k < bins {
        if rate[k] < threshold {
            k += 1;
            continue;
        }
        let mut lo = k;
        while lo > 0 && rate[lo - 1] > edge {
            lo -= 1;
        }
        let mut hi = k;
        while hi + 1 < bins && rate[hi + 1] > edge {
            hi += 1;
        }
        let peak = (lo..=hi)
            .max_by(|&a, &b| rate[a].total_cmp(&rate[b]))
            .unwrap_or(k);
        match windows.last_mut() {
            Some(last) if time(lo) - time(last.1) <= merge_gap_s => {
                last.1 = hi;
                if rate[peak] > rate[last.2] {
                    last.2 = peak;
                }
            }
            _ => windows.push((lo, hi, peak)),
        }
        k = hi + 1;
    }
    windows
        .into_iter()
        .map(|(lo, hi, peak)| (time(lo) - 0.5 * bin, time(hi) + 0.5 * bin, time(peak)))
        .collect()
}

/// (start, end, peak) windows from per-site ISI_N bursts.
fn isi_n_windows(trains_s: &[Vec<f64>], s: &IsiNSettings) -> Vec<(f64, f64, f64)> {
    let n = s.n.max(2);
    let mut site_bursts: Vec<(f64, f64)> = Vec::new();
    for train in trains_s {
        let mut current: Option<(f64, f64)> = None;
        for i in 0..train.len().saturating_sub(n - 1) {
            if train[i + n - 1] - train[i] <= s.max_span_s {
                let (a, b) = (train[i], train[i + n - 1]);
                current = match current {
                    Some((start, end)) if a <= end => Some((start, end.max(b))),
                    Some(done) => {
                        site_bursts.push(done);
                        Some((a, b))
                    }
                    None => Some((a, b)),
                };
            }
        }
        if let Some(done) = current {
            site_bursts.push(done);
        }
    }
    site_bursts.sort_by(|a, b| a.0.total_cmp(&b.0));
    /// (start, end, member site bursts)
    type Joined = (f64, f64, Vec<(f64, f64)>);
    let mut windows: Vec<Joined> = Vec::new();
    for b in site_bursts {
        match windows.last_mut() {
            Some(w) if b.0 <= w.1 + s.merge_gap_s => {
                w.1 = w.1.max(b.1);
                w.2.push(b);
            }
            _ => windows.push((b.0, b.1, vec![b])),
        }
    }
    windows
        .into_iter()
        .map(|(start, end, members)| {
            // Peak: the member start at which most site bursts are under way.
            let peak = members
                .iter()
                .map(|m| {
                    let t = m.0;
                    let live = members.iter().filter(|o| o.0 <= t && t <= o.1).count();
                    (t, live)
                })
                .max_by_key(|&(_, live)| live)
                .map_or(start, |(t, _)| t);
            (start, end, peak)
        })
        .collect()
}
