//! WebAssembly bindings: a thin shell for the page's worker. Each entry point takes file
//! bytes and settings (plain JS objects, read with serde), calls the library and hands back
//! plain JS objects. Errors come back as `{ place, problem, message }` objects, never panics;
//! should a panic happen anyway, its message is kept for [`last_panic`] and the worker that
//! caught the trap is replaced by the page.

use crate::fronts::AnalysisSettings;
use crate::geometry::TrackSettings;
use crate::import::ReadOptions;
use crate::report::figures::{Figure, Size};
use crate::report::workbook::{open_notebook, FigureRequest, StepSettings, ViewSettings, Workbook};
use serde::Serialize;
use std::sync::Mutex;
use wasm_bindgen::prelude::*;

static LAST_PANIC: Mutex<String> = Mutex::new(String::new());

/// Keeps every panic's message for [`last_panic`] (runs once when the module starts).
#[wasm_bindgen(start)]
pub fn start() {
    std::panic::set_hook(Box::new(|info| {
        if let Ok(mut last) = LAST_PANIC.lock() {
            *last = info.to_string();
        }
    }));
}

/// The message of the last panic, if any: the worker reads it after a trap.
#[wasm_bindgen(js_name = lastPanic)]
pub fn last_panic() -> String {
    LAST_PANIC.lock().map(|s| s.clone()).unwrap_or_default()
}

/// Panics on purpose, so the page's tests can check that a panic is shown and the worker is
/// replaced. Nothing in the page calls it.
#[wasm_bindgen(js_name = panicForTest)]
pub fn panic_for_test() {
    #[allow(clippy::panic)]
    {
        panic!("a deliberate panic for the page's recovery test");
    }
}

fn to_js<T: Serialize>(value: &T) -> Result<JsValue, JsValue> {
    value
        .serialize(&serde_wasm_bindgen::Serializer::json_compatible())
        .map_err(|e| {
            // Not through plain_error, which itself passes a value to the page.
            JsValue::from_str(&format!(
                "internal: could not pass the result to the page: {e}"
            ))
        })
}

fn settings<T: serde::de::DeserializeOwned + Default>(
    value: JsValue,
    what: &str,
) -> Result<T, JsValue> {
    if value.is_undefined() || value.is_null() {
        return Ok(T::default());
    }
    serde_wasm_bindgen::from_value(value)
        .map_err(|e| plain_error(format!("{what}: the settings cannot be read: {e}")))
}

/// Default reader settings and track settings, so the page shows the library's defaults.
#[wasm_bindgen(js_name = defaultSettings)]
pub fn default_settings() -> Result<JsValue, JsValue> {
    #[derive(Serialize)]
    struct Defaults {
        read: ReadOptions,
        track: TrackSettings,
        analysis: AnalysisSettings,
    }
    to_js(&Defaults {
        read: ReadOptions::default(),
        track: TrackSettings::default(),
        analysis: AnalysisSettings::default(),
    })
}

/// `ringline inspect` on two files' bytes.
#[wasm_bindgen]
pub fn inspect(
    activity_name: &str,
    activity_bytes: &[u8],
    layout_name: &str,
    layout_bytes: &[u8],
    read: JsValue,
    track: JsValue,
) -> Result<JsValue, JsValue> {
    let read: ReadOptions = settings(read, "reader")?;
    let track: TrackSettings = settings(track, "track")?;
    match crate::inspect_files(
        (activity_name, activity_bytes),
        (layout_name, layout_bytes),
        &read,
        &track,
    ) {
        Ok(report) => to_js(&report),
        Err(e) => Err(error_to_js(&e)?),
    }
}

fn error_to_js(e: &crate::Error) -> Result<JsValue, JsValue> {
    match e {
        crate::Error::Import(e) => to_js(e),
        crate::Error::Geometry(e) => to_js(e),
        crate::Error::Analysis(e) => to_js(e),
    }
}

/// `ringline analyze` on two files' bytes. `progress`, when given, is called as
/// `progress(done, total)` after each burst.
#[wasm_bindgen]
#[allow(clippy::too_many_arguments)]
pub fn analyze(
    activity_name: &str,
    activity_bytes: &[u8],
    layout_name: &str,
    layout_bytes: &[u8],
    read: JsValue,
    track: JsValue,
    analysis: JsValue,
    progress: Option<js_sys::Function>,
) -> Result<JsValue, JsValue> {
    let read: ReadOptions = settings(read, "reader")?;
    let track: TrackSettings = settings(track, "track")?;
    let analysis: AnalysisSettings = settings(analysis, "analysis")?;
    let mut report = progress_fn(&progress);
    let mut report_progress = |done: usize, total: usize| report(done as f64, total as f64);
    match crate::analyze_files(
        (activity_name, activity_bytes),
        (layout_name, layout_bytes),
        &read,
        &track,
        &analysis,
        &mut report_progress,
    ) {
        Ok(report) => to_js(&report),
        Err(e) => Err(error_to_js(&e)?),
    }
}

/// Calls the page's `progress(done, total)`, when it gave one (bursts, or frames of a file).
fn progress_fn(progress: &Option<js_sys::Function>) -> impl FnMut(f64, f64) + '_ {
    move |done: f64, total: f64| {
        if let Some(f) = progress {
            let _ = f.call2(&JsValue::NULL, &JsValue::from(done), &JsValue::from(total));
        }
    }
}

