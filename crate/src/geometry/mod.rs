//! Track geometry: the path along which a front is timed, and every site's place on it.
//!
//! Kinds: straight [`Track::Line`], [`Track::Polyline`] through waypoints, [`Track::Ring`]
//! and [`Track::Plane`] (an open dish with no track). [`fit_track`] detects the kind from the
//! site positions, or takes the user's choice, and gives each site a coordinate along the
//! track and a lateral offset, flagging sites far off it.
//!
//! Conventions: micrometres in the layout's own axes. On a ring the coordinate is arc
//! length, increasing counter-clockwise (increasing atan2(y - cy, x - cx)) unless the
//! user reverses it. A layout in image coordinates (y pointing down) shows counter-clockwise
//! as clockwise on screen.

mod fit;
mod track;

pub use fit::{
    fit_circle_geometric, fit_circle_kasa, fit_circle_taubin, fit_line_tls, Circle, CircleFit,
    LineFit,
};
pub use track::{wrap_angle, Projection, Rotation, Track};

use crate::place::{Notice, Place};

/// Total length of a polyline through `waypoints`, micrometres.
pub fn polyline_length_um(waypoints: &[[f64; 2]]) -> f64 {
    track::polyline_length(waypoints)
}
use crate::recording::Site;
use serde::{Deserialize, Serialize};
use std::f64::consts::TAU;

/// Which track kind to use.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum TrackChoice {
    /// Detect from the site positions.
    #[default]
    Auto,
    Line,
    Polyline,
    Ring,
    Plane,
}

/// How the track is chosen and oriented. Lengths in micrometres.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct TrackSettings {
    /// Track kind, or detection.
    pub kind: TrackChoice,
    /// Ring centre; fitted when absent.
    pub ring_centre_um: Option<[f64; 2]>,
    /// Ring radius; with a given centre and no radius, the mean site distance is used.
    pub ring_radius_um: Option<f64>,
    /// Waypoints of a polyline track, in order (at least two).
    pub waypoints_um: Vec<[f64; 2]>,
    /// The site at (or nearest) the start of the track: for a line or polyline it picks the
    /// end; for a ring it sets the angle where the coordinate is 0.
    pub start_site: Option<String>,
    /// Flip the direction of increasing coordinate (after `start_site`); on a ring, measure
    /// clockwise.
    pub reverse: bool,
    /// Detection takes a line or ring when its residual RMS is at most this fraction of the
    /// site spacing (common practice, no source: a quarter spacing keeps neighbours in order).
    pub max_relative_residual: f64,
    /// A site is off the track when its lateral offset exceeds this many site spacings and
    /// five robust standard deviations of all offsets (common practice, no source).
    pub off_track_spacings: f64,
}

impl Default for TrackSettings {
    fn default() -> Self {
        TrackSettings {
            kind: TrackChoice::Auto,
            ring_centre_um: None,
            ring_radius_um: None,
            waypoints_um: Vec::new(),
            start_site: None,
            reverse: false,
            max_relative_residual: 0.25,
            off_track_spacings: 1.0,
        }
    }
}

/// A site's place on the track.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Placement {
    /// Site identifier.
    pub site: String,
    /// Coordinate along the track from its start, micrometres.
    pub along_um: f64,
    /// Signed distance from the track, micrometres (see [`Projection`]).
    pub lateral_um: f64,
    /// Far from the track (see [`TrackSettings::off_track_spacings`]); left out of the fit.
    pub off_track: bool,
}

/// How well one kind fits the sites.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Candidate {
    /// `line` or `ring`.
    pub kind: String,
    /// RMS distance of the sites from the fitted track, micrometres.
    pub residual_rms_um: f64,
    /// The same as a fraction of the site spacing.
    pub relative_residual: f64,
}

