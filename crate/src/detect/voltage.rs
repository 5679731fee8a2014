//! Spikes from a band-passed voltage trace: a robust noise estimate, a threshold at k noise
//! SDs, a dead time, and sub-sample spike times.

use serde::{Deserialize, Serialize};

pub use crate::stats::MAD_TO_SD;

/// Which excursions count as spikes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Polarity {
    /// Troughs below -k sigma (extracellular spikes are mostly negative; the default).
    #[default]
    Negative,
    /// Peaks above +k sigma.
    Positive,
    /// Either.
    Both,
}

/// Settings of spike detection on voltage.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct VoltageSettings {
    /// Band-pass edges, Hz.
    pub band_hz: [f64; 2],
    /// Butterworth prototype order (the band-pass has twice as many poles).
    pub filter_order: usize,
    /// Threshold in noise SDs (sigma = median(|x|) / 0.6745).
    pub threshold_sd: f64,
    pub polarity: Polarity,
    /// No second spike on a channel within this time of the last, seconds.
    pub dead_time_s: f64,
}

impl Default for VoltageSettings {
    fn default() -> Self {
        VoltageSettings {
            band_hz: [300.0, 3000.0],
            filter_order: 3,
            threshold_sd: 5.0,
            polarity: Polarity::Negative,
            dead_time_s: 1e-3,
        }
    }
}

/// Noise SD from the median absolute value, sigma = median(|x|) / 0.6745 (Quiroga, Nadasdy &
/// Ben-Shaul 2004, Neural Computation 16:1661, eq. 3.1): unlike the plain SD it is hardly
/// moved by the spikes themselves. `None` for an empty signal; NaN samples are skipped.
pub fn mad_sigma(x: &[f64]) -> Option<f64> {
    crate::stats::median_abs(x).map(|median| median / MAD_TO_SD)
}

/// Spike times (seconds from the first sample) in a filtered trace sampled at
/// `sample_rate_hz`: a spike starts where the trace passes `threshold` (in the trace's units,
/// on the side `polarity` says); its time is the extremum within one dead time of the
/// crossing, refined by a parabola through the extremum and its two neighbours; the next
/// spike is looked for one dead time after that extremum. NaN samples never start a spike.
pub fn threshold_spikes(
    x: &[f64],
    sample_rate_hz: f64,
    threshold: f64,
    polarity: Polarity,
    dead_time_s: f64,
) -> Vec<f64> {
    let dead = ((dead_time_s * sample_rate_hz).round() as usize).max(1);
    // Signed so that a spike is a large positive value; one loop per polarity.
    match polarity {
        Polarity::Negative => spikes_above(x, sample_rate_hz, threshold, dead, |v| -v),
        Polarity::Positive => spikes_above(x, sample_rate_hz, threshold, dead, |v| v),
        Polarity::Both => spikes_above(x, sample_rate_hz, threshold, dead, f64::abs),
    }
}

/// [`threshold_spikes`] on `value(x)`, with the dead time in samples.
fn spikes_above(
    x: &[f64],
    sample_rate_hz: f64,
    threshold: f64,
    dead: usize,
    value: impl Fn(f64) -> f64,
) -> Vec<f64> {
    let mut times = Vec::new();
    let mut i = 0;
    while let Some(start) = first_above(x, i, threshold, &value) {
        let end = (start + dead).min(x.len());
        let peak = (start..end)
            .max_by(|&a, &b| value(x[a]).total_cmp(&value(x[b])))
            .unwrap_or(start);
        let offset = if peak > 0 && peak + 1 < x.len() {
            let (l, c, r) = (value(x[peak - 1]), value(x[peak]), value(x[peak + 1]));
            let curvature = l - 2.0 * c + r;
            if curvature < 0.0 {
                (0.5 * (l - r) / curvature).clamp(-0.5, 0.5)
            } else {
                0.0
            }
        } else {
            0.0
        };
        times.push((peak as f64 + offset) / sample_rate_hz);
        i = peak + dead;
    }
    times
}

/// First index from `from` on where `value(x)` exceeds `threshold` (NaN never does); eight
/// samples are tested at a time without branching, so the quiet stretches go fast.
fn first_above(
    x: &[f64],
    from: usize,
    threshold: f64,
    value: impl Fn(f64) -> f64,
) -> Option<usize> {
    let mut i = from.min(x.len());
    for chunk in x[i..].chunks_exact(8) {
        if chunk
            .iter()
            .fold(false, |any, &v| any | (value(v) > threshold))
        {
            break;
        }
        i += 8;
    }
    x[i..]
        .iter()
        .position(|&v| value(v) > threshold)
        .map(|k| i + k)
}

