//! Range checks and defaults: raw values in, typed specs and the resolved raw config out.

use super::raw::*;
use super::spec::*;
use super::table::read_olr_table;
use super::ConfigError;
use crate::albedo::AlbedoForm;
use crate::grid::{Domain, Spacing};
use crate::longwave::{co2_forcing, Longwave, ZERO_CELSIUS};
use std::path::Path;

/// Largest number of bands accepted (memory and time stay modest below it).
pub const MAX_BANDS: i64 = 20_000;

/// Shortest run length, output interval, step limit or settling time accepted, years (about
/// 32 s: far below any time scale of the model, far above the integrators' smallest step of
/// 1e-12 years).
pub const MIN_YEARS: f64 = 1e-6;

/// A bound on a number.
#[derive(Clone, Copy)]
enum Range {
    /// `lo <= v <= hi`.
    Closed(f64, f64),
    /// `lo < v`.
    Above(f64),
    /// `lo <= v`.
    AtLeast(f64),
    /// `lo < v <= hi`.
    AboveUpTo(f64, f64),
    /// Any finite value.
    Any,
}

impl Range {
    fn ok(self, v: f64) -> bool {
        v.is_finite()
            && match self {
                Range::Closed(lo, hi) => v >= lo && v <= hi,
                Range::Above(lo) => v > lo,
                Range::AtLeast(lo) => v >= lo,
                Range::AboveUpTo(lo, hi) => v > lo && v <= hi,
                Range::Any => true,
            }
    }
    fn describe(self) -> String {
        match self {
            Range::Closed(lo, hi) => format!("allowed: a number from {lo} to {hi}"),
            Range::Above(lo) => format!("allowed: a finite number above {lo}"),
            Range::AtLeast(lo) => format!("allowed: a finite number of at least {lo}"),
            Range::AboveUpTo(lo, hi) => format!("allowed: a number above {lo} and at most {hi}"),
            Range::Any => "allowed: a finite number".into(),
        }
    }
}

struct Checker<'a> {
    source: &'a str,
}

impl Checker<'_> {
    fn range_err(&self, key: &str, value: String, allowed: String) -> ConfigError {
        ConfigError::Range {
            path: self.source.to_string(),
            key: key.to_string(),
            value,
            allowed,
        }
    }

    /// A number with a default, checked against `range`; stores the resolved value back.
    fn num(&self, key: &str, slot: &mut Option<f64>, default: f64, range: Range) -> Result<f64, ConfigError> {
        let v = slot.unwrap_or(default);
        if !range.ok(v) {
            return Err(self.range_err(key, v.to_string(), range.describe()));
        }
        *slot = Some(v);
        Ok(v)
    }

    /// A string choice with a default.
    fn choice<'c>(
        &self,
        key: &str,
        slot: &mut Option<String>,
        default: &str,
        allowed: &[&'c str],
    ) -> Result<&'c str, ConfigError> {
        let v = slot.clone().unwrap_or_else(|| default.to_string());
        match allowed.iter().find(|a| **a == v) {
            Some(a) => {
                *slot = Some(v);
                Ok(a)
            }
            None => Err(self.range_err(
                key,
                format!("\"{v}\""),
                format!(
                    "allowed: {}",
                    allowed
                        .iter()
                        .map(|a| format!("\"{a}\""))
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            )),
        }
    }
}

/// Degrees C above which a value typed for a `_c` key is most likely meant in Kelvin (no
/// freezing point or starting climate of the model is near 100 degrees C; 173 K to 373 K is
/// where Kelvin values of either would lie).
const KELVIN_LIKELY_ABOVE_C: f64 = 100.0;

/// Likely mistakes that are still valid input, one line each naming the key (printed by every
/// command that reads the config, `check` included): a Kelvin value typed for a degrees-C
/// key, and an ice albedo below the ice-free albedo. Takes the resolved config (every default
/// filled in).
pub fn warnings(raw: &RawConfig, source: &str) -> Vec<String> {
    let mut out = Vec::new();
    for (key, v) in [
        ("albedo.freeze_temperature_c", raw.albedo.freeze_temperature_c),
        ("initial.temperature_c", raw.initial.temperature_c),
    ] {
        if let Some(v) = v.filter(|v| *v > KELVIN_LIKELY_ABOVE_C) {
            out.push(format!(
                "{source}: key `{key}` = {v} is in degrees C; did you mean {v} K = {:.2} degrees C?",
                v - ZERO_CELSIUS
            ));
        }
    }
    if let (Some(ice), Some(free)) = (raw.albedo.ice, raw.albedo.ice_free) {
        if ice < free {
            out.push(format!(
                "{source}: key `albedo.ice` = {ice} is below `albedo.ice_free` = {free}: ice darker than open ground and ocean gives no ice-albedo feedback as usually meant; are the two swapped?"
            ));
        }
    }
    out
}

