//! Symmetry breaking on a globe: branch points (pitchforks) on the hemispherically symmetric
//! branches and the asymmetric branches that leave them.
//!
//! On a globe whose forcing is mirror-symmetric about the equator (`G(R T) = R G(T)` with
//! `(R T)_i = T_{n-1-i}`), the Jacobian at a symmetric state `T = R T` commutes with `R`, so it
//! splits exactly into a block acting on symmetric perturbations and one acting on
//! antisymmetric perturbations. Both are tridiagonal of half size: for a northern band `k` next
//! to the equator, the southern neighbour of an antisymmetric vector is `-v_k` (`+v_k` for a
//! symmetric one); with an odd band count the middle band is zero in every antisymmetric vector.
//! The rank-one part of relaxation transport acts on the symmetric block only (an antisymmetric
//! vector has zero global mean).
//!
//! A symmetric branch has a branch point where the leading eigenvalue of the antisymmetric block
//! crosses zero: the full Jacobian is singular there while the symmetric block is regular. It is
//! located by regula falsi (Illinois) on that eigenvalue along the branch, each trial point
//! solved by Newton restricted to symmetric states (with the regular symmetric block). The `step`
//! albedo makes the Jacobian jump where the interpolated edge crosses a band centre, so the
//! eigenvalue can also jump across zero: such a branch point is reported as a corner.
//!
//! Branch switching: from the branch point `(T*, p*)` an equilibrium with one band pinned at
//! `T*_k + eps phi_k` (control free), `phi` the antisymmetric null vector and `k` its largest
//! northern entry, started from `T* + eps phi`; it lies on the asymmetric branch (on which
//! `p - p* = O(eps^2)` at a pitchfork), not on the symmetric one (`O(eps)` away in the control).
//! The asymmetric branch is then traced as any branch (full Jacobian, stability from it); it
//! passes through the branch point onto its mirror image.
//!
//! Reference: Golubitsky and Schaeffer, Singularities and Groups in Bifurcation Theory I
//! (1985), chapter VII (Z2 symmetry, pitchforks); Allgower and Georg, Introduction to Numerical
//! Continuation Methods (1990), chapter 8 (detecting and switching at branch points); Seydel,
//! Practical Bifurcation and Stability Analysis (3rd ed., 2010), section 5.6 (symmetry breaking).

use super::branches::{max_diff, on_branch};
use super::continuation::{Branch, ContinuationError, ContinuationOptions, LegEnd, Tracer};
use super::control::Controlled;
use crate::grid::Domain;
use crate::linalg::{Tridiag, TridiagLu};
use crate::model::{Model, Workspace, YEAR_SECONDS};
use nalgebra::DMatrix;

/// A state is symmetric when no band differs from its mirror band by more than this, K (far
/// above the round-off of a continuation, far below any asymmetric equilibrium's difference).
pub const SYMMETRIC_K: f64 = 1e-6;

/// Amplitudes (K, largest band of the null vector) tried for the switch onto the asymmetric
/// branch, smallest first.
const SWITCH_AMPLITUDES: [f64; 4] = [0.05, 0.2, 1.0, 4.0];

/// A branch point on a symmetric branch.
#[derive(Debug, Clone, PartialEq)]
pub struct BranchBreak {
    /// Control value.
    pub control: f64,
    /// The symmetric state there, K.
    pub state: Vec<f64>,
    /// Index of the symmetric branch holding it.
    pub branch: usize,
    /// Index (into that branch's points) of the point before it.
    pub after_point: usize,
    /// Whether the antisymmetric eigenvalue jumps across zero there (a corner of the
    /// piecewise-smooth step-albedo curve) rather than crossing smoothly.
    pub corner: bool,
    /// Whether it was located to the requested precision (otherwise the nearer traced point).
    pub converged: bool,
    /// Index (into the asymmetric branches) of the branch switched onto, if any.
    pub asymmetric_branch: Option<usize>,
}

/// The branch points of the symmetric branches and the asymmetric branches leaving them.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct SymmetryBreaking {
    /// Branch points, by symmetric branch and arclength.
    pub breaks: Vec<BranchBreak>,
    /// Asymmetric branches, traced with stability.
    pub branches: Vec<Branch>,
}