/// [`progress_fn`] with the stage's name first: `progress(stage, done, total)`.
fn staged_progress_fn(progress: &Option<js_sys::Function>) -> impl FnMut(&str, f64, f64) + '_ {
    move |stage: &str, done: f64, total: f64| {
        if let Some(f) = progress {
            let _ = f.call3(
                &JsValue::NULL,
                &JsValue::from_str(stage),
                &JsValue::from(done),
                &JsValue::from(total),
            );
        }
    }
}

fn message<E: std::fmt::Display + Serialize>(e: &E) -> JsValue {
    #[derive(Serialize)]
    struct Located<'a, E> {
        /// The sentence the command line prints, with its place.
        text: String,
        detail: &'a E,
    }
    to_js(&Located {
        text: e.to_string(),
        detail: e,
    })
    .unwrap_or_else(|_| JsValue::from_str(&e.to_string()))
}

/// An error without a typed detail, in the one shape the page reads: `{ text, detail: null }`.
fn plain_error(text: String) -> JsValue {
    #[derive(Serialize)]
    struct Plain {
        text: String,
        detail: Option<()>,
    }
    let fallback = JsValue::from_str(&text);
    to_js(&Plain { text, detail: None }).unwrap_or(fallback)
}

fn located(e: &crate::Error) -> JsValue {
    match e {
        crate::Error::Import(inner) => message(inner),
        crate::Error::Geometry(inner) => message(inner),
        crate::Error::Analysis(inner) => message(inner),
    }
}

/// The page's state in the worker: files, settings and results of every step (see
/// [`crate::report::workbook`]).
#[wasm_bindgen(js_name = Workbook)]
pub struct WasmWorkbook {
    inner: Workbook,
    /// The last activation figure, for the pointer read-out.
    activation: Option<Figure>,
    /// The last raster and rate figures, for zooming by dragging across them.
    zoomable: Vec<(String, Figure)>,
}

#[wasm_bindgen(js_class = Workbook)]
impl WasmWorkbook {
    /// Reads both files and fits the track with `settings` (a `StepSettings` object or null).
    #[wasm_bindgen(constructor)]
    pub fn new(
        activity_name: &str,
        activity_bytes: &[u8],
        layout_name: &str,
        layout_bytes: &[u8],
        settings: JsValue,
    ) -> Result<WasmWorkbook, JsValue> {
        let settings: StepSettings = self::settings(settings, "notebook")?;
        Workbook::open(
            (activity_name, activity_bytes),
            (layout_name, layout_bytes),
            settings,
        )
        .map(|inner| WasmWorkbook {
            inner,
            activation: None,
            zoomable: Vec::new(),
        })
        .map_err(|e| located(&e))
    }

    /// Reads the activity file from the page's `File` in pieces of 8 MiB through
    /// `read(from_byte, to_byte)` (so the main thread never holds it and the tab holds it
    /// once), then the layout, and fits the track. `progress(stage, done, total)`: "reading
    /// the file" in bytes, then "reading rows" in bytes parsed.
    #[allow(clippy::too_many_arguments)]
    #[wasm_bindgen(js_name = fromFile)]
    pub fn from_file(
        name: &str,
        len: f64,
        read: js_sys::Function,
        layout_name: &str,
        layout_bytes: &[u8],
        settings: JsValue,
        progress: Option<js_sys::Function>,
    ) -> Result<WasmWorkbook, JsValue> {
        const PIECE: u64 = 8 << 20;
        let settings: StepSettings = self::settings(settings, "notebook")?;
        let len = len.max(0.0) as u64;
        let limit = settings.read.limits.max_bytes as u64;
        if len > limit {
            return Err(located(&crate::Error::from(crate::import::ImportError::new(
                crate::place::Place::file(name),
                crate::import::ImportProblem::TooLarge,
                format!("the file is {len} bytes, more than the limit of {limit} bytes; raise the limit if this file is expected"),
            ))));
        }
        let mut report = staged_progress_fn(&progress);
        let mut read_bytes = js_byte_reader(name, &read);
        if len as usize > crate::report::workbook::EMBED_LIMIT_BYTES {
            // Too large for a notebook to hold anyway: read as a stream, never held whole.
            let head = read_bytes(0, len.min(65_536)).map_err(|e| located(&e.into()))?;
            let pieces = JsPieces {
                read: &mut read_bytes,
                at: 0,
                len,
                piece: Vec::new(),
                used: 0,
                progress: &mut |done, total| report("reading the file", done as f64, total as f64),
            };
            return Workbook::open_stream(
                name,
                &head,
                len,
                Box::new(pieces),
                (layout_name, layout_bytes),
                settings,
                &mut |_, _| {},
            )
            .map(|inner| WasmWorkbook {
                inner,
                activation: None,
                zoomable: Vec::new(),
            })
            .map_err(|e| located(&e));
        }
        let mut bytes = Vec::with_capacity(len as usize);
        let mut at = 0;
        while at < len {
            let to = (at + PIECE).min(len);
            let piece = read_bytes(at, to).map_err(|e| located(&e.into()))?;
            bytes.extend_from_slice(&piece);
            at = to;
            report("reading the file", at as f64, len as f64);
        }
        Workbook::open_owned(
            (name.to_string(), bytes),
            (layout_name, layout_bytes),
            settings,
            &mut |done, total| report("reading rows", done as f64, total as f64),
        )
        .map(|inner| WasmWorkbook {
            inner,
            activation: None,
            zoomable: Vec::new(),
        })
        .map_err(|e| located(&e))
    }

