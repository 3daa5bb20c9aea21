//! Quasi-static two-way sweeps: step a control from `from` to `to` and back, settling at each
//! value from the previous state; find where the state leaves its branch (a tipping point),
//! refine each to a relative bracket in the control, and measure the hysteresis.
//!
//! At each value the previous equilibrium is followed along its branch by natural
//! continuation: Newton at the new value from the tangent prediction, accepted only if it
//! converges near the prediction to a stable equilibrium, with the control step halved on
//! failure. When the whole step succeeds, the state stayed on its stable branch. When the
//! step has to shrink below `refine_relative` of the control, the branch ends (a fold or corner)
//! or loses stability there: that bracket is the tipping point. Then the adaptive implicit
//! scheme integrates from the last state on the old branch a little beyond the tipping point
//! until the largest |dT/dt| is below the settle criterion (or the year limit, reported), so the
//! state falls where the dynamics take it; Newton finishes on the equilibrium the trajectory
//! approaches once it relaxes linearly (`settle::settle_to_equilibrium`), and the new branch is
//! followed on to the step's value, so one coarse step can hold several tipping points.
//!
//! The hysteresis width is the total length of control over which the two legs ended in
//! different states, with each interval bounded by the refined tipping points.

use super::continuation::{ContinuationOptions, Tracer};
use super::control::Controlled;
use super::settle::settle_to_equilibrium;
use super::stability::leading_eigenvalue;
use crate::config::spec::SweepSpec;
use crate::config::ConfigError;
use crate::integrate::SolverError;
use crate::model::Model;

/// Largest distance (scaled metric of the continuation, RMS of 50 K per unit) between the
/// predicted and the converged state for a step to count as staying on the branch.
const FOLLOW_DISTANCE: f64 = 0.05;
/// Up and down states closer than this everywhere (K) are the same equilibrium.
const SAME_STATE_K: f64 = 0.05;

/// How a step's state was reached.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Reached {
    /// Followed along the stable branch (no time stepping).
    Followed,
    /// Time stepping after the branch was lost (then polished by Newton if it stayed close).
    Settled,
}

/// One sweep step.
#[derive(Debug, Clone, PartialEq)]
pub struct SweepStep {
    /// Control value.
    pub control: f64,
    /// +1 when the control increases along this leg, -1 when it decreases.
    pub direction: i32,
    /// Settled state, K.
    pub state: Vec<f64>,
    /// Global mean, K.
    pub global_mean: f64,
    /// Ice edge north, degrees.
    pub ice_edge: f64,
    /// Ice edge south (globe only), degrees north.
    pub ice_edge_south: Option<f64>,
    /// Leading eigenvalue of the final state, 1/year.
    pub leading: f64,
    /// Years of time stepping (0 when followed).
    pub settle_years: f64,
    /// Largest |dT/dt| at the end, K per year (0 for an exact equilibrium).
    pub max_rate: f64,
    /// Whether the settle criterion was met.
    pub settled: bool,
    /// How the state was reached.
    pub reached: Reached,
}

/// A tipping point: the followed branch ends between `bracket.0` (still on it) and `bracket.1`.
#[derive(Debug, Clone, PartialEq)]
pub struct Tipping {
    /// Control value (midpoint of the final bracket).
    pub control: f64,
    /// The bracket: last control on the old branch, first beyond.
    pub bracket: (f64, f64),
    /// Direction of the leg, +1 or -1.
    pub direction: i32,
    /// Index of the step at which the jump shows.
    pub step: usize,
    /// Ice edge on the old branch at the tipping point, degrees.
    pub ice_edge_before: f64,
    /// Ice edge where the state settled, degrees.
    pub ice_edge_after: f64,
    /// Global mean on the old branch at the tipping point, K.
    pub global_mean_before: f64,
    /// Global mean where the state settled, K.
    pub global_mean_after: f64,
}

