//! Settling by time stepping: the fallback when Newton fails, and the physics of what happens
//! after a tipping point (the state falls where the dynamics take it).

use super::stability::leading_eigenvalue;
use super::{newton, NewtonOptions};
use crate::integrate::rosenbrock::{Ros2, StepPolicy};
use crate::integrate::SolverError;
use crate::model::Model;

/// A state reached by time stepping.
#[derive(Debug, Clone, PartialEq)]
pub struct Settled {
    /// Temperatures, K.
    pub state: Vec<f64>,
    /// Model years integrated.
    pub years: f64,
    /// Largest |dT/dt| at the end, K per year (0 when the end is an exact equilibrium).
    pub max_rate: f64,
    /// Whether `max_rate` fell below the criterion (otherwise the year limit was hit).
    pub settled: bool,
    /// Whether the state is the exact (Newton) equilibrium the trajectory approaches.
    pub exact: bool,
}

/// The adaptive implicit scheme from `start` at time 0, for at most `max_years`, with local
/// error `tolerance` (K) per step and steps of at most 1000 years.
fn stepper<'m>(model: &'m Model, start: &[f64], max_years: f64, tolerance: f64) -> Ros2<'m> {
    let policy = StepPolicy::Adaptive {
        tolerance,
        max_step: max_years.min(1000.0),
    };
    Ros2::new(model, 0.0, start, max_years, policy, 10_000_000)
}

/// Integrate from `start` with the adaptive implicit scheme until the largest |dT/dt| is below
/// `rate` (K per year) or `max_years` have passed. `tolerance` is the local error per step (K).
pub fn settle(
    model: &Model,
    start: &[f64],
    rate: f64,
    max_years: f64,
    tolerance: f64,
) -> Result<Settled, SolverError> {
    let mut r = stepper(model, start, max_years, tolerance);
    while r.max_rate() >= rate && r.time() < max_years {
        r.step()?;
    }
    Ok(Settled {
        state: r.state().to_vec(),
        years: r.time(),
        max_rate: r.max_rate(),
        settled: r.max_rate() < rate,
        exact: false,
    })
}

/// Newton from a state on a trajectory, accepted when it lands on a stable equilibrium as close
/// as linear relaxation says: a trajectory decaying onto an equilibrium along its slowest mode
/// sits about `rate / |lambda|` (K) from it, `rate` the largest |dT/dt| (K per year).
fn newton_nearby(model: &Model, state: &[f64], rate: f64, tolerance_wm2: f64) -> Option<Vec<f64>> {
    let opts = NewtonOptions {
        tolerance_wm2,
        max_iterations: 12,
        max_change: 2.0,
    };
    let r = newton(model, 0.0, state, opts).ok()?;
    let (lead, _) = leading_eigenvalue(model, 0.0, &r.state);
    if lead.is_nan() || lead >= 0.0 {
        return None;
    }
    let dist = r
        .state
        .iter()
        .zip(state)
        .map(|(a, b)| (a - b).abs())
        .fold(0.0, f64::max);
    (dist <= 10.0 * rate / lead.abs() + 1e-6).then_some(r.state)
}

/// Settle like [`settle`], but finish on the exact equilibrium the trajectory approaches: once
/// the largest |dT/dt| is below 100 times `rate`, and after every further tenfold decay, Newton
/// is tried from the current state and accepted by [`newton_nearby`]. The last resort after
/// the criterion (or the year limit) is one more such Newton with a looser distance check.
pub fn settle_to_equilibrium(
    model: &Model,
    start: &[f64],
    rate: f64,
    max_years: f64,
    tolerance: f64,
    tolerance_wm2: f64,
) -> Result<Settled, SolverError> {
    let mut r = stepper(model, start, max_years, tolerance);
    let mut next_try = 100.0 * rate;
    while r.max_rate() >= rate && r.time() < max_years {
        let mr = r.max_rate();
        if mr < next_try {
            if let Some(eq) = newton_nearby(model, r.state(), mr, tolerance_wm2) {
                return Ok(Settled {
                    state: eq,
                    years: r.time(),
                    max_rate: 0.0,
                    settled: true,
                    exact: true,
                });
            }
            next_try = 0.1 * mr;
        }
        r.step()?;
    }
    let settled = r.max_rate() < rate;
    if settled {
        if let Some(eq) = newton_nearby(model, r.state(), r.max_rate().max(rate), tolerance_wm2) {
            return Ok(Settled {
                state: eq,
                years: r.time(),
                max_rate: 0.0,
                settled: true,
                exact: true,
            });
        }
    }
    Ok(Settled {
        state: r.state().to_vec(),
        years: r.time(),
        max_rate: r.max_rate(),
        settled,
        exact: false,
    })
}
