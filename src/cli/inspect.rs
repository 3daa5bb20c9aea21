//! `icefold inspect FILE [--json]`: a short human summary of any icefold output file, or the
//! same summary as JSON. The reading is [`crate::output::summary`]; this file only prints.

use crate::error::Error;
use crate::output::summary::{self, Details, FileSummary};
use crate::output::NcReader;
use std::fmt::Write;
use std::io::Write as _;
use std::path::Path;

/// Print what the file is, how it was made, its dimensions and key results.
pub fn main(path: &Path, json: bool) -> Result<(), Error> {
    let r = NcReader::open(path)?;
    crate::output::damage::icefold_kind(&r)?;
    let s = summary::summarize(&r)?;
    let out = if json {
        let mut t =
            serde_json::to_string_pretty(&s).map_err(|e| Error::Other(format!("cannot write JSON: {e}")))?;
        t.push('\n');
        t
    } else {
        text(&s)
    };
    // A reader that stops early (`| head`) is not an error.
    match std::io::stdout().lock().write_all(out.as_bytes()) {
        Err(e) if e.kind() != std::io::ErrorKind::BrokenPipe => {
            Err(Error::Other(format!("cannot write to stdout: {e}")))
        }
        _ => Ok(()),
    }
}

/// The summary as text.
pub fn text(f: &FileSummary) -> String {
    let mut s = String::new();
    let _ = writeln!(s, "file:       {}", f.file);
    let _ = writeln!(s, "kind:       {}", f.kind);
    if let Some(e) = &f.damaged {
        let _ = writeln!(s, "DAMAGED:    {e}");
    }
    if let Some(t) = &f.title {
        let _ = writeln!(s, "title:      {t}");
    }
    if let Some(v) = &f.icefold_version {
        let at = f.creation_time.clone().unwrap_or_default();
        let _ = writeln!(s, "made by:    icefold {v} at {at}");
    }
    if let Some(c) = &f.command_line {
        let _ = writeln!(s, "command:    {c}");
    }
    let complete = match f.complete {
        Some(true) => "yes".to_string(),
        Some(false) => format!("NO ({})", f.how_far.clone().unwrap_or_default()),
        None => "unknown".into(),
    };
    let _ = writeln!(s, "complete:   {complete}");
    if let Some(sig) = &f.interrupted_by {
        let _ = writeln!(s, "stopped by: {sig}");
    }
    if let Some(m) = &f.failure {
        let _ = writeln!(s, "failure:    {m}");
    }
    if let Some(c) = &f.config {
        let v = |x: &Option<toml::Value>| x.as_ref().map(|x| x.to_string()).unwrap_or_default();
        let _ = writeln!(
            s,
            "config:     {} {} bands ({}), insolation {}, albedo {}, OLR {}, transport {}, S0 {} W m-2, CO2 {} ppm",
            v(&c.domain),
            v(&c.bands),
            v(&c.spacing),
            v(&c.insolation),
            v(&c.albedo),
            v(&c.longwave),
            v(&c.transport),
            v(&c.solar_constant),
            v(&c.co2_ppm),
        );
    }
    let dims: Vec<String> = f
        .dimensions
        .iter()
        .map(|d| {
            format!(
                "{}={}{}",
                d.name,
                d.length,
                if d.unlimited { " (unlimited)" } else { "" }
            )
        })
        .collect();
    let _ = writeln!(s, "dimensions: {}", dims.join(", "));
    match &f.details {
        Some(Details::Ensemble(e)) => ensemble(e, &mut s),
        Some(Details::Sweep(w)) => sweep(w, &mut s),
        Some(Details::Branches(b)) => branches(b, &mut s),
        Some(Details::Regimes(m)) => regimes(m, &mut s),
        Some(Details::Equilibrium(q)) => {
            let _ = writeln!(
                s,
                "state:      global mean {:.4} K, ice edge {:.2} degrees north, {} (leading eigenvalue {:.6} per year), residual {:.3e} W m-2",
                q.global_mean, q.ice_edge, q.stability, q.leading_eigenvalue, q.residual
            );
        }
        None => {}
    }
    if let Some(t) = &f.time {
        let _ = writeln!(
            s,
            "time:       {} to {} years, {} records",
            summary::years(t.first),
            summary::years(t.last),
            t.records
        );
    }
    for e in &f.series {
        let _ = writeln!(s, "{}: {:.4} -> {:.4} {}", e.name, e.first, e.last, e.units);
    }
    if let Some(g) = &f.gregory {
        let _ = writeln!(
            s,
            "gregory:    effective feedback {:.4} W m-2 K-1, forcing {:.4} W m-2 (r2 {:.4}, {} records)",
            g.feedback, g.forcing, g.r2, g.records
        );
    }
    if let Some(d) = &f.doubling {
        let _ = writeln!(
            s,
            "2xCO2:      equilibrium warming {:.4} K for {:.3} W m-2 (feedback {:.4} W m-2 K-1); ice edge {:.2} -> {:.2} degrees, {:.3} degrees per W m-2 locally",
            d.ecs, d.forcing, d.feedback, d.ice_edge_base, d.ice_edge_doubled, d.ice_edge_sensitivity
        );
    } else if let Some(note) = &f.sensitivity_note {
        let _ = writeln!(s, "2xCO2:      {note}");
    }
    let _ = writeln!(s, "variables:  {}", f.variables.join(", "));
    s
}

/// `items` joined by commas, or "none".
fn list(items: Vec<String>) -> String {
    if items.is_empty() {
        "none".into()
    } else {
        items.join(", ")
    }
}

