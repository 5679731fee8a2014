//! The page's working state as plain data: the two input files, the settings of every step,
//! and each step's result, so that a changed setting re-runs only the steps below it. The
//! wasm shell holds one [`Workbook`] in the worker; native tests drive the same code.
//!
//! Steps, top to bottom: read (files -> recording), track (recording -> track fit and
//! inspection), analysis (bursts, activations, fronts, summary). Figures and exports read the
//! results and change nothing.

use super::analysis_document::InputFile;
use super::document::{Block, Document};
use super::figures::{self, Figure, FigureError, RasterRow, Size};
use super::rhythm_figures;
use super::{inspect, AnalysisReport, Inspection};
use crate::detect::PopulationRate;
use crate::fronts::AnalysisSettings;
use crate::geometry::{fit_track, TrackFit, TrackSettings};
use crate::import::ReadOptions;
use crate::recording::{Activity, Recording};
use crate::report::figures::TrainKind;
use crate::Error;
use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

/// Version of the notebook file's layout; bump it when a key changes meaning.
/// Schema 2 added `study`; schema-1 files are read as schema 2 without a study.
pub const NOTEBOOK_SCHEMA: u32 = 2;

/// Files larger than this are referred to by name and SHA-256 only, not embedded.
pub const EMBED_LIMIT_BYTES: usize = 64 << 20;

/// One input file as the notebook keeps it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NotebookFile {
    /// `activity` or `layout`.
    pub role: String,
    pub name: String,
    pub size_bytes: usize,
    /// SHA-256 of the bytes, lower-case hex (FIPS 180-4).
    pub sha256: String,
    /// The file's text, when it is UTF-8 and at most [`EMBED_LIMIT_BYTES`].
    pub content: Option<String>,
}

/// Settings of every step, and what the page shows.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct StepSettings {
    pub read: ReadOptions,
    /// Spike detection on raw voltage (used when the recording is voltage).
    pub voltage: crate::detect::voltage::VoltageSettings,
    /// Microvolts per stored unit of a WAV file (1 when absent).
    pub voltage_wav_uv_per_unit: Option<f64>,
    pub track: TrackSettings,
    pub analysis: AnalysisSettings,
    pub view: ViewSettings,
}

impl StepSettings {
    /// The settings of the path from files to results (what a study run applies).
    pub fn recording(&self) -> crate::RecordingSettings {
        crate::RecordingSettings {
            read: self.read.clone(),
            track: self.track.clone(),
            voltage: self.voltage.clone(),
            analysis: self.analysis.clone(),
        }
    }

    /// Microvolts per stored unit of a WAV file (WAV carries no scale).
    pub fn voltage_wav_scale_uv(&self) -> f64 {
        self.voltage_wav_uv_per_unit.unwrap_or(1.0)
    }
}

/// What the page shows: the selected burst and the raster window.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct ViewSettings {
    /// Selected burst, counted from 1.
    pub burst: usize,
    /// Raster and rate window, seconds from the start of the recording; `None` = the first
    /// 30 s of activity.
    pub window_s: Option<[f64; 2]>,
}

impl Default for ViewSettings {
    fn default() -> Self {
        ViewSettings {
            burst: 1,
            window_s: None,
        }
    }
}

/// The study a notebook holds: the manifest, and each recording's status and output files
/// (not its recording: re-analysing one needs its files dropped again, and a study of many
/// large recordings still makes a small notebook).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StudyNotebook {
    pub manifest: crate::import::Manifest,
    /// One per manifest row, in order; `None` for a recording not analysed yet.
    pub recordings: Vec<Option<StudyRecording>>,
    /// The manifest row open in the steps, if any.
    pub open: Option<usize>,
}

/// One study recording's result as the notebook keeps it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StudyRecording {
    /// Text of its `status.json` ([`crate::study::RecordingStatus`]).
    pub status_json: String,
    /// The output files the study tables are made from, (name, text), as `ringline analyze
    /// --out` writes them (the page keeps `summary.json`, `bursts.csv` and `fronts.csv`).
    pub files: Vec<(String, String)>,
}

/// The notebook file: inputs, settings and results in one JSON document.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Notebook<'a> {
    pub schema: u32,
    pub program: String,
    pub files: Vec<NotebookFile>,
    pub settings: &'a StepSettings,
    pub results: Option<&'a AnalysisReport>,
    pub study: Option<&'a StudyNotebook>,
    /// The raw voltage file the activity's spikes were detected in (name, size, SHA-256): the
    /// notebook holds the detected spikes, not the voltage.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub detected_from: Option<&'a InputFile>,
}

/// A notebook file as read back: the results are recomputed from the files and settings.
#[derive(Debug, Clone, PartialEq, Deserialize)]
pub struct OpenedNotebook {
    pub schema: u32,
    pub files: Vec<NotebookFile>,
    #[serde(default)]
    pub settings: StepSettings,
    /// Schema 2: the study, when the page held one.
    #[serde(default)]
    pub study: Option<StudyNotebook>,
    /// The raw voltage file the spikes were detected in, when they were.
    #[serde(default)]
    pub detected_from: Option<InputFile>,
}

/// Why a notebook file cannot be opened.
#[derive(Debug, Clone, PartialEq, Serialize, thiserror::Error)]
#[error("{message}")]
pub struct NotebookError {
    pub message: String,
}

