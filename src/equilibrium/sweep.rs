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
//! A sub-step counts as staying on the branch only if the ice edge (each hemisphere's) moves
//! by at most one band and the state keeps its kind (ice free, small cap, large cap, snowball);
//! otherwise the sub-step is halved, so a coarse step that spans a fold is subdivided until the
//! jump is bracketed to `refine_relative`. A jump that cannot be bracketed (the state time
//! stepping reached is no exact equilibrium) is recorded as unresolved, with the interval it
//! lies in and no control value.
//!
//! The hysteresis width is the total length of control over which the two legs end in
//! different states. The legs are compared between every pair of neighbouring tipping points
//! (both legs' states followed to the middle), so an interval with no grid value inside counts
//! too. The width is reported only when every such interval is bounded by refined tipping
//! points on both ends; otherwise it is NaN and `hysteresis_missing` says what is missing.

use super::continuation::{ContinuationOptions, Tracer};
use super::control::Controlled;
use super::regimes::Kind;
use super::settle::settle_to_equilibrium;
use super::stability::leading_eigenvalue;
use crate::config::spec::SweepSpec;
use crate::config::ConfigError;
use crate::grid::Grid;
use crate::integrate::SolverError;
use crate::model::Model;

/// Largest distance (scaled metric of the continuation, RMS of 50 K per unit) between the
/// predicted and the converged state for a step to count as staying on the branch.
const FOLLOW_DISTANCE: f64 = 0.05;
/// Up and down states closer than this everywhere (K) are the same equilibrium.
const SAME_STATE_K: f64 = 0.05;
/// A change of kind within a bracket of `refine_relative` counts as continuous (the branch
/// crossing a kind's boundary) only if the ice edge moved by at most this fraction of a band;
/// a jump off a fold moves it by a finite amount however small the bracket.
const EDGE_CONTINUITY: f64 = 0.01;

/// The ice edges of a state, degrees north (south: globe only).
#[derive(Debug, Clone, Copy, PartialEq)]
struct Edges {
    north: f64,
    south: Option<f64>,
}

impl Edges {
    fn of(model: &Model, t: &[f64]) -> Edges {
        let (north, south) = model.ice_edges(t);
        Edges { north, south }
    }

    /// Per hemisphere: (edge before, edge after) as latitudes poleward-positive, and the sign
    /// of the hemisphere's x = sin(latitude).
    fn pairs(self, to: Edges) -> impl Iterator<Item = (f64, f64, f64)> {
        let south = match (self.south, to.south) {
            (Some(a), Some(b)) => Some((-a, -b, -1.0)),
            _ => None,
        };
        std::iter::once((self.north, to.north, 1.0)).chain(south)
    }
}

/// Width in x = sin(latitude) of the band of `grid` holding `x` (either hemisphere).
fn band_at(grid: &Grid, x: f64) -> f64 {
    let k = grid.x_faces.partition_point(|f| *f < x).clamp(1, grid.len()) - 1;
    grid.dx[k]
}

/// Whether the step from edges `a` to `b` stays on one branch: each ice edge moves by at most
/// one band and keeps its kind; a kind may change only within a `tiny` (fully refined) step and
/// with the edge moving by at most `EDGE_CONTINUITY` of a band.
fn continuous(grid: &Grid, a: Edges, b: Edges, tiny: bool) -> bool {
    a.pairs(b).all(|(ea, eb, sign)| {
        let (xa, xb) = (ea.to_radians().sin(), eb.to_radians().sin());
        let band = band_at(grid, sign * xa).min(band_at(grid, sign * xb));
        let moved = (xb - xa).abs();
        if moved > band {
            return false;
        }
        Kind::of_edge(ea) == Kind::of_edge(eb) || (tiny && moved <= EDGE_CONTINUITY * band)
    })
}

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
/// An unresolved one is a jump known to lie between `bracket.0` and `bracket.1` (a whole
/// stretch the sweep could not follow), with no control value.
#[derive(Debug, Clone, PartialEq)]
pub struct Tipping {
    /// Control value (midpoint of the final bracket; NaN when unresolved).
    pub control: f64,
    /// Whether the bracket was refined to `refine_relative` (else: unresolved).
    pub resolved: bool,
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
    /// Control value where the state settled after the jump.
    pub after_control: f64,
    /// The state it settled on there, K.
    pub after_state: Vec<f64>,
}

