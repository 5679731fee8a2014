//! Inputs shared by the tests: bad inputs for the import and command-line tests, and the
//! demo recordings with their command-line analysis.
#![allow(dead_code)]

/// The spike list and layout of a demo recording in demo-data/.
pub fn demo_files(name: &str) -> (Vec<u8>, Vec<u8>) {
    let dir = format!("{}/../demo-data/{name}", env!("CARGO_MANIFEST_DIR"));
    (
        std::fs::read(format!("{dir}/spikes.csv")).expect("demo spike list"),
        std::fs::read(format!("{dir}/layout.csv")).expect("demo layout"),
    )
}

/// Path of a scenario file in demo-data/scenarios/.
pub fn demo_scenario_path(file: &str) -> String {
    format!(
        "{}/../demo-data/scenarios/{file}",
        env!("CARGO_MANIFEST_DIR")
    )
}

/// A spiking-network scenario from demo-data/scenarios/.
pub fn demo_network_scenario(file: &str) -> ringline::simulate::network::NetworkScenario {
    let text = std::fs::read_to_string(demo_scenario_path(file)).expect("demo scenario");
    match ringline::simulate::parse_scenario(&text).expect("the demo scenario parses") {
        ringline::simulate::Scenario::Network(s) => *s,
        ringline::simulate::Scenario::Fronts(_) => panic!("{file}: expected a network scenario"),
    }
}

/// What `ringline analyze` reports on a demo recording with default settings (its library
/// path, `analyze_files`).
pub fn command_line_report(name: &str) -> ringline::report::AnalysisReport {
    let (spikes, layout) = demo_files(name);
    ringline::analyze_files(
        ("spikes.csv", &spikes),
        ("layout.csv", &layout),
        &ringline::import::ReadOptions::default(),
        &ringline::geometry::TrackSettings::default(),
        &ringline::fronts::AnalysisSettings::default(),
        &mut |_, _| {},
    )
    .expect("the demo analyses")
}

/// A bad input and where its error must point.
pub struct BadCase {
    pub name: &'static str,
    /// Spike list (or ROI traces) file content.
    pub activity: &'static [u8],
    /// Layout file content.
    pub layout: &'static [u8],
    /// The file the error must name: "activity" or "layout".
    pub file: &'static str,
    /// Expected line and column numbers (counted from 1), when the error has them.
    pub line: Option<u64>,
    pub column: Option<usize>,
    /// Words the message must contain.
    pub words: &'static str,
    /// Extra command-line arguments.
    pub args: &'static [&'static str],
}

pub const GOOD_LAYOUT: &[u8] = b"site,x_um,y_um\nA,0,0\nB,200,0\nC,400,0\nD,600,0\n";
pub const GOOD_SPIKES: &[u8] = b"site,time_s\nA,0.5\nB,0.6\nC,0.7\n";

pub fn bad_cases() -> Vec<BadCase> {
    let mut cases = basic_bad_cases();
    cases.extend(bad_cases_after_comments());
    cases
}

