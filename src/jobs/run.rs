//! The `run` job: build the model, integrate, stream the trajectory to a file; with
//! checkpoints, resume and a clean stop on SIGINT/SIGTERM (shared helpers for the other jobs).

use crate::checkpoint::{self, Restart, RestartError};
use crate::cli::progress;
use crate::config::Loaded;
use crate::error::Error;
use crate::integrate::driver::ObserverError;
use crate::integrate::driver::{self, Boundary, Flow, RunError, RunSummary, Stepper};
use crate::integrate::Observer;
use crate::interrupt::StopFlag;
use crate::model::Model;
use crate::output::common::Provenance;
use crate::output::run_file::RunWriter;
use crate::output::Attr;
use std::cell::RefCell;
use std::path::{Path, PathBuf};

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

/// Checkpoint and resume settings of a job (`--checkpoint-every*`, `--resume`).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Checkpointing {
    /// Checkpoint interval: model years for `run`, steps for `sweep`, branches for
    /// `branches`, members for `ensemble`. `None`: no checkpoints.
    pub every: Option<f64>,
    /// Restart file to continue from.
    pub resume: Option<PathBuf>,
}

impl Checkpointing {
    /// Load the restart file to resume from, if any, checked against `kind` and the config.
    pub fn load(&self, kind: &str, cfg: &Loaded) -> Result<Option<Restart>, Error> {
        self.resume
            .as_ref()
            .map(|p| Restart::load(p, kind, &cfg.resolved_text()).map_err(restart_error))
            .transpose()
    }
}

/// A restart file that cannot be used is bad input (exit 2).
pub fn restart_error(e: RestartError) -> Error {
    Error::Usage(e.to_string())
}

/// The message of an interrupted job: how far it got, where the partial file is, and how to
/// continue when a checkpoint was written.
pub fn interrupted(signal: i32, reached: String, path: &Path, restart: Option<&Path>) -> Error {
    let mut reached = format!(
        "{reached} ({}); wrote the partial output {} with complete = 0",
        crate::interrupt::signal_name(signal),
        path.display()
    );
    if let Some(r) = restart {
        reached.push_str(&format!(
            "; to continue, repeat the command with --resume {}",
            r.display()
        ));
    }
    Error::Interrupted { signal, reached }
}

/// Remove the restart file of a finished job (nothing to resume any more).
pub fn remove_restart(path: &Path) {
    let _ = std::fs::remove_file(checkpoint::restart_path(path));
}

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

/// Checkpoints every `every` model years and stops on a signal.
struct RunHooks<'a> {
    every: Option<f64>,
    next_at: f64,
    restart: PathBuf,
    config_text: String,
    history: &'a RefCell<History>,
    stopped: Option<i32>,
    saved_at: Option<f64>,
}

impl RunHooks<'_> {
    fn save(&mut self, t: f64, records: u64, stepper: &Stepper<'_>) -> Result<(), RunError> {
        let mut r = Restart::new("run", &self.config_text);
        let h = self.history.borrow();
        r.put_u64("records", &[records]);
        r.put_f64("record.t", &h.t);
        r.put_f64("record.y", &h.y);
        if !h.means.is_empty() {
            r.put_f64("record.means", &h.means);
        }
        stepper.save(&mut r);
        r.save(&self.restart).map_err(|e| RunError::Output(Box::new(e)))?;
        self.saved_at = Some(t);
        Ok(())
    }
}

impl Boundary for RunHooks<'_> {
    fn at(&mut self, t: f64, records: u64, stepper: &Stepper<'_>) -> Result<Flow, RunError> {
        let stop = StopFlag.requested();
        if let Some(every) = self.every {
            if t >= self.next_at || stop.is_some() {
                self.save(t, records, stepper)?;
                self.next_at = ((t / every).floor() + 1.0) * every;
            }
        }
        if let Some(sig) = stop {
            self.stopped = Some(sig);
            return Ok(Flow::Stop);
        }
        Ok(Flow::Continue)
    }
}

/// Run and write the file at `path`. On a numerical failure the records computed so far are
/// kept in a complete, readable file marked `complete = 0` with the failure message, and the
/// error is returned (exit 3).
pub fn run_to_file(
    cfg: &Loaded,
    path: &Path,
    command_line: &str,
    show_progress: bool,
) -> Result<RunReport, Error> {
    run_job(cfg, path, command_line, show_progress, &Checkpointing::default())
}

