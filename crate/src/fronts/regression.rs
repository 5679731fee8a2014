//! Straight-line and linear-model fits used by the front models: ordinary least squares,
//! Theil-Sen with Sen's interval, and Huber M-estimation by iteratively reweighted least
//! squares. Each has a fast bootstrap form that takes resampling counts instead of copies.

use crate::stats::{median, normal_quantile, t_quantile, MAD_TO_SD};
use nalgebra::{DMatrix, DVector};
use serde::Serialize;

/// Ordinary least squares y = intercept + slope x, as `scipy.stats.linregress`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct OlsFit {
    pub slope: f64,
    pub intercept: f64,
    /// Pearson correlation of x and y.
    pub r: f64,
    /// Standard errors of slope and intercept.
    pub slope_stderr: f64,
    pub intercept_stderr: f64,
    /// Residual standard deviation (n - 2 degrees of freedom).
    pub residual_sd: f64,
    /// Two-sided interval of the slope at the requested confidence (Student t, n - 2).
    pub slope_ci: [f64; 2],
}

/// OLS of `y` on `x` with an interval at `confidence` (Draper & Smith, Applied Regression
/// Analysis, ch. 1). Two-pass centred sums for accuracy. `None` below three points or when
/// all x are equal.
pub fn ols(x: &[f64], y: &[f64], confidence: f64) -> Option<OlsFit> {
    let n = x.len();
    if n < 3 || y.len() != n {
        return None;
    }
    let nf = n as f64;
    let mx = x.iter().sum::<f64>() / nf;
    let my = y.iter().sum::<f64>() / nf;
    let (mut sxx, mut syy, mut sxy) = (0.0, 0.0, 0.0);
    for (a, b) in x.iter().zip(y) {
        let (dx, dy) = (a - mx, b - my);
        sxx += dx * dx;
        syy += dy * dy;
        sxy += dx * dy;
    }
    if sxx <= 0.0 {
        return None;
    }
    let slope = sxy / sxx;
    let intercept = my - slope * mx;
    let rss = (syy - slope * sxy).max(0.0);
    let df = nf - 2.0;
    let residual_sd = (rss / df).sqrt();
    let slope_stderr = residual_sd / sxx.sqrt();
    let sum_x2: f64 = x.iter().map(|v| v * v).sum();
    let intercept_stderr = slope_stderr * (sum_x2 / nf).sqrt();
    let r = if syy > 0.0 {
        sxy / (sxx * syy).sqrt()
    } else {
        0.0
    };
    let t = t_quantile(0.5 + confidence / 2.0, df);
    Some(OlsFit {
        slope,
        intercept,
        r,
        slope_stderr,
        intercept_stderr,
        residual_sd,
        slope_ci: [slope - t * slope_stderr, slope + t * slope_stderr],
    })
}

/// Theil-Sen fit, as `scipy.stats.theilslopes` with its default `method='separate'`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct TheilSenFit {
    /// Median of the pairwise slopes.
    pub slope: f64,
    /// median(y) - slope * median(x).
    pub intercept: f64,
    /// Sen's distribution-free interval of the slope; `None` when it cannot be formed.
    pub slope_ci: Option<[f64; 2]>,
}

/// Theil-Sen estimator (Theil 1950; Sen 1968, J. Am. Stat. Assoc. 63:1379) with Sen's
/// interval (his eq. 2.6, with the tie corrections for repeated x and y). Pairs with equal x
/// are left out. O(n^2) (order statistics by selection). `None` when no pair has distinct x.
pub fn theil_sen(x: &[f64], y: &[f64], confidence: f64) -> Option<TheilSenFit> {
    let n = x.len();
    if n < 2 || y.len() != n {
        return None;
    }
    let mut slopes = Vec::with_capacity(n * (n - 1) / 2);
    for i in 0..n {
        for j in 0..i {
            let dx = x[i] - x[j];
            if dx != 0.0 {
                slopes.push((y[i] - y[j]) / dx);
            }
        }
    }
    if slopes.is_empty() {
        return None;
    }
    // The order statistics needed (the median's one or two, and the interval's two) by
    // selection, each in linear time, rather than sorting all n (n - 1) / 2 slopes; the
    // values are those of the sorted list.
    let count = slopes.len();
    let mut kth = |k: usize| -> f64 { *slopes.select_nth_unstable_by(k, f64::total_cmp).1 };
    let h = (count - 1) as f64 * 0.5;
    let lo = h.floor() as usize;
    let a = kth(lo);
    let b = kth((lo + 1).min(count - 1));
    let slope = a + (h - lo as f64) * (b - a);
    let intercept = median(y)? - slope * median(x)?;
    let tie_term = |v: &[f64]| -> f64 {
        let mut s = v.to_vec();
        s.sort_by(f64::total_cmp);
        let mut total = 0.0;
        let mut i = 0;
        while i < s.len() {
            let mut j = i + 1;
            while j < s.len() && s[j] == s[i] {
                j += 1;
            }
            let k = (j - i) as f64;
            if k > 1.0 {
                total += k * (k - 1.0) * (2.0 * k + 5.0);
            }
            i = j;
        }
        total
    };
    let nf = n as f64;
    let sigma_sq = (nf * (nf - 1.0) * (2.0 * nf + 5.0) - tie_term(x) - tie_term(y)) / 18.0;
    let nt = count as f64;
    let z = normal_quantile((1.0 - confidence) / 2.0); // negative
    let slope_ci = (sigma_sq >= 0.0).then(|| {
        let sigma = sigma_sq.sqrt();
        let upper = (round_half_even((nt - z * sigma) / 2.0) as i64).min(count as i64 - 1);
        let lower = (round_half_even((nt + z * sigma) / 2.0) as i64 - 1).max(0);
        (lower >= 0 && upper >= 0 && (lower as usize) < count)
            .then(|| [kth(lower as usize), kth(upper as usize)])
    });
    Some(TheilSenFit {
        slope,
        intercept,
        slope_ci: slope_ci.flatten(),
    })
}