fn basic_bad_cases() -> Vec<BadCase> {
    let case = |name, activity, layout, file, line, column, words| BadCase {
        name,
        activity,
        layout,
        file,
        line,
        column,
        words,
        args: &[],
    };
    vec![
        case(
            "empty spike list",
            b"",
            GOOD_LAYOUT,
            "activity",
            None,
            None,
            "empty",
        ),
        case(
            "only comments",
            b"# nothing\n\n# here\n",
            GOOD_LAYOUT,
            "activity",
            None,
            None,
            "empty",
        ),
        case(
            "header only",
            b"site,time_s\n",
            GOOD_LAYOUT,
            "activity",
            None,
            None,
            "no spike rows",
        ),
        case(
            "text in the time column",
            b"site,time_ms\nA,1.0\nB,abc\n",
            GOOD_LAYOUT,
            "activity",
            Some(3),
            Some(2),
            "found 'abc'",
        ),
        case(
            "negative time",
            b"site,time_s\nA,1.0\nB,-0.5\n",
            GOOD_LAYOUT,
            "activity",
            Some(3),
            Some(2),
            "0 or later",
        ),
        case(
            "infinite time",
            b"site,time_s\nA,inf\n",
            GOOD_LAYOUT,
            "activity",
            Some(2),
            Some(2),
            "found 'inf'",
        ),
        case(
            "NaN time",
            b"site,time_s\nA,1\nA,NaN\n",
            GOOD_LAYOUT,
            "activity",
            Some(3),
            Some(2),
            "found 'NaN'",
        ),
        case(
            "empty time",
            b"site,time_s\nA,\n",
            GOOD_LAYOUT,
            "activity",
            Some(2),
            Some(2),
            "empty field",
        ),
        case(
            "no time column",
            b"site,amplitude\nA,1\n",
            GOOD_LAYOUT,
            "activity",
            Some(1),
            None,
            "time column",
        ),
        case(
            "time without unit",
            b"site,time\nA,1\n",
            GOOD_LAYOUT,
            "activity",
            None,
            Some(2),
            "no unit",
        ),
        case(
            "unknown time unit",
            b"site,time_min\nA,1\n",
            GOOD_LAYOUT,
            "activity",
            None,
            Some(2),
            "found 'min'",
        ),
        case(
            "no site column",
            b"time_s\n1.0\n",
            GOOD_LAYOUT,
            "activity",
            Some(1),
            None,
            "site column",
        ),
        case(
            "ragged row",
            b"site,time_s\nA,1.0\nB,2.0,7\n",
            GOOD_LAYOUT,
            "activity",
            Some(3),
            None,
            "expected 2 fields",
        ),
        case(
            "empty site",
            b"site,time_s\n,1.0\n",
            GOOD_LAYOUT,
            "activity",
            Some(2),
            Some(1),
            "site identifier",
        ),
        case(
            "not UTF-8",
            b"site,time_s\nA,1.0\n\xff\xfe,2\n",
            GOOD_LAYOUT,
            "activity",
            Some(3),
            None,
            "UTF-8",
        ),
        case(
            "duplicate layout site",
            GOOD_SPIKES,
            b"site,x_um,y_um\nA,0,0\nB,1,0\nA,2,0\n",
            "layout",
            Some(4),
            Some(1),
            "first on line 2",
        ),
        case(
            "layout without y",
            GOOD_SPIKES,
            b"site,x_um\nA,0\n",
            "layout",
            Some(1),
            None,
            "y_um",
        ),
        case(
            "layout text position",
            GOOD_SPIKES,
            b"site,x_um,y_um\nA,0,0\nB,zero,0\n",
            "layout",
            Some(3),
            Some(2),
            "x position",
        ),
        case(
            "layout without units",
            GOOD_SPIKES,
            b"site,x,y\nA,0,0\n",
            "layout",
            None,
            Some(2),
            "no unit",
        ),
        case(
            "spikes at unplaced sites",
            b"site,time_s\nA,1\nQ,2\nR,3\n",
            GOOD_LAYOUT,
            "activity",
            None,
            None,
            "no position in the layout",
        ),
        BadCase {
            args: &["--max-rows", "5"],
            ..case(
                "too many rows",
                b"site,time_s\nA,1\nB,2\nC,3\nA,4\nB,5\nC,6\n",
                GOOD_LAYOUT,
                "activity",
                Some(7),
                None,
                "more than 5 data rows",
            )
        },
        BadCase {
            args: &["--kind", "traces"],
            ..case(
                "traces without a time base",
                b"A,B\n1,2\n3,4\n",
                GOOD_LAYOUT,
                "activity",
                Some(1),
                None,
                "frame rate",
            )
        },
        BadCase {
            args: &["--kind", "traces"],
            ..case(
                "traces with times going back",
                b"time_s,A,B\n0,1,2\n0.1,1,2\n0.05,1,2\n",
                GOOD_LAYOUT,
                "activity",
                Some(4),
                Some(1),
                "increase",
            )
        },
        BadCase {
            args: &["--kind", "traces"],
            ..case(
                "traces with text values",
                b"time_s,A,B\n0,1,2\n0.1,x,2\n",
                GOOD_LAYOUT,
                "activity",
                Some(3),
                Some(2),
                "fluorescence value",
            )
        },
    ]
}

