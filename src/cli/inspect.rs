//! `icefold inspect FILE`: a short human summary of any icefold output file.

use crate::error::Error;
use crate::output::NcReader;
use std::path::Path;

/// Print what the file is, how it was made, its dimensions and key results.
pub fn main(path: &Path) -> Result<(), Error> {
    let r = NcReader::open(path)?;
    crate::output::damage::icefold_kind(&r)?;
    print!("{}", summary(&r)?);
    Ok(())
}

/// How far an incomplete file's job got, from the progress attributes each command writes.
fn how_far(r: &NcReader) -> Result<String, Error> {
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
fn years(t: f64) -> String {
    format!("{:.11e}", t)
        .parse::<f64>()
        .map(|v| v.to_string())
        .unwrap_or_else(|_| t.to_string())
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
    if let Err(e) = crate::output::damage::check(r, &kind) {
        let _ = writeln!(s, "DAMAGED:    {e}");
    }
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
            Some(_) => format!("NO ({})", how_far(r)?),
            None => "unknown".into(),
        }
    );
    if let Some(sig) = r.attr_str("interrupted_by")? {
        let _ = writeln!(s, "stopped by: {sig}");
    }
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
    match kind.as_str() {
        "ensemble" => ensemble_summary(r, &mut s)?,
        "sweep" | "branches" => control_summary(r, &kind, &mut s)?,
        "regimes" => regimes_summary(r, &mut s)?,
        "equilibrium" => equilibrium_summary(r, &mut s)?,
        _ => {}
    }
    if kind != "ensemble" && vars.iter().any(|v| v == "time") {
        let t = r.read_f64("time")?;
        if let (Some(a), Some(b)) = (t.first(), t.last()) {
            let _ = writeln!(
                s,
                "time:       {} to {} years, {} records",
                years(*a),
                years(*b),
                t.len()
            );
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

/// A scalar or first value of a variable, if the file has it.
fn first(r: &NcReader, name: &str) -> Result<Option<f64>, Error> {
    if !r.var_names()?.iter().any(|v| v == name) {
        return Ok(None);
    }
    Ok(r.read_f64(name)?.first().copied())
}

/// Control range and tipping points (sweep) or folds (branches).
fn control_summary(r: &NcReader, kind: &str, s: &mut String) -> Result<(), Error> {
    use std::fmt::Write;
    let key = r.attr_str("control_key")?.unwrap_or_default();
    let units = r.attr_str("control_units")?.unwrap_or_default();
    let _ = writeln!(
        s,
        "control:    {key} from {} to {} {units}",
        r.attr_f64("control_from")?.unwrap_or(f64::NAN),
        r.attr_f64("control_to")?.unwrap_or(f64::NAN)
    );
    if kind == "sweep" {
        let tc = r.read_f64("tipping_control")?;
        let td = r.read_f64("tipping_direction")?;
        let (lo, hi) = (
            r.read_f64("tipping_bracket_low")?,
            r.read_f64("tipping_bracket_high")?,
        );
        let list: Vec<String> = tc
            .iter()
            .zip(&td)
            .enumerate()
            .map(|(k, (c, d))| {
                let way = if *d > 0.0 { "rising" } else { "falling" };
                if c.is_finite() {
                    format!("{c:.6} ({way})")
                } else {
                    format!("unresolved between {:.6} and {:.6} ({way})", lo[k], hi[k])
                }
            })
            .collect();
        let _ = writeln!(
            s,
            "tipping:    {}",
            if list.is_empty() {
                "none".into()
            } else {
                list.join(", ")
            }
        );
        if let Some(w) = r.attr_f64("hysteresis_width")? {
            let missing = r.attr_str("hysteresis_missing")?;
            let text = crate::equilibrium::sweep::hysteresis_text(w, missing.as_deref(), &units);
            let _ = writeln!(s, "hysteresis: {}", text.trim_start_matches("hysteresis "));
        }
        if let Some(sp) = r.attr_str("control_spacing")? {
            let _ = writeln!(s, "spacing:    {sp}");
        }
    } else {
        let fc = r.read_f64("fold_control")?;
        let fe = r.read_f64("fold_ice_edge_latitude_north")?;
        let list: Vec<String> = fc
            .iter()
            .zip(&fe)
            .map(|(c, e)| format!("{c:.6} (ice edge {e:.2} degrees)"))
            .collect();
        let _ = writeln!(
            s,
            "folds:      {}",
            if list.is_empty() {
                "none".into()
            } else {
                list.join(", ")
            }
        );
        let _ = writeln!(s, "branches:   {}", r.dim_len("branches")?);
        // A branch that ends stuck (its end point is where the corrector gave up) or at the
        // point limit.
        let counts = r.read_f64("branch_points")?;
        let ends = [r.read_f64("branch_end_first")?, r.read_f64("branch_end_last")?];
        let control = r.read_f64("control")?;
        let mut first = 0usize;
        for (b, &c) in counts.iter().enumerate() {
            let c = c as usize;
            for (k, side) in ["first", "last"].iter().enumerate() {
                let at = if k == 0 {
                    first
                } else {
                    (first + c).saturating_sub(1)
                };
                let at_control = control.get(at).copied().unwrap_or(f64::NAN);
                if ends[k].get(b) == Some(&3.0) {
                    let _ = writeln!(
                        s,
                        "warning:    branch {b} ends stuck at its {side} point (control {at_control:.6} {units}): the corrector failed there, the branch beyond it is missing",
                    );
                } else if ends[k].get(b) == Some(&1.0) {
                    let _ = writeln!(
                        s,
                        "warning:    branch {b} ends at the point limit at its {side} point (control {at_control:.6} {units}): raise branches.max_points to trace it further",
                    );
                }
            }
            first += c;
        }
        // Globe files: branch points (pitchforks) and the asymmetric branches leaving them.
        if r.var_names()?.iter().any(|v| v == "branch_point_control") {
            let bc = r.read_f64("branch_point_control")?;
            let be = r.read_f64("branch_point_ice_edge_latitude_north")?;
            let corner = r.read_f64("branch_point_corner")?;
            let conv = r.read_f64("branch_point_converged")?;
            let list: Vec<String> = bc
                .iter()
                .zip(&be)
                .zip(corner.iter().zip(&conv))
                .map(|((c, e), (k, v))| {
                    let note = match (*k != 0.0, *v != 0.0) {
                        (_, false) => ", unresolved: nearest traced point",
                        (true, true) => ", corner",
                        (false, true) => "",
                    };
                    format!("{c:.6} (ice edge {e:.2} degrees{note})")
                })
                .collect();
            let _ = writeln!(
                s,
                "branch points: {}",
                if list.is_empty() {
                    "none".into()
                } else {
                    list.join(", ")
                }
            );
            let asym = r.read_f64("branch_asymmetric")?;
            let _ = writeln!(
                s,
                "asymmetric: {} branches (mirror images included)",
                asym.iter().filter(|v| **v != 0.0).count()
            );
        }
    }
    Ok(())
}

/// The equilibrium's temperature, ice edge and stability.
fn equilibrium_summary(r: &NcReader, s: &mut String) -> Result<(), Error> {
    use std::fmt::Write;
    let _ = writeln!(
        s,
        "state:      global mean {:.4} K, ice edge {:.2} degrees north, {} (leading eigenvalue {:.6} per year), residual {:.3e} W m-2",
        first(r, "global_mean_temperature")?.unwrap_or(f64::NAN),
        first(r, "ice_edge_latitude_north")?.unwrap_or(f64::NAN),
        r.attr_str("stability")?.unwrap_or_default(),
        r.attr_f64("leading_eigenvalue")?.unwrap_or(f64::NAN),
        r.attr_f64("residual_wm2")?.unwrap_or(f64::NAN)
    );
    Ok(())
}

/// Both control ranges, the counts of stable states and the fold lines (regimes files).
fn regimes_summary(r: &NcReader, s: &mut String) -> Result<(), Error> {
    use std::fmt::Write;
    for (label, pre, var) in [
        ("p1 (x):    ", "control", "p1"),
        ("p2 (y):    ", "row_control", "p2"),
    ] {
        let _ = writeln!(
            s,
            "{label}{} from {} to {} {}, {} values",
            r.attr_str(&format!("{pre}_key"))?.unwrap_or_default(),
            r.attr_f64(&format!("{pre}_from"))?.unwrap_or(f64::NAN),
            r.attr_f64(&format!("{pre}_to"))?.unwrap_or(f64::NAN),
            r.attr_str(&format!("{pre}_units"))?.unwrap_or_default(),
            r.dim_len(var)?
        );
    }
    let counts = r.read_f64("stable_count")?;
    let most = counts.iter().copied().fold(0.0, f64::max) as usize;
    let hist: Vec<String> = (0..=most)
        .map(|n| {
            let c = counts.iter().filter(|v| **v as usize == n).count();
            format!("{n}: {c}")
        })
        .collect();
    let _ = writeln!(s, "stable states per cell (count: cells): {}", hist.join(", "));
    let kinds = r.read_f64("stable_kinds")?;
    let names = r
        .var_attr_str("stable_kinds", "flag_meanings")?
        .unwrap_or_default();
    let present: Vec<String> = names
        .split_whitespace()
        .enumerate()
        .map(|(b, n)| {
            let c = kinds.iter().filter(|v| (**v as i64) & (1 << b) != 0).count();
            format!("{n} in {c} cells")
        })
        .collect();
    let _ = writeln!(s, "kinds:      {}", present.join(", "));
    if let Some(d) = r.attr_str("kind_definitions")? {
        let _ = writeln!(s, "            ({d})");
    }
    // Rows with a branch that ends stuck: their map is incomplete beyond that control.
    if r.var_names()?.iter().any(|v| v == "stuck_ends") {
        let stuck = r.read_f64("stuck_ends")?;
        let p2 = r.read_f64("p2")?;
        let rows: Vec<String> = stuck
            .iter()
            .zip(&p2)
            .filter(|(n, _)| **n > 0.0)
            .map(|(n, v)| format!("{v} ({n} ends)"))
            .collect();
        if rows.is_empty() {
            let _ = writeln!(s, "stuck ends: none");
        } else {
            let _ = writeln!(
                s,
                "warning:    branches end stuck in the rows at p2 = {}: the corrector failed there, so those rows' equilibria and folds beyond the stuck ends are missing",
                rows.join(", ")
            );
        }
    }
    let line = r.read_f64("fold_line")?;
    let p1 = r.read_f64("fold_p1")?;
    let p2 = r.read_f64("fold_p2")?;
    let edge = r.read_f64("fold_ice_edge_latitude_north")?;
    let lines = line.iter().copied().fold(-1.0, f64::max) + 1.0;
    let _ = writeln!(s, "fold lines: {lines} ({} vertices)", line.len());
    let mut k = 0;
    while k < line.len() {
        let start = k;
        while k < line.len() && line[k] == line[start] {
            k += 1;
        }
        let end = k - 1;
        let _ = writeln!(
            s,
            "  line {}: p1 {:.4} .. {:.4} over p2 {:.4} .. {:.4}, ice edge {:.1} .. {:.1} degrees, {} vertices",
            line[start],
            p1[start],
            p1[end],
            p2[start],
            p2[end],
            edge[start],
            edge[end],
            end - start + 1
        );
    }
    Ok(())
}
