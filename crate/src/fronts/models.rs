//! Front models: activation time as a function of position, fitted per burst, chosen by BIC,
//! with bootstrap intervals over sites.

use super::regression::{
    huber, ols, ols_slope_weighted, theil_sen, theil_sen_point, TheilSenResampler, HUBER_T,
};
use crate::geometry::{wrap_angle, Rotation, Track};
use crate::stats::quantile;
use nalgebra::DMatrix;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};
use std::f64::consts::{PI, TAU};

/// Which way a front goes round a ring, in the layout's axes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum RingTravel {
    /// One way, counter-clockwise (increasing atan2(y - cy, x - cx)).
    Ccw,
    /// One way, clockwise.
    Cw,
    /// Both ways from the origin (a two-way ring front).
    Both,
}

/// Which way a one-way front goes along a line track.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum LineTravel {
    /// Towards increasing track coordinate.
    Increasing,
    /// Towards decreasing track coordinate.
    Decreasing,
}

impl RingTravel {
    pub fn as_str(self) -> &'static str {
        match self {
            RingTravel::Ccw => "ccw",
            RingTravel::Cw => "cw",
            RingTravel::Both => "both",
        }
    }
}

impl LineTravel {
    pub fn as_str(self) -> &'static str {
        match self {
            LineTravel::Increasing => "increasing",
            LineTravel::Decreasing => "decreasing",
        }
    }
}

impl std::fmt::Display for RingTravel {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

impl std::fmt::Display for LineTravel {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

impl std::fmt::Display for FrontModel {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(model_name(*self))
    }
}

/// The shape of a front: how its arrival time grows with position.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum FrontModel {
    /// t = t0 + s / v, either way along a line (s: track coordinate).
    LineOneWay,
    /// t = t0 + |s - s0| / v, both ways from an interior origin s0.
    LineTwoWay,
    /// t = t0 + R unwrap(theta - theta0) / v, one way round a ring.
    RingOneWay,
    /// t = t0 + R d(theta, theta0) / v, both ways round, meeting opposite the origin.
    RingTwoWay,
    /// t = t0 + (x . n) / v across a plane.
    PlaneWave,
    /// t = t0 + |x - x0| / v from a point in a plane.
    PointSource,
}

impl FrontModel {
    /// Free parameters counted by the information criterion.
    pub fn parameters(self) -> usize {
        match self {
            FrontModel::LineOneWay => 2,
            FrontModel::LineTwoWay
            | FrontModel::RingOneWay
            | FrontModel::RingTwoWay
            | FrontModel::PlaneWave => 3,
            FrontModel::PointSource => 4,
        }
    }

    /// The models that apply to a track kind.
    pub fn for_track(track: &Track) -> &'static [FrontModel] {
        match track {
            Track::Line { .. } | Track::Polyline { .. } => {
                &[FrontModel::LineOneWay, FrontModel::LineTwoWay]
            }
            Track::Ring { .. } => &[FrontModel::RingOneWay, FrontModel::RingTwoWay],
            Track::Plane => &[FrontModel::PlaneWave, FrontModel::PointSource],
        }
    }
}

/// How the time-position relation is fitted.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Estimator {
    /// Theil-Sen for one predictor; Huber for the plane wave's two.
    #[default]
    TheilSen,
    /// Huber M-estimator (IRLS).
    Huber,
    /// Ordinary least squares.
    Ols,
}

/// Front fitting settings.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct FrontSettings {
    pub estimator: Estimator,
    /// Models to compare; empty means all that apply to the track.
    pub models: Vec<FrontModel>,
    /// Fewest activated sites for a front fit.
    pub min_sites: usize,
    /// Bootstrap resamples over sites for each interval.
    pub resamples: usize,
    /// Confidence level of every interval.
    pub confidence: f64,
    /// Seed of the bootstrap generator (ChaCha8); burst k uses seed + k.
    pub seed: u64,
    /// A transit shorter than this many sampling intervals cannot be resolved; speeds are
    /// flagged when the transit is under 3 times this (common practice, no source).
    pub resolution_steps: f64,
    /// A front whose transit over its sites is under this many robust SDs of its residuals
    /// is unresolved, not a front. Without propagation, a line fitted to n sites of timing
    /// SD sigma shows a transit of about sqrt(12 / n) |z| sigma (z standard normal), so 4
    /// keeps chance fronts below about 1 in 1,000 bursts for n >= 6 (derived).
    pub min_transit_sd: f64,
}

impl Default for FrontSettings {
    fn default() -> Self {
        FrontSettings {
            estimator: Estimator::TheilSen,
            models: Vec::new(),
            min_sites: 4,
            resamples: 1000,
            confidence: 0.95,
            seed: 1,
            resolution_steps: 3.0,
            min_transit_sd: 4.0,
        }
    }
}

/// What one burst's activation pattern looks like to the fit: one entry per used site.
#[derive(Debug, Clone, PartialEq)]
pub struct FrontPoints {
    /// Site indices into the recording.
    pub site: Vec<usize>,
    /// Track coordinate, micrometres (0 on a plane).
    pub along_um: Vec<f64>,
    /// Angle from the ring centre, radians (0 off a ring).
    pub angle_rad: Vec<f64>,
    /// Position, micrometres.
    pub xy_um: Vec<[f64; 2]>,
    /// Activation time, seconds.
    pub t_s: Vec<f64>,
}

impl FrontPoints {
    pub fn len(&self) -> usize {
        self.t_s.len()
    }

    pub fn is_empty(&self) -> bool {
        self.t_s.is_empty()
    }
}

/// Where a fitted front starts, in the model's own terms.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "at", rename_all = "snake_case")]
pub enum Origin {
    /// A track coordinate, micrometres.
    Along { along_um: f64 },
    /// An angle on the ring, radians in the layout's axes.
    Angle { angle_rad: f64 },
    /// A point in the plane, micrometres.
    Point { xy_um: [f64; 2] },
}

impl Origin {
    /// The origin as the report's three optional fields: track coordinate (um), ring angle
    /// (degrees) and plane point (um); exactly one is set.
    pub fn parts(&self) -> (Option<f64>, Option<f64>, Option<[f64; 2]>) {
        match *self {
            Origin::Along { along_um } => (Some(along_um), None, None),
            Origin::Angle { angle_rad } => (None, Some(angle_rad.to_degrees()), None),
            Origin::Point { xy_um } => (None, None, Some(xy_um)),
        }
    }
}

/// A model's fit to one burst.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelScore {
    pub model: FrontModel,
    /// Robust Schwarz criterion 2 sum rho(r / scale) + k ln n (Machado 1993; Tukey's
    /// biweight rho, one scale for all models compared); lower is better.
    pub criterion: f64,
    pub speed_mm_s: f64,
}

/// A fitted front with its intervals.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FittedFront {
    pub model: FrontModel,
    /// Speed, mm/s (positive).
    pub speed_mm_s: f64,
    /// Bootstrap percentile interval over sites.
    pub speed_ci95_mm_s: [f64; 2],
    /// The estimator's own interval (Student t for OLS, Sen's for Theil-Sen), when it has
    /// one and it excludes zero.
    pub speed_ci95_analytic_mm_s: Option<[f64; 2]>,
    /// Time the front leaves its origin (model intercept), seconds.
    pub start_s: f64,
    pub origin: Origin,
    /// Used site nearest the origin (for a one-way line or a plane wave: the first reached).
    pub origin_point: usize,
    /// Unit vector of travel in the layout's axes (one-way line, plane wave).
    pub direction_xy: Option<[f64; 2]>,
    /// Which way round, for ring fronts (`both` for two-way ring fronts).
    pub rotation: Option<RingTravel>,
    /// For a one-way line: whether the front runs towards increasing track coordinate.
    pub towards_increasing: Option<bool>,
    pub sites_used: usize,
    /// 1 - RSS / TSS of the activation times.
    pub r2: f64,
    /// RMS residual, seconds.
    pub residual_rms_s: f64,
    /// Robust SD of the residuals (median |r| / 0.6745), seconds: the sites' timing jitter.
    pub timing_sd_s: f64,
    /// Time the fitted front takes from its first to its last used site, seconds.
    pub transit_s: f64,
    /// Distance from the origin along the model's path of every used site, micrometres.
    pub distance_um: Vec<f64>,
    /// Every model compared, with its score.
    pub candidates: Vec<ModelScore>,
    /// Bootstrap resamples that could be fitted.
    pub resamples_used: usize,
    /// Slope interval (s/um) behind the speed interval.
    pub slope_ci95_s_per_um: [f64; 2],
}

/// The geometry the models need from the track.
#[derive(Debug, Clone, Copy)]
pub(crate) enum TrackFrame {
    Line { direction: [f64; 2] },
    Ring { radius_um: f64 },
    Plane,
}

