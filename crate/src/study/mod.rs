//! Studies: many recordings analysed with the same settings, and their results joined into
//! tables keyed by recording.
//!
//! A study is a manifest ([`crate::import::read_manifest`]): one row per recording with its
//! files and the user's own columns (culture, condition, day, ...). Each recording is analysed
//! on its own and leaves, beside its usual output files, a [`RecordingStatus`] (`status.json`)
//! that says whether it was analysed and, if not, why. [`combine`] joins any set of these,
//! from one run or from several shards of the same manifest, into the study's tables:
//!
//! | file | one row per | holds |
//! |---|---|---|
//! | `status.csv` | recording | outcome, counts, the located message of a failure |
//! | `recordings.csv` | recording | headline numbers with their 95% intervals |
//! | `bursts.csv` | burst | each recording's `bursts.csv`, keyed by recording |
//! | `fronts.csv` | front | each recording's `fronts.csv`, keyed by recording |
//!
//! Every table starts with `recording` and the manifest's own columns, so a table can be
//! grouped by condition without a join. The tables are a function of the statuses and the
//! per-recording files only, so sharded and single runs give the same bytes.

pub mod bootstrap;
pub mod compare;
pub mod inference;
pub mod percolation;

use crate::csv_out::CsvOut;
use crate::import::ManifestRow;
use crate::place::Place;
use serde::{Deserialize, Serialize};
use serde_json::Value;

/// Version of `status.json`; bump it when a key changes meaning.
pub const STUDY_SCHEMA: u32 = 1;

/// Name of the folder, inside a study's output folder, that holds one folder per recording.
pub const RECORDINGS_FOLDER: &str = "recordings";

/// Name of the status file in each recording's folder.
pub const STATUS_FILE: &str = "status.json";

/// How a recording of a study ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Outcome {
    /// Read and analysed; its output files are beside the status.
    Analysed,
    /// Stopped by a problem with its files or settings; the message says where and what.
    Failed,
}

impl Outcome {
    pub fn as_str(self) -> &'static str {
        match self {
            Outcome::Analysed => "analysed",
            Outcome::Failed => "failed",
        }
    }
}

/// What a study run records beside each recording's outputs (`status.json`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RecordingStatus {
    pub schema: u32,
    /// The manifest's file name and its number of recordings, so that [`combine`] can tell
    /// when a shard is missing.
    pub manifest: String,
    pub manifest_rows: usize,
    /// Names of the manifest's own columns (the values are in `row.columns`).
    pub column_names: Vec<String>,
    pub row: ManifestRow,
    pub outcome: Outcome,
    /// Why the recording failed: where and what, in one sentence.
    pub message: Option<String>,
    pub burst_count: Option<usize>,
    pub front_count: Option<usize>,
    /// Notices the analysis gave (they are in the recording's summary).
    pub notice_count: usize,
}

impl RecordingStatus {
    /// The status of an analysed recording, from its report's counts.
    pub fn analysed(
        manifest: &crate::import::Manifest,
        row: &ManifestRow,
        report: &crate::report::AnalysisReport,
    ) -> Self {
        RecordingStatus {
            burst_count: Some(report.summary.burst_count),
            front_count: Some(report.summary.front_count),
            notice_count: report.notices.len(),
            ..RecordingStatus::of(manifest, row, Outcome::Analysed, None)
        }
    }

    /// The status of a recording that failed with `message`.
    pub fn failed(manifest: &crate::import::Manifest, row: &ManifestRow, message: String) -> Self {
        RecordingStatus::of(manifest, row, Outcome::Failed, Some(message))
    }

    /// A status with no counts.
    fn of(
        manifest: &crate::import::Manifest,
        row: &ManifestRow,
        outcome: Outcome,
        message: Option<String>,
    ) -> Self {
        RecordingStatus {
            schema: STUDY_SCHEMA,
            manifest: manifest.file.clone(),
            manifest_rows: manifest.rows.len(),
            column_names: manifest.columns.clone(),
            row: row.clone(),
            outcome,
            message,
            burst_count: None,
            front_count: None,
            notice_count: 0,
        }
    }