/// `(R T)_i = T_{n-1-i}`.
pub fn mirror(t: &[f64]) -> Vec<f64> {
    t.iter().rev().copied().collect()
}

/// Largest difference between a state and its mirror image, K.
pub fn asymmetry(t: &[f64]) -> f64 {
    let n = t.len();
    (0..n / 2)
        .map(|i| (t[i] - t[n - 1 - i]).abs())
        .fold(0.0, f64::max)
}

/// Whether `model` is a globe whose steady heating commutes with the mirror: `G(R T) = R G(T)`
/// and `C` symmetric, checked on an asymmetric test state.
pub fn mirror_symmetric(model: &Model) -> bool {
    let g = &model.grid;
    if g.domain != Domain::Globe || g.len() < 2 {
        return false;
    }
    let n = g.len();
    if max_diff(&model.heat_capacity, &mirror(&model.heat_capacity)) > 1e-12 * model.heat_capacity[0].abs() {
        return false;
    }
    let t: Vec<f64> = g
        .x_centres
        .iter()
        .map(|x| model.albedo.freeze + 25.0 - 40.0 * x * x + 7.0 * x)
        .collect();
    let mut ws = Workspace::new(n);
    let (mut a, mut b) = (vec![0.0; n], vec![0.0; n]);
    model.heating(0.0, &t, &mut ws, &mut a);
    model.heating(0.0, &mirror(&t), &mut ws, &mut b);
    let scale = a.iter().fold(1.0_f64, |m, v| m.max(v.abs()));
    // The transport terms cancel to about eps n^2 of the state's size: 1e-9 of the scale is
    // far above that and far below any real asymmetry of the forcing.
    (0..n).all(|i| (a[i] - b[n - 1 - i]).abs() <= 1e-9 * scale)
}

/// The antisymmetric block of a mirror-commuting tridiagonal `jac` (n bands), scaled by
/// `scale` (per band, e.g. `yr / C`): diagonal, lower and upper, over the northern bands
/// `n - n/2 .. n`.
pub fn antisymmetric_block(jac: &Tridiag, scale: &[f64]) -> (Vec<f64>, Vec<f64>, Vec<f64>) {
    let n = jac.len();
    let m = n / 2;
    let first = n - m;
    let mut d = vec![0.0; m];
    let mut lo = vec![0.0; m];
    let mut up = vec![0.0; m];
    for k in 0..m {
        let i = first + k;
        d[k] = jac.diag[i] * scale[i];
        if k > 0 {
            lo[k] = jac.lower[i] * scale[i];
        }
        if k + 1 < m {
            up[k] = jac.upper[i] * scale[i];
        }
    }
    // Even n: the southern neighbour of the first northern band is its mirror, -v_0. Odd n:
    // it is the middle band, zero in an antisymmetric vector.
    if n % 2 == 0 && m > 0 {
        d[0] -= jac.lower[first] * scale[first];
    }
    (d, lo, up)
}

/// The symmetric block (unscaled) over the bands `n/2 .. n` (with the middle band for odd
/// `n`), and the weights of its rank-one part (the global mean of a symmetric vector).
fn symmetric_block(jac: &Tridiag, weights: &[f64]) -> (Tridiag, Vec<f64>) {
    let n = jac.len();
    let first = n / 2;
    let m = n - first;
    let mut b = Tridiag::zeros(m);
    let mut w = vec![0.0; m];
    for k in 0..m {
        let i = first + k;
        b.diag[k] = jac.diag[i];
        b.lower[k] = if k > 0 { jac.lower[i] } else { 0.0 };
        b.upper[k] = if k + 1 < m { jac.upper[i] } else { 0.0 };
        w[k] = 2.0 * weights[i];
    }
    if n % 2 == 0 {
        b.diag[0] += jac.lower[first];
    } else {
        // The middle band couples to both neighbours, equal in a symmetric vector.
        w[0] = weights[first];
        if m > 1 {
            b.upper[0] += jac.lower[first];
        }
    }
    b.rank_one = jac.rank_one;
    (b, w)
}