impl TrackFrame {
    pub(crate) fn of(track: &Track) -> TrackFrame {
        match track {
            Track::Line { direction, .. } => TrackFrame::Line {
                direction: *direction,
            },
            Track::Polyline { waypoints_um, .. } => {
                let (a, b) = (waypoints_um[0], waypoints_um[waypoints_um.len() - 1]);
                let d = libm::hypot(b[0] - a[0], b[1] - a[1]).max(f64::MIN_POSITIVE);
                TrackFrame::Line {
                    direction: [(b[0] - a[0]) / d, (b[1] - a[1]) / d],
                }
            }
            Track::Ring { radius_um, .. } => TrackFrame::Ring {
                radius_um: *radius_um,
            },
            Track::Plane => TrackFrame::Plane,
        }
    }
}

/// Angle of a point seen from the ring's centre, radians (0 off a ring).
pub(crate) fn ring_angle(track: &Track, p: [f64; 2]) -> f64 {
    match track {
        Track::Ring { centre_um, .. } => libm::atan2(p[1] - centre_um[1], p[0] - centre_um[0]),
        _ => 0.0,
    }
}

/// One model fitted once (no bootstrap).
#[derive(Debug, Clone)]
struct Candidate {
    model: FrontModel,
    /// Predictor per point (distance from origin; signed s for the one-way line).
    u: Vec<f64>,
    slope: f64,
    intercept: f64,
    analytic_ci: Option<[f64; 2]>,
    rss: f64,
    origin: Origin,
    rotation: Option<Rotation>,
    /// Plane wave only: slowness vector (s/um).
    slowness: Option<[f64; 2]>,
}

impl Candidate {
    /// Predicted activation time of point i, seconds.
    fn predict(&self, i: usize) -> f64 {
        self.intercept + self.slope * self.u[i]
    }

    /// Plane wave: its time at the layout's origin and its slowness (s, s/um), so that
    /// t = beta0 + g . x anywhere; `first_xy_um` is the position of point 0.
    fn plane(&self, first_xy_um: [f64; 2]) -> Option<(f64, [f64; 2])> {
        let g = self.slowness?;
        let beta0 = self.predict(0) - g[0] * first_xy_um[0] - g[1] * first_xy_um[1];
        Some((beta0, g))
    }
}

struct Line1 {
    slope: f64,
    intercept: f64,
    analytic_ci: Option<[f64; 2]>,
}

fn fit_1d(
    u: &[f64],
    t: &[f64],
    estimator: Estimator,
    confidence: f64,
    search: bool,
) -> Option<Line1> {
    match estimator {
        // While searching for the origin only the line matters: selection, not sorting.
        Estimator::TheilSen if search => {
            let mut scratch = Vec::new();
            theil_sen_point(u, t, &mut scratch).map(|(slope, intercept)| Line1 {
                slope,
                intercept,
                analytic_ci: None,
            })
        }
        Estimator::TheilSen => theil_sen(u, t, confidence).map(|f| Line1 {
            slope: f.slope,
            intercept: f.intercept,
            analytic_ci: f.slope_ci,
        }),
        Estimator::Ols => ols(u, t, confidence).map(|f| Line1 {
            slope: f.slope,
            intercept: f.intercept,
            analytic_ci: Some(f.slope_ci),
        }),
        Estimator::Huber => {
            let design = DMatrix::from_fn(u.len(), 2, |i, j| if j == 0 { 1.0 } else { u[i] });
            huber(&design, t, None).map(|f| Line1 {
                slope: f.coefficients[1],
                intercept: f.coefficients[0],
                analytic_ci: None,
            })
        }
    }
}

fn residuals_1d(u: &[f64], t: &[f64], fit: &Line1) -> Vec<f64> {
    u.iter()
        .zip(t)
        .map(|(x, y)| y - fit.intercept - fit.slope * x)
        .collect()
}

/// Loss used to place origins: absolute residuals for the robust estimators, squared for OLS.
fn loss(residuals: &[f64], estimator: Estimator) -> f64 {
    match estimator {
        Estimator::Ols => residuals.iter().map(|r| r * r).sum(),
        _ => residuals.iter().map(|r| r.abs()).sum(),
    }
}

fn candidate_1d(
    model: FrontModel,
    u: Vec<f64>,
    t: &[f64],
    settings: &FrontSettings,
    origin: Origin,
    rotation: Option<Rotation>,
) -> Option<(Candidate, f64)> {
    let mut fit = fit_1d(&u, t, settings.estimator, settings.confidence, true)?;
    if settings.estimator != Estimator::Ols {
        // The robust line passes through the median of t - slope u, so its residuals have
        // median zero: Conover's Theil-Sen intercept, median(t) - slope median(u), moves with
        // an outlier in t alone, and the residual scale and the outlier checks read the
        // residuals about zero.
        let shifted: Vec<f64> = u.iter().zip(t).map(|(u, t)| t - fit.slope * u).collect();
        fit.intercept = crate::stats::median(&shifted)?;
    }
    let r = residuals_1d(&u, t, &fit);
    let l = loss(&r, settings.estimator);
    Some((
        Candidate {
            model,
            slope: fit.slope,
            intercept: fit.intercept,
            analytic_ci: fit.analytic_ci,
            rss: r.iter().map(|v| v * v).sum(),
            u,
            origin,
            rotation,
            slowness: None,
        },
        l,
    ))
}

/// Keeps the candidate with the lowest loss among those with a positive slope (a front
/// spreading out from its origin).
fn keep_best(best: &mut Option<(Candidate, f64)>, next: Option<(Candidate, f64)>) {
    if let Some((c, l)) = next {
        if c.slope > 0.0 && best.as_ref().is_none_or(|(_, bl)| l < *bl) {
            *best = Some((c, l));
        }
    }
}

/// Golden-section refinement of a scalar origin between `lo` and `hi`.
fn refine<F: Fn(f64) -> Option<(Candidate, f64)>>(
    best: &mut Option<(Candidate, f64)>,
    lo: f64,
    hi: f64,
    eval: F,
) {
    let g = (5f64.sqrt() - 1.0) / 2.0;
    let (mut a, mut b) = (lo, hi);
    // Relative to the bracket, so that the origin found does not depend on the layout's
    // scale (an absolute tolerance in µm stopped early on a layout in the wrong unit).
    let tolerance = 1e-6 * (hi - lo).abs();
    for _ in 0..30 {
        if (b - a).abs() <= tolerance {
            break;
        }
        let c = b - g * (b - a);
        let d = a + g * (b - a);
        let lc = eval(c).map_or(f64::INFINITY, |x| x.1);
        let ld = eval(d).map_or(f64::INFINITY, |x| x.1);
        if lc < ld {
            b = d;
        } else {
            a = c;
        }
    }
    keep_best(best, eval(0.5 * (a + b)));
}

