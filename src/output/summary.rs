//! What an icefold output file holds, read into a typed summary: its kind, provenance, whether
//! it is complete (and how far an incomplete job got), the config's main choices, dimensions,
//! key results per kind and its variables. `icefold inspect` prints it as text or JSON.

use super::{NcReader, OutputError};
use serde::Serialize;

/// The summary of one file.
#[derive(Debug, Clone, Serialize)]
pub struct FileSummary {
    /// The file's path as given.
    pub file: String,
    /// `icefold_kind` ("run", "sweep", ...), or "(not an icefold file)".
    pub kind: String,
    /// Why the file is damaged (variables missing or inconsistent), if it is.
    pub damaged: Option<String>,
    /// `title`.
    pub title: Option<String>,
    /// `icefold_version` of the program that wrote it.
    pub icefold_version: Option<String>,
    /// `creation_time`.
    pub creation_time: Option<String>,
    /// `command_line`.
    pub command_line: Option<String>,
    /// `complete` (`None`: not recorded).
    pub complete: Option<bool>,
    /// How far an incomplete file's job got.
    pub how_far: Option<String>,
    /// `interrupted_by` (signal name).
    pub interrupted_by: Option<String>,
    /// `failure` (numerical failure message).
    pub failure: Option<String>,
    /// The main choices of the config the file was made with.
    pub config: Option<ConfigFacts>,
    /// Dimensions in file order.
    pub dimensions: Vec<Dimension>,
    /// Results of its kind.
    pub details: Option<Details>,
    /// First and last time of a file with a `time` variable (not ensembles).
    pub time: Option<TimeSpan>,
    /// First and last values of the global series present (not ensembles).
    pub series: Vec<SeriesEnds>,
    /// Gregory regression of a run (attributes).
    pub gregory: Option<Gregory>,
    /// Doubled-CO2 sensitivity of a run (attributes).
    pub doubling: Option<Doubling>,
    /// Why the sensitivity is missing, when the file says.
    pub sensitivity_note: Option<String>,
    /// Variable names.
    pub variables: Vec<String>,
}

/// Main config choices, as the resolved config TOML stored in the file has them.
#[derive(Debug, Clone, Serialize)]
pub struct ConfigFacts {
    /// `grid.domain`.
    pub domain: Option<toml::Value>,
    /// `grid.bands`.
    pub bands: Option<toml::Value>,
    /// `grid.spacing`.
    pub spacing: Option<toml::Value>,
    /// `insolation.kind`.
    pub insolation: Option<toml::Value>,
    /// `albedo.kind`.
    pub albedo: Option<toml::Value>,
    /// `longwave.kind`.
    pub longwave: Option<toml::Value>,
    /// `transport.kind`.
    pub transport: Option<toml::Value>,
    /// `insolation.solar_constant`, W m-2.
    pub solar_constant: Option<toml::Value>,
    /// `greenhouse.co2_ppm`, ppm.
    pub co2_ppm: Option<toml::Value>,
}

/// One dimension.
#[derive(Debug, Clone, Serialize)]
pub struct Dimension {
    /// Name.
    pub name: String,
    /// Current length.
    pub length: usize,
    /// Whether it is unlimited (a record dimension).
    pub unlimited: bool,
}

/// The time span of a file's records, years.
#[derive(Debug, Clone, Serialize)]
pub struct TimeSpan {
    /// First time.
    pub first: f64,
    /// Last time.
    pub last: f64,
    /// Records.
    pub records: usize,
}

/// First and last value of a series.
#[derive(Debug, Clone, Serialize)]
pub struct SeriesEnds {
    /// Variable.
    pub name: String,
    /// First value.
    pub first: f64,
    /// Last value.
    pub last: f64,
    /// Units.
    pub units: String,
}

/// Gregory regression (run attributes).
#[derive(Debug, Clone, Serialize)]
pub struct Gregory {
    /// Effective feedback, W m-2 K-1.
    pub feedback: f64,
    /// Effective forcing, W m-2.
    pub forcing: f64,
    /// Coefficient of determination.
    pub r2: f64,
    /// Records in the fit.
    pub records: i64,
}

