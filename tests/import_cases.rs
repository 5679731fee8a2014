//! Importers, case by case: accepted spellings of the formats, and every bad input with the
//! place its error must name. Expected values are worked out by hand from the inputs.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

mod common;

use approx::assert_relative_eq;
use common::{bad_cases, GOOD_LAYOUT};
use ringline::import::{
    read_layout, read_recording, read_roi_traces, read_spike_list, sniff_file_kind, FileKind,
    ImportLimits, ImportProblem, LayoutOptions, ReadOptions, SpikeListOptions, TimeUnit,
    TraceOptions,
};
use ringline::recording::Activity;

fn spikes(text: &[u8]) -> ringline::import::SpikeList {
    read_spike_list(text, "spikes.csv", &SpikeListOptions::default()).expect("reads")
}

fn times(list: &ringline::import::SpikeList, site: &str) -> Vec<f64> {
    list.sites
        .iter()
        .find(|s| s.site == site)
        .map(|s| s.times_s.clone())
        .unwrap_or_default()
}

// ---- spike lists: accepted input ----

#[test]
fn spike_list_with_bom_crlf_comments_and_blank_lines() {
    let list = spikes(
        b"\xEF\xBB\xBF# exported by hand\r\nsite,time_s\r\n\r\nA,0.25\r\n# pause\r\nB,0.5\r\n",
    );
    assert_eq!(list.row_count, 2);
    assert_eq!(times(&list, "A"), vec![0.25]);
    assert_eq!(times(&list, "B"), vec![0.5]);
}

#[test]
fn spike_list_tab_and_semicolon_with_decimal_comma() {
    let tsv = spikes(b"electrode\ttime_ms\nE1\t12.5\nE2\t13\n");
    assert_eq!(times(&tsv, "E1"), vec![0.0125]);
    let semi = spikes(b"site;time_ms\nE1;12,5\nE2;13\n");
    assert_eq!(times(&semi, "E1"), vec![0.0125]);
}

#[test]
fn spike_list_units_from_the_header() {
    assert_eq!(times(&spikes(b"site,time_us\nA,1500\n"), "A"), vec![0.0015]);
    assert_eq!(times(&spikes(b"site,Time (ms)\nA,1500\n"), "A"), vec![1.5]);
    assert_eq!(times(&spikes(b"site,time [s]\nA,1.5\n"), "A"), vec![1.5]);
    let opts = SpikeListOptions {
        time_unit: Some(TimeUnit::Milliseconds),
        ..SpikeListOptions::default()
    };
    let plain = read_spike_list(b"site,time\nA,20\n", "s.csv", &opts).unwrap();
    assert_relative_eq!(plain.sites[0].times_s[0], 0.02, max_relative = 1e-15);
}

#[test]
fn spike_list_unit_option_that_contradicts_the_header_is_an_error() {
    let opts = SpikeListOptions {
        time_unit: Some(TimeUnit::Seconds),
        ..SpikeListOptions::default()
    };
    let err = read_spike_list(b"site,time_ms\nA,20\n", "s.csv", &opts).unwrap_err();
    assert_eq!(err.problem, ImportProblem::BadOption);
    assert!(err.message.contains("milliseconds"), "{}", err.message);
}

#[test]
fn unsorted_rows_are_sorted_and_reported() {
    let list = spikes(b"site,time_s\nA,3\nB,1\nA,1\nA,2\n");
    assert_eq!(times(&list, "A"), vec![1.0, 2.0, 3.0]);
    assert!(list.notices.iter().any(|n| n.message.contains("sorted")));
}

#[test]
fn extra_columns_are_left_out_and_reported() {
    let list = spikes(b"site,time_s,amplitude_uv,unit\nA,1,-40,3\n");
    assert_eq!(list.ignored_columns, vec!["amplitude_uv", "unit"]);
    assert_eq!(list.notices.len(), 2);
    assert_eq!(
        list.notices[0].place.column.as_ref().map(|c| c.number),
        Some(3)
    );
}

#[test]
fn a_column_that_only_starts_like_a_time_is_not_the_time_column() {
    let list = spikes(b"site,t_peak,time_ms,timestamp\nA,3,1.5,x\n");
    assert_eq!(times(&list, "A"), vec![0.0015]);
    assert_eq!(list.ignored_columns, vec!["t_peak", "timestamp"]);
    let traces = read_roi_traces(
        b"time_s,t_cell1,t_cell2\n0,1,2\n0.1,1,2\n",
        "t.csv",
        &TraceOptions::default(),
    )
    .unwrap();
    assert_eq!(traces.rois.len(), 2);
}

#[test]
fn time_quantum_follows_the_written_decimals() {
    // Two decimals of milliseconds: the file cannot express steps under 10 us.
    let list = spikes(b"site,time_ms\nA,1.25\nA,2.5\n");
    assert_relative_eq!(list.time_quantum_s.unwrap(), 1e-5, max_relative = 1e-12);
    assert_eq!(spikes(b"site,time_s\nA,1e-3\n").time_quantum_s, None);
}

