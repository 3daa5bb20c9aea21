//! All branches of equilibria in a control range, each traced once through all its folds.
//!
//! Seeds come from two sources: Newton from several starting climates (ice free, partial ice
//! caps, snowball) at both ends and the middle of the range, and "pinned-edge" equilibria with
//! the freezing line held at a band centre of the northern hemisphere (band `k` at the freezing
//! temperature, the control free), which find partial-ice branches whatever their stability,
//! also where no branch meets the ends of the range.
//!
//! A seed is skipped when it lies on a branch already traced: when Newton at the seed's control,
//! started from the branch interpolated there, lands on the seed. A branch whose every point
//! lies on another, longer branch (it can happen when a first trace ended early) is dropped, and
//! a fold already listed on an earlier branch is dropped from a later, partly overlapping one (a
//! trace that stopped at the point limit, traced again from a seed beyond its end), so each fold
//! is listed once.

use super::continuation::{Branch, ContinuationError, ContinuationOptions, Tracer};
use super::control::Controlled;
use super::symmetry::{break_symmetry, BranchBreak};
use super::{newton, NewtonOptions};
use crate::model::Model;

/// Starting climates for the Newton seeds: `(name, mean part in C, P2 part in K)`. Partial ice
/// caps come from the pinned-edge seeds.
pub const SEED_CLIMATES: &[(&str, f64, f64)] = &[
    ("ice free", 60.0, 0.0),
    ("warm", 15.0, -30.0),
    ("snowball", -80.0, 0.0),
];

/// Two states are the same equilibrium when no band differs by more than this, K.
const SAME_STATE_K: f64 = 1e-5;

/// Distinct equilibria at the model's control value reached by Newton from the seed climates.
pub fn seeds(model: &Model, tolerance_wm2: f64) -> Vec<Vec<f64>> {
    let mut found: Vec<Vec<f64>> = Vec::new();
    for (_, mean_c, p2k) in SEED_CLIMATES {
        let start: Vec<f64> = model
            .grid
            .x_centres
            .iter()
            .map(|&x| mean_c + 273.15 + p2k * crate::grid::p2(x))
            .collect();
        let opts = NewtonOptions {
            tolerance_wm2,
            max_iterations: 15,
            max_change: 20.0,
        };
        if let Ok(r) = newton(model, 0.0, &start, opts) {
            if !found.iter().any(|f| max_diff(f, &r.state) < 1e-3) {
                found.push(r.state);
            }
        }
    }
    found
}

/// Number of bands at which the edge is pinned for seeds.
const PINNED_SEEDS: usize = 12;

/// Pinned-edge equilibria with the control inside the range: `(state, control)`.
fn pinned_seeds(
    tr: &mut Tracer<'_>,
    fam: &Controlled,
    opts: &ContinuationOptions,
) -> Result<Vec<(Vec<f64>, f64)>, ContinuationError> {
    let model = fam.base_model();
    let g = &model.grid;
    let tf = model.albedo.freeze;
    let north: Vec<usize> = (0..g.len()).filter(|&i| g.x_centres[i] > 0.0).collect();
    let (lo, hi) = (opts.from.min(opts.to), opts.from.max(opts.to));
    let mut out = Vec::new();
    if north.len() < 2 {
        return Ok(out);
    }
    let count = PINNED_SEEDS.min(north.len());
    for j in 0..count {
        let k = north[(j * (north.len() - 1)) / (count - 1).max(1)];
        let xk = g.x_centres[k];
        // Warm equator, cold pole, freezing at band k.
        let guess: Vec<f64> = g
            .x_centres
            .iter()
            .map(|x| tf + 30.0 * (xk * xk - x * x))
            .collect();
        if let Some((t, p)) = tr.pinned(k, tf, &guess, 0.5 * (lo + hi))? {
            if p >= lo && p <= hi {
                out.push((t, p));
            }
        }
    }
    Ok(out)
}

/// Largest absolute difference, K.
pub fn max_diff(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| (x - y).abs()).fold(0.0, f64::max)
}