/// The chosen track and every site's place on it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TrackFit {
    /// The track.
    pub track: Track,
    /// `auto` when detected, `user` when the kind was given.
    pub chosen_by: String,
    /// One sentence on why this kind.
    pub reason: String,
    /// One entry per site, in site order; empty for a plane.
    pub placements: Vec<Placement>,
    /// RMS lateral offset of the on-track sites, micrometres; `None` for a plane.
    pub residual_rms_um: Option<f64>,
    /// Median distance from each site to its nearest neighbour, micrometres.
    pub site_spacing_um: Option<f64>,
    /// Angle of the ring covered by sites (360 minus the largest gap), degrees; rings only.
    pub arc_coverage_deg: Option<f64>,
    /// Fits that detection compared.
    pub candidates: Vec<Candidate>,
    /// Sites flagged as off the track.
    pub off_track_sites: Vec<String>,
    /// What the user should know.
    pub notices: Vec<Notice>,
}

/// What kind of problem stopped the geometry.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum GeometryProblem {
    TooFewSites,
    BadSetting,
    UnknownSite,
    FitFailed,
}

/// The geometry layer's error: where (site, setting) and one sentence.
#[derive(Debug, Clone, PartialEq, Serialize, thiserror::Error)]
#[error("track{}: {message}", located(place))]
pub struct GeometryError {
    /// Where the problem is (boxed to keep `Result`s small).
    pub place: Box<Place>,
    pub problem: GeometryProblem,
    pub message: String,
}

/// ", PLACE" when the place is known.
fn located(place: &Place) -> String {
    if place.is_unknown() {
        String::new()
    } else {
        format!(", {place}")
    }
}

fn error(problem: GeometryProblem, message: impl Into<String>) -> GeometryError {
    GeometryError {
        place: Box::default(),
        problem,
        message: message.into(),
    }
}

/// Sites that share one position (sorted by position, so n log n): an error when all do, as
/// no track runs through one point; otherwise a notice naming the first few groups, as no
/// front can be timed between sites in one place.
fn coincident_sites(sites: &[Site], notices: &mut Vec<Notice>) -> Result<(), GeometryError> {
    let mut order: Vec<usize> = (0..sites.len()).collect();
    let key = |i: &usize| (sites[*i].x_um, sites[*i].y_um);
    order.sort_by(|a, b| {
        let (ka, kb) = (key(a), key(b));
        ka.0.total_cmp(&kb.0).then(ka.1.total_cmp(&kb.1))
    });
    let groups: Vec<&[usize]> = order
        .chunk_by(|a, b| key(a) == key(b))
        .filter(|g| g.len() > 1)
        .collect();
    if sites.len() >= 2 && groups.len() == 1 && groups[0].len() == sites.len() {
        let s = &sites[0];
        return Err(error(
            GeometryProblem::TooFewSites,
            format!(
                "all {} sites lie at one position ({}, {}) µm, so no track runs through them: check the layout's position columns",
                sites.len(),
                crate::place::number(s.x_um),
                crate::place::number(s.y_um)
            ),
        ));
    }
    const SHOWN: usize = 5;
    for group in groups.iter().take(SHOWN) {
        let s = &sites[group[0]];
        let mut names: Vec<String> = group
            .iter()
            .take(10)
            .map(|&i| sites[i].id.clone())
            .collect();
        if group.len() > 10 {
            names.push(format!("and {} more", group.len() - 10));
        }
        notices.push(Notice::new(
            Place::default().at_site(&sites[group[1]].id),
            format!(
                "sites {} share one position ({}, {}) µm: they are kept, but no front can be timed between them; check the layout",
                names.join(", "),
                crate::place::number(s.x_um),
                crate::place::number(s.y_um)
            ),
        ));
    }
    if groups.len() > SHOWN {
        notices.push(Notice::new(
            Place::default(),
            format!(
                "{} more groups of sites share a position (the first {SHOWN} are named above)",
                groups.len() - SHOWN
            ),
        ));
    }
    Ok(())
}