fn fit_candidate(
    model: FrontModel,
    p: &FrontPoints,
    frame: TrackFrame,
    settings: &FrontSettings,
) -> Option<Candidate> {
    let t = &p.t_s;
    let n = p.len();
    match (model, frame) {
        (FrontModel::LineOneWay, TrackFrame::Line { .. }) => {
            let (c, _) = candidate_1d(
                model,
                p.along_um.clone(),
                t,
                settings,
                Origin::Along { along_um: 0.0 },
                None,
            )?;
            let along_um = if c.slope >= 0.0 {
                p.along_um.iter().copied().fold(f64::INFINITY, f64::min)
            } else {
                p.along_um.iter().copied().fold(f64::NEG_INFINITY, f64::max)
            };
            Some(Candidate {
                origin: Origin::Along { along_um },
                ..c
            })
        }
        (FrontModel::LineTwoWay, TrackFrame::Line { .. }) => {
            let eval = |s0: f64| {
                let u = origin_distances(model, frame, p, s0, None);
                candidate_1d(model, u, t, settings, Origin::Along { along_um: s0 }, None)
            };
            let mut sorted = p.along_um.clone();
            sorted.sort_by(f64::total_cmp);
            let mut grid: Vec<f64> = Vec::with_capacity(2 * n);
            for w in sorted.windows(2) {
                grid.push(w[0]);
                grid.push(0.5 * (w[0] + w[1]));
            }
            grid.extend(sorted.last());
            // A two-way front needs sites on both sides of its origin: at least three beyond
            // it each way (two let five sites with one early end site pass for a two-way
            // front). Nearer an end it is a one-way front with a noisy first site, and
            // letting the origin go there would fit that noise.
            let (lo_bound, hi_bound) = match (
                sorted.get(2),
                sorted.len().checked_sub(3).and_then(|i| sorted.get(i)),
            ) {
                (Some(&a), Some(&b)) if n >= 6 => (a, b),
                _ => return None,
            };
            grid.retain(|&s0| s0 > lo_bound && s0 < hi_bound);
            let mut best = None;
            let mut best_k = 0;
            for (k, &s0) in grid.iter().enumerate() {
                let before = best.as_ref().map(|b: &(Candidate, f64)| b.1);
                keep_best(&mut best, eval(s0));
                if best.as_ref().map(|b| b.1) != before {
                    best_k = k;
                }
            }
            if !grid.is_empty() {
                let lo = grid[best_k.saturating_sub(1)];
                let hi = grid[(best_k + 1).min(grid.len() - 1)];
                refine(&mut best, lo, hi, eval);
            }
            best.map(|b| b.0)
        }
        (FrontModel::RingOneWay, TrackFrame::Ring { .. }) => {
            let mut best = None;
            for rotation in [Rotation::Ccw, Rotation::Cw] {
                for &theta0 in &p.angle_rad {
                    let u = origin_distances(model, frame, p, theta0, Some(rotation));
                    keep_best(
                        &mut best,
                        candidate_1d(
                            model,
                            u,
                            t,
                            settings,
                            Origin::Angle { angle_rad: theta0 },
                            Some(rotation),
                        ),
                    );
                }
            }
            best.map(|b| b.0)
        }
        (FrontModel::RingTwoWay, TrackFrame::Ring { .. }) => {
            let eval = |theta0: f64| {
                let u = origin_distances(model, frame, p, theta0, None);
                candidate_1d(
                    model,
                    u,
                    t,
                    settings,
                    Origin::Angle {
                        angle_rad: wrap_angle(theta0),
                    },
                    None,
                )
            };
            let mut angles: Vec<f64> = p.angle_rad.iter().map(|&a| wrap_angle(a)).collect();
            angles.sort_by(f64::total_cmp);
            let mut grid = Vec::with_capacity(2 * n);
            for i in 0..angles.len() {
                let next = if i + 1 < angles.len() {
                    angles[i + 1]
                } else {
                    angles[0] + TAU
                };
                grid.push(angles[i]);
                grid.push(0.5 * (angles[i] + next));
            }
            let mut best = None;
            let mut best_k = 0;
            for (k, &a) in grid.iter().enumerate() {
                let before = best.as_ref().map(|b: &(Candidate, f64)| b.1);
                keep_best(&mut best, eval(a));
                if best.as_ref().map(|b| b.1) != before {
                    best_k = k;
                }
            }
            if !grid.is_empty() {
                let m = grid.len();
                let lo = grid[(best_k + m - 1) % m];
                let mut hi = grid[(best_k + 1) % m];
                let centre = grid[best_k];
                let lo = if lo > centre { lo - TAU } else { lo };
                if hi < centre {
                    hi += TAU;
                }
                refine(&mut best, lo, hi, eval);
            }
            best.map(|b| b.0)
        }
        (FrontModel::PlaneWave, TrackFrame::Plane) => {
            let design = DMatrix::from_fn(n, 3, |i, j| match j {
                0 => 1.0,
                1 => p.xy_um[i][0],
                _ => p.xy_um[i][1],
            });
            let beta = plane_coefficients(&design, t, settings.estimator, None)?;
            let r: Vec<f64> = (0..n)
                .map(|i| t[i] - beta[0] - beta[1] * p.xy_um[i][0] - beta[2] * p.xy_um[i][1])
                .collect();
            let g = [beta[1], beta[2]];
            let norm = libm::hypot(g[0], g[1]);
            if norm == 0.0 {
                return None;
            }
            let dir = [g[0] / norm, g[1] / norm];
            let proj: Vec<f64> = p
                .xy_um
                .iter()
                .map(|x| x[0] * dir[0] + x[1] * dir[1])
                .collect();
            let first = proj.iter().copied().fold(f64::INFINITY, f64::min);
            let first_i = proj.iter().position(|&v| v == first).unwrap_or(0);
            Some(Candidate {
                model,
                u: proj.iter().map(|v| v - first).collect(),
                slope: norm,
                intercept: beta[0] + norm * first,
                analytic_ci: None,
                rss: r.iter().map(|v| v * v).sum(),
                origin: Origin::Point {
                    xy_um: p.xy_um[first_i],
                },
                rotation: None,
                slowness: Some(g),
            })
        }
        (FrontModel::PointSource, TrackFrame::Plane) => {
            // On large arrays the scan only has to land in the right basin (the joint Huber
            // fit on every site finishes it), so it fits an evenly spread subset of at most
            // POINT_SOURCE_SCAN_SITES sites: Theil-Sen costs the square of the sites.
            let stride = n.div_ceil(POINT_SOURCE_SCAN_SITES).max(1);
            let scan_xy: Vec<[f64; 2]> = p.xy_um.iter().step_by(stride).copied().collect();
            let scan_t: Vec<f64> = t.iter().step_by(stride).copied().collect();
            let eval = |x0: [f64; 2]| {
                let u = distances_from(&scan_xy, x0);
                candidate_1d(
                    model,
                    u,
                    &scan_t,
                    settings,
                    Origin::Point { xy_um: x0 },
                    None,
                )
            };
            let (mut lo, mut hi) = ([f64::INFINITY; 2], [f64::NEG_INFINITY; 2]);
            for x in &p.xy_um {
                for k in 0..2 {
                    lo[k] = lo[k].min(x[k]);
                    hi[k] = hi[k].max(x[k]);
                }
            }
            // Coarse search: the earliest sites (a source lies near its first sites unless it
            // lies off the array) and a 5 x 5 grid over the sites' extent; then a pattern
            // search down to 1/32 of the extent. The joint Huber fit of origin and speed
            // finishes the job (`refine_point_source`), so the scan need not be fine.
            let mut best = None;
            let mut earliest: Vec<usize> = (0..n).collect();
            earliest.sort_by(|&a, &b| t[a].total_cmp(&t[b]));
            for &i in earliest.iter().take(POINT_SOURCE_SITE_STARTS) {
                keep_best(&mut best, eval(p.xy_um[i]));
            }
            for i in 0..=4 {
                for j in 0..=4 {
                    let x0 = [
                        lo[0] + (hi[0] - lo[0]) * i as f64 / 4.0,
                        lo[1] + (hi[1] - lo[1]) * j as f64 / 4.0,
                    ];
                    keep_best(&mut best, eval(x0));
                }
            }
            let extent = (hi[0] - lo[0]).max(hi[1] - lo[1]).max(1.0);
            let mut step = extent / 8.0;
            let mut centre = match best.as_ref().map(|b| b.0.origin) {
                Some(Origin::Point { xy_um }) => xy_um,
                _ => return None,
            };
            for _ in 0..40 {
                if step < extent / 32.0 {
                    break;
                }
                let before = best.as_ref().map_or(f64::INFINITY, |b| b.1);
                for (dx, dy) in [(1.0, 0.0), (-1.0, 0.0), (0.0, 1.0), (0.0, -1.0)] {
                    keep_best(
                        &mut best,
                        eval([centre[0] + dx * step, centre[1] + dy * step]),
                    );
                }
                let after = best.as_ref().map_or(f64::INFINITY, |b| b.1);
                if after < before {
                    if let Some(Origin::Point { xy_um }) = best.as_ref().map(|b| b.0.origin) {
                        centre = xy_um;
                    }
                } else {
                    step /= 2.0;
                }
            }
            let mut scanned = best.map(|b| b.0)?;
            if stride > 1 {
                // The subset's front carried to every site as the joint fit's start.
                if let Origin::Point { xy_um: o } = scanned.origin {
                    scanned.u = distances_from(&p.xy_um, o);
                    scanned.rss = (0..n).map(|i| (t[i] - scanned.predict(i)).powi(2)).sum();
                }
            }
            Some(refine_point_source(scanned, p, time_scale_floor(None)))
        }
        _ => None,
    }
}

/// Most sites a point source's origin scan fits (an evenly spread subset beyond).
const POINT_SOURCE_SCAN_SITES: usize = 128;

/// Earliest sites tried as a point source's origin before the grid.
const POINT_SOURCE_SITE_STARTS: usize = 8;