/// Doubled-CO2 sensitivity (run attributes).
#[derive(Debug, Clone, Serialize)]
pub struct Doubling {
    /// Equilibrium warming, K.
    pub ecs: f64,
    /// Forcing of doubling, W m-2.
    pub forcing: f64,
    /// Equilibrium feedback, W m-2 K-1.
    pub feedback: f64,
    /// Ice edge before, degrees.
    pub ice_edge_base: f64,
    /// Ice edge after, degrees.
    pub ice_edge_doubled: f64,
    /// Local ice-edge sensitivity, degrees per W m-2.
    pub ice_edge_sensitivity: f64,
}

/// Results of each file kind.
#[derive(Debug, Clone, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Details {
    /// An ensemble.
    Ensemble(EnsembleFacts),
    /// A sweep.
    Sweep(SweepFacts),
    /// Branches.
    Branches(BranchesFacts),
    /// A regime map.
    Regimes(RegimesFacts),
    /// An equilibrium.
    Equilibrium(EquilibriumFacts),
}

/// Ensemble members, samples and spreads.
#[derive(Debug, Clone, Serialize)]
pub struct EnsembleFacts {
    /// Members in the file.
    pub members: usize,
    /// Index of the first.
    pub member_first: i64,
    /// Members of the whole ensemble.
    pub members_total: i64,
    /// Sampling seed.
    pub seed: i64,
    /// `K/N` of a shard.
    pub shard: Option<String>,
    /// Each sampled key.
    pub sampled: Vec<Sampled>,
    /// Spread of the final values of the member series.
    pub final_values: Vec<Spread>,
    /// Spread of per-member diagnostics.
    pub diagnostics: Vec<Spread>,
    /// Members that failed.
    pub failed: usize,
    /// The first failure's message.
    pub first_failure: Option<String>,
}

/// One sampled key.
#[derive(Debug, Clone, Serialize)]
pub struct Sampled {
    /// Dotted key.
    pub key: String,
    /// Its distribution as described in the file.
    pub distribution: String,
    /// Smallest value drawn.
    pub min: f64,
    /// Largest value drawn.
    pub max: f64,
}

/// Minimum, median and maximum of the finite values of a variable (`None`: none finite).
#[derive(Debug, Clone, Serialize)]
pub struct Spread {
    /// Variable.
    pub name: String,
    /// Units.
    pub units: String,
    /// Minimum.
    pub min: Option<f64>,
    /// Median (the upper one of an even count).
    pub median: Option<f64>,
    /// Maximum.
    pub max: Option<f64>,
}

/// The control of a sweep or branches file.
#[derive(Debug, Clone, Serialize)]
pub struct Control {
    /// Dotted key.
    pub key: String,
    /// Units.
    pub units: String,
    /// First value.
    pub from: f64,
    /// Last value.
    pub to: f64,
}

/// Sweep results.
#[derive(Debug, Clone, Serialize)]
pub struct SweepFacts {
    /// The control.
    pub control: Control,
    /// Tipping points.
    pub tipping: Vec<TippingFact>,
    /// Hysteresis width and its text, when the file has one.
    pub hysteresis: Option<Hysteresis>,
    /// `control_spacing`.
    pub spacing: Option<String>,
}

/// A tipping point of a sweep.
#[derive(Debug, Clone, Serialize)]
pub struct TippingFact {
    /// Where it is (`None`: unresolved within its bracket).
    pub control: Option<f64>,
    /// Found with the control rising (else falling).
    pub rising: bool,
    /// Bracket low end.
    pub bracket_low: f64,
    /// Bracket high end.
    pub bracket_high: f64,
}

/// A sweep's hysteresis.
#[derive(Debug, Clone, Serialize)]
pub struct Hysteresis {
    /// Width in the control's units (NaN when not measured).
    pub width: f64,
    /// Why it is missing.
    pub missing: Option<String>,
    /// The sentence `inspect` prints.
    pub text: String,
}

