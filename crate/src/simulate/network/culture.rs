//! The culture: neurons placed in a pattern, connected by a distance-dependent rule, stored
//! as compressed sparse rows (CSR) of outgoing synapses.

use super::super::sample::uniform;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};
use std::f64::consts::{PI, TAU};

/// Where neurons may grow, micrometres, centred on the origin.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "shape", rename_all = "snake_case")]
pub enum Pattern {
    /// A straight strip along x from 0 to `length_um`, `width_um` wide (centred on y = 0).
    Strip { length_um: f64, width_um: f64 },
    /// A ring annulus around the origin: mean radius `radius_um`, `width_um` wide.
    Annulus { radius_um: f64, width_um: f64 },
    /// A strip of `width_um` along a polyline through `waypoints_um`.
    PolylineStrip {
        waypoints_um: Vec<[f64; 2]>,
        width_um: f64,
    },
    /// A rectangular dish from (0, 0) to (`width_um`, `height_um`).
    Rectangle { width_um: f64, height_um: f64 },
    /// A round dish of `radius_um` around the origin.
    Disk { radius_um: f64 },
    /// A 1-D lattice along x, `spacing_um` apart (for the theory checks; density is ignored).
    Chain { length_um: f64, spacing_um: f64 },
}

impl Pattern {
    /// The scenario fields that set the pattern's size, for messages (`pattern.length_um x
    /// pattern.width_um`).
    pub fn size_fields(&self) -> &'static str {
        match self {
            Pattern::Strip { .. } => "pattern.length_um x pattern.width_um",
            Pattern::Annulus { .. } => "pattern.radius_um x pattern.width_um",
            Pattern::PolylineStrip { .. } => "pattern.waypoints_um x pattern.width_um",
            Pattern::Rectangle { .. } => "pattern.width_um x pattern.height_um",
            Pattern::Disk { .. } => "pattern.radius_um",
            Pattern::Chain { .. } => "pattern.length_um / pattern.spacing_um",
        }
    }

    /// Area in mm^2 (length in mm for a chain).
    pub fn area_mm2(&self) -> f64 {
        let um2 = match self {
            Pattern::Strip {
                length_um,
                width_um,
            } => length_um * width_um,
            Pattern::Annulus {
                radius_um,
                width_um,
            } => TAU * radius_um * width_um,
            Pattern::PolylineStrip {
                waypoints_um,
                width_um,
            } => crate::geometry::polyline_length_um(waypoints_um) * width_um,
            Pattern::Rectangle {
                width_um,
                height_um,
            } => width_um * height_um,
            Pattern::Disk { radius_um } => PI * radius_um * radius_um,
            Pattern::Chain { length_um, .. } => *length_um * 1e3,
        };
        um2 / 1e6
    }

    /// Checks the pattern's lengths: finite, above 0 (a chain's length 0 or more) and no
    /// point further than [`crate::simulate::fronts::MAX_SIMULATED_EXTENT_UM`] from the
    /// origin. The message names the field.
    pub fn check(&self) -> Result<(), String> {
        use crate::simulate::fronts::MAX_SIMULATED_EXTENT_UM as MOST;
        let positive = |name: &str, v: f64| -> Result<(), String> {
            if !(v.is_finite() && v > 0.0) {
                return Err(format!(
                    "pattern.{name}: expected a length above 0 µm, found {}",
                    crate::place::number(v)
                ));
            }
            if v > MOST {
                return Err(format!(
                    "pattern.{name}: expected at most {MOST:.0} µm (1 m), found {}",
                    crate::place::number(v)
                ));
            }
            Ok(())
        };
        match self {
            Pattern::Strip {
                length_um,
                width_um,
            } => {
                positive("length_um", *length_um)?;
                positive("width_um", *width_um)
            }
            Pattern::Annulus {
                radius_um,
                width_um,
            } => {
                positive("radius_um", *radius_um)?;
                positive("width_um", *width_um)?;
                if width_um > &(2.0 * radius_um) {
                    return Err(format!(
                        "pattern.width_um: a ring {width_um} µm wide cannot have a mid-radius of {radius_um} µm (at most twice the radius)"
                    ));
                }
                Ok(())
            }
            Pattern::PolylineStrip {
                waypoints_um,
                width_um,
            } => {
                positive("width_um", *width_um)?;
                if waypoints_um.len() < 2 || waypoints_um.len() > 10_000 {
                    return Err(format!(
                        "pattern.waypoints_um: expected 2 to 10000 waypoints, found {}",
                        waypoints_um.len()
                    ));
                }
                if let Some((i, w)) = waypoints_um
                    .iter()
                    .enumerate()
                    .find(|(_, w)| !w.iter().all(|v| v.is_finite() && v.abs() <= MOST))
                {
                    return Err(format!(
                        "pattern.waypoints_um: waypoint {} ({}, {}) is not a position within {MOST:.0} µm of the origin",
                        i + 1,
                        w[0],
                        w[1]
                    ));
                }
                positive(
                    "waypoints_um (length)",
                    crate::geometry::polyline_length_um(waypoints_um),
                )
            }
            Pattern::Rectangle {
                width_um,
                height_um,
            } => {
                positive("width_um", *width_um)?;
                positive("height_um", *height_um)
            }
            Pattern::Disk { radius_um } => positive("radius_um", *radius_um),
            Pattern::Chain {
                length_um,
                spacing_um,
            } => {
                positive("spacing_um", *spacing_um)?;
                if !(length_um.is_finite() && *length_um >= 0.0 && *length_um <= MOST) {
                    return Err(format!(
                        "pattern.length_um: expected 0 to {MOST:.0} µm, found {}",
                        crate::place::number(*length_um)
                    ));
                }
                Ok(())
            }
        }
    }

    /// How many neurons the pattern holds at `density_per_mm2` (a chain: one per spacing,
    /// whatever the density). Checked patterns only.
    pub fn neuron_count(&self, density_per_mm2: f64) -> f64 {
        match self {
            Pattern::Chain {
                length_um,
                spacing_um,
            } => (length_um / spacing_um).floor() + 1.0,
            _ => density_per_mm2 * self.area_mm2(),
        }
    }

    /// About how many other neurons lie within `reach_um` of a neuron (the candidates the
    /// wiring visits), at `density_per_mm2`. Checked patterns only.
    pub fn neighbours_within(&self, density_per_mm2: f64, reach_um: f64) -> f64 {
        let n = self.neuron_count(density_per_mm2);
        let near = match self {
            Pattern::Chain { spacing_um, .. } => 2.0 * reach_um / spacing_um,
            _ => density_per_mm2 / 1e6 * std::f64::consts::PI * reach_um * reach_um,
        };
        near.min(n - 1.0).max(0.0)
    }

    /// The pattern's bounding box, µm: (lowest x and y, highest x and y).
    pub fn bounding_box_um(&self) -> ([f64; 2], [f64; 2]) {
        self.bounds()
    }

    fn bounds(&self) -> ([f64; 2], [f64; 2]) {
        match self {
            Pattern::Strip {
                length_um,
                width_um,
            } => ([0.0, -width_um / 2.0], [*length_um, width_um / 2.0]),
            Pattern::Annulus {
                radius_um,
                width_um,
            } => {
                let r = radius_um + width_um / 2.0;
                ([-r, -r], [r, r])
            }
            Pattern::PolylineStrip {
                waypoints_um,
                width_um,
            } => {
                let mut lo = [f64::INFINITY; 2];
                let mut hi = [f64::NEG_INFINITY; 2];
                for w in waypoints_um {
                    for k in 0..2 {
                        lo[k] = lo[k].min(w[k] - width_um / 2.0);
                        hi[k] = hi[k].max(w[k] + width_um / 2.0);
                    }
                }
                (lo, hi)
            }
            Pattern::Rectangle {
                width_um,
                height_um,
            } => ([0.0, 0.0], [*width_um, *height_um]),
            Pattern::Disk { radius_um } => ([-radius_um, -radius_um], [*radius_um, *radius_um]),
            Pattern::Chain { length_um, .. } => ([0.0, 0.0], [*length_um, 0.0]),
        }
    }

    fn contains(&self, p: [f64; 2]) -> bool {
        match self {
            Pattern::Strip {
                length_um,
                width_um,
            } => (0.0..=*length_um).contains(&p[0]) && p[1].abs() <= width_um / 2.0,
            Pattern::Annulus {
                radius_um,
                width_um,
            } => (libm::hypot(p[0], p[1]) - radius_um).abs() <= width_um / 2.0,
            Pattern::PolylineStrip {
                waypoints_um,
                width_um,
            } => waypoints_um.windows(2).any(|w| {
                let (a, b) = (w[0], w[1]);
                let l2 = (b[0] - a[0]).powi(2) + (b[1] - a[1]).powi(2);
                let t = if l2 > 0.0 {
                    (((p[0] - a[0]) * (b[0] - a[0]) + (p[1] - a[1]) * (b[1] - a[1])) / l2)
                        .clamp(0.0, 1.0)
                } else {
                    0.0
                };
                let q = [a[0] + t * (b[0] - a[0]), a[1] + t * (b[1] - a[1])];
                libm::hypot(p[0] - q[0], p[1] - q[1]) <= width_um / 2.0
            }),
            Pattern::Rectangle {
                width_um,
                height_um,
            } => (0.0..=*width_um).contains(&p[0]) && (0.0..=*height_um).contains(&p[1]),
            Pattern::Disk { radius_um } => libm::hypot(p[0], p[1]) <= *radius_um,
            Pattern::Chain { .. } => true,
        }
    }

    /// The track along which fronts in this pattern are measured.
    pub fn track(&self) -> crate::geometry::Track {
        use crate::geometry::{Rotation, Track};
        match self {
            Pattern::Strip { length_um, .. } | Pattern::Chain { length_um, .. } => Track::Line {
                start_um: [0.0, 0.0],
                direction: [1.0, 0.0],
                length_um: *length_um,
            },
            Pattern::Annulus { radius_um, .. } => Track::Ring {
                centre_um: [0.0, 0.0],
                radius_um: *radius_um,
                start_angle_rad: 0.0,
                rotation: Rotation::Ccw,
            },
            Pattern::PolylineStrip { waypoints_um, .. } => Track::Polyline {
                waypoints_um: waypoints_um.clone(),
                length_um: crate::geometry::polyline_length_um(waypoints_um),
            },
            Pattern::Rectangle { .. } | Pattern::Disk { .. } => Track::Plane,
        }
    }
}

