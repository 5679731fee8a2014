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
    /// Sites either side of a pair whose timing gives the local direction of travel.
    pub direction_sites: usize,
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
            direction_sites: 4,
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
    /// Network bursts in which both sites fired and the direction of travel near them was
    /// known.
    pub bursts: usize,
    /// Median over those bursts of the shift (see [`shift`]) turned by the local direction
    /// of travel, milliseconds: positive when b fires after a for fronts towards the
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
    /// Burst shifts with a local direction, and the share of those directions towards the
    /// track's end.
    pub oriented_shifts: usize,
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

/// The direction of travel near a pair of sites in one burst: the sign of Spearman's rank
/// correlation between track coordinate and median spike time over the sites from
/// `span.0` to `span.1` (indices along the track) other than the pair itself (+1: towards
/// the track's end). Leaving the pair out keeps its own timing noise out of the sign, so a
/// burst that does not propagate gives shifts of random sign around 0. `None` with fewer
/// than three such sites, or a correlation of 0. A local vote, not a front fit: fronts
/// that run both ways from a point, or round a ring, are oriented piece by piece.
pub fn local_direction(
    along_um: &[f64],
    median_s: &[Option<f64>],
    span: (usize, usize),
    pair: (usize, usize),
) -> Option<f64> {
    let (mut xs, mut ts) = (Vec::new(), Vec::new());
    let end = (span.1 + 1).min(along_um.len()).min(median_s.len());
    let first = span.0.min(end);
    for (k, (&x, t)) in along_um[first..end]
        .iter()
        .zip(&median_s[first..end])
        .enumerate()
        .map(|(k, v)| (k + first, v))
    {
        if k == pair.0 || k == pair.1 {
            continue;
        }
        if let Some(t) = *t {
            xs.push(x);
            ts.push(t);
        }
    }
    if xs.len() < 3 {
        return None;
    }
    let rho = crate::stats::spearman(&xs, &ts)?;
    (rho != 0.0).then_some(rho.signum())
}

/// Largest number of burst shifts kept over all pairs.
pub const MAX_SHIFTS: usize = 20_000_000;

