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
//! scheme integrates from the previous state at the new value until the largest |dT/dt| is below
//! the settle criterion (or the year limit, reported), so the state falls where the dynamics
//! take it, and Newton polishes the result when it stays close.
//!
//! The hysteresis width is the total length of control over which the two legs ended in
//! different states, with each interval bounded by the refined tipping points.

use super::continuation::{ContinuationOptions, Tracer};
use super::control::Controlled;
use super::settle::settle;
use super::stability::leading_eigenvalue;
use super::{newton, NewtonOptions};
use crate::config::spec::SweepSpec;
use crate::config::ConfigError;
use crate::integrate::SolverError;
use crate::model::Model;

/// Largest distance (scaled metric of the continuation, RMS of 50 K per unit) between the
/// predicted and the converged state for a step to count as staying on the branch.
const FOLLOW_DISTANCE: f64 = 0.05;
/// Up and down states closer than this everywhere (K) are the same equilibrium.
const SAME_STATE_K: f64 = 0.05;
/// Local error per step of the settling integration, K.
const SETTLE_TOLERANCE_K: f64 = 1e-3;

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
    /// Reached the target on the branch.
    Reached { state: Vec<f64>, leading: f64 },
    /// Lost between `p_ok` (state `t_ok`) and `p_bad`.
    Lost { p_ok: f64, t_ok: Vec<f64>, p_bad: f64 },
}

/// Follow the stable branch through `(t0, p0)` to `p1`.
fn follow(tr: &mut Tracer<'_>, t0: &[f64], p0: f64, p1: f64, rel: f64) -> Result<Follow, ConfigError> {
    let mut p = p0;
    let mut t = t0.to_vec();
    // dT/dp at the start (also confirms the start is an equilibrium there).
    let (mut dtdp, mut leading) = match tr.equilibrium_at(t0, p0, FOLLOW_DISTANCE)? {
        Some(fc) => {
            t = fc.state;
            (fc.dtdp, fc.leading)
        }
        None => (vec![0.0; t0.len()], f64::NAN),
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
    Ok(Follow::Reached { state: t, leading })
}

/// Settle at the model's control from `start` by time stepping, then polish with Newton when
/// the result stays within `SAME_STATE_K` of the settled state.
fn settle_and_polish(
    model: &Model,
    start: &[f64],
    spec: &SweepSpec,
    tol: f64,
) -> Result<(Vec<f64>, f64, f64, bool), SolverError> {
    let s = settle(
        model,
        start,
        spec.settle_k_per_year,
        spec.settle_max_years,
        SETTLE_TOLERANCE_K,
    )?;
    let opts = NewtonOptions {
        tolerance_wm2: tol,
        max_iterations: 60,
        max_change: 5.0,
    };
    if s.settled {
        if let Ok(r) = newton(model, 0.0, &s.state, opts) {
            let close = r
                .state
                .iter()
                .zip(&s.state)
                .all(|(a, b)| (a - b).abs() < SAME_STATE_K);
            if close && leading_eigenvalue(model, 0.0, &r.state).0 < 0.0 {
                return Ok((r.state, s.years, 0.0, true));
            }
        }
    }
    Ok((s.state, s.years, s.max_rate, s.settled))
}

/// Run the two-way sweep from `start`, a state at `spec.from` (settled there first).
/// `tolerance_wm2` is the Newton residual target; `progress` gets the number of steps done.
pub fn sweep(
    fam: &Controlled,
    spec: &SweepSpec,
    start: &[f64],
    tolerance_wm2: f64,
    progress: &mut dyn FnMut(usize),
) -> Result<SweepResult, SweepError> {
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
        tolerance_wm2,
        fold_tolerance: spec.refine_relative,
    };
    let mut tr = Tracer::new(fam, opts);
    let mut steps: Vec<SweepStep> = Vec::with_capacity(2 * spec.steps);
    let mut tipping = Vec::new();
    let (mut settled_steps, mut unsettled_steps) = (0, 0);
    let up = if spec.to > spec.from { 1 } else { -1 };
    let legs: [(i32, Vec<f64>); 2] = [
        (up, values.clone()),
        (-up, values.iter().rev().copied().collect()),
    ];
    let mut prev: Option<(Vec<f64>, f64)> = None;
    for (dir, vals) in legs {
        for &p in &vals {
            let model = fam.model_at(p)?;
            let (state, leading, years, rate, settled, reached) = match &prev {
                // The first value: settle from the given start.
                None => {
                    let (s, y, r, ok) = settle_and_polish(&model, start, spec, tolerance_wm2)?;
                    let l = leading_eigenvalue(&model, 0.0, &s).0;
                    (s, l, y, r, ok, Reached::Settled)
                }
                Some((t0, p0)) => match follow(&mut tr, t0, *p0, p, spec.refine_relative)? {
                    Follow::Reached { state, leading } => (state, leading, 0.0, 0.0, true, Reached::Followed),
                    Follow::Lost { p_ok, t_ok, p_bad } => {
                        let (s, y, r, ok) = settle_and_polish(&model, t0, spec, tolerance_wm2)?;
                        let at = fam.model_at(p_ok)?;
                        tipping.push(Tipping {
                            control: 0.5 * (p_ok + p_bad),
                            bracket: (p_ok, p_bad),
                            direction: dir,
                            step: steps.len(),
                            ice_edge_before: at.ice_edges(&t_ok).0,
                            ice_edge_after: model.ice_edges(&s).0,
                            global_mean_before: at.global_mean(&t_ok),
                            global_mean_after: model.global_mean(&s),
                        });
                        let l = leading_eigenvalue(&model, 0.0, &s).0;
                        (s, l, y, r, ok, Reached::Settled)
                    }
                },
            };
            if reached == Reached::Settled {
                settled_steps += 1;
                if !settled {
                    unsettled_steps += 1;
                }
            }
            let (north, south) = model.ice_edges(&state);
            steps.push(SweepStep {
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
            progress(steps.len());
        }
    }
    let (hysteresis_width, hysteresis_intervals) = hysteresis(&steps, &tipping, spec.steps);
    Ok(SweepResult {
        steps,
        tipping,
        hysteresis_width,
        hysteresis_intervals,
        settled_steps,
        unsettled_steps,
    })
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
    // A tipping point inside the grid gap between values k and k+1, if any.
    let tip_in = |k: usize| {
        let (lo, hi) = (value(k).min(value(k + 1)), value(k).max(value(k + 1)));
        tipping
            .iter()
            .filter(|t| t.control >= lo && t.control <= hi)
            .map(|t| t.control)
            .next()
            .unwrap_or(0.5 * (value(k) + value(k + 1)))
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
        let lo = if start == 0 { value(0) } else { tip_in(start - 1) };
        let hi = if k + 1 == n { value(n - 1) } else { tip_in(k) };
        intervals.push((lo.min(hi), lo.max(hi)));
        k += 1;
    }
    let width = intervals.iter().map(|(a, b)| b - a).sum();
    (width, intervals)
}