/// Lower-case hex SHA-256 of `bytes`.
pub fn sha256_hex(bytes: &[u8]) -> String {
    Sha256::digest(bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

/// Reads a notebook file: checks the schema, the study, and that every embedded file matches
/// its SHA-256. Files the notebook only refers to (too large to embed, or an autosaved session
/// whose files are kept apart) are filled in by [`supply_notebook_files`].
pub fn open_notebook(name: &str, bytes: &[u8]) -> Result<OpenedNotebook, NotebookError> {
    let fail = |message: String| NotebookError {
        message: format!("{name}: {message}"),
    };
    let nb: OpenedNotebook = serde_json::from_slice(bytes).map_err(|e| {
        fail(format!(
            "this is not a ringline notebook, or it was changed by hand: line {}, column {}: {}",
            e.line(),
            e.column(),
            crate::json_error_words(&e)
        ))
    })?;
    let mut nb = nb;
    match nb.schema {
        // Schema 1 differs only in having no study: migrate by reading it as schema 2.
        1 => nb.schema = NOTEBOOK_SCHEMA,
        NOTEBOOK_SCHEMA => {}
        other => {
            return Err(fail(format!(
                "expected a notebook of schema 1 or {NOTEBOOK_SCHEMA}, found schema {other}: it was written by a newer ringline"
            )))
        }
    }
    if let Some(study) = &nb.study {
        if study.recordings.len() != study.manifest.rows.len() {
            return Err(fail(format!(
                "expected one study entry per manifest row ({}), found {}",
                study.manifest.rows.len(),
                study.recordings.len()
            )));
        }
    }
    for role in ["activity", "layout"] {
        if !nb.files.iter().any(|f| f.role == role) {
            return Err(fail(format!(
                "expected an {role} file in the notebook, found none"
            )));
        }
    }
    for f in &nb.files {
        if let Some(content) = &f.content {
            let digest = sha256_hex(content.as_bytes());
            if digest != f.sha256 {
                return Err(fail(format!(
                    "the embedded {} file {} does not match its SHA-256 (expected {}, found {digest})",
                    f.role, f.name, f.sha256
                )));
            }
        }
    }
    Ok(nb)
}

/// Fills in the files a notebook refers to without holding them, from `supplied` (name,
/// bytes) matched by SHA-256. A notebook re-opens only when every file is there; otherwise the
/// error names each missing file with its size and digest.
pub fn supply_notebook_files(
    name: &str,
    nb: &mut OpenedNotebook,
    supplied: &[(String, Vec<u8>)],
) -> Result<(), NotebookError> {
    let digests: Vec<String> = supplied.iter().map(|(_, b)| sha256_hex(b)).collect();
    let mut missing = Vec::new();
    for f in nb.files.iter_mut().filter(|f| f.content.is_none()) {
        match digests.iter().position(|d| *d == f.sha256) {
            Some(k) => match String::from_utf8(supplied[k].1.clone()) {
                Ok(text) => f.content = Some(text),
                Err(_) => missing.push(format!(
                    "{} ({} file) matches its SHA-256 but is not UTF-8 text",
                    supplied[k].0, f.role
                )),
            },
            None => {
                let differs = supplied
                    .iter()
                    .any(|(n, _)| n.rsplit(['/', '\\']).next() == Some(f.name.as_str()));
                missing.push(format!(
                    "{} ({} file, {} bytes, SHA-256 {}){}",
                    f.name,
                    f.role,
                    f.size_bytes,
                    f.sha256,
                    if differs {
                        ": a file of that name was given, but its contents differ"
                    } else {
                        ""
                    }
                ));
            }
        }
    }
    if missing.is_empty() {
        Ok(())
    } else {
        Err(NotebookError {
            message: format!(
                "{name} refers to files it does not hold; drop them together with the notebook: {}",
                missing.join("; ")
            ),
        })
    }
}

/// A file's text when a notebook can hold it: UTF-8 and at most [`EMBED_LIMIT_BYTES`].
fn embeddable(bytes: &[u8]) -> Option<String> {
    if bytes.len() > EMBED_LIMIT_BYTES {
        return None;
    }
    String::from_utf8(bytes.to_vec()).ok()
}

/// What the notebook file keeps of each input.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Embedding {
    /// Files up to [`EMBED_LIMIT_BYTES`] that are UTF-8 text are embedded (a notebook to share).
    UpToLimit,
    /// No file is embedded; each is named with its size and SHA-256 (the page's autosave keeps
    /// the bytes apart, once per digest).
    None,
}

/// A figure request's name as the page and the report use it (`site_map`, `raster`, ...).
pub fn request_name(request: &FigureRequest) -> String {
    serde_json::to_value(request)
        .ok()
        .and_then(|v| v.get("figure").and_then(|f| f.as_str()).map(String::from))
        .unwrap_or_default()
}

/// A reader that takes the SHA-256 of what passes through it.
struct Hashing<'r> {
    inner: Box<dyn std::io::Read + 'r>,
    hash: std::rc::Rc<std::cell::RefCell<Sha256>>,
}

impl std::io::Read for Hashing<'_> {
    fn read(&mut self, out: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(out)?;
        self.hash.borrow_mut().update(&out[..n]);
        Ok(n)
    }
}

/// The bins a histogram request asks for: a count, or Freedman-Diaconis.
fn bin_rule(bins: Option<usize>) -> figures::BinRule {
    bins.map_or(figures::BinRule::FreedmanDiaconis, figures::BinRule::Count)
}

/// Which figure to draw.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "figure", rename_all = "snake_case")]
pub enum FigureRequest {
    SiteMap,
    Raster,
    PopulationRate,
    /// `bins`: how many equal bins; Freedman-Diaconis when absent.
    IntervalHistogram {
        #[serde(default)]
        bins: Option<usize>,
    },
    Activation,
    SpeedOverTime,
    /// `bins`: how many equal bins; Freedman-Diaconis when absent.
    SpeedHistogram {
        #[serde(default)]
        bins: Option<usize>,
    },
    InitiationSites,
    Reliability,
    /// Where bursts start: how often each site led.
    Leaders,
    /// How fast each burst recruited its active sites.
    Recruitment,
    /// The population rate's spectrum with the Poisson floor.
    RateSpectrum,
    /// The sites' own frequencies beside the network's.
    SiteFrequencies,
    /// The STTC of every pair, sites in track order.
    SttcMatrix,
    /// Lag between neighbouring sites against their distance.
    Lags,
    /// The share of sites responding at each stimulus amplitude, with its fit; with `site`,
    /// that site's own curve beside the population's.
    ResponseCurve {
        #[serde(default)]
        site: Option<String>,
    },
}

