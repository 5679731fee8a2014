//! WebAssembly bindings: a thin shell for the page's worker. Each entry point takes file
//! bytes and settings (plain JS objects, read with serde), calls the library and hands back
//! plain JS objects. Errors come back as `{ place, problem, message }` objects, never panics.

use crate::fronts::AnalysisSettings;
use crate::geometry::TrackSettings;
use crate::import::ReadOptions;
use serde::Serialize;
use wasm_bindgen::prelude::*;

fn to_js<T: Serialize>(value: &T) -> Result<JsValue, JsValue> {
    value
        .serialize(&serde_wasm_bindgen::Serializer::json_compatible())
        .map_err(|e| {
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
        .map_err(|e| JsValue::from_str(&format!("{what}: the settings cannot be read: {e}")))
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
    let mut report_progress = |done: usize, total: usize| {
        if let Some(f) = &progress {
            let _ = f.call2(
                &JsValue::NULL,
                &JsValue::from(done as u32),
                &JsValue::from(total as u32),
            );
        }
    };
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
