//! # ringline
//!
//! Propagation of network-burst fronts in dissociated neuronal cultures grown on patterned
//! substrates (straight tracks, rings, strips, open dishes) and recorded with multi-electrode
//! arrays or calcium imaging.
//!
//! The library is a chain of pure functions over plain data, one module per stage:
//!
//! | stage | module | in | out |
//! |---|---|---|---|
//! | import | [`import`] | bytes of text files | [`recording::Recording`] |
//! | geometry | [`geometry`] | site positions | [`geometry::TrackFit`] |
//! | report | [`report`] | recording + track | [`report::Inspection`] |
//! | simulate | [`simulate`] | a scenario and a seed | files in the import formats + ground truth |
//!
//! The command-line tool (`cli`, native only) and the WebAssembly bindings (`wasm`, only
//! on `wasm32`) are thin shells: they pass bytes and settings in and print or hand back the
//! result. The core touches no file system, no clock and no threads, so the same code runs
//! natively and in a browser tab.
//!
//! ## Conventions
//! - Time is in seconds and positions in micrometres, in the layout's own axes. Speeds are
//!   reported in mm/s (1 mm/s = 1 um/ms). Field names carry their unit (`along_um`, `rate_hz`).
//! - On a ring, angles follow the mathematical sense in the layout's axes: counter-clockwise
//!   means increasing atan2(y - cy, x - cx). A layout in image coordinates (y down) shows
//!   counter-clockwise as clockwise on screen.
//! - Randomness is always seeded through ChaCha8 (`rand_chacha`), so a native run and a wasm
//!   run with the same seed give identical results.
//! - Errors name their place (file, line, column, site) and say what was expected and what
//!   was found. Nothing in a user's file makes the library panic.

pub mod detect;
pub mod fronts;
pub mod geometry;
pub mod import;
pub mod place;
pub mod recording;
pub mod report;
pub mod rhythm;
pub mod simulate;
pub mod stats;

#[cfg(not(target_arch = "wasm32"))]
pub mod cli;

#[cfg(target_arch = "wasm32")]
mod wasm;

use std::fmt;

/// Any error of the pipeline, by layer.
#[derive(Debug, Clone, PartialEq)]
pub enum Error {
    Import(import::ImportError),
    Geometry(geometry::GeometryError),
    Analysis(fronts::AnalysisError),
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Error::Import(e) => e.fmt(f),
            Error::Geometry(e) => e.fmt(f),
            Error::Analysis(e) => e.fmt(f),
        }
    }
}

impl std::error::Error for Error {}

impl From<import::ImportError> for Error {
    fn from(e: import::ImportError) -> Self {
        Error::Import(e)
    }
}

impl From<fronts::AnalysisError> for Error {
    fn from(e: fronts::AnalysisError) -> Self {
        Error::Analysis(e)
    }
}

impl From<geometry::GeometryError> for Error {
    fn from(e: geometry::GeometryError) -> Self {
        Error::Geometry(e)
    }
}

/// Reads an activity file and a layout, fits the track and summarises both: the whole of
/// `ringline inspect`, shared by the command line and the page.
pub fn inspect_files(
    activity: (&str, &[u8]),
    layout: (&str, &[u8]),
    read: &import::ReadOptions,
    track: &geometry::TrackSettings,
) -> Result<report::Inspection, Error> {
    let recording = import::read_recording(activity, layout, read)?;
    let fit = geometry::fit_track(&recording.sites, track)?;
    Ok(report::inspect(&recording, &fit))
}

/// Reads an activity file and a layout, fits the track and runs the front analysis: the whole
/// of `ringline analyze`. `progress(done, total)` is called after each burst.
pub fn analyze_files(
    activity: (&str, &[u8]),
    layout: (&str, &[u8]),
    read: &import::ReadOptions,
    track: &geometry::TrackSettings,
    settings: &fronts::AnalysisSettings,
    progress: &mut dyn FnMut(usize, usize),
) -> Result<report::AnalysisReport, Error> {
    let recording = import::read_recording(activity, layout, read)?;
    let fit = geometry::fit_track(&recording.sites, track)?;
    let analysis = fronts::analyze(&recording, &fit, settings, progress)?;
    Ok(report::AnalysisReport::new(
        &recording, &fit, settings, analysis,
    ))
}