/// The scanned point source refined jointly (origin, speed, start) by Huber's M-estimator
/// ([`point_source_huber`]), the estimator its bootstrap repeats; the scan's values stand
/// when the refinement fails.
fn refine_point_source(scanned: Candidate, p: &FrontPoints, floor_s: f64) -> Candidate {
    let Origin::Point { xy_um } = scanned.origin else {
        return scanned;
    };
    let r: Vec<f64> = (0..p.len())
        .map(|i| p.t_s[i] - scanned.predict(i))
        .collect();
    let scale = residual_scale(&r).max(floor_s);
    let start = [scanned.intercept, scanned.slope, xy_um[0], xy_um[1]];
    let Some(q) = point_source_huber(&p.xy_um, &p.t_s, None, start, scale) else {
        return scanned;
    };
    let u = distances_from(&p.xy_um, [q[2], q[3]]);
    let rss = (0..p.len())
        .map(|i| (p.t_s[i] - q[0] - q[1] * u[i]).powi(2))
        .sum();
    Candidate {
        u,
        slope: q[1],
        intercept: q[0],
        rss,
        origin: Origin::Point {
            xy_um: [q[2], q[3]],
        },
        ..scanned
    }
}

/// Straight-line distance (um) of every position from a point-source origin.
fn distances_from(xy_um: &[[f64; 2]], origin_um: [f64; 2]) -> Vec<f64> {
    xy_um
        .iter()
        .map(|x| libm::hypot(x[0] - origin_um[0], x[1] - origin_um[1]))
        .collect()
}

/// Distance (um) of every point from an origin given by one number, along the model's path:
/// a track coordinate (um) for the two-way line, a ring angle (radians) for the ring models
/// (one-way in the given rotation, or the shorter way round for two-way).
fn origin_distances(
    model: FrontModel,
    frame: TrackFrame,
    p: &FrontPoints,
    origin: f64,
    rotation: Option<Rotation>,
) -> Vec<f64> {
    match (model, frame) {
        (FrontModel::RingOneWay, TrackFrame::Ring { radius_um }) => p
            .angle_rad
            .iter()
            .map(|&a| {
                let turn = match rotation {
                    Some(Rotation::Cw) => origin - a,
                    _ => a - origin,
                };
                radius_um * wrap_angle(turn)
            })
            .collect(),
        (FrontModel::RingTwoWay, TrackFrame::Ring { radius_um }) => p
            .angle_rad
            .iter()
            .map(|&a| {
                let d = wrap_angle(a - origin);
                radius_um * d.min(TAU - d)
            })
            .collect(),
        _ => p.along_um.iter().map(|s| (s - origin).abs()).collect(),
    }
}

/// Plane coefficients (t0, a, b) by the estimator (Huber stands in for Theil-Sen, which has
/// no standard two-predictor form).
fn plane_coefficients(
    design: &DMatrix<f64>,
    t: &[f64],
    estimator: Estimator,
    counts: Option<&[u32]>,
) -> Option<Vec<f64>> {
    match estimator {
        Estimator::Ols => {
            let w: Vec<f64> = match counts {
                Some(c) => c.iter().map(|&v| f64::from(v)).collect(),
                None => vec![1.0; t.len()],
            };
            super::regression::weighted_least_squares(design, t, &w)
                .map(|b| b.iter().copied().collect())
        }
        _ => huber(design, t, counts).map(|f| f.coefficients),
    }
}

/// Tukey's biweight tuning constant: 95% efficiency at the Gaussian (Beaton & Tukey 1974,
/// Technometrics 16:147).
const BIWEIGHT_C: f64 = 4.685;

/// Tukey's biweight loss, scaled so that it is x^2 / 2 near zero (like the Gaussian
/// log-likelihood) and bounded by c^2 / 6 beyond c: one site off by any amount costs at most
/// what a site 4.7 robust SDs off costs.
fn biweight_rho(x: f64) -> f64 {
    let c = BIWEIGHT_C;
    if x.abs() >= c {
        c * c / 6.0
    } else {
        let u = 1.0 - (x / c) * (x / c);
        c * c / 6.0 * (1.0 - u * u * u)
    }
}

/// Robust Schwarz information criterion (Machado 1993, Econometric Theory 9:478):
/// 2 sum rho(r_i / scale) + k ln n with Tukey's biweight rho and one scale shared by every
/// model compared. With Gaussian residuals and no outliers it equals BIC with known variance
/// (RSS / scale^2 + k ln n); a site off by any amount adds at most c^2 / 3 = 7.3.
fn robust_criterion(residuals: &[f64], scale_s: f64, parameters: usize) -> f64 {
    let n = residuals.len() as f64;
    2.0 * residuals
        .iter()
        .map(|r| biweight_rho(r / scale_s))
        .sum::<f64>()
        + parameters as f64 * libm::log(n)
}

/// Robust SD of residuals about zero: median(|r|) / 0.6745 (the MAD of residuals whose
/// median is zero, as Theil-Sen's intercept makes it).
pub(crate) fn residual_scale(residuals: &[f64]) -> f64 {
    let abs: Vec<f64> = residuals.iter().map(|r| r.abs()).collect();
    crate::stats::median(&abs).unwrap_or(0.0) / crate::stats::MAD_TO_SD
}

/// Why a burst has no front, as a kind the summary counts.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum NoFrontKind {
    /// Fewer sites took part than a fit needs.
    TooFewSites,
    /// The sites fired together: one common time fits as well as any front, or the slope's
    /// interval includes zero.
    Synchronous,
    /// A front fits, but it crosses the sites within their timing jitter or within a few
    /// sampling steps, so its speed cannot be resolved.
    Unresolved,
    /// No model could be fitted (sites too alike, bootstrap failed).
    Unfitted,
}

impl NoFrontKind {
    /// The name used in the JSON and CSV outputs.
    pub fn as_str(self) -> &'static str {
        match self {
            NoFrontKind::TooFewSites => "too_few_sites",
            NoFrontKind::Synchronous => "synchronous",
            NoFrontKind::Unresolved => "unresolved",
            NoFrontKind::Unfitted => "unfitted",
        }
    }
}

/// Why a burst has no front: its kind and a sentence for the user.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NoFront {
    pub kind: NoFrontKind,
    pub reason: String,
}

impl NoFront {
    fn new(kind: NoFrontKind, reason: String) -> NoFront {
        NoFront { kind, reason }
    }
}

/// The model comparison for one burst's activation pattern.
#[derive(Debug, Clone)]
pub struct ModelChoice {
    /// `None` when one common time for all sites scores best (no propagation).
    pub model: Option<FrontModel>,
    candidate: Option<Candidate>,
    /// Every front model that could be fitted, best first.
    pub scores: Vec<ModelScore>,
    /// The common-time model's criterion.
    pub constant_criterion: f64,
    /// The shared robust scale of the criterion, seconds.
    pub scale_s: f64,
    /// Each point's predicted activation time under the chosen model (or the common time),
    /// seconds.
    pub predicted_s: Vec<f64>,
    /// Position of the first point (anchors the plane wave's prediction elsewhere), um.
    first_xy: Option<[f64; 2]>,
}
impl ModelChoice {
    /// Predicted activation time (s) of a site at track coordinate `along_um`, ring angle
    /// `angle_rad` and position `xy_um` under the chosen model, or the common time.
    pub fn predict_at(&self, track: &Track, along_um: f64, angle_rad: f64, xy_um: [f64; 2]) -> f64 {
        let Some(c) = &self.candidate else {
            return self.predicted_s.first().copied().unwrap_or(0.0);
        };
        let frame = TrackFrame::of(track);
        let u = match (c.model, c.origin) {
            (FrontModel::LineOneWay, _) => along_um,
            (FrontModel::PlaneWave, _) => {
                let (beta0, g) = self
                    .first_xy
                    .and_then(|x| c.plane(x))
                    .unwrap_or((c.intercept, [0.0, 0.0]));
                return beta0 + g[0] * xy_um[0] + g[1] * xy_um[1];
            }
            (FrontModel::PointSource, Origin::Point { xy_um: o }) => distances_from(&[xy_um], o)[0],
            (_, Origin::Along { along_um: s0 }) => (along_um - s0).abs(),
            (_, Origin::Angle { angle_rad: a0 }) => {
                let one = FrontPoints {
                    site: vec![0],
                    along_um: vec![along_um],
                    angle_rad: vec![angle_rad],
                    xy_um: vec![xy_um],
                    t_s: vec![0.0],
                };
                origin_distances(c.model, frame, &one, a0, c.rotation)[0]
            }
            _ => 0.0,
        };
        c.intercept + c.slope * u
    }
}

