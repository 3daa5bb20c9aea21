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
