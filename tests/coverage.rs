//! Interval coverage: on synthetic fronts with known speed and Gaussian timing jitter, the
//! 95% intervals must cover the true speed in 90-99% of trials (a 95% interval that covers
//! less is overconfident; one that covers nearly always is uselessly wide).

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};
use ringline::fronts::{fit_front, Estimator, FrontPoints, FrontSettings};
use ringline::geometry::Track;

const TRIALS: usize = 400;

fn line_track() -> Track {
    Track::Line {
        start_um: [0.0, 0.0],
        direction: [1.0, 0.0],
        length_um: 15.0 * 375.0,
    }
}

/// One-way front along 16 sites 375 um apart at `speed` mm/s, jitter `sd` seconds.
fn points(rng: &mut ChaCha8Rng, speed: f64, sd: f64, n: usize) -> FrontPoints {
    let noise = Normal::new(0.0, sd).unwrap();
    let along: Vec<f64> = (0..n).map(|i| i as f64 * 375.0).collect();
    FrontPoints {
        site: (0..n).collect(),
        t_s: along
            .iter()
            .map(|s| 10.0 + s / (speed * 1e3) + noise.sample(rng))
            .collect(),
        angle_rad: vec![0.0; n],
        xy_um: along.iter().map(|&s| [s, 0.0]).collect(),
        along_um: along,
    }
}

fn coverage(estimator: Estimator, n: usize, analytic: bool) -> f64 {
    let mut rng = ChaCha8Rng::seed_from_u64(2024);
    let settings = FrontSettings {
        estimator,
        models: vec![ringline::fronts::FrontModel::LineOneWay],
        ..FrontSettings::default()
    };
    let track = line_track();
    let speed = 40.0;
    let mut covered = 0;
    for trial in 0..TRIALS {
        let p = points(&mut rng, speed, 0.004, n);
        let f = fit_front(&p, &track, &settings, trial as u64, Some(4e-5)).unwrap();
        let ci = if analytic {
            f.speed_ci95_analytic_mm_s.unwrap()
        } else {
            f.speed_ci95_mm_s
        };
        covered += usize::from(ci[0] <= speed && speed <= ci[1]);
    }
    covered as f64 / TRIALS as f64
}

fn assert_coverage(name: &str, c: f64) {
    eprintln!(
        "{name}: 95% interval covered the true speed in {:.1}% of {TRIALS} trials",
        c * 100.0
    );
    assert!(
        (0.90..=0.99).contains(&c),
        "{name}: coverage {:.1}%",
        c * 100.0
    );
}

#[test]
fn theil_sen_bootstrap_interval_covers() {
    assert_coverage(
        "Theil-Sen, bootstrap over 16 sites",
        coverage(Estimator::TheilSen, 16, false),
    );
}

#[test]
fn ols_bootstrap_interval_covers() {
    assert_coverage(
        "OLS, bootstrap over 16 sites",
        coverage(Estimator::Ols, 16, false),
    );
}

#[test]
fn ols_analytic_interval_covers() {
    // Student t interval on Gaussian errors: exactly 95% in theory (Draper & Smith ch. 1).
    assert_coverage(
        "OLS, analytic t interval, 16 sites",
        coverage(Estimator::Ols, 16, true),
    );
}

#[test]
fn huber_bootstrap_interval_covers() {
    assert_coverage(
        "Huber, bootstrap over 16 sites",
        coverage(Estimator::Huber, 16, false),
    );
}

#[test]
fn theil_sen_sen_interval_covers() {
    assert_coverage(
        "Theil-Sen, Sen's interval, 16 sites",
        coverage(Estimator::TheilSen, 16, true),
    );
}