/// The page's state.
#[derive(Debug, Clone)]
pub struct Workbook {
    activity: (String, Vec<u8>),
    layout: (String, Vec<u8>),
    pub settings: StepSettings,
    recording: Recording,
    fit: TrackFit,
    inspection: Inspection,
    report: Option<AnalysisReport>,
    rate: Option<PopulationRate>,
    /// For fluorescence traces, the event onsets per ROI that the last analysis found.
    events: Option<Vec<Vec<f64>>>,
    /// Raw voltage: the electrode report of spike detection (goes into every analysis report).
    electrodes: Option<Vec<crate::detect::voltage::ElectrodeRow>>,
    /// The stimulus protocol file, when one was given with the recording.
    stimuli: Option<(String, Vec<u8>)>,
    /// Raw voltage: the voltage file itself (its digest comes from the shell, which holds it).
    voltage_input: Option<InputFile>,
    /// SHA-256 of the activity, layout and stimulus files, computed when first asked for.
    digests: [std::cell::OnceCell<String>; 3],
    /// Raw voltage: the file's header, to read the voltage around spikes again.
    voltage_header: Option<crate::import::VoltageHeader>,
    /// The activity file's size when it was read as a stream and is not held.
    streamed_activity_bytes: Option<u64>,
}

/// One input file as the workbook knows it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HeldFile<'a> {
    /// `activity`, `layout` or `stimuli`.
    pub role: &'static str,
    pub name: &'a str,
    pub size_bytes: u64,
    /// SHA-256, lower-case hex.
    pub sha256: &'a str,
    /// Its bytes, unless it was read as a stream.
    pub bytes: Option<&'a [u8]>,
}

impl Workbook {
    /// Reads the files and fits the track with `settings` (the analysis waits for
    /// [`Workbook::analyze`]).
    pub fn open(
        activity: (&str, &[u8]),
        layout: (&str, &[u8]),
        settings: StepSettings,
    ) -> Result<Workbook, Error> {
        let activity = (activity.0.to_string(), activity.1.to_vec());
        Workbook::open_owned(activity, layout, settings, &mut |_, _| {})
    }

    /// [`Workbook::open`] taking the activity file's bytes over (no second copy of a large
    /// file), telling `progress(bytes read, bytes in all)` as its rows are read.
    pub fn open_owned(
        activity: (String, Vec<u8>),
        layout: (&str, &[u8]),
        settings: StepSettings,
        progress: &mut dyn FnMut(u64, u64),
    ) -> Result<Workbook, Error> {
        let recording = crate::import::read_recording_with(
            (&activity.0, crate::import::TextSource::Bytes(&activity.1)),
            layout,
            &settings.read,
            progress,
        )?;
        Workbook::with_track(activity, layout, settings, recording)
    }

    /// The workbook of a read recording: fits the track; no analysis yet.
    fn with_track(
        activity: (String, Vec<u8>),
        layout: (&str, &[u8]),
        settings: StepSettings,
        recording: Recording,
    ) -> Result<Workbook, Error> {
        let fit = fit_track(&recording.sites, &settings.track)?;
        let inspection = inspect(&recording, &fit);
        Ok(Workbook {
            activity,
            layout: (layout.0.to_string(), layout.1.to_vec()),
            settings,
            recording,
            fit,
            inspection,
            report: None,
            rate: None,
            events: None,
            electrodes: None,
            stimuli: None,
            voltage_input: None,
            digests: Default::default(),
            voltage_header: None,
            streamed_activity_bytes: None,
        })
    }

    /// [`crate::analyze_file`] into a workbook: reads the activity (detecting spikes in raw
    /// voltage, read in blocks), attaches the stimuli and runs the analysis. The command line
    /// takes this path when it writes a report, so the report has the page's figures.
    pub fn analyze_file(
        mut file: crate::ActivityFile<'_>,
        layout: (&str, &[u8]),
        stimuli: Option<(&str, &[u8])>,
        settings: StepSettings,
        progress: &mut dyn FnMut(&str, u64, u64),
    ) -> Result<Workbook, Error> {
        use crate::import::InputKind;
        let analysis = settings.analysis.clone();
        let mut workbook = match crate::import::classify_input(file.name, file.head) {
            InputKind::Wav | InputKind::VoltageSamples => {
                let header = crate::import::read_voltage_header(
                    file.name,
                    file.head,
                    file.len,
                    file.sidecar,
                    file.wav_uv_per_unit,
                    file.read,
                )?;
                let mut frames = crate::import::frame_reader(&header, file.read);
                Workbook::open_voltage(&header, &mut frames, layout, settings, &mut |d, t| {
                    progress("detecting spikes", d, t)
                })?
                .0
            }
            _ => {
                let bytes = crate::read_whole_table(&mut file, &settings.read.limits)?;
                Workbook::open((file.name, &bytes), layout, settings)?
            }
        };
        if let Some((name, bytes)) = stimuli {
            workbook.attach_stimuli(name, bytes)?;
        }
        workbook.analyze(analysis, &mut |d, t| {
            progress("analysing bursts", d as u64, t as u64)
        })?;
        Ok(workbook)
    }

