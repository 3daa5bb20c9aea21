//! The key registry: every config key declared once, with its units, default, allowed values,
//! whole-number flag, picture label, whether it may vary in time (a forcing channel), the kinds
//! of its section that use it, and its setter on a validated model spec.
//!
//! Validation, `--set`, forcing channels, the controls of sweeps, branches and regime maps,
//! ensemble parameters, the units attributes of every output file, picture labels and the
//! README's configuration table (checked by `tests/keys_registry.rs`) all read it. A key of a
//! swappable parameterisation is declared beside its kind (see [`sections`]).

use super::spec::{InsolationForm, ModelSpec, TransportSpec};
use crate::physics::albedo::AlbedoForm;
use crate::physics::longwave::{co2_forcing, Longwave, ZERO_CELSIUS};

/// A bound on a number.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Range {
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
    /// Whether `v` is finite and inside.
    pub fn ok(self, v: f64) -> bool {
        v.is_finite()
            && match self {
                Range::Closed(lo, hi) => v >= lo && v <= hi,
                Range::Above(lo) => v > lo,
                Range::AtLeast(lo) => v >= lo,
                Range::AboveUpTo(lo, hi) => v > lo && v <= hi,
                Range::Any => true,
            }
    }

    /// `allowed: ...` text for messages.
    pub fn describe(self) -> String {
        match self {
            Range::Closed(lo, hi) => format!("allowed: a number from {lo} to {hi}"),
            Range::Above(lo) => format!("allowed: a finite number above {lo}"),
            Range::AtLeast(lo) => format!("allowed: a finite number of at least {lo}"),
            Range::AboveUpTo(lo, hi) => format!("allowed: a number above {lo} and at most {hi}"),
            Range::Any => "allowed: a finite number".into(),
        }
    }
}

/// A key's default when it is absent.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Default {
    /// A fixed number.
    Number(f64),
    /// Computed from other keys, or none (then the text says what happens).
    Text(&'static str),
}

/// What values a key takes.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Value {
    /// A number in `units`.
    Number {
        /// Default.
        default: Default,
        /// Allowed values (further checks across keys live in validation).
        range: Range,
        /// A whole number (written as a TOML integer).
        whole: bool,
    },
    /// One of a list of names.
    Choice {
        /// Default.
        default: &'static str,
        /// The names allowed.
        allowed: &'static [&'static str],
    },
    /// `true` or `false`.
    Flag(bool),
    /// Free text or a file path; the text says the default.
    Text(&'static str),
}

/// How a built model takes a new value of a key in place (closed-form derivatives in
/// `equilibrium::control`); keys without one are rebuilt from the typed spec.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Fast {
    /// Fixed insolation scaled by the ratio to the reference S0.
    SolarConstant,
    /// Greenhouse forcing `k ln(C/C0)`.
    Co2,
    /// Additive forcing.
    ConstantForcing,
    /// Insolation multiplier.
    SolarScale,
    /// Linear OLR offset.
    LinearA,
    /// Linear OLR slope.
    LinearB,
    /// Diffusive face conductances scaled by the ratio to the reference D0.
    Diffusivity,
}

/// Sets a key on a validated model spec (value already in the key's range); `Err` holds the
/// `allowed: ...` text of a check across keys.
pub type Setter = fn(&mut ModelSpec, f64) -> Result<(), String>;

/// One config key.
#[derive(Debug, Clone, Copy)]
pub struct Key {
    /// Dotted name, e.g. `longwave.emission_height_km`.
    pub name: &'static str,
    /// Units written into files (`"1"` for numbers without units, `""` for non-numbers).
    pub units: &'static str,
    /// Axis label of pictures (`""`: the dotted name).
    pub label: &'static str,
    /// Values.
    pub value: Value,
    /// Kinds of its section that use it (`&[]`: every kind, or a section without kinds).
    pub kinds: &'static [&'static str],
    /// May vary in time (a forcing CSV column or piece target).
    pub time_varying: bool,
    /// Setter on a validated model spec: the key can be a control and an ensemble parameter.
    pub set: Option<Setter>,
    /// In-place change of a built model, where one exists.
    pub fast: Option<Fast>,
}