fn ensemble(e: &summary::EnsembleFacts, s: &mut String) {
    let shard = e
        .shard
        .as_ref()
        .map(|k| format!(", shard {k}"))
        .unwrap_or_default();
    let _ = writeln!(
        s,
        "members:    {} (from {} of {}), seed {}{shard}",
        e.members, e.member_first, e.members_total, e.seed
    );
    for k in &e.sampled {
        let _ = writeln!(
            s,
            "sampled:    {} {} (drawn {:.4} to {:.4})",
            k.key, k.distribution, k.min, k.max
        );
    }
    let spread = |v: &summary::Spread| match (v.min, v.median, v.max) {
        (Some(a), Some(m), Some(b)) => format!("{a:.4} / {m:.4} / {b:.4}"),
        _ => "(none)".into(),
    };
    for v in &e.final_values {
        let _ = writeln!(
            s,
            "final {} (min / median / max): {} {}",
            v.name,
            spread(v),
            v.units
        );
    }
    for v in &e.diagnostics {
        let _ = writeln!(s, "{} (min / median / max): {} {}", v.name, spread(v), v.units);
    }
    if e.failed > 0 {
        let first = e.first_failure.clone().unwrap_or_default();
        let _ = writeln!(s, "failed:     {} members; {first}", e.failed);
    }
}

fn control(c: &summary::Control, s: &mut String) {
    let _ = writeln!(s, "control:    {} from {} to {} {}", c.key, c.from, c.to, c.units);
}

fn sweep(w: &summary::SweepFacts, s: &mut String) {
    control(&w.control, s);
    let tips = w
        .tipping
        .iter()
        .map(|t| {
            let way = if t.rising { "rising" } else { "falling" };
            match t.control {
                Some(c) => format!("{c:.6} ({way})"),
                None => format!(
                    "unresolved between {:.6} and {:.6} ({way})",
                    t.bracket_low, t.bracket_high
                ),
            }
        })
        .collect();
    let _ = writeln!(s, "tipping:    {}", list(tips));
    if let Some(h) = &w.hysteresis {
        let _ = writeln!(s, "hysteresis: {}", h.text);
    }
    if let Some(sp) = &w.spacing {
        let _ = writeln!(s, "spacing:    {sp}");
    }
}

fn branches(b: &summary::BranchesFacts, s: &mut String) {
    control(&b.control, s);
    let folds = b
        .folds
        .iter()
        .map(|f| format!("{:.6} (ice edge {:.2} degrees)", f.control, f.ice_edge))
        .collect();
    let _ = writeln!(s, "folds:      {}", list(folds));
    let _ = writeln!(s, "branches:   {}", b.branches);
    let units = &b.control.units;
    for e in &b.short_ends {
        let (branch, side, at) = (e.branch, &e.side, e.control);
        let _ = if e.stuck {
            writeln!(
                s,
                "warning:    branch {branch} ends stuck at its {side} point (control {at:.6} {units}): the corrector failed there, the branch beyond it is missing",
            )
        } else {
            writeln!(
                s,
                "warning:    branch {branch} ends at the point limit at its {side} point (control {at:.6} {units}): raise branches.max_points to trace it further",
            )
        };
    }
    if let Some(points) = &b.branch_points {
        let items = points
            .iter()
            .map(|p| {
                let note = match (p.corner, p.converged) {
                    (_, false) => ", unresolved: nearest traced point",
                    (true, true) => ", corner",
                    (false, true) => "",
                };
                format!("{:.6} (ice edge {:.2} degrees{note})", p.control, p.ice_edge)
            })
            .collect();
        let _ = writeln!(s, "branch points: {}", list(items));
    }
    if let Some(n) = b.asymmetric {
        let _ = writeln!(s, "asymmetric: {n} branches (mirror images included)");
    }
}

fn regimes(m: &summary::RegimesFacts, s: &mut String) {
    for (label, a) in ["p1 (x):    ", "p2 (y):    "].iter().zip(&m.axes) {
        let _ = writeln!(
            s,
            "{label}{} from {} to {} {}, {} values",
            a.key, a.from, a.to, a.units, a.values
        );
    }
    let hist: Vec<String> = m.stable_counts.iter().map(|(n, c)| format!("{n}: {c}")).collect();
    let _ = writeln!(s, "stable states per cell (count: cells): {}", hist.join(", "));
    let kinds: Vec<String> = m.kinds.iter().map(|(n, c)| format!("{n} in {c} cells")).collect();
    let _ = writeln!(s, "kinds:      {}", kinds.join(", "));
    if let Some(d) = &m.kind_definitions {
        let _ = writeln!(s, "            ({d})");
    }
    match &m.stuck_rows {
        Some(rows) if rows.is_empty() => {
            let _ = writeln!(s, "stuck ends: none");
        }
        Some(rows) => {
            let rows: Vec<String> = rows.iter().map(|(v, n)| format!("{v} ({n} ends)")).collect();
            let _ = writeln!(
                s,
                "warning:    branches end stuck in the rows at p2 = {}: the corrector failed there, so those rows' equilibria and folds beyond the stuck ends are missing",
                rows.join(", ")
            );
        }
        None => {}
    }
    let _ = writeln!(s, "fold lines: {} ({} vertices)", m.fold_lines, m.fold_vertices);
    for l in &m.lines {
        let _ = writeln!(
            s,
            "  line {}: p1 {:.4} .. {:.4} over p2 {:.4} .. {:.4}, ice edge {:.1} .. {:.1} degrees, {} vertices",
            l.line, l.p1[0], l.p1[1], l.p2[0], l.p2[1], l.ice_edge[0], l.ice_edge[1], l.vertices
        );
    }
}
