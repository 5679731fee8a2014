//! Small statistics shared by the analysis stages: order statistics, robust scale,
//! intervals. Distribution quantiles come from `statrs`.
//!
//! NaN policy: callers pass finite values; functions here do not filter NaN.

use statrs::distribution::{ContinuousCDF, Normal, StudentsT};

/// Median (mean of the two middle values for an even count); `None` when empty.
pub fn median(values: &[f64]) -> Option<f64> {
    median_in_place(&mut values.to_vec())
}

/// [`median`] of `v`, reordering it (no copy).
pub fn median_in_place(v: &mut [f64]) -> Option<f64> {
    // The type-7 quantile at 0.5 by selection instead of sorting (linear time), with the
    // same arithmetic, so the value is the same to the last bit.
    let n = v.len();
    if n == 0 {
        return None;
    }
    let h = (n - 1) as f64 * 0.5;
    let lo = h.floor() as usize;
    let (_, &mut a, above) = v.select_nth_unstable_by(lo, f64::total_cmp);
    let b = if lo + 1 < n {
        above.iter().copied().min_by(f64::total_cmp).unwrap_or(a)
    } else {
        a
    };
    Some(a + (h - lo as f64) * (b - a))
}

/// Quantile `q` in [0, 1] by linear interpolation between order statistics (Hyndman & Fan
/// 1996 type 7, numpy's default `linear` method); `None` when empty.
pub fn quantile(values: &[f64], q: f64) -> Option<f64> {
    if values.is_empty() {
        return None;
    }
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    Some(quantile_sorted(&v, q))
}

/// Type-7 quantile of already sorted, non-empty values.
pub fn quantile_sorted(sorted: &[f64], q: f64) -> f64 {
    let h = (sorted.len() - 1) as f64 * q.clamp(0.0, 1.0);
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(sorted.len() - 1);
    sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo])
}

/// Mean; `None` when empty.
pub fn mean(values: &[f64]) -> Option<f64> {
    (!values.is_empty()).then(|| values.iter().sum::<f64>() / values.len() as f64)
}

/// Sample standard deviation (n - 1 in the denominator); `None` below two values.
pub fn sample_sd(values: &[f64]) -> Option<f64> {
    let m = mean(values)?;
    (values.len() >= 2).then(|| {
        (values.iter().map(|v| (v - m) * (v - m)).sum::<f64>() / (values.len() - 1) as f64).sqrt()
    })
}

/// Median of the absolute values, skipping NaN (mean of the two middle values for an even
/// count); `None` when nothing is left. Exact, and fast on long signals: the middle is first
/// bracketed from an evenly strided sample of 2,048 values (4 binomial SDs either side of its
/// median), one pass counts the values below the bracket and keeps those inside it, and only
/// those are ordered. When the bracket misses the middle (unlikely unless the signal is
/// periodic with the stride) every value is ordered instead.
pub fn median_abs(values: &[f64]) -> Option<f64> {
    const SAMPLE: usize = 2048;
    let n = values.iter().filter(|v| !v.is_nan()).count();
    if n == 0 {
        return None;
    }
    // Ranks of the two middle order statistics (equal for an odd count).
    let (r_lo, r_hi) = ((n - 1) / 2, n / 2);
    if n >= 8 * SAMPLE {
        let mut sample: Vec<f64> = values
            .iter()
            .step_by(values.len() / SAMPLE)
            .filter(|v| !v.is_nan())
            .map(|v| v.abs())
            .collect();
        let m = sample.len();
        let reach = (2.0 * (m as f64).sqrt()).ceil() as usize;
        let lo = *sample
            .select_nth_unstable_by((m / 2).saturating_sub(reach), f64::total_cmp)
            .1;
        let hi = *sample
            .select_nth_unstable_by((m / 2 + reach).min(m - 1), f64::total_cmp)
            .1;
        // Branch-free counting first (it vectorises), then a branch-free copy of the values
        // inside the bracket into a buffer of the counted size.
        let (below, count_inside) = values.iter().fold((0usize, 0usize), |(b, i), v| {
            let a = v.abs();
            (b + usize::from(a < lo), i + usize::from(a >= lo && a <= hi))
        });
        let mut inside = vec![0.0; count_inside + 1];
        let mut filled = 0;
        for v in values {
            let a = v.abs();
            inside[filled.min(count_inside)] = a;
            filled += usize::from(a >= lo && a <= hi);
        }
        inside.truncate(count_inside);
        if below <= r_lo && r_hi < below + inside.len() {
            return Some(middle_of(&mut inside, r_lo - below, r_hi - below));
        }
    }
    let mut all: Vec<f64> = values
        .iter()
        .filter(|v| !v.is_nan())
        .map(|v| v.abs())
        .collect();
    Some(middle_of(&mut all, r_lo, r_hi))
}

/// Mean of the order statistics of ranks `r_lo` and `r_hi` = `r_lo` or `r_lo + 1` of `v`
/// (reorders `v`).
fn middle_of(v: &mut [f64], r_lo: usize, r_hi: usize) -> f64 {
    let (below, upper, _) = v.select_nth_unstable_by(r_hi, f64::total_cmp);
    let upper = *upper;
    if r_lo == r_hi {
        upper
    } else {
        let lower = below.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        0.5 * (lower + upper)
    }
}

