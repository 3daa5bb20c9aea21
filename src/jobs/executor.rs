//! The loop around a job's units of work (a run's records, sweep steps, continuation seeds,
//! ensemble members, regime-map rows), the same for every job:
//!
//! - the checkpoint cadence (`--checkpoint-every*`): a checkpoint when the count of finished
//!   units reaches the next multiple of the cadence, and one more when a stop is requested;
//! - the stop flag ([`crate::interrupt`]): checked after each unit, the loop then stops;
//! - progress through the [`Progress`] trait (the command line draws a bar; the library draws
//!   nothing and never imports the CLI);
//! - the ending: the file is written complete, or partial (`complete = 0` with how far the job
//!   got and `failure` or `interrupted_by`), the restart file is removed after success, and a
//!   stop becomes [`Error::Interrupted`] with the resume hint;
//! - typed errors: an unusable restart file is [`Error::Restart`] (exit 2), a checkpoint that
//!   cannot be written is [`Error::Checkpoint`] (exit 1, and no output file is written).
//!
//! A job describes its unit of work (what one unit computes, what a checkpoint holds) and
//! calls [`Executor::after`] after each unit or chunk of units, then [`Executor::finish`].

use crate::checkpoint::{self, Restart};
use crate::config::Loaded;
use crate::error::Error;
use crate::interrupt::{signal_name, StopFlag};
use crate::output::common::Completion;
use crate::output::Attr;
use std::path::{Path, PathBuf};

/// Where a job reports how far it got. Methods may be called from several worker threads.
pub trait Progress: Sync {
    /// Work of `total` units called `unit` ("sweep steps") begins.
    fn start(&self, _total: u64, _unit: &str) {}
    /// `done` units are finished (a resumed job starts above 0).
    fn set(&self, _done: u64) {}
    /// `n` more units are finished.
    fn add(&self, _n: u64) {}
    /// The work is over (finished, stopped or failed).
    fn finish(&self) {}
}

/// No progress report (tests, the Python package, batch use).
#[derive(Debug, Clone, Copy, Default)]
pub struct Quiet;

impl Progress for Quiet {}

/// Checkpoint and resume settings of a job (`--checkpoint-every*`, `--resume`).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Checkpointing {
    /// Checkpoint interval: model years for `run`, steps for `sweep`, seeds for `branches`,
    /// members for `ensemble`, rows for `regimes`. `None`: no checkpoints.
    pub every: Option<f64>,
    /// Restart file to continue from.
    pub resume: Option<PathBuf>,
}

/// A job's unit of work, as its restart files and checkpoint option name it.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Unit {
    /// Restart-file kind (the command: "run", "sweep", ...).
    pub kind: &'static str,
    /// The command-line option of the cadence.
    pub option: &'static str,
    /// What the cadence counts, for its message ("steps"); `None`: model years (any positive
    /// number, not only whole ones).
    pub counts: Option<&'static str>,
}

/// How a job that may stop early ended: the attributes its file gets besides how far it got.
pub(crate) enum Ending {
    /// Finished: `complete = 1`.
    Finished,
    /// A numerical failure (its message goes into `failure`).
    Failed(String),
    /// Stopped by this signal (its name goes into `interrupted_by`).
    Stopped(i32),
}

impl Ending {
    /// The file's completion: finished, or partial with `reached` (how far the job got) and
    /// `failure` or `interrupted_by`.
    pub(crate) fn completion(&self, mut reached: Vec<(String, Attr)>) -> Completion {
        match self {
            Ending::Finished => return Completion::finished(),
            Ending::Failed(m) => reached.push(("failure".into(), Attr::Str(m.clone()))),
            Ending::Stopped(sig) => {
                reached.push(("interrupted_by".into(), Attr::Str(signal_name(*sig).into())))
            }
        }
        Completion::partial(reached)
    }
}

/// A job's failure: the text its partial file records, and the error it returns.
pub(crate) type Failure = (String, Error);

/// The loop state of one job: cadence, stop, progress and the restart file.
pub(crate) struct Executor<'p> {
    unit: Unit,
    every: Option<f64>,
    resuming: bool,
    /// Output file (`None`: a job computed in memory, without checkpoints).
    output: Option<PathBuf>,
    config_text: String,
    next_at: f64,
    progress: &'p dyn Progress,
    saved: bool,
    stopped: Option<i32>,
    save_error: Option<checkpoint::RestartError>,
}