/// Places `count` neurons uniformly in the pattern (rejection sampling in its bounding box);
/// a chain gets a regular lattice instead.
pub fn place_neurons(pattern: &Pattern, count: usize, rng: &mut ChaCha8Rng) -> Vec<[f64; 2]> {
    if let Pattern::Chain {
        length_um,
        spacing_um,
    } = pattern
    {
        let n = (length_um / spacing_um).floor() as usize + 1;
        return (0..n).map(|i| [i as f64 * spacing_um, 0.0]).collect();
    }
    let (lo, hi) = pattern.bounds();
    let mut out = Vec::with_capacity(count);
    let mut attempts = 0usize;
    while out.len() < count && attempts < count.saturating_mul(1000).max(1000) {
        attempts += 1;
        let p = [
            lo[0] + (hi[0] - lo[0]) * uniform(rng),
            lo[1] + (hi[1] - lo[1]) * uniform(rng),
        ];
        if pattern.contains(p) {
            out.push(p);
        }
    }
    out
}

/// Orders neurons along a Z-order (Morton) curve over `cell_um` cells, so that neurons close
/// in space are close in memory: a spike's targets then sit together, which keeps the
/// integrator's state accesses in cache.
pub fn sort_spatially(positions: &mut [[f64; 2]], cell_um: f64) {
    let (mut lo_x, mut lo_y) = (f64::INFINITY, f64::INFINITY);
    for p in positions.iter() {
        lo_x = lo_x.min(p[0]);
        lo_y = lo_y.min(p[1]);
    }
    let spread = |v: u32| -> u64 {
        let mut x = u64::from(v) & 0xffff_ffff;
        x = (x | (x << 16)) & 0x0000_ffff_0000_ffff;
        x = (x | (x << 8)) & 0x00ff_00ff_00ff_00ff;
        x = (x | (x << 4)) & 0x0f0f_0f0f_0f0f_0f0f;
        x = (x | (x << 2)) & 0x3333_3333_3333_3333;
        (x | (x << 1)) & 0x5555_5555_5555_5555
    };
    let key = |p: &[f64; 2]| {
        let cx = ((p[0] - lo_x) / cell_um) as u32;
        let cy = ((p[1] - lo_y) / cell_um) as u32;
        spread(cx) | (spread(cy) << 1)
    };
    positions.sort_by(|a, b| {
        key(a)
            .cmp(&key(b))
            .then(a[0].total_cmp(&b[0]))
            .then(a[1].total_cmp(&b[1]))
    });
}