/// Below this median spacing the layout cannot be of electrodes or cells (the densest arrays
/// have a pitch of about 10 µm; common practice, no source): a notice asks for the unit.
pub const MIN_PLAUSIBLE_SPACING_UM: f64 = 1.0;

/// Fits or builds the track for `sites` and places every site on it.
///
/// Detection (settings kind `auto`), in order:
/// 1. a total-least-squares line whose residual RMS is at most
///    [`TrackSettings::max_relative_residual`] of the site spacing;
/// 2. a circle (Taubin start, geometric Levenberg-Marquardt fit) within the same bound, from
///    five sites up, whose radius is at most twice the layout's extent;
/// 3. a strip: a line whose length is at least 5 times its width (width = 2 sqrt(3) x RMS
///    offset, the full width of a uniform band), for tracks with several rows of sites;
/// 4. an annulus: a circle that fits at least twice as well as the line, whose width is at
///    most a third of the radius and whose sites cover at least 180 degrees;
/// 5. otherwise a plane.
///
/// Fitted tracks are fitted again without the sites flagged off the track.
pub fn fit_track(sites: &[Site], settings: &TrackSettings) -> Result<TrackFit, GeometryError> {
    check_settings(settings)?;
    if sites.is_empty() {
        return Err(error(
            GeometryProblem::TooFewSites,
            "the layout has no sites, so there is no track to place them on",
        ));
    }
    let points: Vec<[f64; 2]> = sites.iter().map(Site::position_um).collect();
    let spacing = median_nearest_neighbour(&points);
    let mut notices = Vec::new();
    if let Some(d) = spacing.filter(|&d| d < MIN_PLAUSIBLE_SPACING_UM) {
        notices.push(Notice::new(
            Place::default(),
            format!(
                "the sites lie a median {d:.2e} µm from their nearest neighbours, closer than any two electrodes or cells can be (under {MIN_PLAUSIBLE_SPACING_UM} µm): check the layout's length unit; speeds are in the layout's scale"
            ),
        ));
    }
    coincident_sites(sites, &mut notices)?;
    let line = fit_line_tls(&points);
    let ring = if points.len() >= 3 {
        fit_ring(&points)
    } else {
        None
    };
    let relative = |rms: f64| spacing.map_or(f64::INFINITY, |s| rms / s);
    let mut candidates = Vec::new();
    if let Some(l) = &line {
        candidates.push(Candidate {
            kind: "line".into(),
            residual_rms_um: l.rms_um,
            relative_residual: relative(l.rms_um),
        });
    }
    if let Some(c) = &ring {
        candidates.push(Candidate {
            kind: "ring".into(),
            residual_rms_um: c.rms_um,
            relative_residual: relative(c.rms_um),
        });
    }

    let (kind, chosen_by, reason) = match settings.kind {
        TrackChoice::Auto => {
            let (kind, reason) =
                detect_kind(&points, line.as_ref(), ring.as_ref(), spacing, settings);
            (kind, "auto", reason)
        }
        given => (
            given,
            "user",
            "the kind was given in the settings".to_string(),
        ),
    };
    if kind == TrackChoice::Plane {
        return Ok(TrackFit {
            track: Track::Plane,
            chosen_by: chosen_by.into(),
            reason,
            placements: Vec::new(),
            residual_rms_um: None,
            site_spacing_um: spacing,
            arc_coverage_deg: None,
            candidates,
            off_track_sites: Vec::new(),
            notices,
        });
    }

    let start_index = match &settings.start_site {
        Some(id) => Some(
            sites
                .iter()
                .position(|s| &s.id == id)
                .ok_or_else(|| GeometryError {
                    place: Box::new(Place::site(id)),
                    problem: GeometryProblem::UnknownSite,
                    message: "the start site is not in the layout".into(),
                })?,
        ),
        None => None,
    };

    // Build, place, flag, and for fitted tracks fit once more without the flagged sites.
    let build = |use_site: &[bool]| -> Result<Track, GeometryError> {
        let chosen: Vec<[f64; 2]> = points
            .iter()
            .zip(use_site)
            .filter(|(_, &u)| u)
            .map(|(p, _)| *p)
            .collect();
        match kind {
            TrackChoice::Line => {
                let fit = fit_line_tls(&chosen).ok_or_else(|| {
                    error(
                        GeometryProblem::TooFewSites,
                        "a line needs at least two sites at different positions",
                    )
                })?;
                Ok(orient_line(&fit, &points, start_index, settings.reverse))
            }
            TrackChoice::Ring => {
                let circle = match settings.ring_centre_um {
                    Some(centre) => Circle {
                        centre_um: centre,
                        radius_um: settings
                            .ring_radius_um
                            .unwrap_or_else(|| mean_distance(&chosen, centre)),
                    },
                    None => fit_ring(&chosen)
                        .ok_or_else(|| {
                            error(
                                GeometryProblem::FitFailed,
                                "no circle fits the sites (they may lie on a straight line); give the ring centre and radius, or choose another kind",
                            )
                        })?
                        .circle,
                };
                Ok(orient_ring(circle, &points, start_index, settings.reverse))
            }
            TrackChoice::Polyline => Ok(orient_polyline(
                &settings.waypoints_um,
                &points,
                start_index,
                settings.reverse,
            )),
            TrackChoice::Auto | TrackChoice::Plane => Ok(Track::Plane),
        }
    };
    let fitted = matches!(kind, TrackChoice::Line)
        || (kind == TrackChoice::Ring && settings.ring_centre_um.is_none());
    let mut use_site = vec![true; points.len()];
    let mut track = build(&use_site)?;
    let mut placements = place_sites(&track, sites, spacing, settings.off_track_spacings);
    let flagged = placements.iter().filter(|p| p.off_track).count();
    if fitted && flagged > 0 && points.len() - flagged >= 3 {
        for (u, p) in use_site.iter_mut().zip(&placements) {
            *u = !p.off_track;
        }
        track = build(&use_site)?;
        placements = place_sites(&track, sites, spacing, settings.off_track_spacings);
    }
    let off_track_sites: Vec<String> = placements
        .iter()
        .filter(|p| p.off_track)
        .map(|p| p.site.clone())
        .collect();
    if !off_track_sites.is_empty() {
        notices.push(Notice::new(
            Place::default(),
            format!(
                "{} sites lie far from the track and were left out of its fit: {}",
                off_track_sites.len(),
                off_track_sites.join(", ")
            ),
        ));
    }
    let on: Vec<f64> = placements
        .iter()
        .filter(|p| !p.off_track)
        .map(|p| p.lateral_um)
        .collect();
    let residual_rms_um = Some(rms(&on));
    let arc_coverage_deg = match &track {
        Track::Ring { centre_um, .. } => {
            Some((TAU - largest_gap(&points, *centre_um).0).to_degrees())
        }
        _ => None,
    };
    Ok(TrackFit {
        track,
        chosen_by: chosen_by.into(),
        reason,
        placements,
        residual_rms_um,
        site_spacing_um: spacing,
        arc_coverage_deg,
        candidates,
        off_track_sites,
        notices,
    })
}