/// Sweep result.
#[derive(Debug, Clone, PartialEq)]
pub struct SweepResult {
    /// Every step, first leg then second leg.
    pub steps: Vec<SweepStep>,
    /// Refined tipping points.
    pub tipping: Vec<Tipping>,
    /// Total control length over which the legs disagree (control units).
    pub hysteresis_width: f64,
    /// Intervals of disagreement `(low, high)`.
    pub hysteresis_intervals: Vec<(f64, f64)>,
    /// Steps that needed time stepping.
    pub settled_steps: usize,
    /// Steps where the year limit was reached before the settle criterion.
    pub unsettled_steps: usize,
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

/// The outcome of following a branch from one control value to the next.
enum Follow {
    /// Reached the target on the branch (with `dT/dp` there).
    Reached {
        state: Vec<f64>,
        leading: f64,
        dtdp: Vec<f64>,
    },
    /// Lost between `p_ok` (state `t_ok`) and `p_bad`.
    Lost { p_ok: f64, t_ok: Vec<f64>, p_bad: f64 },
}

/// Follow the stable branch through `(t0, p0)` to `p1`.
/// `dtdp0` is `dT/dp` at the start when the previous step knows it.
fn follow(
    tr: &mut Tracer<'_>,
    t0: &[f64],
    p0: f64,
    p1: f64,
    rel: f64,
    dtdp0: Option<Vec<f64>>,
) -> Result<Follow, ConfigError> {
    let mut p = p0;
    let mut t = t0.to_vec();
    let mut leading = f64::NAN;
    // dT/dp at the start (solving there also confirms the start is an equilibrium).
    let mut dtdp = match dtdp0 {
        Some(d) => d,
        None => match tr.equilibrium_at(t0, p0, FOLLOW_DISTANCE)? {
            Some(fc) => {
                t = fc.state;
                fc.dtdp
            }
            None => vec![0.0; t0.len()],
        },
    };
    let mut sub = p1 - p0;
    let mut guess = vec![0.0; t0.len()];
    while p != p1 {
        let pn = if (p1 - p - sub) * sub.signum() <= 0.0 {
            p1
        } else {
            p + sub
        };
        for i in 0..t.len() {
            guess[i] = t[i] + (pn - p) * dtdp[i];
        }
        let ok = match tr.equilibrium_at(&guess, pn, FOLLOW_DISTANCE)? {
            Some(fc) if fc.leading < 0.0 => Some(fc),
            _ => None,
        };
        match ok {
            Some(fc) => {
                p = pn;
                t = fc.state;
                dtdp = fc.dtdp;
                leading = fc.leading;
                sub *= 2.0;
            }
            None => {
                let p_bad = pn;
                sub *= 0.5;
                if (p_bad - p).abs() <= rel * p.abs().max(p_bad.abs()).max(f64::MIN_POSITIVE) {
                    return Ok(Follow::Lost {
                        p_ok: p,
                        t_ok: t,
                        p_bad,
                    });
                }
            }
        }
    }
    if leading.is_nan() {
        // No step was taken (the same control value again, at the turn of the sweep).
        if let Some(fc) = tr.equilibrium_at(&t, p, FOLLOW_DISTANCE)? {
            leading = fc.leading;
        }
    }
    Ok(Follow::Reached {
        state: t,
        leading,
        dtdp,
    })
}

/// Settle at the model's control from `start` by time stepping onto the equilibrium the
/// trajectory approaches (`settle_to_equilibrium`): `(state, years, max rate, settled)`.
fn settle_and_polish(
    model: &Model,
    start: &[f64],
    spec: &SweepSpec,
    tol: Tolerances,
) -> Result<(Vec<f64>, f64, f64, bool), SolverError> {
    let s = settle_to_equilibrium(
        model,
        start,
        spec.settle_k_per_year,
        spec.settle_max_years,
        tol.step_k,
        tol.newton_wm2,
    )?;
    Ok((s.state, s.years, s.max_rate, s.settled))
}

/// Tolerances of a sweep.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Tolerances {
    /// Newton residual target (largest |G_i|), W m-2.
    pub newton_wm2: f64,
    /// Local error per step of the settling integration, K.
    pub step_k: f64,
}

