//! `icefold inspect FILE`: a short human summary of any icefold output file.

use crate::error::Error;
use crate::output::NcReader;
use std::path::Path;

/// Print what the file is, how it was made, its dimensions and key results.
pub fn main(path: &Path) -> Result<(), Error> {
    let r = NcReader::open(path)?;
    print!("{}", summary(&r)?);
    Ok(())
}

/// The summary text.
pub fn summary(r: &NcReader) -> Result<String, Error> {
    use std::fmt::Write;
    let mut s = String::new();
    let kind = r
        .attr_str("icefold_kind")?
        .unwrap_or_else(|| "(not an icefold file)".into());
    let _ = writeln!(s, "file:       {}", r.path().display());
    let _ = writeln!(s, "kind:       {kind}");
    if let Some(t) = r.attr_str("title")? {
        let _ = writeln!(s, "title:      {t}");
    }
    if let Some(v) = r.attr_str("icefold_version")? {
        let _ = writeln!(
            s,
            "made by:    icefold {v} at {}",
            r.attr_str("creation_time")?.unwrap_or_default()
        );
    }
    if let Some(c) = r.attr_str("command_line")? {
        let _ = writeln!(s, "command:    {c}");
    }
    let complete = r.attr_i64("complete")?;
    let _ = writeln!(
        s,
        "complete:   {}",
        match complete {
            Some(1) => "yes".to_string(),
            Some(_) => format!(
                "NO (stopped at model time {})",
                r.attr_f64("model_time_reached_years")?
                    .map(|t| format!("{t} years"))
                    .unwrap_or_else(|| "unknown".into())
            ),
            None => "unknown".into(),
        }
    );
    if let Some(f) = r.attr_str("failure")? {
        let _ = writeln!(s, "failure:    {f}");
    }
    if let Some(cfg) = r.attr_str("config_toml")? {
        if let Ok(v) = cfg.parse::<toml::Table>() {
            let get = |sec: &str, key: &str| {
                v.get(sec)
                    .and_then(|t| t.get(key))
                    .map(|x| x.to_string())
                    .unwrap_or_default()
            };
            let _ = writeln!(
                s,
                "config:     {} {} bands ({}), insolation {}, albedo {}, OLR {}, transport {}, S0 {} W m-2, CO2 {} ppm",
                get("grid", "domain"),
                get("grid", "bands"),
                get("grid", "spacing"),
                get("insolation", "kind"),
                get("albedo", "kind"),
                get("longwave", "kind"),
                get("transport", "kind"),
                get("insolation", "solar_constant"),
                get("greenhouse", "co2_ppm"),
            );
        }
    }
    let dims = r.dim_names()?;
    let dim_text: Vec<String> = dims
        .iter()
        .map(|d| {
            format!(
                "{d}={}{}",
                r.dim_len(d).unwrap_or(0),
                if r.dim_unlimited(d).unwrap_or(false) {
                    " (unlimited)"
                } else {
                    ""
                }
            )
        })
        .collect();
    let _ = writeln!(s, "dimensions: {}", dim_text.join(", "));
    let vars = r.var_names()?;
    if kind == "ensemble" {
        ensemble_summary(r, &mut s)?;
    } else if vars.iter().any(|v| v == "time") {
        let t = r.read_f64("time")?;
        if let (Some(a), Some(b)) = (t.first(), t.last()) {
            let _ = writeln!(s, "time:       {a} to {b} years, {} records", t.len());
        }
        for (name, unit) in [
            ("global_mean_temperature", "K"),
            ("ice_edge_latitude_north", "degrees"),
            ("toa_imbalance", "W m-2"),
        ] {
            if vars.iter().any(|v| v == name) {
                let v = r.read_f64(name)?;
                if let (Some(a), Some(b)) = (v.first(), v.last()) {
                    let _ = writeln!(s, "{name}: {a:.4} -> {b:.4} {unit}");
                }
            }
        }
    }
    diagnostics_summary(r, &mut s)?;
    let _ = writeln!(s, "variables:  {}", vars.join(", "));
    Ok(s)
}

