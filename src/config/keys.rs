//! The key registry: every config key declared once, with its units, default, allowed values,
//! whole-number flag, picture label, whether it may vary in time (a forcing channel), the kinds
//! of its section that use it, and its setter on a validated model spec.
//!
//! Validation, `--set`, forcing channels, the controls of sweeps, branches and regime maps,
//! ensemble parameters, the units attributes of every output file, picture labels and the
//! README's configuration table (checked by `tests/keys_registry.rs`) all read it. A key of a
//! swappable parameterisation is declared beside its kind (see [`sections`]).

use super::spec::{InsolationForm, ModelSpec};
use crate::physics::albedo::AlbedoForm;
use crate::physics::longwave::{co2_forcing, Longwave, ZERO_CELSIUS};
use crate::physics::transport::TransportForm;
pub use crate::registry::{Default, Fast, Info, Range, Value};
use crate::registry::{Kind, Setter};
use std::sync::OnceLock;

/// A key that sets the validated model spec (or nothing, for keys that cannot vary).
pub type Key = crate::registry::Key<ModelSpec>;

/// How an entry's setter reaches the model spec.
#[derive(Debug, Clone, Copy)]
pub enum Set {
    /// Sets the spec.
    Spec(Setter<ModelSpec>),
    /// Sets the OLR form (a key of a longwave kind).
    Longwave(Setter<Longwave>),
    /// Sets the transport form (a key of a transport kind).
    Transport(Setter<TransportForm>),
}

impl Set {
    /// Apply to `spec`.
    pub fn apply(self, spec: &mut ModelSpec, v: f64) -> Result<(), String> {
        match self {
            Set::Spec(f) => f(spec, v),
            Set::Longwave(f) => f(&mut spec.longwave, v),
            Set::Transport(f) => f(&mut spec.transport, v),
        }
    }
}

/// One entry of the registry.
#[derive(Debug, Clone, Copy)]
pub struct Entry {
    /// What the key is.
    pub info: &'static Info,
    /// Its setter: the key can be a control and an ensemble parameter.
    pub set: Option<Set>,
}

impl std::ops::Deref for Entry {
    type Target = Info;
    fn deref(&self) -> &Info {
        self.info
    }
}

/// One config section: its own keys (the `kind` choice first in a section with kinds) and
/// the kinds whose keys are declared beside their physics.
#[derive(Debug, Clone, Copy)]
pub struct Section {
    /// Name, e.g. `longwave`.
    pub name: &'static str,
    /// The section's own keys.
    pub keys: &'static [Key],
    /// The kinds declared beside their physics, each with its keys.
    pub forms: Forms,
}

/// The kinds of a section declared beside their physics (`physics::<process>::KINDS`).
#[derive(Debug, Clone, Copy)]
pub enum Forms {
    /// None: the section's keys are all its own.
    None,
    /// OLR kinds.
    Longwave(&'static [Kind<Longwave>]),
    /// Transport kinds.
    Transport(&'static [Kind<TransportForm>]),
}

impl Forms {
    /// Every key of every kind, in kind order, with its setter on the model spec.
    fn entries(self) -> Vec<Entry> {
        fn each<T>(kinds: &'static [Kind<T>], set: fn(Setter<T>) -> Set) -> Vec<Entry> {
            let keys = kinds.iter().flat_map(|k| k.keys);
            keys.map(|k| Entry {
                info: &k.info,
                set: k.set.map(set),
            })
            .collect()
        }
        match self {
            Forms::None => Vec::new(),
            Forms::Longwave(kinds) => each(kinds, Set::Longwave),
            Forms::Transport(kinds) => each(kinds, Set::Transport),
        }
    }
}

impl Section {
    /// Every entry of the section.
    pub fn entries(&self) -> impl Iterator<Item = &'static Entry> + '_ {
        all().filter(|e| e.section() == self.name || (self.name.is_empty() && !e.name.contains('.')))
    }

    /// Keys of this section used by `kind`, `kind` itself first, as short names.
    pub fn keys_of_kind(&self, kind: &str) -> Vec<&'static str> {
        self.entries()
            .filter(|k| k.used_by(kind))
            .map(|k| k.name.split_once('.').map_or(k.name, |(_, short)| short))
            .collect()
    }
}

/// Every section in config order.
pub fn sections() -> &'static [Section] {
    super::sections::SECTIONS
}

/// Every key, section by section (a section's own keys, then its kinds' keys).
pub fn all() -> impl Iterator<Item = &'static Entry> {
    static ENTRIES: OnceLock<Vec<Entry>> = OnceLock::new();
    ENTRIES
        .get_or_init(|| {
            let mut out = Vec::new();
            for s in sections() {
                out.extend(s.keys.iter().map(|k| Entry {
                    info: &k.info,
                    set: k.set.map(Set::Spec),
                }));
                out.extend(s.forms.entries());
            }
            out
        })
        .iter()
}

/// The key called `name`, if declared.
pub fn get(name: &str) -> Option<&'static Entry> {
    all().find(|k| k.name == name)
}

/// Units of a key's values in files (`"1"` for an unknown name).
pub fn units(name: &str) -> &'static str {
    get(name).map_or("1", |k| if k.units.is_empty() { "1" } else { k.units })
}

/// The picture label of a key (the name itself when unknown).
pub fn label(name: &str) -> String {
    get(name).map_or_else(|| name.to_string(), |k| k.axis_label())
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
pub fn control_keys() -> impl Iterator<Item = &'static Entry> {
    all().filter(|k| k.set.is_some())
}

/// Keys that may vary in time.
pub fn time_varying_keys() -> impl Iterator<Item = &'static Entry> {
    all().filter(|k| k.time_varying)
}

/// Whole-number keys (every other number in a config is read as a float).
pub fn is_whole_key(name: &str) -> bool {
    get(name).is_some_and(|k| k.is_whole())
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
    set.apply(&mut out, value)?;
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
