//! Whole jobs behind the commands (run, equilibrium, sweep, ...): model, solver and file put
//! together, reachable from tests without the command line.

pub mod branches;
pub mod diagnostics;
pub mod ensemble;
pub mod equilibrium;
pub mod pictures;
pub mod run;
pub mod sweep;
