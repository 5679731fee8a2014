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
//! | stimulus protocol | [`read_stimuli`] | `time_s`, `amplitude_V` (or mV, V/m, uA, mA), `site`, `label` |
//!
//! Files may be comma-, tab- or semicolon-delimited (detected from the header line), may
//! start with a UTF-8 byte-order mark, use CRLF or LF, and contain `#` comment lines and
//! blank lines. Line numbers in messages count every line, as an editor shows them.

mod assemble;
mod error;
mod layout;
mod manifest;
mod spikes;
mod stimuli;
mod table;
mod traces;
mod voltage;
mod write;

pub use error::{ImportError, ImportProblem};
pub use layout::{read_layout, Layout, LayoutOptions};
pub use manifest::{read_manifest, recording_name_ok, Manifest, ManifestRow, MAX_RECORDING_NAME};
pub use spikes::{
    read_spike_list, SiteSpikes, SpikeList, SpikeListOptions, SITE_COLUMN_NAMES, TIME_COLUMN_BASES,
};
pub use stimuli::{
    read_stimuli, AmplitudeUnit, Stimulus, StimulusProtocol, AMPLITUDE_COLUMN_BASES,
    STIMULUS_COLUMN_BASES,
};
pub use table::{ImportLimits, LengthUnit, TextSource, TimeUnit};
pub use traces::{
    read_roi_traces, RoiSeries, RoiTraceTable, TraceGap, TraceOptions, FRAME_COLUMN_NAMES,
};
pub use voltage::{
    decode_channel, decode_lanes, frame_reader, looks_like_wav, read_sidecar, read_voltage_header,
    read_wav_header, FrameRead, SampleType, VoltageHeader, MAX_PLAUSIBLE_SAMPLE_RATE_HZ,
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
    /// A stimulus protocol: a time column and an amplitude column with its unit.
    Stimuli,
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
    // A stimulus amplitude (V, mV, V/m, uA, mA; not a spike's amplitude in uV). With a site
    // column (the stimulating electrode) only a current or a field is taken as a stimulus:
    // a spike list may carry its spikes' amplitudes in mV.
    let amplitude =
        headers
            .iter()
            .find_map(|h| match table::match_header(h, AMPLITUDE_COLUMN_BASES) {
                table::HeaderMatch::Unit(u) => AmplitudeUnit::parse(&u),
                _ => None,
            });
    let stimulus_unit = match amplitude {
        Some(AmplitudeUnit::Volt | AmplitudeUnit::Millivolt) => !has_site,
        Some(_) => true,
        None => false,
    };
    if has_time && stimulus_unit {
        return Some(FileKind::Stimuli);
    }
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
    read_recording_with(
        (activity.0, TextSource::Bytes(activity.1)),
        layout,
        options,
        &mut |_, _| {},
    )
}

