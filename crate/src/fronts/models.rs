//! Front models: activation time as a function of position, fitted per burst, chosen by BIC,
//! with bootstrap intervals over sites.

use super::regression::{
    huber, ols, ols_slope_weighted, theil_sen, theil_sen_point, TheilSenResampler,
};
use crate::geometry::{wrap_angle, Rotation, Track};
use crate::stats::quantile;
use nalgebra::DMatrix;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};
use std::f64::consts::{PI, TAU};

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
    /// Bayesian information criterion n ln(RSS / n) + k ln(n) (Schwarz 1978); lower is better.
    pub bic: f64,
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
    /// `ccw`/`cw` for one-way ring fronts, `both` for two-way ring fronts.
    pub rotation: Option<String>,
    /// For a one-way line: whether the front runs towards increasing track coordinate.
    pub towards_increasing: Option<bool>,
    pub sites_used: usize,
    /// 1 - RSS / TSS of the activation times.
    pub r2: f64,
    /// RMS residual, seconds.
    pub residual_rms_s: f64,
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
                let d = (b[0] - a[0]).hypot(b[1] - a[1]).max(f64::MIN_POSITIVE);
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
        Track::Ring { centre_um, .. } => (p[1] - centre_um[1]).atan2(p[0] - centre_um[0]),
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
    let fit = fit_1d(&u, t, settings.estimator, settings.confidence, true)?;
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
    for _ in 0..30 {
        if (b - a).abs() < 1e-3 {
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
                let u: Vec<f64> = p.along_um.iter().map(|s| (s - s0).abs()).collect();
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
            // A two-way front needs sites on both sides of its origin: at least two beyond
            // it each way. Nearer an end it is a one-way front with a noisy first site, and
            // letting the origin go there would fit that noise.
            let (lo_bound, hi_bound) = match (
                sorted.get(1),
                sorted.len().checked_sub(2).and_then(|i| sorted.get(i)),
            ) {
                (Some(&a), Some(&b)) if n >= 5 => (a, b),
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
        (FrontModel::RingOneWay, TrackFrame::Ring { radius_um }) => {
            let mut best = None;
            for rotation in [Rotation::Ccw, Rotation::Cw] {
                for &theta0 in &p.angle_rad {
                    let u: Vec<f64> = p
                        .angle_rad
                        .iter()
                        .map(|&a| {
                            let turn = match rotation {
                                Rotation::Ccw => a - theta0,
                                Rotation::Cw => theta0 - a,
                            };
                            radius_um * wrap_angle(turn)
                        })
                        .collect();
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
        (FrontModel::RingTwoWay, TrackFrame::Ring { radius_um }) => {
            let eval = |theta0: f64| {
                let u: Vec<f64> = p
                    .angle_rad
                    .iter()
                    .map(|&a| {
                        let d = wrap_angle(a - theta0);
                        radius_um * d.min(TAU - d)
                    })
                    .collect();
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
            let norm = g[0].hypot(g[1]);
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
            let eval = |x0: [f64; 2]| {
                let u: Vec<f64> = p
                    .xy_um
                    .iter()
                    .map(|x| (x[0] - x0[0]).hypot(x[1] - x0[1]))
                    .collect();
                candidate_1d(model, u, t, settings, Origin::Point { xy_um: x0 }, None)
            };
            let (mut lo, mut hi) = ([f64::INFINITY; 2], [f64::NEG_INFINITY; 2]);
            for x in &p.xy_um {
                for k in 0..2 {
                    lo[k] = lo[k].min(x[k]);
                    hi[k] = hi[k].max(x[k]);
                }
            }
            let mut best = None;
            for x in &p.xy_um {
                keep_best(&mut best, eval(*x));
            }
            for i in 0..=6 {
                for j in 0..=6 {
                    let x0 = [
                        lo[0] + (hi[0] - lo[0]) * i as f64 / 6.0,
                        lo[1] + (hi[1] - lo[1]) * j as f64 / 6.0,
                    ];
                    keep_best(&mut best, eval(x0));
                }
            }
            let mut step = ((hi[0] - lo[0]).max(hi[1] - lo[1]) / 6.0).max(1.0);
            let mut centre = match best.as_ref().map(|b| b.0.origin) {
                Some(Origin::Point { xy_um }) => xy_um,
                _ => return None,
            };
            for _ in 0..80 {
                if step < 0.5 {
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
            best.map(|b| b.0)
        }
        _ => None,
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

fn bic(rss: f64, n: usize, k: usize, floor: f64) -> f64 {
    let nf = n as f64;
    nf * (rss.max(floor) / nf).ln() + k as f64 * nf.ln()
}

/// Why a burst has no front.
pub type NoFront = String;

/// Fits every applicable model to one burst's activation pattern, keeps the one with the
/// lowest BIC, and bootstraps its speed over sites (conditional on the fitted origin).
///
/// No front, with a reason, when fewer than `min_sites` sites took part, when no model fits
/// better (by BIC) than one time for all sites (a synchronous event), or when the slope's
/// bootstrap interval includes zero. `time_step_s` (the sampling interval or the file's time
/// quantum) sets the floor of the residual sum of squares, n x step^2 / 12.
pub fn fit_front(
    points: &FrontPoints,
    track: &Track,
    settings: &FrontSettings,
    seed: u64,
    time_step_s: Option<f64>,
) -> Result<FittedFront, NoFront> {
    let n = points.len();
    if n < settings.min_sites.max(3) {
        return Err(format!(
            "only {n} sites took part; a front fit needs at least {}",
            settings.min_sites.max(3)
        ));
    }
    let frame = TrackFrame::of(track);
    let models: Vec<FrontModel> = if settings.models.is_empty() {
        FrontModel::for_track(track).to_vec()
    } else {
        settings.models.clone()
    };
    let step = time_step_s.unwrap_or(1e-6).max(1e-9);
    let floor = n as f64 * step * step / 12.0;
    let t = &points.t_s;
    let centre = match settings.estimator {
        Estimator::Ols => crate::stats::mean(t),
        _ => crate::stats::median(t),
    }
    .unwrap_or(0.0);
    let constant_rss: f64 = t.iter().map(|v| (v - centre) * (v - centre)).sum();
    let constant_bic = bic(constant_rss, n, 1, floor);

    let mut scored: Vec<(Candidate, f64)> = models
        .iter()
        .filter_map(|&m| fit_candidate(m, points, frame, settings))
        .filter(|c| c.slope.is_finite() && c.slope != 0.0)
        .map(|c| {
            let b = bic(c.rss, n, c.model.parameters(), floor);
            (c, b)
        })
        .collect();
    scored.sort_by(|a, b| a.1.total_cmp(&b.1));
    let candidates: Vec<ModelScore> = scored
        .iter()
        .map(|(c, b)| ModelScore {
            model: c.model,
            bic: *b,
            speed_mm_s: 1.0 / (c.slope.abs() * 1e3),
        })
        .collect();
    let Some((mut best, best_bic)) = scored.into_iter().next() else {
        return Err("no front model could be fitted to these sites".into());
    };
    if best.slowness.is_none() && best.analytic_ci.is_none() {
        // The origin search fits lines without intervals; the chosen one gets its own.
        if let Some(full) = fit_1d(&best.u, t, settings.estimator, settings.confidence, false) {
            best.analytic_ci = full.analytic_ci;
        }
    }
    if best_bic >= constant_bic {
        return Err(format!(
            "no propagation: the activation times fit one common time as well as any front (BIC {constant_bic:.1} against {best_bic:.1} for {})",
            model_name(best.model)
        ));
    }

    // Bootstrap over sites, origin held at its fitted place.
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut counts = vec![0u32; n];
    let mut slopes: Vec<f64> = Vec::with_capacity(settings.resamples);
    let resampler = (settings.estimator == Estimator::TheilSen && best.slowness.is_none())
        .then(|| TheilSenResampler::new(&best.u, t));
    let design = best.slowness.map(|_| {
        DMatrix::from_fn(n, 3, |i, j| match j {
            0 => 1.0,
            1 => points.xy_um[i][0],
            _ => points.xy_um[i][1],
        })
    });
    let direction = best.slowness.map(|g| {
        let norm = g[0].hypot(g[1]);
        [g[0] / norm, g[1] / norm]
    });
    for _ in 0..settings.resamples {
        counts.iter_mut().for_each(|c| *c = 0);
        for _ in 0..n {
            counts[rng.random_range(0..n)] += 1;
        }
        let slope = if let (Some(design), Some(dir)) = (&design, direction) {
            // Plane wave: slowness projected on the fitted direction of travel.
            plane_coefficients(design, t, settings.estimator, Some(&counts))
                .map(|b| b[1] * dir[0] + b[2] * dir[1])
        } else if let Some(r) = &resampler {
            r.slope(&counts)
        } else {
            match settings.estimator {
                Estimator::Ols => ols_slope_weighted(&best.u, t, &counts),
                _ => {
                    let d = DMatrix::from_fn(n, 2, |i, j| if j == 0 { 1.0 } else { best.u[i] });
                    huber(&d, t, Some(&counts)).map(|f| f.coefficients[1])
                }
            }
        };
        if let Some(s) = slope.filter(|s| s.is_finite()) {
            slopes.push(s);
        }
    }
    if slopes.len() < settings.resamples / 2 || slopes.len() < 20 {
        return Err(format!(
            "only {} of {} bootstrap resamples could be fitted; the sites are too few or too alike",
            slopes.len(),
            settings.resamples
        ));
    }
    let alpha = (1.0 - settings.confidence) / 2.0;
    let lo = quantile(&slopes, alpha).unwrap_or(f64::NAN);
    let hi = quantile(&slopes, 1.0 - alpha).unwrap_or(f64::NAN);
    if lo <= 0.0 && hi >= 0.0 {
        return Err(format!(
            "no resolvable propagation: the {:.0}% interval of the slope includes zero ({:.4} to {:.4} ms/mm)",
            settings.confidence * 100.0,
            lo * 1e6,
            hi * 1e6
        ));
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
            Rotation::Ccw => "ccw".to_string(),
            Rotation::Cw => "cw".to_string(),
        }),
        FrontModel::RingTwoWay => Some("both".into()),
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
        distance_um,
        candidates,
        resamples_used: slopes.len(),
        slope_ci95_s_per_um: [lo, hi],
    })
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

/// Distance (micrometres) of a position from a fitted front's origin along the model's path:
/// used to ask how far a front got and which sites it never reached.
pub fn distance_from_origin(
    front: &FittedFront,
    track: &Track,
    along_um: f64,
    xy_um: [f64; 2],
) -> f64 {
    match (front.model, front.origin) {
        (FrontModel::LineOneWay, Origin::Along { along_um: s0 }) => {
            let d = along_um - s0;
            if front.towards_increasing == Some(false) {
                -d
            } else {
                d
            }
        }
        (FrontModel::LineTwoWay, Origin::Along { along_um: s0 }) => (along_um - s0).abs(),
        (FrontModel::RingOneWay, Origin::Angle { angle_rad }) => {
            let r = match track {
                Track::Ring { radius_um, .. } => *radius_um,
                _ => 0.0,
            };
            let a = ring_angle(track, xy_um);
            let turn = if front.rotation.as_deref() == Some("cw") {
                angle_rad - a
            } else {
                a - angle_rad
            };
            r * wrap_angle(turn)
        }
        (FrontModel::RingTwoWay, Origin::Angle { angle_rad }) => {
            let r = match track {
                Track::Ring { radius_um, .. } => *radius_um,
                _ => 0.0,
            };
            let d = wrap_angle(ring_angle(track, xy_um) - angle_rad);
            r * d.min(TAU - d).min(PI)
        }
        (FrontModel::PlaneWave, Origin::Point { xy_um: o }) => {
            let d = front.direction_xy.unwrap_or([1.0, 0.0]);
            (xy_um[0] - o[0]) * d[0] + (xy_um[1] - o[1]) * d[1]
        }
        (FrontModel::PointSource, Origin::Point { xy_um: o }) => {
            (xy_um[0] - o[0]).hypot(xy_um[1] - o[1])
        }
        _ => 0.0,
    }
}
