//! Track geometry against numpy and scipy. The fixture is made by
//! `scripts/reference/make_fixtures.py`, which records the library versions.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::needless_range_loop)] // a failed unwrap is a failed test

use approx::assert_relative_eq;
use ringline::geometry::{
    fit_circle_geometric, fit_circle_kasa, fit_circle_taubin, fit_line_tls, fit_track, Circle,
    Track, TrackChoice, TrackSettings,
};
use ringline::recording::Site;
use serde::Deserialize;

#[derive(Deserialize)]
struct Fixture {
    lines: Vec<LineCase>,
    circles: Vec<CircleCase>,
}

#[derive(Deserialize)]
struct LineCase {
    name: String,
    points_um: Vec<[f64; 2]>,
    numpy: NumpyLine,
}

#[derive(Deserialize)]
struct NumpyLine {
    centroid_um: [f64; 2],
    direction: [f64; 2],
    singular_values_um: [f64; 2],
    rms_um: f64,
}

#[derive(Deserialize)]
struct CircleCase {
    name: String,
    arc_deg: f64,
    noise_sd_um: f64,
    #[serde(rename = "true")]
    truth: CircleRef,
    true_angles_rad: Vec<f64>,
    points_um: Vec<[f64; 2]>,
    scipy_least_squares: CircleRef,
    numpy_kasa: CircleRef,
}

#[derive(Deserialize)]
struct CircleRef {
    centre_um: [f64; 2],
    radius_um: f64,
}

fn fixture() -> Fixture {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../tests/fixtures/geometry_reference.json"
    );
    let text = std::fs::read_to_string(path).expect("fixture file is committed");
    serde_json::from_str(&text).expect("fixture parses")
}

fn sites(points: &[[f64; 2]]) -> Vec<Site> {
    points
        .iter()
        .enumerate()
        .map(|(i, p)| Site {
            id: format!("s{i:02}"),
            x_um: p[0],
            y_um: p[1],
        })
        .collect()
}

/// Reference: numpy.linalg.svd of the centred points.
#[test]
fn line_fit_matches_numpy_svd() {
    for case in fixture().lines {
        let fit = fit_line_tls(&case.points_um).expect("line fits");
        let mut d = fit.direction;
        // numpy's sign is arbitrary; the fixture applies the library's rule (larger component positive).
        if (if d[0].abs() >= d[1].abs() { d[0] } else { d[1] }) < 0.0 {
            d = [-d[0], -d[1]];
        }
        for k in 0..2 {
            assert_relative_eq!(d[k], case.numpy.direction[k], epsilon = 1e-12);
            assert_relative_eq!(
                fit.centroid_um[k],
                case.numpy.centroid_um[k],
                max_relative = 1e-12
            );
            assert_relative_eq!(
                fit.singular_values_um[k],
                case.numpy.singular_values_um[k],
                max_relative = 1e-10
            );
        }
        assert_relative_eq!(fit.rms_um, case.numpy.rms_um, max_relative = 1e-10);
        eprintln!(
            "{}: direction error {:.2e}",
            case.name,
            (d[0] - case.numpy.direction[0]).abs()
        );
    }
}

/// Reference: scipy.optimize.least_squares (MINPACK lm) on the radial residuals.
#[test]
fn geometric_circle_fit_matches_scipy_least_squares() {
    for case in fixture().circles {
        let start = fit_circle_taubin(&case.points_um).expect("taubin start");
        let fit = fit_circle_geometric(&case.points_um, start).expect("geometric fit");
        let reference = &case.scipy_least_squares;
        let centre_error = (fit.circle.centre_um[0] - reference.centre_um[0])
            .hypot(fit.circle.centre_um[1] - reference.centre_um[1]);
        let radius_error = (fit.circle.radius_um - reference.radius_um).abs();
        eprintln!(
            "{}: centre {:.3e} um, radius {:.3e} um from scipy; radius {:.2} um from truth",
            case.name,
            centre_error,
            radius_error,
            fit.circle.radius_um - case.truth.radius_um
        );
        assert!(fit.converged, "{}: solver did not converge", case.name);
        // 1e-5 um: on a short arc the minimum is a long flat valley (centre and radius trade
        // off), and two solvers that both meet a 1e-12 relative cost criterion stop about
        // 1e-6 um apart there; on full and half rings they agree to 1e-9 um.
        assert!(
            centre_error < 1e-5,
            "{}: centre off scipy by {centre_error} um",
            case.name
        );
        assert!(
            radius_error < 1e-5,
            "{}: radius off scipy by {radius_error} um",
            case.name
        );
    }
}