/// numpy's `round`: halves go to the even neighbour.
fn round_half_even(v: f64) -> f64 {
    let r = v.round();
    if (v - v.trunc()).abs() == 0.5 && r % 2.0 != 0.0 {
        r - v.signum()
    } else {
        r
    }
}

/// Pairwise slopes sorted once, so that the Theil-Sen slope of any bootstrap resample is a
/// weighted median over them (weight c_i c_j for sites drawn c_i and c_j times) in one
/// partial pass, without re-sorting. Pairs of one site with itself have equal x and drop
/// out, as in [`theil_sen`]; so do pairs of distinct sites at equal x.
pub struct TheilSenResampler {
    slopes: Vec<f64>,
    first: Vec<u32>,
    second: Vec<u32>,
    /// Pairs of distinct points with equal x (left out of the slopes).
    tied_pairs: Vec<(u32, u32)>,
}

impl TheilSenResampler {
    pub fn new(x: &[f64], y: &[f64]) -> Self {
        let n = x.len();
        let mut pairs: Vec<(f64, u32, u32)> = Vec::with_capacity(n * n.saturating_sub(1) / 2);
        let mut tied_pairs = Vec::new();
        for i in 0..n {
            for j in 0..i {
                let dx = x[i] - x[j];
                if dx != 0.0 {
                    pairs.push(((y[i] - y[j]) / dx, i as u32, j as u32));
                } else {
                    tied_pairs.push((i as u32, j as u32));
                }
            }
        }
        pairs.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
        TheilSenResampler {
            slopes: pairs.iter().map(|p| p.0).collect(),
            first: pairs.iter().map(|p| p.1).collect(),
            second: pairs.iter().map(|p| p.2).collect(),
            tied_pairs,
        }
    }

    /// Theil-Sen slope of the resample in which point i appears `counts[i]` times; `None`
    /// when no pair has distinct x.
    pub fn slope(&self, counts: &[u32]) -> Option<f64> {
        // Total weight of pairs with distinct x: all pairs of drawn points, less same-site
        // pairs, less pairs of distinct sites at equal x.
        let (sum, sum_sq) = counts.iter().fold((0u64, 0u64), |(s, q), &c| {
            let c = u64::from(c);
            (s + c, q + c * c)
        });
        let tied: u64 = self
            .tied_pairs
            .iter()
            .map(|&(i, j)| u64::from(counts[i as usize]) * u64::from(counts[j as usize]))
            .sum();
        let total = (sum * sum - sum_sq) / 2 - tied;
        if total == 0 {
            return None;
        }
        // 0-based ranks of the middle value(s), as numpy's median.
        let (lo_rank, hi_rank) = if total % 2 == 1 {
            (total / 2, total / 2)
        } else {
            (total / 2 - 1, total / 2)
        };
        // Walk the sorted slopes accumulating weights; the loops carry no data-dependent
        // branch but their exit (a zero weight, common in a resample, just adds nothing).
        let weight = |k: usize| {
            u64::from(counts[self.first[k] as usize]) * u64::from(counts[self.second[k] as usize])
        };
        let len = self.slopes.len();
        let mut seen = 0u64;
        let mut k = 0;
        while k < len {
            seen += weight(k);
            if seen > lo_rank {
                break;
            }
            k += 1;
        }
        let lo = *self.slopes.get(k)?;
        if seen > hi_rank {
            return Some(lo);
        }
        k += 1;
        while k < len {
            seen += weight(k);
            if seen > hi_rank {
                return Some(0.5 * (lo + self.slopes[k]));
            }
            k += 1;
        }
        None
    }
}

