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
pub mod events;
pub mod fronts;
pub mod geometry;
pub mod import;
pub mod place;
pub mod recording;
pub mod report;
pub mod response;
pub mod rhythm;
pub mod simulate;
pub mod stats;
pub mod study;
pub mod synchrony;

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

/// serde says "FOUND, expected WANTED"; a scientist reads what the key takes, then what it
/// found.
pub(crate) fn expected_then_found(words: String) -> String {
    if let Some(rest) = words.strip_prefix("unknown field ") {
        if let Some((field, wanted)) = rest.split_once(", expected ") {
            return format!("unknown key {field}; expected {wanted}");
        }
    }
    match words.split_once(", expected ") {
        Some((found, wanted)) => format!("expected {wanted}, found {found}"),
        None => words,
    }
}

/// A JSON reading error in words: serde's type names become plain words, and the location is
/// given once, by the caller.
pub(crate) fn json_error_words(e: &serde_json::Error) -> String {
    let text = e.to_string();
    let text = match text.rfind(" at line ") {
        Some(at) => &text[..at],
        None => &text,
    };
    let mut text = text
        .replace("invalid type: ", "")
        .replace("invalid value: ", "");
    for (jargon, words) in [
        ("usize", "a whole number (0 or more)"),
        ("u64", "a whole number (0 or more)"),
        ("u32", "a whole number (0 or more)"),
        ("f64", "a number"),
        ("a sequence", "a list [...]"),
        ("a map", "an object {...}"),
    ] {
        text = text.replace(&format!("expected {jargon}"), &format!("expected {words}"));
        text = text.replace(
            &format!("expected struct {jargon}"),
            &format!("expected {words}"),
        );
    }
    text
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

/// A recording's activity file as a shell offers it without reading it whole: name, length
/// in bytes, first bytes (64 KiB is plenty), and `read(from_byte, to_byte)` for any range.
pub struct ActivityFile<'a> {
    pub name: &'a str,
    pub len: u64,
    pub head: &'a [u8],
    pub read: &'a mut dyn FnMut(u64, u64) -> Result<Vec<u8>, import::ImportError>,
    /// The sidecar (name, bytes) of raw samples, when the shell found one
    /// ([`import::sidecar_names`] says where to look).
    pub sidecar: Option<(&'a str, &'a [u8])>,
    /// Microvolts per stored unit of a WAV file (WAV carries no scale).
    pub wav_uv_per_unit: f64,
}

/// [`analyze_recording`] on a file the shell has not read: decides what it is
/// ([`import::classify_input`]), then reads raw voltage block by block through its header
/// and a text table whole (within the size limit). The command line, study runs and the
/// page's studies all come through here.
pub fn analyze_file(
    mut file: ActivityFile<'_>,
    layout: (&str, &[u8]),
    stimuli: Option<(&str, &[u8])>,
    settings: &RecordingSettings,
    progress: &mut dyn FnMut(&str, u64, u64),
) -> Result<report::AnalysisReport, Error> {
    use import::InputKind;
    let header = match import::classify_input(file.name, file.head) {
        InputKind::Wav | InputKind::VoltageSamples => import::read_voltage_header(
            file.name,
            file.head,
            file.len,
            file.sidecar,
            file.wav_uv_per_unit,
            file.read,
        )?,
        _ => {
            let bytes = read_whole_table(&mut file, &settings.read.limits)?;
            return analyze_recording(
                ActivityInput::Table(file.name, &bytes),
                layout,
                stimuli,
                settings,
                progress,
            );
        }
    };
    let mut frames = import::frame_reader(&header, file.read);
    analyze_recording(
        ActivityInput::Voltage(&header, &mut frames),
        layout,
        stimuli,
        settings,
        progress,
    )
}