/// Leading (largest real part) eigenvalue of a tridiagonal `(d, lo, up)`: Sturm bisection of
/// the symmetrised matrix when every off-diagonal product is non-negative (Wilkinson 1965,
/// section 5.11; Golub and Van Loan, section 8.4.1), else nalgebra's real Schur form.
pub fn leading_tridiagonal(d: &[f64], lo: &[f64], up: &[f64]) -> f64 {
    let m = d.len();
    if m == 0 {
        return f64::NEG_INFINITY;
    }
    let e2: Vec<f64> = (0..m - 1).map(|k| up[k] * lo[k + 1]).collect();
    if e2.iter().all(|&p| p >= 0.0) {
        let count = |x: f64| -> usize {
            let (mut q, mut c) = (1.0_f64, 0);
            for k in 0..m {
                q = d[k] - x - if k > 0 { e2[k - 1] / q } else { 0.0 };
                if q == 0.0 {
                    q = -f64::MIN_POSITIVE;
                }
                if q < 0.0 {
                    c += 1;
                }
            }
            c
        };
        let (mut a, mut b) = (f64::INFINITY, f64::NEG_INFINITY);
        for k in 0..m {
            let r = if k > 0 { e2[k - 1].sqrt() } else { 0.0 } + if k + 1 < m { e2[k].sqrt() } else { 0.0 };
            a = a.min(d[k] - r);
            b = b.max(d[k] + r);
        }
        let pad = 1e-12 * (b - a).abs().max(1.0);
        let (mut a, mut b) = (a - pad, b + pad);
        // Largest eigenvalue in (a, b]: count(b) = m, count(a) < m.
        for _ in 0..200 {
            let mid = 0.5 * (a + b);
            if mid <= a || mid >= b {
                break;
            }
            if count(mid) == m {
                b = mid;
            } else {
                a = mid;
            }
        }
        return 0.5 * (a + b);
    }
    let mat = dense(d, lo, up);
    nalgebra::linalg::Schur::try_new(mat, f64::EPSILON, 100 * m.max(10))
        .map(|s| {
            s.complex_eigenvalues()
                .iter()
                .map(|c| c.re)
                .fold(f64::NEG_INFINITY, f64::max)
        })
        .unwrap_or(f64::NAN)
}

fn dense(d: &[f64], lo: &[f64], up: &[f64]) -> DMatrix<f64> {
    let m = d.len();
    DMatrix::from_fn(m, m, |r, c| {
        if r == c {
            d[r]
        } else if c + 1 == r {
            lo[r]
        } else if r + 1 == c {
            up[r]
        } else {
            0.0
        }
    })
}

/// Leading eigenvalue (1/year) of the antisymmetric part of the linearisation of `model` at a
/// symmetric state `t`.
pub fn antisymmetric_leading(model: &Model, t: &[f64]) -> f64 {
    let n = model.len();
    let mut ws = Workspace::new(n);
    let mut jac = Tridiag::zeros(n);
    model.heating_jacobian(0.0, t, &mut ws, &mut jac);
    let scale: Vec<f64> = model.heat_capacity.iter().map(|c| YEAR_SECONDS / c).collect();
    let (d, lo, up) = antisymmetric_block(&jac, &scale);
    leading_tridiagonal(&d, &lo, &up)
}

