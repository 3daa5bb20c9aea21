//! Pictures of output files: reads a file, builds the figures that fit its kind, and writes each
//! as SVG and PNG. Drawing itself lives in `plot` (which reads no files).

use crate::error::Error;
use crate::output::NcReader;
use crate::plot::{self, Figure, HeatMap, Panel, Series, Stroke};
use plotters::style::RGBColor;
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
    let mut written = Vec::new();
    for p in render_reader(&r, file)? {
        let (a, b) = plot::save_svg_and_png(&out_dir.join(format!("{stem}-{}", p.suffix)), &p.svg)
            .map_err(plot_err)?;
        written.push(a);
        written.push(b);
    }
    Ok(written)
}

/// One drawn picture of a file: its name suffix (e.g. `map`), SVG text, and where every
/// text, legend and data line went (for checks of the layout).
pub struct Rendered {
    /// Suffix of the picture's file name, e.g. `hysteresis`.
    pub suffix: String,
    /// The SVG text.
    pub svg: String,
    /// Boxes of texts and legends, plot areas with their data, class colours.
    pub layout: plot::LayoutReport,
}

/// Draws every picture of `file` without writing anything.
pub fn render(file: &Path) -> Result<Vec<Rendered>, Error> {
    let r = NcReader::open(file)?;
    render_reader(&r, file)
}

fn render_reader(r: &NcReader, file: &Path) -> Result<Vec<Rendered>, Error> {
    let kind = crate::output::damage::icefold_kind(r)?;
    crate::output::damage::check(r, &kind)?;
    let full_title = r.attr_str("title")?.unwrap_or_default();
    // Figure titles: the part before a colon when that part says enough; long titles wrap.
    let title = match full_title.split_once(':') {
        Some((h, _)) if h.chars().count() >= 25 => h.to_string(),
        _ => full_title.clone(),
    };
    let title = title.as_str();
    let figures: Vec<(&str, Picture)> = match kind.as_str() {
        "run" => vec![
            ("timeseries", Picture::Chart(run_timeseries(r, title)?)),
            ("map", Picture::Map(Box::new(run_map(r, title)?))),
            ("profile", Picture::Chart(run_profile(r, title)?)),
        ],
        "equilibrium" => vec![
            ("profile", Picture::Chart(equilibrium_profile(r, title)?)),
            ("spectrum", Picture::Chart(equilibrium_spectrum(r, title)?)),
        ],
        "branches" | "sweep" => vec![("hysteresis", Picture::Chart(hysteresis(r, title, &kind)?))],
        "ensemble" => vec![
            ("spread", Picture::Chart(ensemble_spread(r, title)?)),
            ("outcomes", Picture::Chart(ensemble_outcomes(r, title)?)),
        ],
        "regimes" => vec![("map", Picture::Map(Box::new(regimes_map(r, title)?)))],
        other => {
            return Err(Error::Usage(format!(
                "{}: no pictures for file kind `{other}` (known: run, equilibrium, sweep, branches, ensemble, regimes)",
                file.display()
            )))
        }
    };
    let mut out = Vec::new();
    for (suffix, picture) in figures {
        let (svg, layout) = match &picture {
            Picture::Chart(f) => plot::figure_layout(f),
            Picture::Map(m) => plot::heatmap_layout(m),
        }
        .map_err(|e| {
            Error::Other(format!(
                "{}: cannot draw the {suffix} picture: {e}",
                file.display()
            ))
        })?;
        out.push(Rendered {
            suffix: suffix.to_string(),
            svg,
            layout,
        });
    }
    Ok(out)
}

/// One picture of a file: a line chart or a map.
enum Picture {
    Chart(Figure),
    Map(Box<HeatMap>),
}

