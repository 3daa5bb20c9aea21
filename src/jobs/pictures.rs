//! Pictures of output files: reads a file, builds the figures that fit its kind, and writes each
//! as SVG and PNG. Drawing itself lives in `plot` (which reads no files).

use crate::error::Error;
use crate::output::NcReader;
use crate::plot::{self, Figure, HeatMap, Panel, Series, Stroke};
use std::path::{Path, PathBuf};

fn plot_err(e: plot::PlotError) -> Error {
    Error::Other(format!("plot: {e}"))
}

fn read(r: &NcReader, name: &str) -> Result<Vec<f64>, Error> {
    Ok(r.read_f64(name)?)
}

fn has(r: &NcReader, name: &str) -> Result<bool, Error> {
    Ok(r.var_names()?.iter().any(|v| v == name))
}

/// Write the pictures of `file` into `out_dir` (file stem + a suffix per picture); returns the
/// paths written (SVG and PNG of each picture).
pub fn pictures(file: &Path, out_dir: &Path) -> Result<Vec<PathBuf>, Error> {
    let r = NcReader::open(file)?;
    std::fs::create_dir_all(out_dir).map_err(|e| {
        Error::Usage(format!(
            "cannot create picture directory {}: {e}",
            out_dir.display()
        ))
    })?;
    let stem = file
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "icefold".into());
    let kind = crate::output::damage::icefold_kind(&r)?;
    crate::output::damage::check(&r, &kind)?;
    let full_title = r.attr_str("title")?.unwrap_or_default();
    // Figure titles: the part before a colon, cut at a word boundary near 65 characters.
    let head = match full_title.split_once(':') {
        Some((h, _)) if h.chars().count() >= 25 => h,
        _ => full_title.as_str(),
    };
    let title = if head.chars().count() <= 65 {
        head.to_string()
    } else {
        let cut: String = head.chars().take(65).collect();
        format!("{}…", cut.rsplit_once(' ').map(|(a, _)| a).unwrap_or(&cut))
    };
    let figures: Vec<(&str, Picture)> = match kind.as_str() {
        "run" => vec![
            ("timeseries", Picture::Chart(run_timeseries(&r, &title)?)),
            ("map", Picture::Map(Box::new(run_map(&r, &title)?))),
            ("profile", Picture::Chart(run_profile(&r, &title)?)),
        ],
        "equilibrium" => vec![("profile", Picture::Chart(equilibrium_profile(&r, &title)?))],
        "branches" | "sweep" => vec![("hysteresis", Picture::Chart(hysteresis(&r, &title, &kind)?))],
        "ensemble" => vec![("spread", Picture::Chart(ensemble_spread(&r, &title)?))],
        "regimes" => vec![("map", Picture::Map(Box::new(regimes_map(&r, &title)?)))],
        other => {
            return Err(Error::Usage(format!(
                "{}: no pictures for file kind `{other}` (known: run, equilibrium, sweep, branches, ensemble, regimes)",
                file.display()
            )))
        }
    };
    let mut written = Vec::new();
    for (suffix, picture) in figures {
        let svg = match &picture {
            Picture::Chart(f) => plot::figure_svg(f),
            Picture::Map(m) => plot::heatmap_svg(m),
        }
        .map_err(|e| {
            Error::Other(format!(
                "{}: cannot draw the {suffix} picture: {e}",
                file.display()
            ))
        })?;
        let (a, b) =
            plot::save_svg_and_png(&out_dir.join(format!("{stem}-{suffix}")), &svg).map_err(plot_err)?;
        written.push(a);
        written.push(b);
    }
    Ok(written)
}

/// One picture of a file: a line chart or a map.
enum Picture {
    Chart(Figure),
    Map(Box<HeatMap>),
}