/// The eigenvector (full grid, antisymmetric, largest entry 1 in the north) of the leading
/// antisymmetric eigenvalue at the symmetric state `t`: the smallest right singular vector of
/// `A - mu I` (nalgebra's SVD).
fn antisymmetric_mode(model: &Model, t: &[f64]) -> Option<Vec<f64>> {
    let n = model.len();
    let mut ws = Workspace::new(n);
    let mut jac = Tridiag::zeros(n);
    model.heating_jacobian(0.0, t, &mut ws, &mut jac);
    let scale: Vec<f64> = model.heat_capacity.iter().map(|c| YEAR_SECONDS / c).collect();
    let (mut d, lo, up) = antisymmetric_block(&jac, &scale);
    let mu = leading_tridiagonal(&d, &lo, &up);
    if !mu.is_finite() || d.is_empty() {
        return None;
    }
    d.iter_mut().for_each(|v| *v -= mu);
    let svd = dense(&d, &lo, &up).svd(false, true);
    let vt = svd.v_t?;
    let (k, _) = svd
        .singular_values
        .iter()
        .enumerate()
        .min_by(|a, b| a.1.total_cmp(b.1))?;
    let half: Vec<f64> = vt.row(k).iter().copied().collect();
    let big = half
        .iter()
        .fold(0.0_f64, |a, v| if v.abs() > a.abs() { *v } else { a });
    if big == 0.0 || !big.is_finite() {
        return None;
    }
    let m = half.len();
    let mut phi = vec![0.0; n];
    for (k, v) in half.iter().enumerate() {
        phi[n - m + k] = v / big;
        phi[m - 1 - k] = -v / big;
    }
    Some(phi)
}

/// Newton at fixed control restricted to symmetric states, with the symmetric block of the
/// Jacobian (regular at a branch point, where the full Jacobian is singular). `None` when it
/// does not converge within 30 iterations or a step exceeds 20 K.
pub fn symmetric_equilibrium(model: &Model, guess: &[f64], tolerance_wm2: f64) -> Option<Vec<f64>> {
    let n = model.len();
    let first = n / 2;
    let m = n - first;
    let mut t: Vec<f64> = (0..n).map(|i| 0.5 * (guess[i] + guess[n - 1 - i])).collect();
    let mut ws = Workspace::new(n);
    let mut g = vec![0.0; n];
    let mut jac = Tridiag::zeros(n);
    let mut rhs = vec![0.0; m];
    let mut lu: Option<TridiagLu> = None;
    for _ in 0..30 {
        model.heating(0.0, &t, &mut ws, &mut g);
        let res = g[first..].iter().fold(0.0_f64, |a, v| a.max(v.abs()));
        model.heating_jacobian(0.0, &t, &mut ws, &mut jac);
        // Round-off floor of G (as in the continuation's corrector).
        let jmax = jac.diag.iter().fold(0.0_f64, |a, v| a.max(v.abs()));
        let tmax = t.iter().fold(0.0_f64, |a, v| a.max(v.abs()));
        if !res.is_finite() {
            return None;
        }
        if res <= tolerance_wm2.max(4.0 * f64::EPSILON * jmax * tmax) {
            return Some(t);
        }
        let (block, w) = symmetric_block(&jac, &model.grid.weights);
        let lu = lu.get_or_insert_with(|| TridiagLu::new(m, &w));
        lu.factor(&block).ok()?;
        for k in 0..m {
            rhs[k] = -g[first + k];
        }
        lu.solve(&mut rhs);
        let big = rhs.iter().fold(0.0_f64, |a, v| a.max(v.abs()));
        if !big.is_finite() || big > 20.0 {
            return None;
        }
        for k in 0..m {
            t[first + k] += rhs[k];
            t[n - 1 - first - k] = t[first + k];
        }
    }
    None
}

/// One symmetric point: the antisymmetric eigenvalue at control `p` on the symmetric curve
/// near `guess`.
fn probe(
    fam: &Controlled,
    scratch: &mut Model,
    guess: &[f64],
    p: f64,
    tol: f64,
) -> Result<Option<(Vec<f64>, f64)>, ContinuationError> {
    fam.apply(scratch, p)?;
    let Some(t) = symmetric_equilibrium(scratch, guess, tol) else {
        return Ok(None);
    };
    let mu = antisymmetric_leading(scratch, &t);
    Ok(Some((t, mu)))
}

