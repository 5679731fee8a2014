//! Synchrony: the spike time tiling coefficient against Cutts & Eglen 2014's worked values
//! (../shared/CHECK-VALUES.md), a numpy implementation on seeded trains
//! (tests/fixtures/sttc_reference.json, scripts/reference/make_fixtures.py) and derived
//! cases; the Kuramoto order parameter against its derived values.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use ringline::synchrony::{order_parameter, sttc, sttc_matrix};

/// CHECK-VALUES.md: a = {1, ..., 5} s, recording [0, 6] s, dt = 0.05 s.
#[test]
fn sttc_matches_the_check_values() {
    let a = [1.0, 2.0, 3.0, 4.0, 5.0];
    let span = (0.0, 6.0);
    let shifted: Vec<f64> = a.iter().map(|t| t + 0.01).collect();
    assert!((sttc(&a, &shifted, span, 0.05).unwrap() - 1.0).abs() < 1e-12);
    let apart: Vec<f64> = a.iter().map(|t| t + 0.5).collect();
    assert!((sttc(&a, &apart, span, 0.05).unwrap() + 0.083333).abs() < 1e-6);
    let some = [1.0, 2.0, 3.5, 4.5, 5.0];
    assert!((sttc(&a, &some, span, 0.05).unwrap() - 0.543860).abs() < 1e-6);
    // Worked by hand in a reference library's tests (CHECK-VALUES.md), times in ms.
    let st1 = [1.3, 7.56, 15.87, 28.23, 30.9, 34.2, 38.2, 43.2];
    let st2 = [1.02, 2.71, 18.82, 28.46, 28.79, 43.6];
    let v = sttc(&st1, &st2, (0.0, 50.0), 5.0).unwrap();
    assert!((v - 0.495860165593).abs() < 1e-9, "{v}");
    // Shifting the whole recording by a day changes nothing (CHECK-VALUES.md).
    let day = 86_400_000.0;
    let s1: Vec<f64> = st1.iter().map(|t| t + day).collect();
    let s2: Vec<f64> = st2.iter().map(|t| t + day).collect();
    let w = sttc(&s1, &s2, (day, day + 50.0), 5.0).unwrap();
    assert!((w - v).abs() < 1e-9, "{w} against {v}");
    let day_s = 86_400.0;
    let a_day: Vec<f64> = a.iter().map(|t| t + day_s).collect();
    let some_day: Vec<f64> = some.iter().map(|t| t + day_s).collect();
    let w = sttc(&a_day, &some_day, (day_s, day_s + 6.0), 0.05).unwrap();
    assert!((w - 0.543860).abs() < 1e-6, "{w}");
}

/// Derived: a train with itself gives 1; two trains alternating with period P give -2 dt / P;
/// the 0/0 cases are missing, not numbers.
#[test]
fn sttc_derived_cases_and_the_undefined_ones() {
    let (p, dt, n) = (1.0, 0.1, 50);
    let a: Vec<f64> = (0..n).map(|k| 0.25 + k as f64 * p).collect();
    let b: Vec<f64> = (0..n).map(|k| 0.75 + k as f64 * p).collect();
    let span = (0.0, n as f64 * p);
    assert!((sttc(&a, &a, span, dt).unwrap() - 1.0).abs() < 1e-12);
    let v = sttc(&a, &b, span, dt).unwrap();
    assert!((v + 2.0 * dt / p).abs() < 1e-12, "{v}");
    assert_eq!(sttc(&a, &[], span, dt), None);
    // One event each, windows covering the whole recording: 1 - P T = 0 on both sides.
    assert_eq!(sttc(&[1.0], &[1.0], (0.0, 2.0), 10.0), None);
    let m = sttc_matrix(&[&a, &b, &[]], span, dt).unwrap();
    assert_eq!(m.dim(), (3, 3));
    assert_eq!(m[[0, 1]], m[[1, 0]]);
    assert!((m[[1, 1]].unwrap() - 1.0).abs() < 1e-12);
    assert_eq!(m[[2, 0]], None);
}

/// A numpy implementation of the paper's definitions on seeded trains, three windows.
#[test]
fn sttc_matches_the_numpy_fixture() {
    let text = std::fs::read_to_string(format!(
        "{}/../tests/fixtures/sttc_reference.json",
        env!("CARGO_MANIFEST_DIR")
    ))
    .unwrap();
    let f: serde_json::Value = serde_json::from_str(&text).unwrap();
    let trains: Vec<Vec<f64>> = f["trains_s"]
        .as_array()
        .unwrap()
        .iter()
        .map(|t| {
            t.as_array()
                .unwrap()
                .iter()
                .map(|x| x.as_f64().unwrap())
                .collect()
        })
        .collect();
    let span = (
        f["span_s"][0].as_f64().unwrap(),
        f["span_s"][1].as_f64().unwrap(),
    );
    let cases = f["cases"].as_array().unwrap();
    assert_eq!(cases.len(), 84);
    for c in cases {
        let (i, j) = (
            c["i"].as_u64().unwrap() as usize,
            c["j"].as_u64().unwrap() as usize,
        );
        let dt = c["dt_s"].as_f64().unwrap();
        let want = c["sttc"].as_f64().unwrap();
        let got = sttc(&trains[i], &trains[j], span, dt).unwrap();
        assert!(
            (got - want).abs() <= 1e-9 * want.abs().max(1e-3),
            "pair {i},{j} dt {dt}: {got} against {want}"
        );
    }
}

/// CHECK-VALUES.md: identical trains give R = 1; two trains of one period offset by a
/// fraction delta give |cos(pi delta)|; N independent oscillators average about
/// sqrt(pi) / (2 sqrt(N)) (0.1144 for N = 60).
#[test]
fn order_parameter_derived_values() {
    let period = 0.5;
    let train =
        |offset: f64| -> Vec<f64> { (0..200).map(|k| offset + k as f64 * period).collect() };
    let a = train(0.0);
    let span = (1.0, 90.0);
    let r = order_parameter(&[&a, &a, &a], span, 0.01).unwrap();
    assert!((r.mean_r - 1.0).abs() < 1e-12);
    for delta in [0.25, 0.5, 0.1] {
        let b = train(delta * period);
        let r = order_parameter(&[&a, &b], span, 0.01).unwrap();
        let want = (std::f64::consts::PI * delta).cos().abs();
        assert!(
            (r.mean_r - want).abs() < 1e-9,
            "delta {delta}: {} against {want}",
            r.mean_r
        );
    }
    // Masked, never filled: before every site's second event nothing is sampled.
    let r = order_parameter(&[&a, &train(0.1)], (0.0, 90.0), 0.01).unwrap();
    assert!(r.masked >= 10, "{r:?}");

    let mut rng = ChaCha8Rng::seed_from_u64(5);
    let trains: Vec<Vec<f64>> = (0..60)
        .map(|_| {
            let p = 0.5 + 1.5 * rng.random::<f64>();
            let phase = p * rng.random::<f64>();
            (0..)
                .map(|k| phase + k as f64 * p)
                .take_while(|t| *t < 2000.0)
                .collect()
        })
        .collect();
    let refs: Vec<&[f64]> = trains.iter().map(Vec::as_slice).collect();
    let r = order_parameter(&refs, (5.0, 1995.0), 0.05).unwrap();
    assert!((r.chance_r - 0.1144).abs() < 0.001, "{r:?}");
    assert!(
        (r.mean_r / r.chance_r - 1.0).abs() < 0.1,
        "mean R {} against chance {}",
        r.mean_r,
        r.chance_r
    );
}
