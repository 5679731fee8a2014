//! Synchrony between sites: the spike time tiling coefficient for every pair (Cutts &
//! Eglen 2014, J. Neurosci. 34:14288) and the Kuramoto order parameter from spike phases
//! (phase linear between successive spikes; Pinsky & Rinzel 1995, J. Comput. Neurosci.
//! 2:275). Inputs are event trains in seconds, ascending.

pub mod lags;

use ndarray::Array2;
use serde::{Deserialize, Serialize};

/// Largest number of sites a pairwise matrix is computed for (the matrix has the square).
pub const MAX_SITES: usize = 8192;

/// Largest number of time samples of the order parameter.
pub const MAX_SAMPLES: usize = 2_000_000;

/// Largest number of site-samples (sites x samples) of the order parameter: beyond it the
/// step widens, so the work stays bounded on any recording.
pub const MAX_SITE_SAMPLES: f64 = 2e8;

/// Share of the recording `[t0, t1]` within `dt` of some event of `train`: the union of the
/// windows `[t - dt, t + dt]`, clipped to the recording, over its length.
pub fn tiled_fraction(train: &[f64], span_s: (f64, f64), dt: f64) -> f64 {
    let (t0, t1) = span_s;
    let length = t1 - t0;
    if length <= 0.0 {
        return 0.0;
    }
    let mut covered = 0.0;
    let mut open: Option<(f64, f64)> = None;
    for &t in train {
        let (a, b) = ((t - dt).max(t0), (t + dt).min(t1));
        if b <= a {
            continue;
        }
        open = match open {
            Some((lo, hi)) if a <= hi => Some((lo, hi.max(b))),
            Some((lo, hi)) => {
                covered += hi - lo;
                Some((a, b))
            }
            None => Some((a, b)),
        };
    }
    if let Some((lo, hi)) = open {
        covered += hi - lo;
    }
    covered / length
}

/// Tolerance on "within `dt`", seconds: an absolute nanosecond, far below any sampling step.
/// Event times come from decimal text, so two events exactly `dt` apart (common at a fixed
/// sampling rate) are a float either side of `dt`, and which side depends on the times'
/// magnitude; without it, shifting a recording by a day changes the STTC (seen on a real
/// recording). The comparison is on the difference of the two times, which is exact for
/// times within a factor of two of each other (Sterbenz), never on `t - dt`.
pub const TILE_TOLERANCE_S: f64 = 1e-9;

/// Share of the events of `a` that have an event of `b` within `dt` (inclusive, up to
/// [`TILE_TOLERANCE_S`]): one merge pass over both sorted trains.
pub fn tiled_events(a: &[f64], b: &[f64], dt: f64) -> f64 {
    if a.is_empty() {
        return 0.0;
    }
    let reach = dt + TILE_TOLERANCE_S;
    let mut j = 0;
    let mut hits = 0usize;
    for &t in a {
        while j < b.len() && b[j] - t < -reach {
            j += 1;
        }
        if j < b.len() && b[j] - t <= reach {
            hits += 1;
        }
    }
    hits as f64 / a.len() as f64
}

/// STTC of two trains over the recording `span_s` with window `dt` (seconds), from their
/// tiled fractions `ta`, `tb` ([`tiled_fraction`]).
///
/// 0/0 policy: `None` when either train is empty, or when a term's denominator 1 - P T is
/// zero (every event of one train is tiled by the other, whose windows cover the whole
/// recording): the coefficient is then undefined, and it is reported as missing, never as 0
/// or 1.
pub fn sttc_with(a: &[f64], b: &[f64], ta: f64, tb: f64, dt: f64) -> Option<f64> {
    if a.is_empty() || b.is_empty() {
        return None;
    }
    sttc_from(tiled_events(a, b, dt), tiled_events(b, a, dt), ta, tb)
}

/// STTC from the shares of tiled events `pa`, `pb` and tiled time `ta`, `tb` (the 0/0
/// policy of [`sttc_with`]).
fn sttc_from(pa: f64, pb: f64, ta: f64, tb: f64) -> Option<f64> {
    let (da, db) = (1.0 - pa * tb, 1.0 - pb * ta);
    if da == 0.0 || db == 0.0 {
        return None;
    }
    Some(0.5 * (pa - tb) / da + 0.5 * (pb - ta) / db)
}