    /// `status.json`.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).unwrap_or_default() + "\n"
    }
}

/// One recording's status and, when analysed, the output files the study tables draw on.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
#[serde(default)]
pub struct RecordingOutputs {
    /// Where the status was read from, for messages.
    pub folder: String,
    /// Text of `status.json`.
    pub status_json: String,
    pub summary_json: Option<String>,
    pub bursts_csv: Option<String>,
    pub fronts_csv: Option<String>,
}

/// A study could not be put together; says where and what.
#[derive(Debug, Clone, PartialEq, Serialize, thiserror::Error)]
#[error("{place}: {message}")]
pub struct StudyError {
    pub place: Box<Place>,
    pub message: String,
}

impl StudyError {
    fn new(place: Place, message: impl Into<String>) -> Self {
        StudyError {
            place: Box::new(place),
            message: message.into(),
        }
    }
}

/// The study's tables and what went into them.
#[derive(Debug, Clone, PartialEq)]
pub struct StudyTables {
    /// (file name, text), rows in the manifest's order.
    pub files: Vec<(String, String)>,
    pub recordings: usize,
    pub failed: usize,
}

/// The study's tables from every recording's outputs, in the order of the manifest whatever
/// the order given. Refuses outputs of different manifests, a recording given twice, and an
/// incomplete set (a missing shard).
pub fn combine(recordings: &[RecordingOutputs]) -> Result<StudyTables, StudyError> {
    let mut entries: Vec<(RecordingStatus, &RecordingOutputs)> = Vec::new();
    for r in recordings {
        let status: RecordingStatus = serde_json::from_str(&r.status_json).map_err(|e| {
            StudyError::new(
                Place::file(&format!("{}/{STATUS_FILE}", r.folder)).at_line(e.line() as u64),
                format!("expected a recording status written by ringline, found: {e}"),
            )
        })?;
        if status.schema != STUDY_SCHEMA {
            return Err(StudyError::new(
                Place::file(&format!("{}/{STATUS_FILE}", r.folder)),
                format!(
                    "expected a status of schema {STUDY_SCHEMA}, found schema {}: analyse the study again with this version",
                    status.schema
                ),
            ));
        }
        entries.push((status, r));
    }
    let Some(first) = entries.first().map(|e| e.0.clone()) else {
        return Err(StudyError::new(
            Place::default(),
            "expected the output folders of a study run, found no recording in them",
        ));
    };
    for (s, r) in &entries {
        if s.manifest != first.manifest
            || s.manifest_rows != first.manifest_rows
            || s.column_names != first.column_names
        {
            return Err(StudyError::new(
                Place::file(&r.folder),
                format!(
                    "expected every recording to come from the same manifest ({}, {} recordings), found one from {} ({} recordings)",
                    first.manifest, first.manifest_rows, s.manifest, s.manifest_rows
                ),
            ));
        }
    }
    entries.sort_by_key(|e| e.0.row.index);
    for pair in entries.windows(2) {
        if pair[0].0.row.index == pair[1].0.row.index {
            return Err(StudyError::new(
                Place::file(&pair[1].1.folder),
                format!(
                    "expected each recording once, found '{}' in both {} and {}",
                    pair[1].0.row.recording, pair[0].1.folder, pair[1].1.folder
                ),
            ));
        }
    }
    if entries.len() != first.manifest_rows {
        let present: Vec<usize> = entries.iter().map(|e| e.0.row.index).collect();
        let missing: Vec<String> = (0..first.manifest_rows)
            .filter(|i| present.binary_search(i).is_err())
            .take(10)
            .map(|i| format!("row {}", i + 1))
            .collect();
        return Err(StudyError::new(
            Place::file(&first.manifest),
            format!(
                "expected results for all {} recordings of the manifest, found {} (missing: {}{}); was a shard left out?",
                first.manifest_rows,
                entries.len(),
                missing.join(", "),
                if first.manifest_rows - entries.len() > missing.len() { ", ..." } else { "" }
            ),
        ));
    }
    let columns = &first.column_names;
    let failed = entries
        .iter()
        .filter(|e| e.0.outcome == Outcome::Failed)
        .count();
    let files = vec![
        ("status.csv".into(), status_table(&entries, columns)),
        (
            "recordings.csv".into(),
            recordings_table(&entries, columns)?,
        ),
        (
            "bursts.csv".into(),
            long_table(&entries, columns, "bursts.csv", |o| o.bursts_csv.as_deref())?,
        ),
        (
            "fronts.csv".into(),
            long_table(&entries, columns, "fronts.csv", |o| o.fronts_csv.as_deref())?,
        ),
    ];
    Ok(StudyTables {
        files,
        recordings: entries.len(),
        failed,
    })
}

