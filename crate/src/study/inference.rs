//! Tests and intervals for comparing conditions: the Wilcoxon signed-rank test (paired), the
//! Mann-Whitney U test (independent), the Hodges-Lehmann shift with its distribution-free
//! interval, and Holm's and Benjamini-Hochberg's adjustments for several metrics.
//!
//! Conventions follow `scipy.stats` (1.17), so results can be checked against it. Wilcoxon:
//! the exact null distribution for up to 50 differences without ties or zeros; with ties or
//! zeros and up to 13 differences, all sign assignments; otherwise the normal approximation
//! with the tie correction. Mann-Whitney: the exact distribution without ties when the
//! smaller sample has at most 8 values; otherwise the normal approximation with the tie
//! and continuity corrections. The method used is
//! returned beside every p-value.

use serde::Serialize;

/// How a p-value was computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum PMethod {
    /// From the exact null distribution of the statistic.
    Exact,
    /// Normal approximation with the tie correction (and, for Mann-Whitney, continuity).
    Normal,
}

impl PMethod {
    pub fn as_str(self) -> &'static str {
        match self {
            PMethod::Exact => "exact",
            PMethod::Normal => "normal approximation",
        }
    }
}

/// A test's result, or why it could not be computed.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(rename_all = "snake_case", tag = "kind")]
pub enum TestOutcome {
    Computed {
        statistic: f64,
        p: f64,
        method: PMethod,
    },
    /// All values equal (every difference zero, or every value tied): no test is possible,
    /// and the data say so rather than giving NaN.
    Degenerate { reason: String },
    /// Too few values for the test.
    TooFew { needed: usize, given: usize },
}

/// Up to this many differences (zeros included) with ties or zeros, the p-value comes from
/// all sign assignments (scipy's choice; 2^13 assignments).
pub const MAX_SIGN_FLIPS_N: usize = 13;

/// Largest sample for which exact distributions are tabulated (work grows with n^3 for the
/// signed-rank and n1 n2 (n1 + n2) for U).
pub const MAX_EXACT_N: usize = 50;

/// Ranks from 1 of `v`, ties given their average rank, and sum over tie groups of t^3 - t.
fn ranks_with_ties(v: &[f64]) -> (Vec<f64>, f64) {
    let mut idx: Vec<usize> = (0..v.len()).collect();
    idx.sort_by(|&i, &j| v[i].total_cmp(&v[j]));
    let mut ranks = vec![0.0; v.len()];
    let mut ties = 0.0;
    let mut k = 0;
    while k < idx.len() {
        let mut end = k + 1;
        while end < idx.len() && v[idx[end]] == v[idx[k]] {
            end += 1;
        }
        let rank = (k + end + 1) as f64 / 2.0;
        for &i in &idx[k..end] {
            ranks[i] = rank;
        }
        let t = (end - k) as f64;
        ties += t * t * t - t;
        k = end;
    }
    (ranks, ties)
}

/// Standard normal survival function.
fn normal_sf(z: f64) -> f64 {
    0.5 * libm::erfc(z / std::f64::consts::SQRT_2)
}

/// Number of subsets of {1..n} with each sum s = 0..n(n+1)/2: the null distribution of the
/// signed-rank statistic times 2^n.
fn signed_rank_counts(n: usize) -> Vec<f64> {
    let max = n * (n + 1) / 2;
    let mut c = vec![0.0; max + 1];
    c[0] = 1.0;
    for k in 1..=n {
        for s in (k..=max).rev() {
            c[s] += c[s - k];
        }
    }
    c
}

