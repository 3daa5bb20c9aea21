//! Gray-body OLR `eps sigma T^4` with an effective emissivity `eps`.
//!
//! When to use it: a radiative form that stays physical at any temperature (snowball and hot
//! states), with one parameter for the greenhouse effect.
//!
//! Reference: the Stefan-Boltzmann law, constant from CODATA 2018; the effective-emissivity
//! form is common practice.

use super::STEFAN_BOLTZMANN;

/// OLR (W m-2) and dOLR/dT (W m-2 K-1) at `t` (K) for emissivity `emissivity`.
#[inline(always)]
pub fn olr(emissivity: f64, t: f64) -> (f64, f64) {
    let t3 = t * t * t;
    (
        emissivity * STEFAN_BOLTZMANN * t3 * t,
        4.0 * emissivity * STEFAN_BOLTZMANN * t3,
    )
}
