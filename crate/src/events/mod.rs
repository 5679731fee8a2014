//! Events: every kind of recording becomes event trains, one per site, in seconds. Spike
//! lists are event trains already; raw voltage gives spikes by threshold detection
//! ([`voltage_recording`]); fluorescence traces give event onsets (dF/F over a running
//! baseline, [`crate::detect::calcium`]). Everything after this stage (bursts, fronts,
//! rhythm) reads event trains and never asks what the recording was.

use crate::detect::calcium::{delta_f_over_f, event_onsets, CalciumSettings, OnsetRule};
use crate::place::{Notice, Place};
use crate::recording::{Activity, Recording};
use std::borrow::Cow;

/// What the events of a recording are.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum EventKind {
    /// Spike times (a spike list, or spikes detected in raw voltage).
    Spikes,
    /// Onsets of fluorescence events in ROI traces.
    FluorescenceOnsets,
}

/// A recording's events, one train per site in the recording's site order.
#[derive(Debug, Clone, PartialEq)]
pub struct EventTrains<'a> {
    pub kind: EventKind,
    /// Event times per site, seconds, ascending (borrowed from a spike recording).
    pub trains_s: Cow<'a, [Vec<f64>]>,
    /// Imaging: the frame interval, seconds.
    pub frame_interval_s: Option<f64>,
    /// What was done to find the events, for the report.
    pub notices: Vec<Notice>,
}

/// The event trains of a recording: its spikes, or the fluorescence events of its traces
/// found with `calcium`.
pub fn event_trains<'a>(recording: &'a Recording, calcium: &CalciumSettings) -> EventTrains<'a> {
    match &recording.activity {
        Activity::Spikes { trains_s } => EventTrains {
            kind: EventKind::Spikes,
            trains_s: Cow::Borrowed(trains_s),
            frame_interval_s: None,
            notices: Vec::new(),
        },
        Activity::Traces {
            time_s,
            frame_interval_s,
            values,
        } => {
            let rate = 1.0 / frame_interval_s;
            let trains: Vec<Vec<f64>> = values
                .iter()
                .map(|f| event_onsets(&delta_f_over_f(f, rate, calcium), time_s, rate, calcium))
                .collect();
            let events: usize = trains.iter().map(Vec::len).sum();
            let notice = Notice::new(
                Place::default(),
                format!(
                    "fluorescence: {events} events found in {} ROIs (dF/F over a running {}th percentile of {} s; events above {} noise SDs, timed at {}); each ROI's activation is its first event in a burst; the population rate is binned by frame and smoothed over at least 5 frames",
                    values.len(),
                    calcium.baseline_percentile,
                    calcium.baseline_window_s,
                    calcium.high_sd,
                    match calcium.onset {
                        OnsetRule::HalfMaximum => "the half-maximum crossing",
                        OnsetRule::BaselineIntercept => "the rise's baseline intercept",
                    }
                ),
            );
            EventTrains {
                kind: EventKind::FluorescenceOnsets,
                trains_s: Cow::Owned(trains),
                frame_interval_s: Some(*frame_interval_s),
                notices: vec![notice],
            }
        }
    }
}

/// Reads a raw voltage file (its header already read; `read(first_frame, end_frame)` returns
/// the bytes of those frames), detects spikes on every channel and puts them on the layout.
/// Channel i is the site in row i of the layout unless the file names its channels' sites.
/// `progress(done, total)` reports frames. Returns the recording (as spikes) and what
/// detection found, with the electrode report.
pub fn voltage_recording(
    header: &crate::import::VoltageHeader,
    read: &mut dyn FnMut(u64, u64) -> Result<Vec<u8>, crate::import::ImportError>,
    layout: (&str, &[u8]),
    options: &crate::import::ReadOptions,
    voltage: &crate::detect::voltage::VoltageSettings,
    progress: &mut dyn FnMut(u64, u64),
) -> Result<
    (
        crate::recording::Recording,
        crate::detect::voltage::VoltageSpikes,
    ),
    crate::Error,
> {
    let layout = crate::import::read_layout(
        layout.1,
        layout.0,
        &crate::import::LayoutOptions {
            length_unit: options.length_unit,
            limits: options.limits,
        },
    )?;
    let sites: Vec<String> = match &header.channel_sites {
        Some(sites) => sites.clone(),
        None => {
            if header.channels > layout.sites.len() {
                return Err(crate::import::ImportError::new(
                    crate::place::Place::file(&header.file),
                    crate::import::ImportProblem::UnplacedSites,
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
    let found =
        crate::detect::voltage::detect_voltage_spikes(header, &sites, voltage, read, progress)?;
    let spikes = crate::import::SpikeList {
        file: header.file.clone(),
        sites: sites
            .iter()
            .zip(&found.trains_s)
            .map(|(site, times)| crate::import::SiteSpikes {
                site: site.clone(),
                times_s: times.clone(),
            })
            .collect(),
        latest_place: None,
        time_unit: crate::import::TimeUnit::Seconds,
        time_quantum_s: Some(1.0 / header.sample_rate_hz),
        ignored_columns: Vec::new(),
        row_count: found.trains_s.iter().map(Vec::len).sum(),
        notices: Vec::new(),
        stimuli: None,
    };
    let mut recording = crate::recording::Recording::from_spike_list(&layout, spikes)?;
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
        recording.notices.push(crate::place::Notice::new(
            crate::place::Place::file(&header.file),
            format!(
                "a WAV file carries no voltage scale: samples were taken as {} µV per unit (noise levels in the electrode report use this scale; spike detection does not depend on it)",
                header.scale_uv
            ),
        ));
    }
    if header.sample_rate_hz > crate::import::MAX_PLAUSIBLE_SAMPLE_RATE_HZ {
        recording.notices.push(crate::place::Notice::new(
            crate::place::Place::file(&header.file),
            format!(
                "samples come at {} Hz, faster than extracellular recording systems sample: check sample_rate_hz (it is in samples per second)",
                crate::place::number(header.sample_rate_hz)
            ),
        ));
    }
    for e in found
        .electrodes
        .iter()
        .filter(|e| e.status != crate::detect::voltage::ElectrodeStatus::Ok)
    {
        recording.notices.push(crate::place::Notice::new(
            crate::place::Place::site(&e.site),
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