fn check_settings(settings: &TrackSettings) -> Result<(), GeometryError> {
    let bad = |what: &str, message: String| GeometryError {
        place: Box::default(),
        problem: GeometryProblem::BadSetting,
        message: format!("{what}: {message}"),
    };
    if let Some(c) = settings.ring_centre_um {
        if !(c[0].is_finite() && c[1].is_finite()) {
            return Err(bad(
                "track.ring_centre_um (--ring-centre)",
                format!("expected finite micrometres, found {c:?}"),
            ));
        }
    }
    if let Some(r) = settings.ring_radius_um {
        if !(r.is_finite() && r > 0.0) {
            return Err(bad(
                "track.ring_radius_um (--ring-radius)",
                format!(
                    "expected a radius above 0 µm, found {}",
                    crate::place::number(r)
                ),
            ));
        }
        if settings.ring_centre_um.is_none() {
            return Err(bad(
                "track.ring_radius_um (--ring-radius)",
                "a radius needs a centre too; give both, or neither to fit them".into(),
            ));
        }
    }
    if settings.kind == TrackChoice::Polyline {
        if settings.waypoints_um.len() < 2 {
            return Err(bad(
                "track.waypoints_um (--waypoints)",
                format!(
                    "a polyline track needs at least two waypoints, found {}",
                    settings.waypoints_um.len()
                ),
            ));
        }
        if settings
            .waypoints_um
            .iter()
            .flatten()
            .any(|v| !v.is_finite())
        {
            return Err(bad(
                "track.waypoints_um (--waypoints)",
                "expected finite micrometres".into(),
            ));
        }
        if track::polyline_length(&settings.waypoints_um) <= 0.0 {
            return Err(bad(
                "track.waypoints_um (--waypoints)",
                "the waypoints all lie at one point".into(),
            ));
        }
    }
    if !(settings.max_relative_residual.is_finite() && settings.max_relative_residual > 0.0) {
        return Err(bad(
            "track.max_relative_residual",
            format!(
                "expected a number above 0, found {}",
                settings.max_relative_residual
            ),
        ));
    }
    if !(settings.off_track_spacings.is_finite() && settings.off_track_spacings > 0.0) {
        return Err(bad(
            "track.off_track_spacings",
            format!(
                "expected a number of site spacings above 0, found {}",
                settings.off_track_spacings
            ),
        ));
    }
    Ok(())
}

