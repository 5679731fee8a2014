//! Kinematic fronts: each burst is a front that starts at an origin and reaches every
//! electrode at `t0 + distance / speed`, plus jitter; electrodes fire a few spikes when the
//! front passes and a Poisson background in between.

use super::sample::{exponential, normal, poisson, uniform};
use crate::import::SiteSpikes;
use crate::recording::Site;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};
use std::f64::consts::TAU;

/// Virtual electrodes, in micrometres.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "shape", rename_all = "snake_case")]
pub enum ElectrodeLayout {
    /// `count` electrodes in a straight row `pitch_um` apart, at `angle_deg` to the x axis.
    Row {
        count: usize,
        pitch_um: f64,
        #[serde(default)]
        angle_deg: f64,
    },
    /// `count` electrodes evenly on a circle of `radius_um` around the origin.
    Circle { count: usize, radius_um: f64 },
    /// A `rows` x `columns` grid, `pitch_um` apart.
    Grid {
        rows: usize,
        columns: usize,
        pitch_um: f64,
    },
}

/// Which fronts a scenario draws.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum FrontPattern {
    /// Rows: from one end or the other; circles: one way round from a random angle; grids:
    /// plane waves in random directions.
    #[default]
    OneWay,
    /// Rows: both ways from a random interior point; circles: both ways round, meeting
    /// opposite the origin; grids: point sources inside the grid.
    TwoWay,
    /// Each burst one-way or two-way with equal probability.
    Mixed,
}

/// Everything that defines a kinematic recording. Times in seconds, speeds in mm/s.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FrontScenario {
    /// Short name, used for the output folder.
    pub name: String,
    /// Seed of the ChaCha8 generator.
    pub seed: u64,
    /// Length of the recording, seconds.
    pub duration_s: f64,
    pub electrodes: ElectrodeLayout,
    /// Which fronts to draw.
    #[serde(default)]
    pub pattern: FrontPattern,
    /// Standard deviation of electrode positions around the nominal layout, micrometres.
    #[serde(default)]
    pub position_jitter_um: f64,
    /// Shortest interval between burst starts, seconds.
    pub min_interval_s: f64,
    /// Mean of the exponential part of the interval added to the shortest one, seconds.
    pub extra_interval_s: f64,
    /// Median front speed, mm/s.
    pub speed_mm_s: f64,
    /// Burst-to-burst coefficient of variation of the speed (log-normal).
    #[serde(default)]
    pub speed_cv: f64,
    /// Standard deviation of each electrode's activation time around the front, seconds.
    pub activation_jitter_s: f64,
    /// Mean number of spikes an electrode fires when the front passes (at least one).
    pub spikes_per_burst: f64,
    /// Mean delay of the later spikes of a burst after the first, seconds.
    pub burst_spread_s: f64,
    /// Background spikes per second per electrode, outside and inside bursts.
    pub background_rate_hz: f64,
    /// Electrodes (counted from 0) that record nothing.
    #[serde(default)]
    pub dead_electrodes: Vec<usize>,
    /// Probability that a burst's front stops partway (a propagation failure).
    #[serde(default)]
    pub failure_probability: f64,
    /// Spike times are rounded to this sampling rate, Hz.
    pub sampling_rate_hz: f64,
}

/// The known answer for one burst.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TruthBurst {
    /// Time the front leaves its origin, seconds.
    pub start_s: f64,
    pub speed_mm_s: f64,
    /// Where it starts, micrometres.
    pub origin_um: [f64; 2],
    /// Electrode nearest the origin.
    pub origin_site: String,
    /// Unit vector of travel for rows and grids; `None` on a circle.
    pub direction_xy: Option<[f64; 2]>,
    /// `ccw` or `cw` on a circle, in the layout's axes; `None` otherwise.
    pub rotation: Option<crate::fronts::RingTravel>,
    /// Distance from the origin at which the front stops, micrometres; `None` when it
    /// crosses the whole layout.
    pub stops_after_um: Option<f64>,
    /// Activation time of each electrode (layout order); `None` where the front did not
    /// arrive or the electrode is dead.
    pub activation_s: Vec<Option<f64>>,
}

/// Ground truth of a simulated recording.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FrontTruth {
    pub model: String,
    pub scenario: FrontScenario,
    pub bursts: Vec<TruthBurst>,
}

/// A simulated recording in the import formats' terms, with its truth.
#[derive(Debug, Clone, PartialEq)]
pub struct SimulatedFronts {
    pub sites: Vec<Site>,
    pub spikes: Vec<SiteSpikes>,
    pub truth: FrontTruth,
}