/// Whether the equilibrium `s` at control `p` lies on `branch`.
pub(crate) fn on_branch(
    tr: &mut Tracer<'_>,
    branch: &Branch,
    s: &[f64],
    p: f64,
) -> Result<bool, ContinuationError> {
    let pts = &branch.points;
    for pt in pts {
        if pt.control == p && max_diff(&pt.state, s) < SAME_STATE_K {
            return Ok(true);
        }
    }
    for w in pts.windows(2) {
        let (a, b) = (&w[0], &w[1]);
        if (a.control - p) * (b.control - p) > 0.0 || a.control == b.control {
            continue;
        }
        let f = (p - a.control) / (b.control - a.control);
        let guess: Vec<f64> = a
            .state
            .iter()
            .zip(&b.state)
            .map(|(x, y)| x + f * (y - x))
            .collect();
        if let Some(t) = tr.equilibrium_at(&guess, p, 1.0)? {
            if max_diff(&t.state, s) < SAME_STATE_K {
                return Ok(true);
            }
        }
    }
    Ok(false)
}

/// Whether every point of `inner` is within `tol` (scaled arclength metric) of the polyline of
/// `outer`.
///
/// A segment whose control range lies farther than `tol` from a point's control (the control
/// part of the metric alone) is skipped before any O(n) distance: the test is the same, but
/// two long branches cost O(points^2) comparisons instead of O(points^2 n) flops.
fn contained(tr: &Tracer<'_>, inner: &Branch, outer: &Branch, tol: f64) -> bool {
    inner.points.iter().all(|q| {
        outer.points.windows(2).any(|w| {
            // Distance to the segment, in the metric, by projection.
            let (a, b) = (&w[0], &w[1]);
            let (lo, hi) = (a.control.min(b.control), a.control.max(b.control));
            let gap = (lo - q.control).max(q.control - hi).max(0.0);
            if tr.distance(&[], 0.0, &[], gap) > tol {
                return false;
            }
            let ab = tr.distance(&a.state, a.control, &b.state, b.control);
            let qa = tr.distance(&q.state, q.control, &a.state, a.control);
            let qb = tr.distance(&q.state, q.control, &b.state, b.control);
            if ab == 0.0 {
                return qa <= tol;
            }
            // Height of the triangle (q, a, b) over the base ab (Heron), or the nearer end.
            let s = 0.5 * (ab + qa + qb);
            let area2 = (s * (s - ab) * (s - qa) * (s - qb)).max(0.0);
            let h = 2.0 * area2.sqrt() / ab;
            let d = if qa * qa > qb * qb + ab * ab || qb * qb > qa * qa + ab * ab {
                qa.min(qb)
            } else {
                h
            };
            d <= tol
        }) || outer.points.len() == 1 && {
            let a = &outer.points[0];
            tr.distance(&q.state, q.control, &a.state, a.control) <= tol
        }
    })
}

/// The traced branches, with the work done.
#[derive(Debug, Clone, PartialEq)]
pub struct BranchSet {
    /// Distinct branches.
    pub branches: Vec<Branch>,
    /// Linearisations used (each one evaluation of G, G_T, G_p and a factorisation).
    pub linearisations: u64,
    /// Branches from this index on are asymmetric (globe only: they leave the symmetric
    /// branches at `breaks`); the ones before are the traced branches.
    pub asymmetric_from: usize,
    /// Branch points (pitchforks) on the symmetric branches of a mirror-symmetric globe.
    pub breaks: Vec<BranchBreak>,
}

/// Trace every branch met by the seeds at both ends and the middle of the range.
pub fn all_branches(fam: &Controlled, opts: ContinuationOptions) -> Result<BranchSet, ContinuationError> {
    let run = all_branches_from(fam, opts, BranchesProgress::default(), &mut |_| false);
    match run.error {
        Some(e) => Err(e),
        None => Ok(run.set),
    }
}

/// Where a branch search stands after a finished seed (traced, or found on a known branch).
#[derive(Debug, Clone, PartialEq)]
pub struct BranchesProgress {
    /// Branches traced so far (before dropping duplicates).
    pub branches: Vec<Branch>,
    /// Seeds finished.
    pub seeds_done: usize,
    /// Linearisations so far.
    pub linearisations: u64,
    /// Warm start of the tracer's leading-eigenvalue iteration (NaN: none yet).
    pub eigen_guess: f64,
}

impl Default for BranchesProgress {
    fn default() -> BranchesProgress {
        BranchesProgress {
            branches: Vec::new(),
            seeds_done: 0,
            linearisations: 0,
            eigen_guess: f64::NAN,
        }
    }
}

/// A branch search that finished, stopped after a seed, or failed (with the branches before).
#[derive(Debug)]
pub struct BranchesRun {
    /// The distinct branches traced (all of them unless stopped or failed).
    pub set: BranchSet,
    /// Seeds in all.
    pub seeds_total: usize,
    /// The state to continue from.
    pub progress: BranchesProgress,
    /// Whether `on_seed` asked to stop.
    pub stopped: bool,
    /// The failure that ended it.
    pub error: Option<ContinuationError>,
}

