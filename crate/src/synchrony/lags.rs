//! Lags between sites from the cross-correlation of their trains, against their distance
//! along the track: an estimate of the conduction velocity that does not depend on finding
//! bursts or fitting fronts, shown beside the front fits as an independent check.
//!
//! Sign: the lag of the pair (a, b) is positive when b fires after a. Site a always lies
//! before b along the track, so positive lags are fronts travelling towards the track's
//! end.
//!
//! The cross-correlogram is counted directly from the sorted event times (every pair of
//! events within the largest lag), which is exact, needs no binning of the whole recording
//! and costs the number of coincidences: for sparse trains far less than a transform of the
//! binned trains.

use crate::stats::{median, quantile_sorted};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

/// Settings of the lag analysis.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct LagSettings {
    /// Correlogram bin, seconds (1 ms; common practice, no source).
    pub bin_s: f64,
    /// Largest lag looked at, seconds (100 ms: a front at 10 mm/s crosses 1 mm in that
    /// time; common practice, no source).
    pub max_lag_s: f64,
    /// Each site is paired with this many following sites along the track.
    pub neighbours: usize,
    /// Fewest network bursts in which both sites fire for a pair to have a lag.
    pub min_bursts: usize,
    /// Spikes of each site per burst used for its shift (the first ones, around the
    /// front's arrival).
    pub max_burst_spikes: usize,
    /// Resamples of the site bootstrap for the implied speed's interval.
    pub resamples: usize,
    /// Seed of the bootstrap generator (ChaCha8).
    pub seed: u64,
}

impl Default for LagSettings {
    fn default() -> Self {
        LagSettings {
            bin_s: 0.001,
            max_lag_s: 0.1,
            neighbours: 8,
            min_bursts: 5,
            max_burst_spikes: 64,
            resamples: 1000,
            seed: 2,
        }
    }
}

/// Largest number of correlogram bins (2 max_lag / bin + 1).
pub const MAX_BINS: usize = 100_001;

/// Largest number of event pairs looked at over all site pairs (correlograms and burst
/// shifts together): beyond it the remaining
/// pairs are left out and the summary says so, so work stays bounded on any recording.
pub const MAX_COINCIDENCES: u64 = 300_000_000;

/// Largest number of bootstrap resamples.
pub const MAX_RESAMPLES: usize = 100_000;

/// Cross-correlogram of `b` against `a`: counts of t_b - t_a in bins of `bin_s` centred on
/// whole multiples of it, from -K to +K bins (K = floor(max_lag / bin)). Index K is lag 0.
/// `budget` is decremented by the event pairs looked at; `None` when it runs out or the
/// bins are out of bounds.
pub fn cross_correlogram(
    a: &[f64],
    b: &[f64],
    bin_s: f64,
    max_lag_s: f64,
    budget: &mut u64,
) -> Option<Vec<u32>> {
    let half = (max_lag_s / bin_s).floor();
    if !(bin_s > 0.0 && half >= 0.0 && 2.0 * half < MAX_BINS as f64) {
        return None;
    }
    let half = half as usize;
    let mut counts = vec![0u32; 2 * half + 1];
    let reach = (half as f64 + 0.5) * bin_s;
    let mut lo = 0;
    for &t in a {
        while lo < b.len() && b[lo] - t < -reach {
            lo += 1;
        }
        let mut j = lo;
        while j < b.len() && b[j] - t <= reach {
            let k = ((b[j] - t) / bin_s).round() + half as f64;
            if k >= 0.0 && (k as usize) < counts.len() {
                counts[k as usize] += 1;
            }
            j += 1;
        }
        let looked = (j - lo) as u64 + 1;
        *budget = budget.checked_sub(looked)?;
    }
    Some(counts)
}

/// The counts smoothed with the kernel [1, 2, 3, 2, 1] / 9 (our choice: it keeps a one-bin
/// spike from posing as a peak); bins beyond the ends count as empty.
fn smoothed(counts: &[f64]) -> Vec<f64> {
    const KERNEL: [f64; 5] = [1.0, 2.0, 3.0, 2.0, 1.0];
    (0..counts.len())
        .map(|i| {
            KERNEL
                .iter()
                .enumerate()
                .filter_map(|(w, weight)| {
                    (i + w)
                        .checked_sub(2)
                        .and_then(|k| counts.get(k))
                        .map(|&c| c * weight)
                })
                .sum::<f64>()
                / 9.0
        })
        .collect()
}

