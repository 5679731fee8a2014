//! The core behind the page, natively: the workbook gives the same results and exports as
//! `ringline analyze`, notebook files round-trip and are checked by SHA-256 (FIPS 180-4
//! examples), and the figures show the data they are given (read-out points at the
//! activations, the drawn model consistent with the fitted front).

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

mod common;

use common::{command_line_report, demo_files};
use ringline::fronts::AnalysisSettings;
use ringline::geometry::TrackSettings;
use ringline::import::ReadOptions;
use ringline::report::figures::{distance_from_origin_um, Size};
use ringline::report::workbook::{
    open_notebook, sha256_hex, supply_notebook_files, Embedding, FigureRequest, StepSettings,
    Workbook,
};

fn analysed(name: &str) -> Workbook {
    let (spikes, layout) = demo_files(name);
    let mut wb = Workbook::open(
        ("spikes.csv", &spikes),
        ("layout.csv", &layout),
        StepSettings::default(),
    )
    .unwrap();
    wb.analyze(AnalysisSettings::default(), &mut |_, _| {})
        .unwrap();
    wb
}

/// FIPS 180-4 (and its predecessor 180-2, appendix B) example digests.
#[test]
fn sha256_matches_the_fips_examples() {
    assert_eq!(
        sha256_hex(b"abc"),
        "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    );
    assert_eq!(
        sha256_hex(b"abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq"),
        "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1"
    );
}

/// The page's path (workbook) and the command line's path (`analyze_files`) give the same
/// report and therefore the same exported bytes.
#[test]
fn workbook_matches_the_command_line_path() {
    let cli = command_line_report("strip-16");
    let wb = analysed("strip-16");
    assert_eq!(wb.report().unwrap(), &cli);
    assert_eq!(wb.exports().unwrap(), cli.output_files());
}

/// Changing the track re-runs the steps below it: the analysis is dropped until run again.
#[test]
fn a_new_track_clears_the_analysis() {
    let mut wb = analysed("strip-16");
    let reversed = TrackSettings {
        reverse: true,
        ..TrackSettings::default()
    };
    wb.set_track(reversed).unwrap();
    assert!(wb.report().is_none());
    assert!(wb.exports().is_none());
    let err = wb.figure(
        &FigureRequest::SpeedHistogram { bins: None },
        Size::default(),
    );
    assert!(err.unwrap_err().message.contains("run the analysis first"));
}

#[test]
fn notebook_round_trip_gives_the_same_settings_and_results() {
    let (spikes, layout) = demo_files("ring-24");
    let mut settings = StepSettings::default();
    settings.analysis.fronts.resamples = 200;
    settings.analysis.fronts.seed = 11;
    let mut wb = Workbook::open(
        ("spikes.csv", &spikes),
        ("layout.csv", &layout),
        settings.clone(),
    )
    .unwrap();
    wb.analyze(settings.analysis.clone(), &mut |_, _| {})
        .unwrap();
    wb.settings.view.burst = 3;
    let text = wb.notebook_json(None, Embedding::UpToLimit);
    let opened = open_notebook("saved.ringline.json", text.as_bytes()).unwrap();
    assert_eq!(opened.files[0].sha256, sha256_hex(&spikes));
    assert_eq!(opened.files[1].sha256, sha256_hex(&layout));
    let again = Workbook::from_notebook(&opened, &mut |_, _| {}).unwrap();
    assert_eq!(again.settings, wb.settings);
    assert_eq!(again.report(), wb.report());

    // A notebook whose embedded file was changed is refused, naming the check.
    let tampered = text.replacen("site", "sitf", 1);
    let err = open_notebook("saved.ringline.json", tampered.as_bytes()).unwrap_err();
    assert!(err.message.contains("SHA-256"), "{}", err.message);
    // Not a notebook at all: the place of the JSON problem.
    let err = open_notebook("notes.json", b"{\"schema\": 1,,}").unwrap_err();
    assert!(err
        .message
        .starts_with("notes.json: this is not a ringline notebook"));
    assert_eq!(
        err.message.matches("line 1, column").count(),
        1,
        "{}",
        err.message
    );
    // A setting of the wrong type is named in words, not in Rust's type names.
    let wrong = text.replacen("\"resamples\": 200", "\"resamples\": \"many\"", 1);
    assert_ne!(wrong, text);
    let err = open_notebook("saved.ringline.json", wrong.as_bytes()).unwrap_err();
    assert!(
        err.message.contains("expected a whole number"),
        "{}",
        err.message
    );
    assert!(
        !err.message.contains("usize") && !err.message.contains(" at line "),
        "{}",
        err.message
    );

    // A notebook that refers to its files without holding them (what the page autosaves)
    // re-opens only with the files, matched by SHA-256.
    let bare = wb.notebook_json(None, Embedding::None);
    assert_eq!(bare.matches("\"content\": null").count(), 2);
    let mut refs = open_notebook("session.ringline.json", bare.as_bytes()).unwrap();
    let err = Workbook::from_notebook(&refs, &mut |_, _| {}).unwrap_err();
    assert!(
        err.to_string()
            .contains("drop it together with the notebook"),
        "{err}"
    );
    let layout_only = vec![("layout.csv".to_string(), layout.clone())];
    let err = supply_notebook_files("session", &mut refs.clone(), &layout_only).unwrap_err();
    assert!(
        err.message.contains("spikes.csv (activity file"),
        "{}",
        err.message
    );
    assert!(
        err.message.contains(&sha256_hex(&spikes)),
        "{}",
        err.message
    );
    let mut changed = spikes.clone();
    changed.push(b'\n');
    let wrong_spikes = vec![
        ("spikes.csv".to_string(), changed),
        ("layout.csv".to_string(), layout.clone()),
    ];
    let err = supply_notebook_files("session", &mut refs.clone(), &wrong_spikes).unwrap_err();
    assert!(
        err.message.contains("its contents differ"),
        "{}",
        err.message
    );
    let both = vec![
        ("a/renamed.csv".to_string(), spikes.clone()),
        ("layout.csv".to_string(), layout.clone()),
    ];
    supply_notebook_files("session", &mut refs, &both).unwrap();
    let restored = Workbook::from_notebook(&refs, &mut |_, _| {}).unwrap();
    assert_eq!(restored.settings, wb.settings);
    assert_eq!(restored.report(), wb.report());
}

/// A schema-1 notebook (written by the previous version, committed as a fixture) opens as
/// schema 2 without a study and gives the same results as its files analysed afresh; a
/// schema-2 notebook keeps the study it was given.
#[test]
fn schema_1_notebooks_migrate_and_schema_2_keeps_the_study() {
    use ringline::report::workbook::{StudyNotebook, StudyRecording};
    let old = std::fs::read("../tests/fixtures/notebook-schema-1.ringline.json").unwrap();
    let old_json: serde_json::Value = serde_json::from_slice(&old).unwrap();
    assert_eq!(old_json["schema"], 1);
    let opened = open_notebook("old.ringline.json", &old).unwrap();
    assert_eq!((opened.schema, opened.study.is_none()), (2, true));
    assert_eq!(opened.settings.analysis.fronts.resamples, 200);
    let wb = Workbook::from_notebook(&opened, &mut |_, _| {}).unwrap();
    // The results it carried are the ones its files and settings give today: the same
    // counts and words, and numbers equal to a relative 1e-4 (refinements of the fits since
    // it was written move origins by under a nanometre, and a bootstrap interval over
    // those fits by 3e-5 of itself).
    let report: serde_json::Value =
        serde_json::from_str(&serde_json::to_string(wb.report().unwrap()).unwrap()).unwrap();
    assert_json_close(
        &report["summary"],
        &old_json["results"]["summary"],
        "summary",
    );

    let manifest = ringline::import::read_manifest(
        b"recording,data,layout,condition\nr1,spikes.csv,layout.csv,control\nr2,b.csv,layout.csv,drug\n",
        "study.csv",
        Default::default(),
    )
    .unwrap();
    let status = ringline::study::RecordingStatus::analysed(
        &manifest,
        &manifest.rows[0],
        wb.report().unwrap(),
    );
    let study = StudyNotebook {
        manifest: manifest.clone(),
        recordings: vec![
            Some(StudyRecording {
                status_json: status.to_json(),
                files: wb
                    .exports()
                    .unwrap()
                    .into_iter()
                    .map(|(n, t)| (n.to_string(), t))
                    .collect(),
            }),
            None,
        ],
        open: Some(0),
    };
    let text = wb.notebook_json(Some(&study), Embedding::UpToLimit);
    let again = open_notebook("new.ringline.json", text.as_bytes()).unwrap();
    assert_eq!(again.schema, 2);
    assert_eq!(again.study.as_ref(), Some(&study));
    // A study whose entries do not match its manifest is refused.
    let mut broken = study.clone();
    broken.recordings.pop();
    let text = wb.notebook_json(Some(&broken), Embedding::UpToLimit);
    let err = open_notebook("bad.ringline.json", text.as_bytes()).unwrap_err();
    assert!(
        err.message.contains("one study entry per manifest row"),
        "{}",
        err.message
    );
    // A newer schema is refused with words, not a parse error.
    let newer = text.replacen("\"schema\": 2", "\"schema\": 3", 1);
    let err = open_notebook("newer.ringline.json", newer.as_bytes()).unwrap_err();
    assert!(err.message.contains("newer ringline"), "{}", err.message);
}

/// The activation figure puts one read-out point at every activation, labelled with its
/// site, track coordinate (µm) and time after the burst start (ms); the pointer finds it.
#[test]
fn activation_figure_reads_out_every_activation() {
    let mut wb = analysed("strip-16");
    wb.settings.view.burst = 2;
    let report = wb.report().unwrap().clone();
    let burst = &report.bursts[1];
    let fig = wb
        .figure(&FigureRequest::Activation, Size::default())
        .unwrap();
    assert!(fig
        .svg
        .starts_with("<svg xmlns=\"http://www.w3.org/2000/svg\""));
    assert!(fig.svg.contains("position along the track (µm)"));
    assert!(fig.svg.contains("(ms)"));
    assert_eq!(fig.points.len(), burst.activations.len());
    for (p, a) in fig.points.iter().zip(&burst.activations) {
        let expected = format!(
            "site {}: {:.0} µm, {:.2} ms",
            a.site,
            a.along_um.unwrap(),
            (a.time_s - burst.start_s) * 1e3
        );
        assert!(p.label.starts_with(&expected), "{} / {expected}", p.label);
        assert!(p.x_px > 0.0 && p.x_px < f64::from(fig.width_px));
        assert!(p.y_px > 0.0 && p.y_px < f64::from(fig.height_px));
        assert_eq!(fig.nearest(p.x_px + 1.0, p.y_px - 1.0, 3.0), Some(p));
    }
    assert_eq!(fig.nearest(-50.0, -50.0, 12.0), None);
}

/// Every activation's read-out says what the front check made of it: re-timed sites name
/// their first spike, set-aside sites their reason, and used sites nothing more (the
/// statuses themselves are checked against known truth in tests/hard_regimes.rs).
#[test]
fn activation_read_out_names_each_sites_status() {
    use ringline::fronts::ActivationStatus;
    let mut wb = analysed("strip-16");
    let report = wb.report().unwrap().clone();
    let mut seen = std::collections::HashSet::new();
    for burst in &report.bursts {
        wb.settings.view.burst = burst.burst;
        let fig = wb
            .figure(&FigureRequest::Activation, Size::default())
            .unwrap();
        for (p, a) in fig.points.iter().zip(&burst.activations) {
            seen.insert(a.status.as_str());
            match a.status {
                ActivationStatus::Used => assert!(!p.label.contains(';'), "{}", p.label),
                ActivationStatus::Retimed => assert!(
                    p.label
                        .contains(&format!("its first spike: t = {:.4} s", a.first_spike_s)),
                    "{}",
                    p.label
                ),
                other => assert!(p.label.ends_with(other.describe()), "{}", p.label),
            }
        }
    }
    // The demo strip has background firing: some sites are re-timed.
    assert!(seen.contains("retimed"), "{seen:?}");
}

/// The map of where bursts start has one read-out per site that activated, saying how many
/// bursts it led, as `summary.leaders`; the recruitment figure's median read-outs at 10%, 50%
/// and 90% are the summary's median recruitment times (both checked against generator truth
/// and by hand in tests/burst_order.rs).
#[test]
fn leader_map_and_recruitment_figures_carry_the_summary() {
    let wb = analysed("dish-8x8");
    let report = wb.report().unwrap().clone();
    let s = &report.summary;
    let fig = wb.figure(&FigureRequest::Leaders, Size::default()).unwrap();
    assert!(fig.svg.contains("x (µm)") && fig.svg.contains("y (µm)"));
    assert_eq!(fig.points.len(), s.leaders.len());
    for (p, l) in fig.points.iter().zip(&s.leaders) {
        let expected = format!(
            "site {}: led {} of {} bursts",
            l.site, l.bursts_leading, s.burst_count
        );
        assert!(p.label.starts_with(&expected), "{} / {expected}", p.label);
    }
    let fig = wb
        .figure(&FigureRequest::Recruitment, Size::default())
        .unwrap();
    assert!(fig.svg.contains("(ms)"));
    let medians = s.median_recruitment_ms.unwrap();
    assert_eq!(fig.points.len(), 3);
    for (p, (share, ms)) in fig.points.iter().zip([10, 50, 90].iter().zip(medians)) {
        assert!(
            p.label
                .starts_with(&format!("{share}% of the active sites within {ms:.1} ms")),
            "{} / {ms}",
            p.label
        );
    }
}

/// The drawn model is the fitted one: on every kind of track, t = start + d / v with the
/// distance the figure uses leaves residuals about as large as the fit's own RMS residual.
#[test]
fn drawn_model_matches_the_fitted_front() {
    for name in ["strip-16", "ring-24", "dish-8x8"] {
        let wb = analysed(name);
        let report = wb.report().unwrap();
        let track = &report.track.track;
        let mut checked = 0;
        for b in &report.bursts {
            let Some(f) = &b.front else { continue };
            let residuals: Vec<f64> = b
                .activations
                .iter()
                .filter(|a| a.used)
                .map(|a| {
                    let d = distance_from_origin_um(f, track, a.along_um, [a.x_um, a.y_um])
                        .unwrap_or_else(|| panic!("{name}: no distance for {f:?}"));
                    (a.time_s - f.start_s) * 1e3 - d / f.speed_mm_s
                })
                .collect();
            let rms =
                (residuals.iter().map(|r| r * r).sum::<f64>() / residuals.len() as f64).sqrt();
            assert!(
                rms <= 2.0 * f.residual_rms_ms + 0.05,
                "{name} burst {} ({}): model residual {rms:.3} ms against the fit's {:.3} ms",
                b.burst,
                f.model,
                f.residual_rms_ms
            );
            checked += 1;
        }
        assert!(checked >= 5, "{name}: only {checked} fronts");
        // Every figure draws for this recording.
        for request in [
            FigureRequest::SiteMap,
            FigureRequest::Raster,
            FigureRequest::PopulationRate,
            FigureRequest::IntervalHistogram { bins: None },
            FigureRequest::Activation,
            FigureRequest::SpeedOverTime,
            FigureRequest::SpeedHistogram { bins: None },
            FigureRequest::InitiationSites,
            FigureRequest::Reliability,
        ] {
            let fig = wb.figure(&request, Size::default());
            assert!(fig.is_ok(), "{name} {request:?}: {:?}", fig.err());
        }
    }
}

/// An imaging recording gets a raster and a population rate too, drawn from the calcium
/// events the analysis found: before the analysis the raster asks for it; after it, the
/// raster has one tick per event onset in its window, the events being what
/// `detect::calcium` finds on the traces (checked against known onsets in
/// tests/calcium.rs), and the rate is labelled in events/s.
#[test]
fn imaging_recordings_get_an_event_raster_and_rate() {
    use ringline::detect::calcium::{delta_f_over_f, event_onsets};
    use ringline::recording::Activity;
    let dir = format!(
        "{}/../demo-data/network-strip-16",
        env!("CARGO_MANIFEST_DIR")
    );
    let traces = std::fs::read(format!("{dir}/traces.csv")).unwrap();
    let layout = std::fs::read(format!("{dir}/roi_layout.csv")).unwrap();
    let mut wb = Workbook::open(
        ("traces.csv", &traces),
        ("roi_layout.csv", &layout),
        StepSettings::default(),
    )
    .unwrap();
    let size = Size {
        width_px: 800,
        height_px: 500,
    };
    let before = wb.figure(&FigureRequest::Raster, size).unwrap_err();
    assert!(
        before.message.contains("run the analysis first"),
        "{}",
        before.message
    );
    let settings = AnalysisSettings::default();
    wb.analyze(settings.clone(), &mut |_, _| {}).unwrap();
    let raster = wb.figure(&FigureRequest::Raster, size).unwrap();
    assert!(raster.svg.contains("Calcium event onsets by site"));
    // The events, found independently on the same traces.
    let recording = ringline::import::read_recording(
        ("traces.csv", &traces),
        ("roi_layout.csv", &layout),
        &ReadOptions::default(),
    )
    .unwrap();
    let Activity::Traces {
        time_s,
        frame_interval_s,
        values,
    } = &recording.activity
    else {
        panic!("expected traces");
    };
    let rate = 1.0 / frame_interval_s;
    let [from_s, to_s] = wb.window_s();
    let in_window: usize = values
        .iter()
        .map(|f| {
            event_onsets(
                &delta_f_over_f(f, rate, &settings.calcium),
                time_s,
                rate,
                &settings.calcium,
            )
            .into_iter()
            .filter(|&t| t >= from_s && t <= to_s)
            .count()
        })
        .sum();
    // Ticks are `M x y v length` segments, one path per row (paths of nothing else).
    let ticks: usize = raster
        .svg
        .split("<path d=\"")
        .skip(1)
        .map(|p| p.split('"').next().unwrap_or(""))
        .filter(|d| {
            d.starts_with('M')
                && d.chars().all(|c| {
                    c == 'M' || c == 'v' || c == ' ' || c == '.' || c == '-' || c.is_ascii_digit()
                })
        })
        .map(|d| d.matches('M').count())
        .sum();
    assert!(in_window > 20, "{in_window} events in the window");
    assert_eq!(ticks, in_window);
    let rate_figure = wb.figure(&FigureRequest::PopulationRate, size).unwrap();
    assert!(rate_figure.svg.contains("rate (events/s)"));
}

/// Histogram bins against `numpy.histogram_bin_edges` (tests/fixtures/histogram_reference.json,
/// made by scripts/reference/make_fixtures.py): Freedman-Diaconis as numpy's `bins='fd'`,
/// Sturges as `bins='sturges'`, and Sturges where the IQR is zero (numpy's 'fd' gives one bin).
#[test]
fn histogram_bins_follow_numpy() {
    use ringline::report::figures::{bin_edges, BinRule};
    let fixture: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string("../tests/fixtures/histogram_reference.json").unwrap(),
    )
    .unwrap();
    let floats = |v: &serde_json::Value| -> Vec<f64> {
        v.as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect()
    };
    for case in fixture["cases"].as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let values = floats(&case["values"]);
        let fd = floats(&case["fd_edges"]);
        let sturges = floats(&case["sturges_edges"]);
        let ours_sturges = bin_edges(&values, BinRule::Sturges).unwrap();
        assert_eq!(ours_sturges.len(), sturges.len(), "{name}: Sturges bins");
        for (a, b) in ours_sturges.iter().zip(&sturges) {
            assert!(
                (a - b).abs() <= 1e-12 * b.abs().max(1.0),
                "{name}: {a} vs {b}"
            );
        }
        let ours = bin_edges(&values, BinRule::FreedmanDiaconis).unwrap();
        let expected = if fd.len() == 2 { &sturges } else { &fd };
        assert_eq!(ours.len(), expected.len(), "{name}: Freedman-Diaconis bins");
        for (a, b) in ours.iter().zip(expected) {
            assert!(
                (a - b).abs() <= 1e-12 * b.abs().max(1.0),
                "{name}: {a} vs {b}"
            );
        }
    }
    // A count is taken as given, within the bound.
    assert_eq!(
        bin_edges(&[1.0, 2.0, 3.0], BinRule::Count(7))
            .unwrap()
            .len(),
        8
    );
    assert_eq!(
        bin_edges(&[1.0, 2.0, 3.0], BinRule::Count(10_000))
            .unwrap()
            .len(),
        201
    );
    assert!(bin_edges(&[f64::NAN], BinRule::FreedmanDiaconis).is_none());
}

