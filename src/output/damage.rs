//! What is wrong with an icefold file whose structure cannot be what icefold wrote (a damaged
//! or hand-edited file): checked before pictures are drawn, reported by `inspect`.

use super::{NcReader, OutputError};

/// The file's kind (global attribute `icefold_kind`); [`OutputError::Foreign`] for an HDF5
/// file icefold did not write.
pub fn icefold_kind(r: &NcReader) -> Result<String, OutputError> {
    match r.attr_str("icefold_kind")? {
        Some(k) if !k.is_empty() => Ok(k),
        _ => Err(OutputError::Foreign {
            path: r.path().to_path_buf(),
        }),
    }
}

/// Variables whose axes must follow these coordinates, by file kind (the ones pictures use).
fn expected_axes(kind: &str) -> &'static [(&'static str, &'static [&'static str])] {
    match kind {
        "run" => &[
            ("surface_temperature", &["time", "lat"]),
            ("global_mean_temperature", &["time"]),
            ("ice_edge_latitude_north", &["time"]),
            ("ice_edge_latitude_south", &["time"]),
            ("toa_imbalance", &["time"]),
        ],
        "equilibrium" => &[
            ("surface_temperature", &["lat"]),
            ("absorbed_sunlight", &["lat"]),
            ("outgoing_longwave", &["lat"]),
            ("transport_convergence", &["lat"]),
        ],
        _ => &[],
    }
}

/// `Ok(())` when the coordinates and the main variables of `r` (of kind `kind`) are
/// consistent; otherwise [`OutputError::Damaged`] saying what is wrong: a coordinate (`lat`,
/// `time`, any coordinate variable) that is empty where it may not be, holds NaN or infinity,
/// or is not strictly monotonic; a run file without records; a variable whose length along an
/// axis differs from its coordinate's.
pub fn check(r: &NcReader, kind: &str) -> Result<(), OutputError> {
    let damaged = |problem: String| OutputError::Damaged {
        path: r.path().to_path_buf(),
        problem,
    };
    let vars = r.var_names()?;
    let coordinate_len = |name: &str| -> Result<Option<usize>, OutputError> {
        Ok(if vars.iter().any(|v| v == name) {
            Some(r.var_shape(name)?.iter().product())
        } else {
            None
        })
    };
    // Coordinate variables: a dimension with a variable of its own name.
    for d in r.dim_names()? {
        if !vars.contains(&d) || r.var_shape(&d)?.len() != 1 {
            continue;
        }
        let v = r.read_f64(&d)?;
        if v.is_empty() && (d == "lat" || (d == "time" && kind == "run")) {
            return Err(damaged(if d == "time" {
                "it holds no time records (`time` has length 0)".into()
            } else {
                "coordinate `lat` has no values".into()
            }));
        }
        if let Some(i) = v.iter().position(|x| !x.is_finite()) {
            return Err(damaged(format!("coordinate `{d}` holds {} at index {i}", v[i])));
        }
        let up = v.windows(2).all(|w| w[1] > w[0]);
        let down = v.windows(2).all(|w| w[1] < w[0]);
        if !(up || down) {
            return Err(damaged(format!(
                "coordinate `{d}` is not strictly increasing or decreasing"
            )));
        }
    }
    for (name, axes) in expected_axes(kind) {
        if !vars.iter().any(|v| v == name) {
            continue;
        }
        let shape = r.var_shape(name)?;
        if shape.len() != axes.len() {
            return Err(damaged(format!(
                "variable `{name}` has {} axes; expected ({})",
                shape.len(),
                axes.join(", ")
            )));
        }
        for (axis, (&len, coord)) in shape.iter().zip(axes.iter()).enumerate() {
            if let Some(n) = coordinate_len(coord)? {
                if n != len {
                    return Err(damaged(format!(
                        "variable `{name}` has {len} values along axis {axis}, but coordinate `{coord}` has {n}"
                    )));
                }
            }
        }
    }
    Ok(())
}