fn detect_kind(
    points: &[[f64; 2]],
    line: Option<&LineFit>,
    ring: Option<&CircleFit>,
    spacing: Option<f64>,
    settings: &TrackSettings,
) -> (TrackChoice, String) {
    let (Some(line), Some(spacing)) = (line, spacing) else {
        return (
            TrackChoice::Plane,
            "fewer than two sites at different positions, so no track can be fitted".into(),
        );
    };
    let max_rel = settings.max_relative_residual;
    let line_rel = line.rms_um / spacing;
    if line_rel <= max_rel {
        return (
            TrackChoice::Line,
            format!(
                "the sites lie on a straight line (residual {line_rel:.3} of the site spacing)"
            ),
        );
    }
    // A circle much larger than the layout is a line seen through noise: a ring needs the
    // sites to span at least half its radius (an arc of about 30 degrees).
    let extent = {
        let (mut lo, mut hi) = ([f64::INFINITY; 2], [f64::NEG_INFINITY; 2]);
        for p in points {
            for k in 0..2 {
                lo[k] = lo[k].min(p[k]);
                hi[k] = hi[k].max(p[k]);
            }
        }
        libm::hypot(hi[0] - lo[0], hi[1] - lo[1])
    };
    let ring = ring.filter(|r| points.len() >= 5 && extent >= 0.5 * r.circle.radius_um);
    if let Some(ring) = ring {
        let ring_rel = ring.rms_um / spacing;
        if ring_rel <= max_rel {
            return (
                TrackChoice::Ring,
                format!("the sites lie on a circle (residual {ring_rel:.3} of the site spacing)"),
            );
        }
    }
    let width = 2.0 * 3f64.sqrt() * line.rms_um;
    let along: Vec<f64> = points
        .iter()
        .map(|p| track::project_on_line(line.centroid_um, line.direction, *p).along_um)
        .collect();
    let length = span(&along);
    if length >= 5.0 * width {
        return (
            TrackChoice::Line,
            format!(
                "the sites form a straight strip {length:.0} um long and about {width:.0} um wide"
            ),
        );
    }
    if let Some(ring) = ring {
        let width = 2.0 * 3f64.sqrt() * ring.rms_um;
        let coverage = TAU - largest_gap(points, ring.circle.centre_um).0;
        if ring.rms_um * 2.0 <= line.rms_um
            && width <= ring.circle.radius_um / 3.0
            && coverage >= TAU / 2.0
        {
            return (
                TrackChoice::Ring,
                format!(
                    "the sites form an annulus of radius {:.0} um, about {width:.0} um wide",
                    ring.circle.radius_um
                ),
            );
        }
    }
    (
        TrackChoice::Plane,
        format!("neither a line (residual {line_rel:.2} of the site spacing) nor a ring fits the sites, so they are taken as a 2-D dish"),
    )
}

