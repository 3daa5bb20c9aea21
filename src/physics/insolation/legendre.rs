//! The two-term Legendre fit `S0/4 (1 + s2 P2(x))` of the annual-mean insolation.
//!
//! When to use it: the classic smooth annual-mean forcing, cheapest, with `s2` either given or
//! taken from the obliquity; band means are exact for this form.
//!
//! Reference: North (1975, J. Atmos. Sci. 32) for the two-term fit; Nadeau and McGehee (2017,
//! Icarus 291) for `s2 = -(5/8) P2(cos obliquity)`.

use crate::grid::{p2, Grid};

/// `s2` of the Legendre fit implied by an obliquity (radians).
pub fn s2_from_obliquity(obliquity: f64) -> f64 {
    -0.625 * p2(obliquity.cos())
}

/// Band means of the Legendre form `S0/4 (1 + s2 P2(x))`, written into `out` (W m-2).
pub fn legendre_bands(grid: &Grid, s0: f64, s2: f64, out: &mut [f64]) {
    for (o, pb) in out.iter_mut().zip(&grid.p2_mean) {
        *o = 0.25 * s0 * (1.0 + s2 * pb);
    }
}
