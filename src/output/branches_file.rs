//! The file of `icefold branches`: every continuation point of every branch (dimension
//! `point`), the located folds (dimension `fold`) and one row per branch (dimension
//! `branches`), with the fixed names of DESIGN section 4.

use super::common::{
    apply_completion, attrs, create_file, write_latitude, write_provenance, Completion, Provenance,
};
use super::Attr;
use super::OutputError;
use crate::equilibrium::continuation::{Branch, LegEnd};
use crate::equilibrium::control::control_units;
use crate::equilibrium::symmetry::BranchBreak;
use crate::model::Model;
use std::path::Path;

/// An integer variable: name, attributes, values.
type IntColumn<'a> = (&'a str, Vec<(&'a str, Attr)>, Vec<i32>);

/// Range and bookkeeping written as attributes.
#[derive(Debug, Clone)]
pub struct BranchesInfo<'a> {
    /// Dotted control key.
    pub control_key: &'a str,
    /// Lower end of the range.
    pub from: f64,
    /// Upper end of the range.
    pub to: f64,
    /// How the continuation stepped: "linear" (in the control) or "log" (in its logarithm).
    pub spacing: &'a str,
    /// Linearisations used by the continuation.
    pub linearisations: u64,
    /// The model family, for the ice edges of a model whose edge rule depends on the control
    /// (the edge-balance rule of relaxation transport): each state's edge is then taken with
    /// the model at its own control value.
    pub family: Option<&'a crate::equilibrium::control::Controlled>,
    /// Branches from this index on are asymmetric (globe; `branches.len()` when none).
    pub asymmetric_from: usize,
    /// Branch points (pitchforks) on the symmetric branches.
    pub breaks: &'a [BranchBreak],
}

/// Ice edges of `state` at control `p`: with the model at `p` when the edge rule depends on
/// the control and `info` has the family, else with `model`.
fn edges_at(model: &Model, info: &BranchesInfo<'_>, p: f64, state: &[f64]) -> (f64, Option<f64>) {
    match info.family {
        Some(fam) if model.uses_edge_balance() => match fam.model_at(p) {
            Ok(m) => m.ice_edges(state),
            Err(_) => model.ice_edges(state),
        },
        _ => model.ice_edges(state),
    }
}

fn end_code(e: LegEnd) -> i32 {
    match e {
        LegEnd::LeftRange => 0,
        LegEnd::PointLimit => 1,
        LegEnd::Closed => 2,
        LegEnd::Stuck { .. } => 3,
        LegEnd::BranchPoint { .. } => 4,
    }
}

/// Write the branches file at `path` (atomically, via a temporary file).
pub fn write_branches(
    path: &Path,
    model: &Model,
    prov: &Provenance,
    info: &BranchesInfo<'_>,
    branches: &[Branch],
) -> Result<(), OutputError> {
    write_branches_with(path, model, prov, info, branches, &Completion::finished())
}