/// Sweep result.
#[derive(Debug, Clone, PartialEq)]
pub struct SweepResult {
    /// Every step, first leg then second leg.
    pub steps: Vec<SweepStep>,
    /// Refined tipping points.
    pub tipping: Vec<Tipping>,
    /// Total control length over which the legs disagree (control units); NaN when an end of
    /// an interval of disagreement is not found (`hysteresis_missing` says why).
    pub hysteresis_width: f64,
    /// Intervals of disagreement `(low, high)` whose ends are both refined tipping points.
    pub hysteresis_intervals: Vec<(f64, f64)>,
    /// What keeps the width from being reported (None: reported).
    pub hysteresis_missing: Option<String>,
    /// Steps that needed time stepping.
    pub settled_steps: usize,
    /// Steps where the year limit was reached before the settle criterion.
    pub unsettled_steps: usize,
}

/// The hysteresis line of a summary: `width` in `units` when reported, else what is missing
/// (never a width that is not bounded by found tipping points on both ends).
pub fn hysteresis_text(width: f64, missing: Option<&str>, units: &str) -> String {
    match missing {
        None if width.is_finite() => format!("hysteresis width {width:.6} {units}"),
        None => "hysteresis width not reported".to_string(),
        Some(why) => format!("hysteresis width not reported: {why}"),
    }
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
    /// The start is no exact equilibrium and no step from it stayed on a branch.
    NotOnBranch,
}

/// Whether the step from `p` to `q` is within the relative bracket `rel`.
fn tiny(p: f64, q: f64, rel: f64) -> bool {
    (q - p).abs() <= rel * p.abs().max(q.abs()).max(f64::MIN_POSITIVE)
}

