//! Butterworth band-pass filters as second-order sections, applied zero-phase.
//!
//! Design follows the textbook route scipy's `signal.butter` takes: the analog Butterworth
//! prototype (poles on the left unit half-circle), frequency prewarping, low-pass to
//! band-pass transformation, and the bilinear transform (Oppenheim & Schafer, Discrete-Time
//! Signal Processing, 3rd ed., sec. 7.2). Zero-phase filtering is forward then backward with
//! odd extension at the ends and steady-state initial conditions, as `scipy.signal.sosfiltfilt`
//! (Gustafsson 1996, IEEE Trans. Signal Process. 44:988, for the initial conditions' role).
//! [`zero_phase_blocks`] does the same block by block with overlaps long enough for the
//! filter's transients to die out, so a file never needs to be in memory whole.

use serde::Serialize;
use std::f64::consts::PI;

/// One second-order section, `b0 b1 b2 / 1 a1 a2`: the layout of a row of scipy's `sos` array
/// (with a0 = 1 left out).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Section {
    pub b: [f64; 3],
    /// a1, a2 (a0 = 1).
    pub a: [f64; 2],
}

/// Why a filter cannot be designed.
#[derive(Debug, Clone, PartialEq, Serialize, thiserror::Error)]
#[error("{message}")]
pub struct FilterError {
    pub message: String,
}

#[derive(Debug, Clone, Copy, PartialEq)]
struct Complex {
    re: f64,
    im: f64,
}

impl Complex {
    fn new(re: f64, im: f64) -> Self {
        Complex { re, im }
    }
    fn add(self, o: Complex) -> Complex {
        Complex::new(self.re + o.re, self.im + o.im)
    }
    fn sub(self, o: Complex) -> Complex {
        Complex::new(self.re - o.re, self.im - o.im)
    }
    fn mul(self, o: Complex) -> Complex {
        Complex::new(
            self.re * o.re - self.im * o.im,
            self.re * o.im + self.im * o.re,
        )
    }
    fn scale(self, s: f64) -> Complex {
        Complex::new(self.re * s, self.im * s)
    }
    fn div(self, o: Complex) -> Complex {
        let d = o.re * o.re + o.im * o.im;
        Complex::new(
            (self.re * o.re + self.im * o.im) / d,
            (self.im * o.re - self.re * o.im) / d,
        )
    }
    fn sqrt(self) -> Complex {
        // Principal square root.
        let r = libm::hypot(self.re, self.im);
        let re = ((r + self.re) / 2.0).max(0.0).sqrt();
        let im = ((r - self.re) / 2.0).max(0.0).sqrt();
        Complex::new(re, if self.im < 0.0 { -im } else { im })
    }
    fn norm_sqr(self) -> f64 {
        self.re * self.re + self.im * self.im
    }
}

