//! Cumulative-Gaussian (probit) dose-response fits by binomial maximum likelihood.
//!
//! Each site (or neuron) has its own threshold to the stimulus, and the thresholds are
//! spread about normally, so the share responding at amplitude x is
//! P(x) = Phi((x - mu) / sigma) = Phi(b0 + b1 x), with mu = -b0 / b1 the 50% point and
//! sigma = 1 / b1 the spread of the thresholds (Finney 1971, *Probit Analysis*).
//!
//! - The fit is Fisher scoring (iteratively reweighted least squares), as a generalised
//!   linear model with the probit link (McCullagh & Nelder 1989, section 4.4). The standard
//!   errors come from the **expected** information at the estimate, as statsmodels' GLM
//!   gives them (the observed information of a discrete-choice fit differs slightly).
//! - The intervals of mu and sigma are profile-likelihood intervals: the values where twice
//!   the drop of the profiled log-likelihood reaches the chi-square(1) quantile (Venzon &
//!   Moolgavkar 1988). A side where the likelihood never drops that far is open (`None`).
//! - Goodness of fit: the deviance, and its chi-square p on (amplitudes - 2) degrees of
//!   freedom; Pearson's chi-square beside it.
//! - Separation (an all-or-none step between two amplitudes) has no finite estimate: it is
//!   reported as a bound between those amplitudes, never as a fit. So are curves with no
//!   responder, only responders, or one amplitude.
//!
//! Every loop is bounded (iterations and bisection steps are capped); nothing here panics on
//! any input. The transcendental functions are the `libm` crate's, so the native command
//! line and the page (WebAssembly) give the same bits.

use serde::Serialize;

/// Responses at one amplitude: `responders` of `trials`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct DosePoint {
    /// Stimulus amplitude, in the protocol's unit.
    pub amplitude: f64,
    pub trials: usize,
    pub responders: usize,
}

/// A fitted cumulative Gaussian.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ProbitFit {
    /// b0 and b1 of Phi(b0 + b1 x), with their standard errors (expected information).
    pub intercept: f64,
    pub slope: f64,
    pub intercept_se: f64,
    pub slope_se: f64,
    /// The 50% point mu = -b0 / b1 (the threshold), in the amplitude's unit; its delta-method
    /// standard error and its profile-likelihood interval (a side is `None` when open).
    pub threshold: f64,
    pub threshold_se: f64,
    pub threshold_ci: [Option<f64>; 2],
    /// The spread of the thresholds sigma = 1 / b1, in the amplitude's unit, with its
    /// profile-likelihood interval.
    pub width: f64,
    pub width_ci: [Option<f64>; 2],
    /// Deviance, Pearson's chi-square and their degrees of freedom (amplitudes - 2); the
    /// deviance's chi-square p (`None` with no degrees of freedom).
    pub deviance: f64,
    pub pearson_chi2: f64,
    pub degrees_of_freedom: usize,
    pub fit_p: Option<f64>,
    /// Fisher-scoring iterations taken.
    pub iterations: usize,
}

/// What a response curve allows to be said about its threshold.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum CurveFit {
    /// A cumulative Gaussian fitted.
    Fitted(ProbitFit),
    /// An all-or-none step: nothing responded at `below` or under it, everything at `above`
    /// or over it (`below == above` when the one amplitude between was mixed). The threshold
    /// lies between them; no width can be estimated.
    Separated { below: f64, above: f64 },
    /// No trial responded: the threshold is above the highest amplitude tried.
    NoneResponded { highest: f64 },
    /// Every trial responded: the threshold is below the lowest amplitude tried.
    AllResponded { lowest: f64 },
    /// Responses at one amplitude only: the share, with no curve.
    OneAmplitude { amplitude: f64, fraction: f64 },
    /// The share does not rise with amplitude: a fitted slope of 0 or less, or a rise no
    /// better than a constant share (likelihood-ratio test at 5%).
    NoRise { slope: f64 },
    /// No trials, or the fit did not converge.
    NotFitted { reason: String },
}

