//! A kinematic generator of recordings with known fronts, written from a description of how
//! cultures fire and not from the analysis: sites fire sparsely or in dense runs, first-spike
//! latencies are heavy-tailed, stray spikes and lying electrodes put sites far off the front,
//! sites miss bursts, background firing goes on between bursts, and some bursts do not
//! propagate at all. It writes the spike list and layout as CSV text by hand, so the tests
//! read them through the importer as a user's files.
//!
//! Nothing here calls the analysis or the project's own simulator.

#![allow(dead_code)] // each test file uses a part

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Exp, LogNormal, Normal};
use std::f64::consts::{PI, TAU};
use std::fmt::Write;

/// Where the electrodes are.
#[derive(Debug, Clone, Copy)]
pub enum Array {
    /// `count` sites on the x axis, `pitch_um` apart.
    Line { count: usize, pitch_um: f64 },
    /// `count` sites evenly round a circle of `radius_um` centred on the origin.
    Ring { count: usize, radius_um: f64 },
    /// `side` x `side` sites, `pitch_um` apart.
    Grid { side: usize, pitch_um: f64 },
}

impl Array {
    pub fn positions(self) -> Vec<[f64; 2]> {
        match self {
            Array::Line { count, pitch_um } => {
                (0..count).map(|i| [i as f64 * pitch_um, 0.0]).collect()
            }
            Array::Ring { count, radius_um } => (0..count)
                .map(|i| {
                    let a = TAU * i as f64 / count as f64;
                    [radius_um * a.cos(), radius_um * a.sin()]
                })
                .collect(),
            Array::Grid { side, pitch_um } => (0..side * side)
                .map(|k| [(k % side) as f64 * pitch_um, (k / side) as f64 * pitch_um])
                .collect(),
        }
    }

    pub fn spacing_um(self) -> f64 {
        match self {
            Array::Line { pitch_um, .. } | Array::Grid { pitch_um, .. } => pitch_um,
            Array::Ring { count, radius_um } => TAU * radius_um / count as f64,
        }
    }
}

/// What kind of fronts the culture makes.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Fronts {
    /// Lines: from either end.
    OneWay,
    /// Lines: from an interior point both ways.
    TwoWay,
    /// Rings: one way round from a random site, either rotation.
    RingOneWay,
    /// Rings: both ways round from a random point.
    RingTwoWay,
    /// Grids: straight fronts from a random direction.
    Plane,
    /// Grids: circular fronts from a point, often near the array's edge.
    Point,
    /// Every site at one time, within a fraction of a millisecond: no propagation.
    Synchronous,
}

/// How a site fires once the front has reached it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Firing {
    /// Multi-unit site: a run of about `spikes` spikes over ~50 ms, the first within a
    /// Gaussian jitter of `jitter_s` after arrival.
    Dense { spikes: f64, jitter_s: f64 },
    /// Single unit: 1, 2 or 3 spikes; the first a log-normal latency after arrival (median
    /// `latency_s`), the others spread over the next 50-200 ms.
    Sparse { latency_s: f64 },
    /// Multi-unit with a heavy-tailed first-spike latency: `floor_s` plus a Pareto tail of
    /// index 1.5 and scale `scale_s` (capped at 200 ms), then a run as in Dense.
    HeavyTailed { floor_s: f64, scale_s: f64 },
}

/// One recording's recipe.
#[derive(Debug, Clone)]
pub struct Recipe {
    pub seed: u64,
    pub duration_s: f64,
    pub array: Array,
    pub fronts: Fronts,
    pub firing: Firing,
    /// Median front speed, mm/s; each burst draws its own with a CV of about 0.15.
    pub speed_mm_s: f64,
    /// Background firing of every site, spikes/s.
    pub background_hz: f64,
    /// Chance that a site misses a burst.
    pub miss_probability: f64,
    /// Chance per burst that one site lies: its first spike 20-200 ms early (stray spikes) or
    /// late (its unit missed the front), either way.
    pub liar_probability: f64,
    /// Mean interval between bursts beyond a 3 s refractory gap, seconds.
    pub mean_extra_interval_s: f64,
    /// Point fronts: every burst starts here (um) instead of at a random place.
    pub fixed_origin_um: Option<[f64; 2]>,
}

impl Recipe {
    pub fn new(seed: u64, array: Array, fronts: Fronts, firing: Firing) -> Recipe {
        Recipe {
            seed,
            duration_s: 300.0,
            array,
            fronts,
            firing,
            speed_mm_s: 40.0,
            background_hz: 0.2,
            miss_probability: 0.0,
            liar_probability: 0.0,
            mean_extra_interval_s: 3.0,
            fixed_origin_um: None,
        }
    }
}

