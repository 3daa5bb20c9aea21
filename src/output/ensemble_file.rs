//! The file of `icefold ensemble` (and of `icefold merge`): a `member` dimension with the
//! sampled parameters, each member's global-mean temperature, top-of-atmosphere imbalance and
//! ice-edge series, its Gregory regression, optionally its doubled-CO2 sensitivity and full
//! temperature field.
//!
//! The whole content is held in [`EnsembleData`] and written at once, so that a shard file and
//! a merged file go through the same writer: `merge` reads shards back into `EnsembleData`,
//! concatenates them and writes exactly what a single run writes (only `creation_time`,
//! `history` and `command_line` differ).

use super::common::{apply_completion, attrs, create_file, write_provenance, Completion, Provenance};
use super::{Attr, NcReader, OutputError};
use std::path::Path;

/// Per-member results of the doubled-CO2 equilibria (NaN where not computed).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct SensitivityColumns {
    /// Equilibrium climate sensitivity, K.
    pub ecs_k: Vec<f64>,
    /// Northern ice edge of the base equilibrium, degrees.
    pub ice_edge_base_deg: Vec<f64>,
    /// Northern ice edge with doubled CO2, degrees.
    pub ice_edge_doubled_deg: Vec<f64>,
    /// Local ice-edge derivative by the forcing, degrees per W m-2.
    pub ice_edge_per_wm2: Vec<f64>,
}

/// Everything an ensemble file holds. Per-member arrays are member-major (`[member][time]`,
/// `[member][time][lat]`, `[member][parameter]`).
#[derive(Debug, Clone, PartialEq)]
pub struct EnsembleData {
    /// Resolved configuration, TOML text.
    pub config_toml: String,
    /// Scenario title.
    pub title: String,
    /// zlib deflate level the file is written with (`output.deflate_level`).
    pub deflate_level: u8,
    /// Members of the whole ensemble.
    pub members_total: usize,
    /// Index of this file's first member.
    pub first_member: usize,
    /// Latin hypercube seed.
    pub seed: u64,
    /// Sampled keys.
    pub keys: Vec<String>,
    /// Their distributions, described.
    pub distributions: Vec<String>,
    /// Sampled values, `[member][parameter]`.
    pub samples: Vec<f64>,
    /// Output times, years.
    pub time: Vec<f64>,
    /// Whether records are annual means (times are mid-year, bounds whole years).
    pub annual_means: bool,
    /// Band-centre latitudes, degrees north.
    pub lat: Vec<f64>,
    /// Band bounds, degrees north, `[lat][2]`.
    pub lat_bnds: Vec<f64>,
    /// Area weights.
    pub area_weight: Vec<f64>,
    /// Global-mean temperature, K, `[member][time]`.
    pub global_mean_temperature: Vec<f64>,
    /// Global-mean top-of-atmosphere imbalance, W m-2, `[member][time]`.
    pub toa_imbalance: Vec<f64>,
    /// Northern ice-edge latitude, degrees, `[member][time]`.
    pub ice_edge_latitude_north: Vec<f64>,
    /// Southern ice-edge latitude (globe), degrees north, `[member][time]`.
    pub ice_edge_latitude_south: Option<Vec<f64>>,
    /// 0 finished, 1 numerical failure (its series are NaN from the failure on).
    pub status: Vec<i32>,
    /// Gregory slope of each member, W m-2 K-1 (NaN if undefined).
    pub feedback: Vec<f64>,
    /// Gregory intercept at the first record, W m-2.
    pub effective_forcing: Vec<f64>,
    /// Gregory coefficient of determination.
    pub gregory_r2: Vec<f64>,
    /// Doubled-CO2 equilibria, if asked for.
    pub sensitivity: Option<SensitivityColumns>,
    /// Surface temperature, K, `[member][time][lat]`, if asked for.
    pub fields: Option<Vec<f64>>,
    /// Failed members and their messages, in member order.
    pub failures: Vec<(usize, String)>,
}