/// Locate the branch point between points `a` and `a + 1` of `branch` (the antisymmetric
/// eigenvalue `mu` changes sign between them).
fn locate(
    fam: &Controlled,
    scratch: &mut Model,
    branch: &Branch,
    a: usize,
    mu: (f64, f64),
    opts: &ContinuationOptions,
) -> Result<(f64, Vec<f64>, bool, bool), ContinuationError> {
    let (pa, pb) = (&branch.points[a], &branch.points[a + 1]);
    let nearer = if mu.0.abs() <= mu.1.abs() { pa } else { pb };
    let fallback = (nearer.control, nearer.state.clone(), false, false);
    let fold_between = branch.folds.iter().any(|f| f.after_point == a);
    if fold_between || pa.control == pb.control {
        return Ok(fallback);
    }
    let interp = |p: f64| -> Vec<f64> {
        let f = (p - pa.control) / (pb.control - pa.control);
        pa.state
            .iter()
            .zip(&pb.state)
            .map(|(x, y)| x + f * (y - x))
            .collect()
    };
    let (mut lo, mut hi) = (pa.control, pb.control);
    let (mut mlo, mut mhi) = mu;
    let (mut best, mut best_mu) = (fallback.1.clone(), f64::INFINITY);
    let mut best_p = fallback.0;
    let mu_scale = mu.0.abs().max(mu.1.abs());
    let mut side = 0i32;
    let mut converged = false;
    for it in 0..200 {
        let falsi = lo - mlo * (hi - lo) / (mhi - mlo);
        let inside = falsi > lo.min(hi) && falsi < lo.max(hi);
        let p = if it % 4 == 3 || !inside {
            0.5 * (lo + hi)
        } else {
            falsi
        };
        let Some((t, m)) = probe(fam, scratch, &interp(p), p, opts.tolerance_wm2)? else {
            break;
        };
        if m.abs() < best_mu {
            best_mu = m.abs();
            best = t;
            best_p = p;
        }
        let width = (hi - lo).abs();
        if m == 0.0 || width <= 1e-12 * p.abs().max(1e-300) || m.abs() <= 1e-12 * mu_scale {
            converged = true;
            break;
        }
        if (m < 0.0) == (mlo < 0.0) {
            lo = p;
            mlo = m;
            if side == -1 {
                mhi *= 0.5;
            }
            side = -1;
        } else {
            hi = p;
            mhi = m;
            if side == 1 {
                mlo *= 0.5;
            }
            side = 1;
        }
    }
    // A smooth crossing ends with |mu| near zero; a jump across zero keeps |mu| large on both
    // sides of a bracket shrunk to round-off.
    let corner = converged && best_mu > 1e-6 * mu_scale;
    Ok((best_p, best, corner, converged))
}

/// Branch points of every symmetric branch of `branches` and the asymmetric branches leaving
/// them, for a mirror-symmetric globe (nothing otherwise).
pub fn break_symmetry(
    fam: &Controlled,
    tr: &mut Tracer<'_>,
    branches: &[Branch],
    opts: &ContinuationOptions,
) -> Result<SymmetryBreaking, ContinuationError> {
    let mut out = SymmetryBreaking::default();
    if !mirror_symmetric(fam.base_model()) {
        return Ok(out);
    }
    let mut scratch = fam.base_model().clone();
    let (lo, hi) = (opts.from.min(opts.to), opts.from.max(opts.to));
    for (bi, b) in branches.iter().enumerate() {
        // A traced branch can drift off the symmetric states where the antisymmetric part is
        // strongly unstable (round-off grows there): only its symmetric points are used.
        let mut mus = Vec::with_capacity(b.points.len());
        for q in &b.points {
            if asymmetry(&q.state) > SYMMETRIC_K {
                mus.push(f64::NAN);
                continue;
            }
            fam.apply(&mut scratch, q.control)?;
            mus.push(antisymmetric_leading(&scratch, &q.state));
        }
        for a in 0..b.points.len().saturating_sub(1) {
            let (m0, m1) = (mus[a], mus[a + 1]);
            if !(m0.is_finite() && m1.is_finite()) || (m0 < 0.0) == (m1 < 0.0) {
                continue;
            }
            let (p, state, corner, converged) = locate(fam, &mut scratch, b, a, (m0, m1), opts)?;
            // The same branch point on a branch traced twice.
            let seen = out.breaks.iter().any(|k| {
                (k.control - p).abs() <= 1e-7 * p.abs().max(1e-300) && max_diff(&k.state, &state) < 1e-4
            });
            if seen {
                continue;
            }
            let mut brk = BranchBreak {
                control: p,
                state,
                branch: bi,
                after_point: a,
                corner,
                converged,
                asymmetric_branch: None,
            };
            brk.asymmetric_branch = switch(fam, tr, &mut scratch, &brk, &mut out.branches, (lo, hi))?;
            out.breaks.push(brk);
        }
    }
    Ok(out)
}