/// Wilcoxon signed-rank test of paired differences `d` against a zero median, two-sided.
/// Zero differences are dropped (scipy's `zero_method="wilcox"`). The statistic is the
/// smaller of the positive and negative rank sums (scipy's two-sided statistic).
pub fn wilcoxon_signed_rank(d: &[f64]) -> TestOutcome {
    let nonzero: Vec<f64> = d.iter().copied().filter(|x| *x != 0.0).collect();
    if nonzero.is_empty() {
        return TestOutcome::Degenerate {
            reason: "every paired difference is zero".into(),
        };
    }
    let n = nonzero.len();
    let magnitudes: Vec<f64> = nonzero.iter().map(|x| x.abs()).collect();
    let (ranks, ties) = ranks_with_ties(&magnitudes);
    let r_plus: f64 = nonzero
        .iter()
        .zip(&ranks)
        .filter(|(x, _)| **x > 0.0)
        .map(|(_, r)| r)
        .sum();
    let total = (n * (n + 1)) as f64 / 2.0;
    let statistic = r_plus.min(total - r_plus);
    let exact = n <= MAX_EXACT_N && ties == 0.0 && nonzero.len() == d.len();
    if !exact && d.len() <= MAX_SIGN_FLIPS_N {
        // With ties or zeros, every one of the 2^n sign assignments of the non-zero
        // differences (scipy: an exhaustive permutation test for up to 13 differences).
        let mut below = 0usize;
        let mut above = 0usize;
        let tolerance = 1e-9 * total;
        for signs in 0u32..(1u32 << n) {
            let r: f64 = ranks
                .iter()
                .enumerate()
                .filter(|(k, _)| signs & (1 << k) != 0)
                .map(|(_, r)| r)
                .sum();
            below += usize::from(r <= r_plus + tolerance);
            above += usize::from(r >= r_plus - tolerance);
        }
        let all = (1u64 << n) as f64;
        let p = (2.0 * below.min(above) as f64 / all).min(1.0);
        return TestOutcome::Computed {
            statistic,
            p,
            method: PMethod::Exact,
        };
    }
    if exact {
        let counts = signed_rank_counts(n);
        let all = 2f64.powi(n as i32);
        let below: f64 = counts[..=statistic as usize].iter().sum();
        let p = (2.0 * below / all).min(1.0);
        return TestOutcome::Computed {
            statistic,
            p,
            method: PMethod::Exact,
        };
    }
    let nf = n as f64;
    let mean = nf * (nf + 1.0) / 4.0;
    let var = nf * (nf + 1.0) * (2.0 * nf + 1.0) / 24.0 - ties / 48.0;
    if var <= 0.0 {
        return TestOutcome::Degenerate {
            reason: "every paired difference has the same size".into(),
        };
    }
    let z = (statistic - mean) / var.sqrt();
    TestOutcome::Computed {
        statistic,
        p: (2.0 * normal_sf(z.abs())).min(1.0),
        method: PMethod::Normal,
    }
}

/// Counts of the Mann-Whitney U statistic for samples of n1 and n2 without ties: c[u] for
/// u = 0..n1 n2, summing to C(n1 + n2, n1). The largest of i + j values is either one of
/// the i (adding j to U) or one of the j, so f(i, j, u) = f(i - 1, j, u - j) + f(i, j - 1,
/// u); the table is kept one i at a time. The distribution is the same with n1 and n2
/// swapped, so i runs over the smaller sample.
fn u_counts(n1: usize, n2: usize) -> Vec<f64> {
    let (small, large) = (n1.min(n2), n1.max(n2));
    let max = small * large;
    // prev[j][u] = f(i - 1, j, u).
    let mut prev = vec![vec![0.0; max + 1]; large + 1];
    for row in prev.iter_mut() {
        row[0] = 1.0;
    }
    for i in 1..=small {
        let mut next = vec![vec![0.0; max + 1]; large + 1];
        next[0][0] = 1.0;
        for j in 1..=large {
            for u in 0..=i * j {
                let from_small = if u >= j { prev[j][u - j] } else { 0.0 };
                next[j][u] = from_small + next[j - 1][u];
            }
        }
        prev = next;
    }
    prev.swap_remove(large)
}

/// Largest work (values of the counting table) for the exact Mann-Whitney distribution;
/// beyond it the normal approximation is used even without ties (scipy would go on).
pub const MAX_EXACT_U_WORK: usize = 20_000_000;

/// The exact Mann-Whitney distribution is used, without ties, when the smaller sample has
/// at most this many values (scipy's switch: both above 8 go to the normal approximation).
pub const MAX_EXACT_U: usize = 8;

