//! Time integration: the linearly implicit Rosenbrock scheme (the default, for stiff grids and
//! long runs) and the explicit Dormand-Prince schemes of `ode_solvers` (cross-checks, coarse
//! grids), behind one `Integrator` trait, plus the run driver that owns the output cadence.

pub mod driver;
pub mod explicit;
pub mod rosenbrock;

pub use driver::{run, Observer, RunSummary};
pub use rosenbrock::Ros2;

use crate::model::Model;

/// Counters of an integration.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Stats {
    /// Accepted steps.
    pub steps: u64,
    /// Rejected steps.
    pub rejected: u64,
    /// Right-hand-side evaluations.
    pub rhs_evals: u64,
    /// Matrix factorisations.
    pub factorisations: u64,
}

/// A numerical failure during integration; the message names the model time and, where it
/// applies, the latitude and the value (exit status 3).
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum SolverError {
    /// NaN or infinity in the state.
    #[error("numerical blow-up at model year {t:.6}: temperature {value} at latitude {lat:.2} degrees (band {band})")]
    NonFinite {
        /// Model time, years.
        t: f64,
        /// Band index.
        band: usize,
        /// Band-centre latitude, degrees.
        lat: f64,
        /// The value.
        value: f64,
    },
    /// A temperature left the model's valid range.
    #[error("temperature {value:.3} K at latitude {lat:.2} degrees (band {band}) at model year {t:.6} is outside the valid range {lo} K to {hi} K{hint}")]
    OutOfRange {
        /// Model time, years.
        t: f64,
        /// Band index.
        band: usize,
        /// Latitude, degrees.
        lat: f64,
        /// The value, K.
        value: f64,
        /// Lower limit, K.
        lo: f64,
        /// Upper limit, K.
        hi: f64,
        /// Extra advice.
        hint: String,
    },
    /// The adaptive step size collapsed.
    #[error(
        "step size collapsed to {h:e} years at model year {t:.6}; the problem may be ill-posed or unstable"
    )]
    StepCollapsed {
        /// Model time, years.
        t: f64,
        /// Step, years.
        h: f64,
    },
    /// An explicit scheme detected stiffness.
    #[error("{method} detected stiffness at model year {t:.4}; use time.method = \"implicit\" (made for stiff grids), or set time.stiffness_check = false to force it on")]
    Stiff {
        /// Scheme name.
        method: &'static str,
        /// Model time, years.
        t: f64,
    },
    /// The step limit was reached.
    #[error("more than {limit} steps needed by model year {t:.4} (time.max_steps)")]
    TooManySteps {
        /// Model time, years.
        t: f64,
        /// Step limit.
        limit: u64,
    },
    /// Newton or another iteration did not converge.
    #[error("{what} did not converge: {detail}")]
    NoConvergence {
        /// What failed.
        what: String,
        /// Details with values.
        detail: String,
    },
}

/// Check a state after a step: finite, and inside the model's valid range.
pub fn check_state(model: &Model, t: f64, temps: &[f64]) -> Result<(), SolverError> {
    let (lo, hi) = model.valid_range();
    for (band, &v) in temps.iter().enumerate() {
        if !v.is_finite() || v < lo || v > hi {
            let lat = model.grid.x_centres[band].asin().to_degrees();
            if !v.is_finite() {
                return Err(SolverError::NonFinite {
                    t,
                    band,
                    lat,
                    value: v,
                });
            }
            let hint = if model.longwave.valid_range().is_some() {
                " (the OLR table's range narrows it)".to_string()
            } else {
                String::new()
            };
            return Err(SolverError::OutOfRange {
                t,
                band,
                lat,
                value: v,
                lo,
                hi,
                hint,
            });
        }
    }
    Ok(())
}

/// A time integrator that can be advanced to any later time.
pub trait Integrator {
    /// Advance to `t_target` (years, not before the current output time) and write the state
    /// there into `out`.
    fn advance_to(&mut self, t_target: f64, out: &mut [f64]) -> Result<(), SolverError>;
    /// Counters so far.
    fn stats(&self) -> Stats;
}