/// Run the two-way sweep from `start`, a state at `spec.from` (settled there first).
/// `tol` holds the Newton and time-step tolerances; `progress` gets the number of steps done.
pub fn sweep(
    fam: &Controlled,
    spec: &SweepSpec,
    start: &[f64],
    tol: Tolerances,
    progress: &mut dyn FnMut(usize),
) -> Result<SweepResult, SweepError> {
    let mut hook = |p: &SweepProgress| {
        progress(p.steps.len());
        false
    };
    let run = sweep_from(fam, spec, start, tol, SweepProgress::default(), &mut hook);
    match run.error {
        Some(e) => Err(e),
        None => Ok(run.result),
    }
}

/// Where a sweep stands after a finished step: everything the next step depends on, so that a
/// sweep continued from it takes exactly the steps an uninterrupted one takes.
#[derive(Debug, Clone, PartialEq)]
pub struct SweepProgress {
    /// Finished steps, first leg then second leg.
    pub steps: Vec<SweepStep>,
    /// Tipping points found so far.
    pub tipping: Vec<Tipping>,
    /// Steps that needed time stepping.
    pub settled_steps: usize,
    /// Steps where the year limit was reached first.
    pub unsettled_steps: usize,
    /// `dT/dp` of the last step's state when it was followed along its branch.
    pub carry: Option<Vec<f64>>,
    /// Warm start of the tracer's leading-eigenvalue iteration (NaN: none yet).
    pub eigen_guess: f64,
}

impl Default for SweepProgress {
    fn default() -> SweepProgress {
        SweepProgress {
            steps: Vec::new(),
            tipping: Vec::new(),
            settled_steps: 0,
            unsettled_steps: 0,
            carry: None,
            eigen_guess: f64::NAN,
        }
    }
}

/// A sweep that finished, stopped at a step boundary, or failed (with the steps before).
#[derive(Debug)]
pub struct SweepRun {
    /// The steps done (a full result when neither stopped nor failed).
    pub result: SweepResult,
    /// The state to continue from.
    pub progress: SweepProgress,
    /// Whether `on_step` asked to stop.
    pub stopped: bool,
    /// The failure that ended it.
    pub error: Option<SweepError>,
}

/// The sweep continued from `progress` (default: from the start). After every finished step
/// `on_step` gets the progress and returns `true` to stop there.
pub fn sweep_from(
    fam: &Controlled,
    spec: &SweepSpec,
    start: &[f64],
    tol: Tolerances,
    mut progress: SweepProgress,
    on_step: &mut dyn FnMut(&SweepProgress) -> bool,
) -> SweepRun {
    let r = sweep_inner(fam, spec, start, tol, &mut progress, on_step);
    let (stopped, error) = match r {
        Ok(stopped) => (stopped, None),
        Err(e) => (false, Some(e)),
    };
    // A partial sweep has no hysteresis measure (NaN, no intervals): the legs are not both done.
    let (hysteresis_width, hysteresis_intervals) = if progress.steps.len() == 2 * spec.steps {
        hysteresis(&progress.steps, &progress.tipping, spec.steps)
    } else {
        (f64::NAN, Vec::new())
    };
    SweepRun {
        result: SweepResult {
            steps: progress.steps.clone(),
            tipping: progress.tipping.clone(),
            hysteresis_width,
            hysteresis_intervals,
            settled_steps: progress.settled_steps,
            unsettled_steps: progress.unsettled_steps,
        },
        progress,
        stopped,
        error,
    }
}

