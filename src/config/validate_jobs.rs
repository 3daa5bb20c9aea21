//! Validation of the job sections (`[sweep]`, `[branches]`, `[ensemble]`, `[regimes]`) and of
//! the list entries `[[forcing.pieces]]` and `[[ensemble.parameters]]`.

use super::keys::{self, Range};
use super::raw::*;
use super::spec::*;
use super::validate::Checker;
use super::ConfigError;
use crate::ensemble::Distribution;
use crate::forcing::{Piece, PieceShape};

/// `[sweep]`, if present.
pub(super) fn sweep_spec(c: &Checker, s: Option<&mut RawSweep>) -> Result<Option<SweepSpec>, ConfigError> {
    let Some(s) = s else { return Ok(None) };
    let control = control_key(c, "sweep.control", &s.control)?;
    let from = c.num_or("sweep.from", &mut s.from, f64::NAN)?;
    let to = c.num_or("sweep.to", &mut s.to, f64::NAN)?;
    if from == to {
        return Err(c.range_err(
            "sweep.to",
            to.to_string(),
            "allowed: a value different from sweep.from".into(),
        ));
    }
    Ok(Some(SweepSpec {
        control,
        from,
        to,
        steps: c.whole("sweep.steps", &mut s.steps)? as usize,
        settle_k_per_year: c.num("sweep.settle_k_per_year", &mut s.settle_k_per_year)?,
        settle_max_years: c.num("sweep.settle_max_years", &mut s.settle_max_years)?,
        refine_relative: c.num("sweep.refine_relative", &mut s.refine_relative)?,
        spacing: axis_spacing(c, "sweep.spacing", &mut s.spacing, (from, to))?,
    }))
}

/// `[branches]`, if present; the point limit's default grows with the band count.
pub(super) fn branches_spec(
    c: &Checker,
    b: Option<&mut RawBranches>,
    bands: i64,
) -> Result<Option<BranchesSpec>, ConfigError> {
    let Some(b) = b else { return Ok(None) };
    let control = control_key(c, "branches.control", &b.control)?;
    let from = c.num_or("branches.from", &mut b.from, f64::NAN)?;
    let to = c.num_or("branches.to", &mut b.to, f64::NAN)?;
    if from >= to {
        return Err(c.range_err(
            "branches.to",
            to.to_string(),
            format!("allowed: a value above branches.from = {from}"),
        ));
    }
    let step = c.num("branches.step", &mut b.step)?;
    let max_step = c.num("branches.max_step", &mut b.max_step)?;
    // About 14 points per band with the step albedo's edge-balance rule: 5000 up to 250 bands.
    let max_points = c.whole_or("branches.max_points", &mut b.max_points, 5000.max(20 * bands))?;
    Ok(Some(BranchesSpec {
        control,
        from,
        to,
        step,
        max_step,
        max_points: max_points as usize,
        spacing: axis_spacing(c, "branches.spacing", &mut b.spacing, (from, to))?,
    }))
}

/// A control key: one with a setter in the registry.
fn control_key(c: &Checker, key: &str, v: &Option<String>) -> Result<String, ConfigError> {
    match v {
        Some(k) if keys::get(k).is_some_and(|k| k.set.is_some()) => Ok(k.clone()),
        other => Err(c.range_err(
            key,
            other
                .clone()
                .map(|s| format!("\"{s}\""))
                .unwrap_or_else(|| "(missing)".into()),
            format!("allowed: one of the numeric model keys {}", keys::control_names()),
        )),
    }
}

/// An axis spacing key: "linear" (default) or "log"; log needs both ends of the axis above 0.
fn axis_spacing(
    c: &Checker,
    name: &str,
    slot: &mut Option<String>,
    (from, to): (f64, f64),
) -> Result<AxisSpacing, ConfigError> {
    // The default is not written back, so configs without the key resolve as before.
    if slot.is_none() {
        return Ok(AxisSpacing::Linear);
    }
    match c.choice(name, slot)? {
        "log" if !(from > 0.0 && to > 0.0) => Err(c.range_err(
            name,
            "\"log\"".into(),
            format!("allowed: \"log\" only when both ends of the axis are above 0 (here {from} and {to}); else \"linear\""),
        )),
        "log" => Ok(AxisSpacing::Log),
        _ => Ok(AxisSpacing::Linear),
    }
}