/// Dragging across the raster zooms to the data values under the pointer: the pixels map
/// linearly onto the drawn time axis (the figure's own axis, read back from its SVG ticks'
/// positions), and the redrawn raster shows that window.
#[test]
fn dragging_across_the_raster_zooms_to_the_time_under_the_pointer() {
    let mut wb = analysed("strip-16");
    let size = Size::default();
    let raster = wb.figure(&FigureRequest::Raster, size).unwrap();
    let axis = raster.x_axis.unwrap();
    let [from, to] = wb.window_s();
    assert_eq!((axis.from, axis.to), (from, to));
    // A tick label's x position in the SVG is where its value lies on the axis.
    let svg = &raster.svg;
    let tick = svg.find(">10</text>").expect("a tick at 10 s");
    let x_attr = svg[..tick].rfind("x=\"").unwrap();
    let tick_px: f64 = svg[x_attr + 3..][..svg[x_attr + 3..].find('"').unwrap()]
        .parse()
        .unwrap();
    assert!((axis.value_at(tick_px) - 10.0).abs() < 0.01 * (to - from));
    let (a, b) = (
        axis.from_px + 0.25 * (axis.to_px - axis.from_px),
        axis.from_px + 0.75 * (axis.to_px - axis.from_px),
    );
    let window = wb.zoom_to_pixels(&raster, b, a).unwrap();
    let expected = [from + 0.25 * (to - from), from + 0.75 * (to - from)];
    assert!((window[0] - expected[0]).abs() < 1e-9 && (window[1] - expected[1]).abs() < 1e-9);
    assert_eq!(wb.settings.view.window_s, Some(window));
    let zoomed = wb.figure(&FigureRequest::Raster, size).unwrap();
    assert!(zoomed
        .svg
        .contains(&format!("{:.1}-{:.1} s", window[0], window[1])));
    // A click is not a drag.
    assert!(wb.zoom_to_pixels(&zoomed, a, a).is_err());
}