/// Checks a scenario; the message names the field.
pub fn check_scenario(s: &FrontScenario) -> Result<(), String> {
    crate::simulate::require_positive(&[
        ("duration_s", s.duration_s),
        ("speed_mm_s", s.speed_mm_s),
        ("sampling_rate_hz", s.sampling_rate_hz),
        ("min_interval_s", s.min_interval_s),
    ])?;
    crate::simulate::require_non_negative(&[
        ("position_jitter_um", s.position_jitter_um),
        ("extra_interval_s", s.extra_interval_s),
        ("speed_cv", s.speed_cv),
        ("activation_jitter_s", s.activation_jitter_s),
        ("spikes_per_burst", s.spikes_per_burst),
        ("burst_spread_s", s.burst_spread_s),
        ("background_rate_hz", s.background_rate_hz),
    ])?;
    // Upper ends that keep every drawn time finite (a limit we chose, no source).
    for (name, v, most) in [
        ("speed_mm_s", s.speed_mm_s, 1e6),
        ("speed_cv", s.speed_cv, 10.0),
        ("activation_jitter_s", s.activation_jitter_s, 1e3),
        ("burst_spread_s", s.burst_spread_s, 1e3),
        ("extra_interval_s", s.extra_interval_s, 1e6),
    ] {
        if v > most {
            return Err(format!(
                "{name}: expected at most {most}, found {}",
                crate::place::number(v)
            ));
        }
    }
    if !(0.0..=1.0).contains(&s.failure_probability) {
        return Err(format!(
            "failure_probability: expected 0 to 1, found {}",
            crate::place::number(s.failure_probability)
        ));
    }
    s.electrodes.check("electrodes")?;
    check_sampling_rate("sampling_rate_hz", s.sampling_rate_hz)?;
    let count = electrode_count(&s.electrodes);
    if count < 2 {
        return Err(format!(
            "electrodes.{}: expected 2 to {MAX_SIMULATED_ELECTRODES} electrodes, found {count}",
            s.electrodes.count_fields()
        ));
    }
    if s.position_jitter_um > MAX_SIMULATED_EXTENT_UM {
        return Err(format!(
            "position_jitter_um: expected at most {MAX_SIMULATED_EXTENT_UM:.0} µm, found {}",
            crate::place::number(s.position_jitter_um)
        ));
    }
    let bursts = s.duration_s / s.min_interval_s;
    if bursts > MAX_SIMULATED_BURSTS {
        return Err(format!(
            "the scenario would draw up to {bursts:.3e} bursts (duration_s / min_interval_s), more than the limit of {MAX_SIMULATED_BURSTS:.0}"
        ));
    }
    if let Some(&bad) = s.dead_electrodes.iter().find(|&&i| i >= count) {
        return Err(format!(
            "dead_electrodes: electrode {bad} does not exist (there are {count}, counted from 0)"
        ));
    }
    let expected_spikes = s.duration_s
        * count as f64
        * (s.background_rate_hz + s.spikes_per_burst / s.min_interval_s);
    if expected_spikes > 5e7 {
        return Err(format!(
            "duration_s x electrodes x (background_rate_hz + spikes_per_burst / min_interval_s): the scenario would make about {expected_spikes:.2e} spikes, more than the 50 million allowed"
        ));
    }
    Ok(())
}

/// Most electrodes a simulated layout may have (the largest arrays hold a few thousand; a
/// limit we chose, common practice, no source).
pub const MAX_SIMULATED_ELECTRODES: usize = 100_000;

/// Furthest a simulated position may lie from the origin, micrometres (1 m: far beyond any
/// dish; it keeps every distance finite and printable).
pub const MAX_SIMULATED_EXTENT_UM: f64 = 1e6;

/// Slowest and fastest spike sampling rates a simulation takes, Hz: below 100 Hz spike times
/// would be rounded by more than a burst's spread (common practice, no source); up to 10 GHz
/// (a 0.1 ns quantum, for checks that want times almost unrounded), beyond which a day's
/// times no longer round exactly in double precision.
pub const SIMULATED_SAMPLING_RANGE_HZ: (f64, f64) = (100.0, 1e10);

