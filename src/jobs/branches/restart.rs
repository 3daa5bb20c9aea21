//! What a branches checkpoint holds: the branches traced so far (points, folds, leg ends with
//! their states), the seeds done, the linearisation count and the eigenvalue warm start.

use crate::checkpoint::{Restart, RestartError};
use crate::equilibrium::branches::BranchesProgress;
use crate::equilibrium::continuation::{Branch, BranchPoint, FoldPoint, LegEnd};
use crate::equilibrium::stability::SpectrumMethod;

fn method_code(m: SpectrumMethod) -> u64 {
    match m {
        SpectrumMethod::SymmetricTridiagonal => 0,
        SpectrumMethod::SymmetricWithEdge => 1,
        SpectrumMethod::SecularRankOne => 2,
        SpectrumMethod::GeneralDense => 3,
    }
}

fn method_of(c: u64) -> Option<SpectrumMethod> {
    Some(match c {
        0 => SpectrumMethod::SymmetricTridiagonal,
        1 => SpectrumMethod::SymmetricWithEdge,
        2 => SpectrumMethod::SecularRankOne,
        3 => SpectrumMethod::GeneralDense,
        _ => return None,
    })
}

/// `(code, control)` of a leg end: 0 left range, 1 point limit, 2 closed, 3 stuck, 4
/// branch point.
fn end_code(e: LegEnd) -> (u64, f64) {
    match e {
        LegEnd::LeftRange => (0, f64::NAN),
        LegEnd::PointLimit => (1, f64::NAN),
        LegEnd::Closed => (2, f64::NAN),
        LegEnd::Stuck { control } => (3, control),
        LegEnd::BranchPoint { control } => (4, control),
    }
}

fn end_of(c: u64, control: f64) -> Option<LegEnd> {
    Some(match c {
        0 => LegEnd::LeftRange,
        1 => LegEnd::PointLimit,
        2 => LegEnd::Closed,
        3 => LegEnd::Stuck { control },
        4 => LegEnd::BranchPoint { control },
        _ => return None,
    })
}

/// The restart content of a branch search: per branch its point and fold counts, then the
/// points `[control, dpds, leading, arclength]` + method + state, folds `[control]` +
/// `[after_point, corner, converged, minimum, turns]` + state, and the two leg ends.
pub(super) fn save(p: &BranchesProgress, r: &mut Restart) {
    let (mut counts, mut pf, mut pi, mut ps, mut ff, mut fi, mut fs, mut ei, mut ef) = (
        vec![],
        vec![],
        vec![],
        vec![],
        vec![],
        vec![],
        vec![],
        vec![],
        vec![],
    );
    for b in &p.branches {
        counts.extend([b.points.len() as u64, b.folds.len() as u64]);
        for q in &b.points {
            pf.extend([q.control, q.dpds, q.leading, q.arclength]);
            pi.push(method_code(q.method));
            ps.extend_from_slice(&q.state);
        }
        for f in &b.folds {
            ff.push(f.control);
            fi.extend([
                f.after_point as u64,
                u64::from(f.corner),
                u64::from(f.converged),
                u64::from(f.minimum),
                f.turns as u64,
            ]);
            fs.extend_from_slice(&f.state);
        }
        for e in b.ends {
            let (c, v) = end_code(e);
            ei.push(c);
            ef.push(v);
        }
    }
    r.put_u64("branches.counts", &counts);
    r.put_f64("branches.points.f", &pf);
    r.put_u64("branches.points.method", &pi);
    r.put_f64("branches.points.state", &ps);
    r.put_f64("branches.folds.f", &ff);
    r.put_u64("branches.folds.i", &fi);
    r.put_f64("branches.folds.state", &fs);
    r.put_u64("branches.ends.i", &ei);
    r.put_f64("branches.ends.f", &ef);
    r.put_u64("branches.seeds_done", &[p.seeds_done as u64]);
    r.put_u64("branches.linearisations", &[p.linearisations]);
    r.put_f64("branches.eigen_guess", &[p.eigen_guess]);
}

/// The progress [`save`] stored, for a grid of `n` bands.
pub(super) fn restore(r: &Restart, n: usize) -> Result<BranchesProgress, RestartError> {
    let counts = r.u64s("branches.counts")?;
    let (pf, pi, ps) = (
        r.f64s("branches.points.f")?,
        r.u64s("branches.points.method")?,
        r.f64s("branches.points.state")?,
    );
    let (ff, fi, fs) = (
        r.f64s("branches.folds.f")?,
        r.u64s("branches.folds.i")?,
        r.f64s("branches.folds.state")?,
    );
    let (ei, ef) = (r.u64s("branches.ends.i")?, r.f64s("branches.ends.f")?);
    let bad = || r.bad("branch arrays do not match their counts and the grid");
    if counts.len() % 2 != 0 {
        return Err(bad());
    }
    let nb = counts.len() / 2;
    let np: usize = counts.iter().step_by(2).map(|&c| c as usize).sum();
    let nf: usize = counts.iter().skip(1).step_by(2).map(|&c| c as usize).sum();
    if pf.len() != 4 * np
        || pi.len() != np
        || ps.len() != n * np
        || ff.len() != nf
        || fi.len() != 5 * nf
        || fs.len() != n * nf
        || ei.len() != 2 * nb
        || ef.len() != 2 * nb
    {
        return Err(bad());
    }
    let (mut at_p, mut at_f) = (0, 0);
    let mut branches = Vec::with_capacity(nb);
    for b in 0..nb {
        let (cp, cf) = (counts[2 * b] as usize, counts[2 * b + 1] as usize);
        let mut points = Vec::with_capacity(cp);
        for k in at_p..at_p + cp {
            points.push(BranchPoint {
                control: pf[4 * k],
                state: ps[n * k..n * (k + 1)].to_vec(),
                dpds: pf[4 * k + 1],
                leading: pf[4 * k + 2],
                method: method_of(pi[k]).ok_or_else(bad)?,
                arclength: pf[4 * k + 3],
            });
        }
        let mut folds = Vec::with_capacity(cf);
        for k in at_f..at_f + cf {
            folds.push(FoldPoint {
                control: ff[k],
                state: fs[n * k..n * (k + 1)].to_vec(),
                after_point: fi[5 * k] as usize,
                corner: fi[5 * k + 1] != 0,
                converged: fi[5 * k + 2] != 0,
                minimum: fi[5 * k + 3] != 0,
                turns: fi[5 * k + 4] as usize,
            });
        }
        at_p += cp;
        at_f += cf;
        let ends = [
            end_of(ei[2 * b], ef[2 * b]).ok_or_else(bad)?,
            end_of(ei[2 * b + 1], ef[2 * b + 1]).ok_or_else(bad)?,
        ];
        branches.push(Branch { points, folds, ends });
    }
    Ok(BranchesProgress {
        branches,
        seeds_done: r.u64("branches.seeds_done")? as usize,
        linearisations: r.u64("branches.linearisations")?,
        eigen_guess: r.f64("branches.eigen_guess")?,
    })
}