/// Fits every applicable model to the activation pattern and compares them, and one common
/// time for all sites, by the robust Schwarz criterion ([`robust_criterion`]). The shared
/// scale is the smallest robust residual SD among the fitted models (the model that fits
/// best stands for the largest one, as Machado prescribes), floored at the quantisation
/// noise of the time step (step / sqrt 12) and 1 us.
pub fn choose_model(
    points: &FrontPoints,
    track: &Track,
    settings: &FrontSettings,
    time_step_s: Option<f64>,
) -> Result<ModelChoice, NoFront> {
    let n = points.len();
    let needed = settings.min_sites.max(3);
    if n < needed {
        return Err(NoFront::new(
            NoFrontKind::TooFewSites,
            format!("only {n} sites took part; a front fit needs at least {needed}"),
        ));
    }
    let frame = TrackFrame::of(track);
    let models: Vec<FrontModel> = if settings.models.is_empty() {
        FrontModel::for_track(track).to_vec()
    } else {
        settings.models.clone()
    };
    let t = &points.t_s;
    let centre = match settings.estimator {
        Estimator::Ols => crate::stats::mean(t),
        _ => crate::stats::median(t),
    }
    .unwrap_or(0.0);
    let constant_residuals: Vec<f64> = t.iter().map(|v| v - centre).collect();
    let fitted: Vec<(Candidate, Vec<f64>)> = models
        .iter()
        .filter_map(|&m| fit_candidate(m, points, frame, settings))
        .filter(|c| c.slope.is_finite() && c.slope != 0.0)
        .map(|c| {
            let r: Vec<f64> = (0..n).map(|i| t[i] - c.predict(i)).collect();
            (c, r)
        })
        .collect();
    let floor = time_scale_floor(time_step_s);
    let scale_s = fitted
        .iter()
        .map(|(_, r)| residual_scale(r))
        .chain(std::iter::once(residual_scale(&constant_residuals)))
        .fold(f64::INFINITY, f64::min)
        .max(floor);
    let constant_criterion = robust_criterion(&constant_residuals, scale_s, 1);
    let mut scored: Vec<(Candidate, f64)> = fitted
        .into_iter()
        .map(|(c, r)| {
            let score = robust_criterion(&r, scale_s, c.model.parameters());
            (c, score)
        })
        .collect();
    scored.sort_by(|a, b| a.1.total_cmp(&b.1));
    let scores: Vec<ModelScore> = scored
        .iter()
        .map(|(c, b)| ModelScore {
            model: c.model,
            criterion: *b,
            speed_mm_s: 1.0 / (c.slope.abs() * 1e3),
        })
        .collect();
    let best = scored
        .into_iter()
        .next()
        .filter(|(_, score)| *score < constant_criterion)
        .map(|(c, _)| c);
    let predicted_s = match &best {
        Some(c) => (0..n).map(|i| c.predict(i)).collect(),
        None => vec![centre; n],
    };
    Ok(ModelChoice {
        model: best.as_ref().map(|c| c.model),
        candidate: best,
        scores,
        constant_criterion,
        scale_s,
        predicted_s,
        first_xy: points.xy_um.first().copied(),
    })
}

/// Smallest timing SD the data can show, seconds: the quantisation noise of the time step
/// (step / sqrt(12)), and never below 1 us.
fn time_scale_floor(time_step_s: Option<f64>) -> f64 {
    (time_step_s.unwrap_or(0.0) / 12f64.sqrt()).max(1e-6)
}

/// Fits every applicable model to one burst's activation pattern, keeps the best by the
/// robust Schwarz criterion, and bootstraps its speed over sites, with the origin found
/// again in every resample.
///
/// No front, with its kind and a reason, when fewer than `min_sites` sites took part; when
/// one common time fits as well as any front, or the slope's interval includes zero
/// (synchronous); when the front crosses its sites in less than `min_transit_sd` robust
/// residual SDs or `resolution_steps` time steps (unresolved); or when no model could be
/// fitted. `time_step_s` is the sampling interval or the file's time quantum.
pub fn fit_front(
    points: &FrontPoints,
    track: &Track,
    settings: &FrontSettings,
    seed: u64,
    time_step_s: Option<f64>,
) -> Result<FittedFront, NoFront> {
    let choice = choose_model(points, track, settings, time_step_s)?;
    fit_chosen(points, points, track, &choice, settings, seed, time_step_s)
}

/// The bootstrap and the decisions of [`fit_front`] for a model already chosen.
/// `association_points` are the sites as first timed, before any was re-timed or set aside
/// against the front: the permutation test for marginal fronts runs on them, so that sites
/// set aside by a chance front cannot make it look real.
pub fn fit_chosen(
    points: &FrontPoints,
    association_points: &FrontPoints,
    track: &Track,
    choice: &ModelChoice,
    settings: &FrontSettings,
    seed: u64,
    time_step_s: Option<f64>,
) -> Result<FittedFront, NoFront> {
    let n = points.len();
    let frame = TrackFrame::of(track);
    let t = &points.t_s;
    let Some(mut best) = choice.candidate.clone() else {
        return Err(match choice.scores.first() {
            Some(s) => NoFront::new(
                NoFrontKind::Synchronous,
                format!(
                    "no propagation: one common time for all sites fits as well as any front (robust criterion {:.1} against {:.1} for {})",
                    choice.constant_criterion,
                    s.criterion,
                    model_name(s.model)
                ),
            ),
            None => NoFront::new(
                NoFrontKind::Unfitted,
                "no front model could be fitted to these sites".into(),
            ),
        });
    };
    if best.slowness.is_none() && best.analytic_ci.is_none() {
        // The origin search fits lines without intervals; the chosen one gets its own.
        if let Some(full) = fit_1d(&best.u, t, settings.estimator, settings.confidence, false) {
            best.analytic_ci = full.analytic_ci;
        }
    }
    let residuals: Vec<f64> = (0..n).map(|i| t[i] - best.predict(i)).collect();
    let model_scale_s = residual_scale(&residuals).max(time_scale_floor(time_step_s));

    let bootstrap = Bootstrap::new(&best, points, frame, settings, model_scale_s);
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut counts = vec![0u32; n];
    let mut slopes: Vec<f64> = Vec::with_capacity(settings.resamples);
    for _ in 0..settings.resamples {
        counts.iter_mut().for_each(|c| *c = 0);
        for _ in 0..n {
            counts[rng.random_range(0..n)] += 1;
        }
        if let Some(s) = bootstrap.slope(&counts).filter(|s| s.is_finite()) {
            slopes.push(s);
        }
    }
    if slopes.len() < settings.resamples / 2 || slopes.len() < 20 {
        return Err(NoFront::new(
            NoFrontKind::Unfitted,
            format!(
                "only {} of {} bootstrap resamples could be fitted; the sites are too few or too alike",
                slopes.len(),
                settings.resamples
            ),
        ));
    }
    let alpha = (1.0 - settings.confidence) / 2.0;
    let lo = quantile(&slopes, alpha).unwrap_or(f64::NAN);
    let hi = quantile(&slopes, 1.0 - alpha).unwrap_or(f64::NAN);
    if lo <= 0.0 && hi >= 0.0 {
        return Err(NoFront::new(
            NoFrontKind::Synchronous,
            format!(
                "no resolvable propagation: the {:.0}% interval of the slope includes zero ({:.4} to {:.4} ms/mm)",
                settings.confidence * 100.0,
                lo * 1e6,
                hi * 1e6
            ),
        ));
    }
    if !(lo <= best.slope && best.slope <= hi) {
        return Err(NoFront::new(
            NoFrontKind::Unfitted,
            format!(
                "unstable: the {} fit's slope ({:.4} ms/mm) lies outside its own {:.0}% bootstrap interval ({:.4} to {:.4} ms/mm); the sites are too few or too irregular for this model",
                model_name(best.model),
                best.slope * 1e6,
                settings.confidence * 100.0,
                lo * 1e6,
                hi * 1e6
            ),
        ));
    }
    // The transit: how long the fitted front takes from its first to its last used site.
    let (u_lo, u_hi) = best
        .u
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &u| {
            (a.min(u), b.max(u))
        });
    let transit_s = best.slope.abs() * (u_hi - u_lo);
    if transit_s < settings.min_transit_sd * model_scale_s {
        return Err(NoFront::new(
            NoFrontKind::Unresolved,
            format!(
                "unresolved: a {} front would cross the sites in {:.2} ms, within {} times their timing jitter ({:.2} ms robust SD of the residuals)",
                model_name(best.model),
                transit_s * 1e3,
                settings.min_transit_sd,
                model_scale_s * 1e3
            ),
        ));
    }
    // Without propagation a fitted line's transit is about sqrt(12 / n) |z| timing SDs: only
    // a transit within PERMUTATION_BELOW_NULL_SD of those can be chance, and only then are
    // the times shuffled.
    let null_sd = (12.0 / association_points.len().max(1) as f64).sqrt() * model_scale_s;
    if transit_s < PERMUTATION_BELOW_NULL_SD * null_sd
        && association_points.len() <= PERMUTATION_MAX_SITES
    {
        let p = association_p_value(
            association_points,
            track,
            best.model,
            settings,
            time_step_s,
            seed,
        );
        if p > PERMUTATION_ALPHA {
            return Err(NoFront::new(
                NoFrontKind::Synchronous,
                format!(
                    "no propagation: a {} front crossing the sites in {:.2} ms (timing SD {:.2} ms) fits no better than the same model fitted to the times shuffled among the sites (permutation p = {:.3}, {} shuffles)",
                    model_name(best.model),
                    transit_s * 1e3,
                    model_scale_s * 1e3,
                    p,
                    PERMUTATIONS
                ),
            ));
        }
    }
    if let Some(dt) = time_step_s {
        if transit_s < settings.resolution_steps * dt {
            return Err(NoFront::new(
                NoFrontKind::Unresolved,
                format!(
                    "unresolved: the front would cross the sites in {:.3} ms, under {} time steps of {:.3} ms",
                    transit_s * 1e3,
                    settings.resolution_steps,
                    dt * 1e3
                ),
            ));
        }
    }
    let to_speed = |slope_ci: [f64; 2]| -> [f64; 2] {
        let (a, b) = (slope_ci[0].abs(), slope_ci[1].abs());
        [1.0 / (a.max(b) * 1e3), 1.0 / (a.min(b) * 1e3)]
    };
    let analytic = best
        .analytic_ci
        .filter(|ci| ci[0] * ci[1] > 0.0)
        .map(to_speed);
    let speed_mm_s = 1.0 / (best.slope.abs() * 1e3);
    let mean_t = crate::stats::mean(t).unwrap_or(0.0);
    let tss: f64 = t.iter().map(|v| (v - mean_t) * (v - mean_t)).sum();
    let r2 = if tss > 0.0 { 1.0 - best.rss / tss } else { 0.0 };
    let direction = best.slowness.map(|g| {
        let norm = libm::hypot(g[0], g[1]);
        [g[0] / norm, g[1] / norm]
    });

    let (origin_point, distance_um, direction_xy, towards_increasing) = match (best.model, frame) {
        (FrontModel::LineOneWay, TrackFrame::Line { direction }) => {
            let up = best.slope > 0.0;
            let origin_s = match best.origin {
                Origin::Along { along_um } => along_um,
                _ => 0.0,
            };
            let k = nearest(&points.along_um, origin_s);
            let sign = if up { 1.0 } else { -1.0 };
            (
                k,
                points
                    .along_um
                    .iter()
                    .map(|s| (s - origin_s).abs())
                    .collect(),
                // + 0.0 turns -0.0 into 0.0.
                Some([sign * direction[0] + 0.0, sign * direction[1] + 0.0]),
                Some(up),
            )
        }
        (FrontModel::PlaneWave, _) => {
            let k = match best.origin {
                Origin::Point { xy_um } => {
                    points.xy_um.iter().position(|x| *x == xy_um).unwrap_or(0)
                }
                _ => 0,
            };
            (k, best.u.clone(), direction, None)
        }
        _ => {
            let k = best
                .u
                .iter()
                .enumerate()
                .min_by(|a, b| a.1.total_cmp(b.1))
                .map_or(0, |(i, _)| i);
            (k, best.u.clone(), None, None)
        }
    };
    let rotation = match best.model {
        FrontModel::RingOneWay => best.rotation.map(|r| match r {
            Rotation::Ccw => RingTravel::Ccw,
            Rotation::Cw => RingTravel::Cw,
        }),
        FrontModel::RingTwoWay => Some(RingTravel::Both),
        _ => None,
    };
    let intercept = match best.model {
        FrontModel::LineOneWay => {
            best.intercept
                + best.slope
                    * match best.origin {
                        Origin::Along { along_um } => along_um,
                        _ => 0.0,
                    }
        }
        _ => best.intercept,
    };
    Ok(FittedFront {
        model: best.model,
        speed_mm_s,
        speed_ci95_mm_s: to_speed([lo, hi]),
        speed_ci95_analytic_mm_s: analytic,
        start_s: intercept,
        origin: best.origin,
        origin_point,
        direction_xy,
        rotation,
        towards_increasing,
        sites_used: n,
        r2,
        residual_rms_s: (best.rss / n as f64).sqrt(),
        timing_sd_s: model_scale_s,
        transit_s,
        distance_um,
        candidates: choice.scores.clone(),
        resamples_used: slopes.len(),
        slope_ci95_s_per_um: [lo, hi],
    })
}

