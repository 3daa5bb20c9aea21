//! Top-of-atmosphere insolation by band, in W m-2.
//!
//! Three forms (DESIGN section 2): the two-term Legendre fit `S0/4 (1 + s2 P2(x))`, the exact
//! annual mean by latitude from the orbit, and the daily mean at a time of year (seasonal).
//!
//! Reference: Berger (1978, J. Atmos. Sci. 35, 2362-2367) for the daily-mean insolation
//! `Q = S0/pi (a/r)^2 (h0 sin(phi) sin(delta) + cos(phi) cos(delta) sin(h0))`;
//! Nadeau and McGehee (2017, Icarus 291) for `s2 = -(5/8) P2(cos obliquity)`.

use crate::grid::Grid;
use crate::quadrature::ClusteredRule;
use std::f64::consts::PI;

pub mod annual_mean;
pub mod legendre;
pub mod seasonal;

pub use annual_mean::annual_mean_bands;
pub use legendre::{legendre_bands, s2_from_obliquity};
pub use seasonal::{SeasonalTable, SEASONAL_TABLE_POINTS};

/// Daily-mean insolation divided by `S0 (a/r)^2` at `x = sin(latitude)` for declination
/// `delta` (radians): `(h0 x sin(delta) + cos(phi) cos(delta) sin(h0)) / pi`.
pub fn daily_mean_shape(x: f64, sin_delta: f64, cos_delta: f64) -> f64 {
    let cos_phi = (1.0 - x * x).max(0.0).sqrt();
    let num = -x * sin_delta;
    let den = cos_phi * cos_delta;
    // cos(h0) = -tan(phi) tan(delta), clipped for polar day (h0 = pi) and night (h0 = 0).
    let h0 = if num >= den {
        0.0
    } else if num <= -den {
        PI
    } else {
        (num / den).acos()
    };
    (h0 * x * sin_delta + cos_phi * cos_delta * h0.sin()) / PI
}

/// Mean of `daily_mean_shape` over `x` in `[a, b]` for one declination, splitting the band at
/// the polar circles `|x| = cos(delta)` where the integrand has a kink.
fn band_mean_shape(rule: &ClusteredRule, a: f64, b: f64, sin_delta: f64, cos_delta: f64) -> f64 {
    let mut cuts = [a, 0.0, 0.0, b];
    let mut k = 1;
    for c in [-cos_delta, cos_delta] {
        if c > a && c < b {
            cuts[k] = c;
            k += 1;
        }
    }
    cuts[k] = b;
    let mut total = 0.0;
    for w in cuts[..=k].windows(2) {
        total += rule.integrate(w[0], w[1], |x| daily_mean_shape(x, sin_delta, cos_delta));
    }
    total / (b - a)
}

/// Position on the orbit at a model time.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OrbitPoint {
    /// Sine of the solar declination.
    pub sin_delta: f64,
    /// `(a/r)^2`, the inverse-square distance factor.
    pub distance_factor: f64,
    /// True longitude of the planet from the northern spring equinox, radians.
    pub longitude: f64,
}

/// Orbit position at model time `t_years`, with time zero (and every whole year) at the northern
/// spring equinox. `perihelion` is the true longitude of perihelion measured from that equinox
/// (radians). Kepler's equation `M = E - e sin E` is solved by Newton iteration from Danby's
/// starting value `E0 = M + 0.85 e sign(sin M)`, which converges for every `e < 1` (Danby 1987,
/// Celest. Mech. 40; common practice).
pub fn orbit_at(t_years: f64, obliquity: f64, ecc: f64, perihelion: f64) -> OrbitPoint {
    let true_to_ecc = |v: f64| 2.0 * (((1.0 - ecc) / (1.0 + ecc)).sqrt() * (0.5 * v).tan()).atan();
    let e0 = true_to_ecc(-perihelion);
    let m0 = e0 - ecc * e0.sin();
    // Mean anomaly reduced to [-pi, pi).
    let m = (m0 + 2.0 * PI * t_years.rem_euclid(1.0) + PI).rem_euclid(2.0 * PI) - PI;
    let mut e = m + 0.85 * ecc * if m.sin() < 0.0 { -1.0 } else { 1.0 };
    for _ in 0..50 {
        let d = (e - ecc * e.sin() - m) / (1.0 - ecc * e.cos());
        e -= d;
        if d.abs() < 1e-15 {
            break;
        }
    }
    let v = 2.0 * (((1.0 + ecc) / (1.0 - ecc)).sqrt() * (0.5 * e).tan()).atan();
    let lambda = v + perihelion;
    let r_over_a = 1.0 - ecc * e.cos();
    OrbitPoint {
        sin_delta: obliquity.sin() * lambda.sin(),
        distance_factor: 1.0 / (r_over_a * r_over_a),
        longitude: lambda,
    }
}

