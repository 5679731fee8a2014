//! Regression and interval kernels against scipy, statsmodels, numpy and NIST. The fixture is
//! made by `scripts/reference/make_fixtures.py`, which records the library versions.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::needless_range_loop)] // a failed unwrap is a failed test

use approx::assert_relative_eq;
use nalgebra::DMatrix;
use ringline::fronts::regression::{huber, ols, theil_sen, TheilSenResampler};
use ringline::stats::{median_interval, quantile, wilson_interval};
use serde::Deserialize;

#[derive(Deserialize)]
struct Fixture {
    theilslopes: Vec<Theil>,
    linregress: Vec<Linreg>,
    norris: Norris,
    huber: Vec<Huber>,
    wilson: Vec<Wilson>,
    median_ranks: Vec<MedianRank>,
    percentiles: Percentiles,
}

#[derive(Deserialize)]
struct Theil {
    name: String,
    x: Vec<f64>,
    y: Vec<f64>,
    slope: f64,
    intercept: f64,
    low: f64,
    high: f64,
}

#[derive(Deserialize)]
struct Linreg {
    name: String,
    x: Vec<f64>,
    y: Vec<f64>,
    slope: f64,
    intercept: f64,
    r: f64,
    stderr: f64,
    intercept_stderr: f64,
}

#[derive(Deserialize)]
struct Norris {
    x: Vec<f64>,
    y: Vec<f64>,
    certified: Certified,
}

#[derive(Deserialize)]
struct Certified {
    b0: f64,
    b0_sd: f64,
    b1: f64,
    b1_sd: f64,
    residual_sd: f64,
    r_squared: f64,
}

#[derive(Deserialize)]
struct Huber {
    name: String,
    design: Vec<Vec<f64>>,
    y: Vec<f64>,
    params: Vec<f64>,
    scale: f64,
}

#[derive(Deserialize)]
struct Wilson {
    successes: usize,
    trials: usize,
    low: f64,
    high: f64,
}

#[derive(Deserialize)]
struct MedianRank {
    n: usize,
    binom_ppf: usize,
}

#[derive(Deserialize)]
struct Percentiles {
    values: Vec<f64>,
    q: Vec<f64>,
    numpy: Vec<f64>,
}

fn fixture() -> Fixture {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../tests/fixtures/stats_reference.json"
    );
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

/// Reference: scipy.stats.theilslopes (slope, intercept, Sen's 95% interval). The first case
/// is CHECK-VALUES: x = [0, .2, .4, .6, .8] mm, t = [0, 4, 8, 12, 100] ms -> 20 ms/mm, [20, 440].
#[test]
fn theil_sen_matches_scipy_theilslopes() {
    for c in fixture().theilslopes {
        let f = theil_sen(&c.x, &c.y, 0.95).unwrap();
        assert_relative_eq!(f.slope, c.slope, max_relative = 1e-12, epsilon = 1e-12);
        assert_relative_eq!(
            f.intercept,
            c.intercept,
            max_relative = 1e-12,
            epsilon = 1e-12
        );
        let ci = f.slope_ci.unwrap();
        assert_relative_eq!(ci[0], c.low, max_relative = 1e-12);
        assert_relative_eq!(ci[1], c.high, max_relative = 1e-12);
        eprintln!("{}: slope {} [{}, {}]", c.name, f.slope, ci[0], ci[1]);
    }
}

/// The bootstrap shortcut (weighted median of presorted pairwise slopes) equals Theil-Sen on
/// the expanded resample, for many random resamples (reference: the direct estimator above).
#[test]
fn theil_sen_resampler_equals_direct_fit_on_the_expanded_sample() {
    use rand::{Rng, SeedableRng};
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
    for c in fixture().theilslopes {
        let r = TheilSenResampler::new(&c.x, &c.y);
        for _ in 0..200 {
            let n = c.x.len();
            let mut counts = vec![0u32; n];
            for _ in 0..n {
                counts[rng.random_range(0..n)] += 1;
            }
            let (mut xs, mut ys) = (Vec::new(), Vec::new());
            for i in 0..n {
                for _ in 0..counts[i] {
                    xs.push(c.x[i]);
                    ys.push(c.y[i]);
                }
            }
            let direct = theil_sen(&xs, &ys, 0.95).map(|f| f.slope);
            assert_eq!(r.slope(&counts), direct, "{}: counts {counts:?}", c.name);
        }
    }
}

/// Reference: scipy.stats.linregress.
#[test]
fn ols_matches_scipy_linregress() {
    for c in fixture().linregress {
        let f = ols(&c.x, &c.y, 0.95).unwrap();
        assert_relative_eq!(f.slope, c.slope, max_relative = 1e-12);
        assert_relative_eq!(
            f.intercept,
            c.intercept,
            max_relative = 1e-11,
            epsilon = 1e-12
        );
        assert_relative_eq!(f.r, c.r, max_relative = 1e-12);
        assert_relative_eq!(f.slope_stderr, c.stderr, max_relative = 1e-10);
        assert_relative_eq!(f.intercept_stderr, c.intercept_stderr, max_relative = 1e-10);
        eprintln!("{}: slope {} +- {}", c.name, f.slope, f.slope_stderr);
    }
}

