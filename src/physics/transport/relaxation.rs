//! Relaxation toward the global mean, `gamma (T_mean - T)`.
//!
//! When to use it: the closed-form model whose equilibria and folds are known exactly (a
//! check on the solvers), and transport that does not smooth the temperature jump at the ice
//! edge (the `step` albedo then uses the edge-balance rule).
//!
//! Reference: Budyko (1969, Tellus 21, 611-619).

use crate::grid::Grid;
use crate::linalg::Tridiag;

/// Transport convergence `rate (T_mean - T_i)` (W m-2) of every band into `out`.
#[inline]
pub fn convergence(grid: &Grid, rate: f64, temps: &[f64], out: &mut [f64]) {
    let mean = grid.mean(temps);
    for (o, t) in out.iter_mut().zip(temps) {
        *o = rate * (mean - t);
    }
}

/// Add the Jacobian of the convergence (W m-2 K-1) to `jac`: `-rate` on the diagonal plus the
/// rank-one part of the mean.
pub fn add_jacobian(rate: f64, jac: &mut Tridiag) {
    for d in jac.diag.iter_mut() {
        *d -= rate;
    }
    jac.rank_one = Some(jac.rank_one.unwrap_or(0.0) + rate);
}