/// Bad inputs behind comment and blank lines: line numbers must count every line.
pub fn bad_cases_after_comments() -> Vec<BadCase> {
    vec![
        BadCase {
            name: "text time after comments",
            activity:
                b"# recorded on rig 2\n\n# units: ms\nsite,time_ms\n\nA,1.0\n# pause\nB,abc\n",
            layout: GOOD_LAYOUT,
            file: "activity",
            line: Some(8),
            column: Some(2),
            words: "found 'abc'",
            args: &[],
        },
        BadCase {
            name: "missing column after comments",
            activity: b"# header follows\n\nsite,amplitude\nA,1\n",
            layout: GOOD_LAYOUT,
            file: "activity",
            line: Some(3),
            column: None,
            words: "time column",
            args: &[],
        },
        BadCase {
            name: "duplicate site after comments",
            activity: GOOD_SPIKES,
            layout: b"# layout\nsite,x_um,y_um\n# first row\nA,0,0\n\nA,1,0\n",
            file: "layout",
            line: Some(6),
            column: Some(1),
            words: "first on line 4",
            args: &[],
        },
    ]
}

/// The default analysis of a spike list and layout given as CSV text, as a user's files go
/// through it: import, track detection, bursts and fronts.
pub fn analyse_csv(spikes_csv: &str, layout_csv: &str) -> ringline::fronts::Analysis {
    let rec = ringline::import::read_recording(
        ("spikes.csv", spikes_csv.as_bytes()),
        ("layout.csv", layout_csv.as_bytes()),
        &ringline::import::ReadOptions::default(),
    )
    .expect("the recording reads");
    let track =
        ringline::geometry::fit_track(&rec.sites, &ringline::geometry::TrackSettings::default())
            .expect("a track fits");
    let settings = ringline::fronts::AnalysisSettings::default();
    let events = ringline::events::event_trains(&rec, &settings.calcium);
    ringline::fronts::analyze(
        &rec,
        &events,
        &track,
        &ringline::fronts::AnalysisSettings::default(),
        &mut |_, _| {},
    )
    .expect("the analysis runs")
}

/// Runs the `ringline` binary with `args` in the folder `dir`, as a user would.
pub fn ringline(args: &[&str], dir: &std::path::Path) -> std::process::Output {
    std::process::Command::new(env!("CARGO_BIN_EXE_ringline"))
        .args(args)
        .current_dir(dir)
        .output()
        .expect("the binary runs")
}

/// Writes one simulated recording into `dir/name/`: kinematic fronts on a 16-electrode
/// strip at 375 um pitch (mixed origins, 10% speed spread, 10% failing fronts, 0.3 Hz
/// background), `duration_s` long, with `dead` electrodes.
pub fn simulate_strip(
    dir: &std::path::Path,
    name: &str,
    speed_mm_s: f64,
    seed: u64,
    duration_s: f64,
    dead: &[usize],
) {
    let dead: Vec<String> = dead.iter().map(|d| d.to_string()).collect();
    let scenario = format!(
        r#"{{"model": "fronts", "name": "{name}", "seed": {seed}, "duration_s": {duration_s},
        "electrodes": {{"shape": "row", "count": 16, "pitch_um": 375, "angle_deg": 0}},
        "pattern": "mixed", "position_jitter_um": 2, "min_interval_s": 4, "extra_interval_s": 6,
        "speed_mm_s": {speed_mm_s}, "speed_cv": 0.1, "activation_jitter_s": 0.002,
        "spikes_per_burst": 6, "burst_spread_s": 0.02, "background_rate_hz": 0.3,
        "dead_electrodes": [{}], "failure_probability": 0.1, "sampling_rate_hz": 25000}}"#,
        dead.join(", ")
    );
    let scenario = ringline::simulate::parse_scenario(&scenario).expect("the scenario parses");
    let files = ringline::simulate::simulation_files(&scenario, &mut |_, _, _| {})
        .expect("the scenario simulates");
    let folder = dir.join(name);
    std::fs::create_dir_all(&folder).expect("a folder");
    for (file, bytes) in files.files {
        std::fs::write(folder.join(file), bytes).expect("a file");
    }
}