/// Fronts whose transit is under this many of its null SDs (sqrt(12 / n) timing SDs, the
/// transit a line fitted to n sites shows by chance) get the permutation test of
/// [`association_p_value`]; beyond 8 a chance transit has odds below 1e-15 for one slope,
/// which leaves room for the freedom of an origin search (common practice, no source).
const PERMUTATION_BELOW_NULL_SD: f64 = 8.0;
/// Most shuffles of the permutation test (n - 1 in Besag & Clifford's sequential test).
const PERMUTATIONS: usize = 999;
/// The sequential test stops once this many shuffles score at least as well (h in Besag &
/// Clifford 1991): the p-value is then plainly large.
const PERMUTATION_STOP_AFTER: usize = 10;
/// Largest p-value of the permutation test that still counts as propagation.
const PERMUTATION_ALPHA: f64 = 0.001;
/// Above this many sites the transit bound alone decides: a chance front's transit shrinks
/// as sqrt(12 / n) timing SDs.
const PERMUTATION_MAX_SITES: usize = 256;

/// Permutation test of the association between activation time and position (Fisher 1935;
/// Pitman 1937): under no propagation the times are exchangeable among the sites, so the
/// improvement of the chosen model over one common time (the robust criterion's gain, origin
/// searched afresh) is compared with its value after shuffling the times among the sites.
/// Sequential Monte Carlo p-value (Besag & Clifford 1991, Biometrika 78:301): shuffling
/// stops once `PERMUTATION_STOP_AFTER` shuffles score at least as well, giving h / l after l
/// shuffles; otherwise (1 + g) / (1 + shuffles) with g such shuffles (Davison & Hinkley
/// 1997, eq. 4.11). Bursts without propagation stop after a few dozen shuffles.
fn association_p_value(
    points: &FrontPoints,
    track: &Track,
    model: FrontModel,
    settings: &FrontSettings,
    time_step_s: Option<f64>,
    seed: u64,
) -> f64 {
    let only = FrontSettings {
        models: vec![model],
        ..settings.clone()
    };
    let gain = |p: &FrontPoints| -> f64 {
        match choose_model(p, track, &only, time_step_s) {
            Ok(c) => c
                .scores
                .first()
                .map_or(0.0, |s| c.constant_criterion - s.criterion),
            Err(_) => 0.0,
        }
    };
    let observed = gain(points);
    // Its own stream, apart from the bootstrap's.
    let mut rng = ChaCha8Rng::seed_from_u64(seed ^ 0x5045_524d_5554_4531);
    let mut shuffled = points.clone();
    let mut at_least = 0usize;
    for done in 1..=PERMUTATIONS {
        // Fisher-Yates.
        for i in (1..shuffled.t_s.len()).rev() {
            let j = rng.random_range(0..=i);
            shuffled.t_s.swap(i, j);
        }
        if gain(&shuffled) >= observed {
            at_least += 1;
            if at_least == PERMUTATION_STOP_AFTER {
                return at_least as f64 / done as f64;
            }
        }
    }
    (1 + at_least) as f64 / (1 + PERMUTATIONS) as f64
}

/// Most pairwise slopes the origin profile of one bootstrap may hold (16 bytes each), so the
/// memory stays bounded on large arrays; beyond it fewer origins are profiled.
const PROFILE_PAIR_BUDGET: usize = 20_000_000;

/// Origins profiled on each side of the fitted one, half a site gap apart.
const PROFILE_HALF_WIDTH: usize = 4;

/// One bootstrap resample's estimator: the chosen model refitted to the resample, with its
/// origin found again.
enum Bootstrap {
    /// Plane wave: the plane refitted, slowness projected on the fitted direction of travel
    /// (OLS refitted as it is; the robust estimators by Huber's M-estimator with the full
    /// fit's scale held, from the full fit's plane).
    Plane {
        design: DMatrix<f64>,
        xy_um: Vec<[f64; 2]>,
        t: Vec<f64>,
        estimator: Estimator,
        direction: [f64; 2],
        start: [f64; 3],
        scale_s: f64,
    },
    /// Origins on a grid about the fitted one (a single origin for the one-way line, whose
    /// intercept is free); each resample keeps the origin with the lowest loss.
    Profile {
        estimator: Estimator,
        t: Vec<f64>,
        /// Predictor of every point for each origin.
        u: Vec<Vec<f64>>,
        /// Theil-Sen pairwise slopes sorted once per origin.
        theil_sen: Vec<TheilSenResampler>,
    },
    /// Point source: speed and origin refitted jointly from the fitted values by Huber's
    /// M-estimator (Gauss-Newton IRLS), the estimator of the point estimate.
    Point {
        xy_um: Vec<[f64; 2]>,
        t: Vec<f64>,
        start: [f64; 4],
        scale_s: f64,
    },
}