/// A reader that gives its bytes `step` at a time (as a large file arrives in pieces).
struct Pieces {
    bytes: Vec<u8>,
    at: usize,
    step: usize,
}

impl std::io::Read for Pieces {
    fn read(&mut self, out: &mut [u8]) -> std::io::Result<usize> {
        let n = self.step.min(out.len()).min(self.bytes.len() - self.at);
        out[..n].copy_from_slice(&self.bytes[self.at..self.at + n]);
        self.at += n;
        Ok(n)
    }
}

/// A large file in the page is read as a stream, never held whole: the recording, its
/// analysis and the located errors are those of reading it whole, however the pieces fall
/// (pieces of 1, 3 and 7 bytes cut every multi-byte character and line end), and its
/// SHA-256 is taken on the way (FIPS 180-4, as `sha256_hex` of the whole file).
#[test]
fn a_streamed_activity_file_reads_as_the_whole_file_does() {
    let (spikes, layout) = demo_files("strip-16");
    let whole = analysed("strip-16");
    for step in [1, 3, 7, 4096] {
        let reader = Pieces {
            bytes: spikes.clone(),
            at: 0,
            step,
        };
        let mut wb = Workbook::open_stream(
            "spikes.csv",
            &spikes[..spikes.len().min(65536)],
            spikes.len() as u64,
            Box::new(reader),
            ("layout.csv", &layout),
            StepSettings::default(),
            &mut |_, _| {},
        )
        .unwrap();
        wb.analyze(AnalysisSettings::default(), &mut |_, _| {})
            .unwrap();
        assert_eq!(wb.report(), whole.report(), "pieces of {step} bytes");
        let held = wb.held_files();
        assert_eq!(held[0].sha256, sha256_hex(&spikes));
        assert_eq!(held[0].size_bytes, spikes.len() as u64);
        assert!(held[0].bytes.is_none());
        assert_eq!(
            wb.files_not_embedded(),
            vec![("spikes.csv".to_string(), spikes.len() as u64)]
        );
        assert_eq!(
            wb.notebook_note().unwrap(),
            format!(
                "The notebook names spikes.csv ({}) by its SHA-256 without holding it (too large, or not text). Keep that file with the notebook, and drop both together to re-open it.",
                ringline::place::bytes(spikes.len() as u64)
            )
        );
    }
    // Multi-byte site names cut by the pieces, and a byte that is not UTF-8 on line 5 (after a
    // comment line): the same located error as reading the file whole.
    let text = "# ünits: ms\nsite,time_ms\nélan,1.5\nñu,2.5\nzz\u{00e9}\u{00e9},3\n";
    let mut bad = text.as_bytes().to_vec();
    let at = bad.len() - 4;
    bad[at] = 0xff;
    let layout = "site,x_um,y_um\nélan,0,0\nñu,100,0\nzzéé,200,0\n";
    for bytes in [text.as_bytes().to_vec(), bad] {
        let whole = ringline::import::read_recording(
            ("s.csv", &bytes),
            ("l.csv", layout.as_bytes()),
            &ReadOptions::default(),
        );
        for step in [1, 2, 3, 5] {
            let streamed = ringline::import::read_recording_with(
                (
                    "s.csv",
                    ringline::import::TextSource::Stream {
                        head: &bytes,
                        len: bytes.len() as u64,
                        reader: Box::new(Pieces {
                            bytes: bytes.clone(),
                            at: 0,
                            step,
                        }),
                    },
                ),
                ("l.csv", layout.as_bytes()),
                &ReadOptions::default(),
                &mut |_, _| {},
            );
            match (&whole, &streamed) {
                (Ok(a), Ok(b)) => assert_eq!(a, b, "pieces of {step}"),
                (Err(a), Err(b)) => {
                    assert_eq!(a.to_string(), b.to_string(), "pieces of {step}");
                    assert_eq!(a.place.line, Some(5), "{a}");
                }
                _ => panic!("pieces of {step}: {whole:?} against {streamed:?}"),
            }
        }
    }
}

