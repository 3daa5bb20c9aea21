//! The exact annual-mean insolation by latitude from the orbit (obliquity, eccentricity).
//!
//! When to use it: an annual-mean model that must keep the polar-circle structure the
//! two-term fit smooths away, or obliquities far from today's.
//!
//! Reference: Berger (1978, J. Atmos. Sci. 35, 2362-2367) for the daily mean it averages.

use super::band_mean_shape;
use crate::grid::Grid;
use crate::quadrature::ClusteredRule;
use std::f64::consts::PI;

/// Band means of the exact annual-mean insolation (W m-2) for solar constant `s0`, obliquity
/// `obliquity` (radians) and eccentricity `ecc`. Time-averaged over one orbit; the result does
/// not depend on the longitude of perihelion.
///
/// With `dt/T = (r/a)^2 / sqrt(1 - e^2) dlambda / (2 pi)` the `(a/r)^2` of the daily mean cancels,
/// leaving `S0 / sqrt(1 - e^2)` times the mean over true longitude of the daily-mean shape; the
/// shape depends on `sin(delta) = sin(obliquity) sin(lambda)`, so half an orbit suffices.
pub fn annual_mean_bands(grid: &Grid, s0: f64, obliquity: f64, ecc: f64, out: &mut [f64]) {
    let rule = ClusteredRule::new(24);
    let sin_eps = obliquity.sin();
    let scale = s0 / (1.0 - ecc * ecc).sqrt();
    for (i, o) in out.iter_mut().enumerate() {
        let (a, b) = (grid.x_faces[i], grid.x_faces[i + 1]);
        // Kinks in lambda where a band face crosses a polar circle: cos(delta) = |face|.
        let mut cuts = vec![-0.5 * PI, 0.5 * PI];
        for f in [a, b] {
            let sd = (1.0 - f * f).max(0.0).sqrt(); // |sin(delta)| at the crossing
            if sin_eps > 0.0 && sd < sin_eps && f.abs() < 1.0 {
                let lam = (sd / sin_eps).asin();
                cuts.push(lam);
                cuts.push(-lam);
            }
        }
        cuts.sort_by(|p, q| p.total_cmp(q));
        cuts.dedup_by(|p, q| (*p - *q).abs() < 1e-15);
        let mut acc = 0.0;
        for w in cuts.windows(2) {
            acc += rule.integrate(w[0], w[1], |lam| {
                let sd = sin_eps * lam.sin();
                let cd = (1.0 - sd * sd).sqrt();
                band_mean_shape(&rule, a, b, sd, cd)
            });
        }
        *o = scale * acc / PI;
    }
}