impl Bootstrap {
    fn new(
        best: &Candidate,
        points: &FrontPoints,
        frame: TrackFrame,
        settings: &FrontSettings,
        scale_s: f64,
    ) -> Bootstrap {
        let t = points.t_s.clone();
        let n = points.len();
        if let Some((beta0, g)) = best.plane(points.xy_um[0]) {
            let norm = libm::hypot(g[0], g[1]);
            return Bootstrap::Plane {
                design: DMatrix::from_fn(n, 3, |i, j| match j {
                    0 => 1.0,
                    1 => points.xy_um[i][0],
                    _ => points.xy_um[i][1],
                }),
                xy_um: points.xy_um.clone(),
                t,
                estimator: settings.estimator,
                direction: [g[0] / norm, g[1] / norm],
                start: [beta0, g[0], g[1]],
                scale_s,
            };
        }
        if let (FrontModel::PointSource, Origin::Point { xy_um }) = (best.model, best.origin) {
            return Bootstrap::Point {
                xy_um: points.xy_um.clone(),
                t,
                start: [best.intercept, best.slope, xy_um[0], xy_um[1]],
                scale_s,
            };
        }
        let pairs = n * n.saturating_sub(1) / 2;
        let width = PROFILE_HALF_WIDTH.min(PROFILE_PAIR_BUDGET / pairs.max(1) / 2);
        let origins: Vec<f64> = match (best.model, best.origin) {
            (FrontModel::LineTwoWay, Origin::Along { along_um }) => {
                let h = 0.5 * median_gap(points.along_um.clone());
                (0..=2 * width)
                    .map(|j| along_um + (j as f64 - width as f64) * h)
                    .collect()
            }
            (FrontModel::RingOneWay | FrontModel::RingTwoWay, Origin::Angle { angle_rad }) => {
                let angles: Vec<f64> = points.angle_rad.iter().map(|&a| wrap_angle(a)).collect();
                let h = 0.5 * median_gap_circular(angles);
                (0..=2 * width)
                    .map(|j| angle_rad + (j as f64 - width as f64) * h)
                    .collect()
            }
            _ => Vec::new(),
        };
        let u: Vec<Vec<f64>> = if origins.is_empty() {
            vec![best.u.clone()]
        } else {
            origins
                .iter()
                .map(|&o| origin_distances(best.model, frame, points, o, best.rotation))
                .collect()
        };
        let theil_sen = if settings.estimator == Estimator::TheilSen {
            u.iter().map(|u| TheilSenResampler::new(u, &t)).collect()
        } else {
            Vec::new()
        };
        Bootstrap::Profile {
            estimator: settings.estimator,
            t,
            u,
            theil_sen,
        }
    }

    /// The resample's slope (s/um), where point i is drawn `counts[i]` times.
    fn slope(&self, counts: &[u32]) -> Option<f64> {
        match self {
            Bootstrap::Plane {
                design,
                xy_um,
                t,
                estimator,
                direction,
                start,
                scale_s,
            } => match estimator {
                Estimator::Ols => plane_coefficients(design, t, *estimator, Some(counts))
                    .map(|b| b[1] * direction[0] + b[2] * direction[1]),
                _ => plane_huber(xy_um, t, counts, *start, *scale_s)
                    .map(|b| b[1] * direction[0] + b[2] * direction[1]),
            },
            Bootstrap::Point {
                xy_um,
                t,
                start,
                scale_s,
            } => point_source_huber(xy_um, t, Some(counts), *start, *scale_s).map(|p| p[1]),
            Bootstrap::Profile {
                estimator,
                t,
                u,
                theil_sen,
            } => {
                let single = u.len() == 1;
                let mut best: Option<(f64, f64)> = None;
                for (k, u) in u.iter().enumerate() {
                    let slope = match estimator {
                        Estimator::TheilSen => theil_sen.get(k).and_then(|r| r.slope(counts)),
                        Estimator::Ols => ols_slope_weighted(u, t, counts),
                        Estimator::Huber => {
                            let d = DMatrix::from_fn(
                                u.len(),
                                2,
                                |i, j| {
                                    if j == 0 {
                                        1.0
                                    } else {
                                        u[i]
                                    }
                                },
                            );
                            huber(&d, t, Some(counts)).map(|f| f.coefficients[1])
                        }
                    };
                    let Some(slope) = slope.filter(|s| s.is_finite()) else {
                        continue;
                    };
                    if single {
                        return Some(slope);
                    }
                    // A front spreads out from its origin: only positive slopes qualify.
                    if slope <= 0.0 {
                        continue;
                    }
                    let l = weighted_line_loss(u, t, counts, slope, *estimator);
                    if best.is_none_or(|(_, bl)| l < bl) {
                        best = Some((slope, l));
                    }
                }
                best.map(|b| b.0)
            }
        }
    }
}

/// Plane t = b0 + b1 x + b2 y fitted by Huber's M-estimator with a fixed `scale_s`, by
/// iteratively reweighted least squares from `start` (Holland & Welsch 1977), each point
/// weighted by how often it was drawn. Coordinates are centred for the 3 x 3 solve. `None`
/// when the weighted design is singular.
fn plane_huber(
    xy_um: &[[f64; 2]],
    t: &[f64],
    counts: &[u32],
    start: [f64; 3],
    scale_s: f64,
) -> Option<[f64; 3]> {
    let n = t.len();
    let (mut cx, mut cy, mut w_sum) = (0.0, 0.0, 0.0);
    for i in 0..n {
        let c = f64::from(counts[i]);
        cx += c * xy_um[i][0];
        cy += c * xy_um[i][1];
        w_sum += c;
    }
    if w_sum == 0.0 {
        return None;
    }
    let (cx, cy) = (cx / w_sum, cy / w_sum);
    // In centred coordinates: t = a + b1 (x - cx) + b2 (y - cy), a = b0 + b1 cx + b2 cy.
    let mut b =
        nalgebra::Vector3::new(start[0] + start[1] * cx + start[2] * cy, start[1], start[2]);
    for _ in 0..50 {
        let mut m = nalgebra::Matrix3::<f64>::zeros();
        let mut v = nalgebra::Vector3::<f64>::zeros();
        for i in 0..n {
            let c = f64::from(counts[i]);
            if c == 0.0 {
                continue;
            }
            let row = nalgebra::Vector3::new(1.0, xy_um[i][0] - cx, xy_um[i][1] - cy);
            let r = t[i] - row.dot(&b);
            let z = (r / scale_s).abs();
            let w = c * if z <= HUBER_T { 1.0 } else { HUBER_T / z };
            m += w * row * row.transpose();
            v += w * t[i] * row;
        }
        let next = m.cholesky()?.solve(&v);
        let change = (next - b).abs();
        b = next;
        // Converged when the plane moves by under a millionth of the scale across 1 mm.
        if change[0] <= 1e-6 * scale_s && (change[1] + change[2]) * 1e3 <= 1e-6 * scale_s {
            break;
        }
    }
    Some([b[0] - b[1] * cx - b[2] * cy, b[1], b[2]])
}

/// Loss of the line with `slope` through the resample (its intercept the weighted median of
/// t - slope u, or the weighted mean for OLS): summed absolute residuals, or squared ones for
/// OLS, each counted as often as its point was drawn.
fn weighted_line_loss(u: &[f64], t: &[f64], counts: &[u32], slope: f64, e: Estimator) -> f64 {
    let mut shifted: Vec<(f64, u32)> = u
        .iter()
        .zip(t)
        .zip(counts)
        .filter(|(_, &c)| c > 0)
        .map(|((u, t), &c)| (t - slope * u, c))
        .collect();
    match e {
        Estimator::Ols => {
            let w: f64 = shifted.iter().map(|p| f64::from(p.1)).sum();
            let m = shifted.iter().map(|p| p.0 * f64::from(p.1)).sum::<f64>() / w;
            shifted
                .iter()
                .map(|p| f64::from(p.1) * (p.0 - m) * (p.0 - m))
                .sum()
        }
        _ => {
            shifted.sort_by(|a, b| a.0.total_cmp(&b.0));
            let total: u32 = shifted.iter().map(|p| p.1).sum();
            let mut seen = 0;
            let mut m = 0.0;
            for p in &shifted {
                seen += p.1;
                if 2 * seen >= total {
                    m = p.0;
                    break;
                }
            }
            shifted
                .iter()
                .map(|p| f64::from(p.1) * (p.0 - m).abs())
                .sum()
        }
    }
}