impl EnsembleData {
    /// Number of members in this file.
    pub fn count(&self) -> usize {
        self.status.len()
    }
}

/// Variable name of a sampled key: `sampled_` and the key with dots as underscores.
pub fn sampled_name(key: &str) -> String {
    format!("sampled_{}", key.replace('.', "_"))
}

/// Write `data` to `path` (through a temporary file). `shard` marks a shard file (`K/N`).
pub fn write(
    path: &Path,
    data: &EnsembleData,
    command_line: &str,
    shard: Option<(usize, usize)>,
) -> Result<(), OutputError> {
    write_with(path, data, command_line, shard, &Completion::finished())
}

/// [`write`] of a finished or partial ensemble (`completion` says which).
pub fn write_with(
    path: &Path,
    data: &EnsembleData,
    command_line: &str,
    shard: Option<(usize, usize)>,
    completion: &Completion,
) -> Result<(), OutputError> {
    let prov = Provenance {
        config_toml: data.config_toml.clone(),
        command_line: command_line.to_string(),
        title: data.title.clone(),
        deflate_level: data.deflate_level,
    };
    let mut w = create_file(path, &prov)?;
    write_provenance(&mut w, &prov, "ensemble")?;
    w.set_attr_i64("members_total", data.members_total as i64)?;
    w.set_attr_i64("member_first", data.first_member as i64)?;
    w.set_attr_i64("seed", data.seed as i64)?;
    w.set_attr_str("sampling", "latin_hypercube")?;
    w.set_attr_str("sampled_keys", &data.keys.join(","))?;
    if let Some((k, n)) = shard {
        w.set_attr_str("shard", &format!("{k}/{n}"))?;
    }
    let count = data.count();
    let members: Vec<f64> = (data.first_member..data.first_member + count)
        .map(|m| m as f64)
        .collect();
    w.add_coordinate(
        "member",
        &members,
        &[
            ("long_name", Attr::from("ensemble member index")),
            ("units", Attr::from("1")),
        ],
    )?;
    let mut time_attrs = vec![
        ("units", Attr::from("year")),
        ("long_name", Attr::from("model time (years of 365.25 days)")),
        ("axis", Attr::from("T")),
    ];
    if data.annual_means {
        time_attrs.push(("bounds", Attr::from("time_bnds")));
    }
    w.add_coordinate("time", &data.time, &time_attrs)?;
    super::common::write_latitude_values(&mut w, &data.lat, &data.lat_bnds, &data.area_weight)?;
    if data.annual_means {
        w.add_variable_f64(
            "time_bnds",
            &["time", "bnds"],
            &attrs("year", "start and end of each averaging year", None),
        )?;
        let b: Vec<f64> = data.time.iter().flat_map(|t| [t - 0.5, t + 0.5]).collect();
        w.write_f64("time_bnds", &b)?;
    }
    let p = data.keys.len();
    for (j, key) in data.keys.iter().enumerate() {
        let name = sampled_name(key);
        let units = crate::config::keys::units(key);
        let mut a = attrs(units, &format!("sampled value of config key {key}"), None);
        a.push(("config_key", Attr::from(key.as_str())));
        a.push(("distribution", Attr::from(data.distributions[j].as_str())));
        w.add_variable_f64(&name, &["member"], &a)?;
        let col: Vec<f64> = (0..count).map(|m| data.samples[m * p + j]).collect();
        w.write_f64(&name, &col)?;
    }
    let mean = |s: &str| {
        let mut a = attrs(s, "", None);
        if data.annual_means {
            a.push(("cell_methods", Attr::from("time: mean")));
        }
        a
    };
    let series = [
        (
            "global_mean_temperature",
            "K",
            "area-weighted global-mean surface temperature",
            Some(&data.global_mean_temperature),
        ),
        (
            "toa_imbalance",
            "W m-2",
            "global-mean net heating: absorbed - outgoing longwave + additive forcing",
            Some(&data.toa_imbalance),
        ),
        (
            "ice_edge_latitude_north",
            "degrees_north",
            "ice-edge latitude, northern hemisphere (90 ice free, 0 ice covered)",
            Some(&data.ice_edge_latitude_north),
        ),
        (
            "ice_edge_latitude_south",
            "degrees_north",
            "ice-edge latitude, southern hemisphere (-90 ice free, 0 ice covered)",
            data.ice_edge_latitude_south.as_ref(),
        ),
    ];
    for (name, units, long, values) in series {
        let Some(values) = values else { continue };
        let mut a = mean(units);
        a[1] = ("long_name", Attr::from(long));
        w.add_variable_f64(name, &["member", "time"], &a)?;
        w.write_f64(name, values)?;
    }
    w.add_variable_i32(
        "member_status",
        &["member"],
        &[
            (
                "long_name",
                Attr::from("0: finished; 1: numerical failure (series NaN from then on)"),
            ),
            ("units", Attr::from("1")),
        ],
    )?;
    w.write_i32("member_status", &data.status)?;
    let scalars = [
        (
            "effective_feedback_parameter",
            "W m-2 K-1",
            "slope of toa_imbalance on global_mean_temperature over the records (Gregory et al. 2004); NaN if the temperature did not change",
            &data.feedback,
        ),
        (
            "effective_forcing",
            "W m-2",
            "fitted toa_imbalance at the first record's temperature (Gregory et al. 2004)",
            &data.effective_forcing,
        ),
        ("gregory_r2", "1", "coefficient of determination of the Gregory regression", &data.gregory_r2),
    ];
    for (name, units, long, values) in scalars {
        w.add_variable_f64(name, &["member"], &attrs(units, long, None))?;
        w.write_f64(name, values)?;
    }
    if let Some(s) = &data.sensitivity {
        for (name, units, long, values) in [
            (
                "climate_sensitivity_2xco2",
                "K",
                "equilibrium global-mean warming for doubled CO2 (Newton equilibria)",
                &s.ecs_k,
            ),
            (
                "ice_edge_base",
                "degrees_north",
                "northern ice edge of the base equilibrium",
                &s.ice_edge_base_deg,
            ),
            (
                "ice_edge_2xco2",
                "degrees_north",
                "northern ice edge of the doubled-CO2 equilibrium",
                &s.ice_edge_doubled_deg,
            ),
            (
                "ice_edge_sensitivity",
                "degrees per W m-2",
                "local derivative of the northern ice edge by the forcing at the base equilibrium",
                &s.ice_edge_per_wm2,
            ),
        ] {
            let mut a = attrs(units, long, None);
            a.push((
                "comment",
                Attr::from("NaN where not computed: seasonal insolation (the steady climate is a cycle) or no equilibrium found"),
            ));
            w.add_variable_f64(name, &["member"], &a)?;
            w.write_f64(name, values)?;
        }
    }
    if let Some(f) = &data.fields {
        let mut a = mean("K");
        a[1] = ("long_name", Attr::from("surface temperature"));
        a.push(("standard_name", Attr::from("surface_temperature")));
        w.add_variable_f64("surface_temperature", &["member", "time", "lat"], &a)?;
        w.write_f64("surface_temperature", f)?;
    }
    if !data.failures.is_empty() {
        let list: Vec<String> = data.failures.iter().map(|(m, _)| m.to_string()).collect();
        w.set_attr_str("failed_members", &list.join(","))?;
        let (m, msg) = &data.failures[0];
        w.set_attr_str("first_failure", &format!("member {m}: {msg}"))?;
    }
    apply_completion(&mut w, completion)?;
    w.finish()
}