/// Mann-Whitney U test of `x` against `y`, two-sided. The statistic is U of `x` (scipy's
/// `mannwhitneyu(x, y)`): the number of pairs with x > y, ties counting a half.
pub fn mann_whitney_u(x: &[f64], y: &[f64]) -> TestOutcome {
    let (n1, n2) = (x.len(), y.len());
    if n1 == 0 || n2 == 0 {
        return TestOutcome::TooFew {
            needed: 1,
            given: n1.min(n2),
        };
    }
    let all: Vec<f64> = x.iter().chain(y).copied().collect();
    let (ranks, ties) = ranks_with_ties(&all);
    let r1: f64 = ranks[..n1].iter().sum();
    let u1 = r1 - (n1 * (n1 + 1)) as f64 / 2.0;
    let (nf1, nf2) = (n1 as f64, n2 as f64);
    let n = nf1 + nf2;
    if ties == n * n * n - n {
        return TestOutcome::Degenerate {
            reason: "every value is the same".into(),
        };
    }
    let work = (n1.max(n2) + 1).saturating_mul(n1.saturating_mul(n2) + 1);
    if ties == 0.0 && n1.min(n2) <= MAX_EXACT_U && work <= MAX_EXACT_U_WORK {
        let counts = u_counts(n1, n2);
        let total: f64 = counts.iter().sum();
        let u_hi = u1.max(nf1 * nf2 - u1) as usize;
        let upper: f64 = counts[u_hi..].iter().sum();
        return TestOutcome::Computed {
            statistic: u1,
            p: (2.0 * upper / total).min(1.0),
            method: PMethod::Exact,
        };
    }
    let mean = nf1 * nf2 / 2.0;
    let var = nf1 * nf2 / 12.0 * ((n + 1.0) - ties / (n * (n - 1.0)));
    let u_hi = u1.max(nf1 * nf2 - u1);
    let z = (u_hi - mean - 0.5) / var.sqrt();
    TestOutcome::Computed {
        statistic: u1,
        p: (2.0 * normal_sf(z)).min(1.0),
        method: PMethod::Normal,
    }
}

/// Jonckheere-Terpstra test for a trend across ordered groups (Jonckheere 1954, Biometrika
/// 41:133; Terpstra 1952), two-sided. J is the number of pairs (a in an earlier group, b in
/// a later one) with a < b, ties counting a half; large J is a rising trend. Without ties
/// and within [`MAX_EXACT_U_WORK`], the exact null distribution (the convolution of the
/// Mann-Whitney distributions of each group against those before it); otherwise the normal
/// approximation with the tie-corrected variance (Hollander & Wolfe 1999, eq. 6.19; from
/// memory), without continuity correction.
pub fn jonckheere_terpstra(groups: &[Vec<f64>]) -> TestOutcome {
    let sizes: Vec<usize> = groups.iter().map(Vec::len).filter(|n| *n > 0).collect();
    if sizes.len() < 2 {
        return TestOutcome::TooFew {
            needed: 2,
            given: sizes.len(),
        };
    }
    let groups: Vec<&Vec<f64>> = groups.iter().filter(|g| !g.is_empty()).collect();
    let mut j_stat = 0.0;
    for (i, gi) in groups.iter().enumerate() {
        for gj in &groups[i + 1..] {
            for &a in gi.iter() {
                for &b in gj.iter() {
                    j_stat += if a < b {
                        1.0
                    } else if a == b {
                        0.5
                    } else {
                        0.0
                    };
                }
            }
        }
    }
    let all: Vec<f64> = groups.iter().flat_map(|g| g.iter().copied()).collect();
    let n = all.len();
    let (_, ties) = ranks_with_ties(&all);
    let nf = n as f64;
    if ties == nf * nf * nf - nf {
        return TestOutcome::Degenerate {
            reason: "every value is the same".into(),
        };
    }
    // Exact: convolve each group's Mann-Whitney counts against all before it.
    let mut work = 0usize;
    let mut before = sizes[0];
    for &m in &sizes[1..] {
        work = work.saturating_add((before.max(m) + 1).saturating_mul(before * m + 1));
        before += m;
    }
    if ties == 0.0 && work <= MAX_EXACT_U_WORK {
        let mut dist = vec![1.0];
        let mut before = sizes[0];
        for &m in &sizes[1..] {
            let u = u_counts(before, m);
            let mut next = vec![0.0; dist.len() + u.len() - 1];
            for (a, x) in dist.iter().enumerate() {
                for (b, y) in u.iter().enumerate() {
                    next[a + b] += x * y;
                }
            }
            dist = next;
            before += m;
        }
        let total: f64 = dist.iter().sum();
        let k = j_stat as usize;
        let lower: f64 = dist[..=k].iter().sum();
        let upper: f64 = dist[k..].iter().sum();
        return TestOutcome::Computed {
            statistic: j_stat,
            p: (2.0 * lower.min(upper) / total).min(1.0),
            method: PMethod::Exact,
        };
    }
    // Tie groups' sizes.
    let mut sorted = all.clone();
    sorted.sort_by(f64::total_cmp);
    let mut tie_sizes = Vec::new();
    let mut k = 0;
    while k < n {
        let mut end = k + 1;
        while end < n && sorted[end] == sorted[k] {
            end += 1;
        }
        tie_sizes.push((end - k) as f64);
        k = end;
    }
    let g: Vec<f64> = sizes.iter().map(|&m| m as f64).collect();
    let sum = |v: &[f64], f: &dyn Fn(f64) -> f64| v.iter().map(|&x| f(x)).sum::<f64>();
    let mean = (nf * nf - sum(&g, &|x| x * x)) / 4.0;
    let var = (nf * (nf - 1.0) * (2.0 * nf + 5.0)
        - sum(&g, &|x| x * (x - 1.0) * (2.0 * x + 5.0))
        - sum(&tie_sizes, &|t| t * (t - 1.0) * (2.0 * t + 5.0)))
        / 72.0
        + sum(&g, &|x| x * (x - 1.0) * (x - 2.0)) * sum(&tie_sizes, &|t| t * (t - 1.0) * (t - 2.0))
            / (36.0 * nf * (nf - 1.0) * (nf - 2.0))
        + sum(&g, &|x| x * (x - 1.0)) * sum(&tie_sizes, &|t| t * (t - 1.0))
            / (8.0 * nf * (nf - 1.0));
    // NaN or no variance: nothing to test.
    if var.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
        return TestOutcome::Degenerate {
            reason: "the values leave no variation between groups".into(),
        };
    }
    let z = (j_stat - mean) / var.sqrt();
    TestOutcome::Computed {
        statistic: j_stat,
        p: (2.0 * normal_sf(z.abs())).min(1.0),
        method: PMethod::Normal,
    }
}