/// Validate a raw config; returns the resolved raw config (defaults filled) and the spec.
pub fn validate(mut raw: RawConfig, source: &str, base_dir: &Path) -> Result<(RawConfig, Spec), ConfigError> {
    let c = Checker { source };

    // [grid]
    let g = &mut raw.grid;
    let domain = match c.choice(
        "grid.domain",
        &mut g.domain,
        "hemisphere",
        &["hemisphere", "globe"],
    )? {
        "globe" => Domain::Globe,
        _ => Domain::Hemisphere,
    };
    let spacing = match c.choice(
        "grid.spacing",
        &mut g.spacing,
        "equal_area",
        &["equal_area", "equal_angle"],
    )? {
        "equal_angle" => Spacing::EqualAngle,
        _ => Spacing::EqualArea,
    };
    let bands = g.bands.unwrap_or(90);
    if !(1..=MAX_BANDS).contains(&bands) {
        return Err(c.range_err(
            "grid.bands",
            bands.to_string(),
            format!("allowed: a whole number from 1 to {MAX_BANDS}"),
        ));
    }
    g.bands = Some(bands);
    let bands = bands as usize;

    // [insolation]
    let ins = &mut raw.insolation;
    let kind = c.choice(
        "insolation.kind",
        &mut ins.kind,
        "legendre",
        &["legendre", "annual_mean", "seasonal"],
    )?;
    let s0 = c.num(
        "insolation.solar_constant",
        &mut ins.solar_constant,
        1361.0,
        Range::Above(0.0),
    )?;
    let obl = c.num(
        "insolation.obliquity_deg",
        &mut ins.obliquity_deg,
        23.44,
        Range::Closed(0.0, 180.0),
    )?;
    let ecc = c.num(
        "insolation.eccentricity",
        &mut ins.eccentricity,
        0.0,
        Range::Closed(0.0, 0.9),
    )?;
    let peri = c.num(
        "insolation.perihelion_deg",
        &mut ins.perihelion_deg,
        0.0,
        Range::Closed(-360.0, 360.0),
    )?;
    let form = match kind {
        "legendre" => {
            let default_s2 = crate::insolation::s2_from_obliquity(obl.to_radians());
            // Insolation must stay non-negative: 1 + s2 P2 >= 0 for P2 in [-1/2, 1].
            let s2 = c.num("insolation.s2", &mut ins.s2, default_s2, Range::Closed(-1.0, 2.0))?;
            InsolationForm::Legendre { s2 }
        }
        "annual_mean" => InsolationForm::AnnualMean,
        _ => InsolationForm::Seasonal,
    };
    let insolation = InsolationSpec {
        form,
        solar_constant: s0,
        obliquity: obl.to_radians(),
        eccentricity: ecc,
        perihelion: peri.to_radians(),
    };

    // [albedo]
    let a = &mut raw.albedo;
    let akind = c.choice("albedo.kind", &mut a.kind, "step", &["step", "smooth", "ramp"])?;
    let ice_free = c.num("albedo.ice_free", &mut a.ice_free, 0.3, Range::Closed(0.0, 1.0))?;
    let ice_free_p2 = c.num(
        "albedo.ice_free_p2",
        &mut a.ice_free_p2,
        0.0,
        Range::Closed(-1.0, 1.0),
    )?;
    // Albedo must stay in [0, 1] where P2 runs over [-1/2, 1].
    for (p, name) in [(-0.5, "equator"), (1.0, "pole")] {
        let v = ice_free + ice_free_p2 * p;
        if !(0.0..=1.0).contains(&v) {
            return Err(c.range_err(
                "albedo.ice_free_p2",
                ice_free_p2.to_string(),
                format!("allowed: values keeping ice_free + ice_free_p2 P2(x) within [0, 1]; it is {v} at the {name}"),
            ));
        }
    }
    let ice = c.num("albedo.ice", &mut a.ice, 0.62, Range::Closed(0.0, 1.0))?;
    let freeze_c = c.num(
        "albedo.freeze_temperature_c",
        &mut a.freeze_temperature_c,
        -10.0,
        Range::Closed(-273.0, 1000.0),
    )?;
    let width = c.num("albedo.width_k", &mut a.width_k, 5.0, Range::Above(0.0))?;
    let aform = match akind {
        "smooth" => AlbedoForm::Smooth { width },
        "ramp" => AlbedoForm::Ramp { width },
        _ => AlbedoForm::Step,
    };
    let albedo = AlbedoSpec {
        form: aform,
        ice_free,
        ice_free_p2,
        ice,
        freeze_k: freeze_c + ZERO_CELSIUS,
    };

    // [longwave]
    let l = &mut raw.longwave;
    let lkind = c.choice(
        "longwave.kind",
        &mut l.kind,
        "linear",
        &["linear", "gray_body", "emission_level", "table"],
    )?;
    let longwave = match lkind {
        "linear" => Longwave::Linear {
            a: c.num("longwave.a", &mut l.a, 203.3, Range::Any)?,
            b: c.num("longwave.b", &mut l.b, 2.09, Range::Above(0.0))?,
        },
        "gray_body" => Longwave::GrayBody {
            emissivity: c.num(
                "longwave.emissivity",
                &mut l.emissivity,
                0.61,
                Range::AboveUpTo(0.0, 1.0),
            )?,
        },
        "emission_level" => Longwave::EmissionLevel {
            lapse_rate: c.num(
                "longwave.lapse_rate_k_per_km",
                &mut l.lapse_rate_k_per_km,
                6.5,
                Range::Closed(0.0, 15.0),
            )?,
            height: c.num(
                "longwave.emission_height_km",
                &mut l.emission_height_km,
                5.0,
                Range::Closed(0.0, 30.0),
            )?,
        },
        _ => {
            let rel = l.table.clone().ok_or_else(|| {
                c.range_err(
                    "longwave.table",
                    "(missing)".into(),
                    "required with longwave.kind = \"table\": a CSV path".into(),
                )
            })?;
            let path = base_dir.join(&rel);
            Longwave::Table(read_olr_table(&path)?)
        }
    };

    // [greenhouse]
    let gh = &mut raw.greenhouse;
    let co2 = c.num("greenhouse.co2_ppm", &mut gh.co2_ppm, 280.0, Range::Above(0.0))?;
    let co2_ref = c.num(
        "greenhouse.reference_co2_ppm",
        &mut gh.reference_co2_ppm,
        280.0,
        Range::Above(0.0),
    )?;
    let k = c.num(
        "greenhouse.log_coefficient_wm2",
        &mut gh.log_coefficient_wm2,
        5.35,
        Range::Any,
    )?;
    let greenhouse_wm2 = co2_forcing(k, co2, co2_ref);

    // [transport]
    let t = &mut raw.transport;
    let tkind = c.choice(
        "transport.kind",
        &mut t.kind,
        "diffusive",
        &["diffusive", "relaxation"],
    )?;
    let transport = match tkind {
        "relaxation" => TransportSpec::Relaxation {
            rate: c.num(
                "transport.relaxation_rate",
                &mut t.relaxation_rate,
                3.8,
                Range::Closed(0.0, 1e6),
            )?,
        },
        _ => {
            let d0 = c.num(
                "transport.diffusivity",
                &mut t.diffusivity,
                0.55,
                Range::Closed(0.0, 1e6),
            )?;
            let d2 = c.num("transport.diffusivity_p2", &mut t.diffusivity_p2, 0.0, Range::Any)?;
            // D(x) >= 0 for P2 in [-1/2, 1].
            if 1.0 + d2 < 0.0 || 1.0 - 0.5 * d2 < 0.0 {
                return Err(c.range_err(
                    "transport.diffusivity_p2",
                    d2.to_string(),
                    "allowed: -1 to 2 (keeps D(x) >= 0)".into(),
                ));
            }
            TransportSpec::Diffusive { d0, d2 }
        }
    };

    // [heat_capacity]
    let h = &mut raw.heat_capacity;
    let ocean = match (h.value, h.mixed_layer_depth_m) {
        (Some(_), Some(_)) => {
            return Err(c.range_err(
                "heat_capacity.mixed_layer_depth_m",
                format!("{:?}", h.mixed_layer_depth_m.unwrap_or_default()),
                "give either heat_capacity.value or heat_capacity.mixed_layer_depth_m, not both".into(),
            ))
        }
        (None, Some(_)) => {
            let d = c.num(
                "heat_capacity.mixed_layer_depth_m",
                &mut h.mixed_layer_depth_m,
                0.0,
                Range::AboveUpTo(0.0, 1e4),
            )?;
            // Sea water: rho = 1025 kg m-3, c_p = 3985 J kg-1 K-1 (common practice).
            1025.0 * 3985.0 * d
        }
        _ => c.num(
            "heat_capacity.value",
            &mut h.value,
            4.0e8,
            Range::AboveUpTo(0.0, 1e12),
        )?,
    };
    let land = c.num(
        "heat_capacity.land_value",
        &mut h.land_value,
        1.0e7,
        Range::AboveUpTo(0.0, 1e12),
    )?;
    let land_fraction = match &h.land_fraction {
        None => vec![],
        Some(RawLandFraction::Uniform(f)) => {
            if !(0.0..=1.0).contains(f) {
                return Err(c.range_err(
                    "heat_capacity.land_fraction",
                    f.to_string(),
                    Range::Closed(0.0, 1.0).describe(),
                ));
            }
            vec![*f; bands]
        }
        Some(RawLandFraction::PerBand(v)) => {
            if v.len() != bands {
                return Err(c.range_err(
                    "heat_capacity.land_fraction",
                    format!("a list of {}", v.len()),
                    format!("allowed: one number, or a list of grid.bands = {bands} numbers from 0 to 1"),
                ));
            }
            if let Some(bad) = v.iter().find(|f| !(0.0..=1.0).contains(*f)) {
                return Err(c.range_err(
                    "heat_capacity.land_fraction",
                    bad.to_string(),
                    Range::Closed(0.0, 1.0).describe(),
                ));
            }
            v.clone()
        }
    };
    let heat_capacity = HeatCapacitySpec {
        ocean,
        land,
        land_fraction,
    };

    // [forcing]
    let f = &mut raw.forcing;
    let extra_wm2 = c.num(
        "forcing.constant_wm2",
        &mut f.constant_wm2,
        0.0,
        Range::Closed(-1e4, 1e4),
    )?;
    let solar_scale = c.num(
        "forcing.solar_scale",
        &mut f.solar_scale,
        1.0,
        Range::Closed(0.0, 100.0),
    )?;
    let interp = match c.choice(
        "forcing.interpolation",
        &mut f.interpolation,
        "linear",
        &["linear", "step"],
    )? {
        "step" => crate::forcing::Interpolation::Step,
        _ => crate::forcing::Interpolation::Linear,
    };
    let hold = c.choice("forcing.outside", &mut f.outside, "error", &["error", "hold"])? == "hold";
    let forcing_file = f.file.clone();
    let pieces = forcing_pieces(&c, f.pieces.as_mut())?;

    // [initial]
    let i = &mut raw.initial;
    let t0 = c.num(
        "initial.temperature_c",
        &mut i.temperature_c,
        15.0,
        Range::Closed(-272.0, 1500.0),
    )?;
    let p2k = c.num(
        "initial.temperature_p2_k",
        &mut i.temperature_p2_k,
        0.0,
        Range::Closed(-500.0, 500.0),
    )?;
    let p1k = c.num(
        "initial.temperature_p1_k",
        &mut i.temperature_p1_k,
        0.0,
        Range::Closed(-500.0, 500.0),
    )?;
    let initial = InitialSpec {
        temperature_k: t0 + ZERO_CELSIUS,
        p2_k: p2k,
        p1_k: p1k,
    };

    // [time]
    let tm = &mut raw.time;
    let years = c.num("time.years", &mut tm.years, 100.0, Range::Closed(MIN_YEARS, 1e9))?;
    // Annual means sample 24 times a year unless told otherwise.
    let default_every = if tm.output.as_deref() == Some("annual_mean") {
        1.0 / 24.0
    } else {
        1.0_f64.min(years)
    };
    let output_every = c.num(
        "time.output_every_years",
        &mut tm.output_every_years,
        default_every,
        Range::Closed(MIN_YEARS, 1e9),
    )?;
    if years / output_every > 1e8 {
        return Err(c.range_err(
            "time.output_every_years",
            output_every.to_string(),
            "allowed: at most 1e8 output times in a run (time.years / time.output_every_years)".into(),
        ));
    }
    let method = match c.choice(
        "time.method",
        &mut tm.method,
        "implicit",
        &["implicit", "dopri5", "dop853"],
    )? {
        "dopri5" => Method::Dopri5,
        "dop853" => Method::Dop853,
        _ => Method::Implicit,
    };
    let fixed_step = match tm.step_days {
        Some(d) => {
            if method != Method::Implicit {
                return Err(c.range_err("time.step_days", d.to_string(), "allowed only with time.method = \"implicit\" (Dopri5 and Dop853 always adapt their step)".into()));
            }
            let mut slot = Some(d);
            Some(c.num("time.step_days", &mut slot, d, Range::AboveUpTo(0.0, 365.25e6))? / 365.25)
        }
        None => None,
    };
    let tolerance = c.num(
        "time.tolerance",
        &mut tm.tolerance,
        1e-2,
        Range::AboveUpTo(0.0, 100.0),
    )?;
    let max_step = c.num(
        "time.max_step_years",
        &mut tm.max_step_years,
        years.min(1000.0),
        Range::AtLeast(MIN_YEARS),
    )?;
    let stiffness_check = *tm.stiffness_check.get_or_insert(true);
    let max_steps = tm.max_steps.unwrap_or(50_000_000);
    if max_steps < 1 {
        return Err(c.range_err(
            "time.max_steps",
            max_steps.to_string(),
            "allowed: a whole number of at least 1".into(),
        ));
    }
    tm.max_steps = Some(max_steps);
    let output = match c.choice(
        "time.output",
        &mut tm.output,
        "instant",
        &["instant", "every_step", "annual_mean"],
    )? {
        "every_step" => {
            if method != Method::Implicit {
                return Err(c.range_err(
                    "time.output",
                    "\"every_step\"".into(),
                    "allowed only with time.method = \"implicit\" (the explicit schemes step inside ode_solvers)".into(),
                ));
            }
            OutputMode::EveryStep
        }
        "annual_mean" => {
            let per_year = (1.0 / output_every).round();
            if per_year < 1.0 || (per_year * output_every - 1.0).abs() > 1e-9 {
                return Err(c.range_err(
                    "time.output_every_years",
                    output_every.to_string(),
                    "with time.output = \"annual_mean\" a sampling interval, if given, must divide a year: 1/n years for a whole number n (it has no effect: the means integrate the whole trajectory)".into(),
                ));
            }
            if years < 1.0 {
                return Err(c.range_err(
                    "time.years",
                    years.to_string(),
                    "with time.output = \"annual_mean\" allowed: at least 1 (only whole model years are written)".into(),
                ));
            }
            OutputMode::AnnualMean
        }
        _ => OutputMode::Instant,
    };
    // Annual means integrate the trajectory and write one record a year (a sampling interval
    // given for them, 1/n years, is accepted from older configs and has no effect).
    let output_every = match output {
        OutputMode::AnnualMean => 1.0,
        _ => output_every,
    };
    let series = match forcing_file {
        None => None,
        Some(rel) => {
            let path = base_dir.join(&rel);
            let shown = path.display().to_string();
            let text = crate::csv::read_text(
                &path,
                crate::forcing::MAX_FILE_BYTES,
                "forcing file (forcing.file)",
            )
            .map_err(|message| ConfigError::DataFile {
                path: shown.clone(),
                message,
            })?;
            let series = crate::forcing::ForcingSeries::parse(&text, interp, hold)
                .and_then(|s| s.check_covers(years).map(|_| s))
                .map_err(|e| ConfigError::DataFile {
                    path: if e.line > 0 {
                        format!("{shown}:{}", e.line)
                    } else {
                        shown.clone()
                    },
                    message: e.message,
                })?;
            Some((series, shown))
        }
    };
    let forcing = if series.is_none() && pieces.is_empty() {
        None
    } else {
        let bases = crate::forcing::Bases {
            co2_ppm: co2,
            reference_co2_ppm: co2_ref,
            log_coefficient_wm2: k,
            constant_wm2: extra_wm2,
            solar_scale,
            solar_constant: s0,
            linear_a: match &longwave {
                Longwave::Linear { a, .. } => Some(*a),
                _ => None,
            },
            linear_b: match &longwave {
                Longwave::Linear { b, .. } => Some(*b),
                _ => None,
            },
            emissivity: match &longwave {
                Longwave::GrayBody { emissivity } => Some(*emissivity),
                _ => None,
            },
            diffusivity: match transport {
                TransportSpec::Diffusive { d0, .. } => Some(d0),
                _ => None,
            },
            relaxation_rate: match transport {
                TransportSpec::Relaxation { rate } => Some(rate),
                _ => None,
            },
        };
        let shown = series.as_ref().map(|(_, p)| p.clone());
        let fspec = crate::forcing::ForcingSpec::new(series.map(|(s, _)| s), pieces, bases)
            .and_then(|f| f.check_values(years).map(|_| f))
            .map_err(|message| match &shown {
                Some(p) => ConfigError::DataFile {
                    path: p.clone(),
                    message,
                },
                None => ConfigError::Key {
                    path: c.source.to_string(),
                    key: "forcing.pieces".into(),
                    message,
                },
            })?;
        Some(std::sync::Arc::new(fspec))
    };
    let time = TimeSpec {
        years,
        output_every,
        method,
        fixed_step,
        tolerance,
        max_step,
        stiffness_check,
        max_steps: max_steps as u64,
        output,
    };

    // [equilibrium]
    let e = &mut raw.equilibrium;
    let eq_tol = c.num(
        "equilibrium.tolerance_wm2",
        &mut e.tolerance_wm2,
        1e-9,
        Range::Above(0.0),
    )?;
    let eq_it = e.max_iterations.unwrap_or(100);
    if !(1..=100_000).contains(&eq_it) {
        return Err(c.range_err(
            "equilibrium.max_iterations",
            eq_it.to_string(),
            "allowed: 1 to 100000".into(),
        ));
    }
    e.max_iterations = Some(eq_it);
    let equilibrium = EquilibriumSpec {
        tolerance_wm2: eq_tol,
        max_iterations: eq_it as usize,
        sensitivity: *e.sensitivity.get_or_insert(false),
    };

    // [output]
    let o = &mut raw.output;
    let level = o
        .deflate_level
        .unwrap_or(i64::from(crate::output::DEFAULT_DEFLATE_LEVEL));
    let max_level = crate::output::MAX_DEFLATE_LEVEL;
    if !(0..=i64::from(max_level)).contains(&level) {
        return Err(c.range_err(
            "output.deflate_level",
            level.to_string(),
            format!(
                "allowed: a whole number from 0 (no compression, fastest) to {max_level} (smallest files)"
            ),
        ));
    }
    o.deflate_level = Some(level);
    let output = OutputSpec {
        deflate_level: level as u8,
    };

    // [sweep]
    let sweep = match raw.sweep.as_mut() {
        None => None,
        Some(s) => {
            let control = control_key(&c, "sweep.control", &s.control)?;
            let from = c.num("sweep.from", &mut s.from, f64::NAN, Range::Any)?;
            let to = c.num("sweep.to", &mut s.to, f64::NAN, Range::Any)?;
            if from == to {
                return Err(c.range_err(
                    "sweep.to",
                    to.to_string(),
                    "allowed: a value different from sweep.from".into(),
                ));
            }
            let steps = s.steps.unwrap_or(61);
            if !(2..=100_000).contains(&steps) {
                return Err(c.range_err("sweep.steps", steps.to_string(), "allowed: 2 to 100000".into()));
            }
            s.steps = Some(steps);
            Some(SweepSpec {
                control,
                from,
                to,
                steps: steps as usize,
                settle_k_per_year: c.num(
                    "sweep.settle_k_per_year",
                    &mut s.settle_k_per_year,
                    1e-4,
                    Range::Above(0.0),
                )?,
                settle_max_years: c.num(
                    "sweep.settle_max_years",
                    &mut s.settle_max_years,
                    20_000.0,
                    Range::AtLeast(MIN_YEARS),
                )?,
                refine_relative: c.num(
                    "sweep.refine_relative",
                    &mut s.refine_relative,
                    1e-4,
                    Range::AboveUpTo(0.0, 0.5),
                )?,
                spacing: axis_spacing(&c, "sweep", "spacing", &mut s.spacing, (from, to))?,
            })
        }
    };

    // [branches]
    let branches = match raw.branches.as_mut() {
        None => None,
        Some(b) => {
            let control = control_key(&c, "branches.control", &b.control)?;
            let from = c.num("branches.from", &mut b.from, f64::NAN, Range::Any)?;
            let to = c.num("branches.to", &mut b.to, f64::NAN, Range::Any)?;
            if from >= to {
                return Err(c.range_err(
                    "branches.to",
                    to.to_string(),
                    format!("allowed: a value above branches.from = {from}"),
                ));
            }
            let step = c.num("branches.step", &mut b.step, 0.02, Range::Above(0.0))?;
            let max_step = c.num("branches.max_step", &mut b.max_step, 0.1, Range::Above(0.0))?;
            // A branch needs about 14 points per band with the step albedo's edge-balance
            // rule, so the default grows with the band count (5000 up to 250 bands).
            let mp = b.max_points.unwrap_or((5000).max(20 * bands as i64));
            if !(10..=1_000_000).contains(&mp) {
                return Err(c.range_err(
                    "branches.max_points",
                    mp.to_string(),
                    "allowed: 10 to 1000000".into(),
                ));
            }
            b.max_points = Some(mp);
            Some(BranchesSpec {
                control,
                from,
                to,
                step,
                max_step,
                max_points: mp as usize,
                spacing: axis_spacing(&c, "branches", "spacing", &mut b.spacing, (from, to))?,
            })
        }
    };

    let ensemble = ensemble_spec(&c, raw.ensemble.as_mut())?;
    let regimes = regimes_spec(&c, raw.regimes.as_mut())?;

    let spec = Spec {
        title: raw.title.clone().unwrap_or_else(|| "icefold scenario".into()),
        model: ModelSpec {
            domain,
            spacing,
            bands,
            insolation,
            albedo,
            longwave,
            greenhouse_wm2,
            transport,
            heat_capacity,
            extra_wm2,
            solar_scale,
            co2: (co2, co2_ref, k),
            forcing,
        },
        initial,
        time,
        equilibrium,
        output,
        sweep,
        branches,
        ensemble,
        regimes,
    };
    Ok((raw, spec))
}