/// The page's sentences state the report's numbers with their units (one wording, in the
/// core): the track, every burst's front, the step paragraphs (the text report's lines).
#[test]
fn the_page_sentences_state_the_reports_numbers_with_units() {
    use ringline::report::page_text::{burst_sentence, step_texts, track_sentence};
    let wb = analysed("strip-16");
    let r = wb.report().unwrap();
    let track = track_sentence(wb.inspection());
    assert!(
        track.starts_with(&format!("{} sites", wb.inspection().site_count)),
        "{track}"
    );
    assert!(
        track.contains(&format!("track: {}", r.track.kind)),
        "{track}"
    );
    for b in &r.bursts {
        let s = burst_sentence(b);
        assert!(
            s.starts_with(&format!(
                "Burst {} ({:.3} s to {:.3} s)",
                b.burst, b.start_s, b.end_s
            )),
            "{s}"
        );
        match &b.front {
            Some(f) => assert!(
                s.contains(&format!("front at {:.1} mm/s", f.speed_mm_s)),
                "{s}"
            ),
            None => assert!(s.contains("no front"), "{s}"),
        }
    }
    let steps = step_texts(r);
    let text = r.to_text();
    for (paragraph, label) in [(&steps.rhythm, "Rhythm"), (&steps.synchrony, "Synchrony")] {
        let line = text.lines().find(|l| l.starts_with(label)).unwrap();
        assert_eq!(*paragraph, format!("{label}: {}.", line[15..].trim()));
    }
    assert!(steps
        .bursts
        .starts_with(&format!("Bursts: {}", r.summary.burst_count)));
}