/// Taubin start (Kasa if Taubin fails), then the geometric fit.
fn fit_ring(points: &[[f64; 2]]) -> Option<CircleFit> {
    let start = fit_circle_taubin(points).or_else(|| fit_circle_kasa(points))?;
    fit_circle_geometric(points, start)
}

/// Line direction: the larger component positive (left to right, or bottom to top for
/// tracks nearer vertical); then the start site's end first; then `reverse`.
fn orient_line(fit: &LineFit, points: &[[f64; 2]], start: Option<usize>, reverse: bool) -> Track {
    let mut d = fit.direction;
    let dominant = if d[0].abs() >= d[1].abs() { d[0] } else { d[1] };
    if dominant < 0.0 {
        d = [-d[0], -d[1]];
    }
    let along = |d: [f64; 2]| -> Vec<f64> {
        points
            .iter()
            .map(|p| track::project_on_line(fit.centroid_um, d, *p).along_um)
            .collect()
    };
    let mut s = along(d);
    let (lo, hi) = min_max(&s);
    if let Some(i) = start {
        if s[i] - lo > hi - s[i] {
            d = [-d[0], -d[1]];
        }
    }
    if reverse {
        d = [-d[0], -d[1]];
    }
    s = along(d);
    let (lo, hi) = min_max(&s);
    Track::Line {
        start_um: [
            fit.centroid_um[0] + lo * d[0],
            fit.centroid_um[1] + lo * d[1],
        ],
        direction: d,
        length_um: hi - lo,
    }
}

/// Ring start angle: the start site's angle; else, when the sites leave a gap (largest gap
/// over 1.5 times the even spacing), the first site after the gap in the direction of
/// travel; else angle 0 (the +x axis from the centre).
fn orient_ring(circle: Circle, points: &[[f64; 2]], start: Option<usize>, reverse: bool) -> Track {
    let c = circle.centre_um;
    let rotation = if reverse { Rotation::Cw } else { Rotation::Ccw };
    let angle_of = |p: [f64; 2]| libm::atan2(p[1] - c[1], p[0] - c[0]);
    let start_angle_rad = match start {
        Some(i) => angle_of(points[i]),
        None => {
            let (gap, before, after) = largest_gap(points, c);
            if points.len() >= 2 && gap > 1.5 * TAU / points.len() as f64 {
                match rotation {
                    Rotation::Ccw => after,
                    Rotation::Cw => before,
                }
            } else {
                0.0
            }
        }
    };
    Track::Ring {
        centre_um: c,
        radius_um: circle.radius_um,
        start_angle_rad,
        rotation,
    }
}

fn orient_polyline(
    waypoints: &[[f64; 2]],
    points: &[[f64; 2]],
    start: Option<usize>,
    reverse: bool,
) -> Track {
    let mut w = waypoints.to_vec();
    let length = track::polyline_length(&w);
    if let Some(i) = start {
        let probe = Track::Polyline {
            waypoints_um: w.clone(),
            length_um: length,
        };
        if probe
            .project(points[i])
            .is_some_and(|p| p.along_um > length / 2.0)
        {
            w.reverse();
        }
    }
    if reverse {
        w.reverse();
    }
    Track::Polyline {
        waypoints_um: w,
        length_um: length,
    }
}