/// Butterworth band-pass of `order` (the prototype's order; the band-pass has twice as many
/// poles, in `order` sections) between `low_hz` and `high_hz` at `sample_rate_hz`. The overall
/// gain is 1 at the band's geometric centre (in the prewarped frequency), as in scipy.
pub fn butterworth_bandpass(
    order: usize,
    low_hz: f64,
    high_hz: f64,
    sample_rate_hz: f64,
) -> Result<Vec<Section>, FilterError> {
    let nyquist = sample_rate_hz / 2.0;
    if !(1..=12).contains(&order) {
        return Err(FilterError {
            message: format!(
                "voltage.filter_order (--filter-order): expected 1 to 12, found {order}"
            ),
        });
    }
    if !(sample_rate_hz.is_finite() && low_hz > 0.0 && low_hz < high_hz && high_hz < nyquist) {
        return Err(FilterError {
            message: format!(
                "voltage.band_hz (--band): expected edges 0 < low < high < {nyquist} Hz (half the sample rate), found {} to {} Hz",
                crate::place::number(low_hz),
                crate::place::number(high_hz)
            ),
        });
    }
    // Prewarped analog edges for the bilinear transform with fs = 2 (scipy's normalisation).
    let fs = 2.0;
    let warp = |f: f64| 2.0 * fs * libm::tan(PI * (f / nyquist) / fs);
    let (w1, w2) = (warp(low_hz), warp(high_hz));
    let (bw, wo) = (w2 - w1, (w1 * w2).sqrt());
    // Analog prototype: p_k = -exp(i pi m / (2N)), m = -N+1, -N+3, ..., N-1; no zeros; gain 1.
    let n = order as i64;
    let prototype: Vec<Complex> = (0..n)
        .map(|k| {
            let m = (-n + 1 + 2 * k) as f64;
            let angle = PI * m / (2.0 * n as f64);
            Complex::new(-libm::cos(angle), -libm::sin(angle))
        })
        .collect();
    // Low-pass to band-pass: each pole p becomes p bw/2 +- sqrt((p bw/2)^2 - wo^2); the N
    // zeros go to the origin; the gain is multiplied by bw^N.
    let mut analog_poles = Vec::with_capacity(2 * order);
    for &p in &prototype {
        let half = p.scale(bw / 2.0);
        let root = half.mul(half).sub(Complex::new(wo * wo, 0.0)).sqrt();
        analog_poles.push(half.add(root));
        analog_poles.push(half.sub(root));
    }
    let mut gain = bw.powi(order as i32);
    // Bilinear transform: s -> z = (2 fs + s) / (2 fs - s). Zeros at s = 0 map to z = 1; the
    // N zeros at infinity map to z = -1.
    let fs2 = Complex::new(2.0 * fs, 0.0);
    let poles: Vec<Complex> = analog_poles
        .iter()
        .map(|&p| fs2.add(p).div(fs2.sub(p)))
        .collect();
    let mut num = Complex::new(1.0, 0.0);
    let mut den = Complex::new(1.0, 0.0);
    for _ in 0..order {
        num = num.mul(fs2); // (2 fs - 0) for each zero at the origin
    }
    for &p in &analog_poles {
        den = den.mul(fs2.sub(p));
    }
    gain *= num.div(den).re;
    // One section per conjugate pair of poles, and one per two real poles (a wide band turns
    // the prototype's real pole into two real poles), each with one zero at z = 1 and one at
    // z = -1: b = [1, 0, -1]. The gain goes to the first section.
    let tiny = 1e-12;
    let mut denominators: Vec<([f64; 2], f64)> = poles
        .iter()
        .filter(|p| p.im > tiny)
        .map(|p| ([-2.0 * p.re, p.norm_sqr()], p.norm_sqr()))
        .collect();
    let mut real: Vec<f64> = poles
        .iter()
        .filter(|p| p.im.abs() <= tiny)
        .map(|p| p.re)
        .collect();
    real.sort_by(f64::total_cmp);
    for pair in real.chunks(2) {
        if let [p1, p2] = *pair {
            denominators.push(([-(p1 + p2), p1 * p2], p1.abs().max(p2.abs()).powi(2)));
        }
    }
    if denominators.len() != order {
        return Err(FilterError {
            message: format!(
                "internal: expected {order} pole pairs, found {}",
                denominators.len()
            ),
        });
    }
    // Sections with poles nearest the unit circle last (their gain peaks are sharpest).
    denominators.sort_by(|a, b| a.1.total_cmp(&b.1));
    Ok(denominators
        .iter()
        .enumerate()
        .map(|(k, (a, _))| {
            let g = if k == 0 { gain } else { 1.0 };
            Section {
                b: [g, 0.0, -g],
                a: *a,
            }
        })
        .collect())
}

/// Magnitude of the filter's frequency response at `f_hz`.
pub fn gain_at(sections: &[Section], f_hz: f64, sample_rate_hz: f64) -> f64 {
    let w = 2.0 * PI * f_hz / sample_rate_hz;
    // z^-1 and z^-2 on the unit circle.
    let z1 = Complex::new(libm::cos(w), -libm::sin(w));
    let z2 = z1.mul(z1);
    sections
        .iter()
        .map(|s| {
            let num = Complex::new(s.b[0], 0.0)
                .add(z1.scale(s.b[1]))
                .add(z2.scale(s.b[2]));
            let den = Complex::new(1.0, 0.0)
                .add(z1.scale(s.a[0]))
                .add(z2.scale(s.a[1]));
            num.div(den).norm_sqr().sqrt()
        })
        .product()
}

