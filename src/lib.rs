//! icefold: a latitude-resolved diffusive energy-balance climate model with ice-albedo
//! feedback.

pub mod plot;