impl CurveFit {
    /// A short name of the outcome, as `curves.csv` writes it.
    pub fn kind(&self) -> &'static str {
        match self {
            CurveFit::Fitted(_) => "fitted",
            CurveFit::Separated { .. } => "all_or_none_step",
            CurveFit::NoneResponded { .. } => "none_responded",
            CurveFit::AllResponded { .. } => "all_responded",
            CurveFit::OneAmplitude { .. } => "one_amplitude",
            CurveFit::NoRise { .. } => "no_rise",
            CurveFit::NotFitted { .. } => "not_fitted",
        }
    }

    /// Where the threshold lies when no curve could be fitted: (above, below) bounds.
    pub fn threshold_bounds(&self) -> (Option<f64>, Option<f64>) {
        match *self {
            CurveFit::Separated { below, above } => (Some(below), Some(above)),
            CurveFit::NoneResponded { highest } => (Some(highest), None),
            CurveFit::AllResponded { lowest } => (None, Some(lowest)),
            _ => (None, None),
        }
    }
}

/// The chi-square(1) 95% quantile (scipy.stats.chi2.ppf(0.95, 1)).
const CHI_SQUARE_1_95: f64 = 3.841_458_820_694_124;

/// Most Fisher-scoring iterations; the beetle data converge in 6.
const MAX_ITERATIONS: usize = 100;
/// Steps of interval bisection and of bracketing.
const MAX_BISECTIONS: usize = 200;
const MAX_BRACKET_STEPS: usize = 60;

/// Fits a cumulative Gaussian to the points (amplitudes in any order; points with no trials
/// are left out) at `confidence` for the profile intervals.
pub fn fit_probit(points: &[DosePoint], confidence: f64) -> CurveFit {
    fit_probit_above(points, confidence, 0.0)
}

/// [`fit_probit`] with a known chance of responding without the stimulus, `floor` in
/// [0, 1): P(x) = floor + (1 - floor) Phi(b0 + b1 x) (Abbott's formula, Abbott 1925,
/// J. Econ. Entomol. 18:265; Finney 1971 chapter 7). With spontaneous firing the plain fit
/// would read the floor as a wider spread of thresholds.
pub fn fit_probit_above(points: &[DosePoint], confidence: f64, floor: f64) -> CurveFit {
    let floor = if floor.is_finite() {
        floor.clamp(0.0, 0.99)
    } else {
        0.0
    };
    let points: Vec<DosePoint> = points
        .iter()
        .copied()
        .filter(|p| p.trials > 0 && p.responders <= p.trials && p.amplitude.is_finite())
        .collect();
    if points.is_empty() {
        return CurveFit::NotFitted {
            reason: "no trials".into(),
        };
    }
    let responders: usize = points.iter().map(|p| p.responders).sum();
    let trials: usize = points.iter().map(|p| p.trials).sum();
    let lowest = points
        .iter()
        .map(|p| p.amplitude)
        .fold(f64::INFINITY, f64::min);
    let highest = points
        .iter()
        .map(|p| p.amplitude)
        .fold(f64::NEG_INFINITY, f64::max);
    if responders == 0 {
        return CurveFit::NoneResponded { highest };
    }
    if responders == trials {
        return CurveFit::AllResponded { lowest };
    }
    if lowest == highest {
        return CurveFit::OneAmplitude {
            amplitude: lowest,
            fraction: responders as f64 / trials as f64,
        };
    }
    // Separation: every amplitude with a non-responder lies at or below every amplitude
    // with a responder.
    let top_silent = points
        .iter()
        .filter(|p| p.responders < p.trials)
        .map(|p| p.amplitude)
        .fold(f64::NEG_INFINITY, f64::max);
    let bottom_firing = points
        .iter()
        .filter(|p| p.responders > 0)
        .map(|p| p.amplitude)
        .fold(f64::INFINITY, f64::min);
    if top_silent <= bottom_firing {
        return CurveFit::Separated {
            below: top_silent,
            above: bottom_firing,
        };
    }
    let data = Data::new(&points, floor);
    let fitted = data.maximise();
    // A slope that runs away (the curve rising within a thousandth of the amplitudes
    // tried) is a step above the chance floor: reported as the bound where it happens.
    let Some((b, iterations)) = fitted.filter(|(b, _)| b[1] * (highest - lowest) < 1e3) else {
        return match best_step(&points, floor) {
            Some(Step::At(below, above)) => CurveFit::Separated { below, above },
            Some(Step::NotAboveChance) => CurveFit::NoneResponded { highest },
            // No split raises the share above the chance floor.
            None => CurveFit::NoRise { slope: 0.0 },
        };
    };
    // A rise no better than a constant share (likelihood-ratio test at 5%, 1 df) is not a
    // threshold curve: a flat curve's fit would put its 50% point anywhere, often far
    // outside the amplitudes tried.
    let trials_f = trials as f64;
    let share = responders as f64 / trials_f;
    let constant: f64 = points
        .iter()
        .map(|p| {
            let (k, n) = (p.responders as f64, p.trials as f64);
            k * libm::log(share) + (n - k) * libm::log(1.0 - share)
        })
        .sum();
    if b[1] <= 0.0 || 2.0 * (data.log_likelihood(b) - constant) < CHI_SQUARE_1_95 {
        return CurveFit::NoRise { slope: b[1] };
    }
    let info = data.information(b);
    let det = info[0] * info[2] - info[1] * info[1];
    if det <= 0.0 || !det.is_finite() {
        return CurveFit::NotFitted {
            reason: "the information matrix is singular".into(),
        };
    }
    // Covariance = inverse of [[i00, i01], [i01, i11]].
    let (v00, v01, v11) = (info[2] / det, -info[1] / det, info[0] / det);
    let threshold = -b[0] / b[1];
    // Delta method: d mu / d b0 = -1 / b1, d mu / d b1 = b0 / b1^2.
    let (g0, g1) = (-1.0 / b[1], b[0] / (b[1] * b[1]));
    let threshold_se = (g0 * g0 * v00 + 2.0 * g0 * g1 * v01 + g1 * g1 * v11)
        .max(0.0)
        .sqrt();
    let width = 1.0 / b[1];
    let top = data.log_likelihood(b);
    // Half the chi-square(1) quantile: z^2 / 2 with z the normal quantile of (1 + c) / 2.
    let z = normal_quantile(0.5 + 0.5 * confidence);
    let cut = z * z / 2.0;
    let threshold_ci = profile_interval(
        threshold,
        threshold_se.max(1e-12 * threshold.abs().max(1.0)),
        |mu| top - data.best_given_threshold(mu, b[1]),
        cut,
        None,
    );
    let width_se = (v11.sqrt() / (b[1] * b[1])).max(1e-12 * width);
    let width_ci = profile_interval(
        width,
        width_se,
        |sigma| top - data.best_given_width(sigma, b[0]),
        cut,
        Some(0.0),
    );
    let (deviance, pearson_chi2) = data.goodness(b);
    let degrees_of_freedom = points.len().saturating_sub(2);
    let fit_p = (degrees_of_freedom > 0).then(|| chi_square_sf(deviance, degrees_of_freedom));
    CurveFit::Fitted(ProbitFit {
        intercept: b[0],
        slope: b[1],
        intercept_se: v00.sqrt(),
        slope_se: v11.sqrt(),
        threshold,
        threshold_se,
        threshold_ci,
        width,
        width_ci,
        deviance,
        pearson_chi2,
        degrees_of_freedom,
        fit_p,
        iterations,
    })
}