    /// Re-opens a notebook file and runs its analysis. `files` (`[[name, Uint8Array], ...]`
    /// or null) supplies the files the notebook refers to without holding them, matched by
    /// SHA-256.
    #[wasm_bindgen(js_name = fromNotebook)]
    pub fn from_notebook(
        name: &str,
        bytes: &[u8],
        files: JsValue,
        progress: Option<js_sys::Function>,
    ) -> Result<WasmWorkbook, JsValue> {
        let mut nb = open_notebook(name, bytes).map_err(|e| message(&e))?;
        let mut supplied: Vec<(String, Vec<u8>)> = Vec::new();
        if let Some(list) = files.dyn_ref::<js_sys::Array>() {
            for pair in list.iter() {
                let pair = js_sys::Array::from(&pair);
                let name = pair.get(0).as_string().unwrap_or_default();
                supplied.push((name, js_sys::Uint8Array::new(&pair.get(1)).to_vec()));
            }
        }
        crate::report::workbook::supply_notebook_files(name, &mut nb, &supplied)
            .map_err(|e| message(&e))?;
        let mut report = progress_fn(&progress);
        Workbook::from_notebook(&nb, &mut |done, total| report(done as f64, total as f64))
            .map(|inner| WasmWorkbook {
                inner,
                activation: None,
                zoomable: Vec::new(),
            })
            .map_err(|e| located(&e))
    }

    /// Opens a raw voltage file held by the page as a `File`: `head` is its first bytes (64 KiB
    /// is plenty), `file_len` its size; a WAV file needs no sidecar, interleaved samples need
    /// the sidecar's name and bytes. `read(from_byte, to_byte)` must return those bytes of the
    /// file (the worker reads `File.slice` with `FileReaderSync`), so the file is never whole
    /// in memory. Returns the electrode report; the workbook then holds the detected spikes.
    #[allow(clippy::too_many_arguments)]
    #[wasm_bindgen(js_name = fromVoltage)]
    pub fn from_voltage(
        name: &str,
        head: &[u8],
        file_len: f64,
        sidecar_name: Option<String>,
        sidecar_bytes: Option<Vec<u8>>,
        layout_name: &str,
        layout_bytes: &[u8],
        settings: JsValue,
        read: js_sys::Function,
        progress: Option<js_sys::Function>,
    ) -> Result<VoltageOpened, JsValue> {
        let settings: StepSettings = self::settings(settings, "notebook")?;
        let sidecar = sidecar_name.as_deref().zip(sidecar_bytes.as_deref());
        let mut read_bytes = js_byte_reader(name, &read);
        let header = crate::import::read_voltage_header(
            name,
            head,
            file_len.max(0.0) as u64,
            sidecar,
            settings.voltage_wav_scale_uv(),
            &mut read_bytes,
        )
        .map_err(|e| message(&e))?;
        let mut read_frames = crate::import::frame_reader(&header, &mut read_bytes);
        let mut report = progress_fn(&progress);
        let (inner, found) = Workbook::open_voltage(
            &header,
            &mut read_frames,
            (layout_name, layout_bytes),
            settings,
            &mut |done, total| report(done as f64, total as f64),
        )
        .map_err(|e| located(&e))?;
        Ok(VoltageOpened {
            workbook: Some(WasmWorkbook {
                inner,
                activation: None,
                zoomable: Vec::new(),
            }),
            electrodes: to_js(&found.electrodes)?,
        })
    }

    /// The inspection: sites, track, notices.
    pub fn inspection(&self) -> Result<JsValue, JsValue> {
        to_js(self.inner.inspection())
    }

    /// Every setting in use.
    pub fn settings(&self) -> Result<JsValue, JsValue> {
        to_js(&self.inner.settings)
    }

    /// Re-fits the track with new track settings; returns the new inspection.
    /// Gives the recording its stimulus protocol; the analysis must be run again.
    #[wasm_bindgen(js_name = attachStimuli)]
    pub fn attach_stimuli(&mut self, name: &str, bytes: &[u8]) -> Result<(), JsValue> {
        self.inner
            .attach_stimuli(name, bytes)
            .map_err(|e| located(&e))
    }

    #[wasm_bindgen(js_name = setTrack)]
    pub fn set_track(&mut self, track: JsValue) -> Result<JsValue, JsValue> {
        let track: TrackSettings = settings(track, "track")?;
        self.activation = None;
        match self.inner.set_track(track) {
            Ok(inspection) => to_js(inspection),
            Err(e) => Err(located(&e)),
        }
    }

    /// Runs the analysis; `progress(done, total)` after each burst. Returns the report.
    pub fn analyze(
        &mut self,
        analysis: JsValue,
        progress: Option<js_sys::Function>,
    ) -> Result<JsValue, JsValue> {
        let analysis: AnalysisSettings = settings(analysis, "analysis")?;
        let mut report = progress_fn(&progress);
        self.activation = None;
        match self.inner.analyze(analysis, &mut |done, total| {
            report(done as f64, total as f64)
        }) {
            Ok(r) => to_js(r),
            Err(e) => Err(located(&e)),
        }
    }

    /// The report of the last analysis, or null.
    pub fn report(&self) -> Result<JsValue, JsValue> {
        to_js(&self.inner.report())
    }

