//! The `branches` job: pseudo-arclength continuation of every branch in the `[branches]`
//! range, and its file.

use super::equilibrium::{family, require_steady};
use super::run::{build_model, provenance};
use super::run::{interrupted, remove_restart, restart_error, Checkpointing};
use super::Ending;
use crate::checkpoint::{self, Restart, RestartError};
use crate::config::spec::{AxisSpacing, BranchesSpec};
use crate::config::{ConfigError, Loaded};
use crate::equilibrium::branches::{all_branches_from, BranchSet, BranchesProgress, BranchesRun};
use crate::equilibrium::continuation::{
    Branch, BranchPoint, ContinuationError, ContinuationOptions, FoldPoint, LegEnd,
};
use crate::equilibrium::control::Controlled;
use crate::equilibrium::stability::SpectrumMethod;
use crate::error::Error;
use crate::integrate::SolverError;
use crate::interrupt::StopFlag;
use crate::output::branches_file::{write_branches_with, BranchesInfo};
use crate::output::Attr;
use std::path::Path;

/// The validated `[branches]` section, or a config error naming what is missing.
pub fn branches_spec(cfg: &Loaded) -> Result<&BranchesSpec, ConfigError> {
    super::control_section(
        cfg,
        cfg.spec.branches.as_ref(),
        |s| [s.from, s.to],
        "branches",
        "control (a dotted key such as \"insolation.solar_constant\"), from and to",
    )
}

/// Trace the branches of a loaded config (no file).
pub fn run_branches(cfg: &Loaded) -> Result<BranchSet, Error> {
    let run = run_branches_from(cfg, BranchesProgress::default(), &mut |_| false)?;
    match run.error {
        Some(e) => Err(continuation_error(e)),
        None => Ok(run.set),
    }
}

fn continuation_error(e: ContinuationError) -> Error {
    match e {
        ContinuationError::Config(c) => Error::Config(c),
        ContinuationError::Start { control, reason } => Error::Solver(SolverError::NoConvergence {
            what: "continuation".into(),
            detail: format!("a branch could not start at control {control}: {reason}"),
        }),
    }
}

fn run_branches_from(
    cfg: &Loaded,
    progress: BranchesProgress,
    on_seed: &mut dyn FnMut(&BranchesProgress) -> bool,
) -> Result<BranchesRun, Error> {
    require_steady(cfg)?;
    let spec = branches_spec(cfg)?;
    let fam = family(cfg, "branches.control", &spec.control, [spec.from, spec.to])?;
    let mut opts = ContinuationOptions::from_spec(spec, cfg.spec.equilibrium.tolerance_wm2);
    if spec.spacing == AxisSpacing::Log {
        // Continue in q = ln(p); the progress (and its checkpoints) stays in q, the result is
        // mapped back to the key's values.
        let fam = fam.in_log();
        (opts.from, opts.to) = (spec.from.ln(), spec.to.ln());
        let mut run = all_branches_from(&fam, opts, progress, on_seed);
        to_key_values(&mut run.set, &fam);
        return Ok(run);
    }
    Ok(all_branches_from(&fam, opts, progress, on_seed))
}

/// Controls of branches traced in `fam`'s variable mapped to the key's values: points and
/// folds `p = exp(q)`, `dp/ds = p dq/ds` (arclength stays that of the scaled q metric).
pub fn to_key_values(set: &mut BranchSet, fam: &Controlled) {
    if !fam.is_log() {
        return;
    }
    for b in &mut set.branches {
        for pt in &mut b.points {
            pt.control = fam.key_value(pt.control);
            pt.dpds *= pt.control;
        }
        for f in &mut b.folds {
            f.control = fam.key_value(f.control);
        }
    }
}

/// Trace and write the file at `path`.
pub fn branches_to_file(cfg: &Loaded, path: &Path, command_line: &str) -> Result<BranchSet, Error> {
    branches_job(cfg, path, command_line, &Checkpointing::default())
}

/// [`branches_to_file`] with checkpoints every `ck.every` finished seeds into
/// `<path>.restart` and/or resuming from `ck.resume`. On SIGINT/SIGTERM (after the next
/// finished seed) or a failure the branches so far are written with `complete = 0` and
/// `seeds_done` (and `failure`).
pub fn branches_job(
    cfg: &Loaded,
    path: &Path,
    command_line: &str,
    ck: &Checkpointing,
) -> Result<BranchSet, Error> {
    let every = match ck.every {
        Some(e) if !(e >= 1.0) || e.fract() != 0.0 => {
            return Err(Error::Usage(format!(
                "--checkpoint-every-seeds {e}: give a whole number of seeds, at least 1"
            )))
        }
        Some(e) => Some(e as usize),
        None => None,
    };
    let model = build_model(cfg)?;
    let start = match ck.load("branches", cfg)? {
        Some(r) => restore_progress(&r, model.len()).map_err(restart_error)?,
        None => BranchesProgress::default(),
    };
    let restart = checkpoint::restart_path(path);
    let text = cfg.resolved_text();
    let (mut saved, mut save_error, mut stopped_by) = (false, None, None);
    let mut hook = |p: &BranchesProgress| {
        let sig = StopFlag.requested();
        if let Some(n) = every {
            if p.seeds_done % n == 0 || sig.is_some() {
                match save_progress(p, &text).save(&restart) {
                    Ok(()) => saved = true,
                    Err(e) => {
                        save_error = Some(e);
                        return true;
                    }
                }
            }
        }
        stopped_by = sig;
        sig.is_some()
    };
    let run = run_branches_from(cfg, start, &mut hook)?;
    if let Some(e) = save_error {
        return Err(Error::Other(e.to_string()));
    }
    let spec = branches_spec(cfg)?;
    let family = Controlled::new(cfg, &spec.control).ok();
    let info = BranchesInfo {
        control_key: &spec.control,
        from: spec.from,
        to: spec.to,
        spacing: spec.spacing.name(),
        linearisations: run.set.linearisations,
        family: family.as_ref(),
        asymmetric_from: run.set.asymmetric_from,
        breaks: &run.set.breaks,
    };
    let prov = provenance(cfg, command_line);
    let reached = vec![
        (
            "seeds_done".to_string(),
            Attr::I64(run.progress.seeds_done as i64),
        ),
        ("seeds_total".to_string(), Attr::I64(run.seeds_total as i64)),
    ];
    let ending = Ending::of(run.error.as_ref(), run.stopped, stopped_by);
    write_branches_with(
        path,
        &model,
        &prov,
        &info,
        &run.set.branches,
        &ending.completion(reached),
    )?;
    if let Some(e) = run.error {
        return Err(continuation_error(e));
    }
    if let Ending::Stopped(sig) = ending {
        return Err(interrupted(
            sig,
            format!(
                "stopped after seed {} of {}",
                run.progress.seeds_done, run.seeds_total
            ),
            path,
            saved.then_some(restart.as_path()),
        ));
    }
    if every.is_some() || ck.resume.is_some() {
        remove_restart(path);
    }
    Ok(run.set)
}

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
fn save_progress(p: &BranchesProgress, config_text: &str) -> Restart {
    let mut r = Restart::new("branches", config_text);
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
    r
}

/// The progress `save_progress` stored, for a grid of `n` bands.
fn restore_progress(r: &Restart, n: usize) -> Result<BranchesProgress, RestartError> {
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