impl Key {
    /// A number with a fixed default.
    pub const fn number(name: &'static str, units: &'static str, default: f64, range: Range) -> Key {
        Key::with_value(
            name,
            units,
            Value::Number {
                default: Default::Number(default),
                range,
                whole: false,
            },
        )
    }

    /// A number whose default is computed (or absent), described by `default`.
    pub const fn derived(
        name: &'static str,
        units: &'static str,
        default: &'static str,
        range: Range,
    ) -> Key {
        Key::with_value(
            name,
            units,
            Value::Number {
                default: Default::Text(default),
                range,
                whole: false,
            },
        )
    }

    /// A whole number from `lo` to `hi`.
    pub const fn whole(name: &'static str, default: Default, lo: f64, hi: f64) -> Key {
        let range = Range::Closed(lo, hi);
        Key::with_value(
            name,
            "1",
            Value::Number {
                default,
                range,
                whole: true,
            },
        )
    }

    /// A choice among names.
    pub const fn choice(name: &'static str, default: &'static str, allowed: &'static [&'static str]) -> Key {
        Key::with_value(name, "", Value::Choice { default, allowed })
    }

    /// A flag.
    pub const fn flag(name: &'static str, default: bool) -> Key {
        Key::with_value(name, "", Value::Flag(default))
    }

    /// Text or a path.
    pub const fn text(name: &'static str, default: &'static str) -> Key {
        Key::with_value(name, "", Value::Text(default))
    }

    const fn with_value(name: &'static str, units: &'static str, value: Value) -> Key {
        Key {
            name,
            units,
            label: "",
            value,
            kinds: &[],
            time_varying: false,
            set: None,
            fast: None,
        }
    }

    /// With a picture label.
    pub const fn label(mut self, label: &'static str) -> Key {
        self.label = label;
        self
    }

    /// Used only by these kinds of its section.
    pub const fn kinds(mut self, kinds: &'static [&'static str]) -> Key {
        self.kinds = kinds;
        self
    }

    /// May vary in time.
    pub const fn varies(mut self) -> Key {
        self.time_varying = true;
        self
    }

    /// With a setter on the model spec (a control and ensemble parameter).
    pub const fn set(mut self, set: Setter) -> Key {
        self.set = Some(set);
        self
    }

    /// With an in-place change of a built model.
    pub const fn fast(mut self, fast: Fast) -> Key {
        self.fast = Some(fast);
        self
    }

    /// The section (`longwave` of `longwave.a`).
    pub fn section(&self) -> &'static str {
        self.name.split('.').next().unwrap_or(self.name)
    }

    /// Whether the key takes a whole number.
    pub fn is_whole(&self) -> bool {
        matches!(self.value, Value::Number { whole: true, .. })
    }

    /// Whether the key takes a number.
    pub fn is_number(&self) -> bool {
        matches!(self.value, Value::Number { .. })
    }

    /// The allowed range of a number (`Range::Any` for other values).
    pub fn range(&self) -> Range {
        match self.value {
            Value::Number { range, .. } => range,
            _ => Range::Any,
        }
    }

    /// Whether kind `kind` of the key's section uses it.
    pub fn used_by(&self, kind: &str) -> bool {
        self.kinds.is_empty() || self.kinds.contains(&kind)
    }

    /// The picture label: the declared one, or the dotted name with its units.
    pub fn axis_label(&self) -> String {
        match (self.label, self.units) {
            ("", "" | "1") => self.name.to_string(),
            ("", u) => format!("{} ({u})", self.name),
            (l, _) => l.to_string(),
        }
    }
}

/// One config section with its keys (and its kinds, for a swappable parameterisation).
#[derive(Debug, Clone, Copy)]
pub struct Section {
    /// Name, e.g. `longwave`.
    pub name: &'static str,
    /// The keys, the `kind` choice first in a section with kinds.
    pub keys: &'static [Key],
}