/// The lag at the correlogram's smoothed peak, seconds, and the smoothed count there. The
/// peak is refined by a parabola through the highest bin and its neighbours; ties go to the
/// bin nearest lag 0. `None` for an empty correlogram.
///
/// Where fronts run both ways along the track, the correlogram has modes at +lag and -lag;
/// when the spread of firing within a burst is wider than the lag, they merge into one
/// peak near 0. The speed therefore comes from burst-by-burst shifts ([`lags`]), and this
/// peak is reported beside them.
pub fn peak_lag(counts: &[u32], bin_s: f64) -> Option<(f64, f64)> {
    let n = counts.len();
    let half = (n / 2) as isize;
    let raw: Vec<f64> = counts.iter().map(|&c| c as f64).collect();
    let smooth = smoothed(&raw);
    let best = (0..n)
        .max_by(|&x, &y| {
            smooth[x].total_cmp(&smooth[y]).then_with(|| {
                let (dx, dy) = ((x as isize - half).abs(), (y as isize - half).abs());
                dy.cmp(&dx).then(y.cmp(&x))
            })
        })
        .filter(|&k| smooth[k] > 0.0)?;
    let mut offset = 0.0;
    if best > 0 && best + 1 < n {
        let (l, c, r) = (smooth[best - 1], smooth[best], smooth[best + 1]);
        let curve = l - 2.0 * c + r;
        if curve < 0.0 {
            offset = (0.5 * (l - r) / curve).clamp(-0.5, 0.5);
        }
    }
    Some(((best as f64 - half as f64 + offset) * bin_s, smooth[best]))
}

/// Hodges-Lehmann shift of `b` against `a`: the median of all differences t_b - t_a, the
/// centre of the two sites' cross-correlogram within one burst (Hodges & Lehmann 1963).
/// `scratch` is reused between calls. `None` when either is empty.
pub fn shift(a: &[f64], b: &[f64], scratch: &mut Vec<f64>) -> Option<f64> {
    scratch.clear();
    for &x in a {
        scratch.extend(b.iter().map(|&y| y - x));
    }
    crate::stats::median_in_place(scratch)
}

/// One pair's lag, for `lags.csv`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SiteLag {
    pub site_a: String,
    pub site_b: String,
    /// Distance from a to b along the track, micrometres (positive).
    pub distance_um: f64,
    /// Network bursts with a direction in which both sites fired.
    pub bursts: usize,
    /// Median over those bursts of the shift (see [`shift`]) turned by the burst's
    /// direction, milliseconds: positive when b fires after a for fronts towards the
    /// track's end; `None` with fewer than `min_bursts` bursts.
    pub lag_ms: Option<f64>,
    /// Share of those bursts in which b fired after a (shift > 0).
    pub forward_share: Option<f64>,
    /// Peak of the whole recording's correlogram, milliseconds (positive: b after a; see
    /// [`peak_lag`]), and the smoothed count there.
    pub correlogram_peak_ms: Option<f64>,
    pub correlogram_peak_count: f64,
}

/// The lags of a recording and the speed they imply.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LagSummary {
    pub bin_s: f64,
    pub max_lag_s: f64,
    /// Pairs looked at, and those with a lag.
    pub pairs: usize,
    pub pairs_with_lag: usize,
    /// Network bursts with a direction, and the share of them towards the track's end.
    pub directed_bursts: usize,
    pub forward_share: Option<f64>,
    /// Median over pairs of lag / distance, ms per mm, and the speed it implies (for a
    /// positive slowness), mm/s, with
    /// a 95% percentile interval from resampling the first sites of the pairs (a cluster
    /// bootstrap: pairs that share a first site move together). The upper end is `None`
    /// when the slowness interval reaches 0 (no lag: as fast as can be told).
    pub median_slowness_ms_per_mm: Option<f64>,
    pub implied_speed_mm_s: Option<f64>,
    pub implied_speed_ci95_mm_s: Option<[Option<f64>; 2]>,
    /// Why pairs were left out, when some were.
    pub skipped: Option<String>,
    /// Every pair, for `lags.csv`; not in the JSON.
    #[serde(skip)]
    pub table: Vec<SiteLag>,
}

/// The events of `train` within `[start, end]`, at most `limit` of them (the first).
fn within(train: &[f64], (start, end): (f64, f64), limit: usize) -> &[f64] {
    let a = train.partition_point(|&t| t < start);
    let b = train.partition_point(|&t| t <= end);
    &train[a..b.max(a).min(a + limit)]
}

/// The direction of each burst along the track: the sign of Spearman's rank correlation
/// between the sites' track coordinates and the median time of their first spikes in the
/// burst (+1: towards the track's end). `None` where fewer than three sites fired or the
/// correlation is 0. A vote over all sites, not a front fit.
pub fn burst_directions(
    sites: &[(&str, f64, &[f64])],
    bursts_s: &[(f64, f64)],
    limit: usize,
) -> Vec<Option<f64>> {
    bursts_s
        .iter()
        .map(|&w| {
            let points: Vec<(f64, f64)> = sites
                .iter()
                .filter_map(|s| median(within(s.2, w, limit)).map(|t| (s.1, t)))
                .collect();
            if points.len() < 3 {
                return None;
            }
            let xs: Vec<f64> = points.iter().map(|p| p.0).collect();
            let ts: Vec<f64> = points.iter().map(|p| p.1).collect();
            let rho = crate::stats::spearman(&xs, &ts)?;
            (rho != 0.0).then_some(rho.signum())
        })
        .collect()
}

