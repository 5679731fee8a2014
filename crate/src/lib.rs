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

pub mod csv_out;
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
pub mod study;

#[cfg(not(target_arch = "wasm32"))]
pub mod cli;

#[cfg(target_arch = "wasm32")]
mod wasm;

/// Any error of the pipeline, by layer; each carries its place and one sentence.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum Error {
    #[error(transparent)]
    Import(#[from] import::ImportError),
    #[error(transparent)]
    Geometry(#[from] geometry::GeometryError),
    #[error(transparent)]
    Analysis(#[from] fronts::AnalysisError),
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

/// [`analyze_recording`] for a spike list or ROI traces with separate settings.
/// `progress(done, total)` is called after each burst.
pub fn analyze_files(
    activity: (&str, &[u8]),
    layout: (&str, &[u8]),
    read: &import::ReadOptions,
    track: &geometry::TrackSettings,
    settings: &fronts::AnalysisSettings,
    progress: &mut dyn FnMut(usize, usize),
) -> Result<report::AnalysisReport, Error> {
    let settings = RecordingSettings {
        read: read.clone(),
        track: track.clone(),
        voltage: Default::default(),
        analysis: settings.clone(),
    };
    analyze_recording(
        ActivityInput::Table(activity.0, activity.1),
        layout,
        &settings,
        &mut |_, done, total| progress(done as usize, total as usize),
    )
}

/// Reads a raw voltage file (its header already read; `read(first_frame, end_frame)` returns
/// the bytes of those frames), detects spikes on every channel and puts them on the layout.
/// Channel i is the site in row i of the layout unless the file names its channels' sites.
/// `progress(done, total)` reports frames. Returns the recording (as spikes) and what
/// detection found, with the electrode report.
pub fn voltage_recording(
    header: &import::VoltageHeader,
    read: &mut dyn FnMut(u64, u64) -> Result<Vec<u8>, import::ImportError>,
    layout: (&str, &[u8]),
    options: &import::ReadOptions,
    voltage: &detect::voltage::VoltageSettings,
    progress: &mut dyn FnMut(u64, u64),
) -> Result<(recording::Recording, detect::voltage::VoltageSpikes), Error> {
    let layout = import::read_layout(
        layout.1,
        layout.0,
        &import::LayoutOptions {
            length_unit: options.length_unit,
            limits: options.limits,
        },
    )?;
    let sites: Vec<String> = match &header.channel_sites {
        Some(sites) => sites.clone(),
        None => {
            if header.channels > layout.sites.len() {
                return Err(import::ImportError::new(
                    place::Place::file(&header.file),
                    import::ImportProblem::UnplacedSites,
                    format!(
                        "expected at most one channel per layout row ({} in {}), found {} channels: name each channel's site (channel_sites in the sidecar) or add rows to the layout",
                        layout.sites.len(),
                        layout.file,
                        header.channels
                    ),
                )
                .into());
            }
            layout.sites[..header.channels]
                .iter()
                .map(|s| s.id.clone())
                .collect()
        }
    };
    let found = detect::voltage::detect_voltage_spikes(header, &sites, voltage, read, progress)?;
    let spikes = import::SpikeList {
        file: header.file.clone(),
        sites: sites
            .iter()
            .zip(&found.trains_s)
            .map(|(site, times)| import::SiteSpikes {
                site: site.clone(),
                times_s: times.clone(),
            })
            .collect(),
        time_unit: import::TimeUnit::Seconds,
        time_quantum_s: Some(1.0 / header.sample_rate_hz),
        ignored_columns: Vec::new(),
        row_count: found.trains_s.iter().map(Vec::len).sum(),
        notices: Vec::new(),
    };
    let mut recording = recording::Recording::from_spike_list(&layout, &spikes)?;
    recording.metadata.sample_interval_s = Some(1.0 / header.sample_rate_hz);
    if let Some(source) = recording
        .metadata
        .sources
        .iter_mut()
        .find(|s| s.name == header.file)
    {
        source.kind = format!("voltage_{}", header.container);
    }
    if header.container == "wav" {
        recording.notices.push(place::Notice::new(
            place::Place::file(&header.file),
            format!(
                "a WAV file carries no voltage scale: samples were taken as {} µV per unit (noise levels in the electrode report use this scale; spike detection does not depend on it)",
                header.scale_uv
            ),
        ));
    }
    for e in found
        .electrodes
        .iter()
        .filter(|e| e.status != detect::voltage::ElectrodeStatus::Ok)
    {
        recording.notices.push(place::Notice::new(
            place::Place::site(&e.site),
            format!(
                "electrode on channel {}: {} (noise {:.2} µV, {} spikes, {:.3} Hz)",
                e.channel,
                e.status.words(),
                e.noise_uv,
                e.spike_count,
                e.rate_hz
            ),
        ));
    }
    Ok((recording, found))
}

/// The activity file of one recording, as a shell hands it over.
pub enum ActivityInput<'a> {
    /// A spike list or ROI traces: (file name, bytes).
    Table(&'a str, &'a [u8]),
    /// Raw voltage: its header, and `read(first_frame, end_frame)` giving the bytes of those
    /// frames (the file is read in blocks, never whole).
    Voltage(
        &'a import::VoltageHeader,
        &'a mut dyn FnMut(u64, u64) -> Result<Vec<u8>, import::ImportError>,
    ),
}

/// Every setting of one recording's path from files to results.
#[derive(Debug, Clone, Default, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(default)]
pub struct RecordingSettings {
    pub read: import::ReadOptions,
    pub track: geometry::TrackSettings,
    pub voltage: detect::voltage::VoltageSettings,
    pub analysis: fronts::AnalysisSettings,
}

/// The one entry point from input files to a recording's results: reads the activity (or
/// detects spikes in raw voltage), fits the track and runs the front analysis. The command
/// line, study runs and the page's one-shot path all call it; [`report::AnalysisReport::output_files`]
/// turns its result into files. `progress(stage, done, total)` reports detection (frames),
/// then bursts.
pub fn analyze_recording(
    activity: ActivityInput<'_>,
    layout: (&str, &[u8]),
    settings: &RecordingSettings,
    progress: &mut dyn FnMut(&str, u64, u64),
) -> Result<report::AnalysisReport, Error> {
    let (recording, electrodes) = match activity {
        ActivityInput::Table(name, bytes) => (
            import::read_recording((name, bytes), layout, &settings.read)?,
            None,
        ),
        ActivityInput::Voltage(header, read) => {
            let (recording, found) = voltage_recording(
                header,
                read,
                layout,
                &settings.read,
                &settings.voltage,
                &mut |d, t| progress("detecting spikes", d, t),
            )?;
            (recording, Some(found.electrodes))
        }
    };
    let fit = geometry::fit_track(&recording.sites, &settings.track)?;
    let analysis = fronts::analyze(&recording, &fit, &settings.analysis, &mut |done, total| {
        progress("analysing bursts", done as u64, total as u64)
    })?;
    let mut report = report::AnalysisReport::new(&recording, &fit, &settings.analysis, analysis);
    report.electrodes = electrodes;
    Ok(report)
}
