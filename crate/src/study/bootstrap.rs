//! Bootstrap intervals for the difference between conditions: the plain percentile
//! bootstrap over replication units (as `scipy.stats.bootstrap(..., method="percentile")`),
//! and the hierarchical bootstrap for values nested in recordings nested in cultures
//! (Saravanan et al. 2020, Neurons Behav. Data Anal. Theory 3(2)): cultures are resampled,
//! then recordings within each chosen culture, then values within each chosen recording.
//!
//! Randomness is seeded ChaCha8, so the page and the command line give the same interval.

use crate::stats::{median, quantile_sorted};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// Largest number of resamples.
pub const MAX_RESAMPLES: usize = 100_000;

/// Largest number of values drawn over all resamples of one interval (resamples times the
/// values of one resample), so the work is bounded on any study.
pub const MAX_DRAWS: u64 = 2_000_000_000;

/// Percentile interval of `statistic(resampled x) - statistic(resampled y)`, each sample
/// resampled with replacement on its own, `resamples` times. `None` for an empty sample,
/// no resamples or too much work.
pub fn percentile_difference(
    x: &[f64],
    y: &[f64],
    statistic: impl Fn(&[f64]) -> Option<f64>,
    confidence: f64,
    resamples: usize,
    seed: u64,
) -> Option<[f64; 2]> {
    let mut values = replicates(&[x, y], resamples, seed, |r| {
        statistic(&r[0]).zip(statistic(&r[1])).map(|(a, b)| a - b)
    })?;
    percentile(&mut values, confidence)
}

/// Percentile interval of `statistic` of one sample resampled with replacement (for paired
/// differences). `None` as for [`percentile_difference`].
pub fn percentile_one(
    x: &[f64],
    statistic: impl Fn(&[f64]) -> Option<f64>,
    confidence: f64,
    resamples: usize,
    seed: u64,
) -> Option<[f64; 2]> {
    let mut values = replicates(&[x], resamples, seed, |r| statistic(&r[0]))?;
    percentile(&mut values, confidence)
}

/// `value` of each of `resamples` resamplings of `samples` (each resampled with
/// replacement on its own, in order, from one seeded generator). `None` when a sample is
/// empty, there are no resamples, or the draws exceed [`MAX_DRAWS`].
fn replicates(
    samples: &[&[f64]],
    resamples: usize,
    seed: u64,
    value: impl Fn(&[Vec<f64>]) -> Option<f64>,
) -> Option<Vec<f64>> {
    let resamples = resamples.min(MAX_RESAMPLES);
    let total: usize = samples.iter().map(|s| s.len()).sum();
    let draws = (resamples as u64).checked_mul(total as u64)?;
    if samples.iter().any(|s| s.is_empty()) || resamples == 0 || draws > MAX_DRAWS {
        return None;
    }
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut drawn: Vec<Vec<f64>> = samples.iter().map(|s| vec![0.0; s.len()]).collect();
    let mut values = Vec::with_capacity(resamples);
    for _ in 0..resamples {
        for (sample, out) in samples.iter().zip(drawn.iter_mut()) {
            for v in out.iter_mut() {
                *v = sample[rng.random_range(0..sample.len())];
            }
        }
        values.extend(value(&drawn));
    }
    Some(values)
}

/// The `confidence` percentile interval of `values` (reordered).
fn percentile(values: &mut [f64], confidence: f64) -> Option<[f64; 2]> {
    if values.is_empty() {
        return None;
    }
    values.sort_by(f64::total_cmp);
    let tail = (1.0 - confidence) / 2.0;
    Some([
        quantile_sorted(values, tail),
        quantile_sorted(values, 1.0 - tail),
    ])
}

/// One condition's values, nested: cultures, each a list of recordings, each a list of
/// values (for example the front speeds of its bursts).
pub type Nested = Vec<Vec<Vec<f64>>>;

/// One hierarchical resample of a condition, flattened: cultures with replacement, then
/// recordings within each, then values within each recording.
fn resample_nested(data: &Nested, rng: &mut ChaCha8Rng, out: &mut Vec<f64>) {
    out.clear();
    for _ in 0..data.len() {
        let culture = &data[rng.random_range(0..data.len())];
        if culture.is_empty() {
            continue;
        }
        for _ in 0..culture.len() {
            let recording = &culture[rng.random_range(0..culture.len())];
            for _ in 0..recording.len() {
                out.push(recording[rng.random_range(0..recording.len())]);
            }
        }
    }
}

/// Hierarchical bootstrap of the difference of medians between two conditions: the median
/// of the pooled resampled values of `a` minus that of `b`, with its `confidence`
/// percentile interval. `None` when a condition has no values, or too much work.
pub fn hierarchical_median_difference(
    a: &Nested,
    b: &Nested,
    confidence: f64,
    resamples: usize,
    seed: u64,
) -> Option<[f64; 2]> {
    let count = |d: &Nested| d.iter().flatten().map(Vec::len).sum::<usize>();
    let resamples = resamples.min(MAX_RESAMPLES);
    let draws = (resamples as u64).checked_mul((count(a) + count(b)) as u64)?;
    if count(a) == 0 || count(b) == 0 || resamples == 0 || draws > MAX_DRAWS {
        return None;
    }
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let (mut ra, mut rb) = (Vec::new(), Vec::new());
    let mut effects = Vec::with_capacity(resamples);
    for _ in 0..resamples {
        resample_nested(a, &mut rng, &mut ra);
        resample_nested(b, &mut rng, &mut rb);
        if let (Some(x), Some(y)) = (median(&ra), median(&rb)) {
            effects.push(x - y);
        }
    }
    percentile(&mut effects, confidence)
}