/// Records per year when a run's records are closer than a year apart (a seasonal cycle is
/// resolved), else `None`.
fn records_per_year(t: &[f64]) -> Option<usize> {
    let mut d: Vec<f64> = t.windows(2).map(|w| w[1] - w[0]).filter(|v| *v > 0.0).collect();
    if d.is_empty() {
        return None;
    }
    d.sort_by(f64::total_cmp);
    let per = (1.0 / d[d.len() / 2]).round();
    (per >= 2.0 && t.len() >= 2 * per as usize).then_some(per as usize)
}

/// Mean, lowest and highest of `v` over consecutive blocks of `per` records (one model year
/// each), at the mean time of each block; a last incomplete block is left out. NaN values
/// are skipped; a block with none finite gives NaN.
struct Annual {
    t: Vec<f64>,
    mean: Vec<f64>,
    lo: Vec<f64>,
    hi: Vec<f64>,
}

fn annual(t: &[f64], v: &[f64], per: usize) -> Annual {
    let mut out = Annual {
        t: vec![],
        mean: vec![],
        lo: vec![],
        hi: vec![],
    };
    for (tb, vb) in t.chunks_exact(per).zip(v.chunks_exact(per)) {
        let fin: Vec<f64> = vb.iter().copied().filter(|x| x.is_finite()).collect();
        out.t.push(tb.iter().sum::<f64>() / per as f64);
        if fin.is_empty() {
            out.mean.push(f64::NAN);
            out.lo.push(f64::NAN);
            out.hi.push(f64::NAN);
        } else {
            out.mean.push(fin.iter().sum::<f64>() / fin.len() as f64);
            out.lo.push(fin.iter().copied().fold(f64::INFINITY, f64::min));
            out.hi.push(fin.iter().copied().fold(f64::NEG_INFINITY, f64::max));
        }
    }
    out
}

/// Adds a time series to `p`: as it is, or, when the records resolve seasons (`per` records a
/// year), as its annual mean over the shaded range within each year.
#[allow(clippy::too_many_arguments)]
fn add_series(
    p: &mut Panel,
    t: &[f64],
    v: Vec<f64>,
    stroke: Stroke,
    colour: usize,
    label: &str,
    per: Option<usize>,
) {
    match per {
        None => p
            .series
            .push(Series::new(t.to_vec(), v, stroke, colour).labelled(label)),
        Some(per) => {
            let a = annual(t, &v, per);
            p.bands.push(plot::Band {
                label: Some(format!("{label}: seasonal range")),
                x: a.t.clone(),
                lower: a.lo,
                upper: a.hi,
                colour,
            });
            p.series
                .push(Series::new(a.t, a.mean, stroke, colour).labelled(format!("{label}: annual mean")));
        }
    }
}