/// Shape of the connection probability (or weight) against distance.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Footprint {
    /// exp(-d^2 / (2 sigma^2)), cut at 4 sigma.
    Gaussian,
    /// exp(-d / sigma), cut at 10 sigma.
    Exponential,
    /// 1 closer than sigma, 0 beyond, and 1/2 at exactly sigma (the mean of the two sides,
    /// so a lattice sum approximates the step's integral without an endpoint bias).
    Step,
    /// The same for every pair, whatever the distance (the non-spatial limit).
    Uniform,
}

impl Footprint {
    /// Unnormalised footprint at distance d for length sigma.
    pub fn value(self, d: f64, sigma: f64) -> f64 {
        match self {
            Footprint::Gaussian => libm::exp(-0.5 * (d / sigma) * (d / sigma)),
            Footprint::Exponential => libm::exp(-d / sigma),
            Footprint::Step => {
                if d < sigma {
                    1.0
                } else if d == sigma {
                    0.5
                } else {
                    0.0
                }
            }
            Footprint::Uniform => 1.0,
        }
    }

    /// Distance beyond which the footprint is taken as zero.
    pub fn cutoff(self, sigma: f64) -> f64 {
        match self {
            Footprint::Gaussian => 4.0 * sigma,
            Footprint::Exponential => 10.0 * sigma,
            Footprint::Step => sigma,
            Footprint::Uniform => f64::INFINITY,
        }
    }
}