/// Follow the stable branch through `(t0, p0)` to `p1`.
/// `dtdp0` is `dT/dp` at the start when the previous step knows it. A sub-step is accepted
/// when Newton from the tangent prediction converges nearby to a stable equilibrium that is
/// `continuous` with the last one (ice edge within a band, same kind); else it is halved.
fn follow(
    tr: &mut Tracer<'_>,
    fam: &Controlled,
    t0: &[f64],
    p0: f64,
    p1: f64,
    rel: f64,
    dtdp0: Option<Vec<f64>>,
) -> Result<Follow, ConfigError> {
    let mut p = p0;
    let mut t = t0.to_vec();
    let mut leading = f64::NAN;
    let grid = fam.base_model().grid.clone();
    let mut edges = Edges::of(&fam.model_at(p0)?, t0);
    // dT/dp at the start (solving there also confirms the start is an equilibrium).
    let mut verified = dtdp0.is_some();
    let mut dtdp = match dtdp0 {
        Some(d) => d,
        None => match tr.equilibrium_at(t0, p0, FOLLOW_DISTANCE)? {
            Some(fc) => {
                verified = true;
                t = fc.state;
                edges = Edges::of(tr.model(), &t);
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
            Some(fc) if fc.leading < 0.0 => {
                let e = Edges::of(tr.model(), &fc.state);
                continuous(&grid, edges, e, tiny(p, pn, rel)).then_some((fc, e))
            }
            _ => None,
        };
        match ok {
            Some((fc, e)) => {
                p = pn;
                t = fc.state;
                dtdp = fc.dtdp;
                leading = fc.leading;
                edges = e;
                verified = true;
                sub *= 2.0;
            }
            None => {
                let p_bad = pn;
                sub *= 0.5;
                if tiny(p, p_bad, rel) {
                    if !verified {
                        return Ok(Follow::NotOnBranch);
                    }
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
    let (hysteresis_width, hysteresis_intervals, hysteresis_missing, error) =
        if error.is_none() && progress.steps.len() == 2 * spec.steps {
            match hysteresis(fam, spec, tol, &progress.steps, &progress.tipping) {
                Ok(h) => (h.width, h.intervals, h.missing, None),
                Err(e) => (f64::NAN, Vec::new(), None, Some(SweepError::Config(e))),
            }
        } else {
            let why = if error.is_some() {
                "the sweep failed"
            } else {
                "the sweep stopped before both legs were done"
            };
            (f64::NAN, Vec::new(), Some(why.to_string()), error)
        };
    SweepRun {
        result: SweepResult {
            steps: progress.steps.clone(),
            tipping: progress.tipping.clone(),
            hysteresis_width,
            hysteresis_intervals,
            hysteresis_missing,
            settled_steps: progress.settled_steps,
            unsettled_steps: progress.unsettled_steps,
        },
        progress,
        stopped,
        error,
    }
}

/// The continuation settings the sweep's tracer uses (natural continuation only).
fn tracer_options(spec: &SweepSpec, tol: Tolerances) -> ContinuationOptions {
    ContinuationOptions {
        from: spec.from.min(spec.to),
        to: spec.from.max(spec.to),
        step: 0.01,
        max_step: 0.1,
        min_step: 1e-9,
        max_points: 10,
        tolerance_wm2: tol.newton_wm2,
        fold_tolerance: spec.refine_relative,
    }
}

/// A finished step: state, leading eigenvalue, settle years, max rate, settled, how reached.
type StepOutcome = (Vec<f64>, f64, f64, f64, bool, Reached);

/// The loop of `sweep_from`: `Ok(true)` when stopped early.
fn sweep_inner(
    fam: &Controlled,
    spec: &SweepSpec,
    start: &[f64],
    tol: Tolerances,
    pg: &mut SweepProgress,
    on_step: &mut dyn FnMut(&SweepProgress) -> bool,
) -> Result<bool, SweepError> {
    let values = spec.spacing.values(spec.from, spec.to, spec.steps);
    let mut tr = Tracer::new(fam, tracer_options(spec, tol));
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
                Some((t0, p0)) => step_to(fam, &mut tr, spec, tol, pg, dir, (t0, *p0), p, &model)?,
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

/// One sweep step from `(t0, p0)` to `p` (with `model` at `p`): follow the branch; at each loss
/// record the tipping point, let the state fall just beyond it, and follow the new branch on to
/// `p` (a coarse step can hold several tipping points). A stretch that cannot be followed is
/// settled across, and a jump on it is recorded as unresolved.
#[allow(clippy::too_many_arguments)]
fn step_to(
    fam: &Controlled,
    tr: &mut Tracer<'_>,
    spec: &SweepSpec,
    tol: Tolerances,
    pg: &mut SweepProgress,
    dir: i32,
    (t0, p0): (&[f64], f64),
    p: f64,
    model: &Model,
) -> Result<StepOutcome, SweepError> {
    let (mut from_t, mut from_p) = (t0.to_vec(), p0);
    let mut dtdp0 = pg.carry.take();
    let mut years = 0.0;
    let mut jumped = false;
    for _ in 0..1000 {
        match follow(tr, fam, &from_t, from_p, p, spec.refine_relative, dtdp0.take())? {
            Follow::Reached { state, leading, dtdp } => {
                pg.carry = Some(dtdp);
                let how = if jumped {
                    Reached::Settled
                } else {
                    Reached::Followed
                };
                return Ok((state, leading, years, 0.0, true, how));
            }
            Follow::Lost { p_ok, t_ok, p_bad } => {
                // Let the state fall a little beyond the tipping point: just past a fold the
                // dynamics linger near its ghost, slower than any settle criterion can tell
                // from an equilibrium. While the state time stepping reaches is no exact
                // equilibrium (still on the ghost), go ten times further and settle on from it.
                let mut reach = (100.0 * (p_bad - p_ok).abs()).max(1e-3 * p_ok.abs());
                let mut st = t_ok.clone();
                let (mut p_jump, mut y, mut r, mut ok);
                loop {
                    p_jump = if (p - p_ok).abs() <= reach {
                        p
                    } else {
                        p_ok + reach * (p - p_ok).signum()
                    };
                    let s2 = settle_and_polish(&fam.model_at(p_jump)?, &st, spec, tol)?;
                    (st, r, ok) = (s2.0, s2.2, s2.3);
                    y = s2.1;
                    years += y;
                    if (ok && r == 0.0) || p_jump == p {
                        break;
                    }
                    reach *= 10.0;
                }
                let after = fam.model_at(p_jump)?;
                let at = fam.model_at(p_ok)?;
                pg.tipping.push(Tipping {
                    control: 0.5 * (p_ok + p_bad),
                    resolved: true,
                    bracket: (p_ok, p_bad),
                    direction: dir,
                    step: pg.steps.len(),
                    ice_edge_before: at.ice_edges(&t_ok).0,
                    ice_edge_after: after.ice_edges(&st).0,
                    global_mean_before: at.global_mean(&t_ok),
                    global_mean_after: after.global_mean(&st),
                    after_control: p_jump,
                    after_state: st.clone(),
                });
                jumped = true;
                if p_jump == p {
                    let l = leading_eigenvalue(model, 0.0, &st).0;
                    return Ok((st, l, years, r, ok, Reached::Settled));
                }
                if !ok {
                    // The year limit ended the settling: the rest of the step cannot be
                    // followed from it.
                    return settle_across(fam, tr, spec, tol, pg, dir, (&st, p_jump), p, model, years);
                }
                from_t = st;
                from_p = p_jump;
            }
            Follow::NotOnBranch => {
                return settle_across(fam, tr, spec, tol, pg, dir, (&from_t, from_p), p, model, years);
            }
        }
    }
    // Safety net (not met in practice): settle across the rest of the step.
    settle_across(fam, tr, spec, tol, pg, dir, (&from_t, from_p), p, model, years)
}

/// Settle at `p` from `(t, q)` where following is not possible. If the state reached there is
/// not on the branch of `(t, q)` (followed back it does not return to `t`), the jump in
/// between is recorded as unresolved.
#[allow(clippy::too_many_arguments)]
fn settle_across(
    fam: &Controlled,
    tr: &mut Tracer<'_>,
    spec: &SweepSpec,
    tol: Tolerances,
    pg: &mut SweepProgress,
    dir: i32,
    (t, q): (&[f64], f64),
    p: f64,
    model: &Model,
    years: f64,
) -> Result<StepOutcome, SweepError> {
    let (st, y, r, ok) = settle_and_polish(model, t, spec, tol)?;
    let l = leading_eigenvalue(model, 0.0, &st).0;
    let back = match follow(tr, fam, &st, p, q, spec.refine_relative, None)? {
        Follow::Reached { state, .. } => state.iter().zip(t).all(|(a, b)| (a - b).abs() < SAME_STATE_K),
        _ => false,
    };
    if !back {
        let from = fam.model_at(q)?;
        pg.tipping.push(Tipping {
            control: f64::NAN,
            resolved: false,
            bracket: (q, p),
            direction: dir,
            step: pg.steps.len(),
            ice_edge_before: from.ice_edges(t).0,
            ice_edge_after: model.ice_edges(&st).0,
            global_mean_before: from.global_mean(t),
            global_mean_after: model.global_mean(&st),
            after_control: p,
            after_state: st.clone(),
        });
    }
    pg.carry = None;
    Ok((st, l, years + y, r, ok, Reached::Settled))
}

/// The hysteresis of a finished two-way sweep.
struct Hysteresis {
    width: f64,
    intervals: Vec<(f64, f64)>,
    missing: Option<String>,
}

/// What bounds a stretch of control between neighbouring breakpoints.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Bound {
    /// A refined tipping point.
    Tipping,
    /// An end of an unresolved jump's interval.
    Unresolved,
    /// An end of the swept range.
    RangeEnd,
}

/// The legs' disagreement: cut the range at every tipping point (and unresolved interval) of
/// either leg; between neighbouring cuts each leg stays on one branch, so follow both legs'
/// states to the middle of each stretch and compare them there.
fn hysteresis(
    fam: &Controlled,
    spec: &SweepSpec,
    tol: Tolerances,
    steps: &[SweepStep],
    tipping: &[Tipping],
) -> Result<Hysteresis, ConfigError> {
    let (lo, hi) = (spec.from.min(spec.to), spec.from.max(spec.to));
    let mut cuts: Vec<(f64, Bound)> = vec![(lo, Bound::RangeEnd), (hi, Bound::RangeEnd)];
    for t in tipping {
        if t.resolved {
            cuts.push((t.control, Bound::Tipping));
        } else {
            cuts.push((t.bracket.0, Bound::Unresolved));
            cuts.push((t.bracket.1, Bound::Unresolved));
        }
    }
    cuts.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut tr = Tracer::new(fam, tracer_options(spec, tol));
    // (low cut, high cut) of each stretch where the legs differ, merged.
    let mut differ: Vec<((f64, Bound), (f64, Bound))> = Vec::new();
    let mut undecided: Option<f64> = None;
    let mut open: Option<(f64, Bound)> = None;
    for w in cuts.windows(2) {
        let (a, b) = (w[0], w[1]);
        if !(b.0 > a.0) {
            continue;
        }
        let m = spec.spacing.midpoint(a.0, b.0);
        let states = (
            leg_state_at(fam, &mut tr, spec, steps, tipping, 1, m)?,
            leg_state_at(fam, &mut tr, spec, steps, tipping, -1, m)?,
        );
        let d = match states {
            (Some(u), Some(v)) => u.iter().zip(&v).any(|(x, y)| (x - y).abs() >= SAME_STATE_K),
            _ => {
                undecided.get_or_insert(m);
                false
            }
        };
        match (d, open) {
            (true, None) => open = Some(a),
            (false, Some(start)) => {
                differ.push((start, a));
                open = None;
            }
            _ => {}
        }
    }
    if let Some(start) = open {
        differ.push((start, *cuts.last().expect("two range ends")));
    }
    let mut intervals = Vec::new();
    let mut missing = undecided.map(|m| format!("the legs could not be compared near {m}"));
    for &((a, ba), (b, bb)) in &differ {
        for (v, bound) in [(a, ba), (b, bb)] {
            let why = match bound {
                Bound::Tipping => continue,
                Bound::RangeEnd => format!(
                    "the legs still differ at {v}, an end of the swept range (widen sweep.from/sweep.to)"
                ),
                Bound::Unresolved => {
                    format!("a jump near {v} could not be placed (unresolved tipping point)")
                }
            };
            missing.get_or_insert(why);
        }
        if ba == Bound::Tipping && bb == Bound::Tipping {
            intervals.push((a, b));
        }
    }
    let width = if missing.is_some() {
        f64::NAN
    } else {
        intervals.iter().fold(0.0, |w, (a, b)| w + (b - a))
    };
    Ok(Hysteresis {
        width,
        intervals,
        missing,
    })
}

/// The state of the leg going `dir` at control `m`: followed along its branch from the last
/// state it reached before `m` (a step, or where it settled after a jump), else back from the
/// first one after `m`. None when neither follows to `m`.
fn leg_state_at(
    fam: &Controlled,
    tr: &mut Tracer<'_>,
    spec: &SweepSpec,
    steps: &[SweepStep],
    tipping: &[Tipping],
    dir: i32,
    m: f64,
) -> Result<Option<Vec<f64>>, ConfigError> {
    // Travel direction of the leg in the control: +1 increasing.
    let sense = f64::from(dir);
    let known = steps
        .iter()
        .filter(|s| s.direction == dir)
        .map(|s| (s.control, &s.state))
        .chain(
            tipping
                .iter()
                .filter(|t| t.direction == dir)
                .map(|t| (t.after_control, &t.after_state)),
        );
    let (mut before, mut after): (Option<(f64, &Vec<f64>)>, Option<(f64, &Vec<f64>)>) = (None, None);
    for (c, st) in known {
        let key = sense * c;
        if key <= sense * m {
            if before.is_none_or(|(b, _)| sense * b <= key) {
                before = Some((c, st));
            }
        } else if after.is_none_or(|(a, _)| sense * a > key) {
            after = Some((c, st));
        }
    }
    for (c, st) in before.into_iter().chain(after) {
        if let Follow::Reached { state, .. } = follow(tr, fam, st, c, m, spec.refine_relative, None)? {
            return Ok(Some(state));
        }
    }
    Ok(None)
}