fn key_header(columns: &[String]) -> Vec<String> {
    std::iter::once("recording".to_string())
        .chain(columns.iter().cloned())
        .collect()
}

fn key_fields(s: &RecordingStatus) -> Vec<String> {
    std::iter::once(s.row.recording.clone())
        .chain(s.row.columns.iter().cloned())
        .collect()
}

fn status_table(entries: &[(RecordingStatus, &RecordingOutputs)], columns: &[String]) -> String {
    let mut header = key_header(columns);
    header.extend(
        [
            "manifest_line",
            "outcome",
            "bursts",
            "fronts",
            "notices",
            "message",
        ]
        .map(String::from),
    );
    let mut t = CsvOut::new(&header);
    for (s, _) in entries {
        let mut row = key_fields(s);
        row.extend([
            s.row.line.to_string(),
            s.outcome.as_str().to_string(),
            s.burst_count.map_or(String::new(), |n| n.to_string()),
            s.front_count.map_or(String::new(), |n| n.to_string()),
            s.notice_count.to_string(),
            s.message.clone().unwrap_or_default(),
        ]);
        t.row(&row);
    }
    t.finish()
}

/// The columns of `recordings.csv` after the keys and the outcome: (name, JSON pointer into
/// `summary.json`). Intervals are 95%.
const RECORDING_NUMBERS: [(&str, &str); 53] = [
    ("track", "/track/kind"),
    ("duration_s", "/summary/duration_s"),
    ("burst_count", "/summary/burst_count"),
    ("burst_rate_per_min", "/summary/burst_rate_per_min"),
    ("ibi_median_s", "/summary/ibi/median_s"),
    ("ibi_cv", "/summary/ibi/cv"),
    ("front_count", "/summary/front_count"),
    ("synchronous_count", "/summary/synchronous_count"),
    ("unresolved_count", "/summary/unresolved_count"),
    ("too_few_sites_count", "/summary/too_few_sites_count"),
    ("median_speed_mm_s", "/summary/median_speed_mm_s"),
    (
        "median_speed_ci95_low_mm_s",
        "/summary/median_speed_ci95_mm_s/0",
    ),
    (
        "median_speed_ci95_high_mm_s",
        "/summary/median_speed_ci95_mm_s/1",
    ),
    ("speed_q25_mm_s", "/summary/speed_q25_mm_s"),
    ("speed_q75_mm_s", "/summary/speed_q75_mm_s"),
    (
        "speed_drift_mm_s_per_min",
        "/summary/speed_drift/slope_mm_s_per_min",
    ),
    (
        "speed_drift_ci95_low_mm_s_per_min",
        "/summary/speed_drift/ci95_mm_s_per_min/0",
    ),
    (
        "speed_drift_ci95_high_mm_s_per_min",
        "/summary/speed_drift/ci95_mm_s_per_min/1",
    ),
    ("direction_first_label", "/summary/direction/first_label"),
    (
        "direction_first_fraction",
        "/summary/direction/first_fraction",
    ),
    (
        "direction_first_ci95_low",
        "/summary/direction/first_fraction_ci95/0",
    ),
    (
        "direction_first_ci95_high",
        "/summary/direction/first_fraction_ci95/1",
    ),
    ("two_way_count", "/summary/direction/two_way_count"),
    (
        "mean_resultant_length",
        "/summary/direction/mean_resultant_length",
    ),
    ("failure_count", "/summary/failure_count"),
    (
        "order_median_spearman",
        "/summary/order_consistency/median_spearman",
    ),
    ("median_recruit_50_ms", "/summary/median_recruitment_ms/1"),
    ("rhythm_peak_hz", "/rhythm/peak_frequency_hz"),
    ("rhythm_peak_over_floor", "/rhythm/peak_over_floor"),
    ("rhythm_peak_over_local", "/rhythm/peak_over_local"),
    ("rhythm_is_rhythm", "/rhythm/is_rhythm"),
    ("mean_sttc", "/synchrony/mean_sttc"),
    ("sttc_pairs", "/synchrony/pairs"),
    ("kuramoto_r", "/synchrony/order/mean_r"),
    ("kuramoto_chance_r", "/synchrony/order/chance_r"),
    ("regular_sites_alone", "/site_rhythms/regular_sites"),
    (
        "mean_site_frequency_alone_hz",
        "/site_rhythms/mean_frequency_alone_hz",
    ),
    ("network_frequency_hz", "/site_rhythms/network_frequency_hz"),
    ("lag_speed_mm_s", "/synchrony/lags/implied_speed_mm_s"),
    (
        "lag_speed_ci95_low_mm_s",
        "/synchrony/lags/implied_speed_ci95_mm_s/0",
    ),
    (
        "lag_speed_ci95_high_mm_s",
        "/synchrony/lags/implied_speed_ci95_mm_s/1",
    ),
    ("lag_forward_share", "/synchrony/lags/forward_share"),
    ("sites_bursting", "/site_rhythms/sites_bursting"),
    (
        "median_site_burst_rate_per_min",
        "/site_rhythms/median_site_burst_rate_per_min",
    ),
    (
        "median_fraction_in_site_bursts",
        "/site_rhythms/median_fraction_in_site_bursts",
    ),
    ("stimuli", "/response/stimuli"),
    ("response_unit", "/response/unit"),
    ("response_fit", "/response/fit"),
    ("response_threshold", "/response/threshold"),
    ("response_threshold_ci95_low", "/response/threshold_ci/0"),
    ("response_threshold_ci95_high", "/response/threshold_ci/1"),
    ("response_width", "/response/width"),
    (
        "response_spontaneous_probability",
        "/response/spontaneous_probability",
    ),
];