impl ElectrodeLayout {
    /// The layout's fields that give its number of electrodes, for messages.
    pub fn count_fields(&self) -> &'static str {
        match self {
            ElectrodeLayout::Grid { .. } => "rows x columns",
            _ => "count",
        }
    }

    /// How many electrodes the layout holds (saturating).
    pub fn count(&self) -> usize {
        electrode_count(self)
    }

    /// Checks the layout's numbers; `field` names it in the message (`electrodes`,
    /// `electrodes.layout`).
    pub fn check(&self, field: &str) -> Result<(), String> {
        let count = electrode_count(self);
        if !(1..=MAX_SIMULATED_ELECTRODES).contains(&count) {
            return Err(format!(
                "{field}.{}: expected 1 to {MAX_SIMULATED_ELECTRODES} electrodes, found {count}",
                self.count_fields()
            ));
        }
        let (name, length, reach) = match *self {
            ElectrodeLayout::Row {
                count, pitch_um, ..
            } => ("pitch_um", pitch_um, pitch_um * count as f64),
            ElectrodeLayout::Circle { radius_um, .. } => ("radius_um", radius_um, radius_um),
            ElectrodeLayout::Grid {
                rows,
                columns,
                pitch_um,
            } => (
                "pitch_um",
                pitch_um,
                pitch_um * rows.max(columns) as f64 * std::f64::consts::SQRT_2,
            ),
        };
        if !(length.is_finite() && length > 0.0) {
            return Err(format!(
                "{field}.{name}: expected a length above 0 µm, found {length}"
            ));
        }
        if reach > MAX_SIMULATED_EXTENT_UM {
            return Err(format!(
                "{field}.{name}: at {} µm the electrodes would reach {reach:.3e} µm from the first, more than the limit of {MAX_SIMULATED_EXTENT_UM:.0} µm (1 m)",
                crate::place::number(length)
            ));
        }
        if let ElectrodeLayout::Row { angle_deg, .. } = self {
            if !angle_deg.is_finite() {
                return Err(format!(
                    "{field}.angle_deg: expected a finite angle, found {angle_deg}"
                ));
            }
        }
        Ok(())
    }
}

/// Checks a spike sampling rate against [`SIMULATED_SAMPLING_RANGE_HZ`].
pub fn check_sampling_rate(field: &str, rate_hz: f64) -> Result<(), String> {
    let (lo, hi) = SIMULATED_SAMPLING_RANGE_HZ;
    if !(rate_hz >= lo && rate_hz <= hi) {
        return Err(format!(
            "{field}: expected a sampling rate of {lo:.0} Hz to {hi:.0} Hz, found {} Hz",
            crate::place::number(rate_hz)
        ));
    }
    Ok(())
}

/// Most bursts a kinematic scenario may draw (duration over the shortest interval).
pub const MAX_SIMULATED_BURSTS: f64 = 1e7;

fn electrode_count(layout: &ElectrodeLayout) -> usize {
    match layout {
        ElectrodeLayout::Row { count, .. } | ElectrodeLayout::Circle { count, .. } => *count,
        ElectrodeLayout::Grid { rows, columns, .. } => rows.saturating_mul(*columns),
    }
}

