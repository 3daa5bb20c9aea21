//! Range checks and defaults: raw values in, typed specs and the resolved raw config out.
//!
//! One short function per section; defaults, ranges and allowed names come from the key
//! registry ([`super::keys`]). A section with kinds refuses the keys of its other kinds.

use super::keys::{self, Range, Value};
use super::raw::*;
use super::spec::*;
use super::table::read_olr_table;
use super::validate_jobs::{branches_spec, ensemble_spec, forcing_pieces, regimes_spec, sweep_spec};
use super::ConfigError;
use crate::grid::{Domain, Spacing};
use crate::physics::albedo::AlbedoForm;
use crate::physics::longwave::{Longwave, ZERO_CELSIUS};
use crate::physics::transport::TransportForm;
use serde::Serialize;
use std::path::Path;
use std::sync::Arc;

/// Largest number of bands accepted (memory and time stay modest below it).
pub const MAX_BANDS: i64 = 20_000;

/// Shortest run length, output interval, step limit or settling time accepted, years (about
/// 32 s: far below any time scale of the model, far above the integrators' smallest step of
/// 1e-12 years).
pub const MIN_YEARS: f64 = 1e-6;

/// Checks values against the registry and writes the resolved values back.
pub(super) struct Checker<'a> {
    pub(super) source: &'a str,
}

impl Checker<'_> {
    pub(super) fn range_err(&self, key: &str, value: String, allowed: String) -> ConfigError {
        ConfigError::Range {
            path: self.source.to_string(),
            key: key.to_string(),
            value,
            allowed,
        }
    }

    /// A number with a default, checked against `range`; stores the resolved value back.
    pub(super) fn check(
        &self,
        key: &str,
        slot: &mut Option<f64>,
        default: f64,
        range: Range,
    ) -> Result<f64, ConfigError> {
        let v = slot.unwrap_or(default);
        if !range.ok(v) {
            return Err(self.range_err(key, v.to_string(), range.describe()));
        }
        *slot = Some(v);
        Ok(v)
    }

    /// A registry number with its declared default.
    pub(super) fn num(&self, key: &str, slot: &mut Option<f64>) -> Result<f64, ConfigError> {
        let k = declared(key);
        let default = match k.value {
            Value::Number {
                default: keys::Default::Number(d),
                ..
            } => d,
            _ => f64::NAN,
        };
        self.check(key, slot, default, k.range())
    }

    /// A registry number with a default computed from other keys (NaN: required).
    pub(super) fn num_or(&self, key: &str, slot: &mut Option<f64>, default: f64) -> Result<f64, ConfigError> {
        self.check(key, slot, default, declared(key).range())
    }

    /// A registry whole number with `default`.
    pub(super) fn whole_or(
        &self,
        key: &str,
        slot: &mut Option<i64>,
        default: i64,
    ) -> Result<i64, ConfigError> {
        let (lo, hi) = match declared(key).range() {
            Range::Closed(lo, hi) => (lo as i64, hi as i64),
            _ => (i64::MIN, i64::MAX),
        };
        let n = slot.unwrap_or(default);
        if !(lo..=hi).contains(&n) {
            let allowed = if hi >= 1 << 62 {
                format!("allowed: a whole number of at least {lo}")
            } else {
                format!("allowed: a whole number from {lo} to {hi}")
            };
            return Err(self.range_err(key, n.to_string(), allowed));
        }
        *slot = Some(n);
        Ok(n)
    }

    /// A registry whole number with its declared default.
    pub(super) fn whole(&self, key: &str, slot: &mut Option<i64>) -> Result<i64, ConfigError> {
        let default = match declared(key).value {
            Value::Number {
                default: keys::Default::Number(d),
                ..
            } => d as i64,
            _ => 0,
        };
        self.whole_or(key, slot, default)
    }

    /// A registry choice with its declared default.
    pub(super) fn choice(&self, key: &str, slot: &mut Option<String>) -> Result<&'static str, ConfigError> {
        match declared(key).value {
            Value::Choice { default, allowed } => self.choice_in(key, slot, default, allowed),
            _ => unreachable!("{key} is declared as a choice"),
        }
    }

    /// A string choice among `allowed` with a default.
    pub(super) fn choice_in<'c>(
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
            None => {
                let names: Vec<String> = allowed.iter().map(|a| format!("\"{a}\"")).collect();
                Err(self.range_err(key, format!("\"{v}\""), format!("allowed: {}", names.join(", "))))
            }
        }
    }

    /// The `kind` of a section with kinds, after refusing every key given in `raw` that the
    /// kind does not use (the message names the key, the kind and the kind's keys).
    pub(super) fn kind<T: Serialize>(
        &self,
        section: &str,
        slot: &mut Option<String>,
        raw: &T,
    ) -> Result<&'static str, ConfigError> {
        let kind = self.choice(&format!("{section}.kind"), slot)?;
        let given = toml::Value::try_from(raw).ok();
        for name in given
            .iter()
            .filter_map(toml::Value::as_table)
            .flat_map(|t| t.keys())
        {
            let key = format!("{section}.{name}");
            if keys::get(&key).is_some_and(|k| !k.used_by(kind)) {
                let sec = keys::sections().iter().find(|s| s.name == section);
                let allowed = sec.map(|s| s.keys_of_kind(kind).join(", ")).unwrap_or_default();
                return Err(ConfigError::Key {
                    path: self.source.to_string(),
                    key,
                    message: format!(
                        "not a key of {section}.kind = \"{kind}\"; the keys of that kind are: {allowed}"
                    ),
                });
            }
        }
        Ok(kind)
    }
}