/// The footprint tabulated against squared distance (4097 points over [0, cutoff^2], linear
/// interpolation), so wiring needs neither a square root nor an exponential per pair. The
/// table is built with `libm`, so it is the same on every platform; its relative error is
/// under 1e-6 of the footprint's peak.
struct FootprintTable {
    step: f64,
    values: Vec<f64>,
    cutoff_sq: f64,
}

impl FootprintTable {
    fn new(footprint: Footprint, sigma: f64, cutoff: f64) -> Self {
        const POINTS: usize = 4096;
        let cutoff_sq = cutoff * cutoff;
        let step = cutoff_sq / POINTS as f64;
        let values = (0..=POINTS)
            .map(|k| footprint.value(libm::sqrt(k as f64 * step), sigma))
            .collect();
        FootprintTable {
            step,
            values,
            cutoff_sq,
        }
    }

    /// The largest value, at distance 0.
    fn peak(&self) -> f64 {
        self.values.iter().copied().fold(0.0, f64::max)
    }

    /// Footprint at squared distance `d2` (0 beyond the cut-off).
    fn at(&self, footprint: Footprint, sigma: f64, d2: f64) -> f64 {
        if d2 > self.cutoff_sq {
            return 0.0;
        }
        if footprint == Footprint::Step {
            // A step has no slope to interpolate: evaluate it exactly.
            return footprint.value(libm::sqrt(d2), sigma);
        }
        let x = d2 / self.step;
        let k = (x as usize).min(self.values.len() - 2);
        let f = x - k as f64;
        self.values[k] + f * (self.values[k + 1] - self.values[k])
    }
}

/// One synapse as the integrator reads it: target and delay side by side, so a delivery
/// touches one cache line where three arrays would touch three.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Link {
    pub target: u32,
    /// Delay, seconds.
    pub delay_s: f32,
}

/// Outgoing synapses of every neuron, CSR: neuron i's synapses are `offsets[i]..offsets[i+1]`,
/// each row in order of delay.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Synapses {
    pub offsets: Vec<u32>,
    pub links: Vec<Link>,
    /// Weight scale of each synapse for weighted wiring (the footprint value); `None` when
    /// every synapse has weight 1 (probabilistic wiring).
    pub weights: Option<Vec<f32>>,
}

impl Synapses {
    /// No synapses among `neurons` neurons.
    pub fn none(neurons: usize) -> Self {
        Synapses {
            offsets: vec![0; neurons + 1],
            links: Vec::new(),
            weights: None,
        }
    }

    pub fn count(&self) -> usize {
        self.links.len()
    }

    /// In-degree of every neuron.
    pub fn in_degrees(&self, neurons: usize) -> Vec<u32> {
        let mut d = vec![0u32; neurons];
        for l in &self.links {
            d[l.target as usize] += 1;
        }
        d
    }

    /// Shortest and longest delay, seconds (infinity and 0 when there are no synapses).
    pub fn delay_range_s(&self) -> (f64, f64) {
        self.links
            .iter()
            .fold((f64::INFINITY, 0.0f64), |(lo, hi), l| {
                let d = f64::from(l.delay_s);
                (lo.min(d), hi.max(d))
            })
    }
}

/// How neurons are wired.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Connectivity {
    pub footprint: Footprint,
    /// Footprint length, micrometres.
    pub sigma_um: f64,
    /// Target mean number of inputs per neuron (probabilistic wiring).
    pub mean_in_degree: f64,
    /// Connect every pair within the cut-off, weighted by the footprint (normalised to
    /// integrate to 1 over both sides of a chain, times the lattice spacing), instead of by
    /// chance: the deterministic limit used by the front-speed theory.
    #[serde(default)]
    pub weighted: bool,
}