/// Branches results.
#[derive(Debug, Clone, Serialize)]
pub struct BranchesFacts {
    /// The control.
    pub control: Control,
    /// Folds: control and northern ice edge, degrees.
    pub folds: Vec<Located>,
    /// Branches in the file.
    pub branches: usize,
    /// Branch ends where the trace stopped short.
    pub short_ends: Vec<ShortEnd>,
    /// Branch points (globe files).
    pub branch_points: Option<Vec<BranchPointFact>>,
    /// Asymmetric branches (globe files).
    pub asymmetric: Option<usize>,
}

/// A control value with its northern ice edge, degrees.
#[derive(Debug, Clone, Serialize)]
pub struct Located {
    /// Control value.
    pub control: f64,
    /// Ice edge, degrees.
    pub ice_edge: f64,
}

/// A branch end where the corrector got stuck or the point limit stopped the trace.
#[derive(Debug, Clone, Serialize)]
pub struct ShortEnd {
    /// Branch index.
    pub branch: usize,
    /// "first" or "last" point.
    pub side: String,
    /// Control there.
    pub control: f64,
    /// Stuck (else the point limit).
    pub stuck: bool,
}

/// A branch point of a globe file.
#[derive(Debug, Clone, Serialize)]
pub struct BranchPointFact {
    /// Control.
    pub control: f64,
    /// Ice edge, degrees.
    pub ice_edge: f64,
    /// A corner of the step albedo.
    pub corner: bool,
    /// Converged (else the nearest traced point).
    pub converged: bool,
}

/// Regime-map results.
#[derive(Debug, Clone, Serialize)]
pub struct RegimesFacts {
    /// The column (x) and row (y) controls.
    pub axes: [Axis; 2],
    /// `(n, cells)`: cells with `n` stable states.
    pub stable_counts: Vec<(usize, usize)>,
    /// Each kind of stable state and the cells having it.
    pub kinds: Vec<(String, usize)>,
    /// `kind_definitions`.
    pub kind_definitions: Option<String>,
    /// Rows with stuck branch ends: `(row value, ends)` (`None`: not recorded).
    pub stuck_rows: Option<Vec<(f64, f64)>>,
    /// Fold-line count.
    pub fold_lines: f64,
    /// Vertices of all fold lines.
    pub fold_vertices: usize,
    /// Each fold line.
    pub lines: Vec<FoldLineFact>,
}

/// One control axis of a regime map.
#[derive(Debug, Clone, Serialize)]
pub struct Axis {
    /// Dotted key.
    pub key: String,
    /// First value.
    pub from: f64,
    /// Last value.
    pub to: f64,
    /// Units.
    pub units: String,
    /// Number of values.
    pub values: usize,
}

/// One fold line of a regime map: its ends.
#[derive(Debug, Clone, Serialize)]
pub struct FoldLineFact {
    /// Line number.
    pub line: f64,
    /// Column control at both ends.
    pub p1: [f64; 2],
    /// Row control at both ends.
    pub p2: [f64; 2],
    /// Ice edge at both ends, degrees.
    pub ice_edge: [f64; 2],
    /// Vertices.
    pub vertices: usize,
}

/// An equilibrium's state.
#[derive(Debug, Clone, Serialize)]
pub struct EquilibriumFacts {
    /// Global mean, K.
    pub global_mean: f64,
    /// Northern ice edge, degrees.
    pub ice_edge: f64,
    /// Stability.
    pub stability: String,
    /// Leading eigenvalue, per year.
    pub leading_eigenvalue: f64,
    /// Residual, W m-2.
    pub residual: f64,
}

