//! The `run` job: build the model, integrate, stream the trajectory to a file; with
//! checkpoints, resume and a clean stop on SIGINT/SIGTERM (through [`super::executor`]).

use super::executor::{Executor, Progress, Quiet, Unit};
use crate::checkpoint::{Restart, RestartError};
use crate::config::Loaded;
use crate::error::Error;
use crate::integrate::driver::ObserverError;
use crate::integrate::driver::{self, Boundary, Flow, RunError, RunSummary, Stepper};
use crate::integrate::Observer;
use crate::model::Model;
use crate::output::common::Provenance;
use crate::output::run_file::RunWriter;
use crate::output::Attr;
use std::cell::RefCell;
use std::path::Path;

/// What a finished run reports.
#[derive(Debug, Clone)]
pub struct RunReport {
    /// Driver summary.
    pub summary: RunSummary,
    /// Final global-mean temperature, K.
    pub final_global_mean: f64,
    /// Final northern ice-edge latitude, degrees.
    pub final_ice_edge_north: f64,
}

/// Provenance for a loaded config and command line.
pub fn provenance(cfg: &Loaded, command_line: &str) -> Provenance {
    Provenance {
        config_toml: cfg.resolved_text(),
        command_line: command_line.to_string(),
        title: cfg.spec.title.clone(),
        deflate_level: cfg.spec.output.deflate_level,
    }
}

/// Build the model a loaded config describes.
pub fn build_model(cfg: &Loaded) -> Result<Model, Error> {
    Ok(Model::from_spec(&cfg.spec.model))
}

pub use super::executor::{interrupted, Checkpointing};

/// Records seen so far (times and states; with annual means also each record's values), for
/// checkpoints.
#[derive(Default)]
struct History {
    t: Vec<f64>,
    y: Vec<f64>,
    means: Vec<f64>,
}

/// Forwards records to the file and keeps them for checkpoints.
struct Recording<'a, 'm> {
    inner: &'a mut RunWriter<'m>,
    history: Option<&'a RefCell<History>>,
}

impl Observer for Recording<'_, '_> {
    fn record(&mut self, t: f64, temps: &[f64]) -> Result<(), ObserverError> {
        if let Some(h) = self.history {
            let mut h = h.borrow_mut();
            h.t.push(t);
            h.y.extend_from_slice(temps);
        }
        self.inner.record(t, temps)
    }

    fn accumulate(&mut self, t: f64, weight: f64, temps: &[f64]) -> Result<(), ObserverError> {
        self.inner.accumulate(t, weight, temps)
    }

    fn record_mean(&mut self, a: f64, b: f64, end: &[f64]) -> Result<(), ObserverError> {
        self.inner.record_mean(a, b, end)?;
        if let Some(h) = self.history {
            let mut h = h.borrow_mut();
            h.t.push(b);
            h.y.extend_from_slice(end);
            h.means.extend_from_slice(self.inner.last_values());
        }
        Ok(())
    }
}

/// After each record: checkpoints (the stepper and the records so far) and the stop flag.
struct RunHooks<'a, 'p> {
    exec: &'a mut Executor<'p>,
    history: &'a RefCell<History>,
}

impl Boundary for RunHooks<'_, '_> {
    fn at(&mut self, t: f64, records: u64, stepper: &Stepper<'_>) -> Result<Flow, RunError> {
        let h = self.history.borrow();
        let stop = self.exec.after(t, false, |r| {
            r.put_u64("records", &[records]);
            r.put_f64("record.t", &h.t);
            r.put_f64("record.y", &h.y);
            if !h.means.is_empty() {
                r.put_f64("record.means", &h.means);
            }
            stepper.save(r);
        });
        Ok(if stop { Flow::Stop } else { Flow::Continue })
    }
}

/// The run's unit of work: a record, checkpointed every `--checkpoint-every` model years.
const RECORDS: Unit = Unit {
    kind: "run",
    option: "--checkpoint-every",
    counts: None,
};

/// Run and write the file at `path`. On a numerical failure the records computed so far are
/// kept in a complete, readable file marked `complete = 0` with the failure message, and the
/// error is returned (exit 3).
pub fn run_to_file(cfg: &Loaded, path: &Path, command_line: &str) -> Result<RunReport, Error> {
    run_job(cfg, path, command_line, &Quiet, &Checkpointing::default())
}

