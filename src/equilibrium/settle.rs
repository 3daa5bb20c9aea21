//! Settling by time stepping: the fallback when Newton fails, and the physics of what happens
//! after a tipping point (the state falls where the dynamics take it).

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
    /// Largest |dT/dt| at the end, K per year.
    pub max_rate: f64,
    /// Whether `max_rate` fell below the criterion (otherwise the year limit was hit).
    pub settled: bool,
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
    let policy = StepPolicy::Adaptive {
        tolerance,
        max_step: max_years.min(1000.0),
    };
    let mut r = Ros2::new(model, 0.0, start, max_years, policy, 10_000_000);
    while r.max_rate() >= rate && r.time() < max_years {
        r.step()?;
    }
    Ok(Settled {
        state: r.state().to_vec(),
        years: r.time(),
        max_rate: r.max_rate(),
        settled: r.max_rate() < rate,
    })
}