/// STTC of two trains (see [`sttc_with`]).
pub fn sttc(a: &[f64], b: &[f64], span_s: (f64, f64), dt: f64) -> Option<f64> {
    sttc_with(
        a,
        b,
        tiled_fraction(a, span_s, dt),
        tiled_fraction(b, span_s, dt),
        dt,
    )
}

/// A train with its events binned at the STTC window: which bins hold events, which lie
/// within two bins of one, and where each occupied bin's events start. Two events in the
/// same bin are closer than the window, so tile each other; an event with no event of the
/// other train within two bins is not tiled; only the events in between need their times
/// compared. The counts are those of [`tiled_events`], exactly.
struct BinnedTrain<'a> {
    times: &'a [f64],
    occupied: Vec<u64>,
    within_two: Vec<u64>,
    /// Occupied bins before each word.
    rank: Vec<u32>,
    /// Index of the first event of the r-th occupied bin, and the event count at the end.
    first: Vec<u32>,
}

/// Largest number of 64-bit words of bins over all trains for which the matrix is binned
/// (32 MiB for the two bitsets); beyond it, every pair is merged.
const MAX_BIN_WORDS: usize = 2_000_000;

impl<'a> BinnedTrain<'a> {
    /// `None` when an event lies outside the bins or there are more than u32 events.
    fn new(times: &'a [f64], t0: f64, width: f64, words: usize) -> Option<Self> {
        let bins = words * 64;
        let mut occupied = vec![0u64; words];
        let mut first = Vec::new();
        let mut last_bin = usize::MAX;
        u32::try_from(times.len()).ok()?;
        for (i, &t) in times.iter().enumerate() {
            let k = ((t - t0) / width).floor();
            if !(k >= 0.0 && k < bins as f64) {
                return None;
            }
            let k = k as usize;
            if k != last_bin {
                occupied[k / 64] |= 1 << (k % 64);
                first.push(i as u32);
                last_bin = k;
            }
        }
        first.push(times.len() as u32);
        let mut within_two = vec![0u64; words];
        for (w, &word) in occupied.iter().enumerate() {
            let mut bits = word;
            while bits != 0 {
                let k = w * 64 + bits.trailing_zeros() as usize;
                bits &= bits - 1;
                for j in k.saturating_sub(2)..=(k + 2).min(bins - 1) {
                    within_two[j / 64] |= 1 << (j % 64);
                }
            }
        }
        let mut rank = Vec::with_capacity(words);
        let mut count = 0u32;
        for &word in &occupied {
            rank.push(count);
            count += word.count_ones();
        }
        Some(BinnedTrain {
            times,
            occupied,
            within_two,
            rank,
            first,
        })
    }

    /// Whether bin `k` holds an event (false beyond the bins).
    fn holds(&self, k: usize) -> bool {
        self.occupied
            .get(k / 64)
            .is_some_and(|w| w & (1u64 << (k % 64)) != 0)
    }

    /// The events of bin `k` (which must be occupied), as an index range.
    fn events_in(&self, k: usize) -> std::ops::Range<usize> {
        let (w, bit) = (k / 64, k % 64);
        let below = self.occupied[w] & ((1u64 << bit) - 1);
        let r = (self.rank[w] + below.count_ones()) as usize;
        self.first[r] as usize..self.first[r + 1] as usize
    }

    /// Events of `self` in bin `k` (not in `other`) tiled by an event of `other`: the
    /// nearest events of `other` lie in its nearest occupied bin below (k - 1 or k - 2: its
    /// last event) and above (k + 1 or k + 2: its first).
    fn tiled_near(&self, other: &BinnedTrain, k: usize, reach: f64) -> usize {
        let below = [1, 2]
            .into_iter()
            .filter_map(|d| k.checked_sub(d))
            .find(|&j| other.holds(j))
            .map(|j| other.times[other.events_in(j).end - 1]);
        let above = [k + 1, k + 2]
            .into_iter()
            .find(|&j| other.holds(j))
            .map(|j| other.times[other.events_in(j).start]);
        self.times[self.events_in(k)]
            .iter()
            .filter(|&&t| {
                below.is_some_and(|b| b - t >= -reach) || above.is_some_and(|b| b - t <= reach)
            })
            .count()
    }
}