fn run_timeseries(r: &NcReader, title: &str) -> Result<Figure, Error> {
    let t = read(r, "time")?;
    let mut temp = Panel::new("Time (year)", "Global mean (K)");
    temp.series.push(
        Series::new(t.clone(), read(r, "global_mean_temperature")?, Stroke::Solid, 0)
            .labelled("global-mean temperature"),
    );
    // A globe's two edges share one axis of distance from the equator (the southern edge,
    // stored in degrees north, is drawn as degrees south).
    let globe = has(r, "ice_edge_latitude_south")?;
    let axis = if globe {
        "Ice edge (° from the equator)"
    } else {
        "Ice edge (°N)"
    };
    let mut edge = Panel::new("Time (year)", axis);
    edge.series.push(
        Series::new(t.clone(), read(r, "ice_edge_latitude_north")?, Stroke::Solid, 1).labelled(if globe {
            "northern ice edge (°N)"
        } else {
            "northern ice edge"
        }),
    );
    if globe {
        let south: Vec<f64> = read(r, "ice_edge_latitude_south")?.iter().map(|v| -v).collect();
        edge.series
            .push(Series::new(t.clone(), south, Stroke::Dashed, 2).labelled("southern ice edge (°S)"));
    }
    edge.y_range = Some((-4.0, 94.0));
    let mut budget = Panel::new("Time (year)", "Forcing and imbalance (W m⁻²)");
    budget.series.push(
        Series::new(t.clone(), read(r, "toa_imbalance")?, Stroke::Solid, 0)
            .labelled("net heating (global mean)"),
    );
    let add = read(r, "additive_forcing")?;
    if add.iter().any(|v| *v != 0.0) {
        budget
            .series
            .push(Series::new(t.clone(), add, Stroke::Dashed, 1).labelled("additive forcing"));
    }
    let gh = read(r, "greenhouse_forcing")?;
    if gh.iter().any(|v| *v != 0.0) {
        budget
            .series
            .push(Series::new(t.clone(), gh, Stroke::Dashed, 2).labelled("greenhouse forcing"));
    }
    let mut panels = vec![temp, edge, budget];
    let scale = read(r, "solar_scale")?;
    if scale.iter().any(|v| (*v - scale[0]).abs() > 1e-12) {
        let mut s = Panel::new("Time (year)", "Solar scale");
        s.series
            .push(Series::new(t, scale, Stroke::Solid, 2).labelled("insolation multiplier"));
        panels.push(s);
    }
    let h = 300 * panels.len() as u32 + 150;
    Ok(Figure {
        title: title.to_string(),
        panels,
        width_px: 1200,
        height_px: h,
    })
}

fn run_map(r: &NcReader, title: &str) -> Result<HeatMap, Error> {
    let t = read(r, "time")?;
    let lat = read(r, "lat")?;
    let bnds = read(r, "lat_bnds")?;
    let mut y_edges: Vec<f64> = bnds.chunks(2).map(|c| c[0]).collect();
    y_edges.push(*bnds.last().unwrap_or(&90.0));
    let z = read(r, "surface_temperature")?;
    let mut overlay = vec![
        Series::new(t.clone(), read(r, "ice_edge_latitude_north")?, Stroke::Dashed, 0).labelled("ice edge"),
    ];
    if has(r, "ice_edge_latitude_south")? {
        overlay.push(Series::new(
            t.clone(),
            read(r, "ice_edge_latitude_south")?,
            Stroke::Dashed,
            0,
        ));
    }
    let freeze = r
        .attr_str("config_toml")?
        .and_then(|c| c.parse::<toml::Table>().ok())
        .and_then(|c| c.get("albedo")?.get("freeze_temperature_c")?.as_float())
        .unwrap_or(-10.0);
    Ok(HeatMap {
        title: format!("{title}: surface temperature"),
        x: t,
        y: lat,
        y_edges: Some(y_edges),
        z,
        x_label: "Time (year)".into(),
        y_label: "Latitude (°N)".into(),
        z_label: "Surface temperature (K)".into(),
        contour_levels: vec![(freeze + 273.15, format!("{freeze} °C"))],
        overlay,
        width_px: 1200,
        height_px: 800,
        ..Default::default()
    })
}

fn run_profile(r: &NcReader, title: &str) -> Result<Figure, Error> {
    let lat = read(r, "lat")?;
    let n = lat.len();
    let z = read(r, "surface_temperature")?;
    let last = (z.len() / n.max(1)).saturating_sub(1);
    let pick = |name: &str| -> Result<Vec<f64>, Error> {
        let v = read(r, name)?;
        Ok(v.get(last * n..(last + 1) * n).unwrap_or_default().to_vec())
    };
    let t_end = read(r, "time")?.last().copied().unwrap_or(0.0);
    let fields = [
        pick("surface_temperature")?,
        pick("absorbed_sunlight")?,
        pick("outgoing_longwave")?,
        pick("transport_convergence")?,
    ];
    Ok(profile_figure(
        title,
        &format!("final state, year {t_end}"),
        lat,
        fields,
    ))
}