/// The registry entry of `key` (every key validation reads is declared).
fn declared(key: &str) -> &'static keys::Entry {
    keys::get(key).unwrap_or_else(|| panic!("config key {key} is not declared in the registry"))
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
    let mut model = model_spec(&c, &mut raw, base_dir)?;
    let initial = initial_spec(&c, &mut raw.initial)?;
    let time = time_spec(&c, &mut raw.time)?;
    model.forcing = forcing_spec(&c, &mut raw.forcing, &model, time.years, base_dir)?;
    let spec = Spec {
        title: raw.title.clone().unwrap_or_else(|| "icefold scenario".into()),
        model,
        initial,
        time,
        equilibrium: equilibrium_spec(&c, &mut raw.equilibrium)?,
        output: output_spec(&c, &mut raw.output)?,
        sweep: sweep_spec(&c, raw.sweep.as_mut())?,
        branches: branches_spec(&c, raw.branches.as_mut(), raw.grid.bands.unwrap_or(90))?,
        ensemble: ensemble_spec(&c, raw.ensemble.as_mut())?,
        regimes: regimes_spec(&c, raw.regimes.as_mut())?,
    };
    Ok((raw, spec))
}

/// The model's sections, in config order; the forcing history is added once the run length
/// is known (its pieces are checked here, in config order).
fn model_spec(c: &Checker, raw: &mut RawConfig, base_dir: &Path) -> Result<ModelSpec, ConfigError> {
    let (domain, spacing, bands) = grid_spec(c, &mut raw.grid)?;
    let insolation = insolation_spec(c, &mut raw.insolation)?;
    let albedo = albedo_spec(c, &mut raw.albedo)?;
    let longwave = longwave_spec(c, &mut raw.longwave, base_dir)?;
    let co2 = greenhouse_spec(c, &mut raw.greenhouse)?;
    let transport = transport_spec(c, &mut raw.transport, base_dir)?;
    let heat_capacity = heat_capacity_spec(c, &mut raw.heat_capacity, bands)?;
    let f = &mut raw.forcing;
    let extra_wm2 = c.num("forcing.constant_wm2", &mut f.constant_wm2)?;
    let solar_scale = c.num("forcing.solar_scale", &mut f.solar_scale)?;
    Ok(ModelSpec {
        domain,
        spacing,
        bands,
        insolation,
        albedo,
        longwave,
        greenhouse_wm2: crate::physics::longwave::co2_forcing(co2.2, co2.0, co2.1),
        transport,
        heat_capacity,
        extra_wm2,
        solar_scale,
        co2,
        forcing: None,
    })
}

