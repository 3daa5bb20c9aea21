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
    if vars.iter().any(|v| v == "time") {
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
    let _ = writeln!(s, "variables:  {}", vars.join(", "));
    Ok(s)
}
