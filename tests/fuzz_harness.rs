//! What each fuzz target does with its bytes (issue 17): every importer, the settings and
//! scenario readers, notebooks, and the whole pipeline from numbers drawn over their full
//! range. Shared by the libFuzzer targets (`fuzz/fuzz_targets/`, see `scripts/fuzz`) and by
//! `tests/fuzz_replay.rs`, which runs the committed seeds and every input that once failed.
//! A target fails only by panicking, aborting, hanging or running out of memory: an `Err` is
//! the right answer to most of its inputs.

#![allow(dead_code)] // each fuzz target uses one function

use ringline::import::{FrameRead, ImportError, VoltageHeader};

/// The targets, by name, as `scripts/fuzz` and the replay test list them.
/// A fuzz target: bytes in, nothing out (it fails only by panicking).
pub type Target = fn(&[u8]);

pub const TARGETS: [(&str, Target); 11] = [
    ("spike_list", spike_list),
    ("layout", layout),
    ("traces", traces),
    ("stimuli", stimuli),
    ("manifest", manifest),
    ("wav", wav),
    ("raw_sidecar", raw_sidecar),
    ("settings", settings),
    ("scenario", scenario),
    ("notebook", notebook),
    ("pipeline", pipeline),
];

pub fn spike_list(data: &[u8]) {
    let _ = ringline::import::read_spike_list(data, "fuzz.csv", &Default::default());
}

pub fn layout(data: &[u8]) {
    let _ = ringline::import::read_layout(data, "fuzz.csv", &Default::default());
}

pub fn traces(data: &[u8]) {
    let _ = ringline::import::read_roi_traces(data, "fuzz.csv", &Default::default());
}

pub fn stimuli(data: &[u8]) {
    let _ = ringline::import::read_stimuli(data, "fuzz.csv", None, Default::default());
}

pub fn manifest(data: &[u8]) {
    let _ = ringline::import::read_manifest(data, "fuzz.csv", Default::default());
}

/// Decodes every channel of the first 4,096 frames the header promises.
fn decode_some(header: &VoltageHeader, file: &[u8]) {
    let frames = header.frames.min(4096);
    let mut read = reader(file);
    let mut frames_of = ringline::import::frame_reader(header, &mut read);
    if let Ok(bytes) = frames_of(0, frames) {
        let mut out = Vec::new();
        for c in 0..header.channels.min(64) {
            ringline::import::decode_channel(header, &bytes, c, &mut out);
        }
    }
}

/// A byte reader over `file` for the header readers.
fn reader(file: &[u8]) -> impl FnMut(u64, u64) -> Result<Vec<u8>, ImportError> + '_ {
    move |a: u64, b: u64| {
        Ok(file
            .get(a as usize..(b as usize).min(file.len()))
            .unwrap_or_default()
            .to_vec())
    }
}

pub fn wav(data: &[u8]) {
    let head = &data[..data.len().min(65_536)];
    let mut read = reader(data);
    let read: &mut FrameRead<'_> = &mut read;
    if let Ok(header) =
        ringline::import::read_voltage_header("fuzz.wav", head, data.len() as u64, None, 1.0, read)
    {
        decode_some(&header, data);
    }
}

/// The first two bytes give the sidecar's length; the sidecar follows, then the samples.
pub fn raw_sidecar(data: &[u8]) {
    let Some((&[a, b], rest)) = data.split_first_chunk::<2>() else {
        return;
    };
    let n = (usize::from(a) << 8 | usize::from(b)).min(rest.len());
    let (sidecar, raw) = rest.split_at(n);
    let head = &raw[..raw.len().min(65_536)];
    let mut read = reader(raw);
    if let Ok(header) = ringline::import::read_voltage_header(
        "fuzz.raw",
        head,
        raw.len() as u64,
        Some(("fuzz.raw.json", sidecar)),
        1.0,
        &mut read,
    ) {
        decode_some(&header, raw);
    }
}

pub fn settings(data: &[u8]) {
    let text = String::from_utf8_lossy(data);
    let _ = ringline::study::analysis_settings_over(&Default::default(), "fuzz.json", &text);
}