/// Steady-state states of each section for a unit step input (scipy's `sosfilt_zi`): the
/// solution of (I - A^T) z = b[1:] - a[1:] b0 for each section, scaled by the DC gain of the
/// sections before it.
pub fn steady_states(sections: &[Section]) -> Vec<[f64; 2]> {
    let mut scale = 1.0;
    sections
        .iter()
        .map(|s| {
            let [b0, b1, b2] = s.b;
            let [a1, a2] = s.a;
            // [[1 + a1, -1], [a2, 1]] z = [b1 - a1 b0, b2 - a2 b0]
            let (r0, r1) = (b1 - a1 * b0, b2 - a2 * b0);
            let det = (1.0 + a1) + a2;
            let z0 = (r0 + r1) / det;
            let z1 = r1 - a2 * z0;
            let out = [scale * z0, scale * z1];
            scale *= (b0 + b1 + b2) / (1.0 + a1 + a2);
            out
        })
        .collect()
}

/// Number of samples of odd extension at each end, as scipy's `sosfiltfilt` default:
/// 3 (2 n + 1 - min(zeros of b2, zeros of a2)).
pub fn pad_length(sections: &[Section]) -> usize {
    let b_zero = sections.iter().filter(|s| s.b[2] == 0.0).count();
    let a_zero = sections.iter().filter(|s| s.a[1] == 0.0).count();
    3 * (2 * sections.len() + 1 - b_zero.min(a_zero))
}

/// Zero-phase filtering of a whole signal, as `scipy.signal.sosfiltfilt(sos, x)` with its
/// defaults (odd extension of [`pad_length`] samples; the signal must be longer than that).
pub fn sosfiltfilt(sections: &[Section], x: &[f64]) -> Result<Vec<f64>, FilterError> {
    let one: Vec<[f64; 1]> = x.iter().map(|&v| [v]).collect();
    let filtered = sosfiltfilt_lanes(sections, &one)?;
    Ok(filtered.samples().iter().map(|v| v[0]).collect())
}

/// Samples after which the slowest-decaying pole's transient is below `relative` of its
/// start: ln(relative) / ln(max |p|).
pub fn settling_samples(sections: &[Section], relative: f64) -> usize {
    let radius = sections
        .iter()
        .map(|s| s.a[1].abs().sqrt())
        .fold(0.0f64, f64::max);
    if radius <= 0.0 {
        return 1;
    }
    if radius >= 1.0 {
        return usize::MAX / 4;
    }
    (libm::log(relative) / libm::log(radius)).ceil() as usize
}

/// Zero-phase filtering block by block: each block of `block` samples is filtered with
/// `margin` samples of the signal on each side (odd extension only at the signal's own ends),
/// and the margins are dropped. With a margin of [`settling_samples`] for 1e-12 the result
/// matches [`sosfiltfilt`] of the whole signal to about that relative level. `read(from, to)`
/// returns samples from..to of the signal, so the signal is never held whole.
pub fn zero_phase_blocks(
    sections: &[Section],
    len: usize,
    block: usize,
    margin: usize,
    mut read: impl FnMut(usize, usize) -> Vec<f64>,
    mut write: impl FnMut(usize, &[f64]),
) -> Result<(), FilterError> {
    let block = block.max(1);
    let mut start = 0;
    while start < len {
        let end = (start + block).min(len);
        let from = start.saturating_sub(margin);
        let to = (end + margin).min(len);
        let chunk = read(from, to);
        let filtered = sosfiltfilt(sections, &chunk)?;
        write(start, &filtered[start - from..end - from]);
        start = end;
    }
    Ok(())
}

/// Channels filtered side by side: independent filters interleaved, so the processor works on
/// several recursions at once instead of waiting on one (each lane gets exactly the
/// arithmetic of a single channel, so the results are identical).
pub const LANES: usize = 8;

/// One sample of [`LANES`] channels.
pub type Lanes = [f64; LANES];

/// Samples per tile: every section runs over one tile before the next tile is loaded, so a
/// long block is read from memory once per direction rather than once per section
/// (1024 samples of 8 lanes are 64 KiB, well inside a core's L2 cache).
const TILE: usize = 1024;

/// Runs one section over `tile` in direct form II transposed, forward or backward in time,
/// from the states `z`, which are left at their final values.
fn section_pass<const L: usize>(
    s: &Section,
    tile: &mut [[f64; L]],
    z: &mut [[f64; L]; 2],
    backward: bool,
) {
    let [b0, b1, b2] = s.b;
    let [a1, a2] = s.a;
    let [mut z0, mut z1] = *z;
    let mut step = |v: &mut [f64; L]| {
        for l in 0..L {
            let input = v[l];
            let y = b0 * input + z0[l];
            z0[l] = b1 * input - a1 * y + z1[l];
            z1[l] = b2 * input - a2 * y;
            v[l] = y;
        }
    };
    if backward {
        tile.iter_mut().rev().for_each(&mut step);
    } else {
        tile.iter_mut().for_each(&mut step);
    }
    *z = [z0, z1];
}