/// Theil-Sen slope and intercept only (no interval), by selection instead of sorting: the
/// fast form used while searching for a front's origin. Same values as [`theil_sen`].
pub fn theil_sen_point(x: &[f64], y: &[f64], scratch: &mut Vec<f64>) -> Option<(f64, f64)> {
    let n = x.len();
    scratch.clear();
    for i in 0..n {
        for j in 0..i {
            let dx = x[i] - x[j];
            if dx != 0.0 {
                scratch.push((y[i] - y[j]) / dx);
            }
        }
    }
    let slope = select_median(scratch)?;
    scratch.clear();
    scratch.extend_from_slice(y);
    let my = select_median(scratch)?;
    scratch.clear();
    scratch.extend_from_slice(x);
    let mx = select_median(scratch)?;
    Some((slope, my - slope * mx))
}

/// Median by selection (numpy's value: the mean of the two middle values for an even count);
/// reorders `v`.
pub fn select_median(v: &mut [f64]) -> Option<f64> {
    let n = v.len();
    if n == 0 {
        return None;
    }
    let (_, &mut upper, _) = v.select_nth_unstable_by(n / 2, f64::total_cmp);
    if n % 2 == 1 {
        return Some(upper);
    }
    let lower = v[..n / 2].iter().copied().fold(f64::NEG_INFINITY, f64::max);
    Some(0.5 * (lower + upper))
}

/// Linear model y = X beta fitted by Huber's M-estimator.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HuberFit {
    /// Coefficients, in the order of the design matrix's columns.
    pub coefficients: Vec<f64>,
    /// Final robust scale of the residuals.
    pub scale: f64,
    pub iterations: usize,
    pub converged: bool,
}

/// Huber's tuning constant for 95% efficiency at the normal (Huber 1981, Robust Statistics).
pub const HUBER_T: f64 = 1.345;

/// Huber M-estimation by IRLS, following `statsmodels` `RLM(M=HuberT())` defaults: start
/// from (weighted) least squares, scale = median(|r|) / Phi^-1(0.75) re-estimated each
/// iteration, stop when the summed Huber loss changes by less than `1e-8` or after 50
/// iterations. `frequency` gives each row a whole-number weight (bootstrap counts); `None`
/// means 1 for all. `None` when the design is rank-deficient.
pub fn huber(design: &DMatrix<f64>, y: &[f64], frequency: Option<&[u32]>) -> Option<HuberFit> {
    let n = design.nrows();
    let freq: Vec<f64> = match frequency {
        Some(f) => f.iter().map(|&c| f64::from(c)).collect(),
        None => vec![1.0; n],
    };
    let mut beta = weighted_least_squares(design, y, &freq)?;
    let residuals = |beta: &DVector<f64>| -> Vec<f64> {
        (0..n)
            .map(|i| y[i] - design.row(i).dot(&beta.transpose()))
            .collect()
    };
    let mut r = residuals(&beta);
    let mut scale = weighted_abs_median(&r, &freq)? / MAD_TO_SD;
    let mut deviance = f64::INFINITY;
    let mut iterations = 0;
    let mut converged = false;
    while iterations < 50 {
        if scale.is_nan() || scale <= 0.0 {
            converged = true; // an exact fit: nothing left to reweight
            break;
        }
        let w: Vec<f64> = r
            .iter()
            .zip(&freq)
            .map(|(ri, f)| {
                let z = (ri / scale).abs();
                f * if z <= HUBER_T { 1.0 } else { HUBER_T / z }
            })
            .collect();
        beta = weighted_least_squares(design, y, &w)?;
        r = residuals(&beta);
        scale = weighted_abs_median(&r, &freq)? / MAD_TO_SD;
        iterations += 1;
        let new_deviance: f64 = r
            .iter()
            .zip(&freq)
            .map(|(ri, f)| f * huber_rho(ri / scale))
            .sum();
        if (new_deviance - deviance).abs() < 1e-8 {
            converged = true;
            break;
        }
        deviance = new_deviance;
    }
    Some(HuberFit {
        coefficients: beta.iter().copied().collect(),
        scale,
        iterations,
        converged,
    })
}

fn huber_rho(z: f64) -> f64 {
    let a = z.abs();
    if a <= HUBER_T {
        0.5 * z * z
    } else {
        HUBER_T * a - 0.5 * HUBER_T * HUBER_T
    }
}