/// Lags of every site with its `neighbours` following sites. `sites` are (id, track
/// coordinate in micrometres, events in seconds), sorted along the track; `bursts_s` are
/// the network bursts' windows (start, end), seconds. Pairs less than 1 um apart are left
/// out (no distance to divide by).
///
/// For each pair and each burst in which both fired, the shift of the farther site's
/// spikes against the nearer's ([`shift`], the first `max_burst_spikes` of each), turned
/// by the burst's direction ([`burst_directions`]) so that fronts running either way give
/// the same sign; the pair's lag is the median of those oriented shifts. Bursts with no
/// direction are left out. With no network bursts, no pair has a lag.
pub fn lags(
    sites: &[(&str, f64, &[f64])],
    bursts_s: &[(f64, f64)],
    settings: &LagSettings,
) -> LagSummary {
    let mut budget = MAX_COINCIDENCES;
    let mut table = Vec::new();
    let mut owners = Vec::new();
    let mut skipped = None;
    let mut scratch = Vec::new();
    let limit = settings.max_burst_spikes.max(1);
    let directions = burst_directions(sites, bursts_s, limit);
    let directed: Vec<((f64, f64), f64)> = bursts_s
        .iter()
        .zip(&directions)
        .filter_map(|(w, d)| d.map(|d| (*w, d)))
        .collect();
    'outer: for (i, a) in sites.iter().enumerate() {
        for b in sites.iter().skip(i + 1).take(settings.neighbours) {
            let distance_um = b.1 - a.1;
            // NaN distances fail the comparison and are left out too.
            if distance_um.partial_cmp(&1.0).is_none_or(|o| o.is_lt())
                || a.2.is_empty()
                || b.2.is_empty()
            {
                continue;
            }
            let correlogram =
                cross_correlogram(a.2, b.2, settings.bin_s, settings.max_lag_s, &mut budget);
            let (mut oriented, mut ahead) = (Vec::new(), 0usize);
            for &(w, direction) in &directed {
                let (x, y) = (within(a.2, w, limit), within(b.2, w, limit));
                let work = (x.len() * y.len()) as u64;
                let Some(left) = budget.checked_sub(work) else {
                    budget = 0;
                    break;
                };
                budget = left;
                if let Some(s) = shift(x, y, &mut scratch) {
                    ahead += usize::from(s > 0.0);
                    oriented.push(s * direction * 1e3);
                }
            }
            let Some(counts) = correlogram.filter(|_| budget > 0) else {
                skipped = Some(format!(
                    "lags were computed for the first {} site pairs only: the recording has more coincidences than the bound of {MAX_COINCIDENCES} (or the correlogram's bins are out of bounds)",
                    table.len(),
                ));
                break 'outer;
            };
            let peak = peak_lag(&counts, settings.bin_s);
            let lag_ms = median(&oriented).filter(|_| oriented.len() >= settings.min_bursts.max(1));
            owners.push(i);
            table.push(SiteLag {
                site_a: a.0.to_string(),
                site_b: b.0.to_string(),
                distance_um,
                bursts: oriented.len(),
                lag_ms,
                forward_share: (!oriented.is_empty()).then(|| ahead as f64 / oriented.len() as f64),
                correlogram_peak_ms: peak.map(|p| p.0 * 1e3),
                correlogram_peak_count: peak.map_or(0.0, |p| p.1),
            });
        }
    }
    let forward = directed.iter().filter(|d| d.1 > 0.0).count();
    // (owner, slowness in ms per mm) for pairs with a lag.
    let slow: Vec<(usize, f64)> = table
        .iter()
        .zip(&owners)
        .filter_map(|(p, &o)| p.lag_ms.map(|l| (o, l / (p.distance_um * 1e-3))))
        .collect();
    let values: Vec<f64> = slow.iter().map(|s| s.1).collect();
    let median_slowness = median(&values);
    let ci = median_slowness.and_then(|_| slowness_interval(&slow, sites.len(), settings));
    let speed = |s: f64| (s > 0.0).then(|| 1e3 / s);
    LagSummary {
        bin_s: settings.bin_s,
        max_lag_s: settings.max_lag_s,
        pairs: table.len(),
        pairs_with_lag: slow.len(),
        directed_bursts: directed.len(),
        forward_share: (!directed.is_empty()).then(|| forward as f64 / directed.len() as f64),
        median_slowness_ms_per_mm: median_slowness,
        implied_speed_mm_s: median_slowness.and_then(speed),
        // Slowness interval [lo, hi] is the speed interval [1/hi, 1/lo].
        implied_speed_ci95_mm_s: ci.map(|[lo, hi]| [speed(hi), speed(lo)]),
        skipped,
        table,
    }
}

