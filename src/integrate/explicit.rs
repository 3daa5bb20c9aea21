//! Dormand-Prince 5(4) and 8(5,3) through the `ode_solvers` crate.
//!
//! `ode_solvers` keeps every accepted step of a call in memory (its "sparse" output too), so the
//! run is integrated one output interval at a time and each interval in calls capped to about
//! 64 MiB of steps, which keeps memory flat in run length and step count. Stiffness detection is on by default: this model is stiff at fine grids
//! (the fastest transport mode decays in hours), and the error message points to the implicit
//! scheme.
//!
//! Reference: Hairer, Norsett and Wanner, Solving Ordinary Differential Equations I (2nd ed.,
//! 1993), sections II.5 and II.10 (the codes `ode_solvers` follows).

use super::{band_latitude, check_state, step_collapsed, worst_index, Integrator, SolverError, Stats};
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
    last: &'m RefCell<Last>,
}

/// The last state an explicit scheme evaluated, for the message when it fails inside an
/// output interval, and the count of evaluations.
struct Last {
    /// Time, years.
    t: f64,
    /// Temperatures, K.
    y: Vec<f64>,
    /// Their rates, K per year.
    rate: Vec<f64>,
    /// Right-hand-side evaluations.
    evals: u64,
}

impl System<f64, DVector<f64>> for Rhs<'_> {
    fn system(&self, t: f64, y: &DVector<f64>, dy: &mut DVector<f64>) {
        self.model
            .tendency(t, y.as_slice(), &mut self.ws.borrow_mut(), dy.as_mut_slice());
        let mut last = self.last.borrow_mut();
        last.t = t;
        last.y.copy_from_slice(y.as_slice());
        last.rate.copy_from_slice(dy.as_slice());
        last.evals += 1;
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
    /// Keep every accepted step's time and state (for time means), in `kept_t`, `kept_y`.
    keep_steps: bool,
    kept_t: Vec<f64>,
    kept_y: Vec<f64>,
}