impl<'p> Executor<'p> {
    /// The loop of a job writing `output` (or computed in memory: `None`, then `ck` must be
    /// the default), with the restart file to resume from when `ck.resume` names one (checked
    /// against the unit's kind and the config). A bad cadence is bad input (exit 2).
    pub(crate) fn new(
        cfg: &Loaded,
        unit: Unit,
        ck: &Checkpointing,
        output: Option<&Path>,
        progress: &'p dyn Progress,
    ) -> Result<(Self, Option<Restart>), Error> {
        if let Some(e) = ck.every {
            let bad = match unit.counts {
                None => !(e > 0.0) || !e.is_finite(),
                Some(_) => !(e >= 1.0) || e.fract() != 0.0,
            };
            if bad {
                return Err(Error::Usage(match unit.counts {
                    None => format!("{} {e}: give a positive number of model years", unit.option),
                    Some(what) => format!("{} {e}: give a whole number of {what}, at least 1", unit.option),
                }));
            }
        }
        let config_text = cfg.resolved_text();
        let resume = ck
            .resume
            .as_ref()
            .map(|p| Restart::load(p, unit.kind, &config_text).map_err(Error::Restart))
            .transpose()?;
        let exec = Executor {
            unit,
            every: ck.every.filter(|_| output.is_some()),
            resuming: ck.resume.is_some(),
            output: output.map(Path::to_path_buf),
            config_text,
            next_at: ck.every.unwrap_or(f64::INFINITY),
            progress,
            saved: false,
            stopped: None,
            save_error: None,
        };
        Ok((exec, resume))
    }

    /// The loop of a job computed in memory: no checkpoints, no file.
    pub(crate) fn in_memory(cfg: &Loaded, unit: Unit, progress: &'p dyn Progress) -> Result<Self, Error> {
        Ok(Self::new(cfg, unit, &Checkpointing::default(), None, progress)?.0)
    }

    /// The progress report.
    pub(crate) fn progress(&self) -> &'p dyn Progress {
        self.progress
    }

    /// Begin the progress report over `total` units, `done` of them finished (resumed), and
    /// count the cadence from `done` (the next checkpoint at the next multiple above it).
    pub(crate) fn begin(&mut self, total: u64, what: &str, done: f64) {
        self.progress.start(total, what);
        self.progress.set(done as u64);
        self.count_from(done);
    }

    /// Count the cadence from `done` finished units (without a progress report).
    pub(crate) fn count_from(&mut self, done: f64) {
        if let Some(e) = self.every {
            self.next_at = ((done / e).floor() + 1.0) * e;
        }
    }

    /// Units per chunk of parallel work out of `total`: the cadence, so that each chunk ends
    /// at a checkpoint, or all of them without checkpoints.
    pub(crate) fn chunk(&self, total: usize) -> usize {
        self.every.map_or(total.max(1), |e| e as usize)
    }

    /// Whether a stop has been requested (for parallel units not yet started).
    pub(crate) fn stop_requested() -> bool {
        StopFlag.requested().is_some()
    }

    /// After a finished unit (or chunk of units), `done` of them finished so far (`finished`:
    /// all of them, nothing to checkpoint or stop). Writes a checkpoint filled by `fill` when
    /// one is due or a stop is requested. Returns whether the loop must stop: on a stop request
    /// or a checkpoint that could not be written.
    pub(crate) fn after(&mut self, done: f64, finished: bool, fill: impl FnOnce(&mut Restart)) -> bool {
        if finished {
            return false;
        }
        let sig = StopFlag.requested();
        if let (Some(e), Some(out)) = (self.every, &self.output) {
            if done >= self.next_at || sig.is_some() {
                let mut r = Restart::new(self.unit.kind, &self.config_text);
                fill(&mut r);
                if let Err(err) = r.save(&checkpoint::restart_path(out)) {
                    self.save_error = Some(err);
                    return true;
                }
                self.saved = true;
                self.next_at = ((done / e).floor() + 1.0) * e;
            }
        }
        self.stopped = sig;
        sig.is_some()
    }

    /// The signal that stopped the loop, if any.
    pub(crate) fn stopped(&self) -> Option<i32> {
        self.stopped
    }

    /// A checkpoint that could not be written ends the job with no output file.
    pub(crate) fn check_saved(&mut self) -> Result<(), Error> {
        match self.save_error.take() {
            Some(e) => Err(Error::Checkpoint(e)),
            None => Ok(()),
        }
    }

    /// End a job that writes a file: `write` it with its completion (`reached`: how far the
    /// job got, for a partial file), then return the failure, the interruption (`how_far`
    /// names where it stopped), or success (the restart file removed).
    pub(crate) fn finish(
        mut self,
        failure: Option<Failure>,
        reached: Vec<(String, Attr)>,
        how_far: impl FnOnce() -> String,
        write: impl FnOnce(&Completion) -> Result<(), Error>,
    ) -> Result<(), Error> {
        self.check_saved()?;
        let ending = match (&failure, self.stopped) {
            (Some((text, _)), _) => Ending::Failed(text.clone()),
            (None, Some(sig)) => Ending::Stopped(sig),
            (None, None) => Ending::Finished,
        };
        write(&ending.completion(reached))?;
        self.end(failure.map(|(_, e)| e), how_far)
    }

    /// The result after the file is written (by the job itself, e.g. a run's streamed file):
    /// the failure, the interruption, or success (the restart file removed).
    pub(crate) fn end(self, failure: Option<Error>, how_far: impl FnOnce() -> String) -> Result<(), Error> {
        if let Some(e) = failure {
            return Err(e);
        }
        let Some(out) = &self.output else {
            return match self.stopped {
                Some(signal) => Err(Error::Interrupted {
                    signal,
                    reached: format!("{} ({}); no file written", how_far(), signal_name(signal)),
                }),
                None => Ok(()),
            };
        };
        if let Some(sig) = self.stopped {
            let restart = checkpoint::restart_path(out);
            return Err(interrupted(
                sig,
                how_far(),
                out,
                self.saved.then_some(restart.as_path()),
            ));
        }
        if self.every.is_some() || self.resuming {
            let _ = std::fs::remove_file(checkpoint::restart_path(out));
        }
        Ok(())
    }
}

