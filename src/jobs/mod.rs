//! Whole jobs behind the commands (run, equilibrium, sweep, ...): model, solver and file put
//! together, reachable from tests without the command line.

pub mod branches;
pub mod diagnostics;
pub mod ensemble;
pub mod equilibrium;
pub mod pictures;
pub mod regimes;
pub mod run;
pub mod sweep;

use crate::config::{ConfigError, Loaded};
use crate::error::Error;
use crate::output::common::Completion;
use crate::output::Attr;

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
    /// How a job ended from its error (if any), whether it was stopped, and by which signal
    /// (SIGINT when unknown); an error outranks a stop.
    pub(crate) fn of(
        error: Option<&impl std::fmt::Display>,
        stopped: bool,
        stopped_by: Option<i32>,
    ) -> Ending {
        match (error, stopped) {
            (Some(e), _) => Ending::Failed(e.to_string()),
            (None, true) => Ending::Stopped(stopped_by.unwrap_or(libc::SIGINT)),
            (None, false) => Ending::Finished,
        }
    }

    /// The file's completion: finished, or partial with `reached` (how far the job got) and
    /// `failure` or `interrupted_by`.
    pub(crate) fn completion(&self, mut reached: Vec<(String, Attr)>) -> Completion {
        match self {
            Ending::Finished => return Completion::finished(),
            Ending::Failed(m) => reached.push(("failure".into(), Attr::Str(m.clone()))),
            Ending::Stopped(sig) => reached.push((
                "interrupted_by".into(),
                Attr::Str(crate::interrupt::signal_name(*sig).into()),
            )),
        }
        Completion::partial(reached)
    }
}

/// A validated control section (`[sweep]`, `[branches]`, `[regimes]`) with both ends (`ends`
/// of the section: from and to) given, or a config error naming what is missing.
pub(crate) fn control_section<'a, T>(
    cfg: &Loaded,
    section: Option<&'a T>,
    ends: impl Fn(&T) -> [f64; 2],
    name: &str,
    needs: &str,
) -> Result<&'a T, ConfigError> {
    let spec = section.ok_or_else(|| ConfigError::Key {
        path: cfg.source.clone(),
        key: name.into(),
        message: format!("icefold {name} needs a [{name}] section with {needs}"),
    })?;
    for (end, v) in ["from", "to"].iter().zip(ends(spec)) {
        if !v.is_finite() {
            return Err(ConfigError::Key {
                path: cfg.source.clone(),
                key: format!("{name}.{end}"),
                message: "missing: give the control value as a number".into(),
            });
        }
    }
    Ok(spec)
}

/// A rayon pool of `threads` workers, or `None` for rayon's default (all cores or
/// `RAYON_NUM_THREADS`).
pub(crate) fn worker_pool(threads: Option<usize>) -> Result<Option<rayon::ThreadPool>, Error> {
    threads
        .map(|t| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(t)
                .build()
                .map_err(|e| Error::Other(format!("cannot start {t} worker threads: {e}")))
        })
        .transpose()
}