/// Reference: numpy.linalg.lstsq on Kasa's linear system.
#[test]
fn kasa_fit_matches_numpy_lstsq_and_is_biased_on_a_short_arc() {
    for case in fixture().circles {
        let kasa = fit_circle_kasa(&case.points_um).expect("kasa fits");
        assert_relative_eq!(
            kasa.radius_um,
            case.numpy_kasa.radius_um,
            max_relative = 1e-9
        );
        for k in 0..2 {
            assert_relative_eq!(
                kasa.centre_um[k],
                case.numpy_kasa.centre_um[k],
                max_relative = 1e-9
            );
        }
        if case.arc_deg <= 60.0 {
            // Kasa's fit shrinks the radius on short noisy arcs (Chernov 2010, Circular and
            // Linear Regression, sec. 5.3); the geometric fit must be much closer to the truth.
            let geometric = &case.scipy_least_squares;
            let kasa_error = (kasa.radius_um - case.truth.radius_um).abs();
            let ours =
                fit_circle_geometric(&case.points_um, fit_circle_taubin(&case.points_um).unwrap())
                    .unwrap();
            let geometric_error = (ours.circle.radius_um - case.truth.radius_um).abs();
            assert!(kasa.radius_um < geometric.radius_um);
            assert!(
                kasa_error > 1.5 * geometric_error,
                "{}: kasa {kasa_error} um, geometric {geometric_error} um",
                case.name
            );
        }
    }
}

/// Taubin's fit is exact on noise-free points (Taubin 1991: the fit is algebraically exact
/// for points on a circle).
#[test]
fn taubin_is_exact_without_noise() {
    let truth = Circle {
        centre_um: [-300.0, 720.0],
        radius_um: 845.0,
    };
    let points: Vec<[f64; 2]> = (0..9)
        .map(|i| {
            let a = 0.3 + 0.2 * i as f64;
            [
                truth.centre_um[0] + truth.radius_um * a.cos(),
                truth.centre_um[1] + truth.radius_um * a.sin(),
            ]
        })
        .collect();
    let fit = fit_circle_taubin(&points).unwrap();
    assert_relative_eq!(fit.radius_um, truth.radius_um, max_relative = 1e-9);
    assert_relative_eq!(fit.centre_um[0], truth.centre_um[0], epsilon = 1e-6);
    assert_relative_eq!(fit.centre_um[1], truth.centre_um[1], epsilon = 1e-6);
}

/// Detection on the fixture's layouts; the arc coordinate against the true angles (full and
/// half ring) and against scipy's fitted circle (every arc).
#[test]
fn detection_and_arc_coordinates_on_reference_layouts() {
    use ringline::geometry::wrap_angle;
    let fx = fixture();
    for case in &fx.lines {
        let fit = fit_track(&sites(&case.points_um), &TrackSettings::default()).unwrap();
        assert_eq!(
            fit.track.kind_name(),
            "line",
            "{}: {}",
            case.name,
            fit.reason
        );
    }
    for case in &fx.circles {
        let settings = if case.arc_deg >= 180.0 {
            TrackSettings::default()
        } else {
            TrackSettings {
                kind: TrackChoice::Ring,
                ..TrackSettings::default()
            }
        };
        let fit = fit_track(&sites(&case.points_um), &settings).unwrap();
        let Track::Ring { .. } = fit.track else {
            panic!(
                "{}: expected a ring, found {} ({})",
                case.name,
                fit.track.kind_name(),
                fit.reason
            );
        };
        let along: Vec<f64> = fit.placements.iter().map(|p| p.along_um).collect();
        // Differences from the first site, so the choice of the coordinate's zero drops out.
        let circumference = |r: f64| std::f64::consts::TAU * r;
        let relative = |i: usize, c: f64| {
            let d = along[i] - along[0];
            d.rem_euclid(c)
        };
        let reference = &case.scipy_least_squares;
        let c_ref = circumference(reference.radius_um);
        let angle0 = (case.points_um[0][1] - reference.centre_um[1])
            .atan2(case.points_um[0][0] - reference.centre_um[0]);
        let mut worst_scipy = 0.0f64;
        let mut worst_truth = 0.0f64;
        for i in 1..along.len() {
            let p = case.points_um[i];
            let angle = (p[1] - reference.centre_um[1]).atan2(p[0] - reference.centre_um[0]);
            let expected = reference.radius_um * wrap_angle(angle - angle0);
            worst_scipy = worst_scipy.max((relative(i, c_ref) - expected).abs());
            let truth = case.truth.radius_um
                * wrap_angle(case.true_angles_rad[i] - case.true_angles_rad[0]);
            worst_truth =
                worst_truth.max((relative(i, circumference(case.truth.radius_um)) - truth).abs());
        }
        eprintln!(
            "{}: arc coordinate worst error {worst_scipy:.2e} um from scipy's circle, {worst_truth:.1} um from the truth (noise sd {} um)",
            case.name, case.noise_sd_um
        );
        assert!(
            worst_scipy < 1e-4,
            "{}: {worst_scipy} um from scipy's circle",
            case.name
        );
        if case.arc_deg >= 180.0 {
            let tolerance = 4.0 * std::f64::consts::SQRT_2 * case.noise_sd_um;
            assert!(
                worst_truth < tolerance,
                "{}: {worst_truth} um from the truth",
                case.name
            );
        }
    }
}