fn run_timeseries(r: &NcReader, title: &str) -> Result<Figure, Error> {
    let t = read(r, "time")?;
    let per = records_per_year(&t);
    let mut temp = Panel::new("Time (year)", "Global mean (K)");
    add_series(
        &mut temp,
        &t,
        read(r, "global_mean_temperature")?,
        Stroke::Solid,
        0,
        "global-mean temperature",
        per,
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
    add_series(
        &mut edge,
        &t,
        read(r, "ice_edge_latitude_north")?,
        Stroke::Solid,
        1,
        if globe {
            "northern ice edge (°N)"
        } else {
            "northern ice edge"
        },
        per,
    );
    if globe {
        let south: Vec<f64> = read(r, "ice_edge_latitude_south")?.iter().map(|v| -v).collect();
        add_series(
            &mut edge,
            &t,
            south,
            Stroke::Dashed,
            3,
            "southern ice edge (°S)",
            per,
        );
    }
    edge.y_range = Some((-4.0, 94.0));
    let mut budget = Panel::new("Time (year)", "Forcing and imbalance (W m⁻²)");
    add_series(
        &mut budget,
        &t,
        read(r, "toa_imbalance")?,
        Stroke::Solid,
        0,
        "net heating (global mean)",
        per,
    );
    let add = read(r, "additive_forcing")?;
    if add.iter().any(|v| *v != 0.0) {
        add_series(&mut budget, &t, add, Stroke::Dashed, 1, "additive forcing", per);
    }
    let gh = read(r, "greenhouse_forcing")?;
    if gh.iter().any(|v| *v != 0.0) {
        add_series(&mut budget, &t, gh, Stroke::Dashed, 2, "greenhouse forcing", per);
    }
    let mut panels = vec![temp, edge, budget];
    let scale = read(r, "solar_scale")?;
    if scale.iter().any(|v| (*v - scale[0]).abs() > 1e-12) {
        let mut s = Panel::new("Time (year)", "Solar scale");
        add_series(&mut s, &t, scale, Stroke::Solid, 2, "insolation multiplier", per);
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

/// `v` as a mantissa of four significant digits times a power of ten with superscript
/// digits, e.g. "8.730×10⁵".
fn times_ten_to(v: f64) -> String {
    const SUP: [char; 10] = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];
    let e = v.abs().log10().floor();
    let mant = v / 10f64.powf(e);
    let mut p = String::new();
    if e < 0.0 {
        p.push('⁻');
    }
    for ch in format!("{}", e.abs() as i64).chars() {
        p.push(SUP[ch.to_digit(10).unwrap_or(0) as usize]);
    }
    format!("{mant:.3}×10{p}").replace('-', "\u{2212}")
}

/// Freezing temperature of the albedo (°C) from the file's configuration, read as typed
/// values (the registry's default if the configuration does not say).
fn freeze_c(r: &NcReader) -> Result<f64, Error> {
    let key = "albedo.freeze_temperature_c";
    Ok(r.attr_str("config_toml")?
        .and_then(|c| crate::config::raw_from_text(&c))
        .and_then(|c| c.albedo.freeze_temperature_c)
        .unwrap_or_else(|| crate::config::keys::default_number(key)))
}

/// A temperature in °C as text with a true minus sign, e.g. "−10 °C".
fn celsius(c: f64) -> String {
    format!("{c} °C").replace('-', "\u{2212}")
}

/// Cell edges of the latitude grid, from `lat_bnds`.
fn lat_edges(r: &NcReader) -> Result<Vec<f64>, Error> {
    let bnds = read(r, "lat_bnds")?;
    let mut e: Vec<f64> = bnds.chunks(2).map(|c| c[0]).collect();
    e.push(*bnds.last().unwrap_or(&90.0));
    Ok(e)
}

/// An ice-edge series for drawing over a latitude map: values on the map's frame (`lo` or
/// `hi`: no edge, the hemisphere ice free or ice covered) become gaps, so no line runs
/// along the frame.
fn off_frame(v: &[f64], lo: f64, hi: f64) -> Vec<f64> {
    v.iter()
        .map(|&x| {
            if x >= hi - 1e-6 || x <= lo + 1e-6 {
                f64::NAN
            } else {
                x
            }
        })
        .collect()
}

fn run_map(r: &NcReader, title: &str) -> Result<HeatMap, Error> {
    let t = read(r, "time")?;
    let lat = read(r, "lat")?;
    let y_edges = lat_edges(r)?;
    let (lo, hi) = (y_edges[0], y_edges[y_edges.len() - 1]);
    let z = read(r, "surface_temperature")?;
    let per = records_per_year(&t);
    let mut overlay = Vec::new();
    let mut edges = vec![read(r, "ice_edge_latitude_north")?];
    if has(r, "ice_edge_latitude_south")? {
        edges.push(read(r, "ice_edge_latitude_south")?);
    }
    for (k, e) in edges.iter().enumerate() {
        match per {
            None => {
                let mut s = Series::new(t.clone(), off_frame(e, lo, hi), Stroke::Dashed, 0);
                if k == 0 {
                    s = s.labelled("ice edge (none drawn when ice free or ice covered)");
                }
                overlay.push(s);
            }
            Some(per) => {
                // The monthly edge would hatch the map: its annual mean and range instead.
                let a = annual(&t, e, per);
                for (v, stroke, colour, label) in [
                    (a.mean, Stroke::Dashed, 0, "ice edge, annual mean"),
                    (a.lo, Stroke::Solid, 1, "ice edge, annual range"),
                    (a.hi, Stroke::Solid, 1, ""),
                ] {
                    let mut s = Series::new(a.t.clone(), off_frame(&v, lo, hi), stroke, colour);
                    if k == 0 && !label.is_empty() {
                        s = s.labelled(label);
                    }
                    overlay.push(s);
                }
            }
        }
    }
    let freeze = freeze_c(r)?;
    Ok(HeatMap {
        title: format!("{title}: surface temperature"),
        x: t,
        y: lat,
        y_edges: Some(y_edges),
        z,
        x_label: "Time (year)".into(),
        y_label: "Latitude (°N)".into(),
        z_label: "Surface temperature (K)".into(),
        // With seasons resolved the freezing isotherm swings every year and would hatch the
        // map; the ice edge's annual mean and range say where the ice is.
        contour_levels: if per.is_some() {
            Vec::new()
        } else {
            vec![(
                freeze + 273.15,
                format!("{:.2} K ({})", freeze + 273.15, celsius(freeze)),
            )]
        },
        overlay,
        smooth: per.is_some(),
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
    let edges = lat_edges(r)?;
    let ice = ice_spans(r, &edges, |v| v.last().copied())?;
    Ok(profile_figure(
        title,
        &format!("final state, year {t_end}"),
        lat,
        edges,
        ice,
        freeze_c(r)?,
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
    let edges = lat_edges(r)?;
    let ice = ice_spans(r, &edges, |v| v.first().copied())?;
    Ok(profile_figure(
        title,
        &sub,
        read(r, "lat")?,
        edges,
        ice,
        freeze_c(r)?,
        fields,
    ))
}

/// Latitude spans under ice, from the file's ice-edge latitudes (`pick` takes the value to
/// use from each series): poleward of the northern edge, and of the southern one on a globe.
fn ice_spans(
    r: &NcReader,
    edges: &[f64],
    pick: impl Fn(&[f64]) -> Option<f64>,
) -> Result<Vec<(f64, f64)>, Error> {
    let (lo, hi) = (edges[0], edges[edges.len() - 1]);
    let mut out = Vec::new();
    if let Some(n) = pick(&read(r, "ice_edge_latitude_north")?).filter(|v| v.is_finite()) {
        if n < hi {
            out.push((n.max(lo), hi));
        }
    }
    if has(r, "ice_edge_latitude_south")? {
        if let Some(s) = pick(&read(r, "ice_edge_latitude_south")?).filter(|v| v.is_finite()) {
            if s > lo {
                out.push((lo, s.min(hi)));
            }
        }
    }
    Ok(out)
}

/// The stability spectrum of an equilibrium: the decay (or growth) rate of every mode of the
/// linearised dynamics, on a logarithmic axis when the rates span more than a factor of 30.
fn equilibrium_spectrum(r: &NcReader, title: &str) -> Result<Figure, Error> {
    let re = read(r, "eigenvalue")?;
    let mut p = Panel::new("Rate |Re λ| (year⁻¹)", "Mode (1 = leading)");
    let rates: Vec<f64> = re.iter().map(|v| v.abs()).collect();
    let mode: Vec<f64> = (1..=re.len()).map(|k| k as f64).collect();
    for (sign, stroke, colour, label) in [
        (-1.0, Stroke::Markers, 0, "decaying mode (Re λ < 0)"),
        (1.0, Stroke::ArrowsUp, 2, "growing mode (Re λ > 0)"),
    ] {
        let keep = |v: &f64| if *v * sign > 0.0 { 1.0 } else { f64::NAN };
        let x: Vec<f64> = rates.iter().zip(&re).map(|(a, v)| a * keep(v)).collect();
        if x.iter().any(|v| v.is_finite()) {
            p.series
                .push(Series::new(x, mode.clone(), stroke, colour).labelled(label));
        }
    }
    p.x_log = auto_log(&rates);
    if let Some(&lead) = re.first() {
        p.markers.push(plot::Marker {
            x: lead.abs(),
            y: 1.0,
            text: format!(
                "leading {lead:.4} year⁻¹ ({} in {:.0} years)",
                if lead < 0.0 { "decays" } else { "grows" },
                1.0 / lead.abs()
            )
            .replace('-', "\u{2212}"),
        });
    }
    let stability = r.attr_str("stability")?.unwrap_or_default();
    p.title = Some(format!(
        "{stability} equilibrium: stability spectrum ({} modes)",
        re.len()
    ));
    p.y_range = Some((0.0, re.len() as f64 + 1.0));
    Ok(Figure {
        title: title.to_string(),
        panels: vec![p],
        width_px: 1200,
        height_px: 800,
    })
}

/// Whether positive values spanning more than a factor of 30 get a logarithmic axis.
fn auto_log(v: &[f64]) -> bool {
    let fin: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
    let lo = fin.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = fin.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    lo > 0.0 && hi / lo > LOG_SPAN
}

/// A positive control spanning more than this factor is drawn on a logarithmic axis.
const LOG_SPAN: f64 = 30.0;

/// Whether the axis of `var` is logarithmic: when its `spacing` attribute says `"log"`, else
/// (linear steps, or no attribute) by [`auto_log`] of its values, so a linearly stepped control
/// spanning decades is still drawn on a log axis.
fn axis_log(r: &NcReader, var: &str, values: &[f64]) -> Result<bool, Error> {
    Ok(match r.var_attr_str(var, "spacing")?.as_deref() {
        Some("log") => values.iter().all(|v| !v.is_finite() || *v > 0.0),
        _ => auto_log(values),
    })
}

/// Temperature and the three terms of the energy budget against latitude over the whole
/// grid (`edges`: cell boundaries), with the ice-covered `spans` of latitude shaded and the
/// freezing temperature (`freeze`, °C) drawn; `fields` holds surface temperature (K),
/// absorbed sunlight, OLR and transport convergence (W m-2).
fn profile_figure(
    title: &str,
    subtitle: &str,
    lat: Vec<f64>,
    edges: Vec<f64>,
    spans: Vec<(f64, f64)>,
    freeze: f64,
    fields: [Vec<f64>; 4],
) -> Figure {
    let [temp, sun, olr, conv] = fields;
    let range = (edges[0], edges[edges.len() - 1]);
    let tf = freeze + 273.15;
    let shade_label = Some("ice (poleward of the ice edge)".to_string());
    let mut p_temp = Panel::new("Latitude (°N)", "Temperature (K)");
    p_temp.title = Some(subtitle.to_string());
    p_temp.x_range = Some(range);
    p_temp.shade_x = spans.clone();
    p_temp.shade_label = shade_label.clone();
    p_temp
        .series
        .push(Series::new(lat.clone(), temp, Stroke::Solid, 0).labelled("surface temperature"));
    p_temp.series.push(
        Series::new(vec![range.0, range.1], vec![tf, tf], Stroke::Dashed, 2)
            .labelled(format!("freezing, {}", celsius(freeze))),
    );
    let mut flux = Panel::new("Latitude (°N)", "Flux (W m⁻²)");
    flux.x_range = Some(range);
    flux.shade_x = spans;
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
                    format!("members: every {} of {members}, in sample order", ordinal(every))
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
            // A median between two groups of members is a state no member has.
            p.title = Some("band and median can hide two outcomes: see the outcomes picture".into());
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

/// "2nd", "5th", ... (English ordinal of `n`).
fn ordinal(n: usize) -> String {
    let suffix = match (n % 10, n % 100) {
        (1, x) if x != 11 => "st",
        (2, x) if x != 12 => "nd",
        (3, x) if x != 13 => "rd",
        _ => "th",
    };
    if n == 1 {
        "one".into()
    } else {
        format!("{n}{suffix}")
    }
}

/// Where the members ended: a histogram of the final northern ice edge, then for every
/// sampled parameter a scatter of its value against that final edge (finished members only).
fn ensemble_outcomes(r: &NcReader, title: &str) -> Result<Figure, Error> {
    let nt = r.dim_len("time")?;
    let members = r.dim_len("member")?;
    let status = read(r, "member_status")?;
    let edge = read(r, "ice_edge_latitude_north")?;
    let ok: Vec<usize> = (0..members)
        .filter(|&m| status.get(m).copied().unwrap_or(1.0) == 0.0)
        .filter(|&m| edge.get((m + 1) * nt - 1).is_some_and(|v| v.is_finite()))
        .collect();
    let last: Vec<f64> = ok.iter().map(|&m| edge[(m + 1) * nt - 1]).collect();
    let xl = "Final northern ice edge (°N)";
    let mut hist = Panel::new(xl, "Members");
    hist.title = Some(format!(
        "where the {} finished members ended (bins of {HIST_BIN_DEG}°)",
        ok.len()
    ));
    // Bins of HIST_BIN_DEG degrees over 0..90 (the last one closed at 90, the ice-free value).
    let nb = (90.0 / HIST_BIN_DEG).round() as usize;
    let mut counts = vec![0usize; nb];
    for v in &last {
        let b = ((v / HIST_BIN_DEG).floor().max(0.0) as usize).min(nb - 1);
        counts[b] += 1;
    }
    let (mut sx, mut sy) = (vec![0.0], vec![0.0]);
    for (b, &c) in counts.iter().enumerate() {
        let (a, z) = (b as f64 * HIST_BIN_DEG, (b + 1) as f64 * HIST_BIN_DEG);
        sx.extend([a, z]);
        sy.extend([c as f64, c as f64]);
    }
    sx.push(90.0);
    sy.push(0.0);
    hist.bands.push(plot::Band {
        label: None,
        x: sx.clone(),
        lower: vec![0.0; sx.len()],
        upper: sy.clone(),
        colour: 1,
    });
    hist.series
        .push(Series::new(sx, sy, Stroke::Solid, 1).labelled("members per bin"));
    hist.x_range = Some((-2.0, 92.0));
    let top = counts.iter().copied().max().unwrap_or(0) as f64;
    hist.y_range = Some((0.0, (1.15 * top).max(1.0)));
    let mut panels = vec![hist];
    let keys = r.attr_str("sampled_keys")?.unwrap_or_default();
    for (j, key) in keys.split(',').filter(|k| !k.is_empty()).enumerate() {
        let name = format!("sampled_{}", key.replace('.', "_"));
        if !has(r, &name)? {
            continue;
        }
        let v = read(r, &name)?;
        let y: Vec<f64> = ok
            .iter()
            .map(|&m| v.get(m).copied().unwrap_or(f64::NAN))
            .collect();
        let mut p = Panel::new(xl, control_label(key));
        p.series.push(
            Series::new(last.clone(), y, Stroke::Markers, [0, 2, 3][j % 3])
                .labelled(format!("one member: sampled {key}")),
        );
        p.x_range = Some((-2.0, 92.0));
        panels.push(p);
    }
    let h = 320 * panels.len() as u32 + 150;
    Ok(Figure {
        title: format!("{title}: outcomes"),
        panels,
        width_px: 1200,
        height_px: h,
    })
}

/// Bin width of the histogram of final ice edges, degrees of latitude.
const HIST_BIN_DEG: f64 = 3.0;

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
    // The classes change at the fold lines: the map's colours follow them across each row.
    let class_lines: Vec<Vec<(f64, f64)>> = overlay
        .iter()
        .filter(|s| s.x.len() > 1)
        .map(|s| s.x.iter().copied().zip(s.y.iter().copied()).collect())
        .collect();
    let key1 = r.attr_str("control_key")?.unwrap_or_default();
    let key2 = r.attr_str("row_control_key")?.unwrap_or_default();
    let (x_log, y_log) = (axis_log(r, "p1", &p1)?, axis_log(r, "p2", &p2)?);
    let class_colours =
        (categorical.len() <= REGIME_PALETTE.len()).then(|| REGIME_PALETTE[..categorical.len()].to_vec());
    let split = r.attr_f64("small_cap_min_latitude")?;
    let note = split.map(|v| {
        format!(
            "Small and large caps are named by their ice edge, poleward or equatorward of {v}°N (regimes.small_cap_min_latitude_deg): a naming convention, not a tipping line. Only the white-cased lines are folds."
        )
    });
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
        class_colours,
        class_lines,
        note,
        x_log,
        y_log,
        width_px: 1300,
        height_px: 800,
        ..Default::default()
    })
}

/// Colours of the regime classes, in class order (fewest stable states first): a qualitative
/// palette whose lightness rises by at least 10 L* units per entry (so it reads in greyscale)
/// and whose hues alternate (indigo, wine, teal, orange, green, lavender, yellow) so that
/// neighbours differ also for red-green colour-blind readers. tests/picture_quality.rs checks
/// the distances. Beyond seven classes the map falls back to evenly spaced viridis.
const REGIME_PALETTE: [RGBColor; 7] = [
    RGBColor(0x26, 0x18, 0x5F),
    RGBColor(0x7E, 0x1E, 0x3A),
    RGBColor(0x16, 0x67, 0x7A),
    RGBColor(0xBD, 0x5F, 0x12),
    RGBColor(0x6F, 0xA8, 0x3A),
    RGBColor(0xBF, 0xB0, 0xEE),
    RGBColor(0xF6, 0xE2, 0x7F),
];

/// A short axis name for a control key (the registry's picture label).
fn control_label(key: &str) -> String {
    crate::config::keys::label(key)
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
    let log = axis_log(r, "control", &control)?;
    p_edge.x_log = log;
    p_temp.x_log = log;
    // A little room beyond 0 and 90 so ice-free and snowball states are not hidden by the frame.
    p_edge.y_range = Some((-4.0, 94.0));
    let fmt = |v: f64| {
        if v.abs() >= 1e5 {
            times_ten_to(v)
        } else if v.abs() >= 100.0 {
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
        let corner = if has(r, "fold_corner")? {
            read(r, "fold_corner")?
        } else {
            vec![0.0; fc.len()]
        };
        for k in 0..fc.len() {
            // A corner where the cap reaches the pole or the equator is no smooth fold.
            let what = match (corner.get(k).copied().unwrap_or(0.0) > 0.5, fe[k]) {
                (false, _) => "fold",
                (true, e) if e >= 89.0 => "cap meets pole",
                (true, e) if e <= 1.0 => "cap meets equator",
                (true, _) => "corner",
            };
            let text = format!("{what} {}", fmt(fc[k]));
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
            (1.0, Stroke::ArrowsUp, 0, "control rising"),
            (-1.0, Stroke::ArrowsDown, 2, "control falling"),
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
        let ta = read(r, "tipping_ice_edge_after")?;
        let tg = read(r, "tipping_global_mean_before")?;
        let tga = read(r, "tipping_global_mean_after")?;
        let tdir = read(r, "tipping_direction")?;
        for k in 0..tc.len() {
            let text = format!("tips at {}", fmt(tc[k]));
            // The jump, coloured as the sweep direction that made it.
            let colour = if tdir.get(k).copied().unwrap_or(1.0) > 0.0 {
                0
            } else {
                2
            };
            p_edge.arrows.push(plot::Arrow {
                from: (tc[k], tb[k]),
                to: (tc[k], ta[k]),
                colour,
            });
            p_temp.arrows.push(plot::Arrow {
                from: (tc[k], tg[k]),
                to: (tc[k], tga[k]),
                colour,
            });
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