    /// Sets the selected burst and the raster window.
    #[wasm_bindgen(js_name = setView)]
    pub fn set_view(&mut self, view: JsValue) -> Result<(), JsValue> {
        self.inner.settings.view = settings::<ViewSettings>(view, "view")?;
        Ok(())
    }

    /// Draws a figure: `request` is `{ figure: "site_map" | "raster" | "population_rate" |
    /// "interval_histogram" | "activation" | "speed_over_time" | "speed_histogram" |
    /// "initiation_sites" | "reliability" }`. Returns `{ svg, width_px, height_px }`.
    pub fn figure(
        &mut self,
        request: JsValue,
        width_px: u32,
        height_px: u32,
    ) -> Result<JsValue, JsValue> {
        let request: FigureRequest = serde_wasm_bindgen::from_value(request)
            .map_err(|e| plain_error(format!("figure: the request cannot be read: {e}")))?;
        let size = Size {
            width_px: width_px.clamp(200, 4000),
            height_px: height_px.clamp(150, 4000),
        };
        let figure = self.inner.figure(&request, size).map_err(|e| message(&e))?;
        #[derive(Serialize)]
        struct Drawn<'a> {
            svg: &'a str,
            width_px: u32,
            height_px: u32,
        }
        let out = to_js(&Drawn {
            svg: &figure.svg,
            width_px: figure.width_px,
            height_px: figure.height_px,
        });
        if request == FigureRequest::Activation {
            self.activation = Some(figure);
        } else if matches!(
            request,
            FigureRequest::Raster | FigureRequest::PopulationRate
        ) {
            let name = crate::report::workbook::request_name(&request);
            self.zoomable.retain(|(n, _)| *n != name);
            self.zoomable.push((name, figure));
        }
        out
    }

    /// The evidence behind a site's event times (`{ svg, width_px, height_px }`): for raw
    /// voltage, `read(from_byte, to_byte)` reads the voltage file again around its spikes.
    pub fn evidence(
        &self,
        site: &str,
        read: Option<js_sys::Function>,
        width_px: u32,
        height_px: u32,
    ) -> Result<JsValue, JsValue> {
        let size = Size {
            width_px: width_px.clamp(200, 4000),
            height_px: height_px.clamp(150, 4000),
        };
        let figure = match (self.inner.voltage_header(), &read) {
            (Some(header), Some(read)) => {
                let mut bytes = js_byte_reader(&header.file, read);
                let mut frames = crate::import::frame_reader(header, &mut bytes);
                self.inner.evidence(site, Some(&mut frames), size)
            }
            _ => self.inner.evidence(site, None, size),
        }
        .map_err(|e| message(&e))?;
        #[derive(Serialize)]
        struct Drawn<'a> {
            svg: &'a str,
            width_px: u32,
            height_px: u32,
        }
        to_js(&Drawn {
            svg: &figure.svg,
            width_px: figure.width_px,
            height_px: figure.height_px,
        })
    }

    /// Zooms the raster and rate to the time between two pixels of the named figure (`raster`
    /// or `population_rate`, as last drawn); returns the view.
    pub fn zoom(&mut self, figure: &str, from_px: f64, to_px: f64) -> Result<JsValue, JsValue> {
        let drawn = self
            .zoomable
            .iter()
            .find(|(n, _)| n == figure)
            .map(|(_, f)| f.clone())
            .ok_or_else(|| plain_error(format!("draw the {figure} figure first")))?;
        self.inner
            .zoom_to_pixels(&drawn, from_px, to_px)
            .map_err(|e| message(&e))?;
        to_js(&self.inner.settings.view)
    }

    /// The activation point nearest to (x, y) pixels of the last activation figure (within
    /// 12 px), described with its units; null when none is near.
    pub fn readout(&self, x_px: f64, y_px: f64) -> Option<String> {
        self.activation
            .as_ref()
            .and_then(|f| f.nearest(x_px, y_px, 12.0))
            .map(|p| p.label.clone())
    }

    /// The `index`-th read-out point of the last activation figure (sites in the figure's
    /// order): `{ label, count }`, or null when there is none.
    #[wasm_bindgen(js_name = readoutPoint)]
    pub fn readout_point(&self, index: usize) -> Result<JsValue, JsValue> {
        #[derive(Serialize)]
        struct Point<'a> {
            label: &'a str,
            count: usize,
        }
        to_js(&self.activation.as_ref().and_then(|f| {
            f.points.get(index).map(|p| Point {
                label: &p.label,
                count: f.points.len(),
            })
        }))
    }

    /// `{ bursts_csv, fronts_csv, activation_csv, leaders_csv, summary_json }`, as `ringline analyze --out`
    /// writes them; null before the analysis.
    pub fn exports(&self) -> Result<JsValue, JsValue> {
        to_js(&self.inner.exports())
    }

    /// The last analysis beside a simulation's ground truth (the text of its truth.json):
    /// `{ rows: [...], true_fronts, measured, median_true_speed_mm_s, median_speed_mm_s,
    /// median_abs_relative_error, interval_coverage }`.
    #[wasm_bindgen(js_name = compareTruth)]
    pub fn compare_truth(&self, truth_json: &str) -> Result<JsValue, JsValue> {
        let comparison = self
            .inner
            .compare_with_truth(truth_json)
            .map_err(|e| message(&e))?;
        #[derive(Serialize)]
        struct Compared<'a> {
            comparison: &'a crate::report::truth::TruthComparison,
            sentence: String,
            table: crate::report::document::Table,
        }
        to_js(&Compared {
            sentence: crate::report::page_text::truth_sentence(&comparison),
            table: crate::report::page_text::truth_table(&comparison),
            comparison: &comparison,
        })
    }

    /// This workbook's analysis as a study recording (`row` of `manifest`), for the study
    /// table after the recording was analysed on its own: `{ status_json, files }`.
    #[wasm_bindgen(js_name = studyEntry)]
    pub fn study_entry(&self, manifest: JsValue, row: usize) -> Result<JsValue, JsValue> {
        let manifest: crate::import::Manifest = serde_wasm_bindgen::from_value(manifest)
            .map_err(|e| plain_error(format!("manifest: {e}")))?;
        let Some(manifest_row) = manifest.rows.get(row) else {
            return Err(plain_error("internal: no such manifest row".to_string()));
        };
        let result = self
            .inner
            .report()
            .ok_or_else(|| "run the analysis first".to_string());
        self::study_entry(&manifest, manifest_row, result)
    }

    /// The input files as a notebook names them: `[{ role, name, size_bytes, sha256 }]`.
    #[wasm_bindgen(js_name = inputFiles)]
    pub fn input_files(&self) -> Result<JsValue, JsValue> {
        #[derive(Serialize)]
        struct Named<'a> {
            role: &'a str,
            name: &'a str,
            size_bytes: u64,
            sha256: &'a str,
        }
        let files: Vec<Named<'_>> = self
            .inner
            .held_files()
            .into_iter()
            .map(|f| Named {
                role: f.role,
                name: f.name,
                size_bytes: f.size_bytes,
                sha256: f.sha256,
            })
            .collect();
        to_js(&files)
    }

    /// What saving a notebook tells the user (files named but not held, voltage whose spikes
    /// it holds), or null.
    #[wasm_bindgen(js_name = notebookNote)]
    pub fn notebook_note(&self) -> Option<String> {
        self.inner.notebook_note()
    }

    /// The bytes of the input file with this role (`activity`, `layout`, `stimuli`); null
    /// for a file read as a stream (the page holds it as a `File`).
    #[wasm_bindgen(js_name = inputBytes)]
    pub fn input_bytes(&self, role: &str) -> Option<Vec<u8>> {
        self.inner
            .held_files()
            .into_iter()
            .find(|f| f.role == role)
            .and_then(|f| f.bytes.map(<[u8]>::to_vec))
    }

    /// The self-contained HTML report of the last analysis (the bytes of `ringline analyze
    /// --report`).
    #[wasm_bindgen(js_name = reportHtml)]
    pub fn report_html(&self) -> Result<String, JsValue> {
        let document = self.inner.report_document().map_err(|e| message(&e))?;
        Ok(document.to_html())
    }

    /// The page's wording of the open recording, its analysis and burst `burst` (from 1):
    /// `{ track, burst, steps: { bursts, rhythm, sites, synchrony, lags } | null,
    /// response: { sentence, table } | null }`.
    pub fn words(&self, burst: usize) -> Result<JsValue, JsValue> {
        use crate::report::page_text;
        #[derive(Serialize)]
        struct Response {
            sentence: String,
            table: crate::report::document::Table,
        }
        #[derive(Serialize)]
        struct Words {
            track: String,
            burst: Option<String>,
            steps: Option<page_text::StepTexts>,
            response: Option<Response>,
        }
        let report = self.inner.report();
        to_js(&Words {
            track: page_text::track_sentence(self.inner.inspection()),
            burst: report
                .and_then(|r| r.bursts.iter().find(|b| b.burst == burst))
                .map(page_text::burst_sentence),
            steps: report.map(page_text::step_texts),
            response: report.and_then(|r| r.response.as_ref()).map(|r| Response {
                sentence: page_text::response_sentence(r),
                table: page_text::response_table(r),
            }),
        })
    }

    /// The summary as labelled facts `[{ key, label, text, value }]` (the text report's
    /// lines); null before the analysis.
    #[wasm_bindgen(js_name = summaryFacts)]
    pub fn summary_facts(&self) -> Result<JsValue, JsValue> {
        to_js(&self.inner.report().map(|r| r.facts()))
    }

    /// Records the SHA-256 of the raw voltage file the spikes were detected in.
    #[wasm_bindgen(js_name = setVoltageSha256)]
    pub fn set_voltage_sha256(&mut self, hex: String) {
        self.inner.set_voltage_sha256(hex);
    }

    /// The notebook file (JSON text), holding `study` (a `StudyNotebook` object) when the
    /// page has one.
    #[wasm_bindgen(js_name = notebookJson)]
    pub fn notebook_json(&self, study: JsValue, embed: bool) -> Result<String, JsValue> {
        let study: Option<crate::report::workbook::StudyNotebook> =
            if study.is_null() || study.is_undefined() {
                None
            } else {
                Some(
                    serde_wasm_bindgen::from_value(study)
                        .map_err(|e| plain_error(format!("study: {e}")))?,
                )
            };
        let embedding = if embed {
            crate::report::workbook::Embedding::UpToLimit
        } else {
            crate::report::workbook::Embedding::None
        };
        Ok(self.inner.notebook_json(study.as_ref(), embedding))
    }
}