/// [`run_to_file`] with progress, checkpoints every `ck.every` model years into
/// `<path>.restart` and/or resuming from `ck.resume`. On SIGINT/SIGTERM the run stops after
/// the next record and keeps the records so far in a file marked `complete = 0` with
/// `model_time_reached_years` (with checkpoints, a last checkpoint is written there and the
/// message says how to resume).
pub fn run_job(
    cfg: &Loaded,
    path: &Path,
    command_line: &str,
    progress: &dyn Progress,
    ck: &Checkpointing,
) -> Result<RunReport, Error> {
    let (mut exec, resume) = Executor::new(cfg, RECORDS, ck, Some(path), progress)?;
    let model = build_model(cfg)?;
    let y0 = model.initial_state(&cfg.spec.initial);
    let mut writer = RunWriter::create(path, &model, &provenance(cfg, command_line))?;
    let time = &cfg.spec.time;
    let means = time.output == crate::config::spec::OutputMode::AnnualMean;
    if means {
        writer.annual_means()?;
    }
    let history = RefCell::new(History::default());
    let keep = ck.every.is_some();
    let mut stepper = Stepper::new(&model, time, &y0);
    let mut rec = Recording {
        inner: &mut writer,
        history: keep.then_some(&history),
    };
    let (done, last) = match &resume {
        Some(r) => {
            stepper.restore(r).map_err(Error::Restart)?;
            replay(r, model.len(), means, &mut rec)?
        }
        None => (0, y0.clone()),
    };
    let t0 = history.borrow().t.last().copied().unwrap_or(0.0);
    exec.begin((time.years.ceil() as u64).max(1), "model years", t0);
    let bar = exec.progress();
    let mut on_progress = |t: f64| bar.set(t as u64);
    let mut hooks = RunHooks {
        exec: &mut exec,
        history: &history,
    };
    let result = driver::run_from(time, stepper, done, &last, &mut rec, &mut on_progress, &mut hooks);
    bar.finish();
    exec.check_saved()?;
    let summary = match result {
        Ok(summary) => summary,
        Err(RunError::Solver(e)) => {
            writer.set_attr("failure", Attr::Str(e.to_string()))?;
            writer.finish(false)?;
            return Err(Error::Solver(e));
        }
        Err(e) => return Err(Error::from(e)),
    };
    writer.set_attr("steps", Attr::I64(summary.stats.steps as i64))?;
    writer.set_attr("rhs_evaluations", Attr::I64(summary.stats.rhs_evals as i64))?;
    if let Some(sig) = exec.stopped() {
        writer.set_attr(
            "interrupted_by",
            Attr::Str(crate::interrupt::signal_name(sig).into()),
        )?;
        writer.finish(false)?;
    } else {
        for (name, value) in super::diagnostics::run_attrs(cfg, &model, &y0, &writer.regression()) {
            writer.set_attr(name, value)?;
        }
        writer.finish(true)?;
    }
    exec.end(None, || format!("stopped at model time {} years", summary.t_end))?;
    Ok(RunReport {
        final_global_mean: model.global_mean(&summary.final_state),
        final_ice_edge_north: model.ice_edges_at(summary.t_end, &summary.final_state).0,
        summary,
    })
}

/// Replay the records of a restart file through the writer: `(records, last state)`.
fn replay(r: &Restart, n: usize, means: bool, rec: &mut Recording<'_, '_>) -> Result<(u64, Vec<f64>), Error> {
    let bad = |e: RestartError| Error::Restart(e);
    let (ts, ys) = (r.f64s("record.t").map_err(bad)?, r.f64s("record.y").map_err(bad)?);
    let done = r.u64("records").map_err(bad)?;
    if ts.len() as u64 != done || ys.len() != ts.len() * n || done == 0 {
        return Err(bad(
            r.bad("record arrays do not match the record count and the grid")
        ));
    }
    if means {
        // Mean records cannot be recomputed from states: their values were saved.
        let values = r.f64s("record.means").map_err(bad)?;
        let width = values.len() / ts.len();
        if width * ts.len() != values.len() {
            return Err(bad(r.bad("record.means does not match the record count")));
        }
        for ((t, y), v) in ts.iter().zip(ys.chunks_exact(n)).zip(values.chunks_exact(width)) {
            rec.inner.replay_mean(t - 1.0, *t, v, y)?;
            if let Some(h) = rec.history {
                let mut h = h.borrow_mut();
                h.t.push(*t);
                h.y.extend_from_slice(y);
                h.means.extend_from_slice(v);
            }
        }
    } else {
        for (t, y) in ts.iter().zip(ys.chunks_exact(n)) {
            rec.record(*t, y).map_err(|e| Error::from(RunError::Output(e)))?;
        }
    }
    Ok((done, ys[ys.len() - n..].to_vec()))
}
