//! Relaxation toward the global mean, `gamma (T_mean - T)`.
//!
//! When to use it: the closed-form model whose equilibria and folds are known exactly (a
//! check on the solvers), and transport that does not smooth the temperature jump at the ice
//! edge (the `step` albedo then uses the edge-balance rule).
//!
//! Reference: Budyko (1969, Tellus 21, 611-619).

use super::TransportForm;
use crate::grid::Grid;
use crate::linalg::Tridiag;
use crate::registry::{Key, Kind, Range};

/// `transport.kind = "relaxation"`: its key (a forcing channel) and form.
pub const KIND: Kind<TransportForm> = Kind {
    name: "relaxation",
    keys: &[Key::number(
        "transport.relaxation_rate",
        "W m-2 K-1",
        3.8,
        Range::Closed(0.0, 1e6),
    )
    .label("Relaxation rate γ (W m⁻² K⁻¹)")
    .kinds(&["relaxation"])
    .varies()
    .set(|t, v| {
        if let TransportForm::Relaxation { rate } = t {
            *rate = v;
        }
        Ok(())
    })],
    build: |r| {
        Ok(TransportForm::Relaxation {
            rate: r.num("transport.relaxation_rate")?,
        })
    },
};

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