/// The whole of a text activity file, refused when it is larger than the limit.
pub(crate) fn read_whole_table(
    file: &mut ActivityFile<'_>,
    limits: &import::ImportLimits,
) -> Result<Vec<u8>, Error> {
    let limit = limits.max_bytes as u64;
    if file.len > limit {
        return Err(import::ImportError::new(
            place::Place::file(file.name),
            import::ImportProblem::TooLarge,
            format!(
                "the file is {} bytes, more than the limit of {limit} bytes (read.limits.max_bytes, --max-mib); raise the limit if this file is expected",
                file.len
            ),
        )
        .into());
    }
    Ok((file.read)(0, file.len)?)
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
        None,
        &settings,
        &mut |_, done, total| progress(done as usize, total as usize),
    )
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
/// turns its result into files. `stimuli` is a stimulus protocol file (name, bytes), when
/// one comes with the recording. `progress(stage, done, total)` reports detection (frames),
/// then bursts.
pub fn analyze_recording(
    activity: ActivityInput<'_>,
    layout: (&str, &[u8]),
    stimuli: Option<(&str, &[u8])>,
    settings: &RecordingSettings,
    progress: &mut dyn FnMut(&str, u64, u64),
) -> Result<report::AnalysisReport, Error> {
    let (mut recording, electrodes) = match activity {
        ActivityInput::Table(name, bytes) => (
            import::read_recording((name, bytes), layout, &settings.read)?,
            None,
        ),
        ActivityInput::Voltage(header, read) => {
            let (recording, found) = events::voltage_recording(
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
    if let Some((name, bytes)) = stimuli {
        attach_stimuli(&mut recording, name, bytes, &settings.read)?;
    }
    let fit = geometry::fit_track(&recording.sites, &settings.track)?;
    let events = events::event_trains(&recording, &settings.analysis.calcium);
    let (mut report, _rate) = analyze_events(
        &recording,
        &events,
        &fit,
        &settings.analysis,
        &mut |done, total| progress("analysing bursts", done as u64, total as u64),
    )?;
    report.electrodes = electrodes;
    Ok(report)
}

/// Reads a stimulus protocol file into the recording; refused when the spike list carried
/// its own stimulus column (two protocols for one recording).
pub fn attach_stimuli(
    recording: &mut recording::Recording,
    name: &str,
    bytes: &[u8],
    read: &import::ReadOptions,
) -> Result<(), Error> {
    let protocol = import::read_stimuli(bytes, name, read.time_unit, read.limits)?;
    if let Some(own) = &recording.stimuli {
        return Err(import::ImportError::new(
            place::Place::file(name),
            import::ImportProblem::BadOption,
            format!(
                "the spike list {} already gives the stimuli in its own column; give the protocol once, in the list or in this file",
                own.file
            ),
        )
        .into());
    }
    let known: std::collections::HashSet<&str> =
        recording.sites.iter().map(|s| s.id.as_str()).collect();
    if let Some((stimulus, site)) = protocol.stimuli.iter().find_map(|st| {
        st.site
            .as_deref()
            .filter(|site| !known.contains(site))
            .map(|site| (st, site))
    }) {
        return Err(import::ImportError::new(
            place::Place::file(name)
                .at_line(stimulus.line)
                .at_site(site),
            import::ImportProblem::UnplacedSites,
            format!(
                "the stimulating electrode '{site}' has no position in the layout: name a site of the layout, or leave the site empty for a field across the dish"
            ),
        )
        .into());
    }
    recording.notices.extend(protocol.notices.iter().cloned());
    recording.metadata.sources.push(recording::SourceFile {
        name: name.to_string(),
        kind: "stimuli".into(),
    });
    recording.stimuli = Some(protocol);
    Ok(())
}

/// Everything measured on a recording's event trains once its track is known: bursts and
/// fronts ([`fronts::analyze`]), the rhythm of the population rate
/// ([`rhythm::spectrum::rate_spectrum`]) and the synchrony of the sites
/// ([`synchrony::summarise`], sites in track order). Returns the report and the population
/// rate the bursts were found on (for the page's figure). `progress(done, total)` per burst.
pub fn analyze_events(
    recording: &recording::Recording,
    events: &events::EventTrains,
    fit: &geometry::TrackFit,
    settings: &fronts::AnalysisSettings,
    progress: &mut dyn FnMut(usize, usize),
) -> Result<(report::AnalysisReport, Option<detect::PopulationRate>), Error> {
    let mut analysis = fronts::analyze(recording, events, fit, settings, progress)?;
    let rate = analysis.population_rate.take();
    let span = recording.observed_span_s();
    let rhythm =
        span.and_then(|s| rhythm::spectrum::rate_spectrum(&events.trains_s, s, &settings.spectrum));
    // Track coordinates when the track placed every site (not on a plane).
    let along = |i: usize| match fit.track {
        geometry::Track::Plane => None,
        _ => fit.placements.get(i).map(|p| p.along_um),
    };
    let mut sites: Vec<synchrony::SiteEvents> = recording
        .sites
        .iter()
        .zip(events.trains_s.iter())
        .enumerate()
        .map(|(i, (site, train))| synchrony::SiteEvents {
            id: &site.id,
            along_um: along(i),
            xy_um: site.position_um(),
            events_s: train,
        })
        .collect();
    sites.sort_by(|a, b| {
        a.along_um
            .unwrap_or(0.0)
            .total_cmp(&b.along_um.unwrap_or(0.0))
    });
    let windows: Vec<(f64, f64)> = analysis
        .bursts
        .iter()
        .map(|b| (b.start_s, b.end_s))
        .collect();
    let sync = span.map(|s| synchrony::summarise(&sites, s, &windows, &settings.synchrony));
    let network_hz = analysis
        .summary
        .ibi
        .median_s
        .filter(|m| *m > 0.0)
        .map(|m| 1.0 / m);
    let named: Vec<(&str, &[f64])> = recording
        .sites
        .iter()
        .zip(events.trains_s.iter())
        .map(|(s, t)| (s.id.as_str(), t.as_slice()))
        .collect();
    let site_rhythms = span.map(|s| {
        rhythm::sites::site_rhythms(&named, &windows, s, network_hz, &settings.site_rhythm)
    });
    if let Some(notice) = sync
        .as_ref()
        .and_then(|s| s.lags.as_ref())
        .and_then(|l| lag_disagreement(l, analysis.summary.median_speed_ci95_mm_s))
    {
        analysis.notices.push(notice);
    }
    let response = recording
        .stimuli
        .as_ref()
        .map(|protocol| response::responses(&named, protocol, &settings.response));
    if let Some(r) = &response {
        analysis.notices.extend(r.notices.iter().cloned());
    }
    let mut report = report::AnalysisReport::new(recording, fit, settings, analysis);
    report.response = response;
    report.rhythm = rhythm;
    report.synchrony = sync;
    report.site_rhythms = site_rhythms;
    Ok((report, rate))
}

/// A notice when the speed implied by the lags between sites and the fronts' median speed
/// disagree beyond their 95% intervals (the intervals do not overlap).
fn lag_disagreement(
    lags: &synchrony::lags::LagSummary,
    fronts_ci95_mm_s: Option<[f64; 2]>,
) -> Option<place::Notice> {
    let [lo, hi] = lags.implied_speed_ci95_mm_s?;
    let [f_lo, f_hi] = fronts_ci95_mm_s?;
    let lo = lo.unwrap_or(0.0);
    let apart = hi.is_some_and(|h| h < f_lo) || lo > f_hi;
    apart.then(|| {
        place::Notice::new(
            place::Place::default(),
            format!(
                "the lags between neighbouring sites imply {} mm/s (95% CI {lo:.1} to {}), but the fronts' median speed is {f_lo:.1} to {f_hi:.1} mm/s (95% CI): the two do not agree; fronts that fail, run both ways or start mid-track can pull the lags apart from the fitted fronts (see lags.csv)",
                lags.implied_speed_mm_s.map_or("-".into(), |v| format!("{v:.1}")),
                hi.map_or("no upper bound".into(), |h| format!("{h:.1}")),
            ),
        )
    })
}