/// Two JSON values equal in shape, strings and integers, with numbers equal to a relative
/// 1e-4 (absolute 1e-9 near zero).
fn assert_json_close(a: &serde_json::Value, b: &serde_json::Value, at: &str) {
    use serde_json::Value;
    match (a, b) {
        (Value::Object(x), Value::Object(y)) => {
            assert_eq!(x.len(), y.len(), "{at}: keys differ");
            for (k, v) in x {
                assert_json_close(v, &y[k], &format!("{at}.{k}"));
            }
        }
        (Value::Array(x), Value::Array(y)) => {
            assert_eq!(x.len(), y.len(), "{at}: lengths differ");
            for (i, (v, w)) in x.iter().zip(y).enumerate() {
                assert_json_close(v, w, &format!("{at}[{i}]"));
            }
        }
        (Value::Number(x), Value::Number(y)) if x.is_f64() || y.is_f64() => {
            let (x, y) = (x.as_f64().unwrap(), y.as_f64().unwrap());
            assert!(
                (x - y).abs() <= 1e-4 * x.abs().max(y.abs()) + 1e-9,
                "{at}: {x} against {y}"
            );
        }
        _ => assert_eq!(a, b, "{at}"),
    }
}

/// The study step's table: a failed row says why, a row whose files are missing says it
/// cannot run, the rest are not analysed yet; counts are whole numbers from the status, and
/// the sentence counts what was tried (worked out by hand from the rows given).
#[test]
fn the_study_table_words_each_rows_state() {
    use ringline::report::page_text::{study_view, StudyRowState};
    let manifest = ringline::import::read_manifest(
        b"recording,data,layout,dose\nr1,a.csv,l.csv,0\nr2,b.csv,l.csv,1\nr3,c.csv,l.csv,2\n",
        "study.csv",
        ringline::import::ImportLimits::default(),
    )
    .unwrap();
    let failed = ringline::study::RecordingStatus::failed(
        &manifest,
        &manifest.rows[0],
        "a.csv, line 3: expected a time".into(),
    )
    .to_json();
    let rows = [
        StudyRowState {
            status_json: Some(failed),
            ..Default::default()
        },
        StudyRowState {
            problem: Some("b.csv was not dropped".into()),
            ..Default::default()
        },
        StudyRowState::default(),
    ];
    let view = study_view(&manifest, &rows);
    assert_eq!(
        view.table.header,
        [
            "recording",
            "dose",
            "status",
            "bursts",
            "fronts",
            "median speed (mm/s) [95% CI]"
        ]
    );
    assert_eq!(
        view.table.rows,
        [
            [
                "r1",
                "0",
                "failed: a.csv, line 3: expected a time",
                "",
                "",
                ""
            ],
            ["r2", "1", "cannot run: b.csv was not dropped", "", "", ""],
            ["r3", "2", "not analysed yet", "", "", ""],
        ]
    );
    assert_eq!(view.problem, [true, true, false]);
    assert!(!view.complete);
    assert!(view
        .sentence
        .starts_with("3 recordings from study.csv; 1 analysed or tried, 1 failed."));
}