/// A shift between conditions with its interval.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Shift {
    /// The Hodges-Lehmann estimate.
    pub estimate: f64,
    /// Distribution-free interval with at least the asked coverage, `None` when the
    /// samples are too small for any (e.g. fewer than 6 paired differences at 95%).
    pub interval: Option<[f64; 2]>,
    /// Coverage the interval actually has (the exact distribution is discrete).
    pub coverage: Option<f64>,
    pub method: PMethod,
}

/// Largest number of pairwise values (differences or Walsh averages) formed for a shift.
pub const MAX_PAIRWISE: usize = 20_000_000;

/// The k-th smallest (from 1) of `v`, reordering it.
fn kth(v: &mut [f64], k: usize) -> f64 {
    let (_, x, _) = v.select_nth_unstable_by(k - 1, f64::total_cmp);
    *x
}

/// How many pairwise values to cut from each end for a `confidence` interval: the largest
/// k with P(T < k) <= (1 - confidence) / 2 under the null distribution `counts` of a
/// statistic on 0..=max (Hollander & Wolfe 1999, ch. 3-4), and the coverage that leaves.
fn cut_from_counts(counts: &[f64], confidence: f64) -> Option<(usize, f64)> {
    let total: f64 = counts.iter().sum();
    let alpha_half = (1.0 - confidence) / 2.0;
    let mut below = 0.0;
    let mut k = 0;
    for (u, c) in counts.iter().enumerate() {
        if (below + c) / total > alpha_half {
            break;
        }
        below += c;
        k = u + 1;
    }
    (k >= 1).then(|| (k, 1.0 - 2.0 * below / total))
}

/// The cut of the normal approximation: floor(mean - z sd) of the null statistic, when at
/// least 1.
fn normal_cut(mean: f64, sd: f64, confidence: f64) -> Option<(usize, f64)> {
    let z = crate::stats::normal_quantile(0.5 + confidence / 2.0);
    let k = (mean - z * sd).floor();
    (k >= 1.0).then_some((k as usize, confidence))
}

/// The shift from its pairwise values (reordered), their median and the cut from each end;
/// the coverage is reported for exact cuts only.
fn shift_from(
    values: &mut [f64],
    estimate: f64,
    cut: Option<(usize, f64)>,
    method: PMethod,
) -> Shift {
    let m = values.len();
    Shift {
        estimate,
        interval: cut.map(|(k, _)| [kth(values, k), kth(values, m + 1 - k)]),
        coverage: cut.map(|c| c.1).filter(|_| method == PMethod::Exact),
        method,
    }
}

