//! Steady states: damped Newton on `G(T) = 0` with the analytic Jacobian, a time-stepping
//! fallback, linear stability, sweeps and continuation.

pub mod newton;

pub use newton::{newton, NewtonOptions, NewtonResult};