/// Reference: NIST StRD Norris certified values (lower difficulty, 36 observations).
#[test]
fn ols_matches_nist_norris_certified_values() {
    let n = fixture().norris;
    let f = ols(&n.x, &n.y, 0.95).unwrap();
    let c = n.certified;
    eprintln!(
        "Norris: B1 rel. error {:.1e}, B0 rel. error {:.1e}, residual sd rel. error {:.1e}",
        (f.slope / c.b1 - 1.0).abs(),
        (f.intercept / c.b0 - 1.0).abs(),
        (f.residual_sd / c.residual_sd - 1.0).abs()
    );
    assert_relative_eq!(f.slope, c.b1, max_relative = 1e-12);
    assert_relative_eq!(f.intercept, c.b0, max_relative = 1e-10);
    assert_relative_eq!(f.slope_stderr, c.b1_sd, max_relative = 1e-10);
    assert_relative_eq!(f.intercept_stderr, c.b0_sd, max_relative = 1e-10);
    assert_relative_eq!(f.residual_sd, c.residual_sd, max_relative = 1e-10);
    assert_relative_eq!(f.r * f.r, c.r_squared, max_relative = 1e-12);
}

/// Reference: statsmodels RLM(M=HuberT()) with its defaults (MAD scale, deviance criterion).
#[test]
fn huber_matches_statsmodels_rlm() {
    for c in fixture().huber {
        let (n, p) = (c.design.len(), c.design[0].len());
        let design = DMatrix::from_fn(n, p, |i, j| c.design[i][j]);
        let f = huber(&design, &c.y, None).unwrap();
        eprintln!(
            "{}: {:?} (statsmodels {:?}), scale {} ({})",
            c.name, f.coefficients, c.params, f.scale, c.scale
        );
        for (a, b) in f.coefficients.iter().zip(&c.params) {
            assert_relative_eq!(a, b, max_relative = 1e-6, epsilon = 1e-9);
        }
        assert_relative_eq!(f.scale, c.scale, max_relative = 1e-6);
    }
}

/// Reference: statsmodels proportion_confint(method='wilson').
#[test]
fn wilson_matches_statsmodels() {
    for c in fixture().wilson {
        let [lo, hi] = wilson_interval(c.successes, c.trials, 0.95).unwrap();
        assert_relative_eq!(lo, c.low, max_relative = 1e-9, epsilon = 1e-12);
        assert_relative_eq!(hi, c.high, max_relative = 1e-9, epsilon = 1e-12);
    }
    assert_eq!(wilson_interval(0, 0, 0.95), None);
}

/// The median interval takes the l-th and (n + 1 - l)-th values with l = scipy.stats.binom.ppf(0.025, n, 1/2).
#[test]
fn median_interval_ranks_match_the_binomial() {
    for c in fixture().median_ranks {
        let values: Vec<f64> = (1..=c.n).map(|v| v as f64).collect();
        let [lo, hi] = median_interval(&values, 0.95).unwrap();
        assert_eq!(
            (lo as usize, hi as usize),
            (c.binom_ppf, c.n + 1 - c.binom_ppf),
            "n = {}",
            c.n
        );
    }
    assert_eq!(median_interval(&[1.0, 2.0, 3.0, 4.0, 5.0], 0.95), None);
}

/// Reference: numpy.percentile (default linear method).
#[test]
fn quantiles_match_numpy_percentile() {
    let p = fixture().percentiles;
    for (q, want) in p.q.iter().zip(&p.numpy) {
        assert_relative_eq!(
            quantile(&p.values, *q).unwrap(),
            *want,
            max_relative = 1e-12
        );
    }
}

/// The expected number of chance windows, rate x span x P(Poisson(rate x duration) >= N - 1),
/// against the same expression with `scipy.stats.poisson.sf(N - 2, rate * duration)` (scipy
/// 1.17.1, run for this test; the values are written here).
#[test]
fn chance_windows_match_scipy_poisson_tail() {
    use ringline::detect::chance_windows;
    for (rate, span, duration, spikes, scipy) in [
        (32.0, 600.0, 0.05, 5, 1513.2189548106037),
        (32.0, 600.0, 0.3, 31, 0.0020746196220541298),
        (8.0, 300.0, 0.2, 12, 0.002459782786561726),
        (2.0, 100.0, 1.0, 1, 200.0),
        (100.0, 60.0, 0.1, 40, 1.7759288745241798e-08),
    ] {
        let e = chance_windows(rate, span, duration, spikes);
        assert_relative_eq!(e, scipy, max_relative = 1e-9);
    }
    assert_eq!(chance_windows(0.0, 600.0, 0.1, 5), 0.0);
}