fn equilibrium_profile(r: &NcReader, title: &str) -> Result<Figure, Error> {
    let fields = [
        read(r, "surface_temperature")?,
        read(r, "absorbed_sunlight")?,
        read(r, "outgoing_longwave")?,
        read(r, "transport_convergence")?,
    ];
    let stability = r.attr_str("stability")?.unwrap_or_default();
    let edge = read(r, "ice_edge_latitude_north")?
        .first()
        .copied()
        .unwrap_or(f64::NAN);
    let sub = format!("{stability} equilibrium, ice edge {edge:.1}°N");
    Ok(profile_figure(title, &sub, read(r, "lat")?, fields))
}

/// Temperature and the three terms of the energy budget against latitude; `fields` holds
/// surface temperature (K), absorbed sunlight, OLR and transport convergence (W m-2).
fn profile_figure(title: &str, subtitle: &str, lat: Vec<f64>, fields: [Vec<f64>; 4]) -> Figure {
    let [temp, sun, olr, conv] = fields;
    let mut p_temp = Panel::new("Latitude (°N)", "Temperature (K)");
    p_temp.title = Some(subtitle.to_string());
    p_temp
        .series
        .push(Series::new(lat.clone(), temp, Stroke::Solid, 0).labelled("surface temperature"));
    let mut flux = Panel::new("Latitude (°N)", "Flux (W m⁻²)");
    for (v, stroke, colour, label) in [
        (sun, Stroke::Solid, 1, "absorbed sunlight"),
        (olr, Stroke::Dashed, 0, "outgoing longwave"),
        (conv, Stroke::Solid, 2, "transport convergence"),
    ] {
        flux.series
            .push(Series::new(lat.clone(), v, stroke, colour).labelled(label));
    }
    Figure {
        title: title.to_string(),
        panels: vec![p_temp, flux],
        width_px: 1200,
        height_px: 900,
    }
}

/// Percentile `q` (0..1) of sorted finite values, linear between order statistics.
fn percentile(sorted: &[f64], q: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    let h = q * (sorted.len() - 1) as f64;
    let (lo, hi) = (h.floor() as usize, h.ceil() as usize);
    sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo])
}

/// Most members drawn in an ensemble's spaghetti plot.
const SPAGHETTI: usize = 40;

/// Members as thin pale lines, the 5-95 % band and the median, for global-mean
/// temperature and ice edge against time.
fn ensemble_spread(r: &NcReader, title: &str) -> Result<Figure, Error> {
    let t = read(r, "time")?;
    let nt = t.len();
    let members = r.dim_len("member")?;
    let status = read(r, "member_status")?;
    let mut panels = Vec::new();
    for (name, axis, colour) in [
        ("global_mean_temperature", "Global mean (K)", 0),
        ("ice_edge_latitude_north", "Ice edge (°N)", 1),
    ] {
        let all = read(r, name)?;
        let mut p = Panel::new("Time (year)", axis);
        // At most SPAGHETTI members are drawn (evenly picked); band and median use all.
        let every = members.div_ceil(SPAGHETTI).max(1);
        for m in (0..members).step_by(every) {
            if status.get(m).copied().unwrap_or(0.0) != 0.0 {
                continue;
            }
            let y = all.get(m * nt..(m + 1) * nt).unwrap_or_default().to_vec();
            let mut s = Series::new(t.clone(), y, Stroke::Faint, colour);
            if p.series.is_empty() {
                let shown = members.div_ceil(every);
                s = s.labelled(if shown < members {
                    format!("members ({shown} of {members} shown)")
                } else {
                    format!("members ({members})")
                });
            }
            p.series.push(s);
        }
        let (mut lower, mut upper, mut median) = (vec![], vec![], vec![]);
        for k in 0..nt {
            let mut col: Vec<f64> = (0..members)
                .map(|m| all[m * nt + k])
                .filter(|v| v.is_finite())
                .collect();
            col.sort_by(f64::total_cmp);
            lower.push(percentile(&col, 0.05));
            upper.push(percentile(&col, 0.95));
            median.push(percentile(&col, 0.5));
        }
        p.bands.push(plot::Band {
            label: Some("5–95 % of members".into()),
            x: t.clone(),
            lower,
            upper,
            colour,
        });
        p.series
            .push(Series::new(t.clone(), median, Stroke::Solid, colour).labelled("median"));
        if name == "ice_edge_latitude_north" {
            p.y_range = Some((-4.0, 94.0));
        }
        panels.push(p);
    }
    Ok(Figure {
        title: title.to_string(),
        panels,
        width_px: 1200,
        height_px: 1000,
    })
}

