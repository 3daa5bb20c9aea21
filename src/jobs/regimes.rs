//! The `regimes` job: one continuation along `regimes.control` for every value of
//! `regimes.row_control`, rows in parallel (rayon), then the fold lines, and its file.
//!
//! Each row depends only on its own value, and rows are collected in order, so the result is
//! the same for any number of threads.

mod restart;

use super::equilibrium::require_steady;
use super::executor::{Checkpointing, Executor, Failure, Progress, Quiet, Unit};
use super::run::{build_model, provenance};
use crate::checkpoint::Restart;
use crate::config::spec::{AxisSpacing, RegimesSpec};
use crate::config::{ConfigError, Loaded};
use crate::equilibrium::continuation::{ContinuationError, ContinuationOptions};
use crate::equilibrium::control::Controlled;
pub use crate::equilibrium::regimes::RegimeMap;
use crate::equilibrium::regimes::{fold_lines, regime_row, RegimeRow};
use crate::error::Error;
use crate::integrate::SolverError;
use crate::output::regimes_file::write_regimes_with;
use crate::output::Attr;
use rayon::prelude::*;
use std::path::Path;

/// How to run the map.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct RegimesOptions {
    /// Worker threads (`None`: rayon's default, all cores or `RAYON_NUM_THREADS`).
    pub threads: Option<usize>,
}

/// The unit of work: a row (one value of the row control, continued along the control).
const ROWS: Unit = Unit {
    kind: "regimes",
    option: "--checkpoint-every-rows",
    counts: Some("rows"),
};