    /// [`Workbook::open`] on an activity file read as a stream (a large file in the page):
    /// `head` is its first bytes, `reader` gives the whole file from its start (`len` bytes).
    /// The file is never held whole: its SHA-256 is taken as it passes and kept with its size,
    /// so notebooks name it by digest. `progress(bytes read, bytes in all)` as rows are read.
    #[allow(clippy::too_many_arguments)]
    pub fn open_stream(
        name: &str,
        head: &[u8],
        len: u64,
        reader: Box<dyn std::io::Read + '_>,
        layout: (&str, &[u8]),
        settings: StepSettings,
        progress: &mut dyn FnMut(u64, u64),
    ) -> Result<Workbook, Error> {
        let hash = std::rc::Rc::new(std::cell::RefCell::new(Sha256::new()));
        let hashing = Hashing {
            inner: reader,
            hash: hash.clone(),
        };
        let recording = crate::import::read_recording_with(
            (
                name,
                crate::import::TextSource::Stream {
                    head,
                    len,
                    reader: Box::new(hashing),
                },
            ),
            layout,
            &settings.read,
            progress,
        )?;
        let mut workbook =
            Workbook::with_track((name.to_string(), Vec::new()), layout, settings, recording)?;
        let digest: String = hash
            .take()
            .finalize()
            .iter()
            .map(|b| format!("{b:02x}"))
            .collect();
        let _ = workbook.digests[0].set(digest);
        workbook.streamed_activity_bytes = Some(len);
        Ok(workbook)
    }

    /// Gives the recording its stimulus protocol (a file of its own); the analysis must be
    /// run again. Refused when the spike list carries its own stimulus column.
    pub fn attach_stimuli(&mut self, name: &str, bytes: &[u8]) -> Result<(), Error> {
        let mut recording = self.recording.clone();
        if self.stimuli.is_some() {
            recording.stimuli = None;
        }
        crate::attach_stimuli(&mut recording, name, bytes, &self.settings.read)?;
        self.recording = recording;
        self.stimuli = Some((name.to_string(), bytes.to_vec()));
        self.digests[2] = Default::default();
        self.report = None;
        Ok(())
    }

    /// Opens a raw voltage file: detects spikes on every channel (`read(first, end)` gives the
    /// bytes of those frames; `progress(done, total)` in frames), then proceeds as with a spike
    /// list. The workbook keeps the detected spikes as its activity file (a spike list named
    /// after the voltage file), so exports and notebooks carry them, not the voltage.
    pub fn open_voltage(
        header: &crate::import::VoltageHeader,
        read: &mut dyn FnMut(u64, u64) -> Result<Vec<u8>, crate::import::ImportError>,
        layout: (&str, &[u8]),
        settings: StepSettings,
        progress: &mut dyn FnMut(u64, u64),
    ) -> Result<(Workbook, crate::detect::voltage::VoltageSpikes), Error> {
        let (recording, found) = crate::events::voltage_recording(
            header,
            read,
            layout,
            &settings.read,
            &settings.voltage,
            progress,
        )?;
        let trains_s: &[Vec<f64>] = match &recording.activity {
            Activity::Spikes { trains_s } => trains_s,
            Activity::Traces { .. } => &[],
        };
        let sites: Vec<crate::import::SiteSpikes> = recording
            .sites
            .iter()
            .zip(trains_s)
            .map(|(s, t)| crate::import::SiteSpikes {
                site: s.id.clone(),
                times_s: t.clone(),
            })
            .collect();
        let activity = (
            format!("{} (detected spikes).csv", header.file),
            crate::import::write_spike_list(&sites).into_bytes(),
        );
        let mut workbook = Workbook::with_track(activity, layout, settings, recording)?;
        workbook.electrodes = Some(found.electrodes.clone());
        workbook.voltage_header = Some(header.clone());
        workbook.voltage_input = Some(InputFile {
            role: "voltage".into(),
            name: header.file.clone(),
            size_bytes: header.data_offset_bytes + header.frames * header.frame_bytes() as u64,
            sha256: None,
        });
        Ok((workbook, found))
    }

    /// Re-fits the track; the analysis must be run again.
    pub fn set_track(&mut self, track: TrackSettings) -> Result<&Inspection, Error> {
        let fit = fit_track(&self.recording.sites, &track)?;
        self.inspection = inspect(&self.recording, &fit);
        self.fit = fit;
        self.settings.track = track;
        self.report = None;
        self.rate = None;
        Ok(&self.inspection)
    }

    pub fn inspection(&self) -> &Inspection {
        &self.inspection
    }

    pub fn report(&self) -> Option<&AnalysisReport> {
        self.report.as_ref()
    }

    /// Runs the analysis with `settings`; `progress(done, total)` after each burst.
    pub fn analyze(
        &mut self,
        settings: AnalysisSettings,
        progress: &mut dyn FnMut(usize, usize),
    ) -> Result<&AnalysisReport, Error> {
        let events = crate::events::event_trains(&self.recording, &settings.calcium);
        let (mut report, rate) =
            crate::analyze_events(&self.recording, &events, &self.fit, &settings, progress)?;
        self.rate = rate;
        self.events = match events.kind {
            crate::events::EventKind::FluorescenceOnsets => Some(events.trains_s.into_owned()),
            crate::events::EventKind::Spikes => None,
        };
        report.electrodes = self.electrodes.clone();
        self.settings.analysis = settings;
        if !report
            .bursts
            .iter()
            .any(|b| b.burst == self.settings.view.burst)
        {
            self.settings.view.burst = 1;
        }
        Ok(self.report.insert(report))
    }

    /// The last analysis beside a simulation's ground truth (`truth.json` text).
    pub fn compare_with_truth(
        &self,
        truth_json: &str,
    ) -> Result<crate::report::truth::TruthComparison, crate::report::truth::TruthError> {
        let report = self
            .report
            .as_ref()
            .ok_or_else(|| crate::report::truth::TruthError {
                message: "run the analysis first".into(),
            })?;
        crate::report::truth::compare_with_truth(report, truth_json)
    }

    /// The raster window: the user's, or the first 30 s of activity.
    pub fn window_s(&self) -> [f64; 2] {
        self.window_in(&self.settings.view)
    }