/// [`run_to_file`] with checkpoints every `ck.every` model years into `<path>.restart` and/or
/// resuming from `ck.resume`. On SIGINT/SIGTERM the run stops after the next record and keeps
/// the records so far in a file marked `complete = 0` with `model_time_reached_years`
/// (with checkpoints, a last checkpoint is written there and the message says how to resume).
pub fn run_job(
    cfg: &Loaded,
    path: &Path,
    command_line: &str,
    show_progress: bool,
    ck: &Checkpointing,
) -> Result<RunReport, Error> {
    if let Some(e) = ck.every {
        if !(e > 0.0) || !e.is_finite() {
            return Err(Error::Usage(format!(
                "--checkpoint-every {e}: give a positive number of model years"
            )));
        }
    }
    let resume = ck.load("run", cfg)?;
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
    let (mut done, mut last) = (0, y0.clone());
    if let Some(r) = &resume {
        let n = model.len();
        let (ts, ys) = (
            r.f64s("record.t").map_err(restart_error)?,
            r.f64s("record.y").map_err(restart_error)?,
        );
        done = r.u64("records").map_err(restart_error)?;
        if ts.len() as u64 != done || ys.len() != ts.len() * n || done == 0 {
            return Err(restart_error(
                r.bad("record arrays do not match the record count and the grid"),
            ));
        }
        stepper.restore(r).map_err(restart_error)?;
        let mut rec = Recording {
            inner: &mut writer,
            history: keep.then_some(&history),
        };
        if means {
            // Mean records cannot be recomputed from states: their values were saved.
            let values = r.f64s("record.means").map_err(restart_error)?;
            let width = values.len() / ts.len();
            if width * ts.len() != values.len() {
                return Err(restart_error(
                    r.bad("record.means does not match the record count"),
                ));
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
        last = ys[ys.len() - n..].to_vec();
    }
    let pb = if show_progress {
        progress::bar(1, "model years")
    } else {
        indicatif::ProgressBar::hidden()
    };
    pb.set_length((time.years.ceil() as u64).max(1));
    let mut on_progress = |t: f64| pb.set_position(t as u64);
    let restart = checkpoint::restart_path(path);
    let mut hooks = RunHooks {
        every: ck.every,
        next_at: ck.every.map_or(f64::INFINITY, |e| {
            let t = history.borrow().t.last().copied().unwrap_or(0.0);
            if done == 0 {
                e
            } else {
                ((t / e).floor() + 1.0) * e
            }
        }),
        restart: restart.clone(),
        config_text: cfg.resolved_text(),
        history: &history,
        stopped: None,
        saved_at: None,
    };
    let mut obs = Recording {
        inner: &mut writer,
        history: keep.then_some(&history),
    };
    let result = driver::run_from(time, stepper, done, &last, &mut obs, &mut on_progress, &mut hooks);
    pb.finish_and_clear();
    let (stopped, saved) = (hooks.stopped, hooks.saved_at.is_some());
    match result {
        Ok(summary) => {
            writer.set_attr("steps", Attr::I64(summary.stats.steps as i64))?;
            writer.set_attr("rhs_evaluations", Attr::I64(summary.stats.rhs_evals as i64))?;
            if let Some(sig) = stopped {
                writer.set_attr(
                    "interrupted_by",
                    Attr::Str(crate::interrupt::signal_name(sig).into()),
                )?;
                writer.finish(false)?;
                return Err(interrupted(
                    sig,
                    format!("stopped at model time {} years", summary.t_end),
                    path,
                    saved.then_some(restart.as_path()),
                ));
            }
            for (name, value) in super::diagnostics::run_attrs(cfg, &model, &y0, &writer.regression()) {
                writer.set_attr(name, value)?;
            }
            writer.finish(true)?;
            if keep || resume.is_some() {
                remove_restart(path);
            }
            let final_global_mean = model.global_mean(&summary.final_state);
            let final_ice_edge_north = model.ice_edges_at(summary.t_end, &summary.final_state).0;
            Ok(RunReport {
                summary,
                final_global_mean,
                final_ice_edge_north,
            })
        }
        Err(RunError::Solver(e)) => {
            writer.set_attr("failure", Attr::Str(e.to_string()))?;
            writer.finish(false)?;
            Err(Error::Solver(e))
        }
        Err(e) => Err(Error::from(e)),
    }
}