/// `[grid]`.
fn grid_spec(c: &Checker, g: &mut RawGrid) -> Result<(Domain, Spacing, usize), ConfigError> {
    let domain = match c.choice("grid.domain", &mut g.domain)? {
        "globe" => Domain::Globe,
        _ => Domain::Hemisphere,
    };
    let spacing = match c.choice("grid.spacing", &mut g.spacing)? {
        "equal_angle" => Spacing::EqualAngle,
        _ => Spacing::EqualArea,
    };
    let bands = c.whole("grid.bands", &mut g.bands)?;
    Ok((domain, spacing, bands as usize))
}

/// `[insolation]`.
fn insolation_spec(c: &Checker, ins: &mut RawInsolation) -> Result<InsolationSpec, ConfigError> {
    let kind = c.kind("insolation", &mut ins.kind.clone(), ins)?;
    ins.kind = Some(kind.into());
    let solar_constant = c.num("insolation.solar_constant", &mut ins.solar_constant)?;
    let obl = c.num("insolation.obliquity_deg", &mut ins.obliquity_deg)?;
    let eccentricity = c.num("insolation.eccentricity", &mut ins.eccentricity)?;
    let peri = c.num("insolation.perihelion_deg", &mut ins.perihelion_deg)?;
    let form = match kind {
        "legendre" => {
            let default_s2 = crate::physics::insolation::s2_from_obliquity(obl.to_radians());
            InsolationForm::Legendre {
                s2: c.num_or("insolation.s2", &mut ins.s2, default_s2)?,
            }
        }
        "annual_mean" => InsolationForm::AnnualMean,
        _ => InsolationForm::Seasonal,
    };
    Ok(InsolationSpec {
        form,
        solar_constant,
        obliquity: obl.to_radians(),
        eccentricity,
        perihelion: peri.to_radians(),
    })
}

/// `[albedo]`.
fn albedo_spec(c: &Checker, a: &mut RawAlbedo) -> Result<AlbedoSpec, ConfigError> {
    let kind = c.kind("albedo", &mut a.kind.clone(), a)?;
    a.kind = Some(kind.into());
    let ice_free = c.num("albedo.ice_free", &mut a.ice_free)?;
    let ice_free_p2 = c.num("albedo.ice_free_p2", &mut a.ice_free_p2)?;
    keys::check_ice_free_p2(ice_free, ice_free_p2)
        .map_err(|allowed| c.range_err("albedo.ice_free_p2", ice_free_p2.to_string(), allowed))?;
    let ice = c.num("albedo.ice", &mut a.ice)?;
    let freeze_c = c.num("albedo.freeze_temperature_c", &mut a.freeze_temperature_c)?;
    let width = c.num("albedo.width_k", &mut a.width_k)?;
    let form = match kind {
        "smooth" => AlbedoForm::Smooth { width },
        "ramp" => AlbedoForm::Ramp { width },
        _ => AlbedoForm::Step,
    };
    Ok(AlbedoSpec {
        form,
        ice_free,
        ice_free_p2,
        ice,
        freeze_k: freeze_c + ZERO_CELSIUS,
    })
}

/// `[longwave]`: the kind's own validation and form (`physics::longwave::KINDS`).
fn longwave_spec(c: &Checker, l: &mut RawLongwave, base_dir: &Path) -> Result<Longwave, ConfigError> {
    let name = c.kind("longwave", &mut l.kind.clone(), l)?;
    l.kind = Some(name.into());
    kind_form(c, "longwave", name, crate::physics::longwave::KINDS, l, base_dir)
}

/// `[transport]`: the kind's own validation and form (`physics::transport::KINDS`).
fn transport_spec(c: &Checker, t: &mut RawTransport, base_dir: &Path) -> Result<TransportForm, ConfigError> {
    let name = c.kind("transport", &mut t.kind.clone(), t)?;
    t.kind = Some(name.into());
    kind_form(
        c,
        "transport",
        name,
        crate::physics::transport::KINDS,
        t,
        base_dir,
    )
}

/// The form of kind `name` of `section` built by its declaration in `kinds`, the raw section
/// `raw` resolved in place (defaults filled in).
fn kind_form<F, R: Serialize + serde::de::DeserializeOwned>(
    c: &Checker,
    section: &'static str,
    name: &'static str,
    kinds: &[crate::registry::Kind<F>],
    raw: &mut R,
    base_dir: &Path,
) -> Result<F, ConfigError> {
    let kind = kinds.iter().find(|k| k.name == name);
    let kind = kind.unwrap_or_else(|| panic!("every allowed {section}.kind has its declaration"));
    let mut r = SectionReader::new(c, section, name, raw, base_dir);
    let form = (kind.build)(&mut r);
    let (form, resolved) = r.finish(form)?;
    *raw = resolved;
    Ok(form)
}

