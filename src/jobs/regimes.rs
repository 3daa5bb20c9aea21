//! The `regimes` job: one continuation along `regimes.control` for every value of
//! `regimes.row_control`, rows in parallel (rayon), then the fold lines, and its file.
//!
//! Each row depends only on its own value, and rows are collected in order, so the result is
//! the same for any number of threads.

use super::equilibrium::require_steady;
use super::run::{build_model, provenance};
use crate::cli::progress;
use crate::config::spec::RegimesSpec;
use crate::config::{ConfigError, Loaded};
use crate::equilibrium::continuation::{ContinuationError, ContinuationOptions};
use crate::equilibrium::control::Controlled;
pub use crate::equilibrium::regimes::RegimeMap;
use crate::equilibrium::regimes::{fold_lines, regime_row, RegimeRow};
use crate::error::Error;
use crate::integrate::SolverError;
use crate::output::regimes_file::write_regimes;
use rayon::prelude::*;
use std::path::Path;

/// How to run the map.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct RegimesOptions {
    /// Worker threads (`None`: rayon's default, all cores or `RAYON_NUM_THREADS`).
    pub threads: Option<usize>,
    /// Show a progress bar across rows.
    pub progress: bool,
}

/// The validated `[regimes]` section, or a config error naming what is missing.
pub fn regimes_spec(cfg: &Loaded) -> Result<&RegimesSpec, ConfigError> {
    let ends = cfg
        .spec
        .regimes
        .as_ref()
        .map(|s| [s.from, s.to])
        .unwrap_or([0.0; 2]);
    super::control_section(
        cfg,
        cfg.spec.regimes.as_ref(),
        "regimes",
        "control, from, to (continued along each row) and row_control, row_from, row_to (one row per value)",
        ends,
    )
}

fn continuation_error(e: ContinuationError, row_key: &str, row_value: f64) -> Error {
    match e {
        ContinuationError::Config(c) => Error::Config(c),
        ContinuationError::Start { control, reason } => Error::Solver(SolverError::NoConvergence {
            what: "continuation".into(),
            detail: format!(
                "in the row {row_key} = {row_value}, a branch could not start at control {control}: {reason}"
            ),
        }),
    }
}

/// Check that `key` names a numeric key of the config, that both `ends` are allowed values,
/// and that the key changes the heating of a state with a pole-to-equator gradient (a
/// uniform state would hide keys such as the diffusivity).
fn check_key(cfg: &Loaded, section_key: &str, key: &str, ends: [f64; 2]) -> Result<(), ConfigError> {
    let fam = Controlled::new(cfg, key).map_err(|e| match e {
        ConfigError::Key { path, message, .. } => ConfigError::Key {
            path,
            key: section_key.to_string(),
            message: format!("`{key}` is {message}"),
        },
        other => other,
    })?;
    let (m0, m1) = (fam.model_at(ends[0])?, fam.model_at(ends[1])?);
    let n = m0.len();
    let t: Vec<f64> = m0
        .grid
        .x_centres
        .iter()
        .map(|&x| 273.15 + 15.0 - 30.0 * crate::grid::p2(x))
        .collect();
    let mut ws = crate::model::Workspace::new(n);
    let (mut g0, mut g1) = (vec![0.0; n], vec![0.0; n]);
    m0.heating(0.0, &t, &mut ws, &mut g0);
    m1.heating(0.0, &t, &mut ws, &mut g1);
    if g0 == g1 {
        return Err(ConfigError::Key {
            path: cfg.source.clone(),
            key: section_key.to_string(),
            message: format!(
                "`{key}` has no effect on this configuration (e.g. albedo.width_k with the step albedo, or transport.relaxation_rate with diffusive transport): choose a key the model uses"
            ),
        });
    }
    Ok(())
}

/// Compute the map of a loaded config (no file).
pub fn run_regimes(cfg: &Loaded, opts: RegimesOptions) -> Result<RegimeMap, Error> {
    require_steady(cfg)?;
    let spec = regimes_spec(cfg)?;
    // Both keys must act on the model and both ranges be allowed values.
    check_key(cfg, "regimes.control", &spec.control, [spec.from, spec.to])?;
    check_key(
        cfg,
        "regimes.row_control",
        &spec.row_control,
        [spec.row_from, spec.row_to],
    )?;
    let columns = spec.column_values();
    let values = spec.row_values();
    let copts = ContinuationOptions::from_spec(&spec.row_branches(), cfg.spec.equilibrium.tolerance_wm2);
    let pool = match opts.threads {
        Some(t) => Some(
            rayon::ThreadPoolBuilder::new()
                .num_threads(t)
                .build()
                .map_err(|e| Error::Other(format!("cannot start {t} worker threads: {e}")))?,
        ),
        None => None,
    };
    let pb = if opts.progress {
        progress::bar(values.len() as u64, "regime rows")
    } else {
        indicatif::ProgressBar::hidden()
    };
    let work = || -> Result<Vec<RegimeRow>, Error> {
        values
            .par_iter()
            .map(|&q| {
                let row_cfg = cfg.with_value(&spec.row_control, q)?;
                let fam = Controlled::new(&row_cfg, &spec.control)?;
                let r = regime_row(&fam, copts, &columns, q)
                    .map_err(|e| continuation_error(e, &spec.row_control, q));
                pb.inc(1);
                r
            })
            .collect()
    };
    let rows = match &pool {
        Some(p) => p.install(work)?,
        None => work()?,
    };
    pb.finish_and_clear();
    let lines = fold_lines(&rows, spec.to - spec.from);
    Ok(RegimeMap { columns, rows, lines })
}

/// Compute and write the file at `path`.
pub fn regimes_to_file(
    cfg: &Loaded,
    path: &Path,
    command_line: &str,
    opts: RegimesOptions,
) -> Result<RegimeMap, Error> {
    let map = run_regimes(cfg, opts)?;
    let spec = regimes_spec(cfg)?;
    let model = build_model(cfg)?;
    write_regimes(path, &model, &provenance(cfg, command_line), spec, &map)?;
    Ok(map)
}