/// Draws a recording from `scenario`. The same scenario gives the same recording, bit for
/// bit, on every platform.
pub fn simulate_fronts(scenario: &FrontScenario) -> Result<SimulatedFronts, String> {
    check_scenario(scenario)?;
    let mut rng = ChaCha8Rng::seed_from_u64(scenario.seed);
    let nominal = nominal_positions(&scenario.electrodes);
    let sites: Vec<Site> = nominal
        .iter()
        .enumerate()
        .map(|(i, p)| Site {
            id: format!("e{:02}", i + 1),
            // Rounded to 0.1 um, as a layout file would give them.
            x_um: round_to_tenth(p[0] + scenario.position_jitter_um * normal(&mut rng)),
            y_um: round_to_tenth(p[1] + scenario.position_jitter_um * normal(&mut rng)),
        })
        .collect();
    // Fronts reach each electrode where it really is (after jitter and rounding).
    let positions: Vec<[f64; 2]> = sites.iter().map(Site::position_um).collect();
    let n = sites.len();
    let mut trains: Vec<Vec<f64>> = vec![Vec::new(); n];
    let mut bursts = Vec::new();
    let mut t0 = scenario.min_interval_s * uniform(&mut rng);
    while t0 < scenario.duration_s {
        let speed = scenario.speed_mm_s * lognormal_factor(&mut rng, scenario.speed_cv);
        let speed_um_s = speed * 1e3;
        let two_way = match scenario.pattern {
            FrontPattern::OneWay => false,
            FrontPattern::TwoWay => true,
            FrontPattern::Mixed => uniform(&mut rng) < 0.5,
        };
        let front = if two_way {
            draw_two_way_front(&scenario.electrodes, &positions, &mut rng)
        } else {
            draw_front(&scenario.electrodes, &positions, &mut rng)
        };
        let max_distance = front.distances.iter().copied().fold(0.0, f64::max);
        let stops_after_um = (uniform(&mut rng) < scenario.failure_probability)
            .then(|| max_distance * (0.3 + 0.4 * uniform(&mut rng)));
        let mut activation_s = vec![None; n];
        for (i, &d) in front.distances.iter().enumerate() {
            if scenario.dead_electrodes.contains(&i) || stops_after_um.is_some_and(|stop| d > stop)
            {
                continue;
            }
            let t = t0 + d / speed_um_s + scenario.activation_jitter_s * normal(&mut rng);
            if t < 0.0 || t >= scenario.duration_s {
                continue;
            }
            activation_s[i] = Some(t);
            trains[i].push(t);
            let extra = poisson(&mut rng, (scenario.spikes_per_burst - 1.0).max(0.0));
            for _ in 0..extra {
                let later = t + exponential(&mut rng, scenario.burst_spread_s);
                if later < scenario.duration_s {
                    trains[i].push(later);
                }
            }
        }
        let origin_site = sites
            .iter()
            .min_by(|a, b| {
                let da = libm::hypot(a.x_um - front.origin_um[0], a.y_um - front.origin_um[1]);
                let db = libm::hypot(b.x_um - front.origin_um[0], b.y_um - front.origin_um[1]);
                da.total_cmp(&db)
            })
            .map(|s| s.id.clone())
            .unwrap_or_default();
        bursts.push(TruthBurst {
            start_s: t0,
            speed_mm_s: speed,
            origin_um: front.origin_um,
            origin_site,
            direction_xy: front.direction_xy,
            rotation: front.rotation,
            stops_after_um,
            activation_s,
        });
        t0 += scenario.min_interval_s + exponential(&mut rng, scenario.extra_interval_s);
    }
    if scenario.background_rate_hz > 0.0 {
        for (i, train) in trains.iter_mut().enumerate() {
            if scenario.dead_electrodes.contains(&i) {
                continue;
            }
            let mut t = exponential(&mut rng, 1.0 / scenario.background_rate_hz);
            while t < scenario.duration_s {
                train.push(t);
                t += exponential(&mut rng, 1.0 / scenario.background_rate_hz);
            }
        }
    }
    let fs = scenario.sampling_rate_hz;
    let spikes = sites
        .iter()
        .zip(trains)
        .map(|(site, mut times)| {
            for t in &mut times {
                *t = (*t * fs).round() / fs;
            }
            times.sort_by(f64::total_cmp);
            times.dedup();
            SiteSpikes {
                site: site.id.clone(),
                times_s: times,
            }
        })
        .collect();
    Ok(SimulatedFronts {
        sites,
        spikes,
        truth: FrontTruth {
            model: "fronts".into(),
            scenario: scenario.clone(),
            bursts,
        },
    })
}

fn round_to_tenth(v: f64) -> f64 {
    (v * 10.0).round() / 10.0 + 0.0
}

/// A log-normal factor with median 1 and the given coefficient of variation.
fn lognormal_factor(rng: &mut ChaCha8Rng, cv: f64) -> f64 {
    if cv == 0.0 {
        return 1.0;
    }
    let sigma = libm::sqrt(libm::log(1.0 + cv * cv));
    libm::exp(sigma * normal(rng))
}

/// Nominal electrode positions of a layout, micrometres (rows and grids start at the origin,
/// circles are centred on it).
pub fn nominal_positions(layout: &ElectrodeLayout) -> Vec<[f64; 2]> {
    match *layout {
        ElectrodeLayout::Row {
            count,
            pitch_um,
            angle_deg,
        } => {
            let a = angle_deg.to_radians();
            (0..count)
                .map(|i| {
                    let s = i as f64 * pitch_um;
                    [s * libm::cos(a), s * libm::sin(a)]
                })
                .collect()
        }
        ElectrodeLayout::Circle { count, radius_um } => (0..count)
            .map(|i| {
                let a = TAU * i as f64 / count as f64;
                [radius_um * libm::cos(a), radius_um * libm::sin(a)]
            })
            .collect(),
        ElectrodeLayout::Grid {
            rows,
            columns,
            pitch_um,
        } => (0..rows)
            .flat_map(|r| (0..columns).map(move |c| [c as f64 * pitch_um, r as f64 * pitch_um]))
            .collect(),
    }
}