/// SHA-256 computed piece by piece (FIPS 180-4), for files too large to hold whole.
#[wasm_bindgen(js_name = Sha256Stream)]
pub struct Sha256Stream {
    inner: sha2::Sha256,
}

#[wasm_bindgen(js_class = Sha256Stream)]
impl Sha256Stream {
    #[wasm_bindgen(constructor)]
    #[allow(clippy::new_without_default)]
    pub fn new() -> Sha256Stream {
        use sha2::Digest;
        Sha256Stream {
            inner: sha2::Sha256::new(),
        }
    }

    pub fn update(&mut self, bytes: &[u8]) {
        use sha2::Digest;
        self.inner.update(bytes);
    }

    /// The digest as lower-case hex; the stream starts again.
    pub fn finish(&mut self) -> String {
        use sha2::Digest;
        self.inner
            .finalize_reset()
            .iter()
            .map(|b| format!("{b:02x}"))
            .collect()
    }
}

/// The demo recording the page offers on first load: `{ activity_name, activity, layout_name,
/// layout }` (text). It is the kinematic strip of `demo-data/strip-16`, made by our simulator.
#[wasm_bindgen(js_name = demoFiles)]
pub fn demo_files() -> Result<JsValue, JsValue> {
    #[derive(Serialize)]
    struct Demo {
        activity_name: &'static str,
        activity: &'static str,
        layout_name: &'static str,
        layout: &'static str,
    }
    to_js(&Demo {
        activity_name: "strip-16/spikes.csv",
        activity: include_str!("../../demo-data/strip-16/spikes.csv"),
        layout_name: "strip-16/layout.csv",
        layout: include_str!("../../demo-data/strip-16/layout.csv"),
    })
}