/// Filters `x` in place through the sections (direct form II transposed, as
/// `scipy.signal.sosfilt`), forward or backward in time, from the states `z` (two per
/// section). Tiled: the arithmetic of each lane is that of one pass per section over the
/// whole signal, in the same order.
fn sosfilt_tiled<const L: usize>(
    sections: &[Section],
    x: &mut [[f64; L]],
    z: &mut [[[f64; L]; 2]],
    backward: bool,
) {
    let mut run = |tile: &mut [[f64; L]]| {
        for (s, state) in sections.iter().zip(z.iter_mut()) {
            section_pass(s, tile, state, backward);
        }
    };
    if backward {
        x.rchunks_mut(TILE).for_each(&mut run);
    } else {
        x.chunks_mut(TILE).for_each(&mut run);
    }
}

/// `scipy.signal.sosfiltfilt` of `L` channels at once, each lane exactly as alone: odd
/// extension of [`pad_length`] samples at each end, steady-state initial conditions, forward
/// then backward. The result is `x.len()` samples; the padding stays in the buffer (no copy)
/// and is skipped by [`PaddedLanes::samples`].
pub fn sosfiltfilt_lanes<const L: usize>(
    sections: &[Section],
    x: &[[f64; L]],
) -> Result<PaddedLanes<L>, FilterError> {
    // filtfilt_padded checks the length.
    let (pad, n) = (pad_length(sections), x.len());
    let mut ext: Vec<[f64; L]> = Vec::with_capacity(n + 2 * pad);
    ext.resize(pad, [0.0; L]);
    ext.extend_from_slice(x);
    ext.resize(n + 2 * pad, [0.0; L]);
    filtfilt_padded(sections, ext)
}

/// [`sosfiltfilt_lanes`] on a buffer that already holds the signal between [`pad_length`]
/// placeholder samples at each end (so the caller can decode straight into it); the
/// placeholders are overwritten with the odd extension.
pub fn filtfilt_padded<const L: usize>(
    sections: &[Section],
    mut ext: Vec<[f64; L]>,
) -> Result<PaddedLanes<L>, FilterError> {
    let pad = pad_length(sections);
    let n = ext.len().saturating_sub(2 * pad);
    if n <= pad {
        return Err(FilterError {
            message: format!("zero-phase filtering: expected more than {pad} samples, found {n}"),
        });
    }
    // Odd extension: 2 x[0] - x[pad..1], x, 2 x[n-1] - x[n-2..n-pad-1].
    let odd = |edge: &[f64; L], mirror: &[f64; L]| -> [f64; L] {
        std::array::from_fn(|l| 2.0 * edge[l] - mirror[l])
    };
    let (first, last) = (pad, pad + n - 1);
    for k in 1..=pad {
        ext[first - k] = odd(&ext[first], &ext[first + k]);
        ext[last + k] = odd(&ext[last], &ext[last - k]);
    }
    let zi = steady_states(sections);
    let start = |first: &[f64; L]| -> Vec<[[f64; L]; 2]> {
        zi.iter()
            .map(|s| {
                [
                    std::array::from_fn(|l| s[0] * first[l]),
                    std::array::from_fn(|l| s[1] * first[l]),
                ]
            })
            .collect()
    };
    let mut z = start(&ext[0]);
    sosfilt_tiled(sections, &mut ext, &mut z, false);
    let mut z = start(&ext[ext.len() - 1]);
    sosfilt_tiled(sections, &mut ext, &mut z, true);
    Ok(PaddedLanes {
        data: ext,
        pad,
        len: n,
    })
}

/// Filtered lanes with the extension still around them.
pub struct PaddedLanes<const L: usize = LANES> {
    data: Vec<[f64; L]>,
    pad: usize,
    len: usize,
}

impl<const L: usize> PaddedLanes<L> {
    /// The filtered samples, one per input sample.
    pub fn samples(&self) -> &[[f64; L]] {
        &self.data[self.pad..self.pad + self.len]
    }

    /// The buffer back, for reuse.
    pub fn into_buffer(self) -> Vec<[f64; L]> {
        self.data
    }
}
