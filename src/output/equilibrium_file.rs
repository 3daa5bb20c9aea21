//! The file of `icefold equilibrium`: one steady state with its energy budget, residual and
//! stability spectrum (dimension `mode`), written whole.

use super::common::{attrs, create_file, mark_complete, write_latitude, write_provenance, Provenance};
use super::Attr;
use super::OutputError;
use crate::equilibrium::stability::Spectrum;
use crate::model::{Model, Workspace};
use std::path::Path;

/// A per-band variable: name, units, long name, standard name, values.
type BandColumn<'a> = (&'a str, &'a str, &'a str, Option<&'a str>, &'a [f64]);

/// What an equilibrium file holds besides the model.
#[derive(Debug, Clone, PartialEq)]
pub struct EquilibriumRecord<'a> {
    /// The steady state, K.
    pub state: &'a [f64],
    /// The full spectrum at it.
    pub spectrum: &'a Spectrum,
    /// How it was found, e.g. "newton" or "time stepping, then newton".
    pub solver: &'a str,
    /// Newton iterations (of the final Newton solve).
    pub newton_iterations: usize,
    /// Years of time stepping before Newton (0 if none).
    pub settle_years: f64,
    /// The starting climate's name.
    pub start: &'a str,
}

/// Write the equilibrium file at `path` (atomically, via a temporary file).
pub fn write_equilibrium(
    path: &Path,
    model: &Model,
    prov: &Provenance,
    rec: &EquilibriumRecord<'_>,
) -> Result<(), OutputError> {
    let n = model.len();
    let mut ws = Workspace::new(n);
    let b = model.budget(0.0, rec.state, &mut ws);
    let g = &model.grid;
    let net: Vec<f64> = (0..n)
        .map(|i| b.absorbed[i] - b.olr[i] + b.transport[i] + b.extra)
        .collect();
    let residual = net.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    let (north, south) = model.ice_edges(rec.state);
    let sp = rec.spectrum;
    let leading = sp.real.first().copied().unwrap_or(f64::NAN);

    let mut w = create_file(path, prov)?;
    write_provenance(&mut w, prov, "equilibrium")?;
    write_latitude(&mut w, g)?;
    w.add_variable_f64(
        "heat_capacity",
        &["lat"],
        &attrs("J m-2 K-1", "heat capacity per unit area", None),
    )?;
    w.write_f64("heat_capacity", &model.heat_capacity)?;
    let per_band: [BandColumn<'_>; 5] = [
        (
            "surface_temperature",
            "K",
            "equilibrium surface temperature",
            Some("surface_temperature"),
            rec.state,
        ),
        (
            "absorbed_sunlight",
            "W m-2",
            "absorbed sunlight (insolation times coalbedo)",
            None,
            &b.absorbed,
        ),
        (
            "outgoing_longwave",
            "W m-2",
            "outgoing longwave radiation net of greenhouse forcing",
            Some("toa_outgoing_longwave_flux"),
            &b.olr,
        ),
        (
            "transport_convergence",
            "W m-2",
            "convergence of meridional heat transport",
            None,
            &b.transport,
        ),
        (
            "net_heating",
            "W m-2",
            "net heating at the equilibrium (the residual of the steady equations)",
            None,
            &net,
        ),
    ];
    for (name, units, long, std, values) in per_band {
        w.add_variable_f64(name, &["lat"], &attrs(units, long, std))?;
        w.write_f64(name, values)?;
    }
    let mut scalars = vec![
        (
            "global_mean_temperature",
            "K",
            "area-weighted global-mean surface temperature",
            g.mean(rec.state),
        ),
        (
            "toa_imbalance",
            "W m-2",
            "global-mean net heating (zero at an equilibrium)",
            g.mean(&net),
        ),
        (
            "max_abs_net_heating",
            "W m-2",
            "largest |net heating| over the bands (the Newton residual)",
            residual,
        ),
        (
            "ice_edge_latitude_north",
            "degrees_north",
            "ice-edge latitude, northern hemisphere (90 ice free, 0 ice covered)",
            north,
        ),
    ];
    if let Some(s) = south {
        scalars.push((
            "ice_edge_latitude_south",
            "degrees_north",
            "ice-edge latitude, southern hemisphere (-90 ice free, 0 ice covered)",
            s,
        ));
    }
    for (name, units, long, v) in scalars {
        w.add_variable_f64(name, &[], &attrs(units, long, None))?;
        w.write_f64(name, &[v])?;
    }
    w.add_dimension("mode", sp.real.len())?;
    let mut ev_attrs = attrs(
        "year-1",
        "eigenvalue of the linearised dynamics (real part), largest first",
        None,
    );
    ev_attrs.push((
        "comment",
        Attr::from("perturbations grow as exp(eigenvalue * t): negative decays, positive grows"),
    ));
    w.add_variable_f64("eigenvalue", &["mode"], &ev_attrs)?;
    w.write_f64("eigenvalue", &sp.real)?;
    w.add_variable_f64(
        "eigenvalue_imag",
        &["mode"],
        &attrs(
            "year-1",
            "eigenvalue of the linearised dynamics (imaginary part)",
            None,
        ),
    )?;
    w.write_f64("eigenvalue_imag", &sp.imag)?;
    let efold: Vec<f64> = sp.real.iter().map(|l| 1.0 / l.abs()).collect();
    let mut ef_attrs = attrs(
        "year",
        "e-folding time of the mode, 1/|real part of the eigenvalue|",
        None,
    );
    ef_attrs.push((
        "comment",
        Attr::from("decay time for a negative eigenvalue, growth time for a positive one"),
    ));
    w.add_variable_f64("efolding_time", &["mode"], &ef_attrs)?;
    w.write_f64("efolding_time", &efold)?;

    w.set_attr_f64("leading_eigenvalue", leading)?;
    w.set_attr_f64("leading_efolding_time_years", 1.0 / leading.abs())?;
    w.set_attr_str("stability", if leading < 0.0 { "stable" } else { "unstable" })?;
    w.set_attr_str("spectrum_method", sp.method.name())?;
    w.set_attr_str("spectrum_method_description", sp.method.describe())?;
    w.set_attr_str("solver", rec.solver)?;
    w.set_attr_i64("newton_iterations", rec.newton_iterations as i64)?;
    w.set_attr_f64("settle_years", rec.settle_years)?;
    w.set_attr_f64("residual_wm2", residual)?;
    w.set_attr_str("start", rec.start)?;
    mark_complete(&mut w, true)?;
    w.finish()
}