/// The truth of one burst.
#[derive(Debug, Clone)]
pub struct TrueBurst {
    /// When the front left its origin, seconds.
    pub start_s: f64,
    pub fronts: Fronts,
    /// mm/s (None for synchronous bursts).
    pub speed_mm_s: Option<f64>,
    /// One-way line and plane: unit vector of travel.
    pub direction: Option<[f64; 2]>,
    /// Ring one-way: +1 counter-clockwise, -1 clockwise.
    pub rotation: Option<i8>,
    /// Two-way line, two-way ring and point source: where it started, um.
    pub origin_xy: Option<[f64; 2]>,
    /// Sites made to lie in this burst.
    pub liars: Vec<usize>,
}

/// A generated recording.
pub struct Generated {
    pub spikes_csv: String,
    pub layout_csv: String,
    pub truth: Vec<TrueBurst>,
    pub positions: Vec<[f64; 2]>,
}

fn site_name(i: usize) -> String {
    format!("e{:03}", i + 1)
}

/// Draws the recording.
pub fn generate(r: &Recipe) -> Generated {
    let mut rng = ChaCha8Rng::seed_from_u64(r.seed);
    let positions = r.array.positions();
    let n = positions.len();
    let mut trains: Vec<Vec<f64>> = vec![Vec::new(); n];
    // Background: a Poisson process per site over the whole recording.
    if r.background_hz > 0.0 {
        let gap = Exp::new(r.background_hz).unwrap();
        for train in &mut trains {
            let mut t = gap.sample(&mut rng);
            while t < r.duration_s {
                train.push(t);
                t += gap.sample(&mut rng);
            }
        }
    }
    let speed_spread = LogNormal::new(r.speed_mm_s.ln(), 0.15).unwrap();
    let extra = Exp::new(1.0 / r.mean_extra_interval_s).unwrap();
    let mut truth = Vec::new();
    let mut t = 2.0;
    while t < r.duration_s - 3.0 {
        let speed = speed_spread.sample(&mut rng);
        let um_per_s = speed * 1e3;
        let mut b = TrueBurst {
            start_s: t,
            fronts: r.fronts,
            speed_mm_s: Some(speed),
            direction: None,
            rotation: None,
            origin_xy: None,
            liars: Vec::new(),
        };
        // Arrival time of the front at every site, seconds after t.
        let arrival: Vec<f64> = match (r.fronts, r.array) {
            (Fronts::OneWay, _) => {
                let forward = rng.random_bool(0.5);
                let xs: Vec<f64> = positions.iter().map(|p| p[0]).collect();
                let (lo, hi) = (xs[0], xs[n - 1]);
                b.direction = Some(if forward { [1.0, 0.0] } else { [-1.0, 0.0] });
                xs.iter()
                    .map(|&x| if forward { x - lo } else { hi - x } / um_per_s)
                    .collect()
            }
            (Fronts::TwoWay, _) => {
                let lo = positions[0][0];
                let hi = positions[n - 1][0];
                let x0 = lo + (hi - lo) * rng.random_range(0.3..0.7);
                b.origin_xy = Some([x0, 0.0]);
                positions
                    .iter()
                    .map(|p| (p[0] - x0).abs() / um_per_s)
                    .collect()
            }
            (Fronts::RingOneWay, Array::Ring { radius_um, .. }) => {
                let a0 = rng.random_range(0.0..TAU);
                let ccw = rng.random_bool(0.5);
                b.rotation = Some(if ccw { 1 } else { -1 });
                b.origin_xy = Some([radius_um * a0.cos(), radius_um * a0.sin()]);
                positions
                    .iter()
                    .map(|p| {
                        let a = p[1].atan2(p[0]);
                        let turn = if ccw { a - a0 } else { a0 - a };
                        radius_um * turn.rem_euclid(TAU) / um_per_s
                    })
                    .collect()
            }
            (Fronts::RingTwoWay, Array::Ring { radius_um, .. }) => {
                let a0 = rng.random_range(0.0..TAU);
                b.origin_xy = Some([radius_um * a0.cos(), radius_um * a0.sin()]);
                positions
                    .iter()
                    .map(|p| {
                        let d = (p[1].atan2(p[0]) - a0).rem_euclid(TAU);
                        radius_um * d.min(TAU - d) / um_per_s
                    })
                    .collect()
            }
            (Fronts::Plane, _) => {
                let a = rng.random_range(0.0..TAU);
                let dir = [a.cos(), a.sin()];
                b.direction = Some(dir);
                let proj: Vec<f64> = positions
                    .iter()
                    .map(|p| p[0] * dir[0] + p[1] * dir[1])
                    .collect();
                let first = proj.iter().copied().fold(f64::INFINITY, f64::min);
                proj.iter().map(|v| (v - first) / um_per_s).collect()
            }
            (Fronts::Point, Array::Grid { side, pitch_um }) => {
                let extent = (side - 1) as f64 * pitch_um;
                // Half of the sources lie within one pitch of an edge.
                let (x0, y0) = if let Some([x, y]) = r.fixed_origin_um {
                    (x, y)
                } else if rng.random_bool(0.5) {
                    let along = rng.random_range(0.0..extent);
                    let inset = rng.random_range(0.0..pitch_um);
                    match rng.random_range(0..4) {
                        0 => (along, inset),
                        1 => (along, extent - inset),
                        2 => (inset, along),
                        _ => (extent - inset, along),
                    }
                } else {
                    (
                        rng.random_range(0.2 * extent..0.8 * extent),
                        rng.random_range(0.2 * extent..0.8 * extent),
                    )
                };
                b.origin_xy = Some([x0, y0]);
                positions
                    .iter()
                    .map(|p| (p[0] - x0).hypot(p[1] - y0) / um_per_s)
                    .collect()
            }
            (Fronts::Synchronous, _) => {
                b.speed_mm_s = None;
                let jitter = Normal::new(0.0, 0.0003).unwrap();
                positions
                    .iter()
                    .map(|_| 0.001 + jitter.sample(&mut rng))
                    .collect()
            }
            (f, a) => panic!("{f:?} fronts do not fit a {a:?} array"),
        };
        let liar = (rng.random_bool(r.liar_probability)).then(|| rng.random_range(0..n));
        for (i, &a) in arrival.iter().enumerate() {
            if rng.random_bool(r.miss_probability) {
                continue;
            }
            let mut spikes = fire(&mut rng, r.firing, t + a);
            if Some(i) == liar {
                b.liars.push(i);
                let shift = rng.random_range(0.02..0.2);
                if rng.random_bool(0.5) {
                    // A stray pair of spikes well before the front; the site's own spikes
                    // follow as usual.
                    let s = t + a - shift;
                    spikes.push(s);
                    spikes.push(s + rng.random_range(0.001..0.01));
                } else {
                    // The unit missed the front: everything comes late.
                    for s in &mut spikes {
                        *s += shift;
                    }
                }
            }
            trains[i].extend(spikes);
        }
        truth.push(b);
        let longest = arrival.iter().copied().fold(0.0, f64::max);
        t += longest + 3.0 + extra.sample(&mut rng);
    }
    let mut spikes_csv = String::from("site,time_s\n");
    for (i, train) in trains.iter_mut().enumerate() {
        train.retain(|&s| s >= 0.0 && s < r.duration_s);
        train.sort_by(f64::total_cmp);
        for s in train.iter() {
            let _ = writeln!(spikes_csv, "{},{s:.5}", site_name(i));
        }
    }
    let mut layout_csv = String::from("site,x_um,y_um\n");
    for (i, p) in positions.iter().enumerate() {
        let _ = writeln!(layout_csv, "{},{:.3},{:.3}", site_name(i), p[0], p[1]);
    }
    Generated {
        spikes_csv,
        layout_csv,
        truth,
        positions,
    }
}