/// Switch onto the asymmetric branch at `brk` and trace it (unless it is already traced):
/// the index of the asymmetric branch.
fn switch(
    fam: &Controlled,
    tr: &mut Tracer<'_>,
    scratch: &mut Model,
    brk: &BranchBreak,
    traced: &mut Vec<Branch>,
    (lo, hi): (f64, f64),
) -> Result<Option<usize>, ContinuationError> {
    fam.apply(scratch, brk.control)?;
    let Some(phi) = antisymmetric_mode(scratch, &brk.state) else {
        return Ok(None);
    };
    let n = phi.len();
    let k = (n / 2..n)
        .max_by(|&i, &j| phi[i].abs().total_cmp(&phi[j].abs()))
        .unwrap_or(n - 1);
    for eps in SWITCH_AMPLITUDES {
        let guess: Vec<f64> = brk.state.iter().zip(&phi).map(|(t, f)| t + eps * f).collect();
        let Some((s, p)) = tr.pinned(k, guess[k], &guess, brk.control)? else {
            continue;
        };
        // On the asymmetric branch: asymmetric by about eps (not the symmetric branch).
        if asymmetry(&s) < 0.1 * eps || !(lo..=hi).contains(&p) {
            continue;
        }
        for (j, b) in traced.iter().enumerate() {
            if on_branch(tr, b, &s, p)? || on_branch(tr, b, &mirror(&s), p)? {
                return Ok(Some(j));
            }
        }
        let b = asymmetric_piece(tr.trace(&s, p)?, &s);
        // Its mirror image is a branch too (the piece stops at the symmetric states).
        let mirrored = mirror_branch(&b);
        traced.push(b);
        let at = traced.len() - 1;
        traced.push(mirrored);
        return Ok(Some(at));
    }
    Ok(None)
}

/// The part of a traced branch around the point nearest `start` on which the antisymmetric
/// part keeps the sign it has at `start`: a trace that passes through a branch point continues
/// onto the mirror image or onto a symmetric branch, both held elsewhere. A cut end is a
/// [`LegEnd::BranchPoint`].
fn asymmetric_piece(b: Branch, start: &[f64]) -> Branch {
    let n = start.len();
    let dir: Vec<f64> = (0..n).map(|i| start[i] - start[n - 1 - i]).collect();
    let amp = |t: &[f64]| -> f64 { (0..n).map(|i| (t[i] - t[n - 1 - i]) * dir[i]).sum() };
    let keep = |t: &[f64]| amp(t) > 0.0 && asymmetry(t) > SYMMETRIC_K;
    let pts = &b.points;
    let Some(i0) = (0..pts.len())
        .min_by(|&i, &j| max_diff(&pts[i].state, start).total_cmp(&max_diff(&pts[j].state, start)))
    else {
        return b;
    };
    let (mut first, mut last) = (i0, i0);
    while first > 0 && keep(&pts[first - 1].state) {
        first -= 1;
    }
    while last + 1 < pts.len() && keep(&pts[last + 1].state) {
        last += 1;
    }
    let ends = [
        if first > 0 {
            LegEnd::BranchPoint {
                control: pts[first - 1].control,
            }
        } else {
            b.ends[0]
        },
        if last + 1 < pts.len() {
            LegEnd::BranchPoint {
                control: pts[last + 1].control,
            }
        } else {
            b.ends[1]
        },
    ];
    let base = pts[first].arclength;
    let points: Vec<_> = pts[first..=last]
        .iter()
        .cloned()
        .map(|mut q| {
            q.arclength -= base;
            q
        })
        .collect();
    let folds = b
        .folds
        .iter()
        .filter(|f| f.after_point >= first && f.after_point < last)
        .cloned()
        .map(|mut f| {
            f.after_point -= first;
            f
        })
        .collect();
    Branch { points, folds, ends }
}