/// Events of `a` with an event of `b` within `dt`, and of `b` with one of `a` (as
/// [`tiled_events`] counts both ways), in one pass over the two trains' bins.
fn tiled_both(a: &BinnedTrain, b: &BinnedTrain, dt: f64) -> (usize, usize) {
    let reach = dt + TILE_TOLERANCE_S;
    let (mut hits_a, mut hits_b) = (0, 0);
    for w in 0..a.occupied.len() {
        let (oa, ob) = (a.occupied[w], b.occupied[w]);
        let mut same = oa & ob;
        let mut near_a = oa & !ob & b.within_two[w];
        let mut near_b = ob & !oa & a.within_two[w];
        while same != 0 {
            let k = w * 64 + same.trailing_zeros() as usize;
            same &= same - 1;
            hits_a += a.events_in(k).len();
            hits_b += b.events_in(k).len();
        }
        while near_a != 0 {
            let k = w * 64 + near_a.trailing_zeros() as usize;
            near_a &= near_a - 1;
            hits_a += a.tiled_near(b, k, reach);
        }
        while near_b != 0 {
            let k = w * 64 + near_b.trailing_zeros() as usize;
            near_b &= near_b - 1;
            hits_b += b.tiled_near(a, k, reach);
        }
    }
    (hits_a, hits_b)
}

/// STTC for every pair of `trains`, in the order given (callers order sites along the
/// track); the diagonal is each train with itself (1, or `None` for an empty train). `None`
/// for more than [`MAX_SITES`] trains.
///
/// Cost: the trains are binned at the window `dt` once; a pair then costs one pass over
/// the words of its bitsets (span / dt / 64) plus the events in bins where the two trains
/// come within two bins, so it grows with the square of the sites and, for sparse trains,
/// with the span over the window more than with the events. Where the bins would take
/// too much memory (a long recording and a short window) every pair is merged instead.
pub fn sttc_matrix(trains: &[&[f64]], span_s: (f64, f64), dt: f64) -> Option<Array2<Option<f64>>> {
    let n = trains.len();
    if n > MAX_SITES {
        return None;
    }
    let tiled: Vec<f64> = trains
        .iter()
        .map(|t| tiled_fraction(t, span_s, dt))
        .collect();
    let mut m = Array2::from_elem((n, n), None);
    let words = ((span_s.1 - span_s.0) / dt / 64.0).floor() + 1.0;
    let binned: Option<Vec<BinnedTrain>> = (dt > 0.0 && words * n as f64 <= MAX_BIN_WORDS as f64)
        .then(|| {
            trains
                .iter()
                .map(|t| BinnedTrain::new(t, span_s.0, dt, words as usize))
                .collect()
        })
        .flatten();
    for i in 0..n {
        for j in i..n {
            let v = match &binned {
                Some(b) if !trains[i].is_empty() && !trains[j].is_empty() => {
                    let (hits_i, hits_j) = tiled_both(&b[i], &b[j], dt);
                    let pa = hits_i as f64 / trains[i].len() as f64;
                    let pb = hits_j as f64 / trains[j].len() as f64;
                    sttc_from(pa, pb, tiled[i], tiled[j])
                }
                _ => sttc_with(trains[i], trains[j], tiled[i], tiled[j], dt),
            };
            m[[i, j]] = v;
            m[[j, i]] = v;
        }
    }
    Some(m)
}

/// Settings of the synchrony measures.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct SynchronySettings {
    /// STTC window, seconds (Cutts & Eglen 2014 illustrate with 5-50 ms; common practice, no
    /// source, for network bursts: 50 ms).
    pub sttc_dt_s: f64,
    /// Time step at which the order parameter is sampled, seconds.
    pub phase_step_s: f64,
    /// Largest number of sites with events for which the pairwise STTC is computed.
    pub max_sites: usize,
    /// Lags between sites along the track ([`lags::lags`]).
    pub lags: lags::LagSettings,
}

impl Default for SynchronySettings {
    fn default() -> Self {
        SynchronySettings {
            sttc_dt_s: 0.05,
            phase_step_s: 0.01,
            max_sites: 256,
            lags: lags::LagSettings::default(),
        }
    }
}