/// [`write_branches`] of a finished or partial set (`completion` says which).
pub fn write_branches_with(
    path: &Path,
    model: &Model,
    prov: &Provenance,
    info: &BranchesInfo<'_>,
    branches: &[Branch],
    completion: &Completion,
) -> Result<(), OutputError> {
    let units = control_units(info.control_key);
    let mut w = create_file(path, prov)?;
    write_provenance(&mut w, prov, "branches")?;
    write_latitude(&mut w, &model.grid)?;
    let pts: Vec<(usize, &crate::equilibrium::continuation::BranchPoint)> = branches
        .iter()
        .enumerate()
        .flat_map(|(b, br)| br.points.iter().map(move |p| (b, p)))
        .collect();
    let globe = model.grid.domain == crate::grid::Domain::Globe;
    w.add_dimension("point", pts.len())?;
    let edges: Vec<(f64, Option<f64>)> = pts
        .iter()
        .map(|(_, p)| edges_at(model, info, p.control, &p.state))
        .collect();
    let f64_vars: Vec<(&str, String, String, Vec<f64>)> = vec![
        (
            "control",
            units.into(),
            format!("control value ({})", info.control_key),
            pts.iter().map(|(_, p)| p.control).collect(),
        ),
        (
            "global_mean_temperature",
            "K".into(),
            "area-weighted global-mean surface temperature".into(),
            pts.iter().map(|(_, p)| model.grid.mean(&p.state)).collect(),
        ),
        (
            "ice_edge_latitude_north",
            "degrees_north".into(),
            "ice-edge latitude, northern hemisphere (90 ice free, 0 ice covered)".into(),
            edges.iter().map(|e| e.0).collect(),
        ),
        (
            "leading_eigenvalue",
            "year-1".into(),
            "leading eigenvalue of the linearised dynamics (largest real part)".into(),
            pts.iter().map(|(_, p)| p.leading).collect(),
        ),
        (
            "arclength",
            "1".into(),
            "arclength along the branch in the scaled variables of the continuation".into(),
            pts.iter().map(|(_, p)| p.arclength).collect(),
        ),
        (
            "control_derivative",
            units.into(),
            "d(control)/d(arclength) in point order; its sign changes at each fold".into(),
            pts.iter().map(|(_, p)| p.dpds).collect(),
        ),
    ];
    for (name, u, long, values) in &f64_vars {
        let mut a = attrs(u, long, None);
        if *name == "control" {
            // Whether the continuation stepped in the control or its logarithm (picture axes).
            a.push(("spacing", Attr::from(info.spacing)));
        }
        w.add_variable_f64(name, &["point"], &a)?;
        w.write_f64(name, values)?;
    }
    if globe {
        w.add_variable_f64(
            "ice_edge_latitude_south",
            &["point"],
            &attrs(
                "degrees_north",
                "ice-edge latitude, southern hemisphere (-90 ice free, 0 ice covered)",
                None,
            ),
        )?;
        w.write_f64(
            "ice_edge_latitude_south",
            &edges.iter().map(|e| e.1.unwrap_or(f64::NAN)).collect::<Vec<_>>(),
        )?;
    }
    let mut stable_attrs = attrs(
        "1",
        "1 if the equilibrium is linearly stable (leading eigenvalue < 0)",
        None,
    );
    stable_attrs.push(("flag_values", Attr::from("0 1")));
    stable_attrs.push(("flag_meanings", Attr::from("unstable stable")));
    w.add_variable_i32("stable", &["point"], &stable_attrs)?;
    w.write_i32(
        "stable",
        &pts.iter()
            .map(|(_, p)| i32::from(p.leading < 0.0))
            .collect::<Vec<_>>(),
    )?;
    w.add_variable_i32(
        "branch",
        &["point"],
        &attrs(
            "1",
            "index of the branch the point belongs to (points in arclength order)",
            None,
        ),
    )?;
    w.write_i32("branch", &pts.iter().map(|(b, _)| *b as i32).collect::<Vec<_>>())?;
    w.add_variable_f64(
        "surface_temperature",
        &["point", "lat"],
        &attrs(
            "K",
            "equilibrium surface temperature",
            Some("surface_temperature"),
        ),
    )?;
    let all: Vec<f64> = pts.iter().flat_map(|(_, p)| p.state.iter().copied()).collect();
    w.write_f64("surface_temperature", &all)?;

    let folds: Vec<(usize, &crate::equilibrium::continuation::FoldPoint)> = branches
        .iter()
        .enumerate()
        .flat_map(|(b, br)| br.folds.iter().map(move |f| (b, f)))
        .collect();
    w.add_dimension("fold", folds.len())?;
    let fold_vars: Vec<(&str, String, String, Vec<f64>)> = vec![
        (
            "fold_control",
            units.into(),
            format!("control value at the fold (saddle-node; {})", info.control_key),
            folds.iter().map(|(_, f)| f.control).collect(),
        ),
        (
            "fold_ice_edge_latitude_north",
            "degrees_north".into(),
            "ice-edge latitude at the fold".into(),
            folds
                .iter()
                .map(|(_, f)| edges_at(model, info, f.control, &f.state).0)
                .collect(),
        ),
        (
            "fold_global_mean_temperature",
            "K".into(),
            "global-mean temperature at the fold".into(),
            folds.iter().map(|(_, f)| model.grid.mean(&f.state)).collect(),
        ),
    ];
    for (name, u, long, values) in &fold_vars {
        w.add_variable_f64(name, &["fold"], &attrs(u, long, None))?;
        w.write_f64(name, values)?;
    }
    let fold_i32: Vec<IntColumn<'_>> = vec![
        (
            "fold_branch",
            attrs("1", "index of the branch holding the fold", None),
            folds.iter().map(|(b, _)| *b as i32).collect(),
        ),
        (
            "fold_after_point",
            attrs(
                "1",
                "index (into dimension point) of the point just before the fold",
                None,
            ),
            folds
                .iter()
                .map(|(b, f)| {
                    (branches[..*b].iter().map(|x| x.points.len()).sum::<usize>() + f.after_point) as i32
                })
                .collect(),
        ),
        (
            "fold_corner",
            {
                let mut a = attrs(
                    "1",
                    "1 if the fold sits at a corner of the piecewise-smooth curve (step albedo), 0 at a smooth turning point",
                    None,
                );
                a.push(("flag_meanings", Attr::from("smooth corner")));
                a
            },
            folds.iter().map(|(_, f)| i32::from(f.corner)).collect(),
        ),
        (
            "fold_converged",
            attrs("1", "1 if the fold was located to the requested precision", None),
            folds.iter().map(|(_, f)| i32::from(f.converged)).collect(),
        ),
        (
            "fold_minimum",
            attrs(
                "1",
                "1 if the control has a local minimum at the fold (the branch lies above it), 0 at a maximum",
                None,
            ),
            folds.iter().map(|(_, f)| i32::from(f.minimum)).collect(),
        ),
        (
            "fold_turns",
            attrs(
                "1",
                "turning points of the discrete curve the fold stands for (more than 1: a cluster of sub-band wiggles of the step albedo's edge rule, reported at its extreme control)",
                None,
            ),
            folds.iter().map(|(_, f)| f.turns as i32).collect(),
        ),
    ];
    for (name, a, values) in &fold_i32 {
        w.add_variable_i32(name, &["fold"], a)?;
        w.write_i32(name, values)?;
    }
    w.add_variable_f64(
        "fold_surface_temperature",
        &["fold", "lat"],
        &attrs(
            "K",
            "surface temperature at the fold",
            Some("surface_temperature"),
        ),
    )?;
    let fs: Vec<f64> = folds.iter().flat_map(|(_, f)| f.state.iter().copied()).collect();
    w.write_f64("fold_surface_temperature", &fs)?;

    w.add_dimension("branches", branches.len())?;
    let end_attrs = |long: &str| {
        let mut a = attrs("1", long, None);
        a.push(("flag_values", Attr::from("0 1 2 3 4")));
        a.push((
            "flag_meanings",
            Attr::from("left_range point_limit closed_loop stuck branch_point"),
        ));
        a
    };
    let b_vars: Vec<IntColumn<'_>> = vec![
        (
            "branch_points",
            attrs("1", "number of points of the branch", None),
            branches.iter().map(|b| b.points.len() as i32).collect(),
        ),
        (
            "branch_end_first",
            end_attrs("how the branch ends at its first point"),
            branches.iter().map(|b| end_code(b.ends[0])).collect(),
        ),
        (
            "branch_end_last",
            end_attrs("how the branch ends at its last point"),
            branches.iter().map(|b| end_code(b.ends[1])).collect(),
        ),
    ];
    for (name, a, values) in &b_vars {
        w.add_variable_i32(name, &["branches"], a)?;
        w.write_i32(name, values)?;
    }
    // Globe files only: which branches are asymmetric, and the branch points.
    if globe {
        let mut asym_attrs = attrs(
            "1",
            "1 if the branch is asymmetric about the equator (it leaves a symmetric branch at a branch point, or is the mirror image of one that does), 0 if symmetric or on a hemisphere",
            None,
        );
        asym_attrs.push(("flag_values", Attr::from("0 1")));
        asym_attrs.push(("flag_meanings", Attr::from("symmetric asymmetric")));
        w.add_variable_i32("branch_asymmetric", &["branches"], &asym_attrs)?;
        w.write_i32(
            "branch_asymmetric",
            &(0..branches.len())
                .map(|b| i32::from(b >= info.asymmetric_from))
                .collect::<Vec<_>>(),
        )?;
        write_breaks(&mut w, model, info, branches, units)?;
    }

    w.set_attr_str("control_key", info.control_key)?;
    w.set_attr_str("control_units", units)?;
    w.set_attr_f64("control_from", info.from)?;
    w.set_attr_f64("control_to", info.to)?;
    w.set_attr_str("control_spacing", info.spacing)?;
    w.set_attr_i64("linearisations", info.linearisations as i64)?;
    apply_completion(&mut w, completion)?;
    w.finish()
}

