//! The `regimes` job: one continuation along `regimes.control` for every value of
//! `regimes.row_control`, rows in parallel (rayon), then the fold lines, and its file.
//!
//! Each row depends only on its own value, and rows are collected in order, so the result is
//! the same for any number of threads.

use super::equilibrium::require_steady;
use super::run::interrupted;
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
use crate::interrupt::{signal_name, StopFlag};
use crate::output::common::Completion;
use crate::output::regimes_file::write_regimes_with;
use crate::output::Attr;
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
    super::equilibrium::family(cfg, section_key, key, ends).map(|_| ())
}

/// Compute the map of a loaded config (no file).
pub fn run_regimes(cfg: &Loaded, opts: RegimesOptions) -> Result<RegimeMap, Error> {
    let (map, outcome) = compute(cfg, opts)?;
    match outcome {
        Outcome::Failed(e) => Err(e),
        _ => Ok(map),
    }
}

/// How a map computation ended.
enum Outcome {
    /// Every row finished.
    Finished,
    /// A stop was requested (signal number); the map holds the rows that finished.
    Stopped(i32),
    /// A row failed; the map holds the rows that finished.
    Failed(Error),
}

/// The map of the rows that finish, and how the computation ended. Rows not yet started when
/// a stop is requested (SIGINT/SIGTERM, see `interrupt`) are skipped; a failing row is left
/// out and reported.
fn compute(cfg: &Loaded, opts: RegimesOptions) -> Result<(RegimeMap, Outcome), Error> {
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
    let stop = StopFlag;
    let work = || -> Vec<Option<Result<RegimeRow, Error>>> {
        values
            .par_iter()
            .map(|&q| {
                if stop.requested().is_some() {
                    return None;
                }
                let row = || -> Result<RegimeRow, Error> {
                    let row_cfg = cfg.with_value(&spec.row_control, q)?;
                    let fam = Controlled::new(&row_cfg, &spec.control)?;
                    regime_row(&fam, copts, &columns, q)
                        .map_err(|e| continuation_error(e, &spec.row_control, q))
                };
                let r = row();
                pb.inc(1);
                Some(r)
            })
            .collect()
    };
    let results = match &pool {
        Some(p) => p.install(work),
        None => work(),
    };
    pb.finish_and_clear();
    let mut rows = Vec::with_capacity(results.len());
    let mut failure = None;
    for r in results.into_iter().flatten() {
        match r {
            Ok(row) => rows.push(row),
            Err(e) if failure.is_none() => failure = Some(e),
            Err(_) => {}
        }
    }
    let outcome = match (failure, stop.requested()) {
        (Some(e), _) => Outcome::Failed(e),
        (None, Some(sig)) if rows.len() < values.len() => Outcome::Stopped(sig),
        _ => Outcome::Finished,
    };
    let lines = fold_lines(&rows, spec.to - spec.from);
    Ok((RegimeMap { columns, rows, lines }, outcome))
}

/// Compute and write the file at `path`. Interrupted (SIGINT/SIGTERM) or failing, it writes
/// the rows that finished with `complete = 0`, `rows_done`, `rows_total` and `interrupted_by`
/// or `failure`, then returns the error (exit 130/143 or 3).
pub fn regimes_to_file(
    cfg: &Loaded,
    path: &Path,
    command_line: &str,
    opts: RegimesOptions,
) -> Result<RegimeMap, Error> {
    let (map, outcome) = compute(cfg, opts)?;
    let spec = regimes_spec(cfg)?;
    let model = build_model(cfg)?;
    let total = spec.row_values().len();
    let done = map.rows.len();
    let mut progress = vec![
        ("rows_done".to_string(), Attr::I64(done as i64)),
        ("rows_total".to_string(), Attr::I64(total as i64)),
    ];
    let completion = match &outcome {
        Outcome::Finished => Completion::finished(),
        Outcome::Stopped(sig) => {
            progress.push(("interrupted_by".into(), Attr::Str(signal_name(*sig).into())));
            Completion::partial(progress)
        }
        Outcome::Failed(e) => {
            progress.push(("failure".into(), Attr::Str(e.to_string())));
            Completion::partial(progress)
        }
    };
    write_regimes_with(
        path,
        &model,
        &provenance(cfg, command_line),
        spec,
        &map,
        &completion,
    )?;
    match outcome {
        Outcome::Finished => Ok(map),
        Outcome::Stopped(sig) => Err(interrupted(
            sig,
            format!("stopped after {done} of {total} rows"),
            path,
            None,
        )),
        Outcome::Failed(e) => Err(e),
    }
}