/// `[regimes]`: both keys control keys and different, both ranges increasing, counts and
/// continuation settings in range, defaults filled in.
pub(super) fn regimes_spec(
    c: &Checker,
    r: Option<&mut RawRegimes>,
) -> Result<Option<RegimesSpec>, ConfigError> {
    let Some(r) = r else { return Ok(None) };
    let control = control_key(c, "regimes.control", &r.control)?;
    let row_control = control_key(c, "regimes.row_control", &r.row_control)?;
    if control == row_control {
        return Err(c.range_err(
            "regimes.row_control",
            format!("\"{row_control}\""),
            "allowed: a key different from regimes.control".into(),
        ));
    }
    let (from, to) = increasing(c, ("from", "to"), &mut r.from, &mut r.to)?;
    let (row_from, row_to) = increasing(c, ("row_from", "row_to"), &mut r.row_from, &mut r.row_to)?;
    Ok(Some(RegimesSpec {
        control,
        from,
        to,
        columns: c.whole("regimes.columns", &mut r.columns)? as usize,
        row_control,
        row_from,
        row_to,
        rows: c.whole("regimes.rows", &mut r.rows)? as usize,
        max_points: c.whole("regimes.max_points", &mut r.max_points)? as usize,
        step: c.num("regimes.step", &mut r.step)?,
        max_step: c.num("regimes.max_step", &mut r.max_step)?,
        spacing: axis_spacing(c, "regimes.spacing", &mut r.spacing, (from, to))?,
        row_spacing: axis_spacing(c, "regimes.row_spacing", &mut r.row_spacing, (row_from, row_to))?,
        // The default is not written back, so configs without the key resolve as before.
        small_cap_min_latitude: match r.small_cap_min_latitude_deg {
            None => super::spec::DEFAULT_SMALL_CAP_MIN_LATITUDE,
            Some(_) => c.num(
                "regimes.small_cap_min_latitude_deg",
                &mut r.small_cap_min_latitude_deg,
            )?,
        },
    }))
}

/// A required increasing range `regimes.<lo>` < `regimes.<hi>`.
fn increasing(
    c: &Checker,
    (lo, hi): (&str, &str),
    a: &mut Option<f64>,
    b: &mut Option<f64>,
) -> Result<(f64, f64), ConfigError> {
    let from = c.num_or(&format!("regimes.{lo}"), a, f64::NAN)?;
    let to = c.num_or(&format!("regimes.{hi}"), b, f64::NAN)?;
    if !(from < to) {
        return Err(c.range_err(
            &format!("regimes.{hi}"),
            to.to_string(),
            format!("allowed: a number above regimes.{lo} = {from}"),
        ));
    }
    Ok((from, to))
}

/// `[[forcing.pieces]]`: kinds, targets and numbers checked, defaults filled in.
pub(super) fn forcing_pieces(
    c: &Checker,
    pieces: Option<&mut Vec<RawPiece>>,
) -> Result<Vec<Piece>, ConfigError> {
    pieces
        .into_iter()
        .flatten()
        .enumerate()
        .map(|(i, p)| forcing_piece(c, p, &|k: &str| format!("forcing.pieces[{i}].{k}")))
        .collect()
}

/// One `[[forcing.pieces]]` entry; `key` names its keys in messages.
fn forcing_piece(c: &Checker, p: &mut RawPiece, key: &dyn Fn(&str) -> String) -> Result<Piece, ConfigError> {
    let target = p.target.clone().unwrap_or_else(|| "forcing_wm2".into());
    if !crate::forcing::is_channel(&target) {
        return Err(c.range_err(
            &key("target"),
            format!("\"{target}\""),
            format!("allowed: {}", crate::forcing::allowed_names()),
        ));
    }
    p.target = Some(target.clone());
    let kind = c.choice_in(
        &key("kind"),
        &mut p.kind,
        "step",
        &["step", "ramp", "exponential", "sinusoid"],
    )?;
    let start = c.check(
        &key("start_year"),
        &mut p.start_year,
        0.0,
        Range::Closed(-1e9, 1e9),
    )?;
    let end = match p.end_year {
        None => f64::INFINITY,
        Some(e) if !(e.is_finite() && e > start) => {
            return Err(c.range_err(
                &key("end_year"),
                e.to_string(),
                format!("allowed: a year after start_year = {start}"),
            ))
        }
        Some(e) => e,
    };
    let need = |slot: &mut Option<f64>, name: &str, range: Range| -> Result<f64, ConfigError> {
        match *slot {
            None => Err(c.range_err(
                &key(name),
                "(missing)".into(),
                format!("required with kind = \"{kind}\"; {}", range.describe()),
            )),
            Some(_) => c.check(&key(name), slot, 0.0, range),
        }
    };
    let shape = match kind {
        "step" => PieceShape::Step {
            size: need(&mut p.size, "size", Range::Closed(-1e6, 1e6))?,
        },
        "ramp" => PieceShape::Ramp {
            rate: need(&mut p.rate_per_year, "rate_per_year", Range::Closed(-1e6, 1e6))?,
        },
        "exponential" => PieceShape::Exponential {
            rate: need(
                &mut p.rate_per_year,
                "rate_per_year",
                Range::AboveUpTo(-1.0, 10.0),
            )?,
        },
        _ => PieceShape::Sinusoid {
            amplitude: need(&mut p.amplitude, "amplitude", Range::Closed(-1e6, 1e6))?,
            period: need(&mut p.period_years, "period_years", Range::AboveUpTo(0.0, 1e9))?,
            phase: c
                .check(
                    &key("phase_deg"),
                    &mut p.phase_deg,
                    0.0,
                    Range::Closed(-360.0, 360.0),
                )?
                .to_radians(),
        },
    };
    Ok(Piece {
        target,
        shape,
        start,
        end,
    })
}