/// 95% percentile interval of the median slowness, resampling the pairs' first sites with
/// replacement. `None` with fewer than two owners or no resamples.
fn slowness_interval(
    slow: &[(usize, f64)],
    sites: usize,
    settings: &LagSettings,
) -> Option<[f64; 2]> {
    let mut by_owner: Vec<Vec<f64>> = vec![Vec::new(); sites];
    for &(o, s) in slow {
        by_owner[o].push(s);
    }
    let owners: Vec<&Vec<f64>> = by_owner.iter().filter(|v| !v.is_empty()).collect();
    let resamples = settings.resamples.min(MAX_RESAMPLES);
    if owners.len() < 2 || resamples == 0 {
        return None;
    }
    let mut rng = ChaCha8Rng::seed_from_u64(settings.seed);
    let mut medians = Vec::with_capacity(resamples);
    let mut pool = Vec::with_capacity(slow.len() * 2);
    for _ in 0..resamples {
        pool.clear();
        for _ in 0..owners.len() {
            pool.extend_from_slice(owners[rng.random_range(0..owners.len())]);
        }
        medians.extend(median(&pool));
    }
    medians.sort_by(f64::total_cmp);
    Some([
        quantile_sorted(&medians, 0.025),
        quantile_sorted(&medians, 0.975),
    ])
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_follower_three_bins_late_peaks_at_plus_three() {
        // The sign test: j follows i by +3 bins, so the peak is at +3 bins.
        let a: Vec<f64> = (0..50).map(|k| 0.5 + k as f64 * 0.37).collect();
        let b: Vec<f64> = a.iter().map(|t| t + 0.003).collect();
        let mut budget = u64::MAX;
        let c = cross_correlogram(&a, &b, 0.001, 0.02, &mut budget).unwrap();
        assert_eq!(c.len(), 41);
        assert_eq!(c[20 + 3], 50);
        let (lag, count) = peak_lag(&c, 0.001).unwrap();
        assert!((lag - 0.003).abs() < 1e-12, "{lag}");
        assert!((count - 50.0 * 3.0 / 9.0).abs() < 1e-12, "{count}");
        // Swapped, the lag is -3 bins.
        let c = cross_correlogram(&b, &a, 0.001, 0.02, &mut budget).unwrap();
        assert!((peak_lag(&c, 0.001).unwrap().0 + 0.003).abs() < 1e-12);
    }

    #[test]
    fn shift_is_the_median_of_all_differences() {
        // Hodges & Lehmann (1963): the two-sample shift is the median of the n m differences.
        // a = [0, 1], b = [2, 5]: differences 2, 5, 1, 4, median 3 (worked by hand).
        let mut scratch = Vec::new();
        assert_eq!(shift(&[0.0, 1.0], &[2.0, 5.0], &mut scratch), Some(3.0));
        assert_eq!(shift(&[], &[2.0], &mut scratch), None);
    }

    #[test]
    fn bursts_take_the_direction_their_sites_vote_for() {
        let x = [0.0, 100.0, 200.0, 300.0];
        let forward: Vec<Vec<f64>> = x.iter().map(|&u| vec![1.0 + u * 1e-5]).collect();
        let backward: Vec<Vec<f64>> = x.iter().map(|&u| vec![5.0 - u * 1e-5]).collect();
        let trains: Vec<Vec<f64>> = forward
            .iter()
            .zip(&backward)
            .map(|(f, b)| vec![f[0], b[0]])
            .collect();
        let sites: Vec<(&str, f64, &[f64])> = x
            .iter()
            .zip(&trains)
            .map(|(&u, t)| ("s", u, t.as_slice()))
            .collect();
        let d = burst_directions(&sites, &[(0.5, 2.0), (4.0, 6.0), (8.0, 9.0)], 64);
        assert_eq!(d, vec![Some(1.0), Some(-1.0), None]);
    }

    #[test]
    fn the_budget_bounds_the_work() {
        let a: Vec<f64> = (0..1000).map(|k| k as f64 * 1e-4).collect();
        let mut budget = 100;
        assert!(cross_correlogram(&a, &a, 0.001, 0.01, &mut budget).is_none());
        let mut budget = u64::MAX;
        assert!(cross_correlogram(&a, &a, 1e-9, 1.0, &mut budget).is_none());
    }
}
