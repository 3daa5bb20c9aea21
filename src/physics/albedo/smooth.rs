//! The smooth albedo: a `tanh` transition of width `width` between the ice and ice-free
//! albedos, centred on the freezing temperature:
//! `ice + (ice_free - ice) (1 + tanh((T - T_freeze) / width)) / 2`.
//!
//! When to use it: a differentiable albedo (no sub-band rule needed), as a check that a fold
//! found with the step albedo is not an artefact of its corner; wide transitions also stand
//! for a diffuse ice margin or snow cover.
//!
//! Reference: common practice (a `tanh` smoothing of the step albedo of Budyko 1969, Tellus
//! 21, 611-619).

/// Albedo and its derivatives by `T_{i-1}`, `T_i`, `T_{i+1}` (per K) of a band at `t` (K)
/// with ice-free albedo `ice_free`, ice albedo `ice`, freezing temperature `freeze` (K) and
/// transition width `width` (K).
#[inline(always)]
pub fn band(ice_free: f64, ice: f64, freeze: f64, width: f64, t: f64) -> (f64, [f64; 3]) {
    let (af, ai) = (ice_free, ice);
    let th = ((t - freeze) / width).tanh();
    let a = ai + (af - ai) * 0.5 * (1.0 + th);
    (a, [0.0, (af - ai) * 0.5 * (1.0 - th * th) / width, 0.0])
}