struct Front {
    origin_um: [f64; 2],
    direction_xy: Option<[f64; 2]>,
    rotation: Option<crate::fronts::RingTravel>,
    /// Path length from the origin to each electrode, micrometres.
    distances: Vec<f64>,
}

/// Rows: from one end or the other. Circles: from a random angle, one way round.
/// Grids: a plane wave in a random direction, entering at the first electrode it meets.
fn draw_front(layout: &ElectrodeLayout, positions: &[[f64; 2]], rng: &mut ChaCha8Rng) -> Front {
    match layout {
        ElectrodeLayout::Row { .. } | ElectrodeLayout::Grid { .. } => {
            let direction = match layout {
                ElectrodeLayout::Row { angle_deg, .. } => {
                    let a = angle_deg.to_radians();
                    let sign = if uniform(rng) < 0.5 { 1.0 } else { -1.0 };
                    [sign * libm::cos(a), sign * libm::sin(a)]
                }
                _ => {
                    let a = TAU * uniform(rng);
                    [libm::cos(a), libm::sin(a)]
                }
            };
            let along: Vec<f64> = positions
                .iter()
                .map(|p| p[0] * direction[0] + p[1] * direction[1])
                .collect();
            let first = along.iter().copied().fold(f64::INFINITY, f64::min);
            let entry = along
                .iter()
                .position(|&a| a == first)
                .map_or([0.0, 0.0], |i| positions[i]);
            Front {
                origin_um: entry,
                direction_xy: Some(direction),
                rotation: None,
                distances: along.iter().map(|a| a - first).collect(),
            }
        }
        ElectrodeLayout::Circle { radius_um, .. } => {
            let origin_angle = TAU * uniform(rng);
            let ccw = uniform(rng) < 0.5;
            let distances = positions
                .iter()
                .map(|p| {
                    let a = libm::atan2(p[1], p[0]);
                    let turn = if ccw {
                        a - origin_angle
                    } else {
                        origin_angle - a
                    };
                    radius_um * turn.rem_euclid(TAU)
                })
                .collect();
            Front {
                origin_um: [
                    radius_um * libm::cos(origin_angle),
                    radius_um * libm::sin(origin_angle),
                ],
                direction_xy: None,
                rotation: Some(if ccw {
                    crate::fronts::RingTravel::Ccw
                } else {
                    crate::fronts::RingTravel::Cw
                }),
                distances,
            }
        }
    }
}

/// Rows: from a random point in the middle 60% of the row, both ways. Circles: from a random
/// angle both ways round. Grids: from a random point in the middle 60% of the grid.
fn draw_two_way_front(
    layout: &ElectrodeLayout,
    positions: &[[f64; 2]],
    rng: &mut ChaCha8Rng,
) -> Front {
    match layout {
        ElectrodeLayout::Row {
            count,
            pitch_um,
            angle_deg,
        } => {
            let a = angle_deg.to_radians();
            let d = [libm::cos(a), libm::sin(a)];
            let length = (*count as f64 - 1.0) * pitch_um;
            let s0 = length * (0.2 + 0.6 * uniform(rng));
            Front {
                origin_um: [s0 * d[0], s0 * d[1]],
                direction_xy: None,
                rotation: None,
                distances: positions
                    .iter()
                    .map(|p| (p[0] * d[0] + p[1] * d[1] - s0).abs())
                    .collect(),
            }
        }
        ElectrodeLayout::Circle { radius_um, .. } => {
            let origin_angle = TAU * uniform(rng);
            let distances = positions
                .iter()
                .map(|p| {
                    let turn = (libm::atan2(p[1], p[0]) - origin_angle).rem_euclid(TAU);
                    radius_um * turn.min(TAU - turn)
                })
                .collect();
            Front {
                origin_um: [
                    radius_um * libm::cos(origin_angle),
                    radius_um * libm::sin(origin_angle),
                ],
                direction_xy: None,
                rotation: Some(crate::fronts::RingTravel::Both),
                distances,
            }
        }
        ElectrodeLayout::Grid {
            rows,
            columns,
            pitch_um,
        } => {
            let w = (*columns as f64 - 1.0) * pitch_um;
            let h = (*rows as f64 - 1.0) * pitch_um;
            let o = [
                w * (0.2 + 0.6 * uniform(rng)),
                h * (0.2 + 0.6 * uniform(rng)),
            ];
            Front {
                origin_um: o,
                direction_xy: None,
                rotation: None,
                distances: positions
                    .iter()
                    .map(|p| libm::hypot(p[0] - o[0], p[1] - o[1]))
                    .collect(),
            }
        }
    }
}
