//! Events from fluorescence: the running percentile against a naive window-by-window
//! computation with numpy's percentile rule (`stats::quantile`, itself checked against
//! `numpy.percentile` in stats_reference.rs); onset timing on synthetic transients with known
//! sub-frame onsets; fronts from imaged ROIs end to end; and the warning when fronts cross the
//! field of view in under three frames.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};
use ringline::detect::calcium::{
    delta_f_over_f, event_onsets, running_percentile, CalciumSettings,
};
use ringline::import::{write_layout, write_roi_traces, RoiSeries};
use ringline::recording::Site;
use ringline::stats::quantile;

/// A GCaMP-like transient (from memory: rise about 50 ms, decay about 0.4 s): relative
/// fluorescence change `amplitude (1 - e^(-t/rise)) e^(-t/decay)` after the onset.
fn transient(t: f64, amplitude: f64) -> f64 {
    if t <= 0.0 {
        0.0
    } else {
        amplitude * (1.0 - (-t / 0.05).exp()) * (-t / 0.4).exp()
    }
}

/// Time after the onset at which the transient reaches half its peak (bisection on the
/// noise-free model): the point the half-maximum rule should find.
fn half_rise_s() -> f64 {
    let peak = (0..20_000)
        .map(|k| transient(k as f64 * 1e-5, 1.0))
        .fold(0.0, f64::max);
    let (mut lo, mut hi) = (0.0, 0.2);
    for _ in 0..100 {
        let mid = 0.5 * (lo + hi);
        if transient(mid, 1.0) < 0.5 * peak {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

#[test]
fn running_percentile_matches_the_naive_window() {
    let mut rng = ChaCha8Rng::seed_from_u64(3);
    let mut f: Vec<f64> = (0..700).map(|_| rng.random::<f64>() * 10.0).collect();
    f[100] = f64::NAN;
    f[101] = f64::NAN;
    for (window, p) in [(51, 8.0), (10, 50.0), (200, 20.0), (1, 30.0)] {
        let fast = running_percentile(&f, window, p);
        let half = window / 2;
        for k in 0..f.len() {
            let lo = k.saturating_sub(half);
            let hi = (k + half + 1).min(f.len());
            let values: Vec<f64> = f[lo..hi].iter().copied().filter(|v| !v.is_nan()).collect();
            if f[k].is_nan() {
                assert!(fast[k].is_nan());
                continue;
            }
            let naive = quantile(&values, p / 100.0).unwrap();
            assert!(
                (fast[k] - naive).abs() < 1e-12,
                "window {window}, p {p}, frame {k}: {} against {naive}",
                fast[k]
            );
        }
    }
}

/// Transients at random sub-frame onsets at 20 frames/s, amplitude 0.5 dF/F, noise SD 0.04
/// dF/F (SNR 12: realistic for somatic ROIs, from memory). The half-maximum onsets land on
/// the true half-rise times with an RMS error under a quarter frame.
#[test]
fn onsets_are_timed_to_a_quarter_frame() {
    let fps = 20.0;
    let frames = 20 * 60 * 5; // 5 minutes
    let time_s: Vec<f64> = (0..frames).map(|k| k as f64 / fps).collect();
    let mut rng = ChaCha8Rng::seed_from_u64(11);
    let noise = Normal::new(0.0, 0.04).unwrap();
    let mut errors = Vec::new();
    let mut misses = 0;
    let mut false_events = 0;
    for roi in 0..6 {
        let mut onsets = Vec::new();
        let mut t = 2.0 + rng.random::<f64>();
        while t < time_s[frames - 1] - 3.0 {
            onsets.push(t);
            t += 2.5 + 3.0 * rng.random::<f64>();
        }
        let f: Vec<f64> = time_s
            .iter()
            .map(|&ts| {
                let change: f64 = onsets.iter().map(|&o| transient(ts - o, 0.5)).sum();
                (100.0 + 10.0 * roi as f64) * (1.0 + change + noise.sample(&mut rng))
            })
            .collect();
        let settings = CalciumSettings::default();
        let found = event_onsets(&delta_f_over_f(&f, fps, &settings), &time_s, fps, &settings);
        let truth: Vec<f64> = onsets.iter().map(|o| o + half_rise_s()).collect();
        for &t in &truth {
            match found
                .iter()
                .map(|&x| x - t)
                .min_by(|a, b| a.abs().total_cmp(&b.abs()))
            {
                Some(e) if e.abs() < 0.2 => errors.push(e * fps),
                _ => misses += 1,
            }
        }
        // Events with no true onset within 0.2 s: noise runs past 4 SDs, or a decay
        // broken in two by noise.
        for &x in &found {
            let nearest = truth
                .iter()
                .map(|&t| (x - t).abs())
                .fold(f64::INFINITY, f64::min);
            if nearest >= 0.2 {
                false_events += 1;
                eprintln!("ROI {roi}: an event at {x:.3} s, {nearest:.3} s from any true onset");
            }
        }
    }
    let rms = (errors.iter().map(|e| e * e).sum::<f64>() / errors.len() as f64).sqrt();
    eprintln!(
        "{} onsets, {misses} missed, {false_events} false, RMS error {rms:.3} frames",
        errors.len()
    );
    assert_eq!(misses, 0);
    assert!(false_events * 100 <= errors.len());
    assert!(rms < 0.25);
}

fn analyse(dir: &std::path::Path, traces: &str, layout: &str) -> serde_json::Value {
    std::fs::write(dir.join("traces.csv"), traces).unwrap();
    std::fs::write(dir.join("rois.csv"), layout).unwrap();
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_ringline"))
        .args(["analyze", "traces.csv", "--layout", "rois.csv", "--json"])
        .current_dir(dir)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

/// Imaged ROIs on a 2 mm line at 50 frames/s with fronts at 5 mm/s (a transit of 20 frames):
/// the analysis of the traces recovers the speed within 5% and does not warn.
#[test]
fn imaged_fronts_come_out_at_their_speed() {
    let (fps, speed_mm_s, rois) = (50.0, 5.0, 12);
    let frames = (fps * 120.0) as usize;
    let time_s: Vec<f64> = (0..frames).map(|k| k as f64 / fps).collect();
    let mut rng = ChaCha8Rng::seed_from_u64(5);
    let noise = Normal::new(0.0, 0.03).unwrap();
    let starts: Vec<f64> = (0..20)
        .map(|k| 3.0 + 5.5 * k as f64 + rng.random::<f64>())
        .collect();
    let sites: Vec<Site> = (0..rois)
        .map(|r| Site {
            id: format!("roi{r:02}"),
            x_um: 2000.0 * r as f64 / (rois - 1) as f64,
            y_um: 0.0,
        })
        .collect();
    let series: Vec<RoiSeries> = sites
        .iter()
        .map(|s| RoiSeries {
            roi: s.id.clone(),
            values: time_s
                .iter()
                .map(|&t| {
                    let change: f64 = starts
                        .iter()
                        .map(|&t0| transient(t - t0 - s.x_um / (speed_mm_s * 1000.0), 0.6))
                        .sum();
                    200.0 * (1.0 + change + noise.sample(&mut rng))
                })
                .collect(),
        })
        .collect();
    let dir = tempfile::tempdir().unwrap();
    let report = analyse(
        dir.path(),
        &write_roi_traces(&time_s, &series),
        &write_layout(&sites),
    );
    let median = report["summary"]["median_speed_mm_s"]
        .as_f64()
        .unwrap_or_else(|| panic!("no fronts: {} / {}", report["summary"], report["bursts"][0]));
    eprintln!("median speed {median:.3} mm/s against {speed_mm_s}");
    assert!((median / speed_mm_s - 1.0).abs() < 0.05);
    assert_eq!(report["summary"]["burst_count"].as_u64().unwrap(), 20);
    let notices = report["notices"].to_string();
    assert!(notices.contains("fluorescence: "));
    assert!(!notices.contains("cannot be resolved"));
}

/// The demo strip's imaging (20 frames/s over 5.75 mm) with fronts near 125 mm/s: a transit
/// of about 2 frames, which the analysis must call unresolvable.
#[test]
fn too_fast_for_the_frame_rate_is_said() {
    let root = format!(
        "{}/../demo-data/network-strip-16",
        env!("CARGO_MANIFEST_DIR")
    );
    let dir = tempfile::tempdir().unwrap();
    let report = analyse(
        dir.path(),
        &std::fs::read_to_string(format!("{root}/traces.csv")).unwrap(),
        &std::fs::read_to_string(format!("{root}/roi_layout.csv")).unwrap(),
    );
    let notices = report["notices"].to_string();
    assert!(notices.contains("in under 3 frames"), "{notices}");
    assert!(notices.contains("cannot be resolved at this frame rate"));
}

/// `inspect` on ROI traces counts each ROI's calcium events (as the analysis finds them),
/// not its frames: the demo imaging's counts equal the onsets of `detect::calcium` run on
/// each trace, and the frames with data are reported apart.
#[test]
fn inspect_counts_calcium_events_not_frames() {
    use ringline::detect::calcium::{delta_f_over_f, event_onsets, CalciumSettings};
    let root = format!(
        "{}/../demo-data/network-strip-16",
        env!("CARGO_MANIFEST_DIR")
    );
    let traces = std::fs::read(format!("{root}/traces.csv")).unwrap();
    let layout = std::fs::read(format!("{root}/roi_layout.csv")).unwrap();
    let read = ringline::import::ReadOptions::default();
    let inspection = ringline::inspect_files(
        ("traces.csv", &traces),
        ("roi_layout.csv", &layout),
        &read,
        &ringline::geometry::TrackSettings::default(),
    )
    .unwrap();
    let rec = ringline::import::read_recording(
        ("traces.csv", &traces),
        ("roi_layout.csv", &layout),
        &read,
    )
    .unwrap();
    let ringline::recording::Activity::Traces {
        time_s,
        frame_interval_s,
        values,
    } = &rec.activity
    else {
        panic!("the demo imaging is traces")
    };
    let c = CalciumSettings::default();
    let rate = 1.0 / frame_interval_s;
    for (row, f) in inspection.sites.iter().zip(values) {
        let events = event_onsets(&delta_f_over_f(f, rate, &c), time_s, rate, &c).len();
        assert_eq!(row.event_count, events, "{}", row.site);
        assert_eq!(row.frames_with_data, Some(time_s.len()));
        assert!(
            events > 0 && events < time_s.len() / 10,
            "{}: {events}",
            row.site
        );
    }
}

/// The evidence view on imaging: a ROI's dF/F around the selected burst shows the very event
/// onsets the analysis timed the burst with (each site's activation is one of them), and the
/// two event thresholds.
#[test]
fn the_evidence_view_shows_the_onsets_the_fronts_were_timed_with() {
    use ringline::report::figures::Size;
    use ringline::report::workbook::{StepSettings, Workbook};
    let root =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../demo-data/network-strip-16");
    let traces = std::fs::read(root.join("traces.csv")).unwrap();
    let layout = std::fs::read(root.join("roi_layout.csv")).unwrap();
    let mut wb = Workbook::open(
        ("traces.csv", &traces),
        ("roi_layout.csv", &layout),
        StepSettings::default(),
    )
    .unwrap();
    let settings = wb.settings.analysis.clone();
    wb.analyze(settings, &mut |_, _| {}).unwrap();
    let burst = wb
        .report()
        .unwrap()
        .bursts
        .iter()
        .find(|b| b.activations.len() >= 5)
        .unwrap()
        .clone();
    wb.settings.view.burst = burst.burst;
    let mut checked = 0;
    for a in &burst.activations {
        let figure = wb.evidence(&a.site, None, Size::default()).unwrap();
        assert!(figure.svg.contains("event must reach") && figure.svg.contains("event onset"));
        let shown = format!("event onset at {:.3} s", a.first_spike_s);
        assert!(
            figure.points.iter().any(|p| p.label.ends_with(&shown)),
            "ROI {}: {shown} not among {:?}",
            a.site,
            figure.points.iter().map(|p| &p.label).collect::<Vec<_>>()
        );
        checked += 1;
    }
    assert!(checked >= 5);
    assert!(wb.evidence("no such ROI", None, Size::default()).is_err());
}