    /// The raster window of `view`: its own, or the first 30 s of activity.
    fn window_in(&self, view: &ViewSettings) -> [f64; 2] {
        if let Some(w) = view.window_s {
            return w;
        }
        let first = self.recording.observed_span_s().map_or(0.0, |span| span.0);
        [first, first + 30.0]
    }

    /// Zooms the raster and the rate to the time between pixels `from_px` and `to_px` of
    /// `figure` (one of them, as drawn), for a drag across it; returns the new window, s.
    /// A span under 1 ms, or a figure without an axis, is refused.
    pub fn zoom_to_pixels(
        &mut self,
        figure: &Figure,
        from_px: f64,
        to_px: f64,
    ) -> Result<[f64; 2], FigureError> {
        let axis = figure.x_axis.ok_or_else(|| FigureError {
            message: "this figure has no axis to zoom".into(),
        })?;
        let (a, b) = (axis.value_at(from_px), axis.value_at(to_px));
        let window = [a.min(b), a.max(b)];
        if window[1] - window[0] < 1e-3 || !window.iter().all(|v| v.is_finite()) {
            return Err(FigureError {
                message: "drag across at least a millisecond to zoom".into(),
            });
        }
        self.settings.view.window_s = Some(window);
        Ok(window)
    }

    /// The header of the raw voltage file the spikes were detected in, if any.
    pub fn voltage_header(&self) -> Option<&crate::import::VoltageHeader> {
        self.voltage_header.as_ref()
    }

    /// The evidence behind a site's event times, in the page's view: for raw voltage, the
    /// band-passed voltage around its spikes in the raster window with the detection
    /// threshold (`read(first_frame, end_frame)` reads the voltage file again); for
    /// imaging, the ROI's dF/F around the selected burst (2 s either side) with the event
    /// thresholds and onsets. A spike list holds neither.
    pub fn evidence(
        &self,
        site: &str,
        read: Option<&mut crate::import::FrameRead<'_>>,
        size: Size,
    ) -> Result<Figure, FigureError> {
        let fail = |message: String| FigureError { message };
        let index = self
            .recording
            .sites
            .iter()
            .position(|s| s.id == site)
            .ok_or_else(|| fail(format!("there is no site {site}")))?;
        match (&self.recording.activity, &self.voltage_header) {
            (Activity::Traces { time_s, frame_interval_s, values }, _) => {
                let calcium = &self.settings.analysis.calcium;
                let rate = 1.0 / frame_interval_s;
                let dff = crate::detect::calcium::delta_f_over_f(&values[index], rate, calcium);
                let levels = crate::detect::calcium::event_levels(&dff, calcium);
                let onsets = match &self.events {
                    Some(events) => events[index].clone(),
                    None => crate::detect::calcium::event_onsets(&dff, time_s, rate, calcium),
                };
                let window = self
                    .report
                    .as_ref()
                    .and_then(|r| r.bursts.iter().find(|b| b.burst == self.settings.view.burst))
                    .map_or_else(|| self.window_s(), |b| [b.start_s - 2.0, b.end_s + 2.0]);
                super::evidence_figures::fluorescence_trace(
                    site, time_s, &dff, levels, &onsets, window, size,
                )
            }
            (Activity::Spikes { trains_s }, Some(header)) => {
                let read = read.ok_or_else(|| {
                    fail("the voltage file is not open: drop it again to see its spikes".into())
                })?;
                let row = self
                    .electrodes
                    .iter()
                    .flatten()
                    .find(|r| r.site == site)
                    .ok_or_else(|| fail(format!("no electrode records site {site}")))?;
                let [from, to] = self.window_s();
                let spikes: Vec<f64> = trains_s[index]
                    .iter()
                    .copied()
                    .filter(|t| *t >= from && *t <= to)
                    .collect();
                let v = &self.settings.voltage;
                let snippets = crate::detect::voltage::spike_snippets(
                    header,
                    row.channel - 1,
                    &spikes,
                    v,
                    [1.0, 2.0],
                    read,
                )
                .map_err(|e| fail(e.to_string()))?;
                let k = v.threshold_sd * row.noise_uv;
                let thresholds = match v.polarity {
                    crate::detect::voltage::Polarity::Negative => vec![-k],
                    crate::detect::voltage::Polarity::Positive => vec![k],
                    crate::detect::voltage::Polarity::Both => vec![-k, k],
                };
                super::evidence_figures::voltage_snippets(site, &snippets, &thresholds, size)
            }
            (Activity::Spikes { .. }, None) => Err(fail(
                "a spike list holds only spike times: the evidence view needs raw voltage or ROI traces".into(),
            )),
        }
    }

    /// Draws a figure of the current results, in the page's view.
    pub fn figure(&self, request: &FigureRequest, size: Size) -> Result<Figure, FigureError> {
        self.figure_in_view(request, &self.settings.view, size)
    }