/// Why a file cannot be read back as an ensemble file.
fn bad(path: &Path, what: &str) -> OutputError {
    OutputError::Layout {
        path: path.to_path_buf(),
        variable: "(file)".into(),
        reason: format!("not an icefold ensemble file: {what}"),
    }
}

/// Read an ensemble file back; also returns its `shard` attribute (`K/N`) if it is a shard.
pub fn read(path: &Path) -> Result<(EnsembleData, Option<String>), OutputError> {
    let r = NcReader::open(path)?;
    if r.attr_str("icefold_kind")?.as_deref() != Some("ensemble") {
        return Err(bad(path, "icefold_kind is not \"ensemble\""));
    }
    if r.attr_i64("complete")? != Some(1) {
        return Err(bad(path, "the file is marked incomplete"));
    }
    let need_str = |n: &str| {
        r.attr_str(n)
            .and_then(|v| v.ok_or_else(|| bad(path, &format!("no attribute `{n}`"))))
    };
    let need_i64 = |n: &str| {
        r.attr_i64(n)
            .and_then(|v| v.ok_or_else(|| bad(path, &format!("no attribute `{n}`"))))
    };
    let keys: Vec<String> = need_str("sampled_keys")?.split(',').map(str::to_string).collect();
    let vars = r.var_names()?;
    let has = |n: &str| vars.iter().any(|v| v == n);
    let count = r.dim_len("member")?;
    let p = keys.len();
    let mut samples = vec![0.0; count * p];
    let mut distributions = Vec::new();
    for (j, key) in keys.iter().enumerate() {
        let name = sampled_name(key);
        let col = r.read_f64(&name)?;
        for m in 0..count {
            samples[m * p + j] = col[m];
        }
        distributions.push(r.var_attr_str(&name, "distribution")?.unwrap_or_default());
    }
    let status: Vec<i32> = r.read_f64("member_status")?.iter().map(|v| *v as i32).collect();
    let sensitivity = if has("climate_sensitivity_2xco2") {
        Some(SensitivityColumns {
            ecs_k: r.read_f64("climate_sensitivity_2xco2")?,
            ice_edge_base_deg: r.read_f64("ice_edge_base")?,
            ice_edge_doubled_deg: r.read_f64("ice_edge_2xco2")?,
            ice_edge_per_wm2: r.read_f64("ice_edge_sensitivity")?,
        })
    } else {
        None
    };
    let first_member = need_i64("member_first")? as usize;
    // Files written before the attribute existed used the default level.
    let deflate_level = match r.attr_i64("deflate_level")? {
        None => super::DEFAULT_DEFLATE_LEVEL,
        Some(l) => u8::try_from(l)
            .ok()
            .filter(|l| *l <= super::MAX_DEFLATE_LEVEL)
            .ok_or_else(|| bad(path, &format!("deflate_level = {l} is not one of 0 to 9")))?,
    };
    let mut failures = Vec::new();
    if let Some(list) = r.attr_str("failed_members")? {
        let first = r.attr_str("first_failure")?.unwrap_or_default();
        for m in list.split(',').filter_map(|s| s.trim().parse::<usize>().ok()) {
            let msg = first
                .strip_prefix(&format!("member {m}: "))
                .map(str::to_string)
                .unwrap_or_else(|| "(see the shard file)".into());
            failures.push((m, msg));
        }
    }
    let data = EnsembleData {
        config_toml: need_str("config_toml")?,
        title: r.attr_str("title")?.unwrap_or_default(),
        deflate_level,
        members_total: need_i64("members_total")? as usize,
        first_member,
        seed: need_i64("seed")? as u64,
        keys,
        distributions,
        samples,
        time: r.read_f64("time")?,
        annual_means: has("time_bnds"),
        lat: r.read_f64("lat")?,
        lat_bnds: r.read_f64("lat_bnds")?,
        area_weight: r.read_f64("area_weight")?,
        global_mean_temperature: r.read_f64("global_mean_temperature")?,
        toa_imbalance: r.read_f64("toa_imbalance")?,
        ice_edge_latitude_north: r.read_f64("ice_edge_latitude_north")?,
        ice_edge_latitude_south: if has("ice_edge_latitude_south") {
            Some(r.read_f64("ice_edge_latitude_south")?)
        } else {
            None
        },
        status,
        feedback: r.read_f64("effective_feedback_parameter")?,
        effective_forcing: r.read_f64("effective_forcing")?,
        gregory_r2: r.read_f64("gregory_r2")?,
        sensitivity,
        fields: if has("surface_temperature") {
            Some(r.read_f64("surface_temperature")?)
        } else {
            None
        },
        failures,
    };
    Ok((data, r.attr_str("shard")?))
}

