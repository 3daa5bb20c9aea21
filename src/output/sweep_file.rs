//! The file of `icefold sweep`: every step of the two-way sweep (dimension `step`), the refined
//! tipping points (dimension `tipping`) and the hysteresis intervals (dimension `interval`),
//! with the fixed names of DESIGN section 4.

use super::common::{
    apply_completion, attrs, create_file, write_latitude, write_provenance, Completion, Provenance,
};
use super::Attr;
use super::OutputError;
use crate::config::spec::SweepSpec;
use crate::equilibrium::control::control_units;
use crate::equilibrium::sweep::{Reached, SweepResult};
use crate::model::Model;
use std::path::Path;

/// An integer variable: name, attributes, values.
type IntColumn<'a> = (&'a str, Vec<(&'a str, Attr)>, Vec<i32>);

/// Write the sweep file at `path` (atomically, via a temporary file).
pub fn write_sweep(
    path: &Path,
    model: &Model,
    prov: &Provenance,
    spec: &SweepSpec,
    res: &SweepResult,
) -> Result<(), OutputError> {
    write_sweep_with(path, model, prov, spec, res, &Completion::finished())
}

/// [`write_sweep`] of a finished or partial sweep (`completion` says which).
pub fn write_sweep_with(
    path: &Path,
    model: &Model,
    prov: &Provenance,
    spec: &SweepSpec,
    res: &SweepResult,
    completion: &Completion,
) -> Result<(), OutputError> {
    let units = control_units(&spec.control);
    let control_long = format!("control value ({})", spec.control);
    let mut w = create_file(path, prov)?;
    write_provenance(&mut w, prov, "sweep")?;
    write_latitude(&mut w, &model.grid)?;
    let steps = &res.steps;
    w.add_dimension("step", steps.len())?;
    let col = |f: &dyn Fn(usize) -> f64| -> Vec<f64> { (0..steps.len()).map(f).collect() };
    let f64_vars: Vec<(&str, String, String, Vec<f64>)> = vec![
        (
            "control",
            units.into(),
            control_long.clone(),
            col(&|k| steps[k].control),
        ),
        (
            "global_mean_temperature",
            "K".into(),
            "area-weighted global-mean surface temperature".into(),
            col(&|k| steps[k].global_mean),
        ),
        (
            "ice_edge_latitude_north",
            "degrees_north".into(),
            "ice-edge latitude, northern hemisphere (90 ice free, 0 ice covered)".into(),
            col(&|k| steps[k].ice_edge),
        ),
        (
            "leading_eigenvalue",
            "year-1".into(),
            "leading eigenvalue of the linearised dynamics at the step's state".into(),
            col(&|k| steps[k].leading),
        ),
        (
            "settle_years",
            "year".into(),
            "model years of time stepping at this step (0: followed the branch by Newton)".into(),
            col(&|k| steps[k].settle_years),
        ),
        (
            "max_rate",
            "K year-1".into(),
            "largest |dT/dt| of the final state (0 for an exact equilibrium)".into(),
            col(&|k| steps[k].max_rate),
        ),
    ];
    for (name, u, long, values) in &f64_vars {
        let mut a = attrs(u, long, None);
        if *name == "control" {
            // How the values are spaced ("linear" or "log"), for axes of pictures.
            a.push(("spacing", Attr::from(spec.spacing.name())));
        }
        w.add_variable_f64(name, &["step"], &a)?;
        w.write_f64(name, values)?;
    }
    if steps.iter().any(|s| s.ice_edge_south.is_some()) {
        w.add_variable_f64(
            "ice_edge_latitude_south",
            &["step"],
            &attrs(
                "degrees_north",
                "ice-edge latitude, southern hemisphere (-90 ice free, 0 ice covered)",
                None,
            ),
        )?;
        w.write_f64(
            "ice_edge_latitude_south",
            &col(&|k| steps[k].ice_edge_south.unwrap_or(f64::NAN)),
        )?;
    }
    let flag = |long: &str, meanings: &str| {
        let mut a = attrs("1", long, None);
        a.push(("flag_meanings", Attr::from(meanings)));
        a
    };
    let i32_vars: Vec<IntColumn<'_>> = vec![
        (
            "direction",
            attrs(
                "1",
                "direction of the leg: +1 control increasing (up), -1 decreasing (down)",
                None,
            ),
            steps.iter().map(|s| s.direction).collect(),
        ),
        (
            "stable",
            flag("1 if the step's state is linearly stable", "unstable stable"),
            steps.iter().map(|s| i32::from(s.leading < 0.0)).collect(),
        ),
        (
            "settled",
            flag(
                "1 if the settle criterion was met (0: the year limit ended it)",
                "unsettled settled",
            ),
            steps.iter().map(|s| i32::from(s.settled)).collect(),
        ),
        (
            "time_stepped",
            flag(
                "1 if the state was reached by time stepping after leaving its branch",
                "followed time_stepped",
            ),
            steps
                .iter()
                .map(|s| i32::from(s.reached == Reached::Settled))
                .collect(),
        ),
    ];
    for (name, a, values) in &i32_vars {
        w.add_variable_i32(name, &["step"], a)?;
        w.write_i32(name, values)?;
    }
    w.add_variable_f64(
        "surface_temperature",
        &["step", "lat"],
        &attrs(
            "K",
            "surface temperature at the end of the step",
            Some("surface_temperature"),
        ),
    )?;
    let all: Vec<f64> = steps.iter().flat_map(|s| s.state.iter().copied()).collect();
    w.write_f64("surface_temperature", &all)?;

    let tp = &res.tipping;
    w.add_dimension("tipping", tp.len())?;
    let tcol = |f: &dyn Fn(usize) -> f64| -> Vec<f64> { (0..tp.len()).map(f).collect() };
    let t_vars: Vec<(&str, String, String, Vec<f64>)> = vec![
        (
            "tipping_control",
            units.into(),
            format!(
                "control value at the tipping point (midpoint of the refined bracket; NaN when unresolved; {})",
                spec.control
            ),
            tcol(&|k| tp[k].control),
        ),
        (
            "tipping_bracket_low",
            units.into(),
            "lower end of the refined bracket of the tipping point (unresolved: of the interval holding the jump)".into(),
            tcol(&|k| tp[k].bracket.0.min(tp[k].bracket.1)),
        ),
        (
            "tipping_bracket_high",
            units.into(),
            "upper end of the refined bracket of the tipping point (unresolved: of the interval holding the jump)".into(),
            tcol(&|k| tp[k].bracket.0.max(tp[k].bracket.1)),
        ),
        (
            "tipping_ice_edge_before",
            "degrees_north".into(),
            "ice-edge latitude on the branch that ends at the tipping point".into(),
            tcol(&|k| tp[k].ice_edge_before),
        ),
        (
            "tipping_ice_edge_after",
            "degrees_north".into(),
            "ice-edge latitude where the state settled after the tipping point".into(),
            tcol(&|k| tp[k].ice_edge_after),
        ),
        (
            "tipping_global_mean_before",
            "K".into(),
            "global-mean temperature on the branch that ends at the tipping point".into(),
            tcol(&|k| tp[k].global_mean_before),
        ),
        (
            "tipping_global_mean_after",
            "K".into(),
            "global-mean temperature where the state settled after the tipping point".into(),
            tcol(&|k| tp[k].global_mean_after),
        ),
    ];
    for (name, u, long, values) in &t_vars {
        w.add_variable_f64(name, &["tipping"], &attrs(u, long, None))?;
        w.write_f64(name, values)?;
    }
    w.add_variable_i32(
        "tipping_direction",
        &["tipping"],
        &attrs(
            "1",
            "direction of the leg on which the tipping happened (+1 up, -1 down)",
            None,
        ),
    )?;
    w.write_i32(
        "tipping_direction",
        &tp.iter().map(|t| t.direction).collect::<Vec<_>>(),
    )?;
    let mut a = attrs(
        "1",
        "1 if the tipping point was bracketed to refine_relative, 0 if only the interval holding the jump is known",
        None,
    );
    a.push(("flag_meanings", Attr::from("unresolved resolved")));
    w.add_variable_i32("tipping_resolved", &["tipping"], &a)?;
    w.write_i32(
        "tipping_resolved",
        &tp.iter().map(|t| i32::from(t.resolved)).collect::<Vec<_>>(),
    )?;
    w.add_variable_i32(
        "tipping_step",
        &["tipping"],
        &attrs("1", "index of the step at which the jump shows", None),
    )?;
    w.write_i32(
        "tipping_step",
        &tp.iter().map(|t| t.step as i32).collect::<Vec<_>>(),
    )?;

    let iv = &res.hysteresis_intervals;
    w.add_dimension("interval", iv.len())?;
    for (name, long, values) in [
        (
            "hysteresis_low",
            "lower end of a control interval where the two legs end in different states",
            iv.iter().map(|v| v.0).collect::<Vec<_>>(),
        ),
        (
            "hysteresis_high",
            "upper end of a control interval where the two legs end in different states",
            iv.iter().map(|v| v.1).collect::<Vec<_>>(),
        ),
    ] {
        w.add_variable_f64(name, &["interval"], &attrs(units, long, None))?;
        w.write_f64(name, &values)?;
    }

    w.set_attr_str("control_key", &spec.control)?;
    w.set_attr_str("control_units", units)?;
    w.set_attr_f64("control_from", spec.from)?;
    w.set_attr_f64("control_to", spec.to)?;
    w.set_attr_i64("steps_per_direction", spec.steps as i64)?;
    w.set_attr_f64("hysteresis_width", res.hysteresis_width)?;
    w.set_attr_str(
        "hysteresis_width_comment",
        "total control length (control units) over which the two legs end in different states, bounded by the refined tipping points; NaN when an end is not found (see hysteresis_missing)",
    )?;
    if let Some(why) = &res.hysteresis_missing {
        w.set_attr_str("hysteresis_missing", why)?;
    }
    w.set_attr_str("control_spacing", spec.spacing.name())?;
    w.set_attr_f64("settle_k_per_year", spec.settle_k_per_year)?;
    w.set_attr_f64("settle_max_years", spec.settle_max_years)?;
    w.set_attr_f64("refine_relative", spec.refine_relative)?;
    w.set_attr_i64("time_stepped_steps", res.settled_steps as i64)?;
    w.set_attr_i64("unsettled_steps", res.unsettled_steps as i64)?;
    apply_completion(&mut w, completion)?;
    w.finish()
}
