//! Power spectra of the population rate: Welch's method (Welch 1967, IEEE Trans. Audio
//! Electroacoust. 15:70) with scipy's conventions (`scipy.signal.welch`: periodic Hann
//! window, half-segment overlap, each segment's mean removed, one-sided density), on
//! `realfft`; and the rhythm read from it: the dominant frequency, its bandwidth, and its
//! height above the floor a Poisson train of the same mean rate would give.
//!
//! Gaps: a segment holding any value that is not finite (a NaN from a gap in ROI traces) is
//! left out whole and counted, so one NaN never poisons the average; when no segment is
//! left, there is no spectrum.
//!
//! The transform is [`Dft`]: a radix-2 FFT for powers of two (the lengths the analysis
//! chooses) and a direct sum otherwise, with every twiddle factor from `libm`. `realfft`
//! computes its twiddles with the platform's `cos`/`sin`, which differ between glibc and the
//! WebAssembly build in the last bit, so the page and the command line would disagree in the
//! 16th digit; with these kernels they agree byte for byte. The tests check the kernels
//! against `realfft` and against `scipy.signal.welch`.

use serde::{Deserialize, Serialize};

/// Most bins of the event rate; a longer recording is binned more coarsely (the bin used is
/// reported), so memory stays bounded (2^24 bins of 8 bytes: 128 MiB).
pub const MAX_RATE_BINS: usize = 1 << 24;

/// Largest length transformed by the direct sum (lengths that are not powers of two).
pub const MAX_DIRECT: usize = 8192;

/// The discrete Fourier transform of real segments of one length: X_k = sum_n x_n
/// exp(-2 pi i k n / N) for k = 0..=N/2.
pub struct Dft {
    n: usize,
    /// exp(-2 pi i j / N) for j in 0..N, from libm.
    twiddle_re: Vec<f64>,
    twiddle_im: Vec<f64>,
    re: Vec<f64>,
    im: Vec<f64>,
}

impl Dft {
    /// A transform of length `n`; `None` for 0, or above [`MAX_DIRECT`] when `n` is not a
    /// power of two, or above [`MAX_SEGMENT`].
    pub fn new(n: usize) -> Option<Dft> {
        if n == 0 || n > MAX_SEGMENT || (!n.is_power_of_two() && n > MAX_DIRECT) {
            return None;
        }
        let angle = |j: usize| -std::f64::consts::TAU * j as f64 / n as f64;
        Some(Dft {
            n,
            twiddle_re: (0..n).map(|j| libm::cos(angle(j))).collect(),
            twiddle_im: (0..n).map(|j| libm::sin(angle(j))).collect(),
            re: vec![0.0; n],
            im: vec![0.0; n],
        })
    }

    /// |X_k|^2 for k = 0..=N/2 of the real segment `x` (of the transform's length).
    pub fn power(&mut self, x: &[f64], out: &mut [f64]) {
        let n = self.n;
        if n.is_power_of_two() {
            // Bit-reversed copy, then iterative radix-2 butterflies.
            let bits = n.trailing_zeros();
            for (i, &v) in x.iter().enumerate() {
                let j = if bits == 0 {
                    0
                } else {
                    i.reverse_bits() >> (usize::BITS - bits)
                };
                self.re[j] = v;
                self.im[j] = 0.0;
            }
            let mut size = 2;
            while size <= n {
                let half = size / 2;
                let step = n / size;
                for start in (0..n).step_by(size) {
                    for k in 0..half {
                        let (wr, wi) = (self.twiddle_re[k * step], self.twiddle_im[k * step]);
                        let (a, b) = (start + k, start + k + half);
                        let tr = wr * self.re[b] - wi * self.im[b];
                        let ti = wr * self.im[b] + wi * self.re[b];
                        self.re[b] = self.re[a] - tr;
                        self.im[b] = self.im[a] - ti;
                        self.re[a] += tr;
                        self.im[a] += ti;
                    }
                }
                size *= 2;
            }
            for (k, o) in out.iter_mut().enumerate() {
                *o = self.re[k] * self.re[k] + self.im[k] * self.im[k];
            }
        } else {
            for (k, o) in out.iter_mut().enumerate() {
                let (mut sr, mut si) = (0.0, 0.0);
                let mut j = 0;
                for &v in x {
                    sr += v * self.twiddle_re[j];
                    si += v * self.twiddle_im[j];
                    j += k;
                    if j >= n {
                        j -= n;
                    }
                }
                *o = sr * sr + si * si;
            }
        }
    }
}

/// Largest segment accepted, in samples (bounds the FFT's memory on any input).
pub const MAX_SEGMENT: usize = 1 << 22;

/// How `welch` scales its output, as in scipy.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Scaling {
    /// Power spectral density, units^2/Hz.
    Density,
    /// Power spectrum, units^2.
    Spectrum,
}

