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

/// A validated control section (`[sweep]`, `[branches]`) with both ends given, or a config error
/// naming what is missing.
pub(crate) fn control_section<'a, T>(
    cfg: &Loaded,
    section: Option<&'a T>,
    name: &str,
    needs: &str,
    ends: [f64; 2],
) -> Result<&'a T, ConfigError> {
    let spec = section.ok_or_else(|| ConfigError::Key {
        path: cfg.source.clone(),
        key: name.into(),
        message: format!("icefold {name} needs a [{name}] section with {needs}"),
    })?;
    for (end, v) in ["from", "to"].iter().zip(ends) {
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