/// [`read_recording`], telling `progress(bytes read, bytes in all)` as the activity file's
/// rows are read.
pub fn read_recording_with(
    activity: (&str, TextSource<'_>),
    layout: (&str, &[u8]),
    options: &ReadOptions,
    progress: &mut dyn FnMut(u64, u64),
) -> Result<crate::recording::Recording, ImportError> {
    let layout = read_layout(
        layout.1,
        layout.0,
        &LayoutOptions {
            length_unit: options.length_unit,
            limits: options.limits,
        },
    )?;
    let (name, source) = activity;
    // Raw voltage (a WAV file, or samples by their extension) is not a table: say what it
    // is, not that it is not UTF-8 text.
    let head = source.head();
    let voltage = match classify_input(name, &head[..head.len().min(65_536)]) {
        InputKind::Wav => Some("a WAV file of raw voltage"),
        InputKind::VoltageSamples if looks_like_samples_by_name(name) => {
            Some("raw voltage samples (by its extension)")
        }
        _ => None,
    };
    if let Some(what) = voltage {
        return Err(ImportError::new(
            crate::place::Place::file(name),
            ImportProblem::NotText,
            format!(
                "this is {what}, not a spike list or ROI traces: `ringline analyze` and the page detect its spikes first (raw samples need their JSON sidecar beside them)"
            ),
        ));
    }
    let kind = match options.kind {
        Some(kind) => kind,
        None => sniff_file_kind(source.head()).unwrap_or(FileKind::SpikeList),
    };
    match kind {
        FileKind::SpikeList => {
            let spikes = spikes::read_spike_list_with(
                source,
                name,
                &SpikeListOptions {
                    time_unit: options.time_unit,
                    limits: options.limits,
                },
                progress,
            )?;
            crate::recording::Recording::from_spike_list(&layout, spikes)
        }
        FileKind::RoiTraces => {
            let traces = traces::read_roi_traces_with(
                source,
                name,
                &TraceOptions {
                    time_unit: options.time_unit,
                    frame_rate_hz: options.frame_rate_hz,
                    limits: options.limits,
                    kind_was_guessed: options.kind.is_none(),
                },
                progress,
            )?;
            crate::recording::Recording::from_roi_traces(&layout, &traces)
        }
        FileKind::Layout => Err(ImportError::new(
            crate::place::Place::file(name),
            ImportProblem::BadOption,
            "this file looks like a layout (site, x, y columns), but a spike list or ROI traces was expected here",
        )),
        FileKind::Stimuli => Err(ImportError::new(
            crate::place::Place::file(name),
            ImportProblem::BadOption,
            "this file looks like a stimulus protocol (time and amplitude columns), but a spike list or ROI traces was expected here; give it as the stimuli (--stimuli, or the manifest's stimuli column)",
        )),
    }
}

/// What an input file is, judged from its name and first bytes: the one rule the command
/// line, the page and study runs use to tell the files of a recording apart.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum InputKind {
    /// A text table ringline reads: spike list, layout or ROI traces.
    Table(FileKind),
    /// A study manifest (recording, data and layout columns).
    Manifest,
    /// A WAV file of raw voltage.
    Wav,
    /// Raw interleaved samples; needs a JSON sidecar (see [`sidecar_names`]).
    VoltageSamples,
    /// The JSON sidecar of raw samples (it has `sample_rate_hz`).
    Sidecar,
    /// Another JSON document (the page's notebook files).
    Json,
    /// Text whose header names no column ringline knows.
    Unknown,
}

impl InputKind {
    /// Raw voltage (a WAV file or raw samples).
    pub fn is_voltage(self) -> bool {
        matches!(self, InputKind::Wav | InputKind::VoltageSamples)
    }

    /// One word per kind, as the page shows and passes it.
    pub fn as_str(self) -> &'static str {
        match self {
            InputKind::Table(FileKind::SpikeList) => "spike_list",
            InputKind::Table(FileKind::Layout) => "layout",
            InputKind::Table(FileKind::RoiTraces) => "roi_traces",
            InputKind::Table(FileKind::Stimuli) => "stimuli",
            InputKind::Manifest => "manifest",
            InputKind::Wav => "wav",
            InputKind::VoltageSamples => "voltage_samples",
            InputKind::Sidecar => "sidecar",
            InputKind::Json => "json",
            InputKind::Unknown => "unknown",
        }
    }

    /// The kind [`InputKind::as_str`] names.
    pub fn parse(word: &str) -> Option<InputKind> {
        [
            InputKind::Table(FileKind::SpikeList),
            InputKind::Table(FileKind::Layout),
            InputKind::Table(FileKind::RoiTraces),
            InputKind::Manifest,
            InputKind::Wav,
            InputKind::VoltageSamples,
            InputKind::Sidecar,
            InputKind::Json,
            InputKind::Unknown,
        ]
        .into_iter()
        .find(|k| k.as_str() == word)
    }
}

/// Extensions of raw sample files (compared without case).
pub const SAMPLE_EXTENSIONS: [&str; 5] = ["raw", "bin", "dat", "i16", "f32"];

/// Extensions of WAV files (compared without case).
pub const WAV_EXTENSIONS: [&str; 2] = ["wav", "wave"];

/// Extensions of text tables (compared without case): bytes that are not UTF-8 in such a
/// file are a text-encoding problem, not raw samples.
pub const TEXT_EXTENSIONS: [&str; 3] = ["csv", "tsv", "txt"];

/// The name's extension in lower case ("" when it has none).
fn extension(name: &str) -> String {
    name.rsplit_once('.')
        .map(|(_, e)| e.to_ascii_lowercase())
        .unwrap_or_default()
}

