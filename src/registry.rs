//! The types of config key declarations: a leaf module, so that each parameterisation's variant
//! file (`physics/<process>/<variant>.rs`) can declare its keys and build itself from them, and
//! `config::keys` can collect every declaration into the registry.

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

/// Sets a key on a validated `T` (the value already in the key's range); `Err` holds the
/// `allowed: ...` text of a check across keys.
pub type Setter<T> = fn(&mut T, f64) -> Result<(), String>;

/// What a config key is: everything but its setter.
#[derive(Debug, Clone, Copy)]
pub struct Info {
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
    /// In-place change of a built model, where one exists.
    pub fast: Option<Fast>,
}

/// One config key with its setter on `T` (the validated model spec, or a parameterisation's
/// form for a kind's keys); a key with a setter can be a control and an ensemble parameter.
#[derive(Debug)]
pub struct Key<T: 'static> {
    /// What the key is.
    pub info: Info,
    /// Setter, if the key can vary after validation.
    pub set: Option<Setter<T>>,
}

impl<T> Clone for Key<T> {
    fn clone(&self) -> Self {
        *self
    }
}

impl<T> Copy for Key<T> {}

impl<T> std::ops::Deref for Key<T> {
    type Target = Info;
    fn deref(&self) -> &Info {
        &self.info
    }
}

impl<T> Key<T> {
    /// A number with a fixed default.
    pub const fn number(name: &'static str, units: &'static str, default: f64, range: Range) -> Self {
        Self::with_value(
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
    ) -> Self {
        Self::with_value(
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
    pub const fn whole(name: &'static str, default: Default, lo: f64, hi: f64) -> Self {
        let range = Range::Closed(lo, hi);
        Self::with_value(
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
    pub const fn choice(name: &'static str, default: &'static str, allowed: &'static [&'static str]) -> Self {
        Self::with_value(name, "", Value::Choice { default, allowed })
    }

    /// A flag.
    pub const fn flag(name: &'static str, default: bool) -> Self {
        Self::with_value(name, "", Value::Flag(default))
    }

    /// Text or a path.
    pub const fn text(name: &'static str, default: &'static str) -> Self {
        Self::with_value(name, "", Value::Text(default))
    }

    const fn with_value(name: &'static str, units: &'static str, value: Value) -> Self {
        Key {
            info: Info {
                name,
                units,
                label: "",
                value,
                kinds: &[],
                time_varying: false,
                fast: None,
            },
            set: None,
        }
    }

    /// With a picture label.
    pub const fn label(mut self, label: &'static str) -> Self {
        self.info.label = label;
        self
    }

    /// Used only by these kinds of its section.
    pub const fn kinds(mut self, kinds: &'static [&'static str]) -> Self {
        self.info.kinds = kinds;
        self
    }

    /// May vary in time.
    pub const fn varies(mut self) -> Self {
        self.info.time_varying = true;
        self
    }

    /// With a setter (a control and ensemble parameter).
    pub const fn set(mut self, set: Setter<T>) -> Self {
        self.set = Some(set);
        self
    }

    /// With an in-place change of a built model.
    pub const fn fast(mut self, fast: Fast) -> Self {
        self.info.fast = Some(fast);
        self
    }
}

impl Info {
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

/// Validation stopped at a bad value; the [`Reader`] holds the message.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Stop;

/// Reads a section's values for a kind's [`Kind::build`]: each checked against the key's
/// declaration, its default filled in and written back to the resolved config.
pub trait Reader {
    /// The number at `key` (its declared default when absent).
    fn num(&mut self, key: &str) -> Result<f64, Stop>;
    /// A table of two columns from the CSV file named at `key` (e.g. an OLR table).
    fn table(&mut self, key: &str) -> Result<(Vec<f64>, Vec<f64>), Stop>;
    /// Refuse `value` of `key` by a check across keys; `allowed` is the `allowed: ...` text.
    fn reject(&mut self, key: &str, value: f64, allowed: String) -> Stop;
}

/// One kind of a swappable parameterisation: its name in `<section>.kind`, its keys, and how
/// it builds its form `T` from them.
#[derive(Debug)]
pub struct Kind<T: 'static> {
    /// The name, e.g. `"linear"`.
    pub name: &'static str,
    /// Its keys (each declared with `.kinds(&[name])`).
    pub keys: &'static [Key<T>],
    /// The form from the validated values.
    pub build: fn(&mut dyn Reader) -> Result<T, Stop>,
}