/// A JSON value as a CSV field: numbers in shortest round-trip form, text as is, empty
/// for null or absent.
fn field(value: Option<&Value>) -> String {
    match value {
        Some(Value::Number(n)) => n
            .as_u64()
            .map(|v| v.to_string())
            .or_else(|| n.as_i64().map(|v| v.to_string()))
            .or_else(|| n.as_f64().map(|v| v.to_string()))
            .unwrap_or_default(),
        Some(Value::String(s)) => s.clone(),
        Some(Value::Bool(b)) => b.to_string(),
        _ => String::new(),
    }
}

fn recordings_table(
    entries: &[(RecordingStatus, &RecordingOutputs)],
    columns: &[String],
) -> Result<String, StudyError> {
    let mut header = key_header(columns);
    header.push("outcome".into());
    header.extend(RECORDING_NUMBERS.iter().map(|c| c.0.to_string()));
    header.push("reaching_end_fraction".into());
    let mut t = CsvOut::new(&header);
    for (s, o) in entries {
        let mut row = key_fields(s);
        row.push(s.outcome.as_str().into());
        let summary: Option<Value> = match (&o.summary_json, s.outcome) {
            (Some(text), Outcome::Analysed) => Some(serde_json::from_str(text).map_err(|e| {
                StudyError::new(
                    Place::file(&format!("{}/summary.json", o.folder)).at_line(e.line() as u64),
                    format!("expected the summary written by ringline, found: {e}"),
                )
            })?),
            (None, Outcome::Analysed) => {
                return Err(StudyError::new(
                    Place::file(&o.folder),
                    "expected summary.json beside the status of an analysed recording, found none",
                ))
            }
            _ => None,
        };
        for (_, pointer) in RECORDING_NUMBERS {
            row.push(field(summary.as_ref().and_then(|v| v.pointer(pointer))));
        }
        // Share of fronts that did not stop before the end of their path.
        let fronts = summary
            .as_ref()
            .and_then(|v| v.pointer("/summary/front_count"))
            .and_then(Value::as_u64);
        let failures = summary
            .as_ref()
            .and_then(|v| v.pointer("/summary/failure_count"))
            .and_then(Value::as_u64);
        row.push(match (fronts, failures) {
            (Some(n), Some(f)) if n > 0 => ((n - f.min(n)) as f64 / n as f64).to_string(),
            _ => String::new(),
        });
        t.row(&row);
    }
    Ok(t.finish())
}