fn place_sites(
    track: &Track,
    sites: &[Site],
    spacing: Option<f64>,
    off_spacings: f64,
) -> Vec<Placement> {
    let projections: Vec<Projection> = sites
        .iter()
        .filter_map(|s| track.project(s.position_um()))
        .collect();
    let laterals: Vec<f64> = projections.iter().map(|p| p.lateral_um).collect();
    let robust_sd = 1.4826 * median_absolute_deviation(&laterals);
    let limit = (off_spacings * spacing.unwrap_or(0.0)).max(5.0 * robust_sd);
    sites
        .iter()
        .zip(&projections)
        .map(|(s, p)| Placement {
            site: s.id.clone(),
            // + 0.0 turns -0.0 into 0.0, so no "-0.0" is ever shown.
            along_um: p.along_um + 0.0,
            lateral_um: p.lateral_um + 0.0,
            off_track: limit > 0.0 && p.lateral_um.abs() > limit,
        })
        .collect()
}

/// Largest angular gap between sites seen from `centre`: (gap, angle before it, angle after it), radians.
fn largest_gap(points: &[[f64; 2]], centre: [f64; 2]) -> (f64, f64, f64) {
    let mut angles: Vec<f64> = points
        .iter()
        .map(|p| libm::atan2(p[1] - centre[1], p[0] - centre[0]))
        .collect();
    angles.sort_by(f64::total_cmp);
    let n = angles.len();
    if n == 0 {
        return (TAU, 0.0, 0.0);
    }
    let mut best = (angles[0] + TAU - angles[n - 1], angles[n - 1], angles[0]);
    for w in angles.windows(2) {
        let gap = w[1] - w[0];
        if gap > best.0 {
            best = (gap, w[0], w[1]);
        }
    }
    best
}

/// Median over sites of the distance to the nearest other site at a different position
/// (micrometres); `None` when no two sites differ in position. Each site's neighbour is found
/// on a grid of about one site per cell, searched ring by ring outwards until no closer site
/// can remain: about linear in the sites (20,000 sites took 10 s with the all-pairs search).
pub fn median_nearest_neighbour(points: &[[f64; 2]]) -> Option<f64> {
    let mut nearest: Vec<f64> = nearest_neighbour_distances(points)
        .into_iter()
        .flatten()
        .collect();
    median(&mut nearest)
}

/// Each point's distance to its nearest point at a different position (`None` when all
/// share its position), by a grid search.
pub(crate) fn nearest_neighbour_distances(points: &[[f64; 2]]) -> Vec<Option<f64>> {
    let finite = |p: &&[f64; 2]| p[0].is_finite() && p[1].is_finite();
    let (mut x0, mut y0, mut x1, mut y1) = (
        f64::INFINITY,
        f64::INFINITY,
        f64::NEG_INFINITY,
        f64::NEG_INFINITY,
    );
    for p in points.iter().filter(finite) {
        x0 = x0.min(p[0]);
        y0 = y0.min(p[1]);
        x1 = x1.max(p[0]);
        y1 = y1.max(p[1]);
    }
    let extent = (x1 - x0).max(y1 - y0);
    if points.len() < 2 || extent.is_nan() || extent <= 0.0 {
        return vec![None; points.len()];
    }
    let cell = extent / (points.len() as f64).sqrt().ceil();
    let side = ((extent / cell).floor() as i64 + 1).max(1);
    let key = |p: &[f64; 2]| {
        (
            (((p[0] - x0) / cell).floor() as i64).clamp(0, side - 1),
            (((p[1] - y0) / cell).floor() as i64).clamp(0, side - 1),
        )
    };
    let mut grid: std::collections::HashMap<(i64, i64), Vec<usize>> =
        std::collections::HashMap::new();
    for (i, p) in points.iter().enumerate().filter(|(_, p)| finite(p)) {
        grid.entry(key(p)).or_default().push(i);
    }
    points
        .iter()
        .map(|p| {
            if !finite(&p) {
                return None;
            }
            let (cx, cy) = key(p);
            let mut best = f64::INFINITY;
            for r in 0..=side {
                // Every point in ring r or beyond is at least r - 1 whole cells away.
                if r >= 1 && best <= (r - 1) as f64 * cell {
                    break;
                }
                for gx in cx - r..=cx + r {
                    for gy in cy - r..=cy + r {
                        if (gx - cx).abs() != r && (gy - cy).abs() != r {
                            continue; // inside the ring: already searched
                        }
                        for &j in grid.get(&(gx, gy)).map_or(&[][..], Vec::as_slice) {
                            let q = points[j];
                            let d = libm::hypot(p[0] - q[0], p[1] - q[1]);
                            if d > 0.0 && d < best {
                                best = d;
                            }
                        }
                    }
                }
            }
            best.is_finite().then_some(best)
        })
        .collect()
}