/// Lags of every site with its `neighbours` following sites. `sites` are (id, track
/// coordinate in micrometres, events in seconds), sorted along the track; `bursts_s` are
/// the network bursts' windows (start, end), seconds. Pairs less than 1 um apart are left
/// out (no distance to divide by).
///
/// For each pair and each burst in which both fired, the shift of the farther site's
/// spikes against the nearer's ([`shift`], the first `max_burst_spikes` of each), turned
/// by the direction of travel there ([`local_direction`] over `direction_sites` sites
/// either side) so that fronts running either way give the same sign; the pair's lag is
/// the median of those oriented shifts. With no network bursts, no pair has a lag.
pub fn lags(
    sites: &[(&str, f64, &[f64])],
    bursts_s: &[(f64, f64)],
    settings: &LagSettings,
) -> LagSummary {
    let mut budget = MAX_COINCIDENCES;
    let mut skipped = None;
    let limit = settings.max_burst_spikes.max(1);
    let reach = settings.direction_sites.max(1);
    let along: Vec<f64> = sites.iter().map(|s| s.1).collect();
    // Pairs (i, j, distance) and their whole-recording correlogram peaks.
    let mut pairs: Vec<(usize, usize, f64)> = Vec::new();
    let mut peaks = Vec::new();
    'pairs: for (i, a) in sites.iter().enumerate() {
        for (j, b) in sites
            .iter()
            .enumerate()
            .skip(i + 1)
            .take(settings.neighbours)
        {
            let distance_um = b.1 - a.1;
            // NaN distances fail the comparison and are left out too.
            if distance_um.partial_cmp(&1.0).is_none_or(|o| o.is_lt())
                || a.2.is_empty()
                || b.2.is_empty()
            {
                continue;
            }
            let Some(counts) =
                cross_correlogram(a.2, b.2, settings.bin_s, settings.max_lag_s, &mut budget)
            else {
                skipped = Some(format!(
                    "lags were computed for the first {} site pairs only: their correlograms hold more coincidences than the bound of {MAX_COINCIDENCES} (or the correlogram's bins are out of bounds)",
                    pairs.len()
                ));
                break 'pairs;
            };
            pairs.push((i, j, distance_um));
            peaks.push(peak_lag(&counts, settings.bin_s));
        }
    }
    // Burst by burst: each site's median time, then each pair's oriented shift.
    let mut oriented: Vec<Vec<f64>> = vec![Vec::new(); pairs.len()];
    let mut ahead = vec![0usize; pairs.len()];
    let (mut forward, mut votes, mut kept) = (0usize, 0usize, 0usize);
    let mut scratch = Vec::new();
    'bursts: for &w in bursts_s {
        let slices: Vec<&[f64]> = sites.iter().map(|s| within(s.2, w, limit)).collect();
        let medians: Vec<Option<f64>> = slices.iter().map(|x| median(x)).collect();
        for (p, &(i, j, _)) in pairs.iter().enumerate() {
            let (x, y) = (slices[i], slices[j]);
            if x.is_empty() || y.is_empty() {
                continue;
            }
            let work = (x.len() * y.len() + 2 * reach + j - i) as u64;
            if kept >= MAX_SHIFTS || budget < work {
                skipped = Some(format!(
                    "lags use the network bursts up to {:.1} s only: the burst shifts reached the bound on work ({MAX_COINCIDENCES} spike pairs, {MAX_SHIFTS} shifts)",
                    w.0
                ));
                break 'bursts;
            }
            budget -= work;
            let span = (i.saturating_sub(reach), j + reach);
            let (Some(s), Some(direction)) = (
                shift(x, y, &mut scratch),
                local_direction(&along, &medians, span, (i, j)),
            ) else {
                continue;
            };
            ahead[p] += usize::from(s > 0.0);
            forward += usize::from(direction > 0.0);
            votes += 1;
            kept += 1;
            oriented[p].push(s * direction * 1e3);
        }
    }
    let table: Vec<SiteLag> = pairs
        .iter()
        .zip(&oriented)
        .zip(ahead.iter().zip(&peaks))
        .map(|((&(i, j, distance_um), shifts), (&up, peak))| SiteLag {
            site_a: sites[i].0.to_string(),
            site_b: sites[j].0.to_string(),
            distance_um,
            bursts: shifts.len(),
            lag_ms: median(shifts).filter(|_| shifts.len() >= settings.min_bursts.max(1)),
            forward_share: (!shifts.is_empty()).then(|| up as f64 / shifts.len() as f64),
            correlogram_peak_ms: peak.map(|p| p.0 * 1e3),
            correlogram_peak_count: peak.map_or(0.0, |p| p.1),
        })
        .collect();
    let owners: Vec<usize> = pairs.iter().map(|p| p.0).collect();
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
        oriented_shifts: votes,
        forward_share: (votes > 0).then(|| forward as f64 / votes as f64),
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
    fn the_direction_is_voted_by_the_other_sites_nearby() {
        // Sites 0..6 at 100 um steps; times rise along the track except at the pair (2, 3),
        // whose own times are swapped: the vote leaves them out and still says +1.
        let along: Vec<f64> = (0..7).map(|k| k as f64 * 100.0).collect();
        let mut t: Vec<Option<f64>> = (0..7).map(|k| Some(k as f64)).collect();
        t.swap(2, 3);
        assert_eq!(local_direction(&along, &t, (0, 6), (2, 3)), Some(1.0));
        let back: Vec<Option<f64>> = (0..7).map(|k| Some(-(k as f64))).collect();
        assert_eq!(local_direction(&along, &back, (0, 6), (2, 3)), Some(-1.0));
        // Too few other sites with a time.
        let sparse = vec![Some(0.0), None, Some(1.0), Some(2.0), None, None, Some(3.0)];
        assert_eq!(local_direction(&along, &sparse, (1, 4), (2, 3)), None);
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
