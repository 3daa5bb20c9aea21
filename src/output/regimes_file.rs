//! The file of `icefold regimes`: per cell of the (`p1`, `p2`) map the number of equilibria,
//! the number of stable ones and which kinds of stable climate exist, and the fold lines as
//! polylines (dimension `fold_vertex`, each vertex tagged with its line in `fold_line`).
//!
//! `p1` is `regimes.control` (continued along each row), `p2` is `regimes.row_control`; map
//! variables have dimensions `(p2, p1)`, so each row is one continuation.

use super::common::{apply_completion, attrs, create_file, write_provenance, Completion, Provenance};
use super::Attr;
use super::OutputError;
use crate::config::spec::RegimesSpec;
use crate::equilibrium::control::control_units;
use crate::equilibrium::regimes::{Kind, RegimeMap};
use crate::model::Model;
use std::path::Path;

/// Write the regimes file of a finished map at `path` (atomically, via a temporary file).
pub fn write_regimes(
    path: &Path,
    model: &Model,
    prov: &Provenance,
    spec: &RegimesSpec,
    map: &RegimeMap,
) -> Result<(), OutputError> {
    write_regimes_with(path, model, prov, spec, map, &Completion::finished())
}

/// The same, with `complete` and progress attributes from `completion` (a stopped map holds
/// the rows that finished).
pub fn write_regimes_with(
    path: &Path,
    model: &Model,
    prov: &Provenance,
    spec: &RegimesSpec,
    map: &RegimeMap,
    completion: &Completion,
) -> Result<(), OutputError> {
    let (u1, u2) = (control_units(&spec.control), control_units(&spec.row_control));
    let mut w = create_file(path, prov)?;
    write_provenance(&mut w, prov, "regimes")?;
    let p2: Vec<f64> = map.rows.iter().map(|r| r.row_value).collect();
    w.add_coordinate(
        "p1",
        &map.columns,
        &[
            ("units", Attr::from(u1)),
            (
                "long_name",
                Attr::from(format!(
                    "first control, continued along each row ({})",
                    spec.control
                )),
            ),
            ("control_key", Attr::from(spec.control.as_str())),
            ("axis", Attr::from("X")),
            ("spacing", Attr::from(spec.spacing.name())),
        ],
    )?;
    w.add_coordinate(
        "p2",
        &p2,
        &[
            ("units", Attr::from(u2)),
            (
                "long_name",
                Attr::from(format!(
                    "second control, fixed in each row ({})",
                    spec.row_control
                )),
            ),
            ("control_key", Attr::from(spec.row_control.as_str())),
            ("axis", Attr::from("Y")),
            ("spacing", Attr::from(spec.row_spacing.name())),
        ],
    )?;
    let cells = |f: &dyn Fn(&crate::equilibrium::regimes::RegimeRow, usize) -> i32| -> Vec<i32> {
        map.rows
            .iter()
            .flat_map(|r| (0..map.columns.len()).map(move |i| f(r, i)))
            .collect()
    };
    w.add_variable_i32(
        "stable_count",
        &["p2", "p1"],
        &attrs("1", "number of linearly stable equilibria", None),
    )?;
    w.write_i32("stable_count", &cells(&|r, i| r.stable[i] as i32))?;
    w.add_variable_i32(
        "equilibrium_count",
        &["p2", "p1"],
        &attrs("1", "number of equilibria, stable and unstable", None),
    )?;
    w.write_i32("equilibrium_count", &cells(&|r, i| r.equilibria[i] as i32))?;
    let names: Vec<&str> = Kind::ALL.iter().map(|k| k.name()).collect();
    let mut kind_attrs = attrs(
        "1",
        "kinds of climate among the stable equilibria (sum of flag masks)",
        None,
    );
    let masks: Vec<String> = Kind::ALL.iter().map(|k| k.bit().to_string()).collect();
    kind_attrs.push(("flag_masks", Attr::from(masks.join(" "))));
    kind_attrs.push(("flag_meanings", Attr::from(names.join(" "))));
    w.add_variable_i32("stable_kinds", &["p2", "p1"], &kind_attrs)?;
    w.write_i32("stable_kinds", &cells(&|r, i| i32::from(r.kinds[i])))?;
    for kind in Kind::ALL {
        let name = format!("has_{}", kind.name());
        let mut a = attrs(
            "1",
            &format!(
                "1 if a stable equilibrium of this kind exists ({})",
                kind.definition(spec.small_cap_min_latitude)
            ),
            None,
        );
        a.push(("flag_values", Attr::from("0 1")));
        a.push(("flag_meanings", Attr::from("absent present")));
        w.add_variable_i32(&name, &["p2", "p1"], &a)?;
        w.write_i32(&name, &cells(&|r, i| i32::from(r.kinds[i] & kind.bit() != 0)))?;
    }
    let row_i32: [(&str, &str, Vec<i32>); 3] = [
        (
            "row_branches",
            "number of branches traced in the row",
            map.rows.iter().map(|r| r.branches as i32).collect(),
        ),
        (
            "row_folds",
            "number of folds found in the row",
            map.rows.iter().map(|r| r.folds.len() as i32).collect(),
        ),
        (
            "stuck_ends",
            "number of branch ends in the row where the corrector failed at ever smaller steps: the row's equilibria and folds beyond them are missing",
            map.rows.iter().map(|r| r.stuck_ends as i32).collect(),
        ),
    ];
    for (name, long, values) in &row_i32 {
        w.add_variable_i32(name, &["p2"], &attrs("1", long, None))?;
        w.write_i32(name, values)?;
    }

    let verts: Vec<(usize, &crate::equilibrium::regimes::FoldVertex)> = map
        .lines
        .iter()
        .enumerate()
        .flat_map(|(l, line)| line.iter().map(move |v| (l, v)))
        .collect();
    w.add_dimension("fold_vertex", verts.len())?;
    let f64_vars: [(&str, &str, String, Vec<f64>); 3] = [
        (
            "fold_p1",
            u1,
            format!("first control at the fold ({})", spec.control),
            verts.iter().map(|(_, v)| v.p1).collect(),
        ),
        (
            "fold_p2",
            u2,
            format!("second control at the fold ({})", spec.row_control),
            verts.iter().map(|(_, v)| v.p2).collect(),
        ),
        (
            "fold_ice_edge_latitude_north",
            "degrees_north",
            "northern ice-edge latitude at the fold".into(),
            verts.iter().map(|(_, v)| v.ice_edge).collect(),
        ),
    ];
    for (name, u, long, values) in &f64_vars {
        w.add_variable_f64(name, &["fold_vertex"], &attrs(u, long, None))?;
        w.write_f64(name, values)?;
    }
    w.add_variable_i32(
        "fold_line",
        &["fold_vertex"],
        &attrs(
            "1",
            "index of the fold line (tipping line) the vertex belongs to; vertices of a line are consecutive, in row order",
            None,
        ),
    )?;
    w.write_i32(
        "fold_line",
        &verts.iter().map(|(l, _)| *l as i32).collect::<Vec<_>>(),
    )?;
    let mut corner = attrs(
        "1",
        "1 if the fold sits at a corner of the piecewise-smooth curve (step albedo), 0 at a smooth turning point",
        None,
    );
    corner.push(("flag_values", Attr::from("0 1")));
    corner.push(("flag_meanings", Attr::from("smooth corner")));
    w.add_variable_i32("fold_corner", &["fold_vertex"], &corner)?;
    w.write_i32(
        "fold_corner",
        &verts.iter().map(|(_, v)| i32::from(v.corner)).collect::<Vec<_>>(),
    )?;

    w.set_attr_str("control_key", &spec.control)?;
    w.set_attr_str("control_units", u1)?;
    w.set_attr_f64("control_from", spec.from)?;
    w.set_attr_f64("control_to", spec.to)?;
    w.set_attr_str("row_control_key", &spec.row_control)?;
    w.set_attr_str("row_control_units", u2)?;
    w.set_attr_f64("row_control_from", spec.row_from)?;
    w.set_attr_f64("row_control_to", spec.row_to)?;
    w.set_attr_f64("small_cap_min_latitude", spec.small_cap_min_latitude)?;
    let defs: Vec<String> = Kind::ALL
        .iter()
        .map(|k| k.definition(spec.small_cap_min_latitude))
        .collect();
    w.set_attr_str(
        "kind_definitions",
        &format!(
            "kinds by the northern ice-edge latitude of a stable equilibrium: {}",
            defs.join("; ")
        ),
    )?;
    w.set_attr_i64("grid_bands", model.len() as i64)?;
    w.set_attr_i64(
        "linearisations",
        map.rows.iter().map(|r| r.linearisations as i64).sum(),
    )?;
    apply_completion(&mut w, completion)?;
    w.finish()
}
