//! Heat capacity by band, J m-2 K-1: how much energy a band stores per kelvin, which sets the
//! time scales of the run (never the equilibria).
//!
//! One form today, [`mixed_layer`]: an ocean mixed layer (given as a value or as a depth of sea
//! water) and land, mixed by each band's land fraction.

pub mod mixed_layer;
