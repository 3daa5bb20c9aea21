//! Dormand-Prince 5(4) and 8(5,3) through the `ode_solvers` crate.
//!
//! `ode_solvers` keeps every output point in memory until a call ends, so the run is integrated
//! one output interval at a time (sparse output: start and end only), which keeps memory flat
//! in run length. Stiffness detection is on by default: this model is stiff at fine grids
//! (the fastest transport mode decays in hours), and the error message points to the implicit
//! scheme.
//!
//! Reference: Hairer, Norsett and Wanner, Solving Ordinary Differential Equations I (2nd ed.,
//! 1993), sections II.5 and II.10 (the codes `ode_solvers` follows).

use super::{check_state, Integrator, SolverError, Stats};
use crate::model::{Model, Workspace};
use ode_solvers::dop_shared::IntegrationError;
use ode_solvers::{DVector, Dop853, Dopri5, OutputType, System};
use std::cell::RefCell;

/// Which explicit scheme.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Scheme {
    /// Dormand-Prince 5(4).
    Dopri5,
    /// Dormand-Prince 8(5,3).
    Dop853,
}

impl Scheme {
    fn name(self) -> &'static str {
        match self {
            Scheme::Dopri5 => "Dopri5",
            Scheme::Dop853 => "Dop853",
        }
    }
}

struct Rhs<'m> {
    model: &'m Model,
    ws: RefCell<Workspace>,
}

impl System<f64, DVector<f64>> for Rhs<'_> {
    fn system(&self, t: f64, y: &DVector<f64>, dy: &mut DVector<f64>) {
        self.model
            .tendency(t, y.as_slice(), &mut self.ws.borrow_mut(), dy.as_mut_slice());
    }
}

/// An explicit integrator advanced one output interval per `ode_solvers` call.
pub struct Explicit<'m> {
    model: &'m Model,
    scheme: Scheme,
    t: f64,
    y: DVector<f64>,
    tolerance: f64,
    max_step: f64,
    stiffness_check: bool,
    max_steps: u64,
    stats: Stats,
}

impl<'m> Explicit<'m> {
    /// Start at `t0` from `y0` (K) with absolute tolerance `tolerance` (K).
    pub fn new(
        model: &'m Model,
        scheme: Scheme,
        t0: f64,
        y0: &[f64],
        tolerance: f64,
        max_step: f64,
        stiffness_check: bool,
        max_steps: u64,
    ) -> Explicit<'m> {
        Explicit {
            model,
            scheme,
            t: t0,
            y: DVector::from_column_slice(y0),
            tolerance,
            max_step,
            stiffness_check,
            max_steps,
            stats: Stats::default(),
        }
    }

    fn chunk(&mut self, t_end: f64) -> Result<(), SolverError> {
        let rhs = Rhs {
            model: self.model,
            ws: RefCell::new(Workspace::new(self.model.len())),
        };
        let n_stiff = if self.stiffness_check { 1000 } else { u32::MAX };
        let left = self
            .max_steps
            .saturating_sub(self.stats.steps)
            .min(u32::MAX as u64) as u32;
        let span = t_end - self.t;
        let h_max = self.max_step.min(span);
        // rtol 0 and atol = tolerance: an absolute error control in K, as for the implicit scheme.
        macro_rules! go {
            ($solver:ident) => {{
                let mut s = $solver::from_param(
                    rhs,
                    self.t,
                    t_end,
                    span,
                    self.y.clone(),
                    0.0,
                    self.tolerance,
                    0.9,
                    0.04,
                    0.2,
                    10.0,
                    h_max,
                    0.0,
                    left.max(1),
                    n_stiff,
                    OutputType::Sparse,
                );
                let res = s.integrate();
                let y = s.y_out().last().cloned();
                (res, y)
            }};
        }
        let (res, y) = match self.scheme {
            Scheme::Dopri5 => go!(Dopri5),
            Scheme::Dop853 => go!(Dop853),
        };
        match res {
            Ok(st) => {
                self.stats.steps += st.accepted_steps as u64;
                self.stats.rejected += st.rejected_steps as u64;
                self.stats.rhs_evals += st.num_eval as u64;
            }
            Err(IntegrationError::StiffnessDetected { x }) => {
                return Err(SolverError::Stiff {
                    method: self.scheme.name(),
                    t: x,
                })
            }
            Err(IntegrationError::MaxNumStepReached { x, .. }) => {
                return Err(SolverError::TooManySteps {
                    t: x,
                    limit: self.max_steps,
                })
            }
            Err(IntegrationError::StepSizeUnderflow { x }) => {
                return Err(SolverError::StepCollapsed { t: x, h: 0.0 })
            }
        }
        self.y = y.ok_or_else(|| SolverError::NoConvergence {
            what: self.scheme.name().into(),
            detail: "no output".into(),
        })?;
        self.t = t_end;
        check_state(self.model, self.t, self.y.as_slice())
    }
}

impl Integrator for Explicit<'_> {
    fn advance_to(&mut self, t_target: f64, out: &mut [f64]) -> Result<(), SolverError> {
        if t_target > self.t {
            self.chunk(t_target)?;
        }
        out.copy_from_slice(self.y.as_slice());
        Ok(())
    }

    fn stats(&self) -> Stats {
        self.stats
    }
}

impl Explicit<'_> {
    /// The integrator's state for a checkpoint: time (years), state (K) and counters. Each
    /// output interval starts `ode_solvers` afresh, so nothing else carries over.
    pub fn snapshot(&self) -> (f64, Vec<f64>, Stats) {
        (self.t, self.y.as_slice().to_vec(), self.stats)
    }

    /// Continue from a snapshot; `false` (nothing changed) when the size differs.
    pub fn restore(&mut self, t: f64, y: &[f64], stats: Stats) -> bool {
        if y.len() != self.y.len() {
            return false;
        }
        self.t = t;
        self.y.as_mut_slice().copy_from_slice(y);
        self.stats = stats;
        true
    }
}