/// The branch points (dimension `branch_point`): where an antisymmetric eigenvalue of a
/// symmetric branch crosses zero and an asymmetric branch leaves it.
fn write_breaks(
    w: &mut super::writer::NcWriter,
    model: &Model,
    info: &BranchesInfo<'_>,
    branches: &[Branch],
    units: &str,
) -> Result<(), OutputError> {
    let bp = info.breaks;
    w.add_dimension("branch_point", bp.len())?;
    let edges: Vec<(f64, Option<f64>)> = bp.iter().map(|b| model.ice_edges(&b.state)).collect();
    let f64_vars: [(&str, &str, String, Vec<f64>); 3] = [
        (
            "branch_point_control",
            units,
            format!(
                "control value at the branch point (pitchfork: an eigenvalue of the antisymmetric part crosses zero; {})",
                info.control_key
            ),
            bp.iter().map(|b| b.control).collect(),
        ),
        (
            "branch_point_ice_edge_latitude_north",
            "degrees_north",
            "northern ice-edge latitude at the branch point (the state is symmetric)".into(),
            edges.iter().map(|e| e.0).collect(),
        ),
        (
            "branch_point_global_mean_temperature",
            "K",
            "global-mean temperature at the branch point".into(),
            bp.iter().map(|b| model.grid.mean(&b.state)).collect(),
        ),
    ];
    for (name, u, long, values) in &f64_vars {
        w.add_variable_f64(name, &["branch_point"], &attrs(u, long, None))?;
        w.write_f64(name, values)?;
    }
    let offset = |b: usize| branches[..b].iter().map(|x| x.points.len()).sum::<usize>();
    let flag = |long: &str, meanings: &str| {
        let mut a = attrs("1", long, None);
        a.push(("flag_values", Attr::from("0 1")));
        a.push(("flag_meanings", Attr::from(meanings)));
        a
    };
    let i32_vars: Vec<IntColumn<'_>> = vec![
        (
            "branch_point_branch",
            attrs("1", "index of the symmetric branch holding the branch point", None),
            bp.iter().map(|b| b.branch as i32).collect(),
        ),
        (
            "branch_point_after_point",
            attrs(
                "1",
                "index (into dimension point) of the point just before the branch point",
                None,
            ),
            bp.iter().map(|b| (offset(b.branch) + b.after_point) as i32).collect(),
        ),
        (
            "branch_point_asymmetric_branch",
            attrs(
                "1",
                "index of the asymmetric branch leaving the branch point (-1: the switch failed)",
                None,
            ),
            bp.iter()
                .map(|b| b.asymmetric_branch.map_or(-1, |k| (info.asymmetric_from + k) as i32))
                .collect(),
        ),
        (
            "branch_point_corner",
            flag(
                "1 if the antisymmetric eigenvalue jumps across zero (a corner of the step-albedo curve), 0 for a smooth crossing",
                "smooth corner",
            ),
            bp.iter().map(|b| i32::from(b.corner)).collect(),
        ),
        (
            "branch_point_converged",
            flag(
                "1 if the branch point was located to the requested precision",
                "unresolved converged",
            ),
            bp.iter().map(|b| i32::from(b.converged)).collect(),
        ),
    ];
    for (name, a, values) in &i32_vars {
        w.add_variable_i32(name, &["branch_point"], a)?;
        w.write_i32(name, values)?;
    }
    w.add_variable_f64(
        "branch_point_surface_temperature",
        &["branch_point", "lat"],
        &attrs(
            "K",
            "surface temperature at the branch point",
            Some("surface_temperature"),
        ),
    )?;
    let all: Vec<f64> = bp.iter().flat_map(|b| b.state.iter().copied()).collect();
    w.write_f64("branch_point_surface_temperature", &all)?;
    Ok(())
}
