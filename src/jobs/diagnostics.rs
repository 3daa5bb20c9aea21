//! Sensitivity diagnostics of a configuration and of a transient run:
//!
//! - equilibrium climate sensitivity to doubled CO2: two Newton equilibria of the model with
//!   its constant (configured) drivers, the second with `k ln 2` more greenhouse forcing
//!   (Myhre et al. 1998: 3.71 W m-2 for k = 5.35), the second started from the first (where
//!   Newton stalls, the implicit scheme settles the state first and Newton polishes it);
//! - ice-edge sensitivity to the forcing: the change of the northern ice edge between the two
//!   equilibria per W m-2, and the local derivative from two more equilibria at +-0.05 W m-2;
//! - the effective feedback parameter of a transient run: the least-squares slope of the
//!   global-mean top-of-atmosphere imbalance on the global-mean temperature over the written
//!   records (Gregory et al. 2004, Geophys. Res. Lett. 31, L03205), with the intercept at the
//!   first record (the effective forcing relative to the starting state).
//!
//! Results go into file attributes (`write_*`) and are shown by `icefold inspect`.

use crate::ensemble::stats::{Fit, Ols};
use crate::equilibrium::settle::settle;
use crate::equilibrium::{newton, NewtonOptions};
use crate::model::{Model, Sunlight};
use crate::output::Attr;

/// Forcing step of the local ice-edge derivative, W m-2 (small against the 3.7 W m-2 of a
/// doubling, large against Newton's residual of 1e-9 W m-2).
const LOCAL_STEP_WM2: f64 = 0.05;

/// The response of the equilibrium to doubled CO2.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Sensitivity {
    /// Forcing of a doubling, W m-2.
    pub forcing_wm2: f64,
    /// Global-mean temperature of the base equilibrium, K.
    pub base_temperature_k: f64,
    /// Equilibrium climate sensitivity, K.
    pub ecs_k: f64,
    /// Equilibrium feedback parameter `-forcing / ecs`, W m-2 K-1 (negative: stable).
    pub feedback_wm2_per_k: f64,
    /// Northern ice edge of the base equilibrium, degrees.
    pub ice_edge_base_deg: f64,
    /// Northern ice edge with doubled CO2, degrees.
    pub ice_edge_doubled_deg: f64,
    /// Local derivative of the ice edge by the forcing at the base equilibrium, degrees per W m-2.
    pub ice_edge_per_wm2: f64,
}

/// Why a sensitivity could not be computed.
pub type NotComputed = String;

/// Equilibrium sensitivity to doubled CO2 of `model` (its constant drivers; a forcing history
/// is set aside), starting Newton from `start`. `log_coefficient` is `k` of `k ln(C/C0)`.
pub fn co2_doubling(
    model: &Model,
    start: &[f64],
    log_coefficient: f64,
    opts: NewtonOptions,
) -> Result<Sensitivity, NotComputed> {
    if matches!(model.sunlight, Sunlight::Seasonal(_)) {
        return Err(
            "not computed: with seasonal insolation the steady climate is a cycle, not a fixed point".into(),
        );
    }
    let mut base = model.clone();
    base.forcing = None;
    // Newton first; where it stalls (the step albedo's edge band can leave it without descent)
    // the dynamics settle the state (the implicit scheme, to 1e-4 K per year) and Newton
    // polishes it.
    let solve = |m: &Model, from: &[f64], what: &str| {
        newton(m, 0.0, from, opts).map(|r| r.state).or_else(|_| {
            let s = settle(m, from, 1e-4, 2e4, 1e-3)
                .map_err(|e| format!("not computed: settling to the {what} equilibrium: {e}"))?;
            newton(m, 0.0, &s.state, opts)
                .map(|r| r.state)
                .map_err(|e| format!("not computed: Newton's method for the {what} equilibrium: {e}"))
        })
    };
    let with_extra = |df: f64| {
        let mut m = base.clone();
        m.drivers.greenhouse_wm2 += df;
        m
    };
    let forcing = log_coefficient * std::f64::consts::LN_2;
    let t0 = solve(&base, start, "base")?;
    let t2 = solve(&with_extra(forcing), &t0, "doubled-CO2")?;
    let up = solve(&with_extra(LOCAL_STEP_WM2), &t0, "+0.05 W m-2")?;
    let down = solve(&with_extra(-LOCAL_STEP_WM2), &t0, "-0.05 W m-2")?;
    let (g0, g2) = (base.global_mean(&t0), base.global_mean(&t2));
    let ecs = g2 - g0;
    let edge = |s: &[f64]| base.ice_edges(s).0;
    Ok(Sensitivity {
        forcing_wm2: forcing,
        base_temperature_k: g0,
        ecs_k: ecs,
        feedback_wm2_per_k: if ecs != 0.0 { -forcing / ecs } else { f64::NAN },
        ice_edge_base_deg: edge(&t0),
        ice_edge_doubled_deg: edge(&t2),
        ice_edge_per_wm2: (edge(&up) - edge(&down)) / (2.0 * LOCAL_STEP_WM2),
    })
}

