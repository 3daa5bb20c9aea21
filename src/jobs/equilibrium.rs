//! The `equilibrium` job: a steady state by damped Newton (time stepping first when Newton does
//! not converge from the start), its stability spectrum, and the file. Also the checks shared
//! by the steady-state jobs (sweep, branches): constant drivers and a control key that acts.

use super::run::{build_model, provenance};
use crate::config::{ConfigError, Loaded};
use crate::equilibrium::control::Controlled;
use crate::equilibrium::settle::settle_to_equilibrium;
use crate::equilibrium::stability::{spectrum, Spectrum};
use crate::equilibrium::{newton, NewtonOptions};
use crate::error::Error;
use crate::integrate::SolverError;
use crate::model::Model;
use crate::output::equilibrium_file::{write_equilibrium, EquilibriumRecord};
use std::path::Path;

/// Settling before Newton is retried: stop when the largest |dT/dt| is below this, K per year.
const SETTLE_RATE: f64 = 1e-6;
/// ... or after this many model years.
const SETTLE_YEARS: f64 = 1e5;
/// Local error per step of the settling integration, K.
const SETTLE_TOLERANCE: f64 = 1e-3;

/// Where Newton starts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StartClimate {
    /// The config's `[initial]` state.
    Config,
    /// Present-day-like: 15 C mean, poles 45 K colder than the equator (a P2 shape).
    Warm,
    /// A large ice cap: -15 C mean with the same P2 shape, steeper.
    Cold,
    /// 60 C everywhere.
    IceFree,
    /// -80 C everywhere.
    Snowball,
    /// The warm start with a P1 part of -15 K: colder north (a cap in the north only on a
    /// globe near the small-cap range).
    NorthCap,
    /// Its mirror image: +15 K P1 part.
    SouthCap,
}

impl StartClimate {
    /// Name for files and messages.
    pub fn name(self) -> &'static str {
        match self {
            StartClimate::Config => "config",
            StartClimate::Warm => "warm",
            StartClimate::Cold => "cold",
            StartClimate::IceFree => "ice-free",
            StartClimate::Snowball => "snowball",
            StartClimate::NorthCap => "north-cap",
            StartClimate::SouthCap => "south-cap",
        }
    }

    /// The starting temperatures, K.
    pub fn state(self, model: &Model, cfg: &Loaded) -> Vec<f64> {
        let (mean_c, p2k, p1k) = match self {
            StartClimate::Config => return model.initial_state(&cfg.spec.initial),
            StartClimate::Warm => (15.0, -30.0, 0.0),
            StartClimate::Cold => (-15.0, -40.0, 0.0),
            StartClimate::IceFree => (60.0, 0.0, 0.0),
            StartClimate::Snowball => (-80.0, 0.0, 0.0),
            StartClimate::NorthCap => (15.0, -30.0, -15.0),
            StartClimate::SouthCap => (15.0, -30.0, 15.0),
        };
        model
            .grid
            .x_centres
            .iter()
            .map(|&x| mean_c + crate::physics::longwave::ZERO_CELSIUS + p1k * x + p2k * crate::grid::p2(x))
            .collect()
    }
}

/// Steady states need constant drivers: no seasonal insolation, no forcing history.
pub fn require_steady(cfg: &Loaded) -> Result<(), ConfigError> {
    let model = &cfg.spec.model;
    if matches!(
        model.insolation.form,
        crate::config::spec::InsolationForm::Seasonal
    ) {
        return Err(ConfigError::Range {
            path: cfg.source.clone(),
            key: "insolation.kind".into(),
            value: "\"seasonal\"".into(),
            allowed: "equilibria, sweeps and branches need time-independent insolation: use \"legendre\" or \"annual_mean\"".into(),
        });
    }
    if model.forcing.is_some() {
        return Err(ConfigError::Key {
            path: cfg.source.clone(),
            key: "forcing.file".into(),
            message: "equilibria, sweeps and branches need constant drivers; remove the forcing history (it is for icefold run) or vary a key with [sweep]/[branches]".into(),
        });
    }
    Ok(())
}