pub fn scenario(data: &[u8]) {
    let text = String::from_utf8_lossy(data);
    match ringline::simulate::parse_scenario(&text) {
        Ok(ringline::simulate::Scenario::Fronts(s)) => {
            let _ = ringline::simulate::fronts::check_scenario(&s);
        }
        Ok(ringline::simulate::Scenario::Network(s)) => {
            let _ = ringline::simulate::network::scenario::check_network_scenario(&s);
        }
        Err(_) => {}
    }
}

pub fn notebook(data: &[u8]) {
    if let Ok(nb) = ringline::report::workbook::open_notebook("fuzz.ringline.json", data) {
        let _ = ringline::report::workbook::Workbook::from_notebook(&nb, &mut |_, _| {});
    }
}

/// Reads numbers from the front of a byte string: whole doubles (any bit pattern but NaN
/// and the infinities, which no text file carries), small counts and flags.
struct Numbers<'a>(&'a [u8]);

impl Numbers<'_> {
    fn byte(&mut self) -> u8 {
        let (first, rest) = self.0.split_first().map_or((0, &[][..]), |(f, r)| (*f, r));
        self.0 = rest;
        first
    }
    fn double(&mut self) -> f64 {
        let mut b = [0u8; 8];
        for x in &mut b {
            *x = self.byte();
        }
        let v = f64::from_le_bytes(b);
        if v.is_finite() {
            v
        } else {
            0.0
        }
    }
    /// A double, most often from a plausible range (so that some runs reach the fronts),
    /// otherwise any finite double.
    fn time_or_any(&mut self, scale: f64) -> f64 {
        if self.byte() < 200 {
            f64::from(u16::from_le_bytes([self.byte(), self.byte()])) / 65_535.0 * scale
        } else {
            self.double()
        }
    }
}

/// The whole pipeline on a recording drawn from the bytes: 2 to 17 sites at positions over
/// the full range of doubles or on a row, 0 to 63 spikes each at any time, and a few
/// settings set to any double. Written as text by the project's writers and analysed from
/// that text, as a user's files would be.
pub fn pipeline(data: &[u8]) {
    let mut n = Numbers(data);
    let sites = 2 + usize::from(n.byte() % 16);
    let row = n.byte() < 128;
    let layout: Vec<ringline::recording::Site> = (0..sites)
        .map(|i| ringline::recording::Site {
            id: format!("s{i}"),
            x_um: if row {
                i as f64 * 200.0
            } else {
                n.time_or_any(5000.0)
            },
            y_um: if row { 0.0 } else { n.time_or_any(5000.0) },
        })
        .collect();
    let spikes: Vec<ringline::import::SiteSpikes> = (0..sites)
        .map(|i| {
            let count = usize::from(n.byte() % 64);
            let mut times_s: Vec<f64> = (0..count).map(|_| n.time_or_any(60.0).abs()).collect();
            times_s.sort_by(f64::total_cmp);
            ringline::import::SiteSpikes {
                site: format!("s{i}"),
                times_s,
            }
        })
        .collect();
    let mut settings = ringline::RecordingSettings::default();
    settings.analysis.fronts.resamples = 100;
    settings.analysis.synchrony.lags.resamples = 100;
    for _ in 0..usize::from(n.byte() % 4) {
        let v = n.double();
        let a = &mut settings.analysis;
        match n.byte() % 8 {
            0 => a.bursts.population_rate.bin_s = v,
            1 => a.bursts.population_rate.threshold_sd = v,
            2 => a.activation.lead_s = v,
            3 => a.fronts.confidence = v,
            4 => a.spectrum.bin_s = v,
            5 => a.synchrony.sttc_dt_s = v,
            6 => settings.track.off_track_spacings = v,
            _ => a.bursts.min_site_fraction = v,
        }
    }
    let spikes_csv = ringline::import::write_spike_list(&spikes);
    let layout_csv = ringline::import::write_layout(&layout);
    if let Ok(report) = ringline::analyze_recording(
        ringline::ActivityInput::Table("fuzz.csv", spikes_csv.as_bytes()),
        ("layout.csv", layout_csv.as_bytes()),
        None,
        &settings,
        &mut |_, _, _| {},
    ) {
        let _ = report.to_text();
        let _ = report.output_files();
    }
}