/// Least squares with row weights; `None` when rank-deficient.
///
/// Solved from the normal equations (X' W X) b = X' W y by Cholesky when they are well
/// conditioned (estimated reciprocal condition above 1e-10, so that at most about 10 of
/// the 16 digits are lost), which costs one pass over the rows; otherwise by the SVD of the
/// weighted design (Golub & Van Loan 2013, sec. 5.3: the normal equations square the
/// condition number).
pub fn weighted_least_squares(
    design: &DMatrix<f64>,
    y: &[f64],
    weights: &[f64],
) -> Option<DVector<f64>> {
    let (n, p) = design.shape();
    if p <= 4 {
        let mut xtx = DMatrix::<f64>::zeros(p, p);
        let mut xty = DVector::<f64>::zeros(p);
        for i in 0..n {
            let w = weights[i];
            if w == 0.0 {
                continue;
            }
            for a in 0..p {
                let xa = design[(i, a)] * w;
                xty[a] += xa * y[i];
                for b in 0..=a {
                    xtx[(a, b)] += xa * design[(i, b)];
                }
            }
        }
        for a in 0..p {
            for b in 0..a {
                xtx[(b, a)] = xtx[(a, b)];
            }
        }
        // Equilibrate (unit diagonal) before judging the conditioning.
        let d: Vec<f64> = (0..p).map(|a| xtx[(a, a)].sqrt()).collect();
        if d.iter().all(|v| v.is_finite() && *v > 0.0) {
            let scaled = DMatrix::from_fn(p, p, |a, b| xtx[(a, b)] / (d[a] * d[b]));
            if let Some(ch) = scaled.clone().cholesky() {
                let l = ch.l();
                let diag_min = (0..p).map(|k| l[(k, k)]).fold(f64::INFINITY, f64::min);
                let diag_max = (0..p).map(|k| l[(k, k)]).fold(0.0, f64::max);
                // cond(scaled) is about (max / min diagonal of L)^2.
                if diag_min > 0.0 && (diag_min / diag_max).powi(2) > 1e-10 {
                    let rhs = DVector::from_fn(p, |a, _| xty[a] / d[a]);
                    let z = ch.solve(&rhs);
                    return Some(DVector::from_fn(p, |a, _| z[a] / d[a]));
                }
            }
        }
    }
    let mut a = DMatrix::zeros(n, p);
    let mut b = DVector::zeros(n);
    for i in 0..n {
        let s = weights[i].sqrt();
        for j in 0..p {
            a[(i, j)] = design[(i, j)] * s;
        }
        b[i] = y[i] * s;
    }
    let svd = a.svd(true, true);
    let largest = svd.singular_values.iter().copied().fold(0.0, f64::max);
    let rank = svd
        .singular_values
        .iter()
        .filter(|&&s| s > largest * 1e-12)
        .count();
    if rank < p {
        return None;
    }
    svd.solve(&b, largest * 1e-12).ok()
}

/// Median of |values| with whole-number frequencies (numpy median of the expanded sample).
fn weighted_abs_median(values: &[f64], freq: &[f64]) -> Option<f64> {
    let mut v: Vec<(f64, f64)> = values
        .iter()
        .zip(freq)
        .filter(|(_, &f)| f > 0.0)
        .map(|(x, &f)| (x.abs(), f))
        .collect();
    v.sort_by(|a, b| a.0.total_cmp(&b.0));
    let total: f64 = v.iter().map(|p| p.1).sum();
    if total <= 0.0 {
        return None;
    }
    let total = total.round() as u64;
    let (lo_rank, hi_rank) = if total % 2 == 1 {
        (total / 2, total / 2)
    } else {
        (total / 2 - 1, total / 2)
    };
    let mut seen = 0u64;
    let mut lo = None;
    for (x, f) in v {
        seen += f.round() as u64;
        if lo.is_none() && seen > lo_rank {
            lo = Some(x);
        }
        if seen > hi_rank {
            return lo.map(|l| 0.5 * (l + x));
        }
    }
    None
}

/// OLS slope of y on x with whole-number frequencies; `None` when x does not vary.
pub fn ols_slope_weighted(x: &[f64], y: &[f64], counts: &[u32]) -> Option<f64> {
    let (mut sw, mut sx, mut sy) = (0.0, 0.0, 0.0);
    for i in 0..x.len() {
        let w = f64::from(counts[i]);
        sw += w;
        sx += w * x[i];
        sy += w * y[i];
    }
    if sw == 0.0 {
        return None;
    }
    let (mx, my) = (sx / sw, sy / sw);
    let (mut sxx, mut sxy) = (0.0, 0.0);
    for i in 0..x.len() {
        let w = f64::from(counts[i]);
        sxx += w * (x[i] - mx) * (x[i] - mx);
        sxy += w * (x[i] - mx) * (y[i] - my);
    }
    (sxx > 0.0).then(|| sxy / sxx)
}