/// Legend text of a combination of stable kinds (bits as in `stable_kinds`).
fn kinds_label(mask: i64, names: &[&str]) -> String {
    let parts: Vec<String> = names
        .iter()
        .enumerate()
        .filter(|(b, _)| mask & (1 << b) != 0)
        .map(|(_, n)| n.replace('_', " "))
        .collect();
    if parts.is_empty() {
        "no stable state".into()
    } else {
        parts.join(" + ")
    }
}

/// The map of which stable climates exist, one class per combination of kinds present
/// (ordered by the number of stable states, so lightness rises with it), fold lines over it.
fn regimes_map(r: &NcReader, title: &str) -> Result<HeatMap, Error> {
    let p1 = read(r, "p1")?;
    let p2 = read(r, "p2")?;
    let (n1, n2) = (p1.len(), p2.len());
    let kinds = read(r, "stable_kinds")?;
    let counts = read(r, "stable_count")?;
    let meanings = r
        .var_attr_str("stable_kinds", "flag_meanings")?
        .unwrap_or_else(|| "ice_free small_cap large_cap snowball".into());
    let names: Vec<&str> = meanings.split_whitespace().collect();
    // Classes: (stable count, mask) pairs present, in order.
    let mut classes: Vec<(i64, i64)> = kinds
        .iter()
        .zip(&counts)
        .map(|(k, c)| (*c as i64, *k as i64))
        .collect();
    classes.sort_unstable();
    classes.dedup();
    let class_of = |c: i64, k: i64| classes.iter().position(|x| *x == (c, k)).unwrap_or(0) as f64;
    // The heat map wants z[i * ny + j] at (x[i], y[j]); the file holds (p2, p1).
    let mut z = vec![f64::NAN; n1 * n2];
    for j in 0..n2 {
        for i in 0..n1 {
            let at = j * n1 + i;
            z[i * n2 + j] = class_of(counts[at] as i64, kinds[at] as i64);
        }
    }
    let categorical: Vec<(f64, String)> = classes
        .iter()
        .enumerate()
        .map(|(v, (c, k))| {
            let n = match c {
                1 => "1 stable state".to_string(),
                c => format!("{c} stable states"),
            };
            (v as f64, format!("{n}: {}", kinds_label(*k, &names)))
        })
        .collect();
    let line = read(r, "fold_line")?;
    let fx = read(r, "fold_p1")?;
    let fy = read(r, "fold_p2")?;
    let mut overlay = Vec::new();
    let mut k = 0;
    while k < line.len() {
        let start = k;
        while k < line.len() && line[k] == line[start] {
            k += 1;
        }
        let mut s = Series::new(
            fx[start..k].to_vec(),
            fy[start..k].to_vec(),
            if k - start > 1 {
                Stroke::Solid
            } else {
                Stroke::Markers
            },
            0,
        );
        if overlay.is_empty() {
            s = s.labelled("fold lines (tipping)");
        }
        overlay.push(s);
    }
    let key1 = r.attr_str("control_key")?.unwrap_or_default();
    let key2 = r.attr_str("row_control_key")?.unwrap_or_default();
    Ok(HeatMap {
        title: format!("{title}: stable climates"),
        x: p1,
        y: p2,
        z,
        x_label: control_label(&key1),
        y_label: control_label(&key2),
        z_label: "Stable climates".into(),
        overlay,
        categorical: Some(categorical),
        width_px: 1300,
        height_px: 800,
        ..Default::default()
    })
}

/// A short axis name for a control key.
fn control_label(key: &str) -> String {
    match key {
        "insolation.solar_constant" => "Solar constant S0 (W m⁻²)".into(),
        "greenhouse.co2_ppm" => "CO₂ (ppm)".into(),
        "longwave.a" => "OLR at 0 °C, A (W m⁻²)".into(),
        "longwave.b" => "OLR slope B (W m⁻² K⁻¹)".into(),
        "albedo.ice" => "Ice albedo".into(),
        "forcing.constant_wm2" => "Additive forcing (W m⁻²)".into(),
        "forcing.solar_scale" => "Solar scale (1)".into(),
        "transport.diffusivity" => "Diffusivity D (W m⁻² K⁻¹)".into(),
        other => other.to_string(),
    }
}