fn median(values: &mut [f64]) -> Option<f64> {
    if values.is_empty() {
        return None;
    }
    values.sort_by(f64::total_cmp);
    let n = values.len();
    Some(if n % 2 == 1 {
        values[n / 2]
    } else {
        0.5 * (values[n / 2 - 1] + values[n / 2])
    })
}

fn median_absolute_deviation(values: &[f64]) -> f64 {
    let mut v = values.to_vec();
    let Some(m) = median(&mut v) else { return 0.0 };
    let mut dev: Vec<f64> = values.iter().map(|x| (x - m).abs()).collect();
    median(&mut dev).unwrap_or(0.0)
}

fn rms(values: &[f64]) -> f64 {
    if values.is_empty() {
        return 0.0;
    }
    (values.iter().map(|v| v * v).sum::<f64>() / values.len() as f64).sqrt()
}

fn mean_distance(points: &[[f64; 2]], c: [f64; 2]) -> f64 {
    points
        .iter()
        .map(|p| libm::hypot(p[0] - c[0], p[1] - c[1]))
        .sum::<f64>()
        / points.len().max(1) as f64
}

fn min_max(values: &[f64]) -> (f64, f64) {
    values
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &v| {
            (lo.min(v), hi.max(v))
        })
}

fn span(values: &[f64]) -> f64 {
    let (lo, hi) = min_max(values);
    hi - lo
}

#[cfg(test)]
mod nearest_tests {
    use super::nearest_neighbour_distances;
    use rand::{Rng, SeedableRng};

    /// The all-pairs search, the reference.
    fn brute(points: &[[f64; 2]]) -> Vec<Option<f64>> {
        points
            .iter()
            .enumerate()
            .map(|(i, p)| {
                points
                    .iter()
                    .enumerate()
                    .filter(|(j, _)| *j != i)
                    .map(|(_, q)| libm::hypot(p[0] - q[0], p[1] - q[1]))
                    .filter(|&d| d > 0.0)
                    .reduce(f64::min)
            })
            .collect()
    }

    #[test]
    fn the_grid_search_equals_the_all_pairs_search() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(17);
        for case in 0..40 {
            let n = 2 + case * 7;
            let mut points: Vec<[f64; 2]> = (0..n)
                .map(|_| [rng.random::<f64>() * 3000.0, rng.random::<f64>() * 300.0])
                .collect();
            match case % 4 {
                1 => points.iter_mut().for_each(|p| p[0] = 100.0), // a vertical line
                2 => points[0] = points[1],                        // a coincident pair
                3 => points.push([1e6, -1e6]),                     // one far away
                _ => {}
            }
            assert_eq!(
                nearest_neighbour_distances(&points),
                brute(&points),
                "case {case}"
            );
        }
        assert_eq!(
            nearest_neighbour_distances(&[[1.0, 1.0], [1.0, 1.0]]),
            vec![None, None]
        );
    }
}