impl Section {
    /// The `kind` key's allowed names (empty for a section without kinds).
    pub fn kinds(&self) -> &'static [&'static str] {
        match self.keys.first().map(|k| k.value) {
            Some(Value::Choice { allowed, .. }) if self.keys[0].name.ends_with(".kind") => allowed,
            _ => &[],
        }
    }

    /// Keys of this section used by `kind`, `kind` itself first, as short names.
    pub fn keys_of_kind(&self, kind: &str) -> Vec<&'static str> {
        self.keys
            .iter()
            .filter(|k| k.used_by(kind))
            .map(|k| &k.name[self.name.len() + 1..])
            .collect()
    }
}

/// Every section in config order.
pub fn sections() -> &'static [Section] {
    super::sections::SECTIONS
}

/// Every key, section by section.
pub fn all() -> impl Iterator<Item = &'static Key> {
    sections().iter().flat_map(|s| s.keys.iter())
}

/// The key called `name`, if declared.
pub fn get(name: &str) -> Option<&'static Key> {
    all().find(|k| k.name == name)
}

/// Units of a key's values in files (`"1"` for an unknown name).
pub fn units(name: &str) -> &'static str {
    get(name).map_or("1", |k| if k.units.is_empty() { "1" } else { k.units })
}

/// The picture label of a key (the name itself when unknown).
pub fn label(name: &str) -> String {
    get(name).map_or_else(|| name.to_string(), Key::axis_label)
}

/// The fixed default of a numeric key (NaN if it has none).
pub fn default_number(name: &str) -> f64 {
    match get(name).map(|k| k.value) {
        Some(Value::Number {
            default: Default::Number(d),
            ..
        }) => d,
        _ => f64::NAN,
    }
}

/// Keys that can be a control of a sweep, branches or regime map (every key with a setter).
pub fn control_keys() -> impl Iterator<Item = &'static Key> {
    all().filter(|k| k.set.is_some())
}

/// Keys that may vary in time.
pub fn time_varying_keys() -> impl Iterator<Item = &'static Key> {
    all().filter(|k| k.time_varying)
}

/// Whole-number keys (every other number in a config is read as a float).
pub fn is_whole_key(name: &str) -> bool {
    get(name).is_some_and(Key::is_whole)
}

/// `spec` with key `name` set to `value` and every derived part recomputed (the forcing's
/// bases included), checked like validation checks it: a typed rebuild, no TOML. `years` is
/// the run length the forcing is checked over. `Err` holds the `allowed: ...` text.
pub fn set_model_value(spec: &ModelSpec, name: &str, value: f64, years: f64) -> Result<ModelSpec, String> {
    let key = get(name).ok_or_else(|| "allowed: a declared config key".to_string())?;
    let set = key
        .set
        .ok_or_else(|| format!("allowed: one of the numeric model keys {}", control_names()))?;
    if !key.range().ok(value) {
        return Err(key.range().describe());
    }
    let mut out = spec.clone();
    set(&mut out, value)?;
    if let Some(f) = &spec.forcing {
        let rebuilt = f.with_bases(out.forcing_bases())?;
        rebuilt.check_values(years)?;
        out.forcing = Some(std::sync::Arc::new(rebuilt));
    }
    Ok(out)
}

/// The control keys as a comma-separated list, for messages.
pub fn control_names() -> String {
    control_keys().map(|k| k.name).collect::<Vec<_>>().join(", ")
}

// ---- setters shared by the section declarations ----

/// `greenhouse.*`: the CO2 triple and its forcing.
pub(crate) fn set_co2(s: &mut ModelSpec, which: usize, v: f64) {
    match which {
        0 => s.co2.0 = v,
        1 => s.co2.1 = v,
        _ => s.co2.2 = v,
    }
    let (c, r, k) = s.co2;
    s.greenhouse_wm2 = co2_forcing(k, c, r);
}

/// `albedo.ice_free + albedo.ice_free_p2 P2(x)` must stay in [0, 1] where P2 runs over
/// [-1/2, 1]; `Err` names the value and where.
pub fn check_ice_free_p2(ice_free: f64, p2: f64) -> Result<(), String> {
    for (p, name) in [(-0.5, "equator"), (1.0, "pole")] {
        let v = ice_free + p2 * p;
        if !(0.0..=1.0).contains(&v) {
            return Err(format!(
                "allowed: values keeping ice_free + ice_free_p2 P2(x) within [0, 1]; it is {v} at the {name}"
            ));
        }
    }
    Ok(())
}

