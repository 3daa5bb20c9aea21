//! The `sweep` job: the two-way quasi-static sweep of `[sweep]`, from the config's initial
//! state settled at the first value, and its file.

use super::equilibrium::{family, require_steady};
use super::run::{build_model, provenance};
use crate::cli::progress;
use crate::config::spec::SweepSpec;
use crate::config::{ConfigError, Loaded};
use crate::equilibrium::sweep::{sweep, SweepError, SweepResult, Tolerances};
use crate::error::Error;
use crate::output::sweep_file::write_sweep;
use std::path::Path;

/// The validated `[sweep]` section, or a config error naming what is missing.
pub fn sweep_spec(cfg: &Loaded) -> Result<&SweepSpec, ConfigError> {
    let ends = cfg
        .spec
        .sweep
        .as_ref()
        .map(|s| [s.from, s.to])
        .unwrap_or([0.0; 2]);
    super::control_section(
        cfg,
        cfg.spec.sweep.as_ref(),
        "sweep",
        "control (a dotted key such as \"insolation.solar_constant\"), from, to and steps",
        ends,
    )
}

/// Run the sweep of a loaded config (no file).
pub fn run_sweep(cfg: &Loaded, show_progress: bool) -> Result<SweepResult, Error> {
    require_steady(cfg)?;
    let spec = sweep_spec(cfg)?;
    let fam = family(cfg, "sweep.control", &spec.control, [spec.from, spec.to])?;
    let start = fam.model_at(spec.from)?.initial_state(&cfg.spec.initial);
    let pb = if show_progress {
        progress::bar(2 * spec.steps as u64, "sweep steps")
    } else {
        indicatif::ProgressBar::hidden()
    };
    let mut on_step = |k: usize| pb.set_position(k as u64);
    // Settling uses the configured local error per step ([time] tolerance); Newton finishes it
    // on the exact equilibrium, so only the basin has to be right.
    let tol = Tolerances {
        newton_wm2: cfg.spec.equilibrium.tolerance_wm2,
        step_k: cfg.spec.time.tolerance,
    };
    let r = sweep(&fam, spec, &start, tol, &mut on_step);
    pb.finish_and_clear();
    r.map_err(|e| match e {
        SweepError::Config(c) => Error::Config(c),
        SweepError::Solver(s) => Error::Solver(s),
    })
}

/// Run the sweep and write the file at `path`.
pub fn sweep_to_file(
    cfg: &Loaded,
    path: &Path,
    command_line: &str,
    show_progress: bool,
) -> Result<SweepResult, Error> {
    let res = run_sweep(cfg, show_progress)?;
    let model = build_model(cfg)?;
    write_sweep(
        path,
        &model,
        &provenance(cfg, command_line),
        sweep_spec(cfg)?,
        &res,
    )?;
    Ok(res)
}