/// A one-sided Welch estimate.
#[derive(Debug, Clone, PartialEq)]
pub struct Welch {
    /// Frequencies, Hz: 0, fs/n, ... up to fs/2.
    pub frequency_hz: Vec<f64>,
    /// The average over the segments used, in the scaling asked for.
    pub power: Vec<f64>,
    /// Segments averaged, and segments left out for holding non-finite values.
    pub segments_used: usize,
    pub segments_skipped: usize,
}

/// Welch's estimate of `x` sampled at `fs_hz`, with segments of `nperseg` samples
/// overlapping by `nperseg / 2` (scipy's defaults). `None` when `nperseg` is 0, larger than
/// [`MAX_SEGMENT`] or than `x`, or when every segment holds a non-finite value.
pub fn welch(x: &[f64], fs_hz: f64, nperseg: usize, scaling: Scaling) -> Option<Welch> {
    if nperseg == 0 || nperseg > MAX_SEGMENT || nperseg > x.len() || !positive(fs_hz) {
        return None;
    }
    let step = nperseg - nperseg / 2;
    // scipy's 'hann' window for spectra is periodic: 0.5 - 0.5 cos(2 pi n / N).
    let window: Vec<f64> = (0..nperseg)
        .map(|n| 0.5 - 0.5 * libm::cos(std::f64::consts::TAU * n as f64 / nperseg as f64))
        .collect();
    let scale = match scaling {
        Scaling::Density => 1.0 / (fs_hz * window.iter().map(|w| w * w).sum::<f64>()),
        Scaling::Spectrum => 1.0 / window.iter().sum::<f64>().powi(2),
    };
    let mut dft = Dft::new(nperseg)?;
    let mut input = vec![0.0; nperseg];
    let bins = nperseg / 2 + 1;
    let mut power = vec![0.0; bins];
    let mut sum = vec![0.0; bins];
    let (mut used, mut skipped) = (0, 0);
    let mut start = 0;
    while start + nperseg <= x.len() {
        let segment = &x[start..start + nperseg];
        start += step;
        if segment.iter().any(|v| !v.is_finite()) {
            skipped += 1;
            continue;
        }
        let mean = segment.iter().sum::<f64>() / nperseg as f64;
        for ((slot, &v), &w) in input.iter_mut().zip(segment).zip(&window) {
            *slot = (v - mean) * w;
        }
        dft.power(&input, &mut power);
        for (s, p) in sum.iter_mut().zip(&power) {
            *s += p;
        }
        used += 1;
    }
    if used == 0 {
        return None;
    }
    let power: Vec<f64> = sum
        .iter()
        .enumerate()
        .map(|(k, s)| {
            // One-sided: every bin but DC (and Nyquist for an even length) counts twice.
            let nyquist = nperseg % 2 == 0 && k == bins - 1;
            let twice = if k == 0 || nyquist { 1.0 } else { 2.0 };
            twice * scale * s / used as f64
        })
        .collect();
    Some(Welch {
        frequency_hz: (0..bins)
            .map(|k| k as f64 * fs_hz / nperseg as f64)
            .collect(),
        power,
        segments_used: used,
        segments_skipped: skipped,
    })
}

/// How the population rhythm is measured.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct SpectrumSettings {
    /// Bin of the event rate the spectrum is computed on, seconds (Nyquist 1 / (2 bin)).
    pub bin_s: f64,
    /// Slowest rhythm of interest, Hz; with `periods_per_segment` it sets the segment length.
    pub min_frequency_hz: f64,
    /// Periods of the slowest rhythm in one Welch segment (common practice, no source: a few
    /// periods, so that the slowest rhythm is resolved and several segments are averaged).
    pub periods_per_segment: f64,
    /// Fastest frequency searched for the dominant rhythm, Hz.
    pub max_frequency_hz: f64,
    /// False-alarm probability of the floor test, over all frequencies searched together
    /// (Bonferroni).
    pub false_alarm: f64,
}

impl Default for SpectrumSettings {
    fn default() -> Self {
        SpectrumSettings {
            bin_s: 0.01,
            min_frequency_hz: 0.1,
            periods_per_segment: 4.0,
            max_frequency_hz: 10.0,
            false_alarm: 0.01,
        }
    }
}