/// The loop of `sweep_from`: `Ok(true)` when stopped early.
fn sweep_inner(
    fam: &Controlled,
    spec: &SweepSpec,
    start: &[f64],
    tol: Tolerances,
    pg: &mut SweepProgress,
    on_step: &mut dyn FnMut(&SweepProgress) -> bool,
) -> Result<bool, SweepError> {
    let values: Vec<f64> = (0..spec.steps)
        .map(|k| spec.from + (spec.to - spec.from) * k as f64 / (spec.steps - 1) as f64)
        .collect();
    let opts = ContinuationOptions {
        from: spec.from.min(spec.to),
        to: spec.from.max(spec.to),
        step: 0.01,
        max_step: 0.1,
        min_step: 1e-9,
        max_points: 10,
        tolerance_wm2: tol.newton_wm2,
        fold_tolerance: spec.refine_relative,
    };
    let mut tr = Tracer::new(fam, opts);
    tr.set_eigen_guess(pg.eigen_guess);
    let up = if spec.to > spec.from { 1 } else { -1 };
    let legs: [(i32, Vec<f64>); 2] = [
        (up, values.clone()),
        (-up, values.iter().rev().copied().collect()),
    ];
    let mut prev: Option<(Vec<f64>, f64)> = pg.steps.last().map(|s| (s.state.clone(), s.control));
    let skip = pg.steps.len();
    let mut k = 0;
    for (dir, vals) in legs {
        for &p in &vals {
            k += 1;
            if k <= skip {
                continue;
            }
            let model = fam.model_at(p)?;
            let (state, leading, years, rate, settled, reached) = match &prev {
                // The first value: settle from the given start.
                None => {
                    let (s, y, r, ok) = settle_and_polish(&model, start, spec, tol)?;
                    let l = leading_eigenvalue(&model, 0.0, &s).0;
                    (s, l, y, r, ok, Reached::Settled)
                }
                Some((t0, p0)) => {
                    // Follow the branch; at each loss record the tipping point, let the state
                    // fall just beyond it, and follow the new branch on to this value (a coarse
                    // step can hold several tipping points).
                    let (mut from_t, mut from_p) = (t0.clone(), *p0);
                    let mut dtdp0 = pg.carry.take();
                    let mut years = 0.0;
                    let mut jumped = false;
                    let mut out = None;
                    for _ in 0..1000 {
                        match follow(&mut tr, &from_t, from_p, p, spec.refine_relative, dtdp0.take())? {
                            Follow::Reached { state, leading, dtdp } => {
                                pg.carry = Some(dtdp);
                                let how = if jumped {
                                    Reached::Settled
                                } else {
                                    Reached::Followed
                                };
                                out = Some((state, leading, years, 0.0, true, how));
                                break;
                            }
                            Follow::Lost { p_ok, t_ok, p_bad } => {
                                // Let the state fall a little beyond the tipping point: just past
                                // a fold the dynamics linger near its ghost, slower than any
                                // settle criterion can tell from an equilibrium.
                                let reach = (100.0 * (p_bad - p_ok).abs()).max(1e-3 * p_ok.abs());
                                let p_jump = if (p - p_ok).abs() <= reach {
                                    p
                                } else {
                                    p_ok + reach * (p - p_ok).signum()
                                };
                                let after = fam.model_at(p_jump)?;
                                let (st, y, r, ok) = settle_and_polish(&after, &t_ok, spec, tol)?;
                                let at = fam.model_at(p_ok)?;
                                pg.tipping.push(Tipping {
                                    control: 0.5 * (p_ok + p_bad),
                                    bracket: (p_ok, p_bad),
                                    direction: dir,
                                    step: pg.steps.len(),
                                    ice_edge_before: at.ice_edges(&t_ok).0,
                                    ice_edge_after: after.ice_edges(&st).0,
                                    global_mean_before: at.global_mean(&t_ok),
                                    global_mean_after: after.global_mean(&st),
                                });
                                years += y;
                                jumped = true;
                                if !ok || p_jump == p || r > 0.0 {
                                    // Unsettled (year limit), not on an exact equilibrium, or
                                    // already at this value: settle here and stop.
                                    let (st, y2, r2, ok2) = if p_jump == p {
                                        (st, 0.0, r, ok)
                                    } else {
                                        settle_and_polish(&model, &st, spec, tol)?
                                    };
                                    let l = leading_eigenvalue(&model, 0.0, &st).0;
                                    out = Some((st, l, years + y2, r2, ok2, Reached::Settled));
                                    break;
                                }
                                from_t = st;
                                from_p = p_jump;
                            }
                        }
                    }
                    match out {
                        Some(o) => o,
                        None => {
                            // Safety net (not met in practice): settle at this value.
                            let (st, y, r, ok) = settle_and_polish(&model, t0, spec, tol)?;
                            let l = leading_eigenvalue(&model, 0.0, &st).0;
                            (st, l, years + y, r, ok, Reached::Settled)
                        }
                    }
                }
            };
            if reached == Reached::Settled {
                pg.settled_steps += 1;
                if !settled {
                    pg.unsettled_steps += 1;
                }
            }
            let (north, south) = model.ice_edges(&state);
            pg.steps.push(SweepStep {
                control: p,
                direction: dir,
                global_mean: model.global_mean(&state),
                ice_edge: north,
                ice_edge_south: south,
                state: state.clone(),
                leading,
                settle_years: years,
                max_rate: rate,
                settled,
                reached,
            });
            prev = Some((state, p));
            pg.eigen_guess = tr.eigen_guess();
            if on_step(pg) {
                return Ok(true);
            }
        }
    }
    Ok(false)
}