/// The message of an interrupted job: how far it got, where the partial file is, and how to
/// continue when a checkpoint was written.
pub fn interrupted(signal: i32, reached: String, path: &Path, restart: Option<&Path>) -> Error {
    let mut reached = format!(
        "{reached} ({}); wrote the partial output {} with complete = 0",
        signal_name(signal),
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

#[cfg(test)]
mod tests {
    use super::*;

    fn loaded() -> Loaded {
        crate::config::load_str("[time]\nyears = 1.0\n", "test.toml", Path::new("."), &[]).unwrap()
    }

    const STEPS: Unit = Unit {
        kind: "sweep",
        option: "--checkpoint-every-steps",
        counts: Some("steps"),
    };

    #[test]
    fn a_bad_cadence_is_bad_input_naming_the_option() {
        let ck = Checkpointing {
            every: Some(2.5),
            resume: None,
        };
        let e = Executor::new(&loaded(), STEPS, &ck, Some(Path::new("x.nc")), &Quiet)
            .err()
            .unwrap();
        assert_eq!(e.exit_code(), 2);
        assert_eq!(
            e.to_string(),
            "--checkpoint-every-steps 2.5: give a whole number of steps, at least 1"
        );
    }

    #[test]
    fn checkpoints_fall_on_multiples_of_the_cadence_counted_from_a_resume() {
        let dir = std::env::temp_dir().join(format!("icefold-exec-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let out = dir.join("s.nc");
        let ck = Checkpointing {
            every: Some(3.0),
            resume: None,
        };
        let (mut ex, _) = Executor::new(&loaded(), STEPS, &ck, Some(&out), &Quiet).unwrap();
        ex.begin(10, "steps", 4.0);
        let mut saved_at = Vec::new();
        for done in 5..=10 {
            let mut hit = false;
            assert!(!ex.after(done as f64, done == 10, |_| hit = true));
            if hit {
                saved_at.push(done);
            }
        }
        assert_eq!(saved_at, [6, 9]);
        assert!(checkpoint::restart_path(&out).exists());
        ex.end(None, String::new).unwrap();
        assert!(!checkpoint::restart_path(&out).exists(), "kept after success");
        let _ = std::fs::remove_dir_all(&dir);
    }
}