/// Median gap between neighbouring distinct values (sorted here), or 1 when there is none.
fn median_gap(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    let gaps: Vec<f64> = v
        .windows(2)
        .map(|w| w[1] - w[0])
        .filter(|g| *g > 0.0)
        .collect();
    crate::stats::median(&gaps).unwrap_or(1.0)
}

/// Median gap between neighbouring distinct angles round the circle, radians.
fn median_gap_circular(mut a: Vec<f64>) -> f64 {
    a.sort_by(f64::total_cmp);
    let mut gaps: Vec<f64> = a
        .windows(2)
        .map(|w| w[1] - w[0])
        .filter(|g| *g > 0.0)
        .collect();
    if let (Some(first), Some(last)) = (a.first(), a.last()) {
        let wrap = first + TAU - last;
        if wrap > 0.0 {
            gaps.push(wrap);
        }
    }
    crate::stats::median(&gaps).unwrap_or(0.1)
}

/// Point-source front t_i = t0 + s |x_i - x0| fitted by Huber's M-estimator with a fixed
/// scale, by Gauss-Newton iteratively reweighted least squares from `start` = [t0 (s),
/// s (s/um), x0, y0 (um)] (Huber 1981, ch. 7; Holland & Welsch 1977 for IRLS). Distances
/// are smoothed by 1 um so the model stays differentiable at a site. `counts` weight the
/// points (bootstrap); `None` when the fit fails or the slope is not positive.
fn point_source_huber(
    xy_um: &[[f64; 2]],
    t: &[f64],
    counts: Option<&[u32]>,
    start: [f64; 4],
    scale_s: f64,
) -> Option<[f64; 4]> {
    const SMOOTH_UM2: f64 = 1.0;
    let n = t.len();
    let weight = |i: usize| counts.map_or(1.0, |c| f64::from(c[i]));
    let loss_of = |p: &[f64; 4]| -> f64 {
        (0..n)
            .map(|i| {
                let d = ((xy_um[i][0] - p[2]).powi(2) + (xy_um[i][1] - p[3]).powi(2) + SMOOTH_UM2)
                    .sqrt();
                let z = ((t[i] - p[0] - p[1] * d) / scale_s).abs();
                weight(i)
                    * if z <= HUBER_T {
                        0.5 * z * z
                    } else {
                        HUBER_T * z - 0.5 * HUBER_T * HUBER_T
                    }
            })
            .sum()
    };
    let mut p = start;
    let mut loss = loss_of(&p);
    for _ in 0..30 {
        let mut jtj = nalgebra::Matrix4::<f64>::zeros();
        let mut jtr = nalgebra::Vector4::<f64>::zeros();
        for i in 0..n {
            let w0 = weight(i);
            if w0 == 0.0 {
                continue;
            }
            let (dx, dy) = (xy_um[i][0] - p[2], xy_um[i][1] - p[3]);
            let d = (dx * dx + dy * dy + SMOOTH_UM2).sqrt();
            let r = t[i] - p[0] - p[1] * d;
            let z = (r / scale_s).abs();
            let w = w0 * if z <= HUBER_T { 1.0 } else { HUBER_T / z };
            let j = nalgebra::Vector4::new(1.0, d, -p[1] * dx / d, -p[1] * dy / d);
            jtj += w * j * j.transpose();
            jtr += w * r * j;
        }
        // A little Marquardt damping (scaled by each parameter's own curvature, which differ
        // by 12 orders of magnitude between t0 and the origin) keeps the step finite when
        // the origin is poorly determined.
        for k in 0..4 {
            jtj[(k, k)] *= 1.0 + 1e-9;
            jtj[(k, k)] += f64::MIN_POSITIVE;
        }
        let step = jtj.cholesky()?.solve(&jtr);
        let mut factor = 1.0;
        let mut moved = false;
        for _ in 0..12 {
            let next = [
                p[0] + factor * step[0],
                p[1] + factor * step[1],
                p[2] + factor * step[2],
                p[3] + factor * step[3],
            ];
            let l = loss_of(&next);
            if l <= loss {
                let small = (next[2] - p[2]).abs() < 1e-3 && (next[3] - p[3]).abs() < 1e-3;
                let done = loss - l <= 1e-10 * loss.max(1e-300) || small;
                p = next;
                loss = l;
                moved = !done;
                break;
            }
            factor *= 0.5;
        }
        if !moved {
            break;
        }
    }
    (p.iter().all(|v| v.is_finite()) && p[1] > 0.0).then_some(p)
}

fn nearest(values: &[f64], target: f64) -> usize {
    values
        .iter()
        .enumerate()
        .min_by(|a, b| (a.1 - target).abs().total_cmp(&(b.1 - target).abs()))
        .map_or(0, |(i, _)| i)
}

/// Short name of a model, as in the JSON output.
pub fn model_name(model: FrontModel) -> &'static str {
    match model {
        FrontModel::LineOneWay => "line_one_way",
        FrontModel::LineTwoWay => "line_two_way",
        FrontModel::RingOneWay => "ring_one_way",
        FrontModel::RingTwoWay => "ring_two_way",
        FrontModel::PlaneWave => "plane_wave",
        FrontModel::PointSource => "point_source",
    }
}

/// Where a front starts and which way it goes: all a model's arrival time depends on besides
/// its speed. The one home of the models' path arithmetic, used by the fit's reach and
/// failure counts and by the figures alike.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FrontPath {
    pub model: FrontModel,
    pub origin: Origin,
    /// Ring fronts: which way round.
    pub rotation: Option<RingTravel>,
    /// One-way line fronts: whether they run towards increasing track coordinate.
    pub towards_increasing: Option<bool>,
    /// Plane waves: unit vector of travel.
    pub direction_xy: Option<[f64; 2]>,
}

impl FrontPath {
    /// Distance (micrometres) travelled from the origin to a position, along the model's path:
    /// negative behind a one-way line front or a plane wave. Lines read the track coordinate
    /// `along_um`; planes read the layout position `xy_um`; rings read `xy_um` when given, else
    /// the track coordinate. `None` when the position lacks what the model needs.
    pub fn distance_um(
        &self,
        track: &Track,
        along_um: Option<f64>,
        xy_um: Option<[f64; 2]>,
    ) -> Option<f64> {
        match (self.model, self.origin) {
            (FrontModel::LineOneWay, Origin::Along { along_um: s0 }) => {
                let d = along_um? - s0;
                Some(if self.towards_increasing == Some(false) {
                    -d
                } else {
                    d
                })
            }
            (FrontModel::LineTwoWay, Origin::Along { along_um: s0 }) => {
                Some((along_um? - s0).abs())
            }
            (FrontModel::RingOneWay | FrontModel::RingTwoWay, Origin::Angle { angle_rad }) => {
                let Track::Ring {
                    radius_um,
                    start_angle_rad,
                    rotation,
                    ..
                } = track
                else {
                    return None;
                };
                let a = match (xy_um, along_um) {
                    (Some(xy), _) => ring_angle(track, xy),
                    (None, Some(s)) => start_angle_rad + rotation.sign() * s / radius_um,
                    (None, None) => return None,
                };
                if self.model == FrontModel::RingOneWay {
                    let turn = if self.rotation == Some(RingTravel::Cw) {
                        angle_rad - a
                    } else {
                        a - angle_rad
                    };
                    Some(radius_um * wrap_angle(turn))
                } else {
                    let d = wrap_angle(a - angle_rad);
                    Some(radius_um * d.min(TAU - d).min(PI))
                }
            }
            (FrontModel::PlaneWave, Origin::Point { xy_um: o }) => {
                let (p, d) = (xy_um?, self.direction_xy.unwrap_or([1.0, 0.0]));
                Some((p[0] - o[0]) * d[0] + (p[1] - o[1]) * d[1])
            }
            (FrontModel::PointSource, Origin::Point { xy_um: o }) => {
                let p = xy_um?;
                Some(libm::hypot(p[0] - o[0], p[1] - o[1]))
            }
            _ => None,
        }
    }
}

impl FittedFront {
    /// The front's path (origin and way of travel).
    pub fn path(&self) -> FrontPath {
        FrontPath {
            model: self.model,
            origin: self.origin,
            rotation: self.rotation,
            towards_increasing: self.towards_increasing,
            direction_xy: self.direction_xy,
        }
    }
}

/// Distance (micrometres) of a site from a fitted front's origin along the model's path
/// ([`FrontPath::distance_um`]; 0 when the model and origin do not match): used to ask how
/// far a front got and which sites it never reached.
pub fn distance_from_origin(
    front: &FittedFront,
    track: &Track,
    along_um: f64,
    xy_um: [f64; 2],
) -> f64 {
    front
        .path()
        .distance_um(track, Some(along_um), Some(xy_um))
        .unwrap_or(0.0)
}