/// Intervals of control where the two legs ended in different states, bounded by the refined
/// tipping points where one lies in the bounding grid gap (else the gap's midpoint).
fn hysteresis(steps: &[SweepStep], tipping: &[Tipping], n: usize) -> (f64, Vec<(f64, f64)>) {
    if steps.len() != 2 * n {
        return (0.0, Vec::new());
    }
    let (first, second) = steps.split_at(n);
    // differ[k] for grid value k (first-leg order).
    let differ: Vec<bool> = (0..n)
        .map(|k| {
            let a = &first[k].state;
            let b = &second[n - 1 - k].state;
            a.iter().zip(b).any(|(x, y)| (x - y).abs() >= SAME_STATE_K)
        })
        .collect();
    let value = |k: usize| first[k].control;
    // The outermost tipping point inside the grid gap between values k and k+1 (the lowest for
    // the low end of an interval, the highest for the high end), else the gap's midpoint.
    let tip_in = |k: usize, low_end: bool| {
        let (lo, hi) = (value(k).min(value(k + 1)), value(k).max(value(k + 1)));
        let inside = tipping.iter().map(|t| t.control).filter(|c| *c >= lo && *c <= hi);
        let pick = if low_end {
            inside.fold(f64::INFINITY, f64::min)
        } else {
            inside.fold(f64::NEG_INFINITY, f64::max)
        };
        if pick.is_finite() {
            pick
        } else {
            0.5 * (value(k) + value(k + 1))
        }
    };
    let mut intervals = Vec::new();
    let mut k = 0;
    while k < n {
        if !differ[k] {
            k += 1;
            continue;
        }
        let start = k;
        while k + 1 < n && differ[k + 1] {
            k += 1;
        }
        // In first-leg order; the gap before `start` bounds the interval on that side.
        let ascending = value(n - 1) > value(0);
        let lo = if start == 0 {
            value(0)
        } else {
            tip_in(start - 1, ascending)
        };
        let hi = if k + 1 == n {
            value(n - 1)
        } else {
            tip_in(k, !ascending)
        };
        intervals.push((lo.min(hi), lo.max(hi)));
        k += 1;
    }
    let width = intervals.iter().map(|(a, b)| b - a).sum();
    (width, intervals)
}