/// Distance histogram of candidate pairs and of made connections, for checking the wiring
/// against its footprint.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct WiringCheck {
    pub bin_um: f64,
    /// Expected connections per distance bin (sum of connection probabilities).
    pub expected: Vec<f64>,
    /// Connections made per distance bin.
    pub made: Vec<u64>,
    /// Probability scale c in p(d) = min(1, c f(d)).
    pub scale: f64,
}

/// Lower and upper corners of the smallest axis-aligned box holding `points`.
fn bounding_box(points: &[[f64; 2]]) -> ([f64; 2], [f64; 2]) {
    let mut lo = [f64::INFINITY; 2];
    let mut hi = [f64::NEG_INFINITY; 2];
    for p in points {
        for k in 0..2 {
            lo[k] = lo[k].min(p[k]);
            hi[k] = hi[k].max(p[k]);
        }
    }
    (lo, hi)
}

/// A uniform grid of cells for neighbour search.
pub(crate) struct CellGrid {
    origin: [f64; 2],
    cell: f64,
    nx: usize,
    ny: usize,
    /// Neuron indices sorted by cell; cell k holds start[k]..start[k+1].
    start: Vec<u32>,
    order: Vec<u32>,
}

impl CellGrid {
    /// A grid over `points` with square cells `cell` micrometres wide.
    pub(crate) fn new(points: &[[f64; 2]], cell: f64) -> Self {
        let (lo, hi) = bounding_box(points);
        // Cells are only a sieve (every search reaches as many cells as its radius needs), so
        // a grid that would have far more cells than points takes wider cells instead: a tiny
        // footprint over a wide dish must not ask for billions of empty cells.
        let most_cells = (points.len().saturating_mul(8)).max(1 << 22) as f64;
        let mut cell = cell;
        while !points.is_empty()
            && cell.is_finite()
            && (((hi[0] - lo[0]) / cell).floor() + 1.0) * (((hi[1] - lo[1]) / cell).floor() + 1.0)
                > most_cells
        {
            cell *= 2.0;
        }
        let nx = (((hi[0] - lo[0]) / cell).floor() as usize + 1).max(1);
        let ny = (((hi[1] - lo[1]) / cell).floor() as usize + 1).max(1);
        let key = |p: &[f64; 2]| {
            let cx = (((p[0] - lo[0]) / cell) as usize).min(nx - 1);
            let cy = (((p[1] - lo[1]) / cell) as usize).min(ny - 1);
            cy * nx + cx
        };
        let mut counts = vec![0u32; nx * ny + 1];
        for p in points {
            counts[key(p) + 1] += 1;
        }
        for k in 1..counts.len() {
            counts[k] += counts[k - 1];
        }
        let mut fill = counts.clone();
        let mut order = vec![0u32; points.len()];
        for (i, p) in points.iter().enumerate() {
            let k = key(p);
            order[fill[k] as usize] = i as u32;
            fill[k] += 1;
        }
        CellGrid {
            origin: lo,
            cell,
            nx,
            ny,
            start: counts,
            order,
        }
    }

    /// A grid whose cells hold about `per_cell` points each on average over the points'
    /// bounding box (cells at least 1 um wide).
    pub(crate) fn holding(points: &[[f64; 2]], per_cell: usize) -> Self {
        let (lo, hi) = bounding_box(points);
        let area = ((hi[0] - lo[0]) * (hi[1] - lo[1])).max(1.0);
        let cell = (area * per_cell as f64 / points.len().max(1) as f64)
            .sqrt()
            .max(1.0);
        CellGrid::new(points, cell)
    }

    /// Calls `f(i, j)` once for every unordered pair of distinct points in cells within
    /// `radius` of each other (a half stencil: each pair of cells is visited from one side).
    fn for_pairs(&self, radius: f64, mut f: impl FnMut(u32, u32)) {
        let reach = (radius / self.cell).ceil() as isize;
        let (nx, ny) = (self.nx as isize, self.ny as isize);
        let cell = |x: isize, y: isize| {
            let k = (y * nx + x) as usize;
            &self.order[self.start[k] as usize..self.start[k + 1] as usize]
        };
        for y in 0..ny {
            for x in 0..nx {
                let here = cell(x, y);
                for (a, &i) in here.iter().enumerate() {
                    for &j in &here[a + 1..] {
                        f(i, j);
                    }
                }
                // Cells after this one: the rest of this row, then the rows above.
                for dy in 0..=reach {
                    let lo = if dy == 0 { 1 } else { -reach };
                    for dx in lo..=reach {
                        let (ox, oy) = (x + dx, y + dy);
                        if ox < 0 || ox >= nx || oy >= ny {
                            continue;
                        }
                        let there = cell(ox, oy);
                        for &i in here {
                            for &j in there {
                                f(i, j);
                            }
                        }
                    }
                }
            }
        }
    }