/// Read the summary of an open file.
pub fn summarize(r: &NcReader) -> Result<FileSummary, OutputError> {
    let kind = r
        .attr_str("icefold_kind")?
        .unwrap_or_else(|| "(not an icefold file)".into());
    let complete = r.attr_i64("complete")?;
    let vars = r.var_names()?;
    let mut dimensions = Vec::new();
    for d in r.dim_names()? {
        dimensions.push(Dimension {
            length: r.dim_len(&d).unwrap_or(0),
            unlimited: r.dim_unlimited(&d).unwrap_or(false),
            name: d,
        });
    }
    let details = match kind.as_str() {
        "ensemble" => Some(Details::Ensemble(ensemble(r)?)),
        "sweep" => Some(Details::Sweep(sweep(r)?)),
        "branches" => Some(Details::Branches(branches(r)?)),
        "regimes" => Some(Details::Regimes(regimes(r)?)),
        "equilibrium" => Some(Details::Equilibrium(equilibrium(r)?)),
        _ => None,
    };
    let (mut time, mut series) = (None, Vec::new());
    if kind != "ensemble" && vars.iter().any(|v| v == "time") {
        let t = r.read_f64("time")?;
        if let (Some(a), Some(b)) = (t.first(), t.last()) {
            time = Some(TimeSpan {
                first: *a,
                last: *b,
                records: t.len(),
            });
        }
        for (name, units) in [
            ("global_mean_temperature", "K"),
            ("ice_edge_latitude_north", "degrees"),
            ("toa_imbalance", "W m-2"),
        ] {
            if vars.iter().any(|v| v == name) {
                let v = r.read_f64(name)?;
                if let (Some(a), Some(b)) = (v.first(), v.last()) {
                    series.push(SeriesEnds {
                        name: name.into(),
                        first: *a,
                        last: *b,
                        units: units.into(),
                    });
                }
            }
        }
    }
    let nan = |v: Option<f64>| v.unwrap_or(f64::NAN);
    let gregory = match r.attr_f64("gregory_feedback_wm2_per_k")? {
        Some(feedback) => Some(Gregory {
            feedback,
            forcing: nan(r.attr_f64("gregory_forcing_wm2")?),
            r2: nan(r.attr_f64("gregory_r2")?),
            records: r.attr_i64("gregory_records")?.unwrap_or(0),
        }),
        None => None,
    };
    let doubling = match r.attr_f64("ecs_2xco2_k")? {
        Some(ecs) => Some(Doubling {
            ecs,
            forcing: nan(r.attr_f64("forcing_2xco2_wm2")?),
            feedback: nan(r.attr_f64("equilibrium_feedback_wm2_per_k")?),
            ice_edge_base: nan(r.attr_f64("ice_edge_base_deg")?),
            ice_edge_doubled: nan(r.attr_f64("ice_edge_2xco2_deg")?),
            ice_edge_sensitivity: nan(r.attr_f64("ice_edge_sensitivity_deg_per_wm2")?),
        }),
        None => None,
    };
    Ok(FileSummary {
        file: r.path().display().to_string(),
        damaged: super::damage::check(r, &kind).err().map(|e| e.to_string()),
        title: r.attr_str("title")?,
        icefold_version: r.attr_str("icefold_version")?,
        creation_time: r.attr_str("creation_time")?,
        command_line: r.attr_str("command_line")?,
        complete: complete.map(|c| c == 1),
        how_far: match complete {
            Some(c) if c != 1 => Some(how_far(r)?),
            _ => None,
        },
        interrupted_by: r.attr_str("interrupted_by")?,
        failure: r.attr_str("failure")?,
        config: r.attr_str("config_toml")?.and_then(|c| config_facts(&c)),
        kind,
        dimensions,
        details,
        time,
        series,
        gregory,
        sensitivity_note: if doubling.is_none() {
            r.attr_str("sensitivity_note")?
        } else {
            None
        },
        doubling,
        variables: vars,
    })
}

/// The main choices of a resolved config text (`None` if it does not parse).
fn config_facts(text: &str) -> Option<ConfigFacts> {
    let v = text.parse::<toml::Table>().ok()?;
    let get = |sec: &str, key: &str| v.get(sec).and_then(|t| t.get(key)).cloned();
    Some(ConfigFacts {
        domain: get("grid", "domain"),
        bands: get("grid", "bands"),
        spacing: get("grid", "spacing"),
        insolation: get("insolation", "kind"),
        albedo: get("albedo", "kind"),
        longwave: get("longwave", "kind"),
        transport: get("transport", "kind"),
        solar_constant: get("insolation", "solar_constant"),
        co2_ppm: get("greenhouse", "co2_ppm"),
    })
}