/// The Kuramoto order parameter over a recording.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OrderParameter {
    /// Sampling step of R(t), seconds.
    pub step_s: f64,
    /// Mean of R(t) over the samples where at least two sites have a phase.
    pub mean_r: f64,
    /// Samples used, and samples masked (fewer than two sites with a phase).
    pub samples: usize,
    pub masked: usize,
    /// Sites with at least two events (the others never have a phase).
    pub sites: usize,
    /// Mean number of sites with a phase over the samples used.
    pub mean_sites_with_phase: f64,
    /// Expected R of that many independent uniform phases, sqrt(pi) / (2 sqrt(N))
    /// (derived; CHECK-VALUES.md).
    pub chance_r: f64,
}

/// R(t) = |mean over sites of exp(i phi_k(t))|, phi_k rising linearly by 2 pi between a
/// site's successive events, sampled every `step_s` over `span_s`. A site has no phase
/// before its first event or after its last: it is left out there (masked), never filled.
/// `None` when no sample has two sites with a phase, or the sampling would exceed
/// [`MAX_SAMPLES`].
pub fn order_parameter(
    trains: &[&[f64]],
    span_s: (f64, f64),
    step_s: f64,
) -> Option<OrderParameter> {
    let (t0, t1) = span_s;
    let count = ((t1 - t0) / step_s).floor();
    if !(count >= 1.0 && count <= MAX_SAMPLES as f64) {
        return None;
    }
    let samples = count as usize;
    let mut next = vec![0usize; trains.len()];
    let (mut sum_r, mut used, mut masked, mut with_phase) = (0.0, 0usize, 0usize, 0usize);
    for k in 0..samples {
        let t = t0 + (k as f64 + 0.5) * step_s;
        let (mut c, mut s, mut n) = (0.0, 0.0, 0usize);
        for (train, i) in trains.iter().zip(next.iter_mut()) {
            while *i < train.len() && train[*i] <= t {
                *i += 1;
            }
            // train[i - 1] <= t < train[i]: a phase exists between two events.
            if *i == 0 || *i >= train.len() {
                continue;
            }
            let (a, b) = (train[*i - 1], train[*i]);
            let phase = std::f64::consts::TAU * (t - a) / (b - a);
            c += libm::cos(phase);
            s += libm::sin(phase);
            n += 1;
        }
        if n < 2 {
            masked += 1;
            continue;
        }
        sum_r += libm::hypot(c, s) / n as f64;
        used += 1;
        with_phase += n;
    }
    if used == 0 {
        return None;
    }
    let mean_n = with_phase as f64 / used as f64;
    Some(OrderParameter {
        step_s,
        mean_r: sum_r / used as f64,
        samples: used,
        masked,
        sites: trains.iter().filter(|t| t.len() >= 2).count(),
        mean_sites_with_phase: mean_n,
        chance_r: std::f64::consts::PI.sqrt() / (2.0 * mean_n.sqrt()),
    })
}

/// One pair of sites' STTC, for `sttc.csv`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SttcPair {
    pub site_a: String,
    pub site_b: String,
    /// Distance between the two along the track (or in the plane), micrometres.
    pub distance_um: f64,
    /// `None` where the coefficient is undefined (see [`sttc_with`]).
    pub sttc: Option<f64>,
}

/// The synchrony of a recording's sites.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SynchronySummary {
    /// STTC window, seconds.
    pub sttc_dt_s: f64,
    /// Sites with events, and pairs of them with a defined STTC.
    pub sites: usize,
    pub pairs: usize,
    pub mean_sttc: Option<f64>,
    pub median_sttc: Option<f64>,
    /// Why the pairwise STTC was not computed (too many sites), when it was not.
    pub sttc_skipped: Option<String>,
    /// Kuramoto order parameter from spike phases.
    pub order: Option<OrderParameter>,
    /// Lags between neighbouring sites along the track and the speed they imply; `None` on
    /// a plane (no track coordinate).
    pub lags: Option<lags::LagSummary>,
    /// Every pair (i < j, sites in track order), for `sttc.csv`; not in the JSON.
    #[serde(skip)]
    pub pairs_table: Vec<SttcPair>,
    /// The sites of `pairs_table` in its order (with events, along the track); not in the
    /// JSON.
    #[serde(skip)]
    pub sttc_sites: Vec<String>,
}

/// A site as the synchrony measures see it: its id, its position for distances (track
/// coordinate, or layout x, y on a plane) and its events.
pub struct SiteEvents<'a> {
    pub id: &'a str,
    pub along_um: Option<f64>,
    pub xy_um: [f64; 2],
    pub events_s: &'a [f64],
}

