//! The run driver: owns the loop over output times, hands each output state to an observer
//! (the file writer) and reports progress. Output is streamed; nothing accumulates in memory.
//! After every record a [`Boundary`] hook may save the [`Stepper`]'s state or stop the run;
//! [`run_from`] continues from a restored stepper at the same sample times.

use super::explicit::{Explicit, Scheme, StepsError};
use super::rosenbrock::{Ros2, Ros2Snapshot, StepPolicy};
use super::{Integrator, SolverError, Stats};
use crate::checkpoint::{Restart, RestartError};
use crate::config::spec::{Method, TimeSpec};
use crate::model::Model;

/// An observer's error (e.g. of the file writer).
pub type ObserverError = Box<dyn std::error::Error + Send + Sync>;

/// Receives the state at each output time.
pub trait Observer {
    /// Record the state `temps` (K) at model time `t` (years).
    fn record(&mut self, t: f64, temps: &[f64]) -> Result<(), ObserverError>;

    /// Time means (`time.output = "annual_mean"`): add `weight` (years) times every record
    /// field at the state `temps` (K) at time `t` (years) to the running time integral. The
    /// driver calls this at the quadrature nodes of every step's dense output.
    fn accumulate(&mut self, _t: f64, _weight: f64, _temps: &[f64]) -> Result<(), ObserverError> {
        Err("this output takes no time means".into())
    }

    /// Write the time mean over `[a, b]` (years: the integral accumulated since the last
    /// mean, divided by `b - a`) as one record and start the next; `end` is the state at `b`.
    fn record_mean(&mut self, _a: f64, _b: f64, _end: &[f64]) -> Result<(), ObserverError> {
        Err("this output takes no time means".into())
    }
}

/// Gauss-Legendre nodes on `[-1, 1]` and weights of the 3-point rule (exact for polynomials of
/// degree 5). Reference: Abramowitz and Stegun (1964), table 25.4.
const GAUSS3: [(f64, f64); 3] = [
    (-0.774_596_669_241_483_4, 5.0 / 9.0),
    (0.0, 8.0 / 9.0),
    (0.774_596_669_241_483_4, 5.0 / 9.0),
];

/// Add the integral over `[lo, hi]` (years) of every record field along the dense output
/// `dense(t, out)` of one step to `observer`'s time mean, by the 3-point Gauss-Legendre rule
/// (order 6: the cubic Hermite interpolant of the state is integrated exactly by it in every
/// field linear in the state; fields nonlinear in it to `O(h^7)` per step where smooth).
fn quadrature(
    lo: f64,
    hi: f64,
    scratch: &mut [f64],
    mut dense: impl FnMut(f64, &mut [f64]),
    observer: &mut dyn Observer,
) -> Result<(), ObserverError> {
    if !(hi > lo) {
        return Ok(());
    }
    let (mid, half) = (0.5 * (lo + hi), 0.5 * (hi - lo));
    for (x, w) in GAUSS3 {
        let t = mid + half * x;
        dense(t, scratch);
        observer.accumulate(t, w * half, scratch)?;
    }
    Ok(())
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
    /// Wall time spent stepping (inside the integrator, not recording), seconds.
    pub stepping_seconds: f64,
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

/// What a job's step-boundary hook tells the driver.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Flow {
    /// Go on.
    Continue,
    /// Stop here (the summary then ends at this record).
    Stop,
}