    /// Draws a figure of the current results with the raster window and selected burst of
    /// `view`.
    pub fn figure_in_view(
        &self,
        request: &FigureRequest,
        view: &ViewSettings,
        size: Size,
    ) -> Result<Figure, FigureError> {
        let need = || {
            self.report.as_ref().ok_or_else(|| FigureError {
                message: "run the analysis first".into(),
            })
        };
        let [from_s, to_s] = self.window_in(view);
        match request {
            FigureRequest::SiteMap => figures::site_map(&self.inspection, size),
            FigureRequest::Raster => {
                // Traces: the event onsets the analysis found (none before it runs).
                let (trains_s, kind) = match (&self.recording.activity, &self.events) {
                    (Activity::Spikes { trains_s }, _) => (trains_s, TrainKind::Spikes),
                    (Activity::Traces { .. }, Some(events)) => (events, TrainKind::Events),
                    (Activity::Traces { .. }, None) => {
                        return Err(FigureError {
                            message: "run the analysis first: the raster of an imaging recording shows the calcium events it finds".into(),
                        })
                    }
                };
                let rows: Vec<RasterRow<'_>> = self
                    .inspection
                    .sites
                    .iter()
                    .zip(trains_s)
                    .map(|(s, t)| RasterRow {
                        site: &s.site,
                        along_um: s.along_um,
                        spikes_s: t,
                    })
                    .collect();
                let bursts = self.report.as_ref().map_or(&[][..], |r| &r.bursts[..]);
                let selected = bursts.iter().find(|b| b.burst == view.burst);
                figures::raster(&rows, kind, bursts, selected, from_s, to_s, size)
            }
            FigureRequest::PopulationRate => {
                need()?;
                let rate = self.rate.as_ref().ok_or_else(|| FigureError {
                    message: "no population rate (no spikes or events)".into(),
                })?;
                let kind = match self.recording.activity {
                    Activity::Spikes { .. } => TrainKind::Spikes,
                    Activity::Traces { .. } => TrainKind::Events,
                };
                figures::population_rate(rate, kind, from_s, to_s, size)
            }
            FigureRequest::IntervalHistogram { bins } => {
                let ibis: Vec<f64> = need()?
                    .bursts
                    .windows(2)
                    .map(|w| w[1].start_s - w[0].start_s)
                    .collect();
                figures::interval_histogram(&ibis, bin_rule(*bins), size)
            }
            FigureRequest::Activation => {
                let r = need()?;
                let burst = view.burst;
                let b = r
                    .bursts
                    .iter()
                    .find(|b| b.burst == burst)
                    .ok_or_else(|| FigureError {
                        message: format!("there is no burst {burst}"),
                    })?;
                figures::activation_plot(b, &r.track.track, size)
            }
            FigureRequest::SpeedOverTime => {
                let fronts: Vec<(usize, &crate::fronts::FrontReport)> = need()?
                    .bursts
                    .iter()
                    .filter_map(|b| b.front.as_ref().map(|f| (b.burst, f)))
                    .collect();
                figures::speed_over_time(&fronts, size)
            }
            FigureRequest::SpeedHistogram { bins } => {
                let speeds: Vec<f64> = need()?
                    .bursts
                    .iter()
                    .filter_map(|b| b.front.as_ref().map(|f| f.speed_mm_s))
                    .collect();
                figures::speed_histogram(&speeds, bin_rule(*bins), size)
            }
            FigureRequest::InitiationSites => {
                let r = need()?;
                figures::initiation_sites(
                    &r.summary.initiation_sites,
                    r.track.site_spacing_um,
                    size,
                )
            }
            FigureRequest::Reliability => figures::reliability(&need()?.summary.reliability, size),
            FigureRequest::Leaders => {
                let r = need()?;
                let points: Vec<figures::LeaderPoint> = r
                    .summary
                    .leaders
                    .iter()
                    .map(|l| figures::LeaderPoint {
                        site: l.site.clone(),
                        x_um: l.x_um,
                        y_um: l.y_um,
                        bursts_leading: l.bursts_leading,
                        bursts: r.summary.burst_count,
                        ci95: l.lead_fraction_ci95,
                    })
                    .collect();
                figures::leader_map(&points, size)
            }
            FigureRequest::Recruitment => {
                let r = need()?;
                let bursts: Vec<Vec<f64>> = r
                    .bursts
                    .iter()
                    .map(|b| crate::fronts::order::times_after_first_ms(&b.activations))
                    .collect();
                figures::recruitment(&bursts, size)
            }
            FigureRequest::RateSpectrum => {
                let r = need()?.rhythm.as_ref().ok_or_else(|| FigureError {
                    message: "no spectrum: the recording is shorter than one segment".into(),
                })?;
                rhythm_figures::rate_spectrum(
                    &r.density,
                    r.poisson_floor,
                    r.rhythm_threshold,
                    r.peak_frequency_hz,
                    size,
                )
            }
            FigureRequest::SiteFrequencies => {
                let r = need()?.site_rhythms.as_ref().ok_or_else(|| FigureError {
                    message: "no site rhythms".into(),
                })?;
                let along = self.inspection.sites.iter().all(|s| s.along_um.is_some());
                let sites: Vec<rhythm_figures::SiteFrequency> = r
                    .sites
                    .iter()
                    .zip(&self.inspection.sites)
                    .enumerate()
                    .map(|(k, (row, place))| rhythm_figures::SiteFrequency {
                        site: row.site.clone(),
                        position: if along {
                            place.along_um.unwrap_or(k as f64)
                        } else {
                            k as f64 + 1.0
                        },
                        rate_hz: row.rate_hz,
                        frequency_alone_hz: row.frequency_alone_hz,
                    })
                    .collect();
                rhythm_figures::site_frequencies(
                    &sites,
                    if along {
                        "position along the track (µm)"
                    } else {
                        "site (order in the layout)"
                    },
                    r.mean_frequency_alone_hz,
                    r.mean_frequency_alone_ci95_hz,
                    r.network_frequency_hz,
                    size,
                )
            }
            FigureRequest::SttcMatrix => {
                let y = need()?.synchrony.as_ref().ok_or_else(|| FigureError {
                    message: "no synchrony measures".into(),
                })?;
                if let Some(why) = &y.sttc_skipped {
                    return Err(FigureError {
                        message: why.clone(),
                    });
                }
                let n = y.sttc_sites.len();
                let mut values = vec![None; n * n];
                for i in 0..n {
                    values[i * n + i] = Some(1.0);
                }
                // pairs_table holds (i, j) for i < j in row order.
                let mut pairs = y.pairs_table.iter();
                for i in 0..n {
                    for j in i + 1..n {
                        let v = pairs.next().and_then(|p| p.sttc);
                        values[i * n + j] = v;
                        values[j * n + i] = v;
                    }
                }
                rhythm_figures::sttc_matrix(&y.sttc_sites, &values, size)
            }
            FigureRequest::Lags => {
                let lags = need()?
                    .synchrony
                    .as_ref()
                    .and_then(|y| y.lags.as_ref())
                    .ok_or_else(|| FigureError {
                        message: "no lags: they need a track (a line or a ring), not an open dish"
                            .into(),
                    })?;
                let pairs: Vec<rhythm_figures::PairLag> = lags
                    .table
                    .iter()
                    .filter_map(|p| {
                        p.lag_ms.map(|lag_ms| rhythm_figures::PairLag {
                            site_a: p.site_a.clone(),
                            site_b: p.site_b.clone(),
                            distance_um: p.distance_um,
                            lag_ms,
                        })
                    })
                    .collect();
                rhythm_figures::lag_distance(
                    &pairs,
                    lags.implied_speed_mm_s,
                    lags.implied_speed_ci95_mm_s,
                    size,
                )
            }
            FigureRequest::ResponseCurve { site } => {
                let r = need()?.response.as_ref().ok_or_else(|| FigureError {
                    message: "no stimuli: drop a stimulus protocol with the recording".into(),
                })?;
                let series = |name: &str, curve: &crate::response::ResponseCurve| {
                    super::response_figures::CurveSeries {
                        name: name.to_string(),
                        points: curve
                            .points
                            .iter()
                            .map(|p| crate::response::probit::DosePoint {
                                amplitude: p.amplitude,
                                trials: p.trials,
                                responders: p.responders,
                            })
                            .collect(),
                        fit: curve.fit.clone(),
                    }
                };
                let mut curves = vec![series("all sites", &r.population)];
                if let Some(id) = site {
                    let own =
                        r.sites
                            .iter()
                            .find(|c| &c.name == id)
                            .ok_or_else(|| FigureError {
                                message: format!("no site {id} in the responses"),
                            })?;
                    curves.push(series(&format!("site {id}"), own));
                }
                super::response_figures::response_curves(
                    &format!(
                        "Share responding within {}-{} ms of each stimulus",
                        r.settings.blank_ms, r.settings.window_ms
                    ),
                    &curves,
                    r.unit.symbol(),
                    size,
                )
            }
        }
    }