/// Join shard contents (any order) into the content of the whole ensemble. Errors name the
/// files that do not fit together.
pub fn join(mut parts: Vec<(String, EnsembleData)>) -> Result<EnsembleData, String> {
    if parts.is_empty() {
        return Err("no files to merge".into());
    }
    parts.sort_by_key(|(_, d)| d.first_member);
    let (name0, first) = &parts[0];
    let mut out = first.clone();
    if out.first_member != 0 {
        return Err(format!(
            "{name0}: its first member is {}, so members 0 to {} are missing",
            out.first_member,
            out.first_member - 1
        ));
    }
    let mut next = out.count();
    for (name, d) in &parts[1..] {
        let same = d.config_toml == first.config_toml
            && d.members_total == first.members_total
            && d.seed == first.seed
            && d.keys == first.keys
            && d.time == first.time
            && d.lat == first.lat
            && d.sensitivity.is_some() == first.sensitivity.is_some()
            && d.fields.is_some() == first.fields.is_some()
            && d.ice_edge_latitude_south.is_some() == first.ice_edge_latitude_south.is_some();
        if !same {
            return Err(format!("{name} and {name0} are not shards of the same ensemble (configuration, seed, members, sampled keys or time axis differ)"));
        }
        if d.first_member != next {
            return Err(if d.first_member < next {
                format!(
                    "{name}: members from {} overlap the members before it (up to {})",
                    d.first_member,
                    next - 1
                )
            } else {
                format!(
                    "members {next} to {} are missing before {name}",
                    d.first_member - 1
                )
            });
        }
        next += d.count();
        out.samples.extend_from_slice(&d.samples);
        out.global_mean_temperature
            .extend_from_slice(&d.global_mean_temperature);
        out.toa_imbalance.extend_from_slice(&d.toa_imbalance);
        out.ice_edge_latitude_north
            .extend_from_slice(&d.ice_edge_latitude_north);
        if let (Some(a), Some(b)) = (out.ice_edge_latitude_south.as_mut(), &d.ice_edge_latitude_south) {
            a.extend_from_slice(b);
        }
        out.status.extend_from_slice(&d.status);
        out.feedback.extend_from_slice(&d.feedback);
        out.effective_forcing.extend_from_slice(&d.effective_forcing);
        out.gregory_r2.extend_from_slice(&d.gregory_r2);
        if let (Some(a), Some(b)) = (out.sensitivity.as_mut(), &d.sensitivity) {
            a.ecs_k.extend_from_slice(&b.ecs_k);
            a.ice_edge_base_deg.extend_from_slice(&b.ice_edge_base_deg);
            a.ice_edge_doubled_deg.extend_from_slice(&b.ice_edge_doubled_deg);
            a.ice_edge_per_wm2.extend_from_slice(&b.ice_edge_per_wm2);
        }
        if let (Some(a), Some(b)) = (out.fields.as_mut(), &d.fields) {
            a.extend_from_slice(b);
        }
        out.failures.extend(d.failures.iter().cloned());
    }
    if next != out.members_total {
        return Err(format!(
            "the files hold members 0 to {} of {}; the rest are missing",
            next - 1,
            out.members_total
        ));
    }
    Ok(out)
}