/// Reads a raw section's values for a kind's build function: each checked against the
/// registry, defaults filled in and written back; holds the first error.
struct SectionReader<'a> {
    c: &'a Checker<'a>,
    section: &'static str,
    kind: &'static str,
    table: toml::Table,
    base_dir: &'a Path,
    error: Option<ConfigError>,
}

impl<'a> SectionReader<'a> {
    fn new<T: Serialize>(
        c: &'a Checker<'a>,
        section: &'static str,
        kind: &'static str,
        raw: &T,
        base_dir: &'a Path,
    ) -> Self {
        let table = toml::Table::try_from(raw).unwrap_or_default();
        SectionReader {
            c,
            section,
            kind,
            table,
            base_dir,
            error: None,
        }
    }

    fn short<'k>(&self, key: &'k str) -> &'k str {
        key.strip_prefix(self.section)
            .and_then(|k| k.strip_prefix('.'))
            .unwrap_or(key)
    }

    fn stop(&mut self, e: ConfigError) -> crate::registry::Stop {
        self.error.get_or_insert(e);
        crate::registry::Stop
    }

    /// The built form with the resolved raw section, or the error that stopped the build.
    fn finish<F, T: serde::de::DeserializeOwned>(
        self,
        form: Result<F, crate::registry::Stop>,
    ) -> Result<(F, T), ConfigError> {
        let form = match (form, self.error) {
            (Ok(f), _) => f,
            (Err(_), e) => return Err(e.expect("a stopped build holds its error")),
        };
        let raw = toml::Value::Table(self.table)
            .try_into()
            .map_err(|e: toml::de::Error| ConfigError::Key {
                path: self.c.source.to_string(),
                key: self.section.into(),
                message: e.to_string(),
            })?;
        Ok((form, raw))
    }
}

impl crate::registry::Reader for SectionReader<'_> {
    fn num(&mut self, key: &str) -> Result<f64, crate::registry::Stop> {
        let short = self.short(key).to_string();
        let mut slot = self.table.get(&short).and_then(toml::Value::as_float);
        match self.c.num(key, &mut slot) {
            Ok(v) => {
                self.table.insert(short, toml::Value::Float(v));
                Ok(v)
            }
            Err(e) => Err(self.stop(e)),
        }
    }

    fn table(&mut self, key: &str) -> Result<(Vec<f64>, Vec<f64>), crate::registry::Stop> {
        let Some(rel) = self.table.get(self.short(key)).and_then(toml::Value::as_str) else {
            let allowed = format!(
                "required with {}.kind = \"{}\": a CSV path",
                self.section, self.kind
            );
            return Err(self.stop(self.c.range_err(key, "(missing)".into(), allowed)));
        };
        match read_olr_table(&self.base_dir.join(rel)) {
            Ok(t) => Ok((t.temps, t.olr)),
            Err(e) => Err(self.stop(e)),
        }
    }

    fn reject(&mut self, key: &str, value: f64, allowed: String) -> crate::registry::Stop {
        self.stop(self.c.range_err(key, value.to_string(), allowed))
    }
}

/// `[greenhouse]`: CO2, its reference and the log coefficient.
fn greenhouse_spec(c: &Checker, gh: &mut RawGreenhouse) -> Result<(f64, f64, f64), ConfigError> {
    Ok((
        c.num("greenhouse.co2_ppm", &mut gh.co2_ppm)?,
        c.num("greenhouse.reference_co2_ppm", &mut gh.reference_co2_ppm)?,
        c.num("greenhouse.log_coefficient_wm2", &mut gh.log_coefficient_wm2)?,
    ))
}