    /// The input files by role, with their sizes, digests and (when the workbook holds them)
    /// bytes: what a notebook names and an autosave keeps apart from the notebook.
    pub fn held_files(&self) -> Vec<HeldFile<'_>> {
        [
            Some(("activity", &self.activity, &self.digests[0])),
            Some(("layout", &self.layout, &self.digests[1])),
            self.stimuli
                .as_ref()
                .map(|f| ("stimuli", f, &self.digests[2])),
        ]
        .into_iter()
        .flatten()
        .map(|(role, (name, bytes), digest)| {
            // A streamed activity file is not held: its size and digest were kept instead.
            let streamed = role == "activity" && self.streamed_activity_bytes.is_some();
            HeldFile {
                role,
                name: name.as_str(),
                size_bytes: match (streamed, self.streamed_activity_bytes) {
                    (true, Some(size)) => size,
                    _ => bytes.len() as u64,
                },
                sha256: digest.get_or_init(|| sha256_hex(bytes)).as_str(),
                bytes: (!streamed).then_some(bytes.as_slice()),
            }
        })
        .collect()
    }

    /// The input files a shared notebook cannot hold (larger than [`EMBED_LIMIT_BYTES`], not
    /// UTF-8 text, or read as a stream): (name, size in bytes). The notebook names them by
    /// SHA-256, and re-opens when they are dropped with it.
    pub fn files_not_embedded(&self) -> Vec<(String, u64)> {
        self.held_files()
            .into_iter()
            .filter(|f| f.bytes.and_then(embeddable).is_none())
            .map(|f| (f.name.to_string(), f.size_bytes))
            .collect()
    }

    /// What saving a notebook should tell the user, or `None` when the notebook holds every
    /// input: the files it names by SHA-256 without holding them (to be dropped with it to
    /// re-open), and the raw voltage file whose detected spikes it holds instead.
    pub fn notebook_note(&self) -> Option<String> {
        let left = self.files_not_embedded();
        let mut sentences = Vec::new();
        if !left.is_empty() {
            let names: Vec<String> = left
                .iter()
                .map(|(name, size)| format!("{name} ({})", crate::place::bytes(*size)))
                .collect();
            sentences.push(format!(
                "The notebook names {} by its SHA-256 without holding it (too large, or not text). Keep that file with the notebook, and drop both together to re-open it.",
                names.join(" and ")
            ));
        }
        if let Some(v) = &self.voltage_input {
            sentences.push(format!(
                "The notebook holds the spikes detected in {} ({}) and names that file by its SHA-256, not the voltage: it re-opens on its own; to see the voltage around the spikes, open that file itself.",
                v.name,
                crate::place::bytes(v.size_bytes)
            ));
        }
        (!sentences.is_empty()).then(|| sentences.join(" "))
    }

    /// Records the SHA-256 of the raw voltage file (the shell reads it; the workbook keeps only
    /// the spikes detected in it).
    pub fn set_voltage_sha256(&mut self, sha256: String) {
        if let Some(v) = &mut self.voltage_input {
            v.sha256 = Some(sha256);
        }
    }

    /// The input files with their sizes and digests: the raw voltage file (when the spikes
    /// were detected here), the activity file, the layout and the stimulus protocol.
    pub fn input_files(&self) -> Vec<InputFile> {
        let detected = self.voltage_input.is_some();
        self.voltage_input
            .iter()
            .cloned()
            .chain(self.held_files().into_iter().map(|f| InputFile {
                role: if detected && f.role == "activity" {
                    "detected spikes".into()
                } else {
                    f.role.into()
                },
                name: f.name.into(),
                size_bytes: f.size_bytes,
                sha256: Some(f.sha256.into()),
            }))
            .collect()
    }

    /// The report of the last analysis as one document (see [`super::analysis_document`]).
    /// Its figures use a fixed view (the first 30 s of activity; the first burst with a
    /// front), so a report does not depend on where the page was scrolled or zoomed.
    pub fn report_document(&self) -> Result<Document, FigureError> {
        let report = self.report.as_ref().ok_or_else(|| FigureError {
            message: "run the analysis first".into(),
        })?;
        let view = ViewSettings {
            burst: report
                .bursts
                .iter()
                .find(|b| b.front.is_some())
                .map_or(1, |b| b.burst),
            window_s: None,
        };
        let mut requests = vec![
            (FigureRequest::SiteMap, "Map of the sites with the track"),
            (FigureRequest::Raster, "Raster of the first 30 s of activity by site, with the bursts"),
            (FigureRequest::PopulationRate, "Population rate with the detection threshold"),
            (FigureRequest::IntervalHistogram { bins: None }, "Histogram of interburst intervals"),
            (FigureRequest::Activation, "Activation time against position for the first burst with a front, with the fitted model"),
            (FigureRequest::SpeedOverTime, "Front speed over the recording with 95% intervals"),
            (FigureRequest::SpeedHistogram { bins: None }, "Histogram of front speeds"),
            (FigureRequest::InitiationSites, "Where fronts start"),
            (FigureRequest::Reliability, "Propagation reliability against distance"),
            (FigureRequest::Leaders, "Share of bursts each site led"),
            (FigureRequest::Recruitment, "Recruitment of the active sites over time in each burst"),
            (FigureRequest::RateSpectrum, "Spectrum of the population rate with the Poisson floor"),
            (FigureRequest::SiteFrequencies, "Each site's frequency on its own beside the network's burst frequency"),
            (FigureRequest::SttcMatrix, "Spike time tiling coefficient of every pair of sites, in track order"),
            (FigureRequest::Lags, "Lag between neighbouring sites against their distance along the track"),
        ];
        if report.response.is_some() {
            requests.push((
                FigureRequest::ResponseCurve { site: None },
                "Share of sites responding at each stimulus amplitude, with the fitted cumulative Gaussian",
            ));
        }
        let figures = requests
            .into_iter()
            .map(|(request, caption)| {
                let name = request_name(&request);
                match self.figure_in_view(&request, &view, Size::default()) {
                    Ok(f) => Block::Figure {
                        name,
                        caption: caption.into(),
                        svg: f.svg,
                    },
                    Err(e) => Block::MissingFigure {
                        name,
                        caption: caption.into(),
                        reason: e.message,
                    },
                }
            })
            .collect();
        let mut settings =
            serde_json::to_value(self.settings.recording()).unwrap_or(serde_json::Value::Null);
        if self.voltage_input.is_none() {
            if let Some(map) = settings.as_object_mut() {
                map.remove("voltage");
            }
        }
        Ok(super::analysis_document::analysis_document(
            report,
            &self.input_files(),
            &settings,
            figures,
        ))
    }

    /// The files of `ringline analyze --out`, as (name, contents); `None` before the analysis.
    pub fn exports(&self) -> Option<Vec<(&'static str, String)>> {
        self.report.as_ref().map(AnalysisReport::output_files)
    }

    /// The notebook file (JSON): both inputs with their SHA-256 (embedded when small enough),
    /// every setting, the results, and the study the page holds, if any.
    pub fn notebook_json(&self, study: Option<&StudyNotebook>, embedding: Embedding) -> String {
        let nb = Notebook {
            schema: NOTEBOOK_SCHEMA,
            program: format!("ringline {}", env!("CARGO_PKG_VERSION")),
            files: self
                .held_files()
                .into_iter()
                .map(|f| NotebookFile {
                    role: f.role.into(),
                    name: f.name.into(),
                    size_bytes: f.size_bytes as usize,
                    sha256: f.sha256.into(),
                    content: match embedding {
                        Embedding::UpToLimit => f.bytes.and_then(embeddable),
                        Embedding::None => None,
                    },
                })
                .collect(),
            settings: &self.settings,
            results: self.report.as_ref(),
            study,
            detected_from: self.voltage_input.as_ref(),
        };
        serde_json::to_string_pretty(&nb).unwrap_or_else(|e| {
            serde_json::json!({ "error": format!("the notebook could not be written: {e}") })
                .to_string()
        })
    }

    /// Re-opens a notebook: reads its files with its settings and runs the analysis.
    pub fn from_notebook(
        nb: &OpenedNotebook,
        progress: &mut dyn FnMut(usize, usize),
    ) -> Result<Workbook, Error> {
        if let Some(f) = nb.files.iter().find(|f| f.content.is_none()) {
            return Err(crate::import::ImportError::new(
                crate::place::Place::file(&f.name),
                crate::import::ImportProblem::BadOption,
                format!(
                    "the notebook does not hold this {} file ({} bytes, SHA-256 {}); drop it together with the notebook",
                    f.role, f.size_bytes, f.sha256
                ),
            )
            .into());
        }
        let get = |role: &str| {
            nb.files
                .iter()
                .find(|f| f.role == role)
                .map(|f| {
                    (
                        f.name.as_str(),
                        f.content.as_deref().unwrap_or("").as_bytes(),
                    )
                })
                .unwrap_or(("", b""))
        };
        let mut wb = Workbook::open(get("activity"), get("layout"), nb.settings.clone())?;
        if nb.files.iter().any(|f| f.role == "stimuli") {
            let (name, bytes) = get("stimuli");
            wb.attach_stimuli(name, bytes)?;
        }
        wb.voltage_input = nb.detected_from.clone();
        let view = nb.settings.view.clone();
        wb.analyze(nb.settings.analysis.clone(), progress)?;
        wb.settings.view = view;
        Ok(wb)
    }
}