/// A CSV file's rows as column -> text maps.
pub type CsvRow = std::collections::HashMap<String, String>;

/// Reads a CSV file written by ringline into rows keyed by column name.
pub fn csv_rows(path: &std::path::Path) -> Vec<CsvRow> {
    let text = std::fs::read_to_string(path).expect("a CSV file");
    let mut reader = csv::Reader::from_reader(text.as_bytes());
    let header = reader.headers().expect("a header").clone();
    reader
        .records()
        .map(|r| {
            let r = r.expect("a CSV row");
            header
                .iter()
                .zip(r.iter())
                .map(|(h, v)| (h.to_string(), v.to_string()))
                .collect()
        })
        .collect()
}

/// A number from a CSV row.
pub fn csv_number(r: &CsvRow, key: &str) -> f64 {
    r[key]
        .parse()
        .unwrap_or_else(|_| panic!("{key}: {:?} in {r:?}", r[key]))
}

/// Whether a curves.csv row (amplitudes in V) is true to a threshold `theta`: every
/// threshold between the two tested amplitudes around it gives the same responses, so the
/// reported interval or bound must reach into that gap (`common practice, no source`).
pub fn curve_holds_threshold(r: &CsvRow, theta: f64, amplitudes: &[f64]) -> bool {
    let low = amplitudes
        .iter()
        .copied()
        .filter(|&a| a < theta)
        .fold(f64::NEG_INFINITY, f64::max);
    let high = amplitudes
        .iter()
        .copied()
        .filter(|&a| a >= theta)
        .fold(f64::INFINITY, f64::min);
    let reaches = |lo: f64, hi: f64| lo <= high && hi >= low;
    match r["fit"].as_str() {
        "fitted" => reaches(
            r["threshold_ci95_low_V"]
                .parse()
                .unwrap_or(f64::NEG_INFINITY),
            r["threshold_ci95_high_V"].parse().unwrap_or(f64::INFINITY),
        ),
        "all_or_none_step" => reaches(
            csv_number(r, "threshold_above_V"),
            csv_number(r, "threshold_below_V"),
        ),
        "none_responded" => high >= csv_number(r, "threshold_above_V"),
        "all_responded" => low < csv_number(r, "threshold_below_V"),
        _ => false,
    }
}

/// [`ringline`] that must succeed (exit 0; otherwise the test fails with its stderr).
pub fn ringline_ok(args: &[&str], dir: &std::path::Path) -> std::process::Output {
    let out = ringline(args, dir);
    assert_eq!(
        out.status.code(),
        Some(0),
        "ringline {}: {}",
        args.join(" "),
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

/// A strip culture of 1,000 neurons/mm^2 under 16 electrodes with a slow membrane (0.5 s,
/// reset 0, refractory 10 ms), so that rates down to 0.1 Hz are drives measurably above
/// threshold.
pub fn slow_oscillator_culture(
    length_um: f64,
    duration_s: f64,
    seed: u64,
) -> ringline::simulate::network::NetworkScenario {
    use ringline::simulate::network::{scenario_from_options, CultureOptions, CultureShape};
    let mut s = scenario_from_options(&CultureOptions {
        shape: CultureShape::Strip,
        length_um: Some(length_um),
        width_um: Some(300.0),
        radius_um: None,
        density_per_mm2: Some(1000.0),
        mean_in_degree: Some(60.0),
        sigma_um: Some(200.0),
        electrodes: Some(16),
        rois: 0,
        duration_s,
        seed,
    })
    .expect("the culture options are valid");
    s.neuron.tau_m_s = 0.5;
    s.neuron.reset_mv = 0.0;
    s.neuron.refractory_s = 0.01;
    s
}
