//! The `branches` job: pseudo-arclength continuation of every branch in the `[branches]`
//! range, and its file. The unit of work is a continuation seed; a checkpoint holds the
//! branches so far (layout in `restart.rs`).

mod restart;

use super::equilibrium::{family, require_steady};
use super::executor::{Checkpointing, Executor, Quiet, Unit};
use super::run::{build_model, provenance};
use crate::config::spec::{AxisSpacing, BranchesSpec};
use crate::config::{ConfigError, Loaded};
use crate::equilibrium::branches::{all_branches_from, BranchSet, BranchesProgress, BranchesRun};
use crate::equilibrium::continuation::{ContinuationError, ContinuationOptions};
use crate::equilibrium::control::Controlled;
use crate::error::Error;
use crate::integrate::SolverError;
use crate::output::branches_file::{write_branches_with, BranchesInfo};
use crate::output::Attr;
use std::path::Path;

/// The unit of work: a seed (a state found on the initial scan, continued both ways).
const SEEDS: Unit = Unit {
    kind: "branches",
    option: "--checkpoint-every-seeds",
    counts: Some("seeds"),
};

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
    let mut exec = Executor::in_memory(cfg, SEEDS, &Quiet)?;
    let mut run = seeds(cfg, &mut exec, BranchesProgress::default())?;
    exec.end(run.error.take().map(continuation_error), || how_far(&run))?;
    Ok(run.set)
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

/// The seeds from `progress` on, each followed by the executor's checkpoint and stop (no
/// progress bar: the seed count is known only inside the search).
fn seeds(cfg: &Loaded, exec: &mut Executor<'_>, progress: BranchesProgress) -> Result<BranchesRun, Error> {
    require_steady(cfg)?;
    let spec = branches_spec(cfg)?;
    let fam = family(cfg, "branches.control", &spec.control, [spec.from, spec.to])?;
    let mut opts = ContinuationOptions::from_spec(spec, cfg.spec.equilibrium.tolerance_wm2);
    exec.count_from(progress.seeds_done as f64);
    let mut on_seed = |p: &BranchesProgress| exec.after(p.seeds_done as f64, false, |r| restart::save(p, r));
    if spec.spacing == AxisSpacing::Log {
        // Continue in q = ln(p); the progress (and its checkpoints) stays in q, the result is
        // mapped back to the key's values.
        let fam = fam.in_log();
        (opts.from, opts.to) = (spec.from.ln(), spec.to.ln());
        let mut run = all_branches_from(&fam, opts, progress, &mut on_seed);
        to_key_values(&mut run.set, &fam);
        return Ok(run);
    }
    Ok(all_branches_from(&fam, opts, progress, &mut on_seed))
}

fn how_far(run: &BranchesRun) -> String {
    format!(
        "stopped after seed {} of {}",
        run.progress.seeds_done, run.seeds_total
    )
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
    let (mut exec, resume) = Executor::new(cfg, SEEDS, ck, Some(path), &Quiet)?;
    let model = build_model(cfg)?;
    let start = match resume {
        Some(r) => restart::restore(&r, model.len()).map_err(Error::Restart)?,
        None => BranchesProgress::default(),
    };
    let mut run = seeds(cfg, &mut exec, start)?;
    exec.check_saved()?;
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
    let reached = vec![
        (
            "seeds_done".to_string(),
            Attr::I64(run.progress.seeds_done as i64),
        ),
        ("seeds_total".to_string(), Attr::I64(run.seeds_total as i64)),
    ];
    let failure = run.error.take().map(|e| (e.to_string(), continuation_error(e)));
    let prov = provenance(cfg, command_line);
    exec.finish(
        failure,
        reached,
        || how_far(&run),
        |c| {
            Ok(write_branches_with(
                path,
                &model,
                &prov,
                &info,
                &run.set.branches,
                c,
            )?)
        },
    )?;
    Ok(run.set)
}