/// The mirror image of a branch (every state and fold state mirrored).
pub fn mirror_branch(b: &Branch) -> Branch {
    let mut m = b.clone();
    for q in &mut m.points {
        q.state = mirror(&q.state);
    }
    for f in &mut m.folds {
        f.state = mirror(&f.state);
    }
    m
}

#[cfg(test)]
mod tests {
    use super::*;

    fn globe(bands: usize) -> Model {
        let text = format!(
            "[grid]\ndomain = \"globe\"\nbands = {bands}\n[insolation]\nsolar_constant = 1340.0\ns2 = -0.482\n\
             [albedo]\nice_free = 0.303\nice_free_p2 = 0.0779\nice = 0.62\nfreeze_temperature_c = -10.0\n\
             [longwave]\na = 203.3\nb = 2.09\n[transport]\ndiffusivity = 0.52\n[heat_capacity]\nvalue = 4.0e8\n"
        );
        let cfg = crate::config::load_str(&text, "t", std::path::Path::new("."), &[]).unwrap();
        Model::from_spec(&cfg.spec.model)
    }

    #[test]
    fn half_blocks_hold_the_whole_spectrum() {
        // Reference: nalgebra's general eigen-solver on the full Jacobian (general-purpose
        // library). At a symmetric state with an ice edge in each hemisphere, the union of the
        // spectra of the symmetric and antisymmetric blocks is the full spectrum.
        for bands in [20, 21] {
            let model = globe(bands);
            let t: Vec<f64> = model
                .grid
                .x_centres
                .iter()
                .map(|x| 300.0 - 50.0 * x * x)
                .collect();
            let n = model.len();
            let mut ws = Workspace::new(n);
            let mut jac = Tridiag::zeros(n);
            model.heating_jacobian(0.0, &t, &mut ws, &mut jac);
            let scale: Vec<f64> = model.heat_capacity.iter().map(|c| YEAR_SECONDS / c).collect();
            let full = jac.to_dense(&model.grid.weights);
            let fm = DMatrix::from_fn(n, n, |r, c| full[r * n + c] * scale[r]);
            let mut all: Vec<f64> = fm.complex_eigenvalues().iter().map(|c| c.re).collect();
            let (d, lo, up) = antisymmetric_block(&jac, &scale);
            let mut anti: Vec<f64> = dense(&d, &lo, &up)
                .complex_eigenvalues()
                .iter()
                .map(|c| c.re)
                .collect();
            let (sb, _) = symmetric_block(&jac, &model.grid.weights);
            let sd: Vec<f64> = (0..sb.len()).map(|k| sb.diag[k] * scale[n / 2 + k]).collect();
            let sl: Vec<f64> = (0..sb.len()).map(|k| sb.lower[k] * scale[n / 2 + k]).collect();
            let su: Vec<f64> = (0..sb.len()).map(|k| sb.upper[k] * scale[n / 2 + k]).collect();
            let sym: Vec<f64> = dense(&sd, &sl, &su)
                .complex_eigenvalues()
                .iter()
                .map(|c| c.re)
                .collect();
            let lead_anti = leading_tridiagonal(&d, &lo, &up);
            anti.extend(sym);
            all.sort_by(f64::total_cmp);
            anti.sort_by(f64::total_cmp);
            let big = all.iter().fold(0.0_f64, |a, v| a.max(v.abs()));
            assert_eq!(all.len(), anti.len());
            for (a, b) in all.iter().zip(&anti) {
                // Backward-stable solvers: agreement to a few hundred ulps of the norm.
                assert!((a - b).abs() < 1e-11 * big, "{a} vs {b}");
            }
            let want = dense(&d, &lo, &up)
                .complex_eigenvalues()
                .iter()
                .map(|c| c.re)
                .fold(f64::NEG_INFINITY, f64::max);
            assert!((lead_anti - want).abs() < 1e-11 * big, "{lead_anti} vs {want}");
        }
    }

    #[test]
    fn mirror_symmetry_is_recognised() {
        assert!(mirror_symmetric(&globe(12)));
        assert!(mirror_symmetric(&globe(13)));
    }
}