/// The rhythm of the population rate.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RateSpectrum {
    /// Bin of the event rate, seconds: `spectrum.bin_s`, or wider for a recording longer
    /// than [`MAX_RATE_BINS`] bins.
    pub bin_s: f64,
    /// Frequency resolution (bin spacing), Hz, and the segment length, seconds.
    pub resolution_hz: f64,
    pub segment_s: f64,
    pub segments_used: usize,
    pub segments_skipped: usize,
    /// Mean event rate over all sites, events/s.
    pub mean_rate_hz: f64,
    /// The flat one-sided density of a Poisson train of that rate binned into a rate:
    /// 2 x mean rate, (events/s)^2/Hz.
    pub poisson_floor: f64,
    /// The dominant rhythm: the highest density between the lowest resolved frequency and
    /// `max_frequency_hz`, or the fundamental of which it is a harmonic.
    pub peak_frequency_hz: Option<f64>,
    pub peak_density: Option<f64>,
    /// Full width of the peak at half its height, Hz (linear between bins).
    pub peak_bandwidth_hz: Option<f64>,
    /// Peak density over the Poisson floor (how far the rate is from independent firing at
    /// that frequency; bursty firing lifts the whole spectrum above it).
    pub peak_over_floor: Option<f64>,
    /// Peak density over the median density between half and twice the peak frequency (how
    /// far the peak stands out of its own spectrum: the rhythm itself).
    pub peak_over_local: Option<f64>,
    /// The ratio a peak must exceed, over the floor and over its surroundings, to be a
    /// rhythm: the chi-square quantile of an averaged Welch estimate of a flat spectrum,
    /// corrected for the frequencies searched.
    pub rhythm_threshold: Option<f64>,
    /// Whether the peak clears that threshold over both the Poisson floor and its
    /// surroundings.
    pub is_rhythm: bool,
    /// The spectrum itself: (frequency Hz, density (events/s)^2/Hz), up to `max_frequency_hz`;
    /// written to `spectrum.csv`, not to the JSON.
    #[serde(skip)]
    pub density: Vec<(f64, f64)>,
}

/// The spectrum of the summed event rate of `trains_s` (seconds) over `span_s`, with the
/// dominant rhythm and the Poisson floor. `None` when the recording is shorter than one
/// segment or holds no events.
pub fn rate_spectrum(
    trains_s: &[Vec<f64>],
    span_s: (f64, f64),
    s: &SpectrumSettings,
) -> Option<RateSpectrum> {
    let (t0, t1) = span_s;
    let duration = t1 - t0;
    if !positive(duration) || !positive(s.bin_s) || !positive(s.min_frequency_hz) {
        return None;
    }
    let bin_s = s.bin_s.max(duration / MAX_RATE_BINS as f64);
    let bins = (duration / bin_s).floor();
    if !at_least(bins, 1.0) {
        return None;
    }
    let bins = (bins as usize).min(MAX_RATE_BINS);
    let fs = 1.0 / bin_s;
    let wanted = (s.periods_per_segment / s.min_frequency_hz / bin_s)
        .round()
        .min(MAX_SEGMENT as f64);
    if !at_least(wanted, 8.0) {
        return None;
    }
    // The power of two nearest the wanted length (the radix-2 transform), within the data.
    let wanted = wanted as usize;
    let up = wanted.next_power_of_two();
    let pow2 = if up - wanted <= wanted - up / 2 {
        up
    } else {
        up / 2
    };
    let mut nperseg = pow2.min(MAX_SEGMENT);
    while nperseg > bins && nperseg > 8 {
        nperseg /= 2;
    }
    let mut rate = vec![0.0; bins];
    let mut events = 0usize;
    for train in trains_s {
        for &t in train {
            let k = ((t - t0) / bin_s).floor();
            if k >= 0.0 && (k as usize) < bins {
                rate[k as usize] += fs;
                events += 1;
            }
        }
    }
    if events == 0 {
        return None;
    }
    let w = welch(&rate, fs, nperseg, Scaling::Density)?;
    let mean_rate_hz = events as f64 / (bins as f64 * bin_s);
    let floor = 2.0 * mean_rate_hz;
    let in_band: Vec<usize> = (1..w.frequency_hz.len())
        .filter(|&k| w.frequency_hz[k] <= s.max_frequency_hz)
        .collect();
    let tallest = in_band
        .iter()
        .copied()
        .max_by(|&a, &b| w.power[a].total_cmp(&w.power[b]));
    let resolution = fs / nperseg as f64;
    let peak = tallest.map(|t| fundamental(&w.frequency_hz, &w.power, &in_band, t, resolution));
    // Averaging K half-overlapping Hann segments gives about 2 K' degrees of freedom with
    // K' = K / (1 + 2 c^2 (1 - 1/K)), c = 0.167 the correlation of Hann segments overlapping by
    // half (Welch 1967; Harris 1978, Proc. IEEE 66:51, from memory); one segment has 2.
    let k = w.segments_used as f64;
    let dof = 2.0 * k / (1.0 + 2.0 * 0.167f64.powi(2) * (1.0 - 1.0 / k));
    let threshold = (!in_band.is_empty()).then(|| {
        use statrs::distribution::{ChiSquared, ContinuousCDF};
        let p = 1.0 - s.false_alarm.clamp(1e-12, 0.5) / in_band.len() as f64;
        ChiSquared::new(dof)
            .map(|c| c.inverse_cdf(p) / dof)
            .unwrap_or(f64::INFINITY)
    });
    let bandwidth = peak.map(|p| {
        let half = w.power[p] / 2.0;
        let edge = |step: isize| {
            let mut i = p as isize;
            loop {
                let j = i + step;
                if j < 0 || j as usize >= w.power.len() {
                    return w.frequency_hz[i as usize];
                }
                let (a, b) = (w.power[i as usize], w.power[j as usize]);
                if b <= half {
                    let (fa, fb) = (w.frequency_hz[i as usize], w.frequency_hz[j as usize]);
                    return fa + (fb - fa) * (a - half) / (a - b);
                }
                i = j;
            }
        };
        edge(1) - edge(-1)
    });
    let peak_over_floor = peak.map(|p| w.power[p] / floor);
    let peak_over_local = peak.and_then(|p| {
        let f = w.frequency_hz[p];
        let around: Vec<f64> = (1..w.power.len())
            .filter(|&k| k != p && w.frequency_hz[k] >= f / 2.0 && w.frequency_hz[k] <= 2.0 * f)
            .map(|k| w.power[k])
            .collect();
        crate::stats::quantile(&around, 0.5)
            .filter(|m| *m > 0.0)
            .map(|m| w.power[p] / m)
    });
    Some(RateSpectrum {
        bin_s,
        resolution_hz: fs / nperseg as f64,
        segment_s: nperseg as f64 * bin_s,
        segments_used: w.segments_used,
        segments_skipped: w.segments_skipped,
        mean_rate_hz,
        poisson_floor: floor,
        peak_frequency_hz: peak.map(|p| w.frequency_hz[p]),
        peak_density: peak.map(|p| w.power[p]),
        peak_bandwidth_hz: bandwidth,
        peak_over_floor,
        peak_over_local,
        rhythm_threshold: threshold,
        is_rhythm: matches!(
            (peak_over_floor, peak_over_local, threshold),
            (Some(r), Some(l), Some(t)) if r > t && l > t
        ),
        density: w
            .frequency_hz
            .iter()
            .zip(&w.power)
            .filter(|(f, _)| **f <= s.max_frequency_hz)
            .map(|(&f, &p)| (f, p))
            .collect(),
    })
}