/// One electrode's health after detection.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ElectrodeRow {
    /// Channel in the file, counted from 1.
    pub channel: usize,
    pub site: String,
    /// Median over blocks of the noise SD of the filtered signal, microvolts.
    pub noise_uv: f64,
    pub spike_count: usize,
    pub rate_hz: f64,
    /// Share of samples at the int16 limits.
    pub saturated_fraction: f64,
    /// `ok`, `flat` (no noise at all: disconnected or shorted), `saturated` (over 1% of
    /// samples at the limits), `no_spikes` (noise only), or `rate_outlier` (rate more than
    /// 3 robust SDs from the median in log10, among electrodes with spikes). Thresholds are
    /// common practice, no source.
    pub status: ElectrodeStatus,
}

/// What an electrode looks like after detection. Thresholds are common practice, no source.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ElectrodeStatus {
    /// Usable.
    Ok,
    /// No noise at all: disconnected or shorted.
    Flat,
    /// Over 1% of samples at the int16 limits.
    Saturated,
    /// Noise only.
    NoSpikes,
    /// Rate more than 3 robust SDs from the median in log10, among electrodes with spikes.
    RateOutlier,
}

impl ElectrodeStatus {
    pub fn as_str(self) -> &'static str {
        match self {
            ElectrodeStatus::Ok => "ok",
            ElectrodeStatus::Flat => "flat",
            ElectrodeStatus::Saturated => "saturated",
            ElectrodeStatus::NoSpikes => "no_spikes",
            ElectrodeStatus::RateOutlier => "rate_outlier",
        }
    }

    /// In words, for messages.
    pub fn words(self) -> String {
        self.as_str().replace('_', " ")
    }
}

impl std::fmt::Display for ElectrodeStatus {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// What detection on a voltage file found: spike times per channel and the electrode report.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct VoltageSpikes {
    /// Spike times per channel, seconds from the first sample, ascending.
    pub trains_s: Vec<Vec<f64>>,
    pub electrodes: Vec<ElectrodeRow>,
}

/// Length of a detection block, seconds; the noise SD is estimated per block, so a slow drift
/// in noise is followed.
pub const BLOCK_S: f64 = 10.0;

/// Memory a detection block may take, bytes: its frames as read (with the filter margins)
/// and the filter's working lanes. At 60 int16 channels and 20 kHz a [`BLOCK_S`] block fits;
/// more channels or a higher rate make the block shorter, so the memory of detection stays
/// about this much whatever the file (a limit we chose). When the filter's settling margin
/// alone would pass a quarter of it (rates of hundreds of MHz), the margin is cut there.
pub const BLOCK_BUDGET_BYTES: u64 = 64 << 20;