/// Why [`Explicit::advance_to_with_steps`] stopped.
#[derive(Debug)]
pub enum StepsError {
    /// The scheme failed.
    Solver(SolverError),
    /// The per-step callback failed.
    Observer(super::driver::ObserverError),
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
            keep_steps: false,
            kept_t: Vec::new(),
            kept_y: Vec::new(),
        }
    }

    /// [`Integrator::advance_to`], calling `per_step(t0, y0, f0, t1, y1, f1)` for every accepted
    /// step from `t0` to `t1` (years) with the states (K) and their rates (K per year) at both
    /// ends (the data of the step's cubic Hermite interpolant). The rates cost one evaluation
    /// per step, counted in the statistics.
    #[allow(clippy::type_complexity)]
    pub fn advance_to_with_steps(
        &mut self,
        t_target: f64,
        out: &mut [f64],
        per_step: &mut dyn FnMut(
            f64,
            &[f64],
            &[f64],
            f64,
            &[f64],
            &[f64],
        ) -> Result<(), super::driver::ObserverError>,
    ) -> Result<(), StepsError> {
        let n = self.model.len();
        self.kept_t.clear();
        self.kept_y.clear();
        self.kept_t.push(self.t);
        self.kept_y.extend_from_slice(self.y.as_slice());
        self.keep_steps = true;
        let result = if t_target > self.t {
            self.chunk(t_target)
        } else {
            Ok(())
        };
        self.keep_steps = false;
        result.map_err(StepsError::Solver)?;
        let mut ws = Workspace::new(n);
        let (mut f0, mut f1) = (vec![0.0; n], vec![0.0; n]);
        let (ts, ys) = (std::mem::take(&mut self.kept_t), std::mem::take(&mut self.kept_y));
        for (i, w) in ts.windows(2).enumerate() {
            let (y0, y1) = (&ys[i * n..(i + 1) * n], &ys[(i + 1) * n..(i + 2) * n]);
            if i == 0 {
                self.model.tendency(w[0], y0, &mut ws, &mut f0);
                self.stats.rhs_evals += 1;
            }
            self.model.tendency(w[1], y1, &mut ws, &mut f1);
            self.stats.rhs_evals += 1;
            if w[1] > w[0] {
                per_step(w[0], y0, &f0, w[1], y1, &f1).map_err(StepsError::Observer)?;
            }
            std::mem::swap(&mut f0, &mut f1);
        }
        (self.kept_t, self.kept_y) = (ts, ys);
        out.copy_from_slice(self.y.as_slice());
        Ok(())
    }

    /// Integrate to `t_end` in calls of at most [`steps_per_call`] steps each, split at every
    /// forcing breakpoint (each call ends on one, so no step crosses a jump or kink of the
    /// forcing), each call's longest step also limited by the forcing's time scale over it.
    fn chunk(&mut self, t_end: f64) -> Result<(), SolverError> {
        let n = self.model.len();
        let per_call = steps_per_call(n);
        while self.t < t_end {
            let seg_end = match self.model.next_breakpoint(self.t) {
                Some(b) if b < t_end => b,
                _ => t_end,
            };
            while self.t < seg_end {
                let left = self.max_steps.saturating_sub(self.stats.steps);
                if left == 0 {
                    return Err(SolverError::TooManySteps {
                        t: self.t,
                        limit: self.max_steps,
                    });
                }
                if self.call(seg_end, left.min(per_call))? {
                    self.t = seg_end;
                }
            }
        }
        check_state(self.model, self.t, self.y.as_slice())
    }

    /// One `ode_solvers` call towards `t_end` of at most `cap` steps. Returns whether it got
    /// there (otherwise the state and time are where it stopped).
    fn call(&mut self, t_end: f64, cap: u64) -> Result<bool, SolverError> {
        let n = self.model.len();
        let last = RefCell::new(Last {
            t: self.t,
            y: self.y.as_slice().to_vec(),
            rate: vec![0.0; n],
            evals: 0,
        });
        let rhs = Rhs {
            model: self.model,
            ws: RefCell::new(Workspace::new(n)),
            last: &last,
        };
        let n_stiff = if self.stiffness_check { 1000 } else { u32::MAX };
        let span = t_end - self.t;
        let h_max = self
            .max_step
            .min(span)
            .min(self.model.forcing_time_scale(self.t, t_end));
        // rtol 0 and atol = tolerance: an absolute error control in K, as for the implicit scheme.
        macro_rules! go {
            ($solver:ident, $keep:ident, $kept:ident) => {{
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
                    cap.clamp(1, u32::MAX as u64) as u32,
                    n_stiff,
                    OutputType::Sparse,
                );
                let res = s.integrate();
                // Sparse output holds the start and then every accepted step.
                let accepted = s.y_out().len().saturating_sub(1) as u64;
                let y = s.y_out().last().cloned();
                if $keep {
                    for (x, y) in s.x_out().iter().zip(s.y_out()).skip(1) {
                        $kept.0.push(*x);
                        $kept.1.extend_from_slice(y.as_slice());
                    }
                }
                (res, y, accepted)
            }};
        }
        let keep = self.keep_steps;
        let kept = (&mut self.kept_t, &mut self.kept_y);
        let (res, y, accepted) = match self.scheme {
            Scheme::Dopri5 => go!(Dopri5, keep, kept),
            Scheme::Dop853 => go!(Dop853, keep, kept),
        };
        let last = last.into_inner();
        self.stats.rhs_evals += last.evals;
        if res.is_err() {
            // Name the state the scheme last saw: a blow-up there is reported as such.
            check_state(self.model, last.t, &last.y)?;
        }
        let y = y.ok_or_else(|| SolverError::NoConvergence {
            what: self.scheme.name().into(),
            detail: format!("no output from model year {:.6}", self.t),
        })?;
        match res {
            Ok(st) => {
                self.stats.steps += st.accepted_steps as u64;
                self.stats.rejected += st.rejected_steps as u64;
                self.y = y;
                Ok(true)
            }
            Err(IntegrationError::MaxNumStepReached { x, .. }) => {
                self.stats.steps += accepted;
                if cap >= self.max_steps.saturating_sub(self.stats.steps - accepted) {
                    return Err(SolverError::TooManySteps {
                        t: x,
                        limit: self.max_steps,
                    });
                }
                if accepted == 0 {
                    // Every step of the call was rejected.
                    return Err(step_collapsed(self.model, x, 0.0, &last.y, &last.rate));
                }
                self.y = y;
                self.t = x;
                Ok(false)
            }
            Err(IntegrationError::StiffnessDetected { x }) => {
                let band = worst_index(&last.rate);
                Err(SolverError::Stiff {
                    method: self.scheme.name(),
                    t: x,
                    band,
                    lat: band_latitude(self.model, band),
                    value: last.y[band],
                    rate: last.rate[band],
                })
            }
            Err(IntegrationError::StepSizeUnderflow { x }) => {
                // ode_solvers stops when the step falls below 10 eps |t|.
                let h = 10.0 * f64::EPSILON * x.abs();
                Err(step_collapsed(self.model, x, h, &last.y, &last.rate))
            }
        }
    }
}

/// Steps of one `ode_solvers` call: it keeps every accepted state of a call in memory, so a
/// call is capped to about 64 MiB of them (`8 n` bytes plus about 64 of overhead each), and
/// the driver continues from where a capped call stopped.
fn steps_per_call(n: usize) -> u64 {
    ((64usize << 20) / (8 * n + 64)).max(1000) as u64
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