/// Share of the tallest peak's density a lower peak needs to be taken as its fundamental.
pub const FUNDAMENTAL_SHARE: f64 = 0.5;

/// The dominant rhythm's bin: the tallest in the band, unless a lower local maximum at
/// least [`FUNDAMENTAL_SHARE`] as tall has it as a harmonic (the tallest lies within n
/// resolution bins of n times its frequency). A train of sharp, regular bursts puts nearly
/// equal power at every multiple of its rate, so the tallest bin can be the third
/// harmonic; the rhythm is the fundamental (our rule; no source).
fn fundamental(
    frequency_hz: &[f64],
    power: &[f64],
    in_band: &[usize],
    tallest: usize,
    resolution_hz: f64,
) -> usize {
    let local_max = |k: usize| {
        k > 0 && power[k] >= power[k - 1] && power.get(k + 1).is_none_or(|&r| power[k] >= r)
    };
    let f_top = frequency_hz[tallest];
    in_band
        .iter()
        .copied()
        .filter(|&k| k < tallest && local_max(k) && power[k] >= FUNDAMENTAL_SHARE * power[tallest])
        .find(|&k| {
            let n = (f_top / frequency_hz[k]).round();
            n >= 2.0 && (f_top - n * frequency_hz[k]).abs() <= n * resolution_hz
        })
        .unwrap_or(tallest)
}

/// Whether `x` is a number above zero (false for NaN).
fn positive(x: f64) -> bool {
    x > 0.0
}

/// Whether `x` is a number of at least `low` (false for NaN).
fn at_least(x: f64, low: f64) -> bool {
    x >= low
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_sharp_regular_pulse_train_peaks_at_its_fundamental() {
        // Bursts of 50 events within 10 ms every 1.25 s for 300 s: the Fourier series of a
        // pulse train has equal weight at every multiple of 0.8 Hz up to about 1 / width.
        let trains: Vec<Vec<f64>> = (0..10)
            .map(|site| {
                (0..240)
                    .flat_map(|k| {
                        (0..5).map(move |j| k as f64 * 1.25 + 0.002 * j as f64 + site as f64 * 1e-4)
                    })
                    .collect()
            })
            .collect();
        let r = rate_spectrum(&trains, (0.0, 300.0), &SpectrumSettings::default()).unwrap();
        let f = r.peak_frequency_hz.unwrap();
        assert!((f - 0.8).abs() <= r.resolution_hz, "{f}");
        assert!(r.is_rhythm);
    }
}