/// `[heat_capacity]`: the ocean value (or a mixed-layer depth), land value and fraction.
fn heat_capacity_spec(
    c: &Checker,
    h: &mut RawHeatCapacity,
    bands: usize,
) -> Result<HeatCapacitySpec, ConfigError> {
    let ocean = match (h.value, h.mixed_layer_depth_m) {
        (Some(_), Some(d)) => {
            return Err(c.range_err(
                "heat_capacity.mixed_layer_depth_m",
                format!("{d:?}"),
                "give either heat_capacity.value or heat_capacity.mixed_layer_depth_m, not both".into(),
            ))
        }
        // Sea water: rho = 1025 kg m-3, c_p = 3985 J kg-1 K-1 (common practice).
        (None, Some(_)) => {
            1025.0
                * 3985.0
                * c.num_or(
                    "heat_capacity.mixed_layer_depth_m",
                    &mut h.mixed_layer_depth_m,
                    0.0,
                )?
        }
        _ => c.num("heat_capacity.value", &mut h.value)?,
    };
    let land = c.num("heat_capacity.land_value", &mut h.land_value)?;
    Ok(HeatCapacitySpec {
        ocean,
        land,
        land_fraction: land_fraction(c, &h.land_fraction, bands)?,
    })
}

/// `heat_capacity.land_fraction`: one number for every band, or one per band, each in [0, 1].
fn land_fraction(
    c: &Checker,
    given: &Option<RawLandFraction>,
    bands: usize,
) -> Result<Vec<f64>, ConfigError> {
    let key = "heat_capacity.land_fraction";
    let values = match given {
        None => return Ok(vec![]),
        Some(RawLandFraction::Uniform(f)) => vec![*f; bands],
        Some(RawLandFraction::PerBand(v)) if v.len() != bands => {
            return Err(c.range_err(
                key,
                format!("a list of {}", v.len()),
                format!("allowed: one number, or a list of grid.bands = {bands} numbers from 0 to 1"),
            ))
        }
        Some(RawLandFraction::PerBand(v)) => v.clone(),
    };
    if let Some(bad) = values.iter().find(|f| !(0.0..=1.0).contains(*f)) {
        return Err(c.range_err(key, bad.to_string(), Range::Closed(0.0, 1.0).describe()));
    }
    Ok(values)
}

/// `[initial]`.
fn initial_spec(c: &Checker, i: &mut RawInitial) -> Result<InitialSpec, ConfigError> {
    Ok(InitialSpec {
        temperature_k: c.num("initial.temperature_c", &mut i.temperature_c)? + ZERO_CELSIUS,
        p2_k: c.num("initial.temperature_p2_k", &mut i.temperature_p2_k)?,
        p1_k: c.num("initial.temperature_p1_k", &mut i.temperature_p1_k)?,
    })
}

/// `[time]`: length, cadence, scheme and what records hold.
fn time_spec(c: &Checker, tm: &mut RawTime) -> Result<TimeSpec, ConfigError> {
    let years = c.num("time.years", &mut tm.years)?;
    // Annual means sample 24 times a year unless told otherwise.
    let default_every = if tm.output.as_deref() == Some("annual_mean") {
        1.0 / 24.0
    } else {
        1.0_f64.min(years)
    };
    let output_every = c.num_or(
        "time.output_every_years",
        &mut tm.output_every_years,
        default_every,
    )?;
    if years / output_every > 1e8 {
        return Err(c.range_err(
            "time.output_every_years",
            output_every.to_string(),
            "allowed: at most 1e8 output times in a run (time.years / time.output_every_years)".into(),
        ));
    }
    let method = match c.choice("time.method", &mut tm.method)? {
        "dopri5" => Method::Dopri5,
        "dop853" => Method::Dop853,
        _ => Method::Implicit,
    };
    let fixed_step = fixed_step(c, tm.step_days, method)?;
    let tolerance = c.num("time.tolerance", &mut tm.tolerance)?;
    let max_step = c.num_or("time.max_step_years", &mut tm.max_step_years, years.min(1000.0))?;
    let stiffness_check = *tm.stiffness_check.get_or_insert(true);
    let max_steps = c.whole("time.max_steps", &mut tm.max_steps)? as u64;
    let output = output_mode(c, &mut tm.output, method, years, output_every)?;
    // Annual means integrate the trajectory and write one record a year (a sampling interval
    // given for them, 1/n years, is accepted from older configs and has no effect).
    let output_every = match output {
        OutputMode::AnnualMean => 1.0,
        _ => output_every,
    };
    Ok(TimeSpec {
        years,
        output_every,
        method,
        fixed_step,
        tolerance,
        max_step,
        stiffness_check,
        max_steps,
        output,
    })
}

