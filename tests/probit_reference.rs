//! Cumulative-Gaussian (probit) fits against statsmodels' GLM Binomial(Probit) and scipy.
//!
//! - Bliss's beetle data (Bliss 1935, the standard probit example; values from statsmodels
//!   0.15 in ../shared/CHECK-VALUES.md and in the issue): beta0 -34.935, beta1 19.728,
//!   standard errors 2.648 and 1.487 from the expected information, deviance 10.12,
//!   50% point 1.77085.
//! - tests/fixtures/probit_reference.json (scripts/reference/make_fixtures.py): the same
//!   fit by statsmodels on seeded simulated sets, and profile-likelihood intervals of the
//!   50% point and the width found with scipy.optimize (an independent implementation).
//! - Separated data, a single amplitude, no responders and only responders give bounds or
//!   shares, never a fit.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

use ringline::response::probit::{fit_probit, CurveFit, DosePoint, ProbitFit};

fn points(x: &[f64], n: &[usize], k: &[usize]) -> Vec<DosePoint> {
    x.iter()
        .zip(n)
        .zip(k)
        .map(|((&amplitude, &trials), &responders)| DosePoint {
            amplitude,
            trials,
            responders,
        })
        .collect()
}

fn fitted(c: CurveFit) -> ProbitFit {
    match c {
        CurveFit::Fitted(f) => f,
        other => panic!("expected a fit, found {other:?}"),
    }
}

const BEETLE_DOSE: [f64; 8] = [
    1.6907, 1.7242, 1.7552, 1.7842, 1.8113, 1.8369, 1.8610, 1.8839,
];
const BEETLE_N: [usize; 8] = [59, 60, 62, 56, 63, 59, 62, 60];
const BEETLE_K: [usize; 8] = [6, 13, 18, 28, 52, 53, 61, 60];

#[test]
fn bliss_beetles_match_statsmodels() {
    let f = fitted(fit_probit(
        &points(&BEETLE_DOSE, &BEETLE_N, &BEETLE_K),
        0.95,
    ));
    // statsmodels 0.15 GLM Binomial(Probit), quoted to the digits given.
    assert!((f.intercept - -34.935).abs() < 5e-4, "{}", f.intercept);
    assert!((f.slope - 19.728).abs() < 5e-4, "{}", f.slope);
    assert!((f.intercept_se - 2.648).abs() < 5e-4, "{}", f.intercept_se);
    assert!((f.slope_se - 1.487).abs() < 5e-4, "{}", f.slope_se);
    assert!((f.deviance - 10.12).abs() < 5e-3, "{}", f.deviance);
    assert!((f.threshold - 1.77085).abs() < 5e-6, "{}", f.threshold);
    // Delta-method SE of the 50% point 0.00380 and Pearson chi-square 9.513 on 6 df
    // (CHECK-VALUES.md).
    assert!(
        (f.threshold_se - 0.00380).abs() < 5e-6,
        "{}",
        f.threshold_se
    );
    assert!((f.pearson_chi2 - 9.513).abs() < 5e-4, "{}", f.pearson_chi2);
    assert_eq!(f.degrees_of_freedom, 6);
}