fn long_table(
    entries: &[(RecordingStatus, &RecordingOutputs)],
    columns: &[String],
    name: &str,
    text_of: impl Fn(&RecordingOutputs) -> Option<&str>,
) -> Result<String, StudyError> {
    let mut table: Option<(CsvOut, csv::StringRecord)> = None;
    for (s, o) in entries.iter().filter(|e| e.0.outcome == Outcome::Analysed) {
        let place = || Place::file(&format!("{}/{name}", o.folder));
        let text = text_of(o).ok_or_else(|| {
            StudyError::new(
                place(),
                "expected this file beside the status of an analysed recording, found none",
            )
        })?;
        let mut reader = csv::ReaderBuilder::new()
            .has_headers(true)
            .from_reader(text.as_bytes());
        let inner = reader
            .headers()
            .map_err(|e| StudyError::new(place(), format!("expected a CSV header: {e}")))?
            .clone();
        let (out, header) = table.get_or_insert_with(|| {
            let mut h = key_header(columns);
            h.extend(inner.iter().map(String::from));
            (CsvOut::new(&h), inner.clone())
        });
        if *header != inner {
            return Err(StudyError::new(
                place(),
                "expected the same columns as the other recordings' tables, found others: were they written by another version?",
            ));
        }
        let keys = key_fields(s);
        for record in reader.records() {
            let record = record.map_err(|e| {
                StudyError::new(
                    place().at_line(e.position().map_or(0, |p| p.line())),
                    format!("expected a CSV row: {e}"),
                )
            })?;
            out.row(keys.iter().map(String::as_str).chain(record.iter()));
        }
    }
    Ok(match table {
        Some((out, _)) => out.finish(),
        // No recording was analysed: the header keys alone, so the file still says what it is.
        None => CsvOut::new(key_header(columns)).finish(),
    })
}

/// One recording's settings: the study's, with the manifest row's track kind and start site,
/// and its settings file (`settings_json`, JSON named `settings_file`) laid over them key by
/// key. Unknown keys in the file are refused, as in any settings file.
pub fn recording_settings(
    study: &crate::RecordingSettings,
    row: &ManifestRow,
    settings_file: Option<(&str, &str)>,
) -> Result<crate::RecordingSettings, StudyError> {
    use crate::geometry::TrackChoice;
    let mut settings = study.clone();
    if let Some(kind) = &row.track {
        settings.track.kind = match kind.as_str() {
            "line" => TrackChoice::Line,
            "ring" => TrackChoice::Ring,
            "plane" => TrackChoice::Plane,
            _ => TrackChoice::Auto,
        };
    }
    if let Some(site) = &row.start_site {
        settings.track.start_site = Some(site.clone());
    }
    if let Some((file, text)) = settings_file {
        settings.analysis = analysis_settings_over(&settings.analysis, file, text)?;
    }
    Ok(settings)
}