/// Contiguous runs of points with the same branch and stability, as solid (stable) or dashed
/// (unstable) series.
fn branch_series(
    control: &[f64],
    y: &[f64],
    stable: &[f64],
    branch: &[f64],
    labelled: &mut [bool; 2],
) -> Vec<Series> {
    let mut out = Vec::new();
    let mut start = 0;
    for k in 1..=control.len() {
        let cut = k == control.len() || stable[k] != stable[start] || branch[k] != branch[start];
        if cut {
            // Overlap one point so runs join up at stability changes.
            let end = if k < control.len() && branch[k] == branch[start] {
                k + 1
            } else {
                k
            };
            let is_stable = stable[start] > 0.5;
            let mut s = Series::new(
                control[start..end].to_vec(),
                y[start..end].to_vec(),
                if is_stable { Stroke::Solid } else { Stroke::Dashed },
                if is_stable { 0 } else { 1 },
            );
            let slot = usize::from(!is_stable);
            if !labelled[slot] {
                s = s.labelled(if is_stable {
                    "stable equilibria"
                } else {
                    "unstable equilibria"
                });
                labelled[slot] = true;
            }
            out.push(s);
            start = k;
        }
    }
    out
}

fn hysteresis(r: &NcReader, title: &str, kind: &str) -> Result<Figure, Error> {
    let key = r.attr_str("control_key")?.unwrap_or_else(|| "control".into());
    let xl = control_label(&key);
    let control = read(r, "control")?;
    let edge = read(r, "ice_edge_latitude_north")?;
    let gm = read(r, "global_mean_temperature")?;
    let mut p_edge = Panel::new(xl.clone(), "Ice edge (°N)");
    let mut p_temp = Panel::new(xl, "Global mean (K)");
    // A little room beyond 0 and 90 so ice-free and snowball states are not hidden by the frame.
    p_edge.y_range = Some((-4.0, 94.0));
    let fmt = |v: f64| {
        if v.abs() >= 100.0 {
            format!("{v:.1}")
        } else {
            format!("{v:.3}")
        }
    };
    if kind == "branches" {
        let stable = read(r, "stable")?;
        let branch = read(r, "branch")?;
        let mut lab = [false; 2];
        p_edge.series = branch_series(&control, &edge, &stable, &branch, &mut lab);
        let mut lab = [false; 2];
        p_temp.series = branch_series(&control, &gm, &stable, &branch, &mut lab);
        let fc = read(r, "fold_control")?;
        let fe = read(r, "fold_ice_edge_latitude_north")?;
        let fg = read(r, "fold_global_mean_temperature")?;
        for k in 0..fc.len() {
            let text = format!("fold {}", fmt(fc[k]));
            p_edge.markers.push(plot::Marker {
                x: fc[k],
                y: fe[k],
                text: text.clone(),
            });
            p_temp.markers.push(plot::Marker {
                x: fc[k],
                y: fg[k],
                text,
            });
        }
    } else {
        let dir = read(r, "direction")?;
        for (sign, stroke, colour, label) in [
            (1.0, Stroke::ArrowsUp, 2, "sweep, control rising"),
            (-1.0, Stroke::ArrowsDown, 3, "sweep, control falling"),
        ] {
            let pick = |v: &[f64]| -> Vec<f64> {
                v.iter()
                    .zip(&dir)
                    .filter(|(_, d)| **d == sign)
                    .map(|(x, _)| *x)
                    .collect()
            };
            p_edge
                .series
                .push(Series::new(pick(&control), pick(&edge), stroke, colour).labelled(label));
            p_temp
                .series
                .push(Series::new(pick(&control), pick(&gm), stroke, colour).labelled(label));
        }
        let tc = read(r, "tipping_control")?;
        let tb = read(r, "tipping_ice_edge_before")?;
        let tg = read(r, "tipping_global_mean_before")?;
        for k in 0..tc.len() {
            let text = format!("tips at {}", fmt(tc[k]));
            p_edge.markers.push(plot::Marker {
                x: tc[k],
                y: tb[k],
                text: text.clone(),
            });
            p_temp.markers.push(plot::Marker {
                x: tc[k],
                y: tg[k],
                text,
            });
        }
    }
    Ok(Figure {
        title: title.to_string(),
        panels: vec![p_edge, p_temp],
        width_px: 1200,
        height_px: 1100,
    })
}