/// A site's spikes once the front reaches it at `arrival_s`.
fn fire(rng: &mut ChaCha8Rng, firing: Firing, arrival_s: f64) -> Vec<f64> {
    match firing {
        Firing::Dense { spikes, jitter_s } => {
            let first = arrival_s + Normal::new(0.0, jitter_s).unwrap().sample(rng).abs();
            run_after(rng, first, spikes)
        }
        Firing::Sparse { latency_s } => {
            let first = arrival_s + LogNormal::new(latency_s.ln(), 0.5).unwrap().sample(rng);
            let count = match rng.random_range(0.0..1.0) {
                u if u < 0.4 => 1,
                u if u < 0.75 => 2,
                _ => 3,
            };
            let spread = rng.random_range(0.05..0.2);
            let mut v = vec![first];
            for _ in 1..count {
                v.push(first + rng.random_range(0.0..spread));
            }
            v
        }
        Firing::HeavyTailed { floor_s, scale_s } => {
            // Pareto with index 1.5 by inversion: scale * (U^(-1/1.5) - 1).
            let u: f64 = rng.random_range(1e-12..1.0);
            let tail = (scale_s * (u.powf(-1.0 / 1.5) - 1.0)).min(0.2);
            run_after(rng, arrival_s + floor_s + tail, 8.0)
        }
    }
}