/// Whether the name ends in one of [`WAV_EXTENSIONS`].
pub fn has_wav_extension(name: &str) -> bool {
    WAV_EXTENSIONS.contains(&extension(name).as_str())
}

/// Whether the name ends in one of [`SAMPLE_EXTENSIONS`].
fn looks_like_samples_by_name(name: &str) -> bool {
    SAMPLE_EXTENSIONS.contains(&extension(name).as_str())
}

/// Why a file [`classify_input`] finds no kind for is not a table ringline reads: the located
/// error of the reader it comes closest to, a layout's when its header names an x or y
/// column, else a spike list's (as `ringline analyze` reads an activity file of unknown
/// kind). `head` is the file's first bytes (64 KiB are plenty); only its complete lines are
/// read.
pub fn why_unrecognised(name: &str, head: &[u8]) -> ImportError {
    let complete = match head.iter().rposition(|&b| b == b'\n') {
        Some(end) if head.len() >= 65_536 => &head[..=end],
        _ => head,
    };
    let table = match table::Table::open(complete, name, ImportLimits::default()) {
        Ok(table) => table,
        Err(e) => return e,
    };
    let positions = table
        .headers()
        .iter()
        .any(|h| table::length_header(h, "x").is_some() || table::length_header(h, "y").is_some());
    let read = if positions {
        read_layout(complete, name, &Default::default()).map(|_| ())
    } else {
        read_spike_list(complete, name, &Default::default()).map(|_| ())
    };
    read.err().unwrap_or_else(|| {
        ImportError::new(
            table.place_header(),
            ImportProblem::BadHeader,
            format!(
                "expected the columns of a spike list, layout, ROI traces, stimulus protocol or study manifest, found {}",
                spikes::quoted_list(table.headers())
            ),
        )
    })
}

/// Judges a file from its name and its first bytes (the first 64 KiB are plenty; a longer
/// prefix is fine).
pub fn classify_input(name: &str, head: &[u8]) -> InputKind {
    let extension = extension(name);
    // A file named as WAV is read as one, so that one that is not says so.
    if looks_like_wav(head) || WAV_EXTENSIONS.contains(&extension.as_str()) {
        return InputKind::Wav;
    }
    if SAMPLE_EXTENSIONS.contains(&extension.as_str()) {
        return InputKind::VoltageSamples;
    }
    // Judge the complete lines only: the prefix may end inside a line or a character.
    let text = head.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(head);
    let text = match text.iter().rposition(|&b| b == b'\n') {
        Some(end) if text.len() >= 65_536 => &text[..=end],
        _ => text,
    };
    let Ok(text) = std::str::from_utf8(text) else {
        // A text file in another encoding is named so by the table reader, at its line.
        return if TEXT_EXTENSIONS.contains(&extension.as_str()) {
            InputKind::Unknown
        } else {
            InputKind::VoltageSamples
        };
    };
    if extension == "json" || text.trim_start().starts_with('{') {
        return if text.contains("\"sample_rate_hz\"") {
            InputKind::Sidecar
        } else {
            InputKind::Json
        };
    }
    if let Ok(table) = table::Table::open(text.as_bytes(), name, ImportLimits::default()) {
        let has = |c: &str| table.headers().iter().any(|h| h.eq_ignore_ascii_case(c));
        if has("recording") && has("data") && has("layout") {
            return InputKind::Manifest;
        }
    }
    match sniff_file_kind(text.as_bytes()) {
        Some(kind) => InputKind::Table(kind),
        None => InputKind::Unknown,
    }
}

/// The names a sidecar of the raw sample file `data` may have, in the order they are tried:
/// `DATA.json`, then the data file's name with its extension replaced by `.json`.
pub fn sidecar_names(data: &str) -> Vec<String> {
    let mut names = vec![format!("{data}.json")];
    let file_start = data.rfind(['/', '\\']).map_or(0, |i| i + 1);
    if let Some(dot) = data[file_start..].rfind('.') {
        let stem = &data[..file_start + dot];
        let other = format!("{stem}.json");
        if other != data && !names.contains(&other) {
            names.push(other);
        }
    }
    names
}
