//! Linear OLR `A + B (T - 273.15 K)`.
//!
//! When to use it: the classic fitted form, cheapest and exactly linear, so equilibria and
//! folds come out in closed form to compare against; valid over the range of its fit to
//! observed OLR (roughly 220 K to 310 K).
//!
//! Reference: Budyko (1969, Tellus 21, 611-619).

use super::ZERO_CELSIUS;

/// OLR (W m-2) and dOLR/dT (W m-2 K-1) at `t` (K) for `a` (W m-2, OLR at 0 C) and `b`
/// (W m-2 K-1).
#[inline(always)]
pub fn olr(a: f64, b: f64, t: f64) -> (f64, f64) {
    (a + b * (t - ZERO_CELSIUS), b)
}
