//! WebAssembly bindings: a thin shell for the page's worker. Each entry point takes file
//! bytes and settings (plain JS objects, read with serde), calls the library and hands back
//! plain JS objects. Errors come back as `{ place, problem, message }` objects, never panics.

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
    }
    to_js(&Defaults {
        read: ReadOptions::default(),
        track: TrackSettings::default(),
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
        Err(crate::Error::Import(e)) => Err(to_js(&e)?),
        Err(crate::Error::Geometry(e)) => Err(to_js(&e)?),
        Err(crate::Error::Analysis(e)) => Err(to_js(&e)?),
    }
}