/// Sensitivity diagnostics stored as attributes (run files).
fn diagnostics_summary(r: &NcReader, s: &mut String) -> Result<(), Error> {
    use std::fmt::Write;
    if let Some(f) = r.attr_f64("gregory_feedback_wm2_per_k")? {
        let _ = writeln!(
            s,
            "gregory:    effective feedback {f:.4} W m-2 K-1, forcing {:.4} W m-2 (r2 {:.4}, {} records)",
            r.attr_f64("gregory_forcing_wm2")?.unwrap_or(f64::NAN),
            r.attr_f64("gregory_r2")?.unwrap_or(f64::NAN),
            r.attr_i64("gregory_records")?.unwrap_or(0)
        );
    }
    if let Some(ecs) = r.attr_f64("ecs_2xco2_k")? {
        let get = |n: &str| r.attr_f64(n).map(|v| v.unwrap_or(f64::NAN));
        let _ = writeln!(
            s,
            "2xCO2:      equilibrium warming {ecs:.4} K for {:.3} W m-2 (feedback {:.4} W m-2 K-1); ice edge {:.2} -> {:.2} degrees, {:.3} degrees per W m-2 locally",
            get("forcing_2xco2_wm2")?,
            get("equilibrium_feedback_wm2_per_k")?,
            get("ice_edge_base_deg")?,
            get("ice_edge_2xco2_deg")?,
            get("ice_edge_sensitivity_deg_per_wm2")?
        );
    } else if let Some(note) = r.attr_str("sensitivity_note")? {
        let _ = writeln!(s, "2xCO2:      {note}");
    }
    Ok(())
}

/// Members, sampled keys and the spread of the results (ensemble files).
fn ensemble_summary(r: &NcReader, s: &mut String) -> Result<(), Error> {
    use std::fmt::Write;
    let m = r.dim_len("member")?;
    let t = r.dim_len("time")?;
    let _ = writeln!(
        s,
        "members:    {m} (from {} of {}), seed {}{}",
        r.attr_i64("member_first")?.unwrap_or(0),
        r.attr_i64("members_total")?.unwrap_or(0),
        r.attr_i64("seed")?.unwrap_or(0),
        r.attr_str("shard")?
            .map(|k| format!(", shard {k}"))
            .unwrap_or_default()
    );
    for key in r
        .attr_str("sampled_keys")?
        .unwrap_or_default()
        .split(',')
        .filter(|k| !k.is_empty())
    {
        let name = crate::output::ensemble_file::sampled_name(key);
        let v = r.read_f64(&name)?;
        let (lo, hi) = v.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| {
            (a.min(*x), b.max(*x))
        });
        let _ = writeln!(
            s,
            "sampled:    {key} {} (drawn {lo:.4} to {hi:.4})",
            r.var_attr_str(&name, "distribution")?.unwrap_or_default()
        );
    }
    let spread = |v: &mut Vec<f64>| {
        v.retain(|x| x.is_finite());
        v.sort_by(f64::total_cmp);
        match (v.first(), v.last()) {
            (Some(a), Some(b)) => format!("{a:.4} / {:.4} / {b:.4}", v[v.len() / 2]),
            _ => "(none)".into(),
        }
    };
    if t > 0 {
        for (name, unit) in [
            ("global_mean_temperature", "K"),
            ("ice_edge_latitude_north", "degrees"),
        ] {
            let all = r.read_f64(name)?;
            let mut last: Vec<f64> = all.chunks(t).map(|c| c[t - 1]).collect();
            let _ = writeln!(
                s,
                "final {name} (min / median / max): {} {unit}",
                spread(&mut last)
            );
        }
    }
    for (name, unit) in [
        ("effective_feedback_parameter", "W m-2 K-1"),
        ("climate_sensitivity_2xco2", "K"),
        ("ice_edge_sensitivity", "degrees per W m-2"),
    ] {
        if r.var_names()?.iter().any(|v| v == name) {
            let _ = writeln!(
                s,
                "{name} (min / median / max): {} {unit}",
                spread(&mut r.read_f64(name)?)
            );
        }
    }
    let failed = r.read_f64("member_status")?.iter().filter(|v| **v != 0.0).count();
    if failed > 0 {
        let _ = writeln!(
            s,
            "failed:     {failed} members; {}",
            r.attr_str("first_failure")?.unwrap_or_default()
        );
    }
    Ok(())
}