/// The Gregory regression of a run's records, if the global-mean temperature moved enough to
/// define a slope (standard deviation above 1e-6 K over at least 3 records).
pub fn gregory(ols: &Ols) -> Option<Fit> {
    ols.fit().filter(|f| f.x_sd > 1e-6)
}

/// Attributes describing a sensitivity result (or why it is missing).
pub fn sensitivity_attrs(s: &Result<Sensitivity, NotComputed>) -> Vec<(&'static str, Attr)> {
    match s {
        Ok(s) => vec![
            ("ecs_2xco2_k", Attr::F64(s.ecs_k)),
            ("forcing_2xco2_wm2", Attr::F64(s.forcing_wm2)),
            ("equilibrium_feedback_wm2_per_k", Attr::F64(s.feedback_wm2_per_k)),
            ("equilibrium_base_temperature_k", Attr::F64(s.base_temperature_k)),
            ("ice_edge_base_deg", Attr::F64(s.ice_edge_base_deg)),
            ("ice_edge_2xco2_deg", Attr::F64(s.ice_edge_doubled_deg)),
            ("ice_edge_sensitivity_deg_per_wm2", Attr::F64(s.ice_edge_per_wm2)),
            (
                "sensitivity_method",
                Attr::from("Newton equilibria with the configured constant drivers from the initial state, then +k ln 2 (doubled CO2) and +-0.05 W m-2 (local ice-edge derivative) from that equilibrium"),
            ),
        ],
        Err(why) => vec![("sensitivity_note", Attr::Str(why.clone()))],
    }
}

/// Attributes describing a Gregory regression (nothing if undefined).
pub fn gregory_attrs(fit: Option<Fit>) -> Vec<(&'static str, Attr)> {
    match fit {
        Some(f) => vec![
            ("gregory_feedback_wm2_per_k", Attr::F64(f.slope)),
            ("gregory_forcing_wm2", Attr::F64(f.intercept_at_first)),
            ("gregory_r2", Attr::F64(f.r2)),
            ("gregory_records", Attr::I64(f.n as i64)),
            (
                "gregory_method",
                Attr::from("least-squares slope of toa_imbalance on global_mean_temperature over the records (Gregory et al. 2004); forcing = fitted imbalance at the first record's temperature"),
            ),
        ],
        None => vec![],
    }
}

/// Every diagnostic attribute of a run file: the Gregory regression of its records and, with
/// `equilibrium.sensitivity = true`, the doubled-CO2 sensitivity of its configuration (a few
/// milliseconds: four equilibria, settled by time stepping where Newton stalls).
pub fn run_attrs(
    cfg: &crate::config::Loaded,
    model: &Model,
    start: &[f64],
    records: &Ols,
) -> Vec<(&'static str, Attr)> {
    let eq = &cfg.spec.equilibrium;
    let opts = NewtonOptions {
        tolerance_wm2: eq.tolerance_wm2,
        max_iterations: eq.max_iterations,
        ..NewtonOptions::default()
    };
    let mut out = gregory_attrs(gregory(records));
    if eq.sensitivity {
        let s = co2_doubling(model, start, cfg.spec.model.co2.2, opts);
        out.extend(sensitivity_attrs(&s));
    }
    out
}