/// `ringline simulate` on a scenario (JSON text): returns `[[file name, content], ...]`, the
/// text files the command line writes (binary voltage, when asked for, is left out).
/// `progress(stage, done_s, total_s)` as the simulation runs.
#[wasm_bindgen]
pub fn simulate(
    scenario_json: &str,
    progress: Option<js_sys::Function>,
) -> Result<JsValue, JsValue> {
    let scenario = crate::simulate::parse_scenario(scenario_json)
        .map_err(|e| plain_error(format!("scenario: {e}")))?;
    let mut report = staged_progress_fn(&progress);
    let output = crate::simulate::simulation_files(&scenario, &mut report)
        .map_err(|e| plain_error(format!("scenario: {e}")))?;
    text_files(output.files)
}

/// `ringline simulate` with culture options instead of a scenario file (an object with the
/// fields of `CultureOptions`: `shape` and, all optional, `length_um`, `width_um`,
/// `radius_um`, `density_per_mm2`, `mean_in_degree`, `sigma_um`, `electrodes`, `rois`,
/// `duration_s`, `seed`). Returns `[[file name, content], ...]` like [`simulate`], ending
/// with `scenario.json`.
#[wasm_bindgen(js_name = simulateCulture)]
pub fn simulate_culture(
    options: JsValue,
    progress: Option<js_sys::Function>,
) -> Result<JsValue, JsValue> {
    let options: crate::simulate::network::CultureOptions = serde_wasm_bindgen::from_value(options)
        .map_err(|e| plain_error(format!("culture options: {e}")))?;
    let mut report = staged_progress_fn(&progress);
    let output = crate::simulate::culture_files(&options, &mut report)
        .map_err(|e| plain_error(format!("culture options: {e}")))?;
    text_files(output.files)
}

/// The text files among `files`, as `[[name, content], ...]` for JavaScript.
fn text_files(files: Vec<(String, Vec<u8>)>) -> Result<JsValue, JsValue> {
    let text: Vec<(String, String)> = files
        .into_iter()
        .filter_map(|(name, bytes)| String::from_utf8(bytes).ok().map(|t| (name, t)))
        .collect();
    to_js(&text)
}

/// A file the page holds, read in pieces of 4 MiB as a stream.
struct JsPieces<'a, 'r> {
    read: &'a mut dyn FnMut(u64, u64) -> Result<Vec<u8>, crate::import::ImportError>,
    at: u64,
    len: u64,
    piece: Vec<u8>,
    used: usize,
    progress: &'r mut dyn FnMut(u64, u64),
}

impl std::io::Read for JsPieces<'_, '_> {
    fn read(&mut self, out: &mut [u8]) -> std::io::Result<usize> {
        if self.used == self.piece.len() {
            if self.at >= self.len {
                return Ok(0);
            }
            let to = (self.at + (4 << 20)).min(self.len);
            self.piece =
                (self.read)(self.at, to).map_err(|e| std::io::Error::other(e.to_string()))?;
            self.used = 0;
            self.at = to;
            (self.progress)(self.at, self.len);
            if self.piece.is_empty() {
                return Ok(0);
            }
        }
        let n = out.len().min(self.piece.len() - self.used);
        out[..n].copy_from_slice(&self.piece[self.used..self.used + n]);
        self.used += n;
        Ok(n)
    }
}

/// Bytes `[from, to)` of a file the page holds, through its `read(from_byte, to_byte)`
/// (the worker reads `File.slice` with `FileReaderSync`).
fn js_byte_reader<'a>(
    name: &'a str,
    read: &'a js_sys::Function,
) -> impl FnMut(u64, u64) -> Result<Vec<u8>, crate::import::ImportError> + 'a {
    move |from: u64, to: u64| {
        read.call2(
            &JsValue::NULL,
            &JsValue::from(from as f64),
            &JsValue::from(to as f64),
        )
        .map(|v| js_sys::Uint8Array::new(&v).to_vec())
        .map_err(|e| {
            crate::import::ImportError::new(
                crate::place::Place::file(name),
                crate::import::ImportProblem::BadValue,
                format!("the file could not be read: {e:?}"),
            )
        })
    }
}

