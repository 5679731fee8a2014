//! Spikes from a band-passed voltage trace: a robust noise estimate, a threshold at k noise
//! SDs, a dead time, and sub-sample spike times.

use serde::{Deserialize, Serialize};

/// Phi^-1(0.75): the median of |x| for a standard normal x.
pub const MAD_TO_SD: f64 = 0.674_489_750_196_081_7;

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
    let mut a: Vec<f64> = x.iter().filter(|v| !v.is_nan()).map(|v| v.abs()).collect();
    if a.is_empty() {
        return None;
    }
    let mid = a.len() / 2;
    let (_, m, _) = a.select_nth_unstable_by(mid, f64::total_cmp);
    let mut median = *m;
    if a.len() % 2 == 0 {
        let below = a[..mid].iter().copied().fold(f64::NEG_INFINITY, f64::max);
        median = 0.5 * (median + below);
    }
    Some(median / MAD_TO_SD)
}

/// Spike times (seconds from the first sample) in a filtered trace sampled at
/// `sample_rate_hz`: a spike starts where the trace passes `threshold` (in the trace's units,
/// on the side `polarity` says); its time is the extremum within one dead time of the
/// crossing, refined by a parabola through the extremum and its two neighbours; the next
/// spike is looked for one dead time after that extremum.
pub fn threshold_spikes(
    x: &[f64],
    sample_rate_hz: f64,
    threshold: f64,
    polarity: Polarity,
    dead_time_s: f64,
) -> Vec<f64> {
    let dead = ((dead_time_s * sample_rate_hz).round() as usize).max(1);
    // Signed so that a spike is a large positive value.
    let value = |v: f64| match polarity {
        Polarity::Negative => -v,
        Polarity::Positive => v,
        Polarity::Both => v.abs(),
    };
    let mut times = Vec::new();
    let mut i = 0;
    while i < x.len() {
        if value(x[i]) <= threshold {
            i += 1;
            continue;
        }
        let end = (i + dead).min(x.len());
        let peak = (i..end)
            .max_by(|&a, &b| value(x[a]).total_cmp(&value(x[b])))
            .unwrap_or(i);
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