/// `[[forcing.pieces]]`: kinds, targets and numbers checked, defaults filled in.
fn forcing_pieces(
    c: &Checker,
    pieces: Option<&mut Vec<RawPiece>>,
) -> Result<Vec<crate::forcing::Piece>, ConfigError> {
    use crate::forcing::{Piece, PieceShape, COLUMNS, TIME_VARYING_KEYS};
    let mut out = Vec::new();
    for (i, p) in pieces.into_iter().flatten().enumerate() {
        let key = |k: &str| format!("forcing.pieces[{i}].{k}");
        let target = p.target.clone().unwrap_or_else(|| "forcing_wm2".into());
        if !COLUMNS.contains(&target.as_str()) && !TIME_VARYING_KEYS.contains(&target.as_str()) {
            return Err(c.range_err(
                &key("target"),
                format!("\"{target}\""),
                format!("allowed: {}", crate::forcing::allowed_names()),
            ));
        }
        p.target = Some(target.clone());
        let kind = c.choice(
            &key("kind"),
            &mut p.kind,
            "step",
            &["step", "ramp", "exponential", "sinusoid"],
        )?;
        let start = c.num(
            &key("start_year"),
            &mut p.start_year,
            0.0,
            Range::Closed(-1e9, 1e9),
        )?;
        let end = match p.end_year {
            None => f64::INFINITY,
            Some(e) => {
                if !(e.is_finite() && e > start) {
                    return Err(c.range_err(
                        &key("end_year"),
                        e.to_string(),
                        format!("allowed: a year after start_year = {start}"),
                    ));
                }
                e
            }
        };
        let need = |slot: &mut Option<f64>, name: &str, range: Range| -> Result<f64, ConfigError> {
            match *slot {
                None => Err(c.range_err(
                    &key(name),
                    "(missing)".into(),
                    format!("required with kind = \"{kind}\"; {}", range.describe()),
                )),
                Some(_) => c.num(&key(name), slot, 0.0, range),
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
                    .num(
                        &key("phase_deg"),
                        &mut p.phase_deg,
                        0.0,
                        Range::Closed(-360.0, 360.0),
                    )?
                    .to_radians(),
            },
        };
        out.push(Piece {
            target,
            shape,
            start,
            end,
        });
    }
    Ok(out)
}

