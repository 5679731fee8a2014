//! Track kinds and the projection of a point onto a track.

use serde::{Deserialize, Serialize};
use std::f64::consts::TAU;

/// Sense in which a ring's arc coordinate increases, in the layout's own axes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Rotation {
    /// Counter-clockwise: increasing atan2(y - cy, x - cx).
    Ccw,
    /// Clockwise: decreasing atan2(y - cy, x - cx).
    Cw,
}

impl Rotation {
    /// +1 counter-clockwise, -1 clockwise: the sign of the track coordinate's growth in the
    /// layout's angle atan2(y - cy, x - cx).
    pub fn sign(self) -> f64 {
        match self {
            Rotation::Ccw => 1.0,
            Rotation::Cw => -1.0,
        }
    }
}

/// The path along which fronts are measured. Positions in micrometres, layout axes.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Track {
    /// A straight track from `start_um` along the unit vector `direction`.
    Line {
        start_um: [f64; 2],
        direction: [f64; 2],
        length_um: f64,
    },
    /// A track through ordered waypoints; the coordinate is arc length from the first.
    Polyline {
        waypoints_um: Vec<[f64; 2]>,
        length_um: f64,
    },
    /// A ring; the coordinate is arc length from `start_angle_rad`, increasing in `rotation`.
    Ring {
        centre_um: [f64; 2],
        radius_um: f64,
        start_angle_rad: f64,
        rotation: Rotation,
    },
    /// An open 2-D dish: no track coordinate.
    Plane,
}

/// Where a point lies relative to a track.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Projection {
    /// Coordinate along the track from its start, micrometres.
    pub along_um: f64,
    /// Signed distance from the track, micrometres: left of the direction of increasing
    /// coordinate for lines and polylines, outward for rings.
    pub lateral_um: f64,
}

impl Track {
    /// Short name of the kind: `line`, `polyline`, `ring`, `plane`.
    pub fn kind_name(&self) -> &'static str {
        match self {
            Track::Line { .. } => "line",
            Track::Polyline { .. } => "polyline",
            Track::Ring { .. } => "ring",
            Track::Plane => "plane",
        }
    }

    /// Length of the track in micrometres (circumference for a ring); `None` for a plane.
    pub fn length_um(&self) -> Option<f64> {
        match self {
            Track::Line { length_um, .. } | Track::Polyline { length_um, .. } => Some(*length_um),
            Track::Ring { radius_um, .. } => Some(TAU * radius_um),
            Track::Plane => None,
        }
    }

    /// Projects a point (micrometres) onto the track; `None` for a plane.
    pub fn project(&self, p: [f64; 2]) -> Option<Projection> {
        match self {
            Track::Line {
                start_um,
                direction,
                ..
            } => Some(project_on_line(*start_um, *direction, p)),
            Track::Polyline { waypoints_um, .. } => project_on_polyline(waypoints_um, p),
            Track::Ring {
                centre_um,
                radius_um,
                start_angle_rad,
                rotation,
            } => {
                let (dx, dy) = (p[0] - centre_um[0], p[1] - centre_um[1]);
                let angle = libm::atan2(dy, dx);
                let turned = rotation.sign() * (angle - start_angle_rad);
                Some(Projection {
                    along_um: radius_um * wrap_angle(turned),
                    lateral_um: libm::hypot(dx, dy) - radius_um,
                })
            }
            Track::Plane => None,
        }
    }
}

/// Wraps an angle into [0, 2 pi).
pub fn wrap_angle(angle: f64) -> f64 {
    let wrapped = angle.rem_euclid(TAU);
    // rem_euclid can round up to exactly TAU for tiny negative inputs.
    if wrapped >= TAU {
        0.0
    } else {
        wrapped
    }
}

pub(crate) fn project_on_line(start: [f64; 2], direction: [f64; 2], p: [f64; 2]) -> Projection {
    let (dx, dy) = (p[0] - start[0], p[1] - start[1]);
    Projection {
        along_um: dx * direction[0] + dy * direction[1],
        lateral_um: direction[0] * dy - direction[1] * dx,
    }
}

fn project_on_polyline(waypoints: &[[f64; 2]], p: [f64; 2]) -> Option<Projection> {
    let mut best: Option<(f64, Projection)> = None;
    let mut walked = 0.0;
    for w in waypoints.windows(2) {
        let (a, b) = (w[0], w[1]);
        let length = libm::hypot(b[0] - a[0], b[1] - a[1]);
        if length == 0.0 {
            continue;
        }
        let direction = [(b[0] - a[0]) / length, (b[1] - a[1]) / length];
        let on_line = project_on_line(a, direction, p);
        let t = on_line.along_um.clamp(0.0, length);
        let foot = [a[0] + t * direction[0], a[1] + t * direction[1]];
        let distance = libm::hypot(p[0] - foot[0], p[1] - foot[1]);
        let lateral = if on_line.lateral_um < 0.0 {
            -distance
        } else {
            distance
        };
        if best.as_ref().is_none_or(|(d, _)| distance < *d) {
            best = Some((
                distance,
                Projection {
                    along_um: walked + t,
                    lateral_um: lateral,
                },
            ));
        }
        walked += length;
    }
    best.map(|(_, projection)| projection)
}

/// Total length of a polyline, micrometres.
pub(crate) fn polyline_length(waypoints: &[[f64; 2]]) -> f64 {
    waypoints
        .windows(2)
        .map(|w| libm::hypot(w[1][0] - w[0][0], w[1][1] - w[0][1]))
        .sum()
}