/// `time.step_days`, in years: implicit scheme only.
fn fixed_step(c: &Checker, step_days: Option<f64>, method: Method) -> Result<Option<f64>, ConfigError> {
    let Some(d) = step_days else { return Ok(None) };
    if method != Method::Implicit {
        return Err(c.range_err(
            "time.step_days",
            d.to_string(),
            "allowed only with time.method = \"implicit\" (Dopri5 and Dop853 always adapt their step)".into(),
        ));
    }
    Ok(Some(c.num_or("time.step_days", &mut Some(d), d)? / 365.25))
}

/// `time.output`, checked against the scheme and the run length.
fn output_mode(
    c: &Checker,
    slot: &mut Option<String>,
    method: Method,
    years: f64,
    output_every: f64,
) -> Result<OutputMode, ConfigError> {
    match c.choice("time.output", slot)? {
        "every_step" if method != Method::Implicit => Err(c.range_err(
            "time.output",
            "\"every_step\"".into(),
            "allowed only with time.method = \"implicit\" (the explicit schemes step inside ode_solvers)"
                .into(),
        )),
        "every_step" => Ok(OutputMode::EveryStep),
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
            Ok(OutputMode::AnnualMean)
        }
        _ => Ok(OutputMode::Instant),
    }
}

/// `[forcing]` history: the CSV file and the pieces over the model's configured values,
/// checked over the whole run.
fn forcing_spec(
    c: &Checker,
    f: &mut RawForcing,
    model: &ModelSpec,
    years: f64,
    base_dir: &Path,
) -> Result<Option<Arc<crate::forcing::ForcingSpec>>, ConfigError> {
    let interp = match c.choice("forcing.interpolation", &mut f.interpolation)? {
        "step" => crate::forcing::Interpolation::Step,
        _ => crate::forcing::Interpolation::Linear,
    };
    let hold = c.choice("forcing.outside", &mut f.outside)? == "hold";
    let pieces = forcing_pieces(c, f.pieces.as_mut())?;
    let series = match &f.file {
        None => None,
        Some(rel) => Some(forcing_series(&base_dir.join(rel), interp, hold, years)?),
    };
    if series.is_none() && pieces.is_empty() {
        return Ok(None);
    }
    let shown = series.as_ref().map(|(_, p)| p.clone());
    crate::forcing::ForcingSpec::new(series.map(|(s, _)| s), pieces, model.forcing_bases())
        .and_then(|f| f.check_values(years).map(|_| f))
        .map(|f| Some(Arc::new(f)))
        .map_err(|message| match shown {
            Some(path) => ConfigError::DataFile { path, message },
            None => ConfigError::Key {
                path: c.source.to_string(),
                key: "forcing.pieces".into(),
                message,
            },
        })
}

/// Read and parse `forcing.file`, checked to cover the run; returns it with its shown path.
fn forcing_series(
    path: &Path,
    interp: crate::forcing::Interpolation,
    hold: bool,
    years: f64,
) -> Result<(crate::forcing::ForcingSeries, String), ConfigError> {
    let shown = path.display().to_string();
    let text = crate::csv::read_text(
        path,
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
    Ok((series, shown))
}

/// `[equilibrium]`.
fn equilibrium_spec(c: &Checker, e: &mut RawEquilibrium) -> Result<EquilibriumSpec, ConfigError> {
    Ok(EquilibriumSpec {
        tolerance_wm2: c.num("equilibrium.tolerance_wm2", &mut e.tolerance_wm2)?,
        max_iterations: c.whole("equilibrium.max_iterations", &mut e.max_iterations)? as usize,
        sensitivity: *e.sensitivity.get_or_insert(false),
    })
}

/// `[output]`.
fn output_spec(c: &Checker, o: &mut RawOutput) -> Result<OutputSpec, ConfigError> {
    Ok(OutputSpec {
        deflate_level: c.whole("output.deflate_level", &mut o.deflate_level)? as u8,
    })
}
