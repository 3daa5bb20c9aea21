//! Steady states: damped Newton on `G(T) = 0` with the analytic Jacobian, a time-stepping
//! fallback, linear stability, quasi-static sweeps and pseudo-arclength continuation.

pub mod branches;
pub mod continuation;
pub mod control;
pub mod newton;
pub mod regimes;
pub mod settle;
pub mod stability;
pub mod sweep;
pub mod symmetry;

pub use newton::{newton, NewtonOptions, NewtonResult};