/// A settings file (JSON, any subset of the report's `settings` keys) laid over `base`: the
/// one reader of analysis settings files (`analyze --settings`, a manifest's settings
/// column). Misspelt or unknown keys are refused by name, as scenario files refuse them, and
/// a value of the wrong kind is named in words.
pub fn analysis_settings_over(
    base: &crate::fronts::AnalysisSettings,
    file: &str,
    text: &str,
) -> Result<crate::fronts::AnalysisSettings, StudyError> {
    let place = |line: usize| Place::file(file).at_line(line as u64);
    let layer: Value = serde_json::from_str(text).map_err(|e| {
        StudyError::new(
            place(e.line()),
            format!("expected JSON settings: {}", crate::json_error_words(&e)),
        )
    })?;
    if !layer.is_object() {
        return Err(StudyError::new(
            place(1),
            "expected a JSON object of analysis settings (keys as in the report's \"settings\")",
        ));
    }
    let mut merged = serde_json::to_value(base).unwrap_or(Value::Null);
    let mut unknown = Vec::new();
    lay_over(&mut merged, &layer, "", &mut unknown);
    if !unknown.is_empty() {
        return Err(StudyError::new(
            place(1),
            format!(
                "expected analysis settings, found keys the analysis does not have: {} (check the spelling against the report's \"settings\")",
                unknown.join(", ")
            ),
        ));
    }
    // A value of the wrong kind, located at its line (the layered value has no lines).
    let mut reader = serde_json::Deserializer::from_str(text);
    if let Err(e) =
        serde_path_to_error::deserialize::<_, crate::fronts::AnalysisSettings>(&mut reader)
    {
        let key = e.path().to_string();
        let words = crate::expected_then_found(crate::json_error_words(e.inner()));
        return Err(StudyError::new(
            place(e.inner().line()),
            if key.is_empty() || key == "." {
                format!("expected usable analysis settings: {words}")
            } else {
                format!("{key}: {words}")
            },
        ));
    }
    let settings: crate::fronts::AnalysisSettings =
        serde_json::from_value(merged).map_err(|e| {
            StudyError::new(
                place(1),
                format!(
                    "expected usable analysis settings: {}",
                    crate::json_error_words(&e)
                ),
            )
        })?;
    // A value out of range that this file brought in is named with the file (one already in
    // the base is left to the analysis, which names the setting).
    if crate::fronts::check_settings(base).is_ok() {
        if let Err(e) = crate::fronts::check_settings(&settings) {
            return Err(StudyError::new(Place::file(file), e.message));
        }
    }
    Ok(settings)
}

/// Lays `layer` over `base` key by key; keys of `layer` that `base` lacks are collected in
/// `unknown` (as dotted paths) instead of being added.
fn lay_over(base: &mut Value, layer: &Value, path: &str, unknown: &mut Vec<String>) {
    match (base, layer) {
        (Value::Object(b), Value::Object(l)) => {
            for (key, value) in l {
                let here = if path.is_empty() {
                    key.clone()
                } else {
                    format!("{path}.{key}")
                };
                match b.get_mut(key) {
                    Some(slot) if slot.is_object() && value.is_object() => {
                        lay_over(slot, value, &here, unknown)
                    }
                    Some(slot) => *slot = value.clone(),
                    // Every setting serialises (an absent option as null), so a key the
                    // base lacks is misspelt or from another program.
                    None => unknown.push(here),
                }
            }
        }
        (b, l) => *b = l.clone(),
    }
}

/// Which of a set of files (the page's dropped files) each manifest row names, by index
/// into the names given; `problem` says why a row cannot run.
#[derive(Debug, Clone, PartialEq, Default, Serialize)]
pub struct RowFiles {
    pub data: Option<usize>,
    pub sidecar: Option<usize>,
    pub layout: Option<usize>,
    pub settings: Option<usize>,
    pub stimuli: Option<usize>,
    pub problem: Option<String>,
}

