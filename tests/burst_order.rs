//! Where bursts start and how consistently: leading sites, recruitment times and the
//! burst-to-burst consistency of the activation order (fronts::order), against worked
//! examples, scipy's Spearman correlation, and recordings from the independent generator
//! (tests/regimes) whose origins are known.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

mod common;
mod regimes;

use regimes::{generate, Array, Firing, Fronts, Recipe};
use ringline::fronts::order::{burst_order, spearman, OrderSettings};
use ringline::fronts::{Activation, ActivationStatus};

fn activation(site: &str, time_s: f64, status: ActivationStatus) -> Activation {
    Activation {
        site: site.into(),
        along_um: None,
        x_um: 0.0,
        y_um: 0.0,
        time_s,
        first_spike_s: time_s,
        used: status.used(),
        status,
    }
}

/// Worked by hand: 20 sites active at 1, 2, ..., 20 ms (listed backwards), plus one late
/// outlier that does not count. Leading = first ceil(0.05 x 20) = 1 site; 10% of 20 is the
/// 2nd activation (1 ms after the first), 50% the 10th (9 ms), 90% the 18th (17 ms).
#[test]
fn leading_sites_and_recruitment_by_hand() {
    let mut a: Vec<Activation> = (1..=20)
        .rev()
        .map(|k| {
            activation(
                &format!("s{k}"),
                1.0 + k as f64 * 1e-3,
                ActivationStatus::Used,
            )
        })
        .collect();
    a.push(activation("late", 0.5, ActivationStatus::EarlyOutlier));
    let o = burst_order(&a, &OrderSettings::default());
    assert_eq!(o.active_sites, 20);
    assert_eq!(o.leading_sites, vec!["s1".to_string()]);
    let r = o.recruitment_ms.unwrap();
    for (got, want) in r.iter().zip([1.0, 9.0, 17.0]) {
        assert!((got - want).abs() < 1e-9, "{r:?}");
    }
    // A tenth of the sites lead when asked: ceil(0.1 x 20) = 2.
    let o = burst_order(
        &a,
        &OrderSettings {
            leading_fraction: 0.1,
            ..OrderSettings::default()
        },
    );
    assert_eq!(o.leading_sites, vec!["s1".to_string(), "s2".to_string()]);
}

/// `scipy.stats.spearmanr` (scipy 1.17.1 in the reference venv, run for this test): with
/// ties, x = [1, 2, 2, 3, 4, 5, 5, 5, 6, 7], y = [2, 1, 4, 3, 3, 6, 5, 7, 9, 8] gives
/// 0.9013032569427505; a reversed order gives -1; a constant side gives none (scipy: nan).
#[test]
fn spearman_matches_scipy() {
    let x = [1.0, 2.0, 2.0, 3.0, 4.0, 5.0, 5.0, 5.0, 6.0, 7.0];
    let y = [2.0, 1.0, 4.0, 3.0, 3.0, 6.0, 5.0, 7.0, 9.0, 8.0];
    let r = spearman(&x, &y).unwrap();
    assert!((r - REFERENCE_TIED).abs() < 1e-12, "{r}");
    let z: Vec<f64> = x.iter().rev().copied().collect();
    let w = [7.0, 6.0, 5.0, 4.0, 3.0, 2.0, 1.0, 0.5, 0.25, 0.0];
    assert!((spearman(&[1.0, 2.0, 3.0, 4.0], &[4.0, 3.0, 2.0, 1.0]).unwrap() + 1.0).abs() < 1e-12);
    assert_eq!(spearman(&z, &[1.0; 10]), None);
    assert!(spearman(&w, &x).unwrap() < -0.9);
}

const REFERENCE_TIED: f64 = 0.901_303_256_942_750_5;

fn analyse(r: &Recipe) -> ringline::fronts::Analysis {
    let g = generate(r);
    common::analyse_csv(&g.spikes_csv, &g.layout_csv)
}

/// Every burst starts at one place (a point source at (300, 500) um on an 8 x 8 grid of
/// 200 um pitch): the site there leads most bursts, the order is nearly the same every time;
/// plane waves from random directions give no consistent order (Spearman near 0 on
/// average: two plane waves at angle phi apart correlate about as cos phi).
#[test]
fn a_fixed_origin_leads_and_random_directions_do_not() {
    let grid = Array::Grid {
        side: 8,
        pitch_um: 200.0,
    };
    let fixed = Recipe {
        fixed_origin_um: Some([300.0, 500.0]),
        speed_mm_s: 55.0,
        ..Recipe::new(51, grid, Fronts::Point, Firing::Sparse { latency_s: 0.002 })
    };
    let a = analyse(&fixed);
    let s = &a.summary;
    let top = &s.leaders[0];
    eprintln!(
        "fixed origin: {} bursts; top leader {} at ({}, {}) led {}; median Spearman {:?} over {} pairs; recruitment {:?} ms",
        s.burst_count, top.site, top.x_um, top.y_um, top.bursts_leading,
        s.order_consistency.median_spearman, s.order_consistency.pairs, s.median_recruitment_ms
    );
    // The four electrodes nearest (300, 500) are at (200 or 400, 400 or 600).
    assert!((top.x_um - 300.0).abs() <= 100.0 && (top.y_um - 500.0).abs() <= 100.0);
    assert!(top.lead_fraction > 0.3, "{}", top.lead_fraction);
    assert!(s.order_consistency.median_spearman.unwrap() > 0.8);
    let random = Recipe {
        speed_mm_s: 55.0,
        ..Recipe::new(52, grid, Fronts::Plane, Firing::Sparse { latency_s: 0.002 })
    };
    let s = analyse(&random).summary;
    eprintln!(
        "random plane waves: mean Spearman {:?} over {} pairs; top leader led {} of {}",
        s.order_consistency.mean_spearman,
        s.order_consistency.pairs,
        s.leaders[0].bursts_leading,
        s.burst_count
    );
    assert!(s.order_consistency.mean_spearman.unwrap().abs() < 0.15);
    assert!(s.order_consistency.pairs > 100);
}
