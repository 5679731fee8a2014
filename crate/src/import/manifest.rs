//! Study manifests: one row per recording, naming its files and the user's own columns
//! (culture, condition, day, well, ...).
//!
//! | column | needed | holds |
//! |---|---|---|
//! | `recording` | yes | a short unique name: letters, digits, `.`, `_`, `-` (it names the output folder) |
//! | `data` | yes | the activity file: spike list, ROI traces, WAV, or raw samples with a sidecar |
//! | `layout` | yes | the layout file |
//! | `settings` | no | a JSON file of analysis settings for this recording, laid over the study's |
//! | `track` | no | `auto`, `line`, `ring` or `plane` for this recording |
//! | `start_site` | no | the site at the start of the track for this recording |
//! | `stimuli` | no | the recording's stimulus protocol file |
//!
//! Every other column is carried into the study's tables as written. Paths are relative to
//! the manifest's folder unless absolute. Column names are matched without regard to case.

use super::error::{ImportError, ImportProblem};
use super::table::{ImportLimits, Row, Table};
use serde::{Deserialize, Serialize};

/// Longest accepted recording name, in bytes.
pub const MAX_RECORDING_NAME: usize = 100;

/// One recording of a study, as its manifest row says.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ManifestRow {
    /// Position among the manifest's data rows, from 0 (the study's order).
    pub index: usize,
    /// Line in the manifest file, from 1.
    pub line: u64,
    pub recording: String,
    pub data: String,
    pub layout: String,
    pub settings: Option<String>,
    pub track: Option<String>,
    pub start_site: Option<String>,
    /// The stimulus protocol file.
    #[serde(default)]
    pub stimuli: Option<String>,
    /// The user's own columns, in the manifest's order: values as written.
    pub columns: Vec<String>,
}

/// A study manifest, read.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Manifest {
    pub file: String,
    /// Names of the user's own columns (everything but the columns above).
    pub columns: Vec<String>,
    pub rows: Vec<ManifestRow>,
}

const KNOWN: [&str; 7] = [
    "recording",
    "data",
    "layout",
    "settings",
    "track",
    "start_site",
    "stimuli",
];
const TRACK_WORDS: [&str; 4] = ["auto", "line", "ring", "plane"];

/// Reads a study manifest (comma, tab or semicolon delimited; `#` comments allowed).
pub fn read_manifest(
    bytes: &[u8],
    file: &str,
    limits: ImportLimits,
) -> Result<Manifest, ImportError> {
    let mut table = Table::open(bytes, file, limits)?;
    let headers: Vec<String> = table.headers().to_vec();
    let find = |name: &str| headers.iter().position(|h| h.eq_ignore_ascii_case(name));
    let mut known = [None; KNOWN.len()];
    for (slot, name) in known.iter_mut().zip(KNOWN) {
        *slot = find(name);
    }
    for (slot, name) in known.iter().zip(KNOWN).take(3) {
        if slot.is_none() {
            return Err(ImportError::new(
                table.place_header(),
                ImportProblem::MissingColumn,
                format!(
                    "expected a '{name}' column in the study manifest (recording, data and layout are needed), found columns {}",
                    headers.join(", ")
                ),
            ));
        }
    }
    let free: Vec<usize> = (0..headers.len())
        .filter(|i| !known.contains(&Some(*i)))
        .collect();
    let mut rows: Vec<ManifestRow> = Vec::new();
    let mut row = Row::default();
    while let Some(next) = table.next_row(&mut row) {
        next?;
        let get = |slot: Option<usize>| {
            slot.map(|i| row.field(i).to_string())
                .filter(|v| !v.is_empty())
        };
        let need = |slot: usize| -> Result<String, ImportError> {
            let i = known[slot].unwrap_or(0);
            get(Some(i)).ok_or_else(|| {
                ImportError::new(
                    table.place_column(Some(row.line), i),
                    ImportProblem::BadValue,
                    format!(
                        "expected the {} of this recording, found an empty field",
                        describe(KNOWN[slot])
                    ),
                )
            })
        };
        let recording = need(0)?;
        let name_column = known[0].unwrap_or(0);
        if !recording_name_ok(&recording) {
            return Err(ImportError::new(
                table.place_column(Some(row.line), name_column),
                ImportProblem::BadValue,
                format!(
                    "expected a recording name of at most {MAX_RECORDING_NAME} letters, digits, '.', '_' or '-' (it names the output folder), found '{recording}'"
                ),
            ));
        }
        if let Some(first) = rows.iter().find(|r| r.recording == recording) {
            return Err(ImportError::new(
                table.place_column(Some(row.line), name_column),
                ImportProblem::DuplicateSite,
                format!(
                    "expected each recording name once, found '{recording}' again (first on line {})",
                    first.line
                ),
            ));
        }
        let track = get(known[4]).map(|t| t.to_ascii_lowercase());
        if let Some(t) = &track {
            if !TRACK_WORDS.contains(&t.as_str()) {
                return Err(ImportError::new(
                    table.place_column(Some(row.line), known[4].unwrap_or(0)),
                    ImportProblem::BadValue,
                    format!(
                        "expected a track kind ({}), found '{t}'",
                        TRACK_WORDS.join(", ")
                    ),
                ));
            }
        }
        rows.push(ManifestRow {
            index: rows.len(),
            line: row.line,
            recording,
            data: need(1)?,
            layout: need(2)?,
            settings: get(known[3]),
            track,
            start_site: get(known[5]),
            stimuli: get(known[6]),
            columns: free.iter().map(|&i| row.field(i).to_string()).collect(),
        });
    }
    if rows.is_empty() {
        return Err(ImportError::new(
            table.place_header(),
            ImportProblem::NoRows,
            "expected one row per recording below the header, found none",
        ));
    }
    Ok(Manifest {
        file: file.to_string(),
        columns: free.iter().map(|&i| headers[i].clone()).collect(),
        rows,
    })
}

fn describe(column: &str) -> &'static str {
    match column {
        "recording" => "name",
        "data" => "activity file (the data column)",
        _ => "layout file",
    }
}

/// A recording name is safe as a folder name on every system.
pub fn recording_name_ok(name: &str) -> bool {
    !name.is_empty()
        && name.len() <= MAX_RECORDING_NAME
        && !name.starts_with('.')
        && name
            .bytes()
            .all(|b| b.is_ascii_alphanumeric() || matches!(b, b'.' | b'_' | b'-'))
}