/// How far an incomplete file's job got, from the progress attributes each command writes.
fn how_far(r: &NcReader) -> Result<String, OutputError> {
    if let Some(t) = r.attr_f64("model_time_reached_years")? {
        return Ok(format!("stopped at model time {} years", years(t)));
    }
    if let Some(n) = r.attr_i64("steps_done")? {
        let at = r.attr_f64("control_reached")?;
        return Ok(format!(
            "stopped after sweep step {n}{}",
            at.map(|c| format!(", control {c}")).unwrap_or_default()
        ));
    }
    if let Some(n) = r.attr_i64("seeds_done")? {
        let total = r.attr_i64("seeds_total")?;
        return Ok(format!(
            "stopped after seed {n}{}",
            total.map(|t| format!(" of {t}")).unwrap_or_default()
        ));
    }
    if let Some(n) = r.attr_i64("rows_done")? {
        let total = r.attr_i64("rows_total")?.unwrap_or(0);
        return Ok(format!("stopped after {n} of {total} rows"));
    }
    if let Some(n) = r.attr_i64("members_done")? {
        return Ok(format!("stopped after {n} finished members"));
    }
    Ok("stopped early; how far is not recorded".into())
}

/// A time in years for people: rounded to 12 significant digits, so that 199.99999999999991
/// (the sum of many steps) reads 200 while a step of 1e-6 years still shows.
pub fn years(t: f64) -> String {
    format!("{:.11e}", t)
        .parse::<f64>()
        .map(|v| v.to_string())
        .unwrap_or_else(|_| t.to_string())
}

fn has(r: &NcReader, name: &str) -> Result<bool, OutputError> {
    Ok(r.var_names()?.iter().any(|v| v == name))
}

/// Minimum, median and maximum of the finite values of `v`.
fn spread(name: &str, units: &str, mut v: Vec<f64>) -> Spread {
    v.retain(|x| x.is_finite());
    v.sort_by(f64::total_cmp);
    Spread {
        name: name.into(),
        units: units.into(),
        min: v.first().copied(),
        median: v.get(v.len() / 2).copied(),
        max: v.last().copied(),
    }
}

fn ensemble(r: &NcReader) -> Result<EnsembleFacts, OutputError> {
    let t = r.dim_len("time")?;
    let mut sampled = Vec::new();
    for key in r
        .attr_str("sampled_keys")?
        .unwrap_or_default()
        .split(',')
        .filter(|k| !k.is_empty())
    {
        let name = super::ensemble_file::sampled_name(key);
        let v = r.read_f64(&name)?;
        let (min, max) = v.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| {
            (a.min(*x), b.max(*x))
        });
        sampled.push(Sampled {
            key: key.into(),
            distribution: r.var_attr_str(&name, "distribution")?.unwrap_or_default(),
            min,
            max,
        });
    }
    let mut final_values = Vec::new();
    if t > 0 {
        for (name, units) in [
            ("global_mean_temperature", "K"),
            ("ice_edge_latitude_north", "degrees"),
        ] {
            let all = r.read_f64(name)?;
            final_values.push(spread(name, units, all.chunks(t).map(|c| c[t - 1]).collect()));
        }
    }
    let mut diagnostics = Vec::new();
    for (name, units) in [
        ("effective_feedback_parameter", "W m-2 K-1"),
        ("climate_sensitivity_2xco2", "K"),
        ("ice_edge_sensitivity", "degrees per W m-2"),
    ] {
        if has(r, name)? {
            diagnostics.push(spread(name, units, r.read_f64(name)?));
        }
    }
    Ok(EnsembleFacts {
        members: r.dim_len("member")?,
        member_first: r.attr_i64("member_first")?.unwrap_or(0),
        members_total: r.attr_i64("members_total")?.unwrap_or(0),
        seed: r.attr_i64("seed")?.unwrap_or(0),
        shard: r.attr_str("shard")?,
        sampled,
        final_values,
        diagnostics,
        failed: r.read_f64("member_status")?.iter().filter(|v| **v != 0.0).count(),
        first_failure: r.attr_str("first_failure")?,
    })
}

