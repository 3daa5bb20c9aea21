//! icefold: a latitude-resolved diffusive energy-balance climate model with ice-albedo
//! feedback.

pub mod albedo;
pub mod config;
pub mod grid;
pub mod insolation;
pub mod linalg;
pub mod longwave;
pub mod model;
pub mod quadrature;
pub mod transport;
pub mod integrate;
pub mod equilibrium;
pub mod cli;
pub mod error;
pub mod jobs;
pub mod output;
pub mod forcing;