/// The standard normal cdf.
pub fn normal_cdf(x: f64) -> f64 {
    0.5 * libm::erfc(-x / std::f64::consts::SQRT_2)
}

/// The standard normal density.
pub fn normal_pdf(x: f64) -> f64 {
    libm::exp(-0.5 * x * x) / (2.0 * std::f64::consts::PI).sqrt()
}

/// The standard normal quantile, by bisection on [`normal_cdf`] (to the last bit, 200 steps
/// at most); `p` is kept inside (1e-300, 1 - 1e-16).
pub fn normal_quantile(p: f64) -> f64 {
    let p = if p.is_finite() {
        p.clamp(1e-300, 1.0 - 1e-16)
    } else {
        0.5
    };
    let (mut lo, mut hi) = (-40.0_f64, 9.0_f64);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if mid <= lo || mid >= hi {
            break;
        }
        if normal_cdf(mid) < p {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// P(X > x) for X chi-square with `k` degrees of freedom, from the closed forms for whole
/// k (Abramowitz & Stegun 26.4.4 and 26.4.5): e^(-x/2) times a finite sum, plus for odd
/// k the normal tail 2 (1 - Phi(sqrt x)).
pub fn chi_square_sf(x: f64, k: usize) -> f64 {
    if x.is_nan() || x <= 0.0 {
        return 1.0;
    }
    let half = x / 2.0;
    let mut total;
    let mut term;
    if k % 2 == 0 {
        // sum over i < k/2 of (x/2)^i / i!
        term = 1.0;
        total = 1.0;
        for i in 1..k / 2 {
            term *= half / i as f64;
            total += term;
        }
        total *= libm::exp(-half);
    } else {
        // 2 Q(sqrt x) + sqrt(2 x / pi) e^(-x/2) sum over r < (k-1)/2 of x^r / (1 3 ... (2r+1))
        let tail = libm::erfc((half).sqrt());
        term = 1.0;
        let mut sum = if k > 1 { 1.0 } else { 0.0 };
        for r in 1..(k - 1) / 2 {
            term *= x / (2 * r + 1) as f64;
            sum += term;
        }
        total = tail + (2.0 * x / std::f64::consts::PI).sqrt() * libm::exp(-half) * sum;
    }
    total.clamp(0.0, 1.0)
}

/// The standard normal's log cdf, accurate far into both tails.
fn log_phi(x: f64) -> f64 {
    if x > -30.0 {
        libm::log(0.5 * libm::erfc(-x / std::f64::consts::SQRT_2))
    } else {
        // Mills' ratio: Phi(x) ~ phi(x) / |x| (1 - 1/x^2 + 3/x^4).
        let x2 = x * x;
        -0.5 * x2 - libm::log(-x) - 0.5 * libm::log(2.0 * std::f64::consts::PI)
            + libm::log(1.0 - 1.0 / x2 + 3.0 / (x2 * x2))
    }
}

/// The points as parallel arrays.
struct Data {
    x: Vec<f64>,
    n: Vec<f64>,
    k: Vec<f64>,
    /// The chance of a response without the stimulus (Abbott's floor).
    floor: f64,
}

impl Data {
    fn new(points: &[DosePoint], floor: f64) -> Data {
        Data {
            floor,
            x: points.iter().map(|p| p.amplitude).collect(),
            n: points.iter().map(|p| p.trials as f64).collect(),
            k: points.iter().map(|p| p.responders as f64).collect(),
        }
    }

    /// sum k ln P + (n - k) ln (1 - P), without the binomial coefficients.
    fn log_likelihood(&self, b: [f64; 2]) -> f64 {
        let c = self.floor;
        let mut l = 0.0;
        for i in 0..self.x.len() {
            let eta = b[0] + b[1] * self.x[i];
            // ln P = ln(c + (1 - c) Phi); ln(1 - P) = ln(1 - c) + ln Phi(-eta).
            let ln_p = if c > 0.0 {
                libm::log(c + (1.0 - c) * libm::exp(log_phi(eta)))
            } else {
                log_phi(eta)
            };
            let ln_q = libm::log(1.0 - c) + log_phi(-eta);
            l += self.k[i] * ln_p + (self.n[i] - self.k[i]) * ln_q;
        }
        l
    }

    /// Per point at `eta`: the probability P = c + (1 - c) Phi, its derivative
    /// (1 - c) phi and the Fisher weight n (dP/deta)^2 / (P (1 - P)), with P kept off 0
    /// and 1.
    fn terms(&self, eta: f64, n: f64) -> (f64, f64, f64) {
        let c = self.floor;
        let p = (c + (1.0 - c) * normal_cdf(eta)).clamp(1e-300, 1.0 - 1e-16);
        let d = (1.0 - c) * normal_pdf(eta);
        (p, d, n * d * d / (p * (1.0 - p)))
    }

    /// Expected information [i00, i01, i11] at `b`.
    fn information(&self, b: [f64; 2]) -> [f64; 3] {
        let mut info = [0.0; 3];
        for i in 0..self.x.len() {
            let (_, _, w) = self.terms(b[0] + b[1] * self.x[i], self.n[i]);
            info[0] += w;
            info[1] += w * self.x[i];
            info[2] += w * self.x[i] * self.x[i];
        }
        info
    }

    /// Score vector at `b`.
    fn score(&self, b: [f64; 2]) -> [f64; 2] {
        let mut u = [0.0; 2];
        for i in 0..self.x.len() {
            let (p, d, _) = self.terms(b[0] + b[1] * self.x[i], self.n[i]);
            let s = (self.k[i] - self.n[i] * p) * d / (p * (1.0 - p));
            u[0] += s;
            u[1] += s * self.x[i];
        }
        u
    }

    /// Fisher scoring from the usual start (probits of the smoothed shares, weighted least
    /// squares), with step halving whenever the likelihood would fall.
    fn maximise(&self) -> Option<([f64; 2], usize)> {
        let m = self.x.len();
        let eta0: Vec<f64> = (0..m)
            .map(|i| normal_quantile((self.k[i] + 0.5) / (self.n[i] + 1.0)))
            .collect();
        let w: Vec<f64> = self.n.clone();
        let mut b = weighted_line(&self.x, &eta0, &w)?;
        let mut l = self.log_likelihood(b);
        for iteration in 1..=MAX_ITERATIONS {
            let info = self.information(b);
            let u = self.score(b);
            let det = info[0] * info[2] - info[1] * info[1];
            if det <= 0.0 || !det.is_finite() {
                return None;
            }
            let step = [
                (info[2] * u[0] - info[1] * u[1]) / det,
                (info[0] * u[1] - info[1] * u[0]) / det,
            ];
            let mut scale = 1.0;
            let mut next = b;
            let mut next_l = f64::NEG_INFINITY;
            for _ in 0..40 {
                next = [b[0] + scale * step[0], b[1] + scale * step[1]];
                next_l = self.log_likelihood(next);
                if next_l >= l - 1e-12 {
                    break;
                }
                scale *= 0.5;
            }
            let change = (next_l - l).abs();
            b = next;
            l = next_l;
            if change < 1e-12 * (1.0 + l.abs()) && step[0].abs().max(step[1].abs()) * scale < 1e-9 {
                return Some((b, iteration));
            }
        }
        None
    }

    /// max over b1 > 0 of the log-likelihood with the 50% point held at `mu` (b0 = -mu b1),
    /// by one-parameter Fisher scoring from `start`.
    fn best_given_threshold(&self, mu: f64, start: f64) -> f64 {
        let mut b1 = start;
        let at = |b1: f64| self.log_likelihood([-mu * b1, b1]);
        let mut l = at(b1);
        for _ in 0..MAX_ITERATIONS {
            let (mut u, mut info) = (0.0, 0.0);
            for i in 0..self.x.len() {
                let z = self.x[i] - mu;
                let (p, d, w) = self.terms(b1 * z, self.n[i]);
                u += (self.k[i] - self.n[i] * p) * d / (p * (1.0 - p)) * z;
                info += w * z * z;
            }
            if info <= 0.0 || !info.is_finite() {
                break;
            }
            let step = u / info;
            let mut scale = 1.0;
            let mut moved = false;
            for _ in 0..40 {
                let next = b1 + scale * step;
                if next > 0.0 {
                    let nl = at(next);
                    if nl >= l - 1e-12 {
                        moved = (next - b1).abs() > 1e-12 * b1.abs().max(1e-300);
                        b1 = next;
                        l = nl;
                        break;
                    }
                }
                scale *= 0.5;
            }
            if !moved {
                break;
            }
        }
        l
    }

    /// max over b0 of the log-likelihood with the width held at `sigma` (b1 = 1 / sigma).
    fn best_given_width(&self, sigma: f64, start: f64) -> f64 {
        let b1 = 1.0 / sigma;
        // Start b0 where the 50% point is that of the full fit's intercept at this slope.
        let mut b0 = start;
        let at = |b0: f64| self.log_likelihood([b0, b1]);
        let mut l = at(b0);
        for _ in 0..MAX_ITERATIONS {
            let (mut u, mut info) = (0.0, 0.0);
            for i in 0..self.x.len() {
                let (p, d, w) = self.terms(b0 + b1 * self.x[i], self.n[i]);
                u += (self.k[i] - self.n[i] * p) * d / (p * (1.0 - p));
                info += w;
            }
            if info <= 0.0 || !info.is_finite() {
                break;
            }
            let step = u / info;
            let mut scale = 1.0;
            let mut moved = false;
            for _ in 0..60 {
                let next = b0 + scale * step;
                let nl = at(next);
                if nl >= l - 1e-12 {
                    moved = (next - b0).abs() > 1e-12 * b0.abs().max(1.0);
                    b0 = next;
                    l = nl;
                    break;
                }
                scale *= 0.5;
            }
            if !moved {
                break;
            }
        }
        l
    }

    /// Deviance and Pearson's chi-square at `b`.
    fn goodness(&self, b: [f64; 2]) -> (f64, f64) {
        let (mut deviance, mut pearson) = (0.0, 0.0);
        for i in 0..self.x.len() {
            let (n, k) = (self.n[i], self.k[i]);
            let (p, _, _) = self.terms(b[0] + b[1] * self.x[i], n);
            let term = |obs: f64, exp: f64| {
                if obs > 0.0 {
                    obs * libm::log(obs / exp)
                } else {
                    0.0
                }
            };
            deviance += 2.0 * (term(k, n * p) + term(n - k, n * (1.0 - p)));
            pearson += (k - n * p) * (k - n * p) / (n * p * (1.0 - p));
        }
        (deviance, pearson)
    }
}

/// What the most likely step says.
enum Step {
    /// Between these two adjacent amplitudes.
    At(f64, f64),
    /// No step rises above the chance floor by a likelihood-ratio test at 5%.
    NotAboveChance,
}

/// The most likely all-or-none step over the chance floor: the split between two adjacent
/// amplitudes with P = floor below it and the pooled share above it, kept when it beats
/// the floor alone by a likelihood-ratio test (chi-square 1 df at 5%; with a floor of 0
/// any responder beats it). `None` when no split raises the share.
fn best_step(points: &[DosePoint], floor: f64) -> Option<Step> {
    let mut sorted = points.to_vec();
    sorted.sort_by(|a, b| a.amplitude.total_cmp(&b.amplitude));
    let ln = |k: f64, n: f64, p: f64| {
        let p = p.clamp(1e-300, 1.0 - 1e-16);
        k * libm::log(p) + (n - k) * libm::log(1.0 - p)
    };
    let mut best: Option<(f64, (f64, f64))> = None;
    for j in 0..sorted.len().saturating_sub(1) {
        if sorted[j].amplitude == sorted[j + 1].amplitude {
            continue;
        }
        let (below, above) = sorted.split_at(j + 1);
        let n_above: f64 = above.iter().map(|p| p.trials as f64).sum();
        let k_above: f64 = above.iter().map(|p| p.responders as f64).sum();
        let share = k_above / n_above;
        if share <= floor {
            continue;
        }
        let l: f64 = below
            .iter()
            .map(|p| ln(p.responders as f64, p.trials as f64, floor.max(1e-12)))
            .sum::<f64>()
            + above
                .iter()
                .map(|p| ln(p.responders as f64, p.trials as f64, share))
                .sum::<f64>();
        if best.is_none_or(|(b, _)| l > b) {
            best = Some((l, (sorted[j].amplitude, sorted[j + 1].amplitude)));
        }
    }
    let (l_step, (below, above)) = best?;
    let l_floor: f64 = sorted
        .iter()
        .map(|p| ln(p.responders as f64, p.trials as f64, floor.max(1e-12)))
        .sum();
    Some(if 2.0 * (l_step - l_floor) >= CHI_SQUARE_1_95 {
        Step::At(below, above)
    } else {
        Step::NotAboveChance
    })
}

/// Weighted least-squares line y = b0 + b1 x.
fn weighted_line(x: &[f64], y: &[f64], w: &[f64]) -> Option<[f64; 2]> {
    let sw: f64 = w.iter().sum();
    let mx = x.iter().zip(w).map(|(a, b)| a * b).sum::<f64>() / sw;
    let my = y.iter().zip(w).map(|(a, b)| a * b).sum::<f64>() / sw;
    let sxx: f64 = x.iter().zip(w).map(|(a, b)| b * (a - mx) * (a - mx)).sum();
    let sxy: f64 = (0..x.len()).map(|i| w[i] * (x[i] - mx) * (y[i] - my)).sum();
    (sxx > 0.0).then(|| {
        let b1 = sxy / sxx;
        [my - b1 * mx, b1]
    })
}

/// The interval around `estimate` where `drop(v)` (the profiled log-likelihood's fall from
/// its maximum) stays under `cut`: each side bracketed by doubling steps from `scale`, then
/// bisected. `floor` keeps the lower side above a bound (0 for a width). A side that never
/// reaches `cut` is `None`.
fn profile_interval(
    estimate: f64,
    scale: f64,
    drop: impl Fn(f64) -> f64,
    cut: f64,
    floor: Option<f64>,
) -> [Option<f64>; 2] {
    let side = |direction: f64| -> Option<f64> {
        let mut inside = estimate;
        let mut step = scale;
        let mut outside = None;
        for _ in 0..MAX_BRACKET_STEPS {
            let mut v = estimate + direction * step;
            if let Some(f) = floor {
                if v <= f {
                    // Halve the distance to the floor instead of crossing it.
                    v = f + (inside - f) * 0.5;
                    if (inside - f) < 1e-12 * estimate.abs() {
                        return None;
                    }
                }
            }
            if drop(v) >= cut {
                outside = Some(v);
                break;
            }
            inside = v;
            step *= 2.0;
        }
        let mut outside = outside?;
        for _ in 0..MAX_BISECTIONS {
            let mid = 0.5 * (inside + outside);
            if drop(mid) >= cut {
                outside = mid;
            } else {
                inside = mid;
            }
            if (outside - inside).abs() <= 1e-13 * estimate.abs().max(1e-300) {
                break;
            }
        }
        Some(0.5 * (inside + outside))
    };
    [side(-1.0), side(1.0)]
}
