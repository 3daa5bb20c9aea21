//! Pieces every icefold file shares: provenance attributes and the latitude coordinate.

use super::OutputError;
use super::{Attr, NcWriter};
use crate::grid::Grid;

/// Who made a file and from what.
#[derive(Debug, Clone, PartialEq)]
pub struct Provenance {
    /// The resolved configuration, TOML text.
    pub config_toml: String,
    /// The command line that made the file.
    pub command_line: String,
    /// The scenario title.
    pub title: String,
    /// zlib deflate level of the file's record and large variables (`output.deflate_level`).
    pub deflate_level: u8,
}

/// Starts the file `path` with the deflate level of `prov`.
pub fn create_file(path: &std::path::Path, prov: &Provenance) -> Result<NcWriter, OutputError> {
    NcWriter::create_with_deflate(path, prov.deflate_level)
}

/// icefold's version.
pub const VERSION: &str = env!("CARGO_PKG_VERSION");

/// Current UTC time as ISO 8601 (`YYYY-MM-DDTHH:MM:SSZ`), from the system clock.
pub fn utc_now() -> String {
    let secs = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map(|d| d.as_secs() as i64)
        .unwrap_or(0);
    let (days, rem) = (secs.div_euclid(86400), secs.rem_euclid(86400));
    // Civil date from days since 1970-01-01 (Hinnant's algorithm, common practice).
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = yoe + era * 400 + i64::from(m <= 2);
    format!(
        "{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z",
        rem / 3600,
        rem % 3600 / 60,
        rem % 60
    )
}

/// Global attributes: CF conventions, provenance, the kind of file, the deflate level it was
/// written with, and `complete = 0` (set to 1 by `mark_complete` when the job finished).
pub fn write_provenance(w: &mut NcWriter, prov: &Provenance, kind: &str) -> Result<(), OutputError> {
    let now = utc_now();
    w.set_attr_str("Conventions", "CF-1.8")?;
    w.set_attr_str("title", &prov.title)?;
    w.set_attr_str("institution", "icefold user")?;
    w.set_attr_str(
        "source",
        &format!("icefold {VERSION} (idealised energy-balance climate model)"),
    )?;
    w.set_attr_str("history", &format!("{now}: {}", prov.command_line))?;
    w.set_attr_str("icefold_version", VERSION)?;
    w.set_attr_str("icefold_kind", kind)?;
    w.set_attr_str("creation_time", &now)?;
    w.set_attr_str("command_line", &prov.command_line)?;
    w.set_attr_str("config_toml", &prov.config_toml)?;
    w.set_attr_str("time_units_note", "model time in years of 365.25 days")?;
    w.set_attr_i64("deflate_level", i64::from(prov.deflate_level))?;
    w.set_attr_i64("complete", 0)?;
    Ok(())
}

/// Set `complete` to 1 (finished) or 0 (stopped early).
pub fn mark_complete(w: &mut NcWriter, complete: bool) -> Result<(), OutputError> {
    w.set_attr_i64("complete", i64::from(complete))
}

/// How a job ended: `complete` and the global attributes that say how far it got (e.g.
/// `steps_reached`, `failure`, `interrupted_by`).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Completion {
    /// Whether the job finished.
    pub complete: bool,
    /// Extra global attributes.
    pub attrs: Vec<(String, Attr)>,
}

impl Completion {
    /// A finished job.
    pub fn finished() -> Completion {
        Completion {
            complete: true,
            attrs: Vec::new(),
        }
    }

    /// A job stopped early, with attributes saying how far it got and why.
    pub fn partial(attrs: Vec<(String, Attr)>) -> Completion {
        Completion {
            complete: false,
            attrs,
        }
    }
}

/// Write the attributes of `c` and `complete`.
pub fn apply_completion(w: &mut NcWriter, c: &Completion) -> Result<(), OutputError> {
    for (name, value) in &c.attrs {
        w.set_attr(name, value)?;
    }
    mark_complete(w, c.complete)
}

/// The `lat` coordinate (band centres, degrees_north) with `lat_bnds`, and the area weights.
pub fn write_latitude(w: &mut NcWriter, grid: &Grid) -> Result<(), OutputError> {
    let faces = grid.lat_faces_deg();
    let bnds: Vec<f64> = (0..grid.len()).flat_map(|i| [faces[i], faces[i + 1]]).collect();
    write_latitude_values(w, &grid.lat_centres_deg(), &bnds, &grid.weights)
}

/// The same from stored values: centres (degrees_north), bounds (row-major `[lat, 2]`) and area
/// weights, e.g. when merging files.
pub fn write_latitude_values(
    w: &mut NcWriter,
    lat: &[f64],
    lat_bnds: &[f64],
    weights: &[f64],
) -> Result<(), OutputError> {
    w.add_coordinate(
        "lat",
        lat,
        &[
            ("units", Attr::from("degrees_north")),
            ("standard_name", Attr::from("latitude")),
            ("long_name", Attr::from("latitude of band centre")),
            ("axis", Attr::from("Y")),
            ("bounds", Attr::from("lat_bnds")),
        ],
    )?;
    w.add_dimension("bnds", 2)?;
    w.add_variable_f64(
        "lat_bnds",
        &["lat", "bnds"],
        &[("units", Attr::from("degrees_north"))],
    )?;
    w.write_f64("lat_bnds", lat_bnds)?;
    w.add_variable_f64(
        "area_weight",
        &["lat"],
        &attrs("1", "fraction of the model domain's area in each band", None),
    )?;
    w.write_f64("area_weight", weights)?;
    Ok(())
}

/// Shorthand for a variable's attribute list.
pub fn attrs(units: &str, long_name: &str, standard_name: Option<&str>) -> Vec<(&'static str, Attr)> {
    let mut v = vec![("units", Attr::from(units)), ("long_name", Attr::from(long_name))];
    if let Some(s) = standard_name {
        v.push(("standard_name", Attr::from(s)));
    }
    v
}