fn control(r: &NcReader) -> Result<Control, OutputError> {
    Ok(Control {
        key: r.attr_str("control_key")?.unwrap_or_default(),
        units: r.attr_str("control_units")?.unwrap_or_default(),
        from: r.attr_f64("control_from")?.unwrap_or(f64::NAN),
        to: r.attr_f64("control_to")?.unwrap_or(f64::NAN),
    })
}

fn sweep(r: &NcReader) -> Result<SweepFacts, OutputError> {
    let control = control(r)?;
    let tc = r.read_f64("tipping_control")?;
    let td = r.read_f64("tipping_direction")?;
    let (lo, hi) = (
        r.read_f64("tipping_bracket_low")?,
        r.read_f64("tipping_bracket_high")?,
    );
    let tipping = tc
        .iter()
        .zip(&td)
        .enumerate()
        .map(|(k, (c, d))| TippingFact {
            control: c.is_finite().then_some(*c),
            rising: *d > 0.0,
            bracket_low: lo.get(k).copied().unwrap_or(f64::NAN),
            bracket_high: hi.get(k).copied().unwrap_or(f64::NAN),
        })
        .collect();
    let hysteresis = match r.attr_f64("hysteresis_width")? {
        Some(width) => {
            let missing = r.attr_str("hysteresis_missing")?;
            let text = crate::equilibrium::sweep::hysteresis_text(width, missing.as_deref(), &control.units);
            Some(Hysteresis {
                width,
                missing,
                text: text.trim_start_matches("hysteresis ").to_string(),
            })
        }
        None => None,
    };
    Ok(SweepFacts {
        control,
        tipping,
        hysteresis,
        spacing: r.attr_str("control_spacing")?,
    })
}

fn branches(r: &NcReader) -> Result<BranchesFacts, OutputError> {
    let control_facts = control(r)?;
    let fc = r.read_f64("fold_control")?;
    let fe = r.read_f64("fold_ice_edge_latitude_north")?;
    let folds = fc
        .iter()
        .zip(&fe)
        .map(|(c, e)| Located {
            control: *c,
            ice_edge: *e,
        })
        .collect();
    // A branch that ends stuck (its end point is where the corrector gave up) or at the point
    // limit.
    let counts = r.read_f64("branch_points")?;
    let ends = [r.read_f64("branch_end_first")?, r.read_f64("branch_end_last")?];
    let control = r.read_f64("control")?;
    let (mut short_ends, mut first) = (Vec::new(), 0usize);
    for (b, &c) in counts.iter().enumerate() {
        let c = c as usize;
        for (k, side) in ["first", "last"].iter().enumerate() {
            let at = if k == 0 {
                first
            } else {
                (first + c).saturating_sub(1)
            };
            let code = ends[k].get(b).copied();
            if code == Some(3.0) || code == Some(1.0) {
                short_ends.push(ShortEnd {
                    branch: b,
                    side: side.to_string(),
                    control: control.get(at).copied().unwrap_or(f64::NAN),
                    stuck: code == Some(3.0),
                });
            }
        }
        first += c;
    }
    // Globe files: branch points (pitchforks) and the asymmetric branches leaving them.
    let (mut branch_points, mut asymmetric) = (None, None);
    if has(r, "branch_point_control")? {
        let bc = r.read_f64("branch_point_control")?;
        let be = r.read_f64("branch_point_ice_edge_latitude_north")?;
        let corner = r.read_f64("branch_point_corner")?;
        let conv = r.read_f64("branch_point_converged")?;
        branch_points = Some(
            bc.iter()
                .zip(&be)
                .zip(corner.iter().zip(&conv))
                .map(|((c, e), (k, v))| BranchPointFact {
                    control: *c,
                    ice_edge: *e,
                    corner: *k != 0.0,
                    converged: *v != 0.0,
                })
                .collect(),
        );
        asymmetric = Some(
            r.read_f64("branch_asymmetric")?
                .iter()
                .filter(|v| **v != 0.0)
                .count(),
        );
    }
    Ok(BranchesFacts {
        control: control_facts,
        folds,
        branches: r.dim_len("branches")?,
        short_ends,
        branch_points,
        asymmetric,
    })
}