/// `D(x) = D0 (1 + d2 P2(x)) >= 0` for P2 in [-1/2, 1].
pub fn check_diffusivity_p2(d2: f64) -> Result<(), String> {
    if 1.0 + d2 < 0.0 || 1.0 - 0.5 * d2 < 0.0 {
        return Err("allowed: -1 to 2 (keeps D(x) >= 0)".into());
    }
    Ok(())
}

/// Setters of the albedo keys.
pub(crate) mod albedo_set {
    use super::*;
    pub fn ice_free(s: &mut ModelSpec, v: f64) -> Result<(), String> {
        check_ice_free_p2(v, s.albedo.ice_free_p2)
            .map_err(|e| format!("{e} (with albedo.ice_free = {v})"))?;
        s.albedo.ice_free = v;
        Ok(())
    }
    pub fn ice_free_p2(s: &mut ModelSpec, v: f64) -> Result<(), String> {
        check_ice_free_p2(s.albedo.ice_free, v)?;
        s.albedo.ice_free_p2 = v;
        Ok(())
    }
    pub fn width(s: &mut ModelSpec, v: f64) -> Result<(), String> {
        match &mut s.albedo.form {
            AlbedoForm::Smooth { width } | AlbedoForm::Ramp { width } => *width = v,
            AlbedoForm::Step => {}
        }
        Ok(())
    }
    pub fn freeze(s: &mut ModelSpec, v: f64) -> Result<(), String> {
        s.albedo.freeze_k = v + ZERO_CELSIUS;
        Ok(())
    }
}

/// Setters of the insolation keys.
pub(crate) mod insolation_set {
    use super::*;
    pub fn s2(s: &mut ModelSpec, v: f64) -> Result<(), String> {
        if let InsolationForm::Legendre { s2 } = &mut s.insolation.form {
            *s2 = v;
        }
        Ok(())
    }
}

/// Setters of the transport keys.
pub(crate) mod transport_set {
    use super::*;
    pub fn diffusivity(s: &mut ModelSpec, v: f64) -> Result<(), String> {
        if let TransportSpec::Diffusive { d0, .. } = &mut s.transport {
            *d0 = v;
        }
        Ok(())
    }
    pub fn diffusivity_p2(s: &mut ModelSpec, v: f64) -> Result<(), String> {
        check_diffusivity_p2(v)?;
        if let TransportSpec::Diffusive { d2, .. } = &mut s.transport {
            *d2 = v;
        }
        Ok(())
    }
    pub fn relaxation_rate(s: &mut ModelSpec, v: f64) -> Result<(), String> {
        if let TransportSpec::Relaxation { rate } = &mut s.transport {
            *rate = v;
        }
        Ok(())
    }
}

/// Setters of the longwave keys.
pub(crate) mod longwave_set {
    use super::*;
    pub fn a(s: &mut ModelSpec, v: f64) -> Result<(), String> {
        if let Longwave::Linear { a, .. } = &mut s.longwave {
            *a = v;
        }
        Ok(())
    }
    pub fn b(s: &mut ModelSpec, v: f64) -> Result<(), String> {
        if let Longwave::Linear { b, .. } = &mut s.longwave {
            *b = v;
        }
        Ok(())
    }
    pub fn emissivity(s: &mut ModelSpec, v: f64) -> Result<(), String> {
        if let Longwave::GrayBody { emissivity } = &mut s.longwave {
            *emissivity = v;
        }
        Ok(())
    }
    pub fn lapse_rate(s: &mut ModelSpec, v: f64) -> Result<(), String> {
        if let Longwave::EmissionLevel { lapse_rate, .. } = &mut s.longwave {
            *lapse_rate = v;
        }
        Ok(())
    }
    pub fn height(s: &mut ModelSpec, v: f64) -> Result<(), String> {
        if let Longwave::EmissionLevel { height, .. } = &mut s.longwave {
            *height = v;
        }
        Ok(())
    }
}
