//! The run driver: owns the loop over output times, hands each output state to an observer
//! (the file writer) and reports progress. Output is streamed; nothing accumulates in memory.

use super::explicit::{Explicit, Scheme};
use super::rosenbrock::{Ros2, StepPolicy};
use super::{Integrator, SolverError, Stats};
use crate::config::spec::{Method, TimeSpec};
use crate::model::Model;

/// Receives the state at each output time.
pub trait Observer {
    /// Record the state `temps` (K) at model time `t` (years).
    fn record(&mut self, t: f64, temps: &[f64]) -> Result<(), Box<dyn std::error::Error + Send + Sync>>;
}

/// Why a run stopped early.
#[derive(Debug, thiserror::Error)]
pub enum RunError {
    /// Numerical failure (exit 3).
    #[error(transparent)]
    Solver(#[from] SolverError),
    /// The observer (file writer) failed.
    #[error("{0}")]
    Output(Box<dyn std::error::Error + Send + Sync>),
}

/// What a finished run reports.
#[derive(Debug, Clone, PartialEq)]
pub struct RunSummary {
    /// Final model time, years.
    pub t_end: f64,
    /// Final state, K.
    pub final_state: Vec<f64>,
    /// Number of output records written.
    pub outputs: u64,
    /// Integrator counters.
    pub stats: Stats,
}

/// The output times of a run: `0, dt, 2 dt, ...` and the end.
pub fn output_times(years: f64, every: f64) -> impl Iterator<Item = f64> {
    let n = (years / every * (1.0 + 1e-12)).floor() as u64;
    let end_extra = years - n as f64 * every > 1e-9 * every;
    (0..=n)
        .map(move |k| k as f64 * every)
        .chain(end_extra.then_some(years))
}

/// Number of output times of a run.
pub fn output_count(years: f64, every: f64) -> u64 {
    output_times(years, every).count() as u64
}

/// Build the integrator a time spec asks for.
pub fn integrator<'m>(
    model: &'m Model,
    time: &TimeSpec,
    t0: f64,
    y0: &[f64],
    t_end: f64,
) -> Box<dyn Integrator + 'm> {
    match time.method {
        Method::Implicit => {
            let policy = match time.fixed_step {
                Some(h) => StepPolicy::Fixed(h),
                None => StepPolicy::Adaptive {
                    tolerance: time.tolerance,
                    max_step: time.max_step,
                },
            };
            Box::new(Ros2::new(model, t0, y0, t_end, policy, time.max_steps))
        }
        Method::Dopri5 | Method::Dop853 => {
            let scheme = if time.method == Method::Dopri5 {
                Scheme::Dopri5
            } else {
                Scheme::Dop853
            };
            Box::new(Explicit::new(
                model,
                scheme,
                t0,
                y0,
                time.tolerance,
                time.max_step,
                time.stiffness_check,
                time.max_steps,
            ))
        }
    }
}

/// Run from `y0` at time 0 to `time.years`, calling `observer` at every output time (including
/// 0 and the end) and `progress` with the model time reached.
pub fn run(
    model: &Model,
    time: &TimeSpec,
    y0: &[f64],
    observer: &mut dyn Observer,
    progress: &mut dyn FnMut(f64),
) -> Result<RunSummary, RunError> {
    if time.output == crate::config::spec::OutputMode::EveryStep {
        return run_every_step(model, time, y0, observer, progress);
    }
    let mut integ = integrator(model, time, 0.0, y0, time.years);
    let mut state = y0.to_vec();
    let mut outputs = 0;
    let mut t_last = 0.0;
    for t in output_times(time.years, time.output_every) {
        if t > 0.0 {
            integ.advance_to(t, &mut state)?;
        }
        observer.record(t, &state).map_err(RunError::Output)?;
        outputs += 1;
        t_last = t;
        progress(t);
    }
    Ok(RunSummary {
        t_end: t_last,
        final_state: state,
        outputs,
        stats: integ.stats(),
    })
}

/// `time.output = "every_step"`: a record at time 0 and after every accepted step of the
/// implicit scheme (validation allows no other scheme).
fn run_every_step(
    model: &Model,
    time: &TimeSpec,
    y0: &[f64],
    observer: &mut dyn Observer,
    progress: &mut dyn FnMut(f64),
) -> Result<RunSummary, RunError> {
    let policy = match time.fixed_step {
        Some(h) => StepPolicy::Fixed(h),
        None => StepPolicy::Adaptive {
            tolerance: time.tolerance,
            max_step: time.max_step,
        },
    };
    let mut r = Ros2::new(model, 0.0, y0, time.years, policy, time.max_steps);
    observer.record(0.0, y0).map_err(RunError::Output)?;
    let mut outputs = 1;
    while r.time() < time.years {
        r.step()?;
        observer.record(r.time(), r.state()).map_err(RunError::Output)?;
        outputs += 1;
        progress(r.time());
    }
    Ok(RunSummary {
        t_end: r.time(),
        final_state: r.state().to_vec(),
        outputs,
        stats: r.stats(),
    })
}