/// Finds each manifest row's files among `names`. A name matches a manifest path when it is
/// that path, or else its last component (a browser knows dropped files by name only). A
/// raw sample file's sidecar is looked for as [`crate::import::sidecar_names`] says.
pub fn match_files(manifest: &crate::import::Manifest, names: &[String]) -> Vec<RowFiles> {
    let last = |p: &str| p.rsplit(['/', '\\']).next().unwrap_or(p).to_string();
    let find = |path: &str| -> Result<Option<usize>, String> {
        if let Some(i) = names.iter().position(|n| n == path) {
            return Ok(Some(i));
        }
        let wanted = last(path);
        let hits: Vec<usize> = (0..names.len())
            .filter(|&i| last(&names[i]) == wanted)
            .collect();
        match hits.as_slice() {
            [] => Ok(None),
            [one] => Ok(Some(*one)),
            _ => Err(format!(
                "{} files are named {wanted}; drop the study's folder so that their paths tell them apart",
                hits.len()
            )),
        }
    };
    let need = |path: &str, role: &str| -> Result<usize, String> {
        find(path)?.ok_or_else(|| {
            format!(
                "{}: no such file among the dropped files (the manifest names it as this recording's {role})",
                path
            )
        })
    };
    manifest
        .rows
        .iter()
        .map(|row| {
            let mut files = RowFiles::default();
            let found = (|| -> Result<(), String> {
                files.data = Some(need(&row.data, "data")?);
                files.layout = Some(need(&row.layout, "layout")?);
                if let Some(s) = &row.settings {
                    files.settings = Some(need(s, "settings")?);
                }
                if let Some(s) = &row.stimuli {
                    files.stimuli = Some(need(s, "stimulus protocol")?);
                }
                for candidate in crate::import::sidecar_names(&row.data) {
                    if let Some(i) = find(&candidate)? {
                        files.sidecar = Some(i);
                        break;
                    }
                }
                Ok(())
            })();
            files.problem = found.err();
            files
        })
        .collect()
}

/// A manifest for recordings dropped without one: each activity file is a recording named
/// after it, all on the one layout given. `files` are (name, kind) in the order dropped.
/// Returns the manifest's text, which [`crate::import::read_manifest`] reads.
pub fn manifest_for_files(
    files: &[(String, crate::import::InputKind)],
) -> Result<String, StudyError> {
    use crate::import::{FileKind, InputKind};
    let place = || Place::file("the dropped files");
    let layouts: Vec<&str> = files
        .iter()
        .filter(|f| f.1 == InputKind::Table(FileKind::Layout))
        .map(|f| f.0.as_str())
        .collect();
    let [layout] = layouts.as_slice() else {
        return Err(StudyError::new(
            place(),
            format!(
                "expected one layout for several recordings, found {}; to pair recordings with their own layouts, drop a study manifest (CSV with recording, data and layout columns) with them",
                layouts.len()
            ),
        ));
    };
    let mut names: Vec<String> = Vec::new();
    let mut out = CsvOut::new(["recording", "data", "layout"]);
    for (file, kind) in files {
        let activity = matches!(
            kind,
            InputKind::Table(FileKind::SpikeList | FileKind::RoiTraces)
                | InputKind::Wav
                | InputKind::VoltageSamples
        );
        if !activity {
            continue;
        }
        let stem = file.rsplit(['/', '\\']).next().unwrap_or(file);
        let stem = stem.rsplit_once('.').map_or(stem, |(s, _)| s);
        let mut name: String = stem
            .chars()
            .map(|c| {
                if c.is_ascii_alphanumeric() || "._-".contains(c) {
                    c
                } else {
                    '_'
                }
            })
            .take(crate::import::MAX_RECORDING_NAME - 4)
            .collect();
        if name.is_empty() || name.starts_with('.') {
            name = format!("r{name}");
        }
        let base = name.clone();
        let mut k = 2;
        while names.contains(&name) {
            name = format!("{base}-{k}");
            k += 1;
        }
        out.row([name.as_str(), file.as_str(), layout]);
        names.push(name);
    }
    if names.is_empty() {
        return Err(StudyError::new(
            place(),
            "expected recordings (spike lists, ROI traces or voltage) among the dropped files, found none",
        ));
    }
    Ok(out.finish())
}
