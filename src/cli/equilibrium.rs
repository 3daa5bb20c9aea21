//! `icefold equilibrium CONFIG`: steady state, residual and stability spectrum.

use super::{ConfigArgs, OutputArgs};
use crate::error::Error;

/// Starting climate for Newton.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum Start {
    /// The config's `[initial]` state.
    Config,
    /// Present-day-like: warm equator, cold poles.
    Warm,
    /// A large ice cap.
    Cold,
    /// Far above freezing everywhere.
    IceFree,
    /// Far below freezing everywhere.
    Snowball,
}

/// Not yet wired (in progress on the tipping-point branch).
pub fn main(_args: &ConfigArgs, _out: &OutputArgs, _start: Start) -> Result<(), Error> {
    Err(Error::Other("icefold equilibrium: in progress".into()))
}