// ---------------------------------------------------------------- studies

/// What a file is, from its name and first bytes (see `import::classify_input`): one word.
#[wasm_bindgen(js_name = classifyInput)]
pub fn classify_input(name: &str, head: &[u8]) -> String {
    crate::import::classify_input(name, head)
        .as_str()
        .to_string()
}

/// Why a file `classifyInput` calls unknown cannot be read: the located message of the
/// reader it comes closest to (see `import::why_unrecognised`).
#[wasm_bindgen(js_name = whyUnrecognised)]
pub fn why_unrecognised(name: &str, head: &[u8]) -> JsValue {
    message(&crate::import::why_unrecognised(name, head))
}

/// Reads a study manifest; errors are located.
#[wasm_bindgen(js_name = readManifest)]
pub fn read_manifest(name: &str, bytes: &[u8]) -> Result<JsValue, JsValue> {
    let manifest =
        crate::import::read_manifest(bytes, name, Default::default()).map_err(|e| message(&e))?;
    to_js(&manifest)
}

/// A manifest for recordings dropped without one: `files` is `[[name, kind word], ...]`.
/// Returns `{ name, text }`.
#[wasm_bindgen(js_name = manifestForFiles)]
pub fn manifest_for_files(files: JsValue) -> Result<JsValue, JsValue> {
    let files: Vec<(String, String)> = settings(files, "files")?;
    let files: Vec<(String, crate::import::InputKind)> = files
        .into_iter()
        .map(|(n, k)| {
            let kind =
                crate::import::InputKind::parse(&k).unwrap_or(crate::import::InputKind::Unknown);
            (n, kind)
        })
        .collect();
    let text = crate::study::manifest_for_files(&files).map_err(|e| message(&e))?;
    #[derive(Serialize)]
    struct Made {
        name: &'static str,
        text: String,
    }
    to_js(&Made {
        name: "dropped-recordings.csv",
        text,
    })
}

/// Which dropped file each manifest row names (`study::match_files`).
#[wasm_bindgen(js_name = matchStudyFiles)]
pub fn match_study_files(manifest: JsValue, names: JsValue) -> Result<JsValue, JsValue> {
    let manifest: crate::import::Manifest = serde_wasm_bindgen::from_value(manifest)
        .map_err(|e| plain_error(format!("manifest: {e}")))?;
    let names: Vec<String> = settings(names, "file names")?;
    to_js(&crate::study::match_files(&manifest, &names))
}

/// Analyses one recording of a study as `ringline batch` does. The data file is read
/// through `read(from_byte, to_byte)` (a `File` in the worker), so raw voltage streams in
/// blocks; `head` is its first bytes. Never fails for the recording's own problems: they
/// become a failed status. Returns `{ status_json, files: [[name, text], ...] }`.
#[allow(clippy::too_many_arguments)]
#[wasm_bindgen(js_name = analyzeStudyRecording)]
pub fn analyze_study_recording(
    manifest: JsValue,
    row: usize,
    data_name: &str,
    head: &[u8],
    data_len: f64,
    read: js_sys::Function,
    sidecar_name: Option<String>,
    sidecar_bytes: Option<Vec<u8>>,
    layout_name: &str,
    layout_bytes: &[u8],
    layer_name: Option<String>,
    layer_text: Option<String>,
    stimuli_name: Option<String>,
    stimuli_bytes: Option<Vec<u8>>,
    settings: JsValue,
    progress: Option<js_sys::Function>,
) -> Result<JsValue, JsValue> {
    let manifest: crate::import::Manifest = serde_wasm_bindgen::from_value(manifest)
        .map_err(|e| plain_error(format!("manifest: {e}")))?;
    let step: StepSettings = self::settings(settings, "settings")?;
    let Some(manifest_row) = manifest.rows.get(row) else {
        return Err(plain_error("internal: no such manifest row".to_string()));
    };
    let mut report_progress = staged_progress_fn(&progress);
    let result = (|| -> Result<crate::report::AnalysisReport, String> {
        let layer = layer_name.as_deref().zip(layer_text.as_deref());
        let settings = crate::study::recording_settings(&step.recording(), manifest_row, layer)
            .map_err(|e| e.to_string())?;
        let mut read_bytes = js_byte_reader(data_name, &read);
        crate::analyze_file(
            crate::ActivityFile {
                name: data_name,
                len: data_len.max(0.0) as u64,
                head,
                read: &mut read_bytes,
                sidecar: sidecar_name.as_deref().zip(sidecar_bytes.as_deref()),
                wav_uv_per_unit: step.voltage_wav_scale_uv(),
            },
            (layout_name, layout_bytes),
            stimuli_name.as_deref().zip(stimuli_bytes.as_deref()),
            &settings,
            &mut |stage, d, t| report_progress(stage, d as f64, t as f64),
        )
        .map_err(|e| e.to_string())
    })();
    study_entry(
        &manifest,
        manifest_row,
        result.as_ref().map_err(Clone::clone),
    )
}

