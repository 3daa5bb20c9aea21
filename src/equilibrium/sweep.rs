//! Quasi-static two-way sweeps: step a control up and then down, settling at each value from
//! the previous state; detect jumps between branches and refine each by bisection.
//!
//! At each value: Newton from the previous state first, accepted only if the result is stable
//! and on the same branch (no jump in the ice edge or global mean); otherwise the adaptive
//! implicit scheme integrates from the previous state until the largest |dT/dt| is below the
//! settle criterion (or the year limit), so after a tipping point the state falls where the
//! dynamics take it.

use super::control::Controlled;
use super::settle::settle;
use super::stability::leading_eigenvalue;
use super::{newton, NewtonOptions};
use crate::config::spec::SweepSpec;
use crate::config::ConfigError;
use crate::integrate::SolverError;
use crate::model::Model;

/// A jump larger than this in the ice edge (degrees) or the global mean (K) between sweep steps
/// counts as leaving the branch.
const JUMP_EDGE_DEG: f64 = 4.0;
const JUMP_MEAN_K: f64 = 2.0;

/// One sweep step.
#[derive(Debug, Clone, PartialEq)]
pub struct SweepStep {
    /// Control value.
    pub control: f64,
    /// +1 up, -1 down.
    pub direction: i32,
    /// Settled state, K.
    pub state: Vec<f64>,
    /// Global mean, K.
    pub global_mean: f64,
    /// Ice edge north, degrees.
    pub ice_edge: f64,
    /// Years of time stepping used (0: Newton stayed on the branch).
    pub settle_years: f64,
    /// Largest |dT/dt| at the end, K per year (0 for a Newton equilibrium).
    pub max_rate: f64,
    /// Whether the settle criterion was met.
    pub settled: bool,
}

/// A tipping point found between two steps and refined.
#[derive(Debug, Clone, PartialEq)]
pub struct Tipping {
    /// Control value (midpoint of the final bracket).
    pub control: f64,
    /// +1 on the up sweep, -1 on the down sweep.
    pub direction: i32,
    /// Ice edge before and after the jump, degrees.
    pub ice_edge_before: f64,
    /// Ice edge after, degrees.
    pub ice_edge_after: f64,
    /// Global mean before and after, K.
    pub global_mean_before: f64,
    /// Global mean after, K.
    pub global_mean_after: f64,
}

/// Sweep result.
#[derive(Debug, Clone, PartialEq)]
pub struct SweepResult {
    /// Every step, up then down.
    pub steps: Vec<SweepStep>,
    /// Refined tipping points.
    pub tipping: Vec<Tipping>,
}

/// Why a sweep failed.
#[derive(Debug, thiserror::Error)]
pub enum SweepError {
    /// The control could not be applied.
    #[error(transparent)]
    Config(#[from] ConfigError),
    /// Time stepping failed.
    #[error(transparent)]
    Solver(#[from] SolverError),
}

fn same_branch(model: &Model, a: &[f64], b: &[f64]) -> bool {
    (model.ice_edges(a).0 - model.ice_edges(b).0).abs() < JUMP_EDGE_DEG
        && (model.global_mean(a) - model.global_mean(b)).abs() < JUMP_MEAN_K
}

/// Newton from `prev` accepted only if stable and on the same branch.
fn follow(model: &Model, prev: &[f64], tol: f64) -> Option<Vec<f64>> {
    let opts = NewtonOptions {
        tolerance_wm2: tol,
        max_iterations: 60,
        max_change: 10.0,
    };
    let r = newton(model, 0.0, prev, opts).ok()?;
    if leading_eigenvalue(model, 0.0, &r.state).0 < 0.0 && same_branch(model, prev, &r.state) {
        Some(r.state)
    } else {
        None
    }
}

/// Run the sweep from `start` (a state at `spec.from`, settled first).
pub fn sweep(
    fam: &Controlled,
    spec: &SweepSpec,
    start: &[f64],
    progress: &mut dyn FnMut(usize),
) -> Result<SweepResult, SweepError> {
    let tol = 1e-8;
    let values: Vec<f64> = (0..spec.steps)
        .map(|k| spec.from + (spec.to - spec.from) * k as f64 / (spec.steps - 1) as f64)
        .collect();
    let mut steps = Vec::with_capacity(2 * spec.steps);
    let mut tipping = Vec::new();
    let mut prev = start.to_vec();
    let mut prev_p = f64::NAN;
    let legs: [(i32, Vec<f64>); 2] = [(1, values.clone()), (-1, values.iter().rev().copied().collect())];
    let mut done = 0;
    for (dir, vals) in legs {
        for &p in &vals {
            let model = fam.model_at(p)?;
            let (state, years, rate, settled) = match follow(&model, &prev, tol) {
                Some(s) => (s, 0.0, 0.0, true),
                None => {
                    let s = settle(&model, &prev, spec.settle_k_per_year, spec.settle_max_years, 1e-3)?;
                    // Polish with Newton when it stays on the settled branch.
                    let polished = follow(&model, &s.state, tol);
                    match polished {
                        Some(st) => (st, s.years, 0.0, true),
                        None => (s.state, s.years, s.max_rate, s.settled),
                    }
                }
            };
            if prev_p.is_finite() && !same_branch(&model, &prev, &state) {
                let t = refine(fam, prev_p, p, &prev, spec.refine_relative, tol, dir, &state)?;
                tipping.push(t);
            }
            steps.push(SweepStep {
                control: p,
                direction: dir,
                global_mean: model.global_mean(&state),
                ice_edge: model.ice_edges(&state).0,
                state: state.clone(),
                settle_years: years,
                max_rate: rate,
                settled,
            });
            prev = state;
            prev_p = p;
            done += 1;
            progress(done);
        }
        // The turn-around value is not a step between branches.
        prev_p = f64::NAN;
    }
    Ok(SweepResult { steps, tipping })
}

/// Bisection between `p_ok` (state `s_ok` on the old branch) and `p_jump` until the bracket is
/// `rel` relative: the old branch persists below the tipping point and not beyond.
#[allow(clippy::too_many_arguments)]
fn refine(
    fam: &Controlled,
    p_ok: f64,
    p_jump: f64,
    s_ok: &[f64],
    rel: f64,
    tol: f64,
    dir: i32,
    after: &[f64],
) -> Result<Tipping, SweepError> {
    let base = fam.model_at(p_ok)?;
    let (mut a, mut b) = (p_ok, p_jump);
    let mut sa = s_ok.to_vec();
    for _ in 0..200 {
        if (b - a).abs() <= rel * a.abs().max(b.abs()).max(1e-300) {
            break;
        }
        let mid = 0.5 * (a + b);
        let m = fam.model_at(mid)?;
        match follow(&m, &sa, tol) {
            Some(s) => {
                a = mid;
                sa = s;
            }
            None => b = mid,
        }
    }
    Ok(Tipping {
        control: 0.5 * (a + b),
        direction: dir,
        ice_edge_before: base.ice_edges(&sa).0,
        ice_edge_after: base.ice_edges(after).0,
        global_mean_before: base.global_mean(&sa),
        global_mean_after: base.global_mean(after),
    })
}
