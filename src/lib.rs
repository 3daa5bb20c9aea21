//! icefold: a latitude-resolved diffusive energy-balance climate model with ice-albedo
//! feedback, integrated through time, solved for equilibria, swept and continued through
//! tipping points, with netCDF-4/HDF5 output.
//!
//! Layers (see DEVELOPERS.md): `config` (TOML to typed specs) feeds `model` (grid plus one of
//! each parameterisation in `physics`: insolation, albedo, longwave, transport, heat
//! capacity; time-varying `drivers` from `forcing`), which `integrate` and `equilibrium`
//! solve; `jobs` put a model, a solver and an `output` file together for the commands in `cli`.
//! Physics modules are pure functions over slices and do no I/O.

// Numerical loops index several band arrays in step, as the discrete equations do.
#![allow(clippy::needless_range_loop)]
// `!(x > 0.0)` is used on purpose where NaN must fail a check.
#![allow(clippy::neg_cmp_op_on_partial_ord)]
#![allow(clippy::type_complexity, clippy::too_many_arguments)]

pub mod checkpoint;
pub mod cli;
pub mod config;
pub mod cpu;
pub mod csv;
pub mod drivers;
pub mod ensemble;
pub mod equilibrium;
pub mod error;
pub mod forcing;
pub mod grid;
pub mod integrate;
pub mod interpolation;
pub mod interrupt;
pub mod jobs;
pub mod linalg;
pub mod model;
pub mod output;
pub mod physics;
pub mod plot;
pub mod quadrature;
pub mod registry;
pub mod tally;
pub mod text;
