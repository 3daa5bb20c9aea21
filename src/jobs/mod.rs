//! Whole jobs behind the commands (run, equilibrium, sweep, ...): model, solver and file put
//! together, reachable from tests without the command line. The long jobs (run, sweep,
//! branches, ensemble, regimes) describe their unit of work; [`executor`] owns the loop around
//! it (checkpoints, stop, progress, partial file, typed errors).

pub mod branches;
pub mod diagnostics;
pub mod ensemble;
pub mod equilibrium;
pub mod executor;
pub mod merge;
pub mod pictures;
pub mod regimes;
pub mod run;
pub mod sweep;

pub use executor::{Checkpointing, Progress, Quiet};

use crate::config::{ConfigError, Loaded};
use crate::error::Error;

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