/// `first` and then Poisson-many more spikes (mean `mean - 1`) within 50 ms after it.
fn run_after(rng: &mut ChaCha8Rng, first: f64, mean: f64) -> Vec<f64> {
    let mut v = vec![first];
    let extra = rand_distr::Poisson::new((mean - 1.0).max(0.1))
        .unwrap()
        .sample(rng) as usize;
    for _ in 0..extra {
        v.push(first + rng.random_range(0.0005..0.05));
    }
    v
}

/// Angle of a unit vector, for messages.
pub fn angle_deg(d: [f64; 2]) -> f64 {
    d[1].atan2(d[0]) * 180.0 / PI
}

/// Calcium imaging of the same kind of culture: every ROI's fluorescence at `frame_rate_hz`,
/// F = 1 + sum of transients (dF/F amplitude 0.4-1.0, exponential rise with time constant
/// `rise_s` and decay of 0.8 s) + Gaussian noise of SD 0.03. A transient starts when the front
/// reaches the ROI plus a log-normal latency (median 5 ms); 5% of ROIs miss each burst; a few
/// ROIs fire a lone transient of their own between bursts (0.02 per second).
pub struct Imaged {
    pub traces_csv: String,
    pub layout_csv: String,
    pub truth: Vec<TrueBurst>,
}

pub fn image(r: &Recipe, frame_rate_hz: f64, rise_s: f64) -> Imaged {
    let mut rng = ChaCha8Rng::seed_from_u64(r.seed);
    let positions = r.array.positions();
    let n = positions.len();
    let speed_spread = LogNormal::new(r.speed_mm_s.ln(), 0.15).unwrap();
    let extra = Exp::new(1.0 / r.mean_extra_interval_s).unwrap();
    let latency = LogNormal::new(0.005f64.ln(), 0.5).unwrap();
    let mut onsets: Vec<Vec<(f64, f64)>> = vec![Vec::new(); n];
    let mut truth = Vec::new();
    let mut t = 2.0;
    while t < r.duration_s - 5.0 {
        let speed = speed_spread.sample(&mut rng);
        let forward = rng.random_bool(0.5);
        let xs: Vec<f64> = positions.iter().map(|p| p[0]).collect();
        let (lo, hi) = (xs[0], xs[n - 1]);
        for (i, &x) in xs.iter().enumerate() {
            if rng.random_bool(0.05) {
                continue;
            }
            let d = if forward { x - lo } else { hi - x };
            let onset = t + d / (speed * 1e3) + latency.sample(&mut rng);
            onsets[i].push((onset, rng.random_range(0.4..1.0)));
        }
        truth.push(TrueBurst {
            start_s: t,
            fronts: Fronts::OneWay,
            speed_mm_s: Some(speed),
            direction: Some(if forward { [1.0, 0.0] } else { [-1.0, 0.0] }),
            rotation: None,
            origin_xy: None,
            liars: Vec::new(),
        });
        t += (hi - lo) / (speed * 1e3) + 4.0 + extra.sample(&mut rng);
    }
    let lone = Exp::new(0.02).unwrap();
    for o in &mut onsets {
        let mut s = lone.sample(&mut rng);
        while s < r.duration_s {
            o.push((s, rng.random_range(0.3..0.6)));
            s += lone.sample(&mut rng);
        }
    }
    let noise = Normal::new(0.0, 0.03).unwrap();
    let frames = (r.duration_s * frame_rate_hz) as usize;
    let mut traces_csv = String::from("time_s");
    for i in 0..n {
        let _ = write!(traces_csv, ",r{:03}", i + 1);
    }
    traces_csv.push('\n');
    for k in 0..frames {
        let time = k as f64 / frame_rate_hz;
        let _ = write!(traces_csv, "{time:.4}");
        for o in &onsets {
            let f: f64 = o
                .iter()
                .filter(|(s, _)| *s < time && time - s < 8.0)
                .map(|(s, a)| {
                    let dt = time - s;
                    a * (1.0 - (-dt / rise_s).exp()) * (-dt / 0.8).exp()
                })
                .sum();
            let _ = write!(traces_csv, ",{:.5}", 1.0 + f + noise.sample(&mut rng));
        }
        traces_csv.push('\n');
    }
    let mut layout_csv = String::from("site,x_um,y_um\n");
    for (i, p) in positions.iter().enumerate() {
        let _ = writeln!(layout_csv, "r{:03},{:.3},{:.3}", i + 1, p[0], p[1]);
    }
    Imaged {
        traces_csv,
        layout_csv,
        truth,
    }
}
