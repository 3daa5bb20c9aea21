//! The `sweep` job: the two-way quasi-static sweep of `[sweep]`, from the config's initial
//! state settled at the first value, and its file. The unit of work is a sweep step; a
//! checkpoint holds the steps so far (layout in `restart.rs`).

mod restart;

use super::equilibrium::{family, require_steady};
use super::executor::{Checkpointing, Executor, Progress, Quiet, Unit};
use super::run::{build_model, provenance};
use crate::config::spec::SweepSpec;
use crate::config::{ConfigError, Loaded};
use crate::equilibrium::sweep::{sweep_from, SweepError, SweepProgress, SweepResult, SweepRun, Tolerances};
use crate::error::Error;
use crate::output::sweep_file::write_sweep_with;
use crate::output::Attr;
use std::path::Path;

/// The sweep's unit of work: a step up or down.
const STEPS: Unit = Unit {
    kind: "sweep",
    option: "--checkpoint-every-steps",
    counts: Some("steps"),
};

/// The validated `[sweep]` section, or a config error naming what is missing.
pub fn sweep_spec(cfg: &Loaded) -> Result<&SweepSpec, ConfigError> {
    super::control_section(
        cfg,
        cfg.spec.sweep.as_ref(),
        |s| [s.from, s.to],
        "sweep",
        "control (a dotted key such as \"insolation.solar_constant\"), from, to and steps",
    )
}

/// Run the sweep of a loaded config (no file).
pub fn run_sweep(cfg: &Loaded) -> Result<SweepResult, Error> {
    let mut exec = Executor::in_memory(cfg, STEPS, &Quiet)?;
    let run = steps(cfg, &mut exec, SweepProgress::default())?;
    exec.end(run.error.map(sweep_error), || how_far(&run.result, cfg))?;
    Ok(run.result)
}

fn sweep_error(e: SweepError) -> Error {
    match e {
        SweepError::Config(c) => Error::Config(c),
        SweepError::Solver(s) => Error::Solver(s),
    }
}

/// The steps from `progress` on, each followed by the executor's checkpoint and stop.
fn steps(cfg: &Loaded, exec: &mut Executor<'_>, progress: SweepProgress) -> Result<SweepRun, Error> {
    require_steady(cfg)?;
    let spec = sweep_spec(cfg)?;
    let fam = family(cfg, "sweep.control", &spec.control, [spec.from, spec.to])?;
    let start = fam.model_at(spec.from)?.initial_state(&cfg.spec.initial);
    exec.begin(2 * spec.steps as u64, "sweep steps", progress.steps.len() as f64);
    let mut hook = |p: &SweepProgress| {
        exec.progress().set(p.steps.len() as u64);
        exec.after(p.steps.len() as f64, false, |r| restart::save(p, r))
    };
    // Settling uses the configured local error per step ([time] tolerance); Newton finishes it
    // on the exact equilibrium, so only the basin has to be right.
    let tol = Tolerances {
        newton_wm2: cfg.spec.equilibrium.tolerance_wm2,
        step_k: cfg.spec.time.tolerance,
    };
    let run = sweep_from(&fam, spec, &start, tol, progress, &mut hook);
    exec.progress().finish();
    Ok(run)
}

/// Where a stopped sweep got to.
fn how_far(r: &SweepResult, cfg: &Loaded) -> String {
    let last = r.steps.last().map_or(f64::NAN, |s| s.control);
    let total = cfg.spec.sweep.as_ref().map_or(0, |s| 2 * s.steps);
    format!(
        "stopped after sweep step {} of {total} (control {last})",
        r.steps.len()
    )
}

/// Run the sweep and write the file at `path`.
pub fn sweep_to_file(cfg: &Loaded, path: &Path, command_line: &str) -> Result<SweepResult, Error> {
    sweep_job(cfg, path, command_line, &Quiet, &Checkpointing::default())
}

/// [`sweep_to_file`] with progress, checkpoints every `ck.every` finished steps into
/// `<path>.restart` and/or resuming from `ck.resume`. On SIGINT/SIGTERM (after the next
/// finished step) or a numerical failure the steps so far are written with `complete = 0` and
/// `steps_done` (and `failure`).
pub fn sweep_job(
    cfg: &Loaded,
    path: &Path,
    command_line: &str,
    progress: &dyn Progress,
    ck: &Checkpointing,
) -> Result<SweepResult, Error> {
    let (mut exec, resume) = Executor::new(cfg, STEPS, ck, Some(path), progress)?;
    let start = match resume {
        Some(r) => restart::restore(&r, build_model(cfg)?.len()).map_err(Error::Restart)?,
        None => SweepProgress::default(),
    };
    let run = steps(cfg, &mut exec, start)?;
    exec.check_saved()?;
    let (model, spec) = (build_model(cfg)?, sweep_spec(cfg)?);
    let reached = vec![
        ("steps_done".to_string(), Attr::I64(run.result.steps.len() as i64)),
        (
            "control_reached".to_string(),
            Attr::F64(run.result.steps.last().map_or(f64::NAN, |s| s.control)),
        ),
    ];
    let failure = run.error.map(|e| (e.to_string(), sweep_error(e)));
    exec.finish(
        failure,
        reached,
        || how_far(&run.result, cfg),
        |c| {
            Ok(write_sweep_with(
                path,
                &model,
                &provenance(cfg, command_line),
                spec,
                &run.result,
                c,
            )?)
        },
    )?;
    Ok(run.result)
}
