//! Raw voltage from simulated electrode spike trains, in the project's own raw format
//! (interleaved little-endian int16 with a JSON sidecar; see [`crate::import`]), so the
//! voltage path (filter, noise estimate, threshold, analysis) can be checked against the
//! simulator's truth.

use super::sample::normal;
use crate::import::SiteSpikes;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

/// How the voltage is written.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct VoltageOutput {
    /// SD of the wideband Gaussian noise, µV.
    pub noise_uv: f64,
    /// Depth of a spike's trough, µV.
    pub spike_uv: f64,
    /// µV per stored int16 unit.
    #[serde(default = "default_scale")]
    pub scale_uv: f64,
}

fn default_scale() -> f64 {
    0.1
}

/// A biphasic extracellular spike: a trough 0.15 ms wide (SD) at t = 0 and a positive
/// rebound of 35% half a millisecond later (a textbook shape, from memory); unit depth.
pub fn spike_waveform(t_s: f64) -> f64 {
    -libm::exp(-0.5 * (t_s / 1.5e-4) * (t_s / 1.5e-4))
        + 0.35 * libm::exp(-0.5 * ((t_s - 5e-4) / 3e-4) * ((t_s - 5e-4) / 3e-4))
}

/// Writes `duration_s` of voltage at `sample_rate_hz` for every electrode: noise plus the
/// waveform at each of its spike times (dead electrodes stay at 0, as disconnected ones read).
/// Returns the raw bytes and the sidecar text. Seeded: the same seed gives the same bytes
/// natively and in wasm.
pub fn electrode_voltage(
    spikes: &[SiteSpikes],
    dead: &[usize],
    duration_s: f64,
    sample_rate_hz: f64,
    out: &VoltageOutput,
    seed: u64,
) -> (Vec<u8>, String) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let channels = spikes.len();
    let frames = (duration_s * sample_rate_hz).floor() as usize;
    let mut v = vec![0.0f64; frames * channels];
    for (c, site) in spikes.iter().enumerate() {
        if dead.contains(&c) {
            continue;
        }
        for k in 0..frames {
            v[k * channels + c] = out.noise_uv * normal(&mut rng);
        }
        for &t in &site.times_s {
            let centre = t * sample_rate_hz;
            let from = (centre - 0.001 * sample_rate_hz).max(0.0) as usize;
            let to = ((centre + 0.002 * sample_rate_hz) as usize).min(frames);
            for k in from..to {
                v[k * channels + c] +=
                    out.spike_uv * spike_waveform((k as f64 - centre) / sample_rate_hz);
            }
        }
    }
    let bytes = v
        .iter()
        .flat_map(|x| {
            let units = (x / out.scale_uv).round().clamp(-32768.0, 32767.0) as i16;
            units.to_le_bytes()
        })
        .collect();
    let sidecar = serde_json::json!({
        "sample_rate_hz": sample_rate_hz,
        "channels": channels,
        "sample_type": "int16",
        "scale_uv": out.scale_uv,
        "channel_sites": spikes.iter().map(|s| s.site.clone()).collect::<Vec<_>>(),
    });
    (bytes, format!("{sidecar:#}\n"))
}