fn equilibrium(r: &NcReader) -> Result<EquilibriumFacts, OutputError> {
    let first = |name: &str| -> Result<f64, OutputError> {
        if !has(r, name)? {
            return Ok(f64::NAN);
        }
        Ok(r.read_f64(name)?.first().copied().unwrap_or(f64::NAN))
    };
    Ok(EquilibriumFacts {
        global_mean: first("global_mean_temperature")?,
        ice_edge: first("ice_edge_latitude_north")?,
        stability: r.attr_str("stability")?.unwrap_or_default(),
        leading_eigenvalue: r.attr_f64("leading_eigenvalue")?.unwrap_or(f64::NAN),
        residual: r.attr_f64("residual_wm2")?.unwrap_or(f64::NAN),
    })
}

fn regimes(r: &NcReader) -> Result<RegimesFacts, OutputError> {
    let axis = |pre: &str, var: &str| -> Result<Axis, OutputError> {
        Ok(Axis {
            key: r.attr_str(&format!("{pre}_key"))?.unwrap_or_default(),
            from: r.attr_f64(&format!("{pre}_from"))?.unwrap_or(f64::NAN),
            to: r.attr_f64(&format!("{pre}_to"))?.unwrap_or(f64::NAN),
            units: r.attr_str(&format!("{pre}_units"))?.unwrap_or_default(),
            values: r.dim_len(var)?,
        })
    };
    let counts = r.read_f64("stable_count")?;
    let most = counts.iter().copied().fold(0.0, f64::max) as usize;
    let stable_counts = (0..=most)
        .map(|n| (n, counts.iter().filter(|v| **v as usize == n).count()))
        .collect();
    let kinds_v = r.read_f64("stable_kinds")?;
    let names = r
        .var_attr_str("stable_kinds", "flag_meanings")?
        .unwrap_or_default();
    let kinds = names
        .split_whitespace()
        .enumerate()
        .map(|(b, n)| {
            let c = kinds_v.iter().filter(|v| (**v as i64) & (1 << b) != 0).count();
            (n.to_string(), c)
        })
        .collect();
    // Rows with a branch that ends stuck: their map is incomplete beyond that control.
    let stuck_rows = if has(r, "stuck_ends")? {
        let stuck = r.read_f64("stuck_ends")?;
        let p2 = r.read_f64("p2")?;
        Some(
            stuck
                .iter()
                .zip(&p2)
                .filter(|(n, _)| **n > 0.0)
                .map(|(n, v)| (*v, *n))
                .collect(),
        )
    } else {
        None
    };
    let line = r.read_f64("fold_line")?;
    let p1 = r.read_f64("fold_p1")?;
    let p2 = r.read_f64("fold_p2")?;
    let edge = r.read_f64("fold_ice_edge_latitude_north")?;
    let mut lines = Vec::new();
    let mut k = 0;
    while k < line.len() {
        let start = k;
        while k < line.len() && line[k] == line[start] {
            k += 1;
        }
        let end = k - 1;
        lines.push(FoldLineFact {
            line: line[start],
            p1: [p1[start], p1[end]],
            p2: [p2[start], p2[end]],
            ice_edge: [edge[start], edge[end]],
            vertices: end - start + 1,
        });
    }
    Ok(RegimesFacts {
        axes: [axis("control", "p1")?, axis("row_control", "p2")?],
        stable_counts,
        kinds,
        kind_definitions: r.attr_str("kind_definitions")?,
        stuck_rows,
        fold_lines: line.iter().copied().fold(-1.0, f64::max) + 1.0,
        fold_vertices: line.len(),
        lines,
    })
}
