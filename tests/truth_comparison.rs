//! A simulated recording's analysis set beside its ground truth (`report::truth`): the
//! matching and the arithmetic on a truth file worked out by hand, and the kinematic demo
//! strip against the truth its simulator wrote.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

mod common;

use common::command_line_report;
use ringline::report::truth::{compare_with_truth, MATCH_S};
use ringline::report::AnalysisReport;

fn demo_strip() -> (AnalysisReport, String) {
    let truth = format!(
        "{}/../demo-data/strip-16/truth.json",
        env!("CARGO_MANIFEST_DIR")
    );
    (
        command_line_report("strip-16"),
        std::fs::read_to_string(truth).unwrap(),
    )
}

/// Three true bursts written by hand: one starting just before an analysed burst's window
/// (inside the margin) with a true speed 10% above the measured one, one where no burst was
/// found, and one without a front. Expected, by hand: two true fronts, one measured; its
/// error is 1 / 1.1 - 1 = -9.09%; the medians are those of the one measured front.
#[test]
fn hand_made_truth_is_matched_and_scored() {
    let (report, _) = demo_strip();
    let b = report
        .bursts
        .iter()
        .find(|b| b.front.is_some())
        .expect("a burst with a front");
    let front = b.front.as_ref().unwrap();
    let true_speed = front.speed_mm_s * 1.1;
    let truth = format!(
        r#"{{"model": "by hand", "bursts": [
            {{"start_s": {}, "speed_mm_s": {true_speed}, "origin_site": "x"}},
            {{"start_s": -100.0, "speed_mm_s": 50.0}},
            {{"start_s": {}, "speed_mm_s": null}}
        ]}}"#,
        b.start_s - 0.5 * MATCH_S,
        b.start_s
    );
    let c = compare_with_truth(&report, &truth).unwrap();
    assert_eq!((c.true_fronts, c.measured), (2, 1));
    assert_eq!(c.rows[0].truth_burst, 1);
    assert_eq!(c.rows[0].burst, Some(b.burst));
    assert_eq!(c.rows[0].speed_mm_s, Some(front.speed_mm_s));
    let error = c.rows[0].relative_error.unwrap();
    assert!((error - (1.0 / 1.1 - 1.0)).abs() < 1e-12);
    let [lo, hi] = front.speed_ci95_mm_s;
    assert_eq!(
        c.rows[0].covered,
        Some(lo <= true_speed && true_speed <= hi)
    );
    assert_eq!(
        (c.rows[1].truth_burst, c.rows[1].burst, c.rows[1].speed_mm_s),
        (2, None, None)
    );
    assert_eq!(c.median_true_speed_mm_s, Some(true_speed));
    assert_eq!(c.median_speed_mm_s, Some(front.speed_mm_s));
    assert!((c.median_abs_relative_error.unwrap() - error.abs()).abs() < 1e-12);
    let text = c.to_text();
    assert!(text.contains("2 true fronts, 1 measured"), "{text}");
    assert!(text.contains("-9.1%"), "{text}");
    // Not a truth file: the message says where and what was expected.
    let e = compare_with_truth(&report, "{\"bursts\": [\n{\"start_s\": \"soon\"}]}").unwrap_err();
    assert!(
        e.message.starts_with("truth file, line 2, column"),
        "{}",
        e.message
    );
    assert!(
        e.message.contains("truth.json of `ringline simulate`"),
        "{}",
        e.message
    );
}

/// The kinematic demo strip against its simulator's truth: every true front falls in an
/// analysed burst, nearly all are measured, and the measured speeds are those of the report's
/// fronts, within 5% of the truth at the median (the demo's fronts are checked more closely
/// in tests/ground_truth.rs).
#[test]
fn demo_strip_against_its_truth() {
    let (report, truth) = demo_strip();
    let c = compare_with_truth(&report, &truth).unwrap();
    let truth_bursts = serde_json::from_str::<serde_json::Value>(&truth).unwrap()["bursts"]
        .as_array()
        .unwrap()
        .len();
    assert_eq!(c.true_fronts, truth_bursts);
    assert!(
        c.measured as f64 >= 0.9 * c.true_fronts as f64,
        "{} of {}",
        c.measured,
        c.true_fronts
    );
    for r in &c.rows {
        if let (Some(b), Some(v)) = (r.burst, r.speed_mm_s) {
            assert_eq!(report.bursts[b - 1].front.as_ref().unwrap().speed_mm_s, v);
        }
    }
    assert!(c.median_abs_relative_error.unwrap() < 0.05);
    eprintln!("{}", c.to_text());
}

/// The spiking-network demo cultures (strip, ring, dish) against the truth their simulator
/// measured from the neurons themselves: the default 95% intervals hold the true speed for
/// at least 90% of fronts (the acceptance bound of the issue that asked for it), and the
/// median speed is within 2% of the truth's.
#[test]
fn network_demo_intervals_hold_the_truth() {
    for name in ["network-strip-16", "network-ring-24", "network-dish-64"] {
        let report = command_line_report(name);
        let truth = std::fs::read_to_string(format!(
            "{}/../demo-data/{name}/truth.json",
            env!("CARGO_MANIFEST_DIR")
        ))
        .unwrap();
        let c = compare_with_truth(&report, &truth).unwrap();
        eprintln!("{name}: {}", c.to_text());
        assert!(c.measured as f64 >= 0.95 * c.true_fronts as f64, "{name}");
        let coverage = c.interval_coverage.unwrap();
        assert!(coverage >= 0.9, "{name}: coverage {coverage}");
        let bias = c.median_speed_mm_s.unwrap() / c.median_true_speed_mm_s.unwrap() - 1.0;
        assert!(bias.abs() < 0.02, "{name}: median off by {bias}");
    }
}
