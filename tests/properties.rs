//! Property tests (proptest): write-then-read round trips of the text formats, and invariants
//! of the track geometry that hold for any layout.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

use proptest::prelude::*;
use ringline::geometry::{fit_track, wrap_angle, Track, TrackChoice, TrackSettings};
use ringline::import::{
    read_layout, read_roi_traces, read_spike_list, write_layout, write_roi_traces,
    write_spike_list, LayoutOptions, RoiSeries, SiteSpikes, SpikeListOptions, TraceOptions,
};
use ringline::recording::Site;
use std::collections::{BTreeMap, BTreeSet};
use std::f64::consts::TAU;

/// Site identifiers including characters the writer must quote (`,`, `"`, `;`, a leading `#`).
fn site_ids(max: usize) -> impl Strategy<Value = Vec<String>> {
    prop::collection::btree_set(
        "[A-Za-z0-9_#,;\"-][A-Za-z0-9_ #,;\"-]{0,6}[A-Za-z0-9_#\"-]",
        1..max,
    )
    .prop_map(|s: BTreeSet<String>| s.into_iter().collect())
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(128))]

    /// A spike list read back equals what was written, bit for bit, per site.
    #[test]
    fn spike_list_round_trip(ids in site_ids(12), seeds in prop::collection::vec(prop::collection::vec(0.0f64..1e5, 1..20), 12)) {
        let sites: Vec<SiteSpikes> = ids.iter().zip(&seeds).map(|(id, t)| {
            let mut times_s = t.clone();
            times_s.sort_by(f64::total_cmp);
            SiteSpikes { site: id.clone(), times_s }
        }).collect();
        let text = write_spike_list(&sites);
        let back = read_spike_list(text.as_bytes(), "rt.csv", &SpikeListOptions::default()).unwrap();
        let want: BTreeMap<&str, &Vec<f64>> = sites.iter().map(|s| (s.site.as_str(), &s.times_s)).collect();
        let got: BTreeMap<&str, &Vec<f64>> = back.sites.iter().map(|s| (s.site.as_str(), &s.times_s)).collect();
        prop_assert_eq!(want, got);
    }

    /// A layout read back equals what was written.
    #[test]
    fn layout_round_trip(ids in site_ids(30), coords in prop::collection::vec((-1e5f64..1e5, -1e5f64..1e5), 30)) {
        let sites: Vec<Site> = ids.iter().zip(&coords).map(|(id, &(x, y))| Site { id: id.clone(), x_um: x, y_um: y }).collect();
        let back = read_layout(write_layout(&sites).as_bytes(), "rt.csv", &LayoutOptions::default()).unwrap();
        prop_assert_eq!(back.sites, sites);
    }

    /// ROI traces with missing values read back with the same values and NaN in the same places.
    #[test]
    fn roi_traces_round_trip(ids in site_ids(6), frames in 2usize..40, raw in prop::collection::vec(prop::option::weighted(0.9, -1e3f64..1e4), 240)) {
        let time_s: Vec<f64> = (0..frames).map(|i| i as f64 * 0.04).collect();
        let rois: Vec<RoiSeries> = ids.iter().enumerate().map(|(k, id)| RoiSeries {
            roi: id.clone(),
            values: (0..frames).map(|i| raw[(k * frames + i) % raw.len()].unwrap_or(f64::NAN)).collect(),
        }).collect();
        let text = write_roi_traces(&time_s, &rois);
        let back = read_roi_traces(text.as_bytes(), "rt.csv", &TraceOptions::default()).unwrap();
        prop_assert_eq!(&back.time_s, &time_s);
        prop_assert_eq!(back.rois.len(), rois.len());
        for (a, b) in back.rois.iter().zip(&rois) {
            prop_assert_eq!(&a.roi, &b.roi);
            for (x, y) in a.values.iter().zip(&b.values) {
                prop_assert!((x.is_nan() && y.is_nan()) || x == y);
            }
        }
    }

    /// wrap_angle lands in [0, 2 pi) and keeps the angle modulo 2 pi.
    #[test]
    fn wrap_angle_range(a in -1e4f64..1e4) {
        let w = wrap_angle(a);
        prop_assert!((0.0..TAU).contains(&w));
        let k = ((a - w) / TAU).round();
        prop_assert!((a - w - k * TAU).abs() < 1e-9);
    }

    /// Points near a ring project to within tolerance of their true arc coordinate
    /// (differences from the first site, so the coordinate's zero drops out).
    #[test]
    fn ring_projection_recovers_true_arc_coordinate(
        cx in -5e3f64..5e3, cy in -5e3f64..5e3, radius in 200.0f64..5e3,
        start in 0.0f64..TAU, arc in 1.6f64..TAU, n in 8usize..40,
        jitter in prop::collection::vec((-0.3f64..0.3, -1.0f64..1.0), 40),
    ) {
        let step = arc / n as f64;
        let angles: Vec<f64> = (0..n).map(|i| start + step * (i as f64 + jitter[i].0)).collect();
        let sites: Vec<Site> = angles.iter().enumerate().map(|(i, a)| {
            let r = radius + jitter[i].1; // up to 1 um radial noise
            Site { id: format!("s{i}"), x_um: cx + r * a.cos(), y_um: cy + r * a.sin() }
        }).collect();
        let settings = TrackSettings { kind: TrackChoice::Ring, ..TrackSettings::default() };
        let fit = fit_track(&sites, &settings).unwrap();
        let Track::Ring { radius_um, .. } = fit.track else { panic!("ring expected") };
        let c = TAU * radius_um;
        for (i, p) in fit.placements.iter().enumerate() {
            let got = (p.along_um - fit.placements[0].along_um).rem_euclid(c);
            let want = radius * (angles[i] - angles[0]);
            let tolerance = 5.0 + 2e-3 * radius;
            prop_assert!((got - want).abs() < tolerance, "site {i}: {got} um, want {want} um");
        }
    }

    /// Reversing a line maps every coordinate s to L - s.
    #[test]
    fn reversing_a_line_mirrors_coordinates(
        angle in 0.0f64..TAU, n in 3usize..30, pitch in 10.0f64..500.0,
        noise in prop::collection::vec(-0.05f64..0.05, 30),
    ) {
        let (c, s) = (angle.cos(), angle.sin());
        let sites: Vec<Site> = (0..n).map(|i| {
            let t = i as f64 * pitch;
            let off = noise[i] * pitch;
            Site { id: format!("e{i}"), x_um: t * c - off * s, y_um: t * s + off * c }
        }).collect();
        let line = TrackSettings { kind: TrackChoice::Line, ..TrackSettings::default() };
        let forward = fit_track(&sites, &line).unwrap();
        let backward = fit_track(&sites, &TrackSettings { reverse: true, ..line }).unwrap();
        let length = forward.track.length_um().unwrap();
        for (f, b) in forward.placements.iter().zip(&backward.placements) {
            prop_assert!((f.along_um + b.along_um - length).abs() < 1e-9 * length.max(1.0));
            prop_assert!((f.lateral_um + b.lateral_um).abs() < 1e-9 * length.max(1.0));
        }
    }

    /// Moving and rotating a layout changes no distance along the track, and not the track kind.
    #[test]
    fn rigid_motion_keeps_track_distances(
        ring in any::<bool>(), angle in 0.0f64..TAU, dx in -1e4f64..1e4, dy in -1e4f64..1e4,
        n in 12usize..30, noise in prop::collection::vec((-1.0f64..1.0, -1.0f64..1.0), 30),
    ) {
        let base: Vec<[f64; 2]> = (0..n).map(|i| {
            let (nx, ny) = noise[i];
            if ring {
                let a = TAU * i as f64 / n as f64;
                [1500.0 * a.cos() + nx, 1500.0 * a.sin() + ny]
            } else {
                [i as f64 * 250.0 + nx, ny]
            }
        }).collect();
        let (c, s) = (angle.cos(), angle.sin());
        let moved: Vec<[f64; 2]> = base.iter().map(|p| [c * p[0] - s * p[1] + dx, s * p[0] + c * p[1] + dy]).collect();
        let to_sites = |pts: &[[f64; 2]]| -> Vec<Site> {
            pts.iter().enumerate().map(|(i, p)| Site { id: format!("s{i}"), x_um: p[0], y_um: p[1] }).collect()
        };
        let a = fit_track(&to_sites(&base), &TrackSettings::default()).unwrap();
        let b = fit_track(&to_sites(&moved), &TrackSettings::default()).unwrap();
        prop_assert_eq!(a.track.kind_name(), if ring { "ring" } else { "line" });
        prop_assert_eq!(a.track.kind_name(), b.track.kind_name());
        let length = a.track.length_um().unwrap();
        let separation = |fit: &ringline::geometry::TrackFit, i: usize, j: usize| {
            let d = (fit.placements[i].along_um - fit.placements[j].along_um).abs();
            if ring { d.min(length - d) } else { d }
        };
        for i in 0..n {
            for j in (i + 1)..n {
                prop_assert!((separation(&a, i, j) - separation(&b, i, j)).abs() < 1e-6 * length);
            }
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// Whatever comment, blank and CRLF lines surround it, a bad value is reported at the
    /// line an editor shows it on.
    #[test]
    fn error_line_counts_every_line(
        fillers in prop::collection::vec(0u8..4, 0..30),
        rows_before in 0usize..20, crlf in any::<bool>(),
    ) {
        let nl = if crlf { "\r\n" } else { "\n" };
        let mut lines: Vec<String> = vec!["site,time_s".into()];
        let mut fill = fillers.iter().cycle();
        for i in 0..rows_before {
            match fill.next() {
                Some(0) => lines.push(String::new()),
                Some(1) => lines.push("# a note, with a comma".into()),
                Some(2) => lines.push("   ,  ".into()),
                _ => {}
            }
            lines.push(format!("A,{i}.5"));
        }
        if let Some(0) = fill.next() { lines.push("# just before".into()) }
        lines.push("B,not-a-time".into());
        let bad_line = lines.len() as u64;
        lines.push("C,1".into());
        let text = lines.join(nl) + nl;
        let err = read_spike_list(text.as_bytes(), "p.csv", &SpikeListOptions::default()).unwrap_err();
        prop_assert_eq!(err.place.line, Some(bad_line));
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]

    /// The bracketed median of |x| (used for the noise SD of every voltage block) equals the
    /// plain median of the absolute values (`stats::median`, numpy's rule, checked in
    /// stats_reference.rs), whatever the signal: Gaussian-like noise with spikes, few distinct
    /// values (ties across the bracket), NaN gaps, and signals periodic with the sampling
    /// stride, which send it down the fallback.
    #[test]
    fn median_of_absolute_values_is_exact(
        len in 16_000usize..40_000,
        shape in 0u8..4,
        seed in any::<u64>(),
    ) {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        let x: Vec<f64> = (0..len)
            .map(|k| match shape {
                0 => rng.random_range(-1.0..1.0) + if rng.random_range(0.0..1.0) < 0.01 { -8.0 } else { 0.0 },
                1 => f64::from(rng.random_range(-3i32..=3)),
                2 => if k % 97 == 0 { f64::NAN } else { rng.random_range(-5.0..5.0) },
                _ => if k % (len / 2048).max(1) == 0 { 100.0 } else { rng.random_range(-1.0..1.0) },
            })
            .collect();
        let plain: Vec<f64> = x.iter().filter(|v| !v.is_nan()).map(|v| v.abs()).collect();
        prop_assert_eq!(ringline::stats::median_abs(&x), ringline::stats::median(&plain));
    }
}