/// Sections whose numeric keys an ensemble may sample (the model's and its start).
const SAMPLED_SECTIONS: &[&str] = &[
    "insolation",
    "albedo",
    "longwave",
    "greenhouse",
    "transport",
    "heat_capacity",
    "initial",
    "forcing",
    "equilibrium",
];

/// `[ensemble]`, if present.
pub(super) fn ensemble_spec(
    c: &Checker,
    e: Option<&mut RawEnsemble>,
) -> Result<Option<EnsembleSpec>, ConfigError> {
    let Some(e) = e else { return Ok(None) };
    let members = c.whole("ensemble.members", &mut e.members)? as usize;
    let seed = c.whole("ensemble.seed", &mut e.seed)? as u64;
    let fields = *e.fields.get_or_insert(false);
    let sensitivity = *e.sensitivity.get_or_insert(false);
    let raw_params = e.parameters.get_or_insert_with(Vec::new);
    if raw_params.is_empty() {
        return Err(c.range_err(
            "ensemble.parameters",
            "(none)".into(),
            "allowed: one or more [[ensemble.parameters]] tables with `key` and `distribution`".into(),
        ));
    }
    let mut parameters: Vec<(String, Distribution)> = Vec::new();
    for (i, p) in raw_params.iter_mut().enumerate() {
        let key = |k: &str| format!("ensemble.parameters[{i}].{k}");
        let name = p.key.clone().unwrap_or_default();
        let sampled = keys::get(&name)
            .is_some_and(|k| k.is_number() && !k.is_whole() && SAMPLED_SECTIONS.contains(&k.section()));
        if !sampled {
            return Err(c.range_err(
                &key("key"),
                format!("\"{name}\""),
                format!(
                    "allowed: a numeric model key such as \"transport.diffusivity\" (of the sections {}; not whole-number keys)",
                    SAMPLED_SECTIONS.join(", ")
                ),
            ));
        }
        if parameters.iter().any(|(k, _)| *k == name) {
            return Err(c.range_err(
                &key("key"),
                format!("\"{name}\""),
                "allowed: each key once".into(),
            ));
        }
        parameters.push((name, distribution(c, p, &key)?));
    }
    Ok(Some(EnsembleSpec {
        members,
        seed,
        fields,
        sensitivity,
        parameters,
    }))
}

/// The distribution of one `[[ensemble.parameters]]` entry; `key` names its keys in messages.
fn distribution(
    c: &Checker,
    p: &mut RawEnsembleParameter,
    key: &dyn Fn(&str) -> String,
) -> Result<Distribution, ConfigError> {
    let dist = c.choice_in(
        &key("distribution"),
        &mut p.distribution,
        "uniform",
        &["uniform", "normal", "log_uniform", "values"],
    )?;
    let req = |slot: &mut Option<f64>, n: &str, range: Range| -> Result<f64, ConfigError> {
        match *slot {
            None => Err(c.range_err(
                &key(n),
                "(missing)".into(),
                format!("required with distribution = \"{dist}\""),
            )),
            Some(_) => c.check(&key(n), slot, 0.0, range),
        }
    };
    Ok(match dist {
        "uniform" | "log_uniform" => {
            let log = dist == "log_uniform";
            let min = req(
                &mut p.min,
                "min",
                if log { Range::Above(0.0) } else { Range::Any },
            )?;
            let max = req(&mut p.max, "max", Range::Any)?;
            if max <= min {
                return Err(c.range_err(
                    &key("max"),
                    max.to_string(),
                    format!("allowed: above min = {min}"),
                ));
            }
            if log {
                Distribution::LogUniform { min, max }
            } else {
                Distribution::Uniform { min, max }
            }
        }
        "normal" => Distribution::Normal {
            mean: req(&mut p.mean, "mean", Range::Any)?,
            sd: req(&mut p.sd, "sd", Range::Above(0.0))?,
        },
        _ => {
            let v = p.values.clone().unwrap_or_default();
            if v.is_empty() || v.iter().any(|x| !x.is_finite()) {
                return Err(c.range_err(
                    &key("values"),
                    format!("{v:?}"),
                    "allowed: a non-empty list of finite numbers".into(),
                ));
            }
            Distribution::Values(v)
        }
    })
}
