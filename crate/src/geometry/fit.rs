//! Fits of a line and a circle to site positions (micrometres).

use levenberg_marquardt::{LeastSquaresProblem, LevenbergMarquardt};
use nalgebra::{DMatrix, DVector, Dyn, OMatrix, Owned, Vector3, U3};
use serde::Serialize;

/// A straight line fitted by total least squares.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct LineFit {
    /// Mean of the points, micrometres.
    pub centroid_um: [f64; 2],
    /// Unit vector along the line (sign arbitrary here; the track fixes it).
    pub direction: [f64; 2],
    /// Singular values of the centred point matrix, largest first (micrometres).
    pub singular_values_um: [f64; 2],
    /// Root mean square of the perpendicular distances to the line, micrometres.
    pub rms_um: f64,
}

/// Total-least-squares line through `points` (micrometres): the first right singular vector
/// of the centred points (Golub & Van Loan, Matrix Computations, sec. 6.3, total least squares).
///
/// Returns `None` for fewer than two points or when all points coincide.
/// Complexity O(n).
pub fn fit_line_tls(points: &[[f64; 2]]) -> Option<LineFit> {
    let n = points.len();
    if n < 2 {
        return None;
    }
    let (cx, cy) = centroid(points);
    let centred = DMatrix::from_fn(n, 2, |i, j| points[i][j] - if j == 0 { cx } else { cy });
    let svd = centred.svd(false, true);
    let v_t = svd.v_t?;
    let s = &svd.singular_values;
    let (major, minor) = if s[0] >= s[1] { (0, 1) } else { (1, 0) };
    // All points coincide (or the values are not numbers): no direction.
    if s[major].partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
        return None;
    }
    let direction = [v_t[(major, 0)], v_t[(major, 1)]];
    Some(LineFit {
        centroid_um: [cx, cy],
        direction,
        singular_values_um: [s[major], s[minor]],
        rms_um: s[minor] / (n as f64).sqrt(),
    })
}

/// A circle in the layout's axes.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Circle {
    /// Centre, micrometres.
    pub centre_um: [f64; 2],
    /// Radius, micrometres.
    pub radius_um: f64,
}

impl Circle {
    /// Root mean square of the radial distances of `points` from the circle, micrometres.
    pub fn rms_um(&self, points: &[[f64; 2]]) -> f64 {
        let sum: f64 = points
            .iter()
            .map(|p| {
                let d = libm::hypot(p[0] - self.centre_um[0], p[1] - self.centre_um[1])
                    - self.radius_um;
                d * d
            })
            .sum();
        (sum / points.len().max(1) as f64).sqrt()
    }
}

/// Kasa's algebraic circle fit (Kasa 1976, IEEE Trans. Instrum. Meas. IM-25:8): linear least
/// squares on x^2 + y^2 + D x + E y + F = 0. Fast, but biased towards small radii on short
/// arcs; kept as a comparison and as a fallback start.
pub fn fit_circle_kasa(points: &[[f64; 2]]) -> Option<Circle> {
    let n = points.len();
    if n < 3 {
        return None;
    }
    let (cx, cy) = centroid(points);
    let a = DMatrix::from_fn(n, 3, |i, j| match j {
        0 => points[i][0] - cx,
        1 => points[i][1] - cy,
        _ => 1.0,
    });
    let b = DVector::from_fn(n, |i, _| {
        let (x, y) = (points[i][0] - cx, points[i][1] - cy);
        -(x * x + y * y)
    });
    let solution = a.svd(true, true).solve(&b, 1e-12).ok()?;
    let (d, e, f) = (solution[0], solution[1], solution[2]);
    let r2 = d * d / 4.0 + e * e / 4.0 - f;
    finite_circle(cx - d / 2.0, cy - e / 2.0, r2)
}

/// Taubin's algebraic circle fit (Taubin 1991, IEEE Trans. PAMI 13:1115), solved by Newton's
/// method on the characteristic polynomial as in Chernov, Circular and Linear Regression
/// (2010), sec. 5.9. Nearly unbiased on arcs; the usual start for a geometric fit.
///
/// Returns `None` for fewer than three points or collinear points.
pub fn fit_circle_taubin(points: &[[f64; 2]]) -> Option<Circle> {
    let n = points.len();
    if n < 3 {
        return None;
    }
    let (mx, my) = centroid(points);
    let (mut mxx, mut myy, mut mxy, mut mxz, mut myz, mut mzz) = (0.0, 0.0, 0.0, 0.0, 0.0, 0.0);
    for p in points {
        let (x, y) = (p[0] - mx, p[1] - my);
        let z = x * x + y * y;
        mxx += x * x;
        myy += y * y;
        mxy += x * y;
        mxz += x * z;
        myz += y * z;
        mzz += z * z;
    }
    let nf = n as f64;
    let (mxx, myy, mxy, mxz, myz, mzz) =
        (mxx / nf, myy / nf, mxy / nf, mxz / nf, myz / nf, mzz / nf);
    let mz = mxx + myy;
    let cov_xy = mxx * myy - mxy * mxy;
    let var_z = mzz - mz * mz;
    let a3 = 4.0 * mz;
    let a2 = -3.0 * mz * mz - mzz;
    let a1 = var_z * mz + 4.0 * cov_xy * mz - mxz * mxz - myz * myz;
    let a0 = mxz * (mxz * myy - myz * mxy) + myz * (myz * mxx - mxz * mxy) - var_z * cov_xy;
    let (a22, a33) = (a2 + a2, a3 + a3 + a3);
    let mut x = 0.0f64;
    let mut y = a0;
    for _ in 0..100 {
        let dy = a1 + x * (a22 + a33 * x);
        let x_new = x - y / dy;
        if x_new == x || !x_new.is_finite() {
            break;
        }
        let y_new = a0 + x_new * (a1 + x_new * (a2 + x_new * a3));
        if y_new.abs() >= y.abs() {
            break;
        }
        x = x_new;
        y = y_new;
    }
    let det = x * x - x * mz + cov_xy;
    if det == 0.0 || !det.is_finite() {
        return None;
    }
    let xc = (mxz * (myy - x) - myz * mxy) / det / 2.0;
    let yc = (myz * (mxx - x) - mxz * mxy) / det / 2.0;
    finite_circle(xc + mx, yc + my, xc * xc + yc * yc + mz)
}

