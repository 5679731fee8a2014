//! Importers: bytes of text files in, plain data out.
//!
//! Every reader takes the whole file as bytes plus its name (so the same code serves the
//! command line and the browser, which has no file system), and returns either the data
//! or an [`ImportError`] that names the file, line, column and site and says, in one
//! sentence, what was expected and what was found. Nothing the user writes in a file can
//! make a reader panic.
//!
//! | format | reader | columns |
//! |---|---|---|
//! | spike list | [`read_spike_list`] | `site`, `time_s` / `time_ms` / `time_us` |
//! | layout | [`read_layout`] | `site`, `x_um`, `y_um` (or `_mm`) |
//! | ROI traces | [`read_roi_traces`] | `time_s` (or a frame rate), one column per ROI |
//!
//! Files may be comma-, tab- or semicolon-delimited (detected from the header line), may
//! start with a UTF-8 byte-order mark, use CRLF or LF, and contain `#` comment lines and
//! blank lines. Line numbers in messages count every line, as an editor shows them.

mod error;
mod layout;
mod spikes;
mod table;
mod traces;
mod voltage;
mod write;

pub use error::{ImportError, ImportProblem};
pub use layout::{read_layout, Layout, LayoutOptions};
pub use spikes::{
    read_spike_list, SiteSpikes, SpikeList, SpikeListOptions, SITE_COLUMN_NAMES, TIME_COLUMN_BASES,
};
pub use table::{ImportLimits, LengthUnit, TimeUnit};
pub use traces::{
    read_roi_traces, RoiSeries, RoiTraceTable, TraceGap, TraceOptions, FRAME_COLUMN_NAMES,
};
pub use voltage::{
    decode_channel, decode_lanes, looks_like_wav, read_sidecar, read_wav_header, SampleType,
    VoltageHeader,
};
pub use write::{write_layout, write_roi_traces, write_spike_list, write_spike_list_as};

/// What a text file holds, judged from its header line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum FileKind {
    /// A site column and a time column: one spike per row.
    SpikeList,
    /// A site column and x, y columns.
    Layout,
    /// A time column (or none) and ROI columns, no site column.
    RoiTraces,
}

/// Guesses what a file holds from its header, so a user can drop files without saying
/// which is which. Returns `None` when the header cannot be read.
pub fn sniff_file_kind(bytes: &[u8]) -> Option<FileKind> {
    let table = table::Table::open(bytes, "", ImportLimits::default()).ok()?;
    let headers = table.headers();
    let has_site = headers
        .iter()
        .any(|h| SITE_COLUMN_NAMES.iter().any(|n| h.eq_ignore_ascii_case(n)));
    let has = |axis: &str| {
        headers
            .iter()
            .any(|h| table::length_header(h, axis).is_some_and(|m| m.understood()))
    };
    let has_time = headers
        .iter()
        .any(|h| table::time_header(h, TIME_COLUMN_BASES).is_some_and(|m| m.understood()));
    match (has_site, has_time, has("x") && has("y")) {
        (true, _, true) => Some(FileKind::Layout),
        (true, true, false) => Some(FileKind::SpikeList),
        (false, _, _) if headers.len() >= 2 => Some(FileKind::RoiTraces),
        _ => None,
    }
}

/// All reader settings in one place, as the command line and the page pass them.
#[derive(Debug, Clone, Default, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(default)]
pub struct ReadOptions {
    /// What the activity file holds; detected from its header when absent.
    pub kind: Option<FileKind>,
    /// Unit of a time column whose name has none.
    pub time_unit: Option<TimeUnit>,
    /// Unit of position columns whose names have none.
    pub length_unit: Option<LengthUnit>,
    /// Frames per second, for ROI traces with no time column.
    pub frame_rate_hz: Option<f64>,
    /// Size caps for each file.
    pub limits: ImportLimits,
}

/// Reads an activity file (spike list or ROI traces) and a layout, and puts them together.
///
/// `activity` and `layout` are `(file name, bytes)`. The activity kind is detected from the
/// header unless [`ReadOptions::kind`] says it.
pub fn read_recording(
    activity: (&str, &[u8]),
    layout: (&str, &[u8]),
    options: &ReadOptions,
) -> Result<crate::recording::Recording, ImportError> {
    let layout = read_layout(
        layout.1,
        layout.0,
        &LayoutOptions {
            length_unit: options.length_unit,
            limits: options.limits,
        },
    )?;
    let (name, bytes) = activity;
    let kind = match options.kind {
        Some(kind) => kind,
        None => sniff_file_kind(bytes).unwrap_or(FileKind::SpikeList),
    };
    match kind {
        FileKind::SpikeList => {
            let spikes = read_spike_list(
                bytes,
                name,
                &SpikeListOptions {
                    time_unit: options.time_unit,
                    limits: options.limits,
                },
            )?;
            crate::recording::Recording::from_spike_list(&layout, &spikes)
        }
        FileKind::RoiTraces => {
            let traces = read_roi_traces(
                bytes,
                name,
                &TraceOptions {
                    time_unit: options.time_unit,
                    frame_rate_hz: options.frame_rate_hz,
                    limits: options.limits,
                },
            )?;
            crate::recording::Recording::from_roi_traces(&layout, &traces)
        }
        FileKind::Layout => Err(ImportError::new(
            crate::place::Place::file(name),
            ImportProblem::BadOption,
            "this file looks like a layout (site, x, y columns), but a spike list or ROI traces was expected here",
        )),
    }
}