/// Two-sample Hodges-Lehmann shift of `x` against `y` (the median of all differences
/// x_i - y_j) with its distribution-free `confidence` interval (Moses): the k-th smallest
/// and k-th largest difference, k from the exact Mann-Whitney distribution where it is
/// tabulated, else from its normal approximation. `None` for an empty sample or more than
/// [`MAX_PAIRWISE`] differences.
pub fn shift_two_sample(x: &[f64], y: &[f64], confidence: f64) -> Option<Shift> {
    let (n1, n2) = (x.len(), y.len());
    let m = n1
        .checked_mul(n2)
        .filter(|m| *m > 0 && *m <= MAX_PAIRWISE)?;
    let mut d: Vec<f64> = x
        .iter()
        .flat_map(|a| y.iter().map(move |b| a - b))
        .collect();
    let estimate = crate::stats::median_in_place(&mut d)?;
    let work = (n1.max(n2) + 1).saturating_mul(m + 1);
    let (cut, method) = if n1.min(n2) <= MAX_EXACT_U && work <= MAX_EXACT_U_WORK {
        (
            cut_from_counts(&u_counts(n1, n2), confidence),
            PMethod::Exact,
        )
    } else {
        let (a, b) = (n1 as f64, n2 as f64);
        let sd = (a * b * (a + b + 1.0) / 12.0).sqrt();
        (normal_cut(a * b / 2.0, sd, confidence), PMethod::Normal)
    };
    Some(shift_from(&mut d, estimate, cut, method))
}

/// One-sample (paired) Hodges-Lehmann shift of the differences `d`: the median of the Walsh
/// averages (d_i + d_j) / 2, i <= j, with its distribution-free `confidence` interval from
/// the signed-rank distribution (exact up to [`MAX_EXACT_N`] differences, normal beyond).
pub fn shift_paired(d: &[f64], confidence: f64) -> Option<Shift> {
    let n = d.len();
    let m = n.checked_mul(n + 1)? / 2;
    if m == 0 || m > MAX_PAIRWISE {
        return None;
    }
    let mut walsh = Vec::with_capacity(m);
    for i in 0..n {
        for j in i..n {
            walsh.push((d[i] + d[j]) / 2.0);
        }
    }
    let estimate = crate::stats::median_in_place(&mut walsh)?;
    let (cut, method) = if n <= MAX_EXACT_N {
        (
            cut_from_counts(&signed_rank_counts(n), confidence),
            PMethod::Exact,
        )
    } else {
        let nf = n as f64;
        let sd = (nf * (nf + 1.0) * (2.0 * nf + 1.0) / 24.0).sqrt();
        (
            normal_cut(nf * (nf + 1.0) / 4.0, sd, confidence),
            PMethod::Normal,
        )
    };
    Some(shift_from(&mut walsh, estimate, cut, method))
}

/// How several p-values are adjusted together.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, serde::Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum Adjustment {
    /// Holm 1979: controls the family-wise error rate.
    #[default]
    Holm,
    /// Benjamini & Hochberg 1995: controls the false discovery rate.
    BenjaminiHochberg,
}

/// Adjusted p-values in the order given (as `statsmodels.stats.multitest.multipletests`
/// with `holm` or `fdr_bh`).
pub fn adjust(p: &[f64], how: Adjustment) -> Vec<f64> {
    let m = p.len();
    let mut order: Vec<usize> = (0..m).collect();
    order.sort_by(|&a, &b| p[a].total_cmp(&p[b]));
    let mut out = vec![0.0; m];
    match how {
        Adjustment::Holm => {
            let mut running: f64 = 0.0;
            for (k, &i) in order.iter().enumerate() {
                running = running.max(((m - k) as f64 * p[i]).min(1.0));
                out[i] = running;
            }
        }
        Adjustment::BenjaminiHochberg => {
            let mut running: f64 = 1.0;
            for (k, &i) in order.iter().enumerate().rev() {
                running = running.min((m as f64 * p[i] / (k + 1) as f64).min(1.0));
                out[i] = running;
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn signed_rank_counts_sum_to_two_to_the_n() {
        for n in [1, 5, 20] {
            let c = signed_rank_counts(n);
            assert_eq!(c.iter().sum::<f64>(), 2f64.powi(n as i32));
        }
    }

    #[test]
    fn u_counts_sum_to_the_binomial_coefficient() {
        // C(9, 4) = 126.
        assert_eq!(u_counts(4, 5).iter().sum::<f64>(), 126.0);
        assert_eq!(u_counts(5, 4).len(), 21);
    }
}