/// Phi^-1(0.75): the median of |Z| for a standard normal Z.
pub const MAD_TO_SD: f64 = 0.674_489_750_196_081_7;

/// Robust standard deviation: median(|x - median(x)|) / Phi^-1(0.75).
pub fn mad_sd(values: &[f64]) -> Option<f64> {
    let m = median(values)?;
    let dev: Vec<f64> = values.iter().map(|v| (v - m).abs()).collect();
    median(&dev).map(|d| d / MAD_TO_SD)
}

/// Standard normal quantile.
pub fn normal_quantile(p: f64) -> f64 {
    Normal::standard().inverse_cdf(p)
}

/// Student t quantile with `df` degrees of freedom.
pub fn t_quantile(p: f64, df: f64) -> f64 {
    match StudentsT::new(0.0, 1.0, df) {
        Ok(t) => t.inverse_cdf(p),
        Err(_) => f64::NAN,
    }
}

/// Wilson score interval for `successes` out of `trials` at `confidence` (Wilson 1927,
/// J. Am. Stat. Assoc. 22:209); `None` for no trials.
pub fn wilson_interval(successes: usize, trials: usize, confidence: f64) -> Option<[f64; 2]> {
    if trials == 0 {
        return None;
    }
    let n = trials as f64;
    let p = successes as f64 / n;
    let z = normal_quantile(0.5 + confidence / 2.0);
    let z2 = z * z;
    let centre = (p + z2 / (2.0 * n)) / (1.0 + z2 / n);
    let half = z / (1.0 + z2 / n) * (p * (1.0 - p) / n + z2 / (4.0 * n * n)).sqrt();
    Some([(centre - half).max(0.0), (centre + half).min(1.0)])
}

/// Distribution-free confidence interval of the median from order statistics: the
/// `l`-th and `(n + 1 - l)`-th smallest values, with l the largest rank for which
/// P(Binomial(n, 1/2) < l) <= (1 - confidence) / 2 (Conover 1999, Practical Nonparametric
/// Statistics, sec. 3.2). Its coverage is at least `confidence`. `None` when n is too small
/// for any such interval (n < 6 at 95%).
pub fn median_interval(values: &[f64], confidence: f64) -> Option<[f64; 2]> {
    let n = values.len();
    let alpha_half = (1.0 - confidence) / 2.0;
    // Cumulative binomial(n, 1/2) probabilities, in log space to stay finite for large n.
    let ln_half_n = n as f64 * std::f64::consts::LN_2;
    let mut cdf = 0.0;
    let mut ln_choose = 0.0; // ln C(n, k)
    let mut rank = 0usize; // largest l with P(B <= l - 1) <= alpha_half
    for k in 0..n {
        if k > 0 {
            ln_choose += libm::log((n - k + 1) as f64) - libm::log(k as f64);
        }
        cdf += libm::exp(ln_choose - ln_half_n);
        if cdf <= alpha_half {
            rank = k + 1;
        } else {
            break;
        }
    }
    if rank == 0 {
        return None;
    }
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    // 1-based ranks l and n + 1 - l are 0-based l - 1 and n - l.
    Some([v[rank - 1], v[n - rank]])
}

/// Spearman's rank correlation: Pearson's correlation of the ranks, ties given their average
/// rank (as `scipy.stats.spearmanr`); `None` when either side is constant or fewer than two
/// pairs are given.
pub fn spearman(a: &[f64], b: &[f64]) -> Option<f64> {
    if a.len() != b.len() || a.len() < 2 {
        return None;
    }
    let (ra, rb) = (average_ranks(a), average_ranks(b));
    let n = a.len() as f64;
    let (ma, mb) = (ra.iter().sum::<f64>() / n, rb.iter().sum::<f64>() / n);
    let (mut sab, mut saa, mut sbb) = (0.0, 0.0, 0.0);
    for (x, y) in ra.iter().zip(&rb) {
        sab += (x - ma) * (y - mb);
        saa += (x - ma) * (x - ma);
        sbb += (y - mb) * (y - mb);
    }
    (saa > 0.0 && sbb > 0.0).then(|| sab / (saa * sbb).sqrt())
}

/// Ranks from 1, ties sharing their average rank.
fn average_ranks(v: &[f64]) -> Vec<f64> {
    let mut idx: Vec<usize> = (0..v.len()).collect();
    idx.sort_by(|&i, &j| v[i].total_cmp(&v[j]));
    let mut ranks = vec![0.0; v.len()];
    let mut k = 0;
    while k < idx.len() {
        let mut end = k + 1;
        while end < idx.len() && v[idx[end]] == v[idx[k]] {
            end += 1;
        }
        // Positions k..end (0-based) share the mean of ranks k + 1 ..= end.
        let rank = (k + 1 + end) as f64 / 2.0;
        for &i in &idx[k..end] {
            ranks[i] = rank;
        }
        k = end;
    }
    ranks
}