/// The model family for the control named by `section_key` (e.g. `sweep.control`), after
/// checking that the key changes the model and that both range ends are allowed values.
pub fn family(cfg: &Loaded, section_key: &str, key: &str, ends: [f64; 2]) -> Result<Controlled, ConfigError> {
    let fam = Controlled::new(cfg, key).map_err(|e| match e {
        ConfigError::Key { path, message, .. } => ConfigError::Key {
            path,
            key: section_key.to_string(),
            message: format!("`{key}` is {message}"),
        },
        other => other,
    })?;
    for p in ends {
        fam.model_at(p)?;
    }
    // Does the key act? Compare the heating for two values at a probe state warm at the
    // equator and ice-covered at the poles (15 C - 30 K P2(x)), so that keys of the transport
    // and of both albedo regions show even when the configured initial state is uniform.
    let p0 = fam.base_value();
    let p1 = if p0 == 0.0 { 1e-3 } else { p0 * (1.0 + 1e-3) };
    let (m0, m1) = (fam.model_at(p0)?, fam.model_at(p1)?);
    let t: Vec<f64> = m0
        .grid
        .x_centres
        .iter()
        .map(|&x| crate::physics::longwave::ZERO_CELSIUS + 15.0 - 30.0 * crate::grid::p2(x))
        .collect();
    let n = m0.len();
    let mut ws = crate::model::Workspace::new(n);
    let (mut g0, mut g1) = (vec![0.0; n], vec![0.0; n]);
    m0.heating(0.0, &t, &mut ws, &mut g0);
    m1.heating(0.0, &t, &mut ws, &mut g1);
    if g0 == g1 {
        return Err(ConfigError::Key {
            path: cfg.source.clone(),
            key: section_key.to_string(),
            message: format!(
                "`{key}` has no effect on this configuration (e.g. albedo.width_k with the step albedo, or transport.relaxation_rate with diffusive transport): choose a key the model uses"
            ),
        });
    }
    Ok(fam)
}

/// A solved steady state.
#[derive(Debug, Clone, PartialEq)]
pub struct Solved {
    /// Temperatures, K.
    pub state: Vec<f64>,
    /// Largest |G_i|, W m-2.
    pub residual_wm2: f64,
    /// Newton iterations of the final solve.
    pub iterations: usize,
    /// Years of time stepping before it (0 if Newton converged from the start).
    pub settle_years: f64,
    /// "newton" or "time stepping, then newton".
    pub solver: &'static str,
}

/// Newton from `start`; if it fails, settle by time stepping and polish with Newton.
pub fn solve(model: &Model, start: &[f64], cfg: &Loaded) -> Result<Solved, SolverError> {
    let eq = &cfg.spec.equilibrium;
    let opts = NewtonOptions {
        tolerance_wm2: eq.tolerance_wm2,
        max_iterations: eq.max_iterations,
        max_change: 20.0,
    };
    if let Ok(r) = newton(model, 0.0, start, opts) {
        return Ok(Solved {
            state: r.state,
            residual_wm2: r.residual_wm2,
            iterations: r.iterations,
            settle_years: 0.0,
            solver: "newton",
        });
    }
    let s = settle_to_equilibrium(
        model,
        start,
        SETTLE_RATE,
        SETTLE_YEARS,
        SETTLE_TOLERANCE,
        eq.tolerance_wm2,
    )?;
    let r = newton(model, 0.0, &s.state, opts).map_err(|e| SolverError::NoConvergence {
        what: "the equilibrium".into(),
        detail: format!(
            "Newton failed from the start and again after {:.1} years of time stepping (largest |dT/dt| {:.3e} K/yr): {e}",
            s.years, s.max_rate
        ),
    })?;
    Ok(Solved {
        state: r.state,
        residual_wm2: r.residual_wm2,
        iterations: r.iterations,
        settle_years: s.years,
        solver: "time stepping, then newton",
    })
}

/// What the job reports.
#[derive(Debug, Clone, PartialEq)]
pub struct EquilibriumReport {
    /// The steady state.
    pub solved: Solved,
    /// Its spectrum.
    pub spectrum: Spectrum,
    /// Global mean, K.
    pub global_mean: f64,
    /// Ice edge north, degrees.
    pub ice_edge_north: f64,
    /// Ice edge south (globe only), degrees north.
    pub ice_edge_south: Option<f64>,
}

/// Solve and write the file at `path`.
pub fn equilibrium_to_file(
    cfg: &Loaded,
    path: &Path,
    command_line: &str,
    start: StartClimate,
) -> Result<EquilibriumReport, Error> {
    require_steady(cfg)?;
    let model = build_model(cfg)?;
    let y0 = start.state(&model, cfg);
    let solved = solve(&model, &y0, cfg)?;
    let sp = spectrum(&model, 0.0, &solved.state);
    let rec = EquilibriumRecord {
        state: &solved.state,
        spectrum: &sp,
        solver: solved.solver,
        newton_iterations: solved.iterations,
        settle_years: solved.settle_years,
        start: start.name(),
    };
    if let Some(signal) = crate::interrupt::StopFlag.requested() {
        // One solve has no partial result worth a file: nothing is written.
        return Err(Error::Interrupted {
            signal,
            reached: format!(
                "stopped at the end of the solve ({}); no file written",
                crate::interrupt::signal_name(signal)
            ),
        });
    }
    write_equilibrium(path, &model, &provenance(cfg, command_line), &rec)?;
    Ok(EquilibriumReport {
        global_mean: model.global_mean(&solved.state),
        ice_edge_north: model.ice_edges(&solved.state).0,
        ice_edge_south: model.ice_edges(&solved.state).1,
        solved,
        spectrum: sp,
    })
}