#[test]
fn fits_and_profile_intervals_match_the_fixture() {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../tests/fixtures/probit_reference.json"
    ))
    .unwrap();
    let fixture: serde_json::Value = serde_json::from_str(&text).unwrap();
    let cases = fixture["cases"].as_array().unwrap();
    assert!(cases.len() >= 4);
    let floats = |v: &serde_json::Value| -> Vec<f64> {
        v.as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect()
    };
    let counts = |v: &serde_json::Value| -> Vec<usize> {
        v.as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap() as usize)
            .collect()
    };
    let close = |got: f64, want: f64, what: &str, name: &str| {
        assert!(
            (got - want).abs() <= 1e-6 * want.abs().max(1.0),
            "{name}: {what} {got} against {want}"
        );
    };
    for c in cases {
        let name = c["name"].as_str().unwrap();
        let f = fitted(fit_probit(
            &points(&floats(&c["x"]), &counts(&c["n"]), &counts(&c["k"])),
            0.95,
        ));
        let beta = floats(&c["beta"]);
        let se = floats(&c["se"]);
        close(f.intercept, beta[0], "b0", name);
        close(f.slope, beta[1], "b1", name);
        // statsmodels takes the covariance from the weights of its last IRLS step, which
        // stops on a relative deviance change of 1e-8, so its SEs sit about 1e-5 from
        // those at the exact maximum (refitted with tol=1e-14 it gives SE(b0) 2.6479178 for
        // the beetles, as here).
        for (got, want, what) in [
            (f.intercept_se, se[0], "SE b0"),
            (f.slope_se, se[1], "SE b1"),
        ] {
            assert!(
                (got - want).abs() <= 2e-5 * want,
                "{name}: {what} {got} against {want}"
            );
        }
        close(
            f.deviance,
            c["deviance"].as_f64().unwrap(),
            "deviance",
            name,
        );
        close(
            f.pearson_chi2,
            c["pearson_chi2"].as_f64().unwrap(),
            "Pearson",
            name,
        );
        close(
            f.fit_p.unwrap(),
            c["gof_p"].as_f64().unwrap(),
            "fit p",
            name,
        );
        close(f.threshold, c["threshold"].as_f64().unwrap(), "mu", name);
        close(f.width, c["width"].as_f64().unwrap(), "sigma", name);
        let tp = floats(&c["threshold_profile"]);
        let wp = floats(&c["width_profile"]);
        for (got, want, what) in [
            (f.threshold_ci[0].unwrap(), tp[0], "mu low"),
            (f.threshold_ci[1].unwrap(), tp[1], "mu high"),
            (f.width_ci[0].unwrap(), wp[0], "sigma low"),
            (f.width_ci[1].unwrap(), wp[1], "sigma high"),
        ] {
            // scipy's bounded minimiser and brentq to about 1e-8.
            assert!(
                (got - want).abs() <= 1e-6 * want.abs().max(1e-3),
                "{name}: {what} {got} against {want}"
            );
        }
    }
}

#[test]
fn separation_and_degenerate_curves_are_bounds_not_fits() {
    // All-or-none between 2 and 3: the threshold lies between them.
    let c = fit_probit(
        &points(&[1.0, 2.0, 3.0, 4.0], &[10; 4], &[0, 0, 10, 10]),
        0.95,
    );
    assert_eq!(
        c,
        CurveFit::Separated {
            below: 2.0,
            above: 3.0
        }
    );
    // Quasi-complete: mixed only at 2.
    let c = fit_probit(&points(&[1.0, 2.0, 3.0], &[10; 3], &[0, 4, 10]), 0.95);
    assert_eq!(
        c,
        CurveFit::Separated {
            below: 2.0,
            above: 2.0
        }
    );
    let c = fit_probit(&points(&[1.5], &[20], &[7]), 0.95);
    assert_eq!(
        c,
        CurveFit::OneAmplitude {
            amplitude: 1.5,
            fraction: 0.35
        }
    );
    let c = fit_probit(&points(&[1.0, 2.0], &[5, 5], &[0, 0]), 0.95);
    assert_eq!(c, CurveFit::NoneResponded { highest: 2.0 });
    let c = fit_probit(&points(&[1.0, 2.0], &[5, 5], &[5, 5]), 0.95);
    assert_eq!(c, CurveFit::AllResponded { lowest: 1.0 });
    // A falling share is not a threshold curve.
    let c = fit_probit(&points(&[1.0, 2.0, 3.0], &[20; 3], &[15, 10, 4]), 0.95);
    assert!(matches!(c, CurveFit::NoRise { .. }), "{c:?}");
    // Nothing usable.
    let c = fit_probit(&points(&[f64::NAN], &[5], &[2]), 0.95);
    assert!(matches!(c, CurveFit::NotFitted { .. }), "{c:?}");
}

#[test]
fn chi_square_tail_and_normal_quantile_match_scipy() {
    use ringline::response::probit::{chi_square_sf, normal_quantile};
    // scipy.stats.chi2.sf(x, k) and norm.ppf (scipy 1.17).
    for (x, k, want) in [
        (3.0, 1, 0.08326451666355042),
        (5.0, 3, 0.1717971442967335),
        (10.12, 6, 0.1196886744205892),
        (0.5, 5, 0.9921232932326296),
        (40.0, 7, 1.258790387371308e-06),
        (12.3, 11, 0.3415208582761478),
    ] {
        let got = chi_square_sf(x, k);
        assert!(
            (got - want).abs() <= 1e-12 * want.max(1e-300) + 1e-15,
            "chi2.sf({x}, {k}): {got} against {want}"
        );
    }
    assert!((normal_quantile(0.975) - 1.959963984540054).abs() < 1e-13);
    assert!((normal_quantile(1e-10) - -6.361340902404056).abs() < 1e-12);
}