#[test]
fn file_kind_is_detected_from_the_header() {
    assert_eq!(
        sniff_file_kind(b"site,time_ms\nA,1\n"),
        Some(FileKind::SpikeList)
    );
    assert_eq!(
        sniff_file_kind(b"site,x_um,y_um\nA,1,2\n"),
        Some(FileKind::Layout)
    );
    assert_eq!(
        sniff_file_kind(b"time_s,roi1,roi2\n0,1,2\n"),
        Some(FileKind::RoiTraces)
    );
}

// ---- layouts ----

#[test]
fn layout_in_millimetres_is_converted() {
    let layout = read_layout(
        b"site,x_mm,y_mm\nA,1.5,-0.25\n",
        "l.csv",
        &LayoutOptions::default(),
    )
    .unwrap();
    assert_relative_eq!(layout.sites[0].x_um, 1500.0);
    assert_relative_eq!(layout.sites[0].y_um, -250.0);
}

#[test]
fn silent_sites_are_kept_and_reported() {
    let rec = read_recording(
        ("s.csv", b"site,time_s\nA,1\nC,2\n"),
        ("l.csv", GOOD_LAYOUT),
        &ReadOptions::default(),
    )
    .unwrap();
    assert_eq!(rec.sites.len(), 4);
    assert_eq!(rec.silent_sites(), vec!["B", "D"]);
    assert!(rec
        .notices
        .iter()
        .any(|n| n.message.contains("silent: B, D")));
}

// ---- ROI traces ----

#[test]
fn traces_with_gaps_report_each_gap_with_its_lines() {
    let text = b"time_s,r1,r2\n0.0,1,5\n0.1,,5\n0.2,NaN,6\n0.3,2,NA\n";
    let t = read_roi_traces(text, "t.csv", &TraceOptions::default()).unwrap();
    assert_eq!(t.rois.len(), 2);
    assert_relative_eq!(t.frame_interval_s, 0.1, max_relative = 1e-12);
    assert_eq!(t.gaps.len(), 2);
    assert_eq!(
        (
            t.gaps[0].roi.as_str(),
            t.gaps[0].first_line,
            t.gaps[0].last_line,
            t.gaps[0].frames
        ),
        ("r1", 3, 4, 2)
    );
    assert_eq!(
        (
            t.gaps[1].roi.as_str(),
            t.gaps[1].first_line,
            t.gaps[1].frames
        ),
        ("r2", 5, 1)
    );
    assert!(t.rois[0].values[1].is_nan());
}

#[test]
fn traces_from_a_frame_rate() {
    let opts = TraceOptions {
        frame_rate_hz: Some(20.0),
        ..TraceOptions::default()
    };
    let t = read_roi_traces(b"frame,r1\n0,1\n1,2\n2,3\n", "t.csv", &opts).unwrap();
    assert_eq!(t.time_s, vec![0.0, 0.05, 0.1]);
    assert_eq!(t.ignored_columns, vec!["frame"]);
    assert_eq!(t.rois.len(), 1);
}

#[test]
fn traces_join_their_layout() {
    let rec = read_recording(
        ("t.csv", b"time_ms,A,C\n0,1,2\n50,1,2\n"),
        ("l.csv", GOOD_LAYOUT),
        &ReadOptions::default(),
    )
    .unwrap();
    let Activity::Traces {
        frame_interval_s, ..
    } = rec.activity
    else {
        panic!("expected traces");
    };
    assert_relative_eq!(frame_interval_s, 0.05, max_relative = 1e-12);
    assert_eq!(
        rec.sites.iter().map(|s| s.id.as_str()).collect::<Vec<_>>(),
        vec!["A", "C"]
    );
    assert!(rec.notices.iter().any(|n| n.message.contains("B, D")));
}

// ---- limits ----

#[test]
fn byte_limit_is_a_clear_error() {
    let opts = SpikeListOptions {
        limits: ImportLimits {
            max_bytes: 10,
            ..ImportLimits::default()
        },
        ..SpikeListOptions::default()
    };
    let err = read_spike_list(b"site,time_s\nA,1\n", "s.csv", &opts).unwrap_err();
    assert_eq!(err.problem, ImportProblem::TooLarge);
}

// ---- every bad case names its place ----

#[test]
fn every_bad_case_names_file_line_and_column() {
    for case in bad_cases() {
        let mut options = ReadOptions::default();
        if case.args.contains(&"traces") {
            options.kind = Some(FileKind::RoiTraces);
        }
        if let Some(i) = case.args.iter().position(|a| *a == "--max-rows") {
            options.limits.max_rows = case.args[i + 1].parse().unwrap();
        }
        let err = read_recording(
            ("act.csv", case.activity),
            ("lay.csv", case.layout),
            &options,
        )
        .expect_err(case.name);
        let file = if case.file == "activity" {
            "act.csv"
        } else {
            "lay.csv"
        };
        assert_eq!(
            err.place.file.as_deref(),
            Some(file),
            "{}: {err}",
            case.name
        );
        assert_eq!(err.place.line, case.line, "{}: {err}", case.name);
        assert_eq!(
            err.place.column.as_ref().map(|c| c.number),
            case.column,
            "{}: {err}",
            case.name
        );
        assert!(
            err.message.contains(case.words),
            "{}: '{}' lacks '{}'",
            case.name,
            err.message,
            case.words
        );
    }
}