/// Detects spikes on every channel of a raw voltage file, block by block: each block of
/// [`BLOCK_S`] (shorter when [`BLOCK_BUDGET_BYTES`] requires) is read with a margin on each side long enough for the filter's transients to
/// die out (1e-12), filtered zero-phase per channel, its noise SD taken by MAD, and spikes
/// found at `threshold_sd` noise SDs. `read(first_frame, end_frame)` returns the raw bytes of
/// those whole frames; `progress(frames_done, frames_total)` after each block. `sites` names
/// each channel for the report.
pub fn detect_voltage_spikes(
    header: &crate::import::VoltageHeader,
    sites: &[String],
    settings: &VoltageSettings,
    read: &mut dyn FnMut(u64, u64) -> Result<Vec<u8>, crate::import::ImportError>,
    progress: &mut dyn FnMut(u64, u64),
) -> Result<VoltageSpikes, crate::import::ImportError> {
    use super::filter::{filtfilt_padded, pad_length, settling_samples, LANES};
    use crate::import::{decode_lanes, ImportError, ImportProblem};
    use crate::place::Place;
    let fs = header.sample_rate_hz;
    let option_error = |message: String| {
        ImportError::new(Place::file(&header.file), ImportProblem::BadOption, message)
    };
    let sos = spike_filter(header, settings)?;
    if !(settings.threshold_sd > 0.0 && (0.0..=1.0).contains(&settings.dead_time_s)) {
        return Err(option_error(format!(
            "spike threshold: expected voltage.threshold_sd (--threshold-sd) above 0 and voltage.dead_time_s (--dead-time-ms) from 0 to 1 s, found {} and {} s",
            crate::place::number(settings.threshold_sd), crate::place::number(settings.dead_time_s)
        )));
    }
    // The block, with its margins, is sized so that the frames read and the filter's lanes
    // stay within the memory budget whatever the channel count or the rate.
    let frame_bytes = (header.channels * header.sample_type.bytes() + 2 * LANES * 8) as u64;
    let budget_frames = (BLOCK_BUDGET_BYTES / frame_bytes).max(64);
    let margin = (settling_samples(&sos, 1e-12).min(1 << 20) as u64).min(budget_frames / 4);
    let block = ((BLOCK_S * fs) as u64).clamp(1, budget_frames - 2 * margin);
    let total = header.frames;
    let channels = header.channels;
    let mut trains: Vec<Vec<f64>> = vec![Vec::new(); channels];
    let mut noise: Vec<Vec<f64>> = vec![Vec::new(); channels];
    let mut saturated = vec![0usize; channels];
    let pad = pad_length(&sos);
    let mut per_channel: [Vec<f64>; LANES] = std::array::from_fn(|_| Vec::new());
    let mut lanes = Vec::new();
    let mut start = 0u64;
    while start < total {
        let end = (start + block).min(total);
        let from = start.saturating_sub(margin);
        let to = (end + margin).min(total);
        let bytes = read(from, to)?;
        // Channels in groups of LANES, filtered side by side.
        for first in (0..channels).step_by(LANES) {
            let group = LANES.min(channels - first);
            // Decoded straight between the filter's placeholder ends.
            lanes.clear();
            lanes.resize(pad, [0.0; LANES]);
            decode_lanes(
                header,
                &bytes,
                first,
                &mut lanes,
                &mut saturated[first..first + group],
                (start - from) as usize..(end - from) as usize,
            );
            if lanes.len() <= 2 * pad {
                continue; // a tail too short to filter
            }
            lanes.resize(lanes.len() + pad, [0.0; LANES]);
            let padded = filtfilt_padded(&sos, std::mem::take(&mut lanes))
                .map_err(|e| option_error(format!("spike filter: {e}")))?;
            // One pass splits the lanes into channels.
            for channel in per_channel.iter_mut() {
                channel.clear();
            }
            for v in padded.samples() {
                for (channel, &x) in per_channel.iter_mut().zip(v) {
                    channel.push(x);
                }
            }
            lanes = padded.into_buffer();
            for (l, samples) in per_channel.iter().enumerate().take(group) {
                let c = first + l;
                scan_channel(
                    samples,
                    (start - from) as usize,
                    (end - start) as usize,
                    start as f64 / fs,
                    fs,
                    settings,
                    &mut noise[c],
                    &mut trains[c],
                );
            }
        }
        progress(end, total);
        start = end;
    }
    let duration = total as f64 / fs;
    let median = |v: &mut Vec<f64>| -> f64 {
        if v.is_empty() {
            return 0.0;
        }
        v.sort_by(f64::total_cmp);
        v[v.len() / 2]
    };
    let mut rows: Vec<ElectrodeRow> = (0..channels)
        .map(|c| {
            let noise_uv = median(&mut noise[c].clone());
            let rate_hz = trains[c].len() as f64 / duration;
            let saturated_fraction = saturated[c] as f64 / total as f64;
            let status = if noise_uv <= 0.0 {
                ElectrodeStatus::Flat
            } else if saturated_fraction > 0.01 {
                ElectrodeStatus::Saturated
            } else if trains[c].is_empty() {
                ElectrodeStatus::NoSpikes
            } else {
                ElectrodeStatus::Ok
            };
            ElectrodeRow {
                channel: c + 1,
                site: sites
                    .get(c)
                    .cloned()
                    .unwrap_or_else(|| format!("channel {}", c + 1)),
                noise_uv,
                spike_count: trains[c].len(),
                rate_hz,
                saturated_fraction,
                status,
            }
        })
        .collect();
    let logs: Vec<f64> = rows
        .iter()
        .filter(|r| r.status == ElectrodeStatus::Ok)
        .map(|r| libm::log10(r.rate_hz))
        .collect();
    if logs.len() >= 4 {
        let centre = crate::stats::median(&logs).unwrap_or(0.0);
        let spread = crate::stats::mad_sd(&logs).unwrap_or(0.0);
        if spread > 0.0 {
            for r in rows.iter_mut().filter(|r| r.status == ElectrodeStatus::Ok) {
                if (libm::log10(r.rate_hz) - centre).abs() > 3.0 * spread {
                    r.status = ElectrodeStatus::RateOutlier;
                }
            }
        }
    }
    Ok(VoltageSpikes {
        trains_s: trains,
        electrodes: rows,
    })
}