    /// Calls `f(j)` for every point in cells within `radius` of `p`.
    fn for_near(&self, p: [f64; 2], radius: f64, mut f: impl FnMut(u32)) {
        let reach = (radius / self.cell).ceil() as isize;
        let cx = ((p[0] - self.origin[0]) / self.cell).floor() as isize;
        let cy = ((p[1] - self.origin[1]) / self.cell).floor() as isize;
        for y in (cy - reach).max(0)..=(cy + reach).min(self.ny as isize - 1) {
            for x in (cx - reach).max(0)..=(cx + reach).min(self.nx as isize - 1) {
                let k = y as usize * self.nx + x as usize;
                for &j in &self.order[self.start[k] as usize..self.start[k + 1] as usize] {
                    f(j);
                }
            }
        }
    }

    /// The `k` points nearest to `p` (the points the grid was built on), nearest first and
    /// ties by index: the squares of cells around `p` grow until `k` points lie within the
    /// radius they surely cover, so no nearer point can lie outside.
    pub(crate) fn nearest(&self, points: &[[f64; 2]], p: [f64; 2], k: usize) -> Vec<usize> {
        let k = k.min(points.len());
        let whole = self.cell * (self.nx.max(self.ny) as f64 + 1.0);
        let mut radius = self.cell;
        let mut found: Vec<(f64, usize)> = Vec::new();
        loop {
            // Past the whole grid every point is a candidate, whatever its distance.
            let everything = radius >= 2.0 * whole;
            found.clear();
            self.for_near(p, radius, |j| {
                let q = points[j as usize];
                let d2 = (q[0] - p[0]).powi(2) + (q[1] - p[1]).powi(2);
                if everything || d2 <= radius * radius {
                    found.push((d2, j as usize));
                }
            });
            if found.len() >= k || everything {
                break;
            }
            radius *= 2.0;
        }
        found.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
        found.iter().take(k).map(|&(_, j)| j).collect()
    }
}

/// Wires the culture. Probabilistic wiring connects i -> j with probability
/// p(d) = min(1, c f(d / sigma)), c chosen so the expected mean in-degree is `mean_in_degree`
/// (exactly, summing over the actual pairs, so edges of the pattern are accounted for).
/// Uniform footprints use geometric skipping over all pairs (O(synapses)). Delays are
/// `synaptic_delay_s + d / axon_speed_um_s`.
pub fn wire(
    positions: &[[f64; 2]],
    c: &Connectivity,
    synaptic_delay_s: f64,
    axon_speed_um_s: f64,
    rng: &mut ChaCha8Rng,
) -> Synapses {
    wire_with(positions, c, synaptic_delay_s, axon_speed_um_s, rng, false).0
}

/// [`wire`] (the same synapses from the same generator state) with the connections expected
/// and made per distance bin, for checking the footprint; the binning costs about an eighth
/// of the wiring time.
pub fn wire_checked(
    positions: &[[f64; 2]],
    c: &Connectivity,
    synaptic_delay_s: f64,
    axon_speed_um_s: f64,
    rng: &mut ChaCha8Rng,
) -> (Synapses, WiringCheck) {
    wire_with(positions, c, synaptic_delay_s, axon_speed_um_s, rng, true)
}