/// The study a notebook file holds (schema 2), or null.
#[wasm_bindgen(js_name = notebookStudy)]
pub fn notebook_study(name: &str, bytes: &[u8]) -> Result<JsValue, JsValue> {
    let nb = open_notebook(name, bytes).map_err(|e| message(&e))?;
    to_js(&nb.study)
}

/// The entry of a study recording that cannot run (its files were not dropped):
/// `{ status_json, files: [] }`.
#[wasm_bindgen(js_name = failedStudyEntry)]
pub fn failed_study_entry(
    manifest: JsValue,
    row: usize,
    message: String,
) -> Result<JsValue, JsValue> {
    let manifest: crate::import::Manifest = serde_wasm_bindgen::from_value(manifest)
        .map_err(|e| plain_error(format!("manifest: {e}")))?;
    let Some(manifest_row) = manifest.rows.get(row) else {
        return Err(plain_error("internal: no such manifest row".to_string()));
    };
    study_entry(&manifest, manifest_row, Err(message))
}

/// `{ status_json, files }` of a study recording, analysed or failed.
fn study_entry(
    manifest: &crate::import::Manifest,
    row: &crate::import::ManifestRow,
    result: Result<&crate::report::AnalysisReport, String>,
) -> Result<JsValue, JsValue> {
    #[derive(Serialize)]
    struct Entry {
        status_json: String,
        files: Vec<(&'static str, String)>,
    }
    let entry = match result {
        Ok(report) => Entry {
            status_json: crate::study::RecordingStatus::analysed(manifest, row, report).to_json(),
            files: report.output_files(),
        },
        Err(message) => Entry {
            status_json: crate::study::RecordingStatus::failed(manifest, row, message).to_json(),
            files: Vec::new(),
        },
    };
    to_js(&entry)
}

/// The study step's sentence and table: `manifest` as read, and per row `{ status_json,
/// summary_json, problem }` (see [`crate::report::page_text::study_view`]).
#[wasm_bindgen(js_name = studyView)]
pub fn study_view(manifest: JsValue, rows: JsValue) -> Result<JsValue, JsValue> {
    let manifest: crate::import::Manifest = serde_wasm_bindgen::from_value(manifest)
        .map_err(|e| plain_error(format!("study: the manifest cannot be read: {e}")))?;
    let rows: Vec<crate::report::page_text::StudyRowState> = settings(rows, "study rows")?;
    to_js(&crate::report::page_text::study_view(&manifest, &rows))
}

/// The study's tables from every recording's `{ folder, status_json, summary_json,
/// bursts_csv, fronts_csv }`: `{ files: [[name, text], ...], recordings, failed }`.
#[wasm_bindgen(js_name = combineStudy)]
pub fn combine_study(outputs: JsValue) -> Result<JsValue, JsValue> {
    let outputs: Vec<crate::study::RecordingOutputs> = settings(outputs, "study outputs")?;
    let tables = crate::study::combine(&outputs).map_err(|e| message(&e))?;
    #[derive(Serialize)]
    struct Tables {
        files: Vec<(String, String)>,
        recordings: usize,
        failed: usize,
    }
    to_js(&Tables {
        files: tables.files,
        recordings: tables.recordings,
        failed: tables.failed,
    })
}

/// Compares the conditions of a study from its tables' text (`recordings.csv`, and
/// `fronts.csv` and `bursts.csv` for metrics per event; as `ringline compare`): the report
/// and its files (comparisons.csv and the figures).
#[wasm_bindgen(js_name = compareStudy)]
pub fn compare_study(
    recordings_csv: String,
    fronts_csv: Option<String>,
    bursts_csv: Option<String>,
    options: JsValue,
) -> Result<JsValue, JsValue> {
    let options: crate::study::compare::CompareSettings = settings(options, "comparison settings")?;
    let texts = crate::study::compare::StudyTexts {
        recordings: &recordings_csv,
        fronts: fronts_csv.as_deref(),
        bursts: bursts_csv.as_deref(),
    };
    let report = crate::study::compare::compare(texts, &options).map_err(|e| message(&e))?;
    #[derive(Serialize)]
    struct Compared {
        report: crate::study::compare::CompareReport,
        text: String,
        files: Vec<(String, String)>,
        /// The study report (the bytes of `ringline compare --report`).
        report_html: String,
        /// The page's sentence and table.
        sentence: String,
        table: crate::report::document::Table,
    }
    let files = crate::report::compare_figures::compare_output_files(&report);
    let report_html =
        crate::report::study_document::study_document(&report, &texts, &files).to_html();
    to_js(&Compared {
        text: report.to_text(),
        sentence: crate::report::page_text::compare_sentence(&report),
        table: crate::report::page_text::compare_table(&report),
        report,
        files,
        report_html,
    })
}

/// What opening a voltage file gives the page: the workbook and the electrode report.
#[wasm_bindgen]
pub struct VoltageOpened {
    workbook: Option<WasmWorkbook>,
    electrodes: JsValue,
}

#[wasm_bindgen]
impl VoltageOpened {
    /// The workbook (once; later calls give undefined).
    #[wasm_bindgen(js_name = takeWorkbook)]
    pub fn take_workbook(&mut self) -> Option<WasmWorkbook> {
        self.workbook.take()
    }

    /// The electrode report: one row per channel.
    pub fn electrodes(&self) -> JsValue {
        self.electrodes.clone()
    }
}