/// `[ensemble]`, if present.
fn ensemble_spec(c: &Checker, e: Option<&mut RawEnsemble>) -> Result<Option<EnsembleSpec>, ConfigError> {
    use crate::ensemble::Distribution;
    let Some(e) = e else { return Ok(None) };
    let members = e.members.unwrap_or(100);
    if !(1..=10_000_000).contains(&members) {
        return Err(c.range_err(
            "ensemble.members",
            members.to_string(),
            "allowed: a whole number from 1 to 10000000".into(),
        ));
    }
    e.members = Some(members);
    let seed = e.seed.unwrap_or(1);
    if seed < 0 {
        return Err(c.range_err(
            "ensemble.seed",
            seed.to_string(),
            "allowed: a whole number of 0 or more".into(),
        ));
    }
    e.seed = Some(seed);
    let fields = *e.fields.get_or_insert(false);
    let sensitivity = *e.sensitivity.get_or_insert(false);
    let mut parameters = Vec::new();
    let raw_params = e.parameters.get_or_insert_with(Vec::new);
    if raw_params.is_empty() {
        return Err(c.range_err(
            "ensemble.parameters",
            "(none)".into(),
            "allowed: one or more [[ensemble.parameters]] tables with `key` and `distribution`".into(),
        ));
    }
    for (i, p) in raw_params.iter_mut().enumerate() {
        let key = |k: &str| format!("ensemble.parameters[{i}].{k}");
        let name = p.key.clone().unwrap_or_default();
        let top = name.split('.').next().unwrap_or("");
        let shape_ok = name.split('.').count() >= 2
            && name
                .split('.')
                .all(|s| !s.is_empty() && s.chars().all(|ch| ch.is_ascii_alphanumeric() || ch == '_'));
        if !shape_ok
            || ["grid", "time", "ensemble", "sweep", "branches"].contains(&top)
            || INTEGER_KEYS.contains(&name.as_str())
        {
            return Err(c.range_err(
                &key("key"),
                format!("\"{name}\""),
                "allowed: a dotted numeric model key such as \"transport.diffusivity\" (not grid.*, time.*, ensemble.*, sweep.*, branches.* or whole-number keys)".into(),
            ));
        }
        if parameters
            .iter()
            .any(|(k, _): &(String, Distribution)| *k == name)
        {
            return Err(c.range_err(
                &key("key"),
                format!("\"{name}\""),
                "allowed: each key once".into(),
            ));
        }
        let dist = c.choice(
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
                Some(_) => c.num(&key(n), slot, 0.0, range),
            }
        };
        let d = match dist {
            "uniform" | "log_uniform" => {
                let lo_range = if dist == "log_uniform" {
                    Range::Above(0.0)
                } else {
                    Range::Any
                };
                let min = req(&mut p.min, "min", lo_range)?;
                let max = req(&mut p.max, "max", Range::Any)?;
                if max <= min {
                    return Err(c.range_err(
                        &key("max"),
                        max.to_string(),
                        format!("allowed: above min = {min}"),
                    ));
                }
                if dist == "uniform" {
                    Distribution::Uniform { min, max }
                } else {
                    Distribution::LogUniform { min, max }
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
        };
        parameters.push((name, d));
    }
    Ok(Some(EnsembleSpec {
        members: members as usize,
        seed: seed as u64,
        fields,
        sensitivity,
        parameters,
    }))
}

/// Keys that can be a sweep or continuation control: every numeric model key.
pub const CONTROL_KEYS: &[&str] = &[
    "insolation.solar_constant",
    "insolation.s2",
    "insolation.obliquity_deg",
    "insolation.eccentricity",
    "albedo.ice_free",
    "albedo.ice_free_p2",
    "albedo.ice",
    "albedo.freeze_temperature_c",
    "albedo.width_k",
    "longwave.a",
    "longwave.b",
    "longwave.emissivity",
    "longwave.lapse_rate_k_per_km",
    "longwave.emission_height_km",
    "greenhouse.co2_ppm",
    "greenhouse.reference_co2_ppm",
    "greenhouse.log_coefficient_wm2",
    "transport.diffusivity",
    "transport.diffusivity_p2",
    "transport.relaxation_rate",
    "forcing.constant_wm2",
    "forcing.solar_scale",
];

fn control_key(c: &Checker, key: &str, v: &Option<String>) -> Result<String, ConfigError> {
    match v {
        Some(k) if CONTROL_KEYS.contains(&k.as_str()) => Ok(k.clone()),
        other => Err(c.range_err(
            key,
            other
                .clone()
                .map(|s| format!("\"{s}\""))
                .unwrap_or_else(|| "(missing)".into()),
            format!(
                "allowed: one of the numeric model keys {}",
                CONTROL_KEYS.join(", ")
            ),
        )),
    }
}

/// `<section>.<key>`: "linear" (default) or "log"; log needs both ends of the axis above 0.
fn axis_spacing(
    c: &Checker,
    section: &str,
    key: &str,
    slot: &mut Option<String>,
    (from, to): (f64, f64),
) -> Result<AxisSpacing, ConfigError> {
    let name = format!("{section}.{key}");
    // The default is not written back, so configs without the key resolve as before.
    if slot.is_none() {
        return Ok(AxisSpacing::Linear);
    }
    match c.choice(&name, slot, "linear", &["linear", "log"])? {
        "log" => {
            if !(from > 0.0 && to > 0.0) {
                return Err(c.range_err(
                    &name,
                    "\"log\"".into(),
                    format!(
                        "allowed: \"log\" only when both ends of the axis are above 0 (here {from} and {to}); else \"linear\""
                    ),
                ));
            }
            Ok(AxisSpacing::Log)
        }
        _ => Ok(AxisSpacing::Linear),
    }
}

// ---- [regimes] (the 2-D regime map) ----

/// `[regimes]`: both keys numeric model keys and different, both ranges increasing, counts
/// and continuation settings in range, defaults filled in.
fn regimes_spec(
    c: &Checker,
    r: Option<&mut crate::config::raw::RawRegimes>,
) -> Result<Option<crate::config::spec::RegimesSpec>, ConfigError> {
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
    let range = |lo: &str, hi: &str, a: &mut Option<f64>, b: &mut Option<f64>| {
        let from = c.num(&format!("regimes.{lo}"), a, f64::NAN, Range::Any)?;
        let to = c.num(&format!("regimes.{hi}"), b, f64::NAN, Range::Any)?;
        if !(from < to) {
            return Err(c.range_err(
                &format!("regimes.{hi}"),
                to.to_string(),
                format!("allowed: a number above regimes.{lo} = {from}"),
            ));
        }
        Ok((from, to))
    };
    let (from, to) = range("from", "to", &mut r.from, &mut r.to)?;
    let (row_from, row_to) = range("row_from", "row_to", &mut r.row_from, &mut r.row_to)?;
    let count = |key: &str, v: &mut Option<i64>, default: i64, lo: i64, hi: i64| {
        let n = v.unwrap_or(default);
        if !(lo..=hi).contains(&n) {
            return Err(c.range_err(key, n.to_string(), format!("allowed: {lo} to {hi}")));
        }
        *v = Some(n);
        Ok(n as usize)
    };
    let columns = count("regimes.columns", &mut r.columns, 101, 2, 10_000)?;
    let rows = count("regimes.rows", &mut r.rows, 21, 2, 10_000)?;
    let max_points = count("regimes.max_points", &mut r.max_points, 5000, 10, 1_000_000)?;
    let step = c.num("regimes.step", &mut r.step, 0.02, Range::Above(0.0))?;
    let max_step = c.num("regimes.max_step", &mut r.max_step, 0.1, Range::Above(0.0))?;
    let spacing = axis_spacing(c, "regimes", "spacing", &mut r.spacing, (from, to))?;
    let row_spacing = axis_spacing(
        c,
        "regimes",
        "row_spacing",
        &mut r.row_spacing,
        (row_from, row_to),
    )?;
    // The default is not written back, so configs without the key resolve as before.
    let small_cap_min_latitude = match r.small_cap_min_latitude_deg {
        None => crate::equilibrium::regimes::SMALL_CAP_MIN_LATITUDE,
        Some(_) => c.num(
            "regimes.small_cap_min_latitude_deg",
            &mut r.small_cap_min_latitude_deg,
            crate::equilibrium::regimes::SMALL_CAP_MIN_LATITUDE,
            Range::AboveUpTo(0.0, 90.0),
        )?,
    };
    Ok(Some(crate::config::spec::RegimesSpec {
        control,
        from,
        to,
        columns,
        row_control,
        row_from,
        row_to,
        rows,
        step,
        max_step,
        max_points,
        spacing,
        row_spacing,
        small_cap_min_latitude,
    }))
}
