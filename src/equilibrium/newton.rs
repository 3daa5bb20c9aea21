//! Damped Newton iteration on the steady equations `G(T) = 0` (W m-2).
//!
//! The Jacobian is the model's analytic one: tridiagonal transport, the OLR derivative and the
//! albedo derivative (with the `step` albedo's edge band coupling neighbours), plus the rank-one
//! part of relaxation transport. Steps are damped by backtracking on the largest residual
//! (Armijo-like, common practice) and limited to `max_change` K per band.
//!
//! Reference: Deuflhard, Newton Methods for Nonlinear Problems (2004), chapter 3.

use crate::integrate::{band_latitude, check_state, worst_index, SolverError};
use crate::linalg::{Tridiag, TridiagLu};
use crate::model::{Model, Workspace};

/// Options of the iteration.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct NewtonOptions {
    /// Stop when the largest |G_i| is below this, W m-2.
    pub tolerance_wm2: f64,
    /// Iteration limit.
    pub max_iterations: usize,
    /// Largest change of any band per iteration, K.
    pub max_change: f64,
}

impl Default for NewtonOptions {
    fn default() -> Self {
        NewtonOptions {
            tolerance_wm2: 1e-9,
            max_iterations: 100,
            max_change: 40.0,
        }
    }
}

/// A converged steady state.
#[derive(Debug, Clone, PartialEq)]
pub struct NewtonResult {
    /// Temperatures, K.
    pub state: Vec<f64>,
    /// Largest |G_i| at the end, W m-2.
    pub residual_wm2: f64,
    /// Iterations used.
    pub iterations: usize,
}

fn max_abs(v: &[f64]) -> f64 {
    v.iter().fold(0.0, |m, x| m.max(x.abs()))
}

/// Where the residual `g` (W m-2) is worst at state `y` (K), for messages: band, latitude,
/// temperature and residual.
fn worst_residual(model: &Model, t_years: f64, y: &[f64], g: &[f64]) -> String {
    let i = worst_index(g);
    format!(
        "at model year {t_years}, largest residual {:.3e} W m-2 in band {i} at latitude {:.2} degrees (temperature {:.3} K)",
        g[i],
        band_latitude(model, i),
        y[i]
    )
}

/// Solve `G(T) = 0` at model time `t_years` from `start`.
pub fn newton(
    model: &Model,
    t_years: f64,
    start: &[f64],
    opts: NewtonOptions,
) -> Result<NewtonResult, SolverError> {
    let n = model.len();
    let mut ws = Workspace::new(n);
    let mut y = start.to_vec();
    let mut g = vec![0.0; n];
    let mut trial = vec![0.0; n];
    let mut g_trial = vec![0.0; n];
    let mut delta = vec![0.0; n];
    let mut jac = Tridiag::zeros(n);
    let mut lu = TridiagLu::new(n, &model.grid.weights);
    let (lo, hi) = model.valid_range();
    model.heating(t_years, &y, &mut ws, &mut g);
    let mut r = max_abs(&g);
    let fail = |detail: String| SolverError::NoConvergence {
        what: "Newton's method".into(),
        detail,
    };
    for it in 0..opts.max_iterations {
        if r <= opts.tolerance_wm2 {
            return Ok(NewtonResult {
                state: y,
                residual_wm2: r,
                iterations: it,
            });
        }
        model.heating_jacobian(t_years, &y, &mut ws, &mut jac);
        lu.factor(&jac).map_err(|e| {
            fail(format!(
                "singular Jacobian at iteration {it} ({e}); the state may sit on a fold; {}",
                worst_residual(model, t_years, &y, &g)
            ))
        })?;
        for i in 0..n {
            delta[i] = -g[i];
        }
        lu.solve(&mut delta);
        let big = max_abs(&delta);
        let mut lambda = if big > opts.max_change {
            opts.max_change / big
        } else {
            1.0
        };
        let mut accepted = false;
        for _ in 0..20 {
            for i in 0..n {
                trial[i] = (y[i] + lambda * delta[i]).clamp(lo, hi);
            }
            model.heating(t_years, &trial, &mut ws, &mut g_trial);
            let rt = max_abs(&g_trial);
            if rt.is_finite() && (rt < (1.0 - 1e-4 * lambda) * r || rt <= opts.tolerance_wm2) {
                accepted = true;
                std::mem::swap(&mut y, &mut trial);
                std::mem::swap(&mut g, &mut g_trial);
                r = rt;
                break;
            }
            lambda *= 0.5;
        }
        if !accepted {
            // Round-off floor: accept a residual near machine precision of the terms. The
            // transport term is a difference of neighbours scaled by about D n^2, so its
            // round-off is about eps |J_ii T_i| (the residual floor grows as n^2: 2e-5 W m-2
            // at 20000 bands, far above the default tolerance).
            let transport = (0..n).fold(0.0_f64, |m, i| m.max((jac.diag[i] * y[i]).abs()));
            let scale = 1e-12 * (1.0 + max_abs(&model.budget(t_years, &y, &mut ws).absorbed))
                + 4.0 * f64::EPSILON * transport;
            if r <= scale.max(opts.tolerance_wm2 * 10.0) {
                return Ok(NewtonResult {
                    state: y,
                    residual_wm2: r,
                    iterations: it,
                });
            }
            return Err(fail(format!(
                "no descent at iteration {it}; {}",
                worst_residual(model, t_years, &y, &g)
            )));
        }
    }
    if r <= opts.tolerance_wm2 {
        check_state(model, t_years, &y)?;
        return Ok(NewtonResult {
            state: y,
            residual_wm2: r,
            iterations: opts.max_iterations,
        });
    }
    Err(fail(format!(
        "{} iterations (equilibrium.max_iterations) ended {}",
        opts.max_iterations,
        worst_residual(model, t_years, &y, &g)
    )))
}