/// [`all_branches`] continued from `progress`; after every finished seed `on_seed` gets the
/// progress and returns `true` to stop there. The seeds are found again on resume (they are
/// deterministic), then the tracer's counters and warm start are restored.
pub fn all_branches_from(
    fam: &Controlled,
    opts: ContinuationOptions,
    mut progress: BranchesProgress,
    on_seed: &mut dyn FnMut(&BranchesProgress) -> bool,
) -> BranchesRun {
    let mut tr = Tracer::new(fam, opts);
    let mut seeds_total = 0;
    let r = (|| -> Result<bool, ContinuationError> {
        let mut all: Vec<(Vec<f64>, f64)> = Vec::new();
        for p in [opts.from, opts.to, 0.5 * (opts.from + opts.to)] {
            let model = fam.model_at(p)?;
            all.extend(seeds(&model, opts.tolerance_wm2).into_iter().map(|s| (s, p)));
        }
        all.extend(pinned_seeds(&mut tr, fam, &opts)?);
        seeds_total = all.len();
        if progress.seeds_done > 0 {
            tr.linearisations = progress.linearisations;
            tr.set_eigen_guess(progress.eigen_guess);
        }
        for (s, p) in all.into_iter().skip(progress.seeds_done) {
            let mut known = false;
            for b in &progress.branches {
                if on_branch(&mut tr, b, &s, p)? {
                    known = true;
                    break;
                }
            }
            if !known {
                progress.branches.push(tr.trace(&s, p)?);
            }
            progress.seeds_done += 1;
            progress.linearisations = tr.linearisations;
            progress.eigen_guess = tr.eigen_guess();
            if on_seed(&progress) {
                return Ok(true);
            }
        }
        Ok(false)
    })();
    let (stopped, error) = match r {
        Ok(s) => (s, None),
        Err(e) => (false, Some(e)),
    };
    let mut branches = distinct(&tr, progress.branches.clone());
    let asymmetric_from = branches.len();
    let mut breaks = Vec::new();
    let mut error = error;
    // Symmetry breaking once every seed is traced (a resumed search repeats it).
    if !stopped && error.is_none() {
        match break_symmetry(fam, &mut tr, &branches, &opts) {
            Ok(sb) => {
                branches.extend(sb.branches);
                breaks = sb.breaks;
            }
            Err(e) => error = Some(e),
        }
    }
    BranchesRun {
        set: BranchSet {
            branches,
            linearisations: tr.linearisations,
            asymmetric_from,
            breaks,
        },
        seeds_total,
        progress,
        stopped,
        error,
    }
}

/// Drop branches lying wholly on a longer one (tolerance: far below the distance between
/// distinct equilibria, above the chord error of the polylines).
fn distinct(tr: &Tracer<'_>, branches: Vec<Branch>) -> Vec<Branch> {
    let mut keep = vec![true; branches.len()];
    for i in 0..branches.len() {
        for j in 0..branches.len() {
            if i != j && keep[j] {
                let (li, lj) = (length(&branches[i]), length(&branches[j]));
                if li <= lj && contained(tr, &branches[i], &branches[j], 2e-3) {
                    keep[i] = false;
                    break;
                }
            }
        }
    }
    let mut out: Vec<Branch> = branches
        .into_iter()
        .zip(keep)
        .filter_map(|(b, k)| k.then_some(b))
        .collect();
    drop_repeated_folds(tr, &mut out);
    out
}

/// Remove from each branch the folds already listed on an earlier branch (same kind, within
/// the `distinct` tolerance in the scaled metric). Two kept branches can still overlap in part:
/// a trace that stopped at the point limit is traced again from a seed beyond its end, and the
/// new trace runs back over the old one's folds. A fold is the discrete curve's extremum,
/// found to round-off from either trace, so the tolerance only has to exceed round-off.
fn drop_repeated_folds(tr: &Tracer<'_>, branches: &mut [Branch]) {
    for j in 1..branches.len() {
        let (before, rest) = branches.split_at_mut(j);
        rest[0].folds.retain(|f| {
            !before.iter().flat_map(|b| &b.folds).any(|g| {
                g.minimum == f.minimum && tr.distance(&g.state, g.control, &f.state, f.control) <= 2e-3
            })
        });
    }
}

fn length(b: &Branch) -> f64 {
    b.points.last().map(|p| p.arclength).unwrap_or(0.0)
}
