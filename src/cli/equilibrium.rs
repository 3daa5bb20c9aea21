//! `icefold equilibrium CONFIG`: steady state, residual and stability spectrum.

use super::{ConfigArgs, OutputArgs};
use crate::error::Error;
use crate::jobs::equilibrium::{equilibrium_to_file, StartClimate};

/// Starting climate for Newton.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum Start {
    /// The config's `[initial]` state (an asymmetric start on a globe: `initial.temperature_p1_k`).
    Config,
    /// Present-day-like: warm equator, cold poles.
    Warm,
    /// A large ice cap.
    Cold,
    /// Far above freezing everywhere.
    IceFree,
    /// Far below freezing everywhere.
    Snowball,
    /// Asymmetric (globe): a polar cap in the north only, the south warmer.
    NorthCap,
    /// Asymmetric (globe): a polar cap in the south only, the north warmer.
    SouthCap,
}

impl From<Start> for StartClimate {
    fn from(s: Start) -> StartClimate {
        match s {
            Start::Config => StartClimate::Config,
            Start::Warm => StartClimate::Warm,
            Start::Cold => StartClimate::Cold,
            Start::IceFree => StartClimate::IceFree,
            Start::Snowball => StartClimate::Snowball,
            Start::NorthCap => StartClimate::NorthCap,
            Start::SouthCap => StartClimate::SouthCap,
        }
    }
}

/// Solve for the steady state and write it with its spectrum.
pub fn main(args: &ConfigArgs, out: &OutputArgs, start: Start) -> Result<(), Error> {
    let cfg = super::load(args)?;
    let path = super::output_path(out, &args.config, "equilibrium")?;
    let r = equilibrium_to_file(&cfg, &path, &super::command_line(), start.into())?;
    let lead = r.spectrum.real.first().copied().unwrap_or(f64::NAN);
    info!(
        "icefold: wrote {} ({}; residual {:.2e} W m-2); global mean {:.3} K, ice edge {:.2} degrees N{}, leading eigenvalue {:.4} per year ({}, {} spectrum)",
        path.display(),
        r.solved.solver,
        r.solved.residual_wm2,
        r.global_mean,
        r.ice_edge_north,
        r.ice_edge_south
            .map(|s| format!(" and {:.2} degrees S", -s))
            .unwrap_or_default(),
        lead,
        if lead < 0.0 { "stable" } else { "unstable" },
        r.spectrum.method.name()
    );
    Ok(())
}