/// Result of the geometric circle fit.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct CircleFit {
    /// Fitted circle.
    pub circle: Circle,
    /// Root mean square of the radial residuals, micrometres.
    pub rms_um: f64,
    /// Residual evaluations used by the Levenberg-Marquardt solver.
    pub evaluations: usize,
    /// Whether the solver reported convergence.
    pub converged: bool,
}

/// Geometric (orthogonal distance) circle fit: minimises the sum of squared radial distances
/// sum_i (|p_i - c| - R)^2 by Levenberg-Marquardt (MINPACK's lmder, as ported by the
/// `levenberg-marquardt` crate), started from `start` (use [`fit_circle_taubin`]).
///
/// Returns `None` for fewer than three points or when the solver leaves finite numbers.
pub fn fit_circle_geometric(points: &[[f64; 2]], start: Circle) -> Option<CircleFit> {
    if points.len() < 3 {
        return None;
    }
    let (mx, my) = centroid(points);
    let local: Vec<[f64; 2]> = points.iter().map(|p| [p[0] - mx, p[1] - my]).collect();
    let problem = CircleProblem {
        points: &local,
        params: Vector3::new(
            start.centre_um[0] - mx,
            start.centre_um[1] - my,
            start.radius_um,
        ),
    };
    // Tighter than the default (about 1e-8 relative) so the fit agrees with scipy to well
    // under a nanometre; the cost is a few more evaluations on a few hundred sites.
    let (solved, report) = LevenbergMarquardt::new()
        .with_ftol(1e-12)
        .with_xtol(1e-12)
        .with_gtol(1e-12)
        .minimize(problem);
    let p = solved.params;
    let circle = finite_circle(p[0] + mx, p[1] + my, p[2] * p[2])?;
    Some(CircleFit {
        rms_um: circle.rms_um(points),
        circle,
        evaluations: report.number_of_evaluations,
        converged: report.termination.was_successful(),
    })
}

struct CircleProblem<'a> {
    points: &'a [[f64; 2]],
    params: Vector3<f64>,
}

impl LeastSquaresProblem<f64, Dyn, U3> for CircleProblem<'_> {
    type ResidualStorage = Owned<f64, Dyn>;
    type JacobianStorage = Owned<f64, Dyn, U3>;
    type ParameterStorage = Owned<f64, U3>;

    fn set_params(&mut self, x: &Vector3<f64>) {
        self.params = *x;
    }

    fn params(&self) -> Vector3<f64> {
        self.params
    }

    fn residuals(&self) -> Option<DVector<f64>> {
        let (a, b, r) = (self.params[0], self.params[1], self.params[2]);
        Some(DVector::from_iterator(
            self.points.len(),
            self.points
                .iter()
                .map(|p| libm::hypot(p[0] - a, p[1] - b) - r),
        ))
    }

    fn jacobian(&self) -> Option<OMatrix<f64, Dyn, U3>> {
        let (a, b) = (self.params[0], self.params[1]);
        let mut j = OMatrix::<f64, Dyn, U3>::zeros(self.points.len());
        for (i, p) in self.points.iter().enumerate() {
            let d = libm::hypot(p[0] - a, p[1] - b);
            if d == 0.0 {
                return None;
            }
            j[(i, 0)] = -(p[0] - a) / d;
            j[(i, 1)] = -(p[1] - b) / d;
            j[(i, 2)] = -1.0;
        }
        Some(j)
    }
}

fn finite_circle(x: f64, y: f64, r2: f64) -> Option<Circle> {
    let radius = r2.sqrt();
    (x.is_finite() && y.is_finite() && radius.is_finite() && radius > 0.0).then_some(Circle {
        centre_um: [x, y],
        radius_um: radius,
    })
}

pub(crate) fn centroid(points: &[[f64; 2]]) -> (f64, f64) {
    let n = points.len().max(1) as f64;
    let (sx, sy) = points
        .iter()
        .fold((0.0, 0.0), |(sx, sy), p| (sx + p[0], sy + p[1]));
    (sx / n, sy / n)
}
