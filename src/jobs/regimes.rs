//! The `regimes` job: one continuation along `regimes.control` for every value of
//! `regimes.row_control`, rows in parallel (rayon), then the fold lines, and its file.
//!
//! Each row depends only on its own value, and rows are collected in order, so the result is
//! the same for any number of threads.

use super::equilibrium::require_steady;
use super::run::interrupted;
use super::run::Checkpointing;
use super::run::{build_model, provenance};
use super::Ending;
use crate::checkpoint::{self, Restart, RestartError};
use crate::cli::progress;
use crate::config::spec::{AxisSpacing, RegimesSpec};
use crate::config::{ConfigError, Loaded};
use crate::equilibrium::continuation::{ContinuationError, ContinuationOptions};
use crate::equilibrium::control::Controlled;
pub use crate::equilibrium::regimes::RegimeMap;
use crate::equilibrium::regimes::{fold_lines, regime_row, RegimeRow, RowFold};
use crate::error::Error;
use crate::integrate::SolverError;
use crate::interrupt::StopFlag;
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
    let (map, outcome, _) = compute(cfg, opts, &Checkpointing::default(), None)?;
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
fn compute(
    cfg: &Loaded,
    opts: RegimesOptions,
    ck: &Checkpointing,
    restart_to: Option<&Path>,
) -> Result<(RegimeMap, Outcome, bool), Error> {
    if let Some(e) = ck.every {
        if !(e >= 1.0) || e.fract() != 0.0 {
            return Err(Error::Usage(format!(
                "--checkpoint-every-rows {e}: give a whole number of rows, at least 1"
            )));
        }
    }
    let resume = ck.load("regimes", cfg)?;
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
    let pool = super::worker_pool(opts.threads)?;
    let pb = if opts.progress {
        progress::bar(values.len() as u64, "regime rows")
    } else {
        indicatif::ProgressBar::hidden()
    };
    // Rows by index; a resumed map starts with the rows its restart file holds.
    let mut done: Vec<Option<RegimeRow>> = vec![None; values.len()];
    if let Some(r) = &resume {
        restore_rows(r, &columns, &values, &mut done).map_err(super::run::restart_error)?;
    }
    let todo: Vec<usize> = (0..values.len()).filter(|&i| done[i].is_none()).collect();
    pb.set_position((values.len() - todo.len()) as u64);
    let chunk = ck.every.map_or(todo.len().max(1), |e| e as usize);
    let stop = StopFlag;
    let mut failure = None;
    let mut saved = false;
    for part in todo.chunks(chunk) {
        let work = || -> Vec<(usize, Option<Result<RegimeRow, Error>>)> {
            part.par_iter()
                .map(|&i| {
                    if stop.requested().is_some() {
                        return (i, None);
                    }
                    let q = values[i];
                    let row = || -> Result<RegimeRow, Error> {
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
                    let r = row();
                    pb.inc(1);
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
        if let (Some(_), Some(to)) = (ck.every, restart_to) {
            save_rows(to, cfg, &columns, &done).map_err(super::run::restart_error)?;
            saved = true;
            crate::interrupt::checkpoint_written();
        }
        if failure.is_some() || stop.requested().is_some() {
            break;
        }
    }
    pb.finish_and_clear();
    let rows: Vec<RegimeRow> = done.into_iter().flatten().collect();
    let outcome = match (failure, stop.requested()) {
        (Some(e), _) => Outcome::Failed(e),
        (None, Some(sig)) if rows.len() < values.len() => Outcome::Stopped(sig),
        _ => Outcome::Finished,
    };
    // A fold may jitter within its cluster of sub-band wiggles: about a band of ice edge.
    let slack = 2.0
        * crate::jobs::run::build_model(cfg)?
            .grid
            .dx
            .iter()
            .copied()
            .fold(0.0, f64::max);
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
    Ok((RegimeMap { columns, rows, lines }, outcome, saved))
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
    regimes_job(cfg, path, command_line, opts, &Checkpointing::default())
}

/// [`regimes_to_file`] with a checkpoint after every `ck.every` rows into `<path>.restart`
/// and/or resuming from `ck.resume` (rows are independent: a resumed map computes only the
/// rows its restart file lacks, and its file is identical to an uninterrupted one).
pub fn regimes_job(
    cfg: &Loaded,
    path: &Path,
    command_line: &str,
    opts: RegimesOptions,
    ck: &Checkpointing,
) -> Result<RegimeMap, Error> {
    let (map, outcome, saved) = compute(cfg, opts, ck, Some(path))?;
    let spec = regimes_spec(cfg)?;
    let model = build_model(cfg)?;
    let total = spec.row_values().len();
    let done = map.rows.len();
    let progress = vec![
        ("rows_done".to_string(), Attr::I64(done as i64)),
        ("rows_total".to_string(), Attr::I64(total as i64)),
    ];
    let completion = match &outcome {
        Outcome::Finished => Ending::Finished,
        Outcome::Stopped(sig) => Ending::Stopped(*sig),
        Outcome::Failed(e) => Ending::Failed(e.to_string()),
    }
    .completion(progress);
    write_regimes_with(
        path,
        &model,
        &provenance(cfg, command_line),
        spec,
        &map,
        &completion,
    )?;
    let restart = checkpoint::restart_path(path);
    match outcome {
        Outcome::Finished => {
            if ck.every.is_some() || ck.resume.is_some() {
                super::run::remove_restart(path);
            }
            Ok(map)
        }
        Outcome::Stopped(sig) => Err(interrupted(
            sig,
            format!("stopped after {done} of {total} rows"),
            path,
            saved.then_some(restart.as_path()),
        )),
        Outcome::Failed(e) => Err(e),
    }
}

/// Save the finished rows (any subset, by index) to the restart file beside `path`.
fn save_rows(
    path: &Path,
    cfg: &Loaded,
    columns: &[f64],
    done: &[Option<RegimeRow>],
) -> Result<(), RestartError> {
    let mut r = Restart::new("regimes", &cfg.resolved_text());
    let rows: Vec<(usize, &RegimeRow)> = done
        .iter()
        .enumerate()
        .filter_map(|(i, row)| row.as_ref().map(|row| (i, row)))
        .collect();
    let u =
        |f: &dyn Fn(&RegimeRow) -> Vec<u64>| -> Vec<u64> { rows.iter().flat_map(|(_, x)| f(x)).collect() };
    let g =
        |f: &dyn Fn(&RegimeRow) -> Vec<f64>| -> Vec<f64> { rows.iter().flat_map(|(_, x)| f(x)).collect() };
    r.put_f64("columns", columns);
    r.put_u64(
        "rows.index",
        &rows.iter().map(|(i, _)| *i as u64).collect::<Vec<_>>(),
    );
    r.put_f64("rows.value", &g(&|x| vec![x.row_value]));
    r.put_u64(
        "rows.stable",
        &u(&|x| x.stable.iter().map(|&v| u64::from(v)).collect()),
    );
    r.put_u64(
        "rows.equilibria",
        &u(&|x| x.equilibria.iter().map(|&v| u64::from(v)).collect()),
    );
    r.put_u64(
        "rows.kinds",
        &u(&|x| x.kinds.iter().map(|&v| u64::from(v)).collect()),
    );
    r.put_u64("rows.branches", &u(&|x| vec![x.branches as u64]));
    r.put_u64("rows.stuck_ends", &u(&|x| vec![x.stuck_ends as u64]));
    r.put_u64("rows.linearisations", &u(&|x| vec![x.linearisations]));
    r.put_u64("rows.folds", &u(&|x| vec![x.folds.len() as u64]));
    r.put_f64(
        "folds.control",
        &g(&|x| x.folds.iter().map(|f| f.control).collect()),
    );
    r.put_f64(
        "folds.ice_edge",
        &g(&|x| x.folds.iter().map(|f| f.ice_edge).collect()),
    );
    r.put_u64(
        "folds.corner",
        &u(&|x| {
            x.folds
                .iter()
                .map(|f| u64::from(f.corner) | (u64::from(f.minimum) << 1))
                .collect()
        }),
    );
    r.save(&checkpoint::restart_path(path))
}

/// The rows saved by [`save_rows`] into `done`, checked against this map's columns and rows.
fn restore_rows(
    r: &Restart,
    columns: &[f64],
    values: &[f64],
    done: &mut [Option<RegimeRow>],
) -> Result<(), RestartError> {
    let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
    if bits(r.f64s("columns")?) != bits(columns) {
        return Err(r.bad("its columns differ from this map's"));
    }
    let index = r.u64s("rows.index")?;
    let k = index.len();
    let nc = columns.len();
    let (value, stable, equilibria, kinds) = (
        r.f64s("rows.value")?,
        r.u64s("rows.stable")?,
        r.u64s("rows.equilibria")?,
        r.u64s("rows.kinds")?,
    );
    let (branches, stuck, lins, nfolds) = (
        r.u64s("rows.branches")?,
        r.u64s("rows.stuck_ends")?,
        r.u64s("rows.linearisations")?,
        r.u64s("rows.folds")?,
    );
    let (fc, fe, fk) = (
        r.f64s("folds.control")?,
        r.f64s("folds.ice_edge")?,
        r.u64s("folds.corner")?,
    );
    let total_folds: u64 = nfolds.iter().sum();
    if [value.len(), branches.len(), stuck.len(), lins.len(), nfolds.len()] != [k; 5]
        || [stable.len(), equilibria.len(), kinds.len()] != [k * nc; 3]
        || [fc.len(), fe.len(), fk.len()] != [total_folds as usize; 3]
    {
        return Err(r.bad("its row arrays have inconsistent lengths"));
    }
    let mut f0 = 0;
    for (j, &i) in index.iter().enumerate() {
        let i = i as usize;
        if i >= values.len() || values[i].to_bits() != value[j].to_bits() {
            return Err(r.bad(format!("its row {i} does not belong to this map")));
        }
        let cells = j * nc..(j + 1) * nc;
        let nf = nfolds[j] as usize;
        done[i] = Some(RegimeRow {
            row_value: value[j],
            stable: stable[cells.clone()].iter().map(|&v| v as u32).collect(),
            equilibria: equilibria[cells.clone()].iter().map(|&v| v as u32).collect(),
            kinds: kinds[cells].iter().map(|&v| v as u8).collect(),
            folds: (f0..f0 + nf)
                .map(|m| RowFold {
                    control: fc[m],
                    ice_edge: fe[m],
                    corner: fk[m] & 1 != 0,
                    minimum: fk[m] & 2 != 0,
                })
                .collect(),
            branches: branches[j] as usize,
            stuck_ends: stuck[j] as usize,
            linearisations: lins[j],
        });
        f0 += nf;
    }
    Ok(())
}