fn wire_with(
    positions: &[[f64; 2]],
    c: &Connectivity,
    synaptic_delay_s: f64,
    axon_speed_um_s: f64,
    rng: &mut ChaCha8Rng,
    keep_check: bool,
) -> (Synapses, WiringCheck) {
    let n = positions.len();
    let sigma = c.sigma_um;
    let delay = |d: f64| (synaptic_delay_s + d / axon_speed_um_s) as f32;
    let mut incoming: Vec<Vec<(u32, f32)>> = vec![Vec::new(); n]; // per target: (source, weight)
    let mut check = WiringCheck {
        bin_um: sigma / 4.0,
        expected: Vec::new(),
        made: Vec::new(),
        scale: 0.0,
    };
    if c.footprint == Footprint::Uniform {
        let p = (c.mean_in_degree / (n.max(2) - 1) as f64).min(1.0);
        check.scale = p;
        let total = (n * n) as u64;
        let ln_q = libm::log(1.0 - p);
        // With p = 0 nothing connects (and ln(1 - p) = 0 would make every gap zero).
        let mut k: u64 = if p > 0.0 { 0 } else { total };
        loop {
            // Gap to the next success of a Bernoulli(p) sequence: floor(ln U / ln(1 - p)).
            let skip = if p >= 1.0 {
                0
            } else {
                (libm::log(1.0 - uniform(rng)) / ln_q).floor() as u64
            };
            k = k.saturating_add(skip);
            if k >= total {
                break;
            }
            let (i, j) = ((k / n as u64) as usize, (k % n as u64) as usize);
            if i != j {
                incoming[j].push((i as u32, 1.0));
            }
            k += 1;
        }
    } else {
        let cutoff = c.footprint.cutoff(sigma);
        let table = FootprintTable::new(c.footprint, sigma, cutoff);
        // Cells half the cut-off wide: the 5 x 5 cells around a neuron cover less area than
        // 3 x 3 cells of the full cut-off.
        let grid = CellGrid::new(positions, (cutoff / 2.0).max(1e-9));
        let bins = (cutoff / check.bin_um).ceil() as usize + 1;
        check.expected = vec![0.0; bins];
        check.made = vec![0; bins];
        // Pass 1 (probabilistic wiring): the sum of footprint values over all pairs within
        // the cut-off, in total and per distance bin, each pair visited once.
        let mut sum_by_bin = vec![0.0; bins];
        let bin_um = check.bin_um;
        let bin = move |d2: f64| ((libm::sqrt(d2) / bin_um) as usize).min(bins - 1);
        let scale = if c.weighted {
            1.0
        } else {
            let mut total = 0.0;
            grid.for_pairs(cutoff, |i, j| {
                let (pi, pj) = (positions[i as usize], positions[j as usize]);
                let (dx, dy) = (pi[0] - pj[0], pi[1] - pj[1]);
                let d2 = dx * dx + dy * dy;
                if d2 <= table.cutoff_sq {
                    let f = table.at(c.footprint, sigma, d2);
                    total += 2.0 * f;
                    if keep_check {
                        sum_by_bin[bin(d2)] += 2.0 * f;
                    }
                }
            });
            if total > 0.0 {
                c.mean_in_degree * n as f64 / total
            } else {
                0.0
            }
        };
        check.scale = scale;
        // Without clipping (scale f <= 1 everywhere) the expected connections per bin follow
        // from pass 1; with it, each candidate adds its clipped probability below.
        let clipped = !c.weighted && scale * table.peak() > 1.0;
        if !c.weighted && !clipped {
            for (e, s) in check.expected.iter_mut().zip(&sum_by_bin) {
                *e = scale * s;
            }
        }
        for (j, &pj) in positions.iter().enumerate() {
            grid.for_near(pj, cutoff, |i| {
                if i as usize == j {
                    return;
                }
                let pi = positions[i as usize];
                let (dx, dy) = (pi[0] - pj[0], pi[1] - pj[1]);
                let d2 = dx * dx + dy * dy;
                if d2 > table.cutoff_sq {
                    return;
                }
                let f = table.at(c.footprint, sigma, d2);
                if c.weighted {
                    if f > 0.0 {
                        incoming[j].push((i, f as f32));
                        if keep_check {
                            let b = bin(d2);
                            check.made[b] += 1;
                            check.expected[b] += 1.0;
                        }
                    }
                } else {
                    let p = (scale * f).min(1.0);
                    if clipped && keep_check {
                        check.expected[bin(d2)] += p;
                    }
                    if uniform(rng) < p {
                        incoming[j].push((i, 1.0));
                        if keep_check {
                            check.made[bin(d2)] += 1;
                        }
                    }
                }
            });
        }
    }
    // Invert to outgoing CSR.
    let mut out_count = vec![0u32; n + 1];
    for list in &incoming {
        for &(i, _) in list {
            out_count[i as usize + 1] += 1;
        }
    }
    for k in 1..=n {
        out_count[k] += out_count[k - 1];
    }
    let total = out_count[n] as usize;
    let mut links = vec![
        Link {
            target: 0,
            delay_s: 0.0
        };
        total
    ];
    let mut weights = vec![0.0f32; total];
    let mut fill = out_count.clone();
    for (j, list) in incoming.iter().enumerate() {
        for &(i, w) in list {
            let slot = fill[i as usize] as usize;
            fill[i as usize] += 1;
            let (pi, pj) = (positions[i as usize], positions[j]);
            links[slot] = Link {
                target: j as u32,
                delay_s: delay(libm::hypot(pi[0] - pj[0], pi[1] - pj[1])),
            };
            weights[slot] = w;
        }
    }
    drop(incoming);
    // Each row in order of delay, so a spike's deliveries go out in delay groups.
    let mut row: Vec<(Link, f32)> = Vec::new();
    for i in 0..n {
        let (a, b) = (out_count[i] as usize, out_count[i + 1] as usize);
        row.clear();
        row.extend((a..b).map(|k| (links[k], weights[k])));
        row.sort_by(|x, y| {
            x.0.delay_s
                .total_cmp(&y.0.delay_s)
                .then(x.0.target.cmp(&y.0.target))
        });
        for (k, &(l, w)) in (a..b).zip(&row) {
            links[k] = l;
            weights[k] = w;
        }
    }
    let syn = Synapses {
        offsets: out_count,
        links,
        weights: c.weighted.then_some(weights),
    };
    (syn, check)
}