/// STTC for every pair of sites with events (in the order given: callers sort along the
/// track), their mean and median, the order parameter, and on a track the lags between
/// neighbouring sites within the network bursts `bursts_s` (start, end; seconds). Pairwise work is skipped, with
/// the reason, beyond `settings.max_sites` sites.
pub fn summarise(
    sites: &[SiteEvents],
    span_s: (f64, f64),
    bursts_s: &[(f64, f64)],
    settings: &SynchronySettings,
) -> SynchronySummary {
    let active: Vec<&SiteEvents> = sites.iter().filter(|s| !s.events_s.is_empty()).collect();
    let trains: Vec<&[f64]> = active.iter().map(|s| s.events_s).collect();
    let dt = settings.sttc_dt_s;
    let mut summary = SynchronySummary {
        sttc_dt_s: dt,
        sites: active.len(),
        pairs: 0,
        mean_sttc: None,
        median_sttc: None,
        sttc_skipped: None,
        // A long recording is sampled more coarsely rather than refused.
        order: order_parameter(
            &trains,
            span_s,
            settings
                .phase_step_s
                .max((span_s.1 - span_s.0) / MAX_SAMPLES as f64)
                .max((span_s.1 - span_s.0) * trains.len() as f64 / MAX_SITE_SAMPLES),
        ),
        pairs_table: Vec::new(),
        sttc_sites: Vec::new(),
        lags: None,
    };
    let along: Option<Vec<(&str, f64, &[f64])>> = active
        .iter()
        .map(|s| s.along_um.map(|x| (s.id, x, s.events_s)))
        .collect();
    summary.lags = along.map(|a| lags::lags(&a, bursts_s, &settings.lags));
    if active.len() > settings.max_sites.min(MAX_SITES) {
        summary.sttc_skipped = Some(format!(
            "{} sites have events, more than synchrony.max_sites ({}): the pairwise STTC was not computed (its cost grows with the square of the sites); raise the limit to compute it",
            active.len(),
            settings.max_sites
        ));
        return summary;
    }
    let Some(matrix) = sttc_matrix(&trains, span_s, dt) else {
        return summary;
    };
    summary.sttc_sites = active.iter().map(|s| s.id.to_string()).collect();
    let mut values = Vec::new();
    for i in 0..active.len() {
        for j in i + 1..active.len() {
            let (a, b) = (active[i], active[j]);
            let distance_um = match (a.along_um, b.along_um) {
                (Some(x), Some(y)) => (x - y).abs(),
                _ => libm::hypot(a.xy_um[0] - b.xy_um[0], a.xy_um[1] - b.xy_um[1]),
            };
            let v = matrix[[i, j]];
            values.extend(v);
            summary.pairs_table.push(SttcPair {
                site_a: a.id.to_string(),
                site_b: b.id.to_string(),
                distance_um,
                sttc: v,
            });
        }
    }
    summary.pairs = values.len();
    summary.mean_sttc = crate::stats::mean(&values);
    summary.median_sttc = crate::stats::quantile(&values, 0.5);
    summary
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_binned_matrix_counts_exactly_what_the_merge_counts() {
        use rand::{Rng, SeedableRng};
        // Times on a 1 ms grid, so that many pairs of events are exactly 5 ms (the window)
        // apart, some in runs (bursts); and the same shifted by a day, where the float
        // differences round differently. Every entry must equal the pairwise merge's.
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(9);
        for offset in [0.0, 86_400.0] {
            let trains: Vec<Vec<f64>> = (0..12)
                .map(|_| {
                    let mut t: Vec<f64> = (0..rng.random_range(0..300))
                        .map(|_| offset + rng.random_range(0..20_000) as f64 * 1e-3)
                        .collect();
                    t.sort_by(f64::total_cmp);
                    t.dedup();
                    t
                })
                .collect();
            let refs: Vec<&[f64]> = trains.iter().map(|t| t.as_slice()).collect();
            for dt in [0.005, 0.05, 0.0004] {
                let span = (offset, offset + 20.0);
                let m = sttc_matrix(&refs, span, dt).unwrap();
                for i in 0..refs.len() {
                    for j in 0..refs.len() {
                        assert_eq!(
                            m[[i, j]],
                            sttc(refs[i], refs[j], span, dt),
                            "{i} {j} dt {dt}"
                        );
                    }
                }
            }
        }
    }
}