/// Called after every output record (a step boundary) with the time, the number of records so
/// far and the integrator, e.g. to write a checkpoint or to stop on a signal.
pub trait Boundary {
    /// Decide whether to go on after the record at model time `t` (years).
    fn at(&mut self, t: f64, records: u64, stepper: &Stepper<'_>) -> Result<Flow, RunError>;
}

/// A boundary hook that never stops and saves nothing.
pub struct NoHooks;

impl Boundary for NoHooks {
    fn at(&mut self, _: f64, _: u64, _: &Stepper<'_>) -> Result<Flow, RunError> {
        Ok(Flow::Continue)
    }
}

/// The integrator of a run as a concrete type, so its state can be saved and restored.
pub enum Stepper<'m> {
    /// The implicit ROS2 scheme.
    Implicit(Box<Ros2<'m>>),
    /// An explicit Dormand-Prince scheme.
    Explicit(Explicit<'m>),
}

impl<'m> Stepper<'m> {
    /// The integrator a time spec asks for, from `y0` (K) at time 0 to `time.years`.
    pub fn new(model: &'m Model, time: &TimeSpec, y0: &[f64]) -> Stepper<'m> {
        match time.method {
            Method::Implicit => Stepper::Implicit(Box::new(Ros2::new(
                model,
                0.0,
                y0,
                time.years,
                step_policy(time),
                time.max_steps,
            ))),
            Method::Dopri5 | Method::Dop853 => Stepper::Explicit(Explicit::new(
                model,
                if time.method == Method::Dopri5 {
                    Scheme::Dopri5
                } else {
                    Scheme::Dop853
                },
                0.0,
                y0,
                time.tolerance,
                time.max_step,
                time.stiffness_check,
                time.max_steps,
            )),
        }
    }

    fn implicit_mut(&mut self) -> Option<&mut Ros2<'m>> {
        match self {
            Stepper::Implicit(r) => Some(r.as_mut()),
            Stepper::Explicit(_) => None,
        }
    }

    fn integ(&mut self) -> &mut dyn Integrator {
        match self {
            Stepper::Implicit(r) => r.as_mut(),
            Stepper::Explicit(e) => e,
        }
    }

    /// Advance from `a` to `b` (years; the stepper is at `a` or inside a step that began at
    /// or before `a`), adding the integral over `[a, b]` of every record field along the dense
    /// trajectory to `observer`; the state at `b` (K) goes to `end`.
    pub fn integrate_over(
        &mut self,
        a: f64,
        b: f64,
        scratch: &mut [f64],
        end: &mut [f64],
        observer: &mut dyn Observer,
    ) -> Result<(), RunError> {
        let out = |e: ObserverError| RunError::Output(e);
        match self {
            Stepper::Implicit(r) => {
                let near = 1e-12 * (1.0 + b.abs());
                loop {
                    // The part of the last step inside [a, b].
                    let (lo, hi) = (r.previous_time().max(a), r.time().min(b));
                    quadrature(lo, hi, scratch, |t, o| r.dense(t, o), observer).map_err(out)?;
                    if r.time() >= b - near {
                        break;
                    }
                    r.step()?;
                }
                r.advance_to(b, end)?;
            }
            Stepper::Explicit(e) => {
                e.advance_to_with_steps(b, end, &mut |t0, y0, f0, t1, y1, f1| {
                    let h = t1 - t0;
                    quadrature(
                        t0.max(a),
                        t1.min(b),
                        scratch,
                        |t, o| {
                            let s = (t - t0) / h;
                            let [h00, h10, h01, h11] = crate::interpolation::hermite_basis(s);
                            for i in 0..o.len() {
                                o[i] = h00 * y0[i] + h10 * h * f0[i] + h01 * y1[i] + h11 * h * f1[i];
                            }
                        },
                        observer,
                    )
                })
                .map_err(|e| match e {
                    StepsError::Solver(e) => RunError::Solver(e),
                    StepsError::Observer(e) => RunError::Output(e),
                })?;
            }
        }
        Ok(())
    }

    /// Counters so far.
    pub fn stats(&self) -> Stats {
        match self {
            Stepper::Implicit(r) => r.stats(),
            Stepper::Explicit(e) => e.stats(),
        }
    }

    /// Store the integrator's whole state under `stepper.*` names.
    pub fn save(&self, r: &mut Restart) {
        let stats = |s: Stats| [s.steps, s.rejected, s.rhs_evals, s.factorisations];
        match self {
            Stepper::Implicit(ros) => {
                let s = ros.snapshot();
                r.put_str("stepper.kind", "ros2");
                r.put_f64("stepper.t", &[s.t, s.t_prev, s.h]);
                r.put_u64("stepper.n_fixed", &[s.n_fixed]);
                r.put_f64("stepper.y", &s.y);
                r.put_f64("stepper.f", &s.f);
                r.put_f64("stepper.y_prev", &s.y_prev);
                r.put_f64("stepper.f_prev", &s.f_prev);
                r.put_f64("stepper.jac_lower", &s.jac.0);
                r.put_f64("stepper.jac_diag", &s.jac.1);
                r.put_f64("stepper.jac_upper", &s.jac.2);
                r.put_f64("stepper.jac_rank_one", s.jac.3.as_slice());
                r.put_u64("stepper.jac_fresh", &[u64::from(s.jac.4)]);
                r.put_u64("stepper.stats", &stats(s.stats));
            }
            Stepper::Explicit(ex) => {
                let (t, y, st) = ex.snapshot();
                r.put_str("stepper.kind", "explicit");
                r.put_f64("stepper.t", &[t]);
                r.put_f64("stepper.y", &y);
                r.put_u64("stepper.stats", &stats(st));
            }
        }
    }

    /// Restore the state `save` stored (the stepper must be built from the same config).
    pub fn restore(&mut self, r: &Restart) -> Result<(), RestartError> {
        let st = r.u64s("stepper.stats")?;
        if st.len() != 4 {
            return Err(r.bad("stepper.stats needs 4 counters"));
        }
        let stats = Stats {
            steps: st[0],
            rejected: st[1],
            rhs_evals: st[2],
            factorisations: st[3],
        };
        let kind = r.str("stepper.kind")?;
        let ok = match self {
            Stepper::Implicit(ros) if kind == "ros2" => {
                let t = r.f64s("stepper.t")?;
                if t.len() != 3 {
                    return Err(r.bad("stepper.t needs 3 values"));
                }
                let rank = r.f64s("stepper.jac_rank_one")?;
                ros.restore(&Ros2Snapshot {
                    t: t[0],
                    t_prev: t[1],
                    h: t[2],
                    n_fixed: r.u64("stepper.n_fixed")?,
                    y: r.f64s("stepper.y")?.to_vec(),
                    f: r.f64s("stepper.f")?.to_vec(),
                    y_prev: r.f64s("stepper.y_prev")?.to_vec(),
                    f_prev: r.f64s("stepper.f_prev")?.to_vec(),
                    jac: (
                        r.f64s("stepper.jac_lower")?.to_vec(),
                        r.f64s("stepper.jac_diag")?.to_vec(),
                        r.f64s("stepper.jac_upper")?.to_vec(),
                        rank.first().copied(),
                        r.u64("stepper.jac_fresh")? != 0,
                    ),
                    stats,
                })
            }
            Stepper::Explicit(ex) if kind == "explicit" => {
                ex.restore(r.f64("stepper.t")?, r.f64s("stepper.y")?, stats)
            }
            _ => return Err(r.bad(format!("integrator `{kind}` does not match time.method"))),
        };
        if ok {
            Ok(())
        } else {
            Err(r.bad("integrator state has the wrong number of bands"))
        }
    }
}

fn step_policy(time: &TimeSpec) -> StepPolicy {
    match time.fixed_step {
        Some(h) => StepPolicy::Fixed(h),
        None => StepPolicy::Adaptive {
            tolerance: time.tolerance,
            max_step: time.max_step,
        },
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
    let stepper = Stepper::new(model, time, y0);
    run_from(time, stepper, 0, y0, observer, progress, &mut NoHooks)
}

/// Continue a run with `stepper` (fresh from `Stepper::new`, or restored from a checkpoint)
/// whose first `done` records (the last with state `last`, K) were already given to the
/// observer; `hooks` is asked after every record whether to go on. Records resume at the same
/// sample times an uninterrupted run uses.
pub fn run_from(
    time: &TimeSpec,
    mut stepper: Stepper<'_>,
    done: u64,
    last: &[f64],
    observer: &mut dyn Observer,
    progress: &mut dyn FnMut(f64),
    hooks: &mut dyn Boundary,
) -> Result<RunSummary, RunError> {
    match time.output {
        crate::config::spec::OutputMode::EveryStep => {
            return run_every_step(time, stepper, done, last, observer, progress, hooks)
        }
        crate::config::spec::OutputMode::AnnualMean => {
            return run_means(time, stepper, done, last, observer, progress, hooks)
        }
        crate::config::spec::OutputMode::Instant => {}
    }
    let mut state = last.to_vec();
    let mut outputs = done;
    let mut t_last = 0.0;
    let mut stepping = std::time::Duration::ZERO;
    for t in output_times(time.years, time.output_every).skip(done as usize) {
        if t > 0.0 {
            let start = std::time::Instant::now();
            stepper.integ().advance_to(t, &mut state)?;
            stepping += start.elapsed();
        }
        observer.record(t, &state).map_err(RunError::Output)?;
        outputs += 1;
        t_last = t;
        progress(t);
        if hooks.at(t, outputs, &stepper)? == Flow::Stop {
            break;
        }
    }
    if outputs == done {
        // Nothing left to do: the checkpoint was taken at the end.
        t_last = output_times(time.years, time.output_every)
            .nth((done as usize).saturating_sub(1))
            .unwrap_or(0.0);
    }
    Ok(RunSummary {
        t_end: t_last,
        final_state: state,
        outputs,
        stats: stepper.stats(),
        stepping_seconds: stepping.as_secs_f64(),
    })
}

/// Number of whole model years of a run (the records of `time.output = "annual_mean"`).
pub fn whole_years(years: f64) -> u64 {
    (years * (1.0 + 1e-12)).floor() as u64
}

/// `time.output = "annual_mean"`: one record per whole model year `[k, k + 1]`, the time mean
/// of the dense trajectory (every step's interpolant integrated by [`quadrature`]); a last
/// partial year is neither integrated nor written. Records resume at the year after the
/// `done` ones: the integral of a year starts afresh at each record, so a checkpoint at a
/// record needs no accumulator (the part of the step in progress is recomputed from the
/// stepper's saved dense output).
fn run_means(
    time: &TimeSpec,
    mut stepper: Stepper<'_>,
    done: u64,
    last: &[f64],
    observer: &mut dyn Observer,
    progress: &mut dyn FnMut(f64),
    hooks: &mut dyn Boundary,
) -> Result<RunSummary, RunError> {
    let mut state = last.to_vec();
    let mut scratch = vec![0.0; last.len()];
    let mut outputs = done;
    let mut t_last = done as f64;
    let mut stepping = std::time::Duration::ZERO;
    for k in done..whole_years(time.years) {
        let (a, b) = (k as f64, (k + 1) as f64);
        let start = std::time::Instant::now();
        stepper.integrate_over(a, b, &mut scratch, &mut state, observer)?;
        stepping += start.elapsed();
        observer.record_mean(a, b, &state).map_err(RunError::Output)?;
        outputs += 1;
        t_last = b;
        progress(b);
        if hooks.at(b, outputs, &stepper)? == Flow::Stop {
            break;
        }
    }
    Ok(RunSummary {
        t_end: t_last,
        final_state: state,
        outputs,
        stats: stepper.stats(),
        stepping_seconds: stepping.as_secs_f64(),
    })
}

/// `time.output = "every_step"`: a record at time 0 and after every accepted step of the
/// implicit scheme (validation allows no other scheme).
fn run_every_step(
    time: &TimeSpec,
    mut stepper: Stepper<'_>,
    done: u64,
    last: &[f64],
    observer: &mut dyn Observer,
    progress: &mut dyn FnMut(f64),
    hooks: &mut dyn Boundary,
) -> Result<RunSummary, RunError> {
    let not_implicit = || {
        RunError::Solver(SolverError::NoConvergence {
            what: "time.output = \"every_step\"".into(),
            detail: "needs time.method = \"implicit\"".into(),
        })
    };
    let mut outputs = done;
    let mut stop = false;
    let mut stepping = std::time::Duration::ZERO;
    if done == 0 {
        observer.record(0.0, last).map_err(RunError::Output)?;
        outputs = 1;
        stop = hooks.at(0.0, outputs, &stepper)? == Flow::Stop;
    }
    while !stop {
        let r = stepper.implicit_mut().ok_or_else(not_implicit)?;
        if r.time() >= time.years {
            break;
        }
        let start = std::time::Instant::now();
        r.step()?;
        stepping += start.elapsed();
        let t = r.time();
        observer.record(t, r.state()).map_err(RunError::Output)?;
        outputs += 1;
        progress(t);
        stop = hooks.at(t, outputs, &stepper)? == Flow::Stop;
    }
    let r = stepper.implicit_mut().ok_or_else(not_implicit)?;
    Ok(RunSummary {
        t_end: r.time(),
        final_state: r.state().to_vec(),
        outputs,
        stats: r.stats(),
        stepping_seconds: stepping.as_secs_f64(),
    })
}