/// Noise and spikes of one channel's filtered chunk: the block is `len` samples from
/// `offset` (the chunk carries margins); spikes are looked for from the block start through
/// the right margin, kept when they start inside the block, and the dead time holds across
/// block boundaries. A block shorter than a second keeps the previous block's noise estimate.
#[allow(clippy::too_many_arguments)]
fn scan_channel(
    filtered: &[f64],
    offset: usize,
    len: usize,
    block_start_s: f64,
    fs: f64,
    settings: &VoltageSettings,
    noise: &mut Vec<f64>,
    train: &mut Vec<f64>,
) {
    let keep = &filtered[offset..offset + len];
    let Some(sigma) = mad_sigma(keep) else {
        return;
    };
    let sigma = if keep.len() as f64 >= fs || noise.is_empty() {
        noise.push(sigma);
        sigma
    } else {
        noise[noise.len() - 1]
    };
    if sigma <= 0.0 {
        return;
    }
    let found = threshold_spikes(
        &filtered[offset..],
        fs,
        settings.threshold_sd * sigma,
        settings.polarity,
        settings.dead_time_s,
    );
    let block_len_s = len as f64 / fs;
    for t in found {
        if t >= block_len_s {
            break;
        }
        let time = block_start_s + t;
        if train
            .last()
            .is_none_or(|&last| time - last >= settings.dead_time_s)
        {
            train.push(time);
        }
    }
}

/// The band-pass of spike detection for this file's sample rate, or the located reason it
/// cannot be built (a band outside the Nyquist range, an order of 0).
fn spike_filter(
    header: &crate::import::VoltageHeader,
    settings: &VoltageSettings,
) -> Result<Vec<super::filter::Section>, crate::import::ImportError> {
    super::filter::butterworth_bandpass(
        settings.filter_order,
        settings.band_hz[0],
        settings.band_hz[1],
        header.sample_rate_hz,
    )
    .map_err(|e| {
        crate::import::ImportError::new(
            crate::place::Place::file(&header.file),
            crate::import::ImportProblem::BadOption,
            format!("spike filter: {e}"),
        )
    })
}

/// Most spikes a voltage evidence view shows.
pub const MAX_SNIPPETS: usize = 40;

/// The band-passed voltage around some of a channel's detected spikes: the evidence behind
/// its spike times.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Snippets {
    /// Time of each sample from the spike, ms (shared by every snippet).
    pub offsets_ms: Vec<f64>,
    /// One band-passed trace per spike, µV.
    pub traces_uv: Vec<Vec<f64>>,
}

/// Filters the voltage of `channel` around each of `times_s` (at most [`MAX_SNIPPETS`]) the
/// way detection does (the same Butterworth band-pass, zero phase, with a margin long enough
/// for the filter to settle), and cuts `window_ms` = [before, after] around each spike.
/// `read(first_frame, end_frame)` returns the raw bytes of those frames.
pub fn spike_snippets(
    header: &crate::import::VoltageHeader,
    channel: usize,
    times_s: &[f64],
    settings: &VoltageSettings,
    window_ms: [f64; 2],
    read: &mut dyn FnMut(u64, u64) -> Result<Vec<u8>, crate::import::ImportError>,
) -> Result<Snippets, crate::import::ImportError> {
    use super::filter::{settling_samples, sosfiltfilt};
    use crate::import::{decode_channel, ImportError, ImportProblem};
    let fs = header.sample_rate_hz;
    let fail = |message: String| {
        ImportError::new(
            crate::place::Place::file(&header.file),
            ImportProblem::BadOption,
            message,
        )
    };
    if channel >= header.channels {
        return Err(fail(format!(
            "there is no channel {} (the file has {})",
            channel + 1,
            header.channels
        )));
    }
    let sos = spike_filter(header, settings)?;
    let margin = settling_samples(&sos, 1e-12).min(1 << 16) as u64;
    let before = ((window_ms[0].clamp(0.0, 50.0) * 1e-3 * fs).round() as u64).max(1);
    let after = ((window_ms[1].clamp(0.0, 50.0) * 1e-3 * fs).round() as u64).max(1);
    let offsets_ms = (0..before + after + 1)
        .map(|k| (k as f64 - before as f64) / fs * 1e3)
        .collect();
    let mut traces_uv = Vec::new();
    let mut samples = Vec::new();
    for &t in times_s.iter().take(MAX_SNIPPETS) {
        let at = (t * fs).round();
        if !(at >= 0.0 && at < header.frames as f64) {
            continue;
        }
        let at = at as u64;
        if at < before || at + after >= header.frames {
            continue; // too near an end of the recording to show whole
        }
        let from = (at - before).saturating_sub(margin);
        let to = (at + after + 1 + margin).min(header.frames);
        let bytes = read(from, to)?;
        samples.clear();
        decode_channel(header, &bytes, channel, &mut samples);
        let filtered =
            sosfiltfilt(&sos, &samples).map_err(|e| fail(format!("spike filter: {e}")))?;
        let start = (at - before - from) as usize;
        traces_uv.push(filtered[start..start + (before + after + 1) as usize].to_vec());
    }
    Ok(Snippets {
        offsets_ms,
        traces_uv,
    })
}