/// Graph statistics of the wiring, computed with petgraph.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GraphStats {
    pub neurons: usize,
    pub synapses: usize,
    pub mean_in_degree: f64,
    pub in_degree_histogram: Vec<u64>,
    pub out_degree_histogram: Vec<u64>,
    /// Connected components of the undirected graph.
    pub components: usize,
    /// Fraction of neurons in the largest undirected component.
    pub giant_component_fraction: f64,
}

/// Degrees and connected components (ignoring direction) of the wiring.
pub fn graph_stats(neurons: usize, syn: &Synapses) -> GraphStats {
    use petgraph::unionfind::UnionFind;
    let mut uf = UnionFind::<u32>::new(neurons);
    let out_deg: Vec<u32> = syn.offsets.windows(2).map(|w| w[1] - w[0]).collect();
    for (i, w) in syn.offsets.windows(2).enumerate() {
        for l in &syn.links[w[0] as usize..w[1] as usize] {
            uf.union(i as u32, l.target);
        }
    }
    let labels = uf.into_labeling();
    let mut sizes = std::collections::HashMap::new();
    for l in labels {
        *sizes.entry(l).or_insert(0usize) += 1;
    }
    let giant = sizes.values().copied().max().unwrap_or(0);
    let in_deg = syn.in_degrees(neurons);
    let histogram = |d: &[u32]| {
        let max = d.iter().copied().max().unwrap_or(0) as usize;
        let mut h = vec![0u64; max + 1];
        for &v in d {
            h[v as usize] += 1;
        }
        h
    };
    GraphStats {
        neurons,
        synapses: syn.count(),
        mean_in_degree: syn.count() as f64 / neurons.max(1) as f64,
        in_degree_histogram: histogram(&in_deg),
        out_degree_histogram: histogram(&out_deg),
        components: sizes.len(),
        giant_component_fraction: giant as f64 / neurons.max(1) as f64,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;

    /// The grid's k nearest points equal a brute-force sort of all distances (ties by index),
    /// for points inside and at the edge of a culture, with duplicated positions, a lone far
    /// point, and k above the number of points.
    #[test]
    fn nearest_points_match_a_full_sort() {
        let mut rng = ChaCha8Rng::seed_from_u64(11);
        let mut points: Vec<[f64; 2]> = (0..3_000)
            .map(|_| [2_000.0 * uniform(&mut rng), 300.0 * uniform(&mut rng)])
            .collect();
        points.extend_from_slice(&[[500.0, 100.0], [500.0, 100.0], [9_000.0, 9_000.0]]);
        let brute = |p: [f64; 2], k: usize| -> Vec<usize> {
            let mut all: Vec<(f64, usize)> = points
                .iter()
                .enumerate()
                .map(|(j, q)| ((q[0] - p[0]).powi(2) + (q[1] - p[1]).powi(2), j))
                .collect();
            all.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
            all.iter().take(k).map(|&(_, j)| j).collect()
        };
        for cell in [5.0, 40.0, 400.0] {
            let grid = CellGrid::new(&points, cell);
            for i in (0..points.len()).step_by(97).chain([3_000, 3_001, 3_002]) {
                for k in [1, 9, 50] {
                    assert_eq!(grid.nearest(&points, points[i], k), brute(points[i], k));
                }
            }
        }
        let few = [[0.0, 0.0], [1.0, 0.0]];
        assert_eq!(
            CellGrid::new(&few, 1.0).nearest(&few, [0.9, 0.0], 5),
            vec![1, 0]
        );
    }
}
