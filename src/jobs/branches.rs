//! The `branches` job: pseudo-arclength continuation of every branch in the `[branches]`
//! range, and its file.

use super::equilibrium::{family, require_steady};
use super::run::{build_model, provenance};
use crate::config::spec::BranchesSpec;
use crate::config::{ConfigError, Loaded};
use crate::equilibrium::branches::{all_branches, BranchSet};
use crate::equilibrium::continuation::{ContinuationError, ContinuationOptions};
use crate::error::Error;
use crate::integrate::SolverError;
use crate::output::branches_file::{write_branches, BranchesInfo};
use std::path::Path;

/// The validated `[branches]` section, or a config error naming what is missing.
pub fn branches_spec(cfg: &Loaded) -> Result<&BranchesSpec, ConfigError> {
    let ends = cfg
        .spec
        .branches
        .as_ref()
        .map(|s| [s.from, s.to])
        .unwrap_or([0.0; 2]);
    super::control_section(
        cfg,
        cfg.spec.branches.as_ref(),
        "branches",
        "control (a dotted key such as \"insolation.solar_constant\"), from and to",
        ends,
    )
}

/// Trace the branches of a loaded config (no file).
pub fn run_branches(cfg: &Loaded) -> Result<BranchSet, Error> {
    require_steady(cfg)?;
    let spec = branches_spec(cfg)?;
    let fam = family(cfg, "branches.control", &spec.control, [spec.from, spec.to])?;
    let opts = ContinuationOptions::from_spec(spec, cfg.spec.equilibrium.tolerance_wm2);
    all_branches(&fam, opts).map_err(|e| match e {
        ContinuationError::Config(c) => Error::Config(c),
        ContinuationError::Start { control, reason } => Error::Solver(SolverError::NoConvergence {
            what: "continuation".into(),
            detail: format!("a branch could not start at control {control}: {reason}"),
        }),
    })
}

/// Trace and write the file at `path`.
pub fn branches_to_file(cfg: &Loaded, path: &Path, command_line: &str) -> Result<BranchSet, Error> {
    let set = run_branches(cfg)?;
    let spec = branches_spec(cfg)?;
    let model = build_model(cfg)?;
    let info = BranchesInfo {
        control_key: &spec.control,
        from: spec.from,
        to: spec.to,
        linearisations: set.linearisations,
    };
    write_branches(path, &model, &provenance(cfg, command_line), &info, &set.branches)?;
    Ok(set)
}