/// The validated `[regimes]` section, or a config error naming what is missing.
pub fn regimes_spec(cfg: &Loaded) -> Result<&RegimesSpec, ConfigError> {
    super::control_section(
        cfg,
        cfg.spec.regimes.as_ref(),
        |s| [s.from, s.to],
        "regimes",
        "control, from, to (continued along each row) and row_control, row_from, row_to (one row per value)",
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
    let mut exec = Executor::in_memory(cfg, ROWS, &Quiet)?;
    let (map, failure) = rows(cfg, opts, &mut exec, None)?;
    exec.end(failure.map(|(_, e)| e), || how_far(&map, cfg))?;
    Ok(map)
}

fn how_far(map: &RegimeMap, cfg: &Loaded) -> String {
    let total = regimes_spec(cfg).map_or(0, |s| s.row_values().len());
    format!("stopped after {} of {total} rows", map.rows.len())
}

/// The map of the rows that finish, and the first failure. Rows run in parallel in chunks of
/// the checkpoint cadence; rows not yet started when a stop is requested (SIGINT/SIGTERM, see
/// `interrupt`) are skipped; a failing row is left out and reported.
fn rows(
    cfg: &Loaded,
    opts: RegimesOptions,
    exec: &mut Executor<'_>,
    resume: Option<Restart>,
) -> Result<(RegimeMap, Option<Failure>), Error> {
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
    let mut copts = ContinuationOptions::from_spec(&spec.row_branches(), cfg.spec.equilibrium.tolerance_wm2);
    let log = spec.spacing == AxisSpacing::Log;
    // Log spacing: each row is continued in q = ln(control) (the columns too are compared in
    // q) and its folds mapped back to the control's values.
    let row_columns: Vec<f64> = if log {
        (copts.from, copts.to) = (spec.from.ln(), spec.to.ln());
        columns.iter().map(|c| c.ln()).collect()
    } else {
        columns.clone()
    };
    // One row: the config at the row value, its branches traced along the control.
    let row = |q: f64| -> Result<RegimeRow, Error> {
        let row_cfg = cfg.with_value(&spec.row_control, q)?;
        let mut fam = Controlled::new(&row_cfg, &spec.control)?;
        if log {
            fam = fam.in_log();
        }
        let mut row = regime_row(&fam, copts, &row_columns, q, spec.small_cap_min_latitude)
            .map_err(|e| continuation_error(e, &spec.row_control, q))?;
        for f in &mut row.folds {
            f.control = fam.key_value(f.control);
        }
        Ok(row)
    };
    let pool = super::worker_pool(opts.threads)?;
    // Rows by index; a resumed map starts with the rows its restart file holds.
    let mut done: Vec<Option<RegimeRow>> = vec![None; values.len()];
    if let Some(r) = &resume {
        restart::restore(r, &columns, &values, &mut done).map_err(Error::Restart)?;
    }
    let todo: Vec<usize> = (0..values.len()).filter(|&i| done[i].is_none()).collect();
    exec.begin(
        values.len() as u64,
        "regime rows",
        (values.len() - todo.len()) as f64,
    );
    let bar = exec.progress();
    let mut failure: Option<Error> = None;
    for part in todo.chunks(exec.chunk(todo.len())) {
        let work = || -> Vec<(usize, Option<Result<RegimeRow, Error>>)> {
            part.par_iter()
                .map(|&i| {
                    if Executor::stop_requested() {
                        return (i, None);
                    }
                    let r = row(values[i]);
                    bar.add(1);
                    (i, Some(r))
                })
                .collect()
        };
        let results = match &pool {
            Some(p) => p.install(work),
            None => work(),
        };
        for (i, r) in results {
            match r {
                Some(Ok(row)) => done[i] = Some(row),
                Some(Err(e)) if failure.is_none() => failure = Some(e),
                _ => {}
            }
        }
        let finished = done.iter().filter(|r| r.is_some()).count();
        let stop = exec.after(finished as f64, finished == values.len(), |r| {
            restart::save(r, &columns, &done)
        });
        if stop || failure.is_some() {
            break;
        }
    }
    bar.finish();
    let rows: Vec<RegimeRow> = done.into_iter().flatten().collect();
    // A fold may jitter within its cluster of sub-band wiggles: about a band of ice edge.
    let slack = 2.0 * build_model(cfg)?.grid.dx.iter().copied().fold(0.0, f64::max);
    let lines = if log {
        // Link folds of neighbouring rows by their distance in ln(control).
        let mut in_q = rows.clone();
        for f in in_q.iter_mut().flat_map(|r| r.folds.iter_mut()) {
            f.control = f.control.ln();
        }
        let mut lines = fold_lines(&in_q, spec.to.ln() - spec.from.ln(), slack);
        for v in lines.iter_mut().flatten() {
            v.p1 = v.p1.exp();
        }
        lines
    } else {
        fold_lines(&rows, spec.to - spec.from, slack)
    };
    let failure = failure.map(|e| (e.to_string(), e));
    Ok((RegimeMap { columns, rows, lines }, failure))
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
    regimes_job(cfg, path, command_line, opts, &Quiet, &Checkpointing::default())
}

/// [`regimes_to_file`] with progress, a checkpoint after every `ck.every` rows into
/// `<path>.restart` and/or resuming from `ck.resume` (rows are independent: a resumed map
/// computes only the rows its restart file lacks, and its file is identical to an
/// uninterrupted one).
pub fn regimes_job(
    cfg: &Loaded,
    path: &Path,
    command_line: &str,
    opts: RegimesOptions,
    progress: &dyn Progress,
    ck: &Checkpointing,
) -> Result<RegimeMap, Error> {
    let (mut exec, resume) = Executor::new(cfg, ROWS, ck, Some(path), progress)?;
    let (map, failure) = rows(cfg, opts, &mut exec, resume)?;
    let (spec, model) = (regimes_spec(cfg)?, build_model(cfg)?);
    let reached = vec![
        ("rows_done".to_string(), Attr::I64(map.rows.len() as i64)),
        (
            "rows_total".to_string(),
            Attr::I64(spec.row_values().len() as i64),
        ),
    ];
    let prov = provenance(cfg, command_line);
    exec.finish(
        failure,
        reached,
        || how_far(&map, cfg),
        |c| Ok(write_regimes_with(path, &model, &prov, spec, &map, c)?),
    )?;
    Ok(map)
}