/// Band means of the daily-mean insolation (W m-2) at one orbit position.
pub fn daily_mean_bands(grid: &Grid, rule: &ClusteredRule, s0: f64, at: OrbitPoint, out: &mut [f64]) {
    let cd = (1.0 - at.sin_delta * at.sin_delta).sqrt();
    for (i, o) in out.iter_mut().enumerate() {
        let (a, b) = (grid.x_faces[i], grid.x_faces[i + 1]);
        *o = s0 * at.distance_factor * band_mean_shape(rule, a, b, at.sin_delta, cd);
    }
}

/// Antiderivative in `x = sin(latitude)` of [`daily_mean_shape`] for a declination with sine
/// `sin_delta`, exact and valid on all of `[-1, 1]` (polar day and night included):
///
/// ```text
/// F(x) = [ sd x^2 h0 + atan2(x, r) - sd atan2(sd x, r) + x r ] / (2 pi),
/// r = sqrt(max(cos^2(delta) - x^2, 0)),   h0 = atan2(r, -x sd)   (the hour angle of sunset)
/// ```
///
/// Derivation (integration by parts, our own): on the sunlit-and-dark latitudes
/// `cos(phi) cos(delta) sin(h0) = r` and `d h0/dx = sd / ((1 - x^2) r)`; the substitution
/// `x = cos(delta) sin(theta)` integrates `1 / ((1 - x^2) r)` to `atan2(sd x, r) / sd`. In polar
/// day (`r = 0`, `h0 = pi`) `F' = x sd`, in polar night `F' = 0`, and the same expression holds,
/// so band means need no splitting: `(F(b) - F(a)) / (b - a)`. Checked against the quadrature
/// of [`daily_mean_shape`] in the tests.
#[inline]
pub fn daily_mean_antiderivative(x: f64, sin_delta: f64) -> f64 {
    let sd = sin_delta;
    let r = (1.0 - sd * sd - x * x).max(0.0).sqrt();
    (sd * x * x * r.atan2(-x * sd) + x.atan2(r) - sd * (sd * x).atan2(r) + x * r) * (0.5 / PI)
}

/// Band mean of [`daily_mean_shape`] over `[a, b]` from the exact antiderivative.
#[inline]
pub fn band_mean_shape_exact(a: f64, b: f64, sin_delta: f64) -> f64 {
    (daily_mean_antiderivative(b, sin_delta) - daily_mean_antiderivative(a, sin_delta)) / (b - a)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::grid::{Domain, Spacing};
    use approx::assert_relative_eq;

    #[test]
    fn annual_mean_global_mean_is_s0_over_4_sqrt_1_minus_e2() {
        // Reference: DESIGN section 6; follows from Kepler's second law (common practice).
        for (dom, n) in [(Domain::Globe, 36), (Domain::Hemisphere, 90), (Domain::Globe, 7)] {
            for sp in [Spacing::EqualArea, Spacing::EqualAngle] {
                let g = Grid::new(dom, sp, n);
                for (eps_deg, e) in [(23.44_f64, 0.0167), (60.0, 0.1), (0.0, 0.0), (90.0, 0.3)] {
                    let mut s = vec![0.0; n];
                    annual_mean_bands(&g, 1361.0, eps_deg.to_radians(), e, &mut s);
                    let want = 1361.0 / (4.0 * (1.0_f64 - e * e).sqrt());
                    assert_relative_eq!(g.mean(&s), want, max_relative = 1e-9);
                }
            }
        }
    }

    #[test]
    fn annual_mean_p2_coefficient_matches_nadeau_mcgehee() {
        // Reference: Nadeau and McGehee (2017, Icarus): s2 = -(5/8) P2(cos obliquity) is the P2
        // Legendre coefficient of S/(S0/4). Projection on a fine equal-area hemisphere grid
        // (band means times the exact band integral of P2; O(dx^2) = 1e-7 error at 2000 bands).
        let n = 2000;
        let g = Grid::new(Domain::Hemisphere, Spacing::EqualArea, n);
        for eps_deg in [10.0_f64, 23.44, 45.0, 54.0] {
            let mut s = vec![0.0; n];
            annual_mean_bands(&g, 4.0, eps_deg.to_radians(), 0.0, &mut s);
            let proj: f64 = (0..n).map(|i| s[i] * g.p2_mean[i] * g.dx[i]).sum::<f64>() * 5.0;
            assert_relative_eq!(proj, s2_from_obliquity(eps_deg.to_radians()), epsilon = 1e-6);
        }
    }

    #[test]
    fn polar_solstice_and_equinox_values() {
        // Reference: Berger (1978): at the solstice the pole gets S0 sin(obliquity) (circular
        // orbit); at an equinox the equator gets S0/pi.
        let eps = 23.44_f64.to_radians();
        let sd = eps.sin();
        assert_relative_eq!(
            1361.0 * daily_mean_shape(1.0, sd, eps.cos()),
            1361.0 * sd,
            epsilon = 1e-9
        );
        assert_relative_eq!(daily_mean_shape(0.0, 0.0, 1.0), 1.0 / PI, epsilon = 1e-15);
        let at = orbit_at(0.25, eps, 0.0, 0.0);
        assert_relative_eq!(at.sin_delta, sd, epsilon = 1e-12);
    }
}
