//! The ramp albedo: the ice albedo below `T_freeze - width/2`, the ice-free albedo above
//! `T_freeze + width/2`, linear between.
//!
//! When to use it: a continuous albedo with a finite transition zone and exact plateaus (a
//! band is either wholly ice, wholly free or in transition), the piecewise-linear companion of
//! the smooth form.
//!
//! Reference: common practice (a linear ramp between the ice and ice-free albedos).

/// Albedo and its derivatives by `T_{i-1}`, `T_i`, `T_{i+1}` (per K) of a band at `t` (K)
/// with ice-free albedo `ice_free`, ice albedo `ice`, freezing temperature `freeze` (K) and
/// ramp width `width` (K).
#[inline(always)]
pub fn band(ice_free: f64, ice: f64, freeze: f64, width: f64, t: f64) -> (f64, [f64; 3]) {
    let (af, ai) = (ice_free, ice);
    let lo = freeze - 0.5 * width;
    if t <= lo {
        (ai, [0.0; 3])
    } else if t >= lo + width {
        (af, [0.0; 3])
    } else {
        let s = (af - ai) / width;
        (ai + s * (t - lo), [0.0, s, 0.0])
    }
}
