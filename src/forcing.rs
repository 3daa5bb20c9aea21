//! Forcing histories: time series of CO2, insolation multiplier, additive forcing and any
//! time-varying model parameter, from a CSV (`year` plus columns), from analytic pieces in the
//! config (steps, linear and exponential ramps, sinusoids), or both; interpolated linearly or
//! held stepwise, and turned into the model's drivers at any time.
//!
//! Design of time-varying parameters: every supported key enters the right-hand side through
//! one exact term of [`Drivers`] (a multiplier or an offset), so the model is never rebuilt
//! during a run and one evaluation costs a few interpolations (no allocation):
//!
//! | key | how it enters |
//! |---|---|
//! | `co2_ppm`, `greenhouse.co2_ppm`, `greenhouse.reference_co2_ppm`, `greenhouse.log_coefficient_wm2` | greenhouse forcing `k ln(C/C0)` |
//! | `solar_scale` (multiplies `forcing.solar_scale`), `forcing.solar_scale`, `insolation.solar_constant` | insolation multiplier (insolation is proportional to S0 for every kind) |
//! | `forcing_wm2` (adds to `forcing.constant_wm2`), `forcing.constant_wm2` | additive forcing |
//! | `longwave.a`, `longwave.b` (linear OLR) | OLR offset and added slope |
//! | `longwave.emissivity` (gray body) | OLR multiplier |
//! | `transport.diffusivity` (diffusive), `transport.relaxation_rate` (relaxation) | transport multiplier |
//!
//! Other keys (albedo, orbit, heat capacity, grid) would change precomputed parts of the model
//! and are refused with the list above. A channel's value at time `t` is
//! `(CSV value, or the configured value) + sum of additive pieces`, times the product of
//! exponential pieces. The series is checked to cover the whole run when it is loaded (unless
//! told to hold its end values), so evaluation during a run never fails.

use crate::csv::{shorten, CsvError, Reader};
use crate::drivers::{DriverSource, Drivers};
use crate::physics::longwave::co2_forcing;
use std::f64::consts::PI;
use std::sync::Arc;

/// Driver columns a forcing CSV may have besides `year` and the config keys in [`KEYS`].
pub const COLUMNS: &[&str] = &["co2_ppm", "solar_scale", "forcing_wm2"];

/// Config keys a forcing history may vary, each with its role in the drivers below
/// ([`ForcingSpec::new`]). The key registry declares exactly these time-varying (`.varies()`;
/// tests/keys_registry.rs checks the two agree), so forcing needs no import of config.
pub const KEYS: &[&str] = &[
    "greenhouse.co2_ppm",
    "greenhouse.reference_co2_ppm",
    "greenhouse.log_coefficient_wm2",
    "forcing.solar_scale",
    "insolation.solar_constant",
    "forcing.constant_wm2",
    "longwave.a",
    "longwave.b",
    "longwave.emissivity",
    "transport.diffusivity",
    "transport.relaxation_rate",
];

/// Whether `name` may be a CSV column or piece target: a driver column or a key a history may
/// vary ([`KEYS`]).
pub fn is_channel(name: &str) -> bool {
    COLUMNS.contains(&name) || KEYS.contains(&name)
}

/// Largest forcing file accepted, rows (refused up front beyond it).
pub const MAX_ROWS: usize = 20_000_000;

/// Largest forcing file accepted, bytes (refused before it is read).
pub const MAX_FILE_BYTES: u64 = 2 * 1024 * 1024 * 1024;

/// Every name a CSV column or piece target may have, for messages.
pub fn allowed_names() -> String {
    COLUMNS
        .iter()
        .copied()
        .chain(KEYS.iter().copied())
        .collect::<Vec<_>>()
        .join(", ")
}

/// Units of a driver column ([`COLUMNS`]); `None` for a config key (its units are the key
/// registry's, [`crate::config::keys::units`]).
pub fn column_units(name: &str) -> Option<&'static str> {
    match name {
        "co2_ppm" => Some("ppm"),
        "solar_scale" => Some("1"),
        "forcing_wm2" => Some("W m-2"),
        _ => None,
    }
}

/// How values between rows are found.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Interpolation {
    /// Straight line between rows.
    Linear,
    /// The value of the last row at or before the time.
    Step,
}

/// A bad forcing file: names the line and what is allowed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("line {line}: {message}")]
pub struct ForcingError {
    /// 1-based line number (0: the file as a whole).
    pub line: usize,
    /// What is wrong.
    pub message: String,
}

impl From<CsvError> for ForcingError {
    fn from(e: CsvError) -> Self {
        ForcingError {
            line: e.line,
            message: e.message,
        }
    }
}

/// A parsed forcing history.
#[derive(Debug, Clone, PartialEq)]
pub struct ForcingSeries {
    /// Years, strictly increasing.
    pub years: Vec<f64>,
    /// Column name and values, in file order.
    pub columns: Vec<(String, Vec<f64>)>,
    /// Interpolation rule.
    pub interpolation: Interpolation,
    /// Hold end values outside the range (otherwise the range must cover the run).
    pub hold: bool,
}

/// Allowed range of a channel's values, as a check and its description.
fn value_range(name: &str) -> (fn(f64) -> bool, &'static str) {
    match name {
        "co2_ppm" | "greenhouse.co2_ppm" | "greenhouse.reference_co2_ppm" => (|v| v > 0.0, "above 0"),
        "solar_scale" | "forcing.solar_scale" | "insolation.solar_constant" => (|v| v >= 0.0, "0 or more"),
        "longwave.emissivity" => (|v| v > 0.0 && v <= 1.0, "above 0 and at most 1"),
        "transport.diffusivity" | "transport.relaxation_rate" => (|v| v >= 0.0, "0 or more"),
        _ => (|v| v.abs() <= 1e4, "from -10000 to 10000"),
    }
}

impl ForcingSeries {
    /// Parse CSV text (the dialect of [`crate::csv`]).
    pub fn parse(
        text: &str,
        interpolation: Interpolation,
        hold: bool,
    ) -> Result<ForcingSeries, ForcingError> {
        let err = |line: usize, m: String| ForcingError { line, message: m };
        let mut reader = Reader::new(
            text,
            "empty forcing file (no header); expected a header such as `year,co2_ppm`",
        )
        .map_err(ForcingError::from)?;
        let hl = reader.header_line;
        let names = reader.names.clone();
        if names[0] != "year" {
            return Err(err(
                hl,
                format!("the first column must be `year`, found `{}`", shorten(names[0])),
            ));
        }
        if names.len() < 2 {
            return Err(err(
                hl,
                format!("no forcing columns; allowed: {}", allowed_names()),
            ));
        }
        for (k, n) in names.iter().enumerate().skip(1) {
            if !is_channel(n) {
                return Err(err(
                    hl,
                    format!("unknown column `{}`; allowed: {}", shorten(n), allowed_names()),
                ));
            }
            if names[1..k].iter().any(|m| canonical(m) == canonical(n)) {
                return Err(err(
                    hl,
                    format!("column `{n}` appears twice (co2_ppm and greenhouse.co2_ppm are the same)"),
                ));
            }
        }
        let mut years = Vec::new();
        let mut cols: Vec<Vec<f64>> = vec![Vec::new(); names.len() - 1];
        let mut row = Vec::with_capacity(names.len());
        while let Some(ln) = reader.next_row(&mut row).map_err(ForcingError::from)? {
            if years.len() >= MAX_ROWS {
                return Err(err(
                    ln,
                    format!("more than {MAX_ROWS} data rows; that is the limit of a forcing file"),
                ));
            }
            let v = row[0];
            if let Some(&prev) = years.last() {
                if v <= prev {
                    return Err(err(
                        ln,
                        format!("years must increase strictly: {v} follows {prev}"),
                    ));
                }
            }
            years.push(v);
            for (k, &v) in row.iter().enumerate().skip(1) {
                let (ok, allowed) = value_range(names[k]);
                if !ok(v) {
                    return Err(err(
                        ln,
                        format!(
                            "{v} in column `{}` is out of range (allowed: {allowed})",
                            names[k]
                        ),
                    ));
                }
                cols[k - 1].push(v);
            }
        }
        if years.is_empty() {
            return Err(err(hl, "no data rows after the header".into()));
        }
        Ok(ForcingSeries {
            years,
            columns: names[1..].iter().map(|s| s.to_string()).zip(cols).collect(),
            interpolation,
            hold,
        })
    }

    /// Check the series covers `[0, years]` unless it holds its end values.
    pub fn check_covers(&self, years: f64) -> Result<(), ForcingError> {
        let (a, b) = (self.years[0], *self.years.last().expect("non-empty"));
        if !self.hold && (a > 0.0 || b < years) {
            return Err(ForcingError {
                line: 0,
                message: format!(
                    "covers years {a} to {b} but the run needs 0 to {years}; extend the file or set forcing.outside = \"hold\""
                ),
            });
        }
        Ok(())
    }

    /// Value of column `k` at time `t` (years).
    pub fn value(&self, k: usize, t: f64) -> f64 {
        let y = &self.years;
        let v = &self.columns[k].1;
        let n = y.len();
        if t <= y[0] {
            return v[0];
        }
        if t >= y[n - 1] {
            return v[n - 1];
        }
        let i = y.partition_point(|&x| x <= t) - 1;
        match self.interpolation {
            Interpolation::Step => v[i],
            Interpolation::Linear => {
                let s = (t - y[i]) / (y[i + 1] - y[i]);
                v[i] + s * (v[i + 1] - v[i])
            }
        }
    }

    /// Years of the rows where the series changes form: with linear interpolation a row where
    /// the slope of any column changes (the series holds its end values outside its range),
    /// with step interpolation a row where any column jumps.
    pub fn breakpoints(&self) -> Vec<f64> {
        let y = &self.years;
        let n = y.len();
        let slope = |v: &[f64], i: usize| -> f64 {
            // Slope of segment i (rows i, i + 1); 0 outside the rows (held values).
            if i + 1 >= n {
                0.0
            } else {
                (v[i + 1] - v[i]) / (y[i + 1] - y[i])
            }
        };
        (0..n)
            .filter(|&i| {
                self.columns.iter().any(|(_, v)| match self.interpolation {
                    Interpolation::Step => i > 0 && v[i] != v[i - 1],
                    Interpolation::Linear => {
                        let left = if i == 0 { 0.0 } else { slope(v, i - 1) };
                        let right = slope(v, i);
                        // Rows on one straight line (to round-off of the slopes) are no break.
                        (left - right).abs() > 1e-12 * (left.abs() + right.abs())
                    }
                })
            })
            .map(|i| y[i])
            .collect()
    }

    /// The shortest row spacing (years) of the rows around `[a, b]`: the segments containing
    /// `a` and `b`, every segment between them and the segment before `a`'s; infinite outside
    /// the rows (held end values).
    pub fn row_spacing(&self, a: f64, b: f64) -> f64 {
        let y = &self.years;
        let n = y.len();
        if n < 2 || b < y[0] || a >= y[n - 1] {
            return f64::INFINITY;
        }
        // First segment: the one before the segment containing `a`.
        let ia = y.partition_point(|&x| x <= a).saturating_sub(2);
        // Last segment: the one containing `b` (or ending at it).
        let ib = y.partition_point(|&x| x < b).min(n - 1).max(ia + 1);
        y[ia..=ib]
            .windows(2)
            .fold(f64::INFINITY, |m, w| m.min(w[1] - w[0]))
    }

    /// Index of a column by name (`co2_ppm` and `greenhouse.co2_ppm` match each other).
    pub fn column(&self, name: &str) -> Option<usize> {
        self.columns
            .iter()
            .position(|(n, _)| canonical(n) == canonical(name))
    }
}

/// The one name of a channel: `co2_ppm` and `greenhouse.co2_ppm` are the same quantity.
fn canonical(name: &str) -> &str {
    if name == "co2_ppm" {
        "greenhouse.co2_ppm"
    } else {
        name
    }
}

/// The shape of an analytic forcing piece.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum PieceShape {
    /// Adds `size` from `start` until `end`.
    Step {
        /// The jump, in the target's units.
        size: f64,
    },
    /// Adds `rate (min(t, end) - start)` after `start`.
    Ramp {
        /// Change per year, target units per year.
        rate: f64,
    },
    /// Multiplies by `(1 + rate)^(min(t, end) - start)` after `start` (1 %/year: `rate = 0.01`).
    Exponential {
        /// Fractional growth per year.
        rate: f64,
    },
    /// Adds `amplitude sin(2 pi (t - start) / period + phase)` from `start` until `end`.
    Sinusoid {
        /// Amplitude, target units.
        amplitude: f64,
        /// Period, years.
        period: f64,
        /// Phase, radians.
        phase: f64,
    },
}

/// An analytic forcing piece on one channel, active from `start` (years).
#[derive(Debug, Clone, PartialEq)]
pub struct Piece {
    /// Channel name (a [`COLUMNS`] name or a time-varying key).
    pub target: String,
    /// Shape.
    pub shape: PieceShape,
    /// Start, years.
    pub start: f64,
    /// End, years (`f64::INFINITY`: never): steps and sinusoids stop, ramps hold.
    pub end: f64,
}

impl Piece {
    /// Additive part at `t` (0 for exponential pieces).
    pub fn additive(&self, t: f64) -> f64 {
        match self.shape {
            PieceShape::Step { size } => {
                if t >= self.start && t < self.end {
                    size
                } else {
                    0.0
                }
            }
            PieceShape::Ramp { rate } => rate * (t.min(self.end) - self.start).max(0.0),
            PieceShape::Exponential { .. } => 0.0,
            PieceShape::Sinusoid {
                amplitude,
                period,
                phase,
            } => {
                if t >= self.start && t < self.end {
                    amplitude * (2.0 * PI * (t - self.start) / period + phase).sin()
                } else {
                    0.0
                }
            }
        }
    }

    /// Multiplicative part at `t` (1 for other pieces).
    pub fn factor(&self, t: f64) -> f64 {
        match self.shape {
            PieceShape::Exponential { rate } => (1.0 + rate).powf((t.min(self.end) - self.start).max(0.0)),
            _ => 1.0,
        }
    }

    /// Times where the piece changes form: its start and end.
    fn breakpoints(&self) -> [f64; 2] {
        [self.start, self.end]
    }

    /// The longest step (years) that resolves the piece while it is active: its duration
    /// (finite pieces), and a twentieth of a sinusoid's period; infinite otherwise.
    fn time_scale(&self) -> f64 {
        let duration = self.end - self.start;
        match self.shape {
            PieceShape::Sinusoid { period, .. } => duration.min(period / 20.0),
            _ => duration,
        }
    }
}

/// How a channel enters the drivers.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Role {
    Co2,
    ReferenceCo2,
    LogCoefficient,
    SolarMultiplier,
    SolarScale,
    SolarConstant,
    ExtraAdded,
    ConstantForcing,
    LinearA,
    LinearB,
    Emissivity,
    Diffusivity,
    RelaxationRate,
}

/// The configured value of every key that may vary in time (`None`: the key does not apply to
/// the configured model kinds), for validation to hand to [`ForcingSpec::new`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Bases {
    /// `greenhouse.co2_ppm`.
    pub co2_ppm: f64,
    /// `greenhouse.reference_co2_ppm`.
    pub reference_co2_ppm: f64,
    /// `greenhouse.log_coefficient_wm2`.
    pub log_coefficient_wm2: f64,
    /// `forcing.constant_wm2`.
    pub constant_wm2: f64,
    /// `forcing.solar_scale`.
    pub solar_scale: f64,
    /// `insolation.solar_constant`.
    pub solar_constant: f64,
    /// `longwave.a` (linear OLR only).
    pub linear_a: Option<f64>,
    /// `longwave.b` (linear OLR only).
    pub linear_b: Option<f64>,
    /// `longwave.emissivity` (gray body only).
    pub emissivity: Option<f64>,
    /// `transport.diffusivity` (diffusive only).
    pub diffusivity: Option<f64>,
    /// `transport.relaxation_rate` (relaxation only).
    pub relaxation_rate: Option<f64>,
}

/// One time-varying quantity: its base value or CSV column, and its pieces.
#[derive(Debug, Clone, PartialEq)]
struct Channel {
    name: &'static str,
    role: Role,
    base: f64,
    column: Option<usize>,
    pieces: Vec<Piece>,
}

/// A validated forcing: an optional CSV series plus analytic pieces, grouped by channel.
#[derive(Debug, Clone, PartialEq)]
pub struct ForcingSpec {
    /// The CSV series, if any.
    pub series: Option<ForcingSeries>,
    channels: Vec<Channel>,
    bases: Bases,
    /// The pieces as given (for [`ForcingSpec::with_bases`]).
    pieces: Vec<Piece>,
    /// Every breakpoint of the series and the pieces, increasing, finite.
    breaks: Vec<f64>,
}

impl ForcingSpec {
    /// Group a series and pieces by channel. Errors name the channel and what is allowed.
    pub fn new(
        series: Option<ForcingSeries>,
        pieces: Vec<Piece>,
        bases: Bases,
    ) -> Result<ForcingSpec, String> {
        let mut names: Vec<&str> = Vec::new();
        if let Some(s) = &series {
            names.extend(s.columns.iter().map(|(n, _)| canonical(n)));
        }
        names.extend(pieces.iter().map(|p| canonical(&p.target)));
        let mut channels: Vec<Channel> = Vec::new();
        for name in names {
            if channels.iter().any(|c| c.name == name) {
                continue;
            }
            let (role, base, needs): (Role, Option<f64>, &str) = match name {
                "greenhouse.co2_ppm" => (Role::Co2, Some(bases.co2_ppm), ""),
                "greenhouse.reference_co2_ppm" => (Role::ReferenceCo2, Some(bases.reference_co2_ppm), ""),
                "greenhouse.log_coefficient_wm2" => (Role::LogCoefficient, Some(bases.log_coefficient_wm2), ""),
                "solar_scale" => (Role::SolarMultiplier, Some(1.0), ""),
                "forcing.solar_scale" => (Role::SolarScale, Some(bases.solar_scale), ""),
                "insolation.solar_constant" => (Role::SolarConstant, Some(bases.solar_constant), ""),
                "forcing_wm2" => (Role::ExtraAdded, Some(0.0), ""),
                "forcing.constant_wm2" => (Role::ConstantForcing, Some(bases.constant_wm2), ""),
                "longwave.a" => (Role::LinearA, bases.linear_a, "longwave.kind = \"linear\""),
                "longwave.b" => (Role::LinearB, bases.linear_b, "longwave.kind = \"linear\""),
                "longwave.emissivity" => (Role::Emissivity, bases.emissivity, "longwave.kind = \"gray_body\""),
                "transport.diffusivity" => (
                    Role::Diffusivity,
                    bases.diffusivity.filter(|d| *d > 0.0),
                    "transport.kind = \"diffusive\" with a configured transport.diffusivity above 0 (the history scales it)",
                ),
                "transport.relaxation_rate" => (
                    Role::RelaxationRate,
                    bases.relaxation_rate.filter(|d| *d > 0.0),
                    "transport.kind = \"relaxation\" with a configured transport.relaxation_rate above 0 (the history scales it)",
                ),
                other => return Err(format!("`{other}` cannot vary in time; allowed: {}", allowed_names())),
            };
            let base = base.ok_or_else(|| format!("`{name}` can vary in time only with {needs}"))?;
            // Every name matched above is a column or a time-varying key.
            let Some(name) = COLUMNS.iter().chain(KEYS).copied().find(|k| *k == name) else {
                continue;
            };
            channels.push(Channel {
                name,
                role,
                base,
                column: series.as_ref().and_then(|s| s.column(name)),
                pieces: pieces
                    .iter()
                    .filter(|p| canonical(&p.target) == name)
                    .cloned()
                    .collect(),
            });
        }
        let mut breaks: Vec<f64> = series.as_ref().map(|s| s.breakpoints()).unwrap_or_default();
        breaks.extend(
            pieces
                .iter()
                .flat_map(|p| p.breakpoints())
                .filter(|t| t.is_finite()),
        );
        breaks.sort_by(f64::total_cmp);
        breaks.dedup();
        Ok(ForcingSpec {
            series,
            channels,
            bases,
            pieces,
            breaks,
        })
    }

    /// The same series and pieces over other configured values (a control or ensemble
    /// parameter changed on the model spec); errors as [`ForcingSpec::new`].
    pub fn with_bases(&self, bases: Bases) -> Result<ForcingSpec, String> {
        ForcingSpec::new(self.series.clone(), self.pieces.clone(), bases)
    }

    /// Check every channel stays in its allowed range over `[0, years]`: at every CSV row and
    /// piece breakpoint inside the run and at 2000 evenly spaced times (pieces are smooth
    /// between breakpoints). Returns the first violation as a message.
    pub fn check_values(&self, years: f64) -> Result<(), String> {
        for c in &self.channels {
            let (ok, allowed) = value_range(c.name);
            let mut times: Vec<f64> = (0..=2000).map(|k| years * k as f64 / 2000.0).collect();
            for p in &c.pieces {
                times.extend(
                    p.breakpoints()
                        .iter()
                        .filter(|t| t.is_finite())
                        .flat_map(|&t| [t, t - 1e-9 * (1.0 + t.abs())]),
                );
            }
            if let Some(s) = &self.series {
                times.extend(s.years.iter().copied());
            }
            for t in times.into_iter().filter(|t| *t >= 0.0 && *t <= years) {
                let v = self.channel_value(c, t);
                if !v.is_finite() || !ok(v) {
                    return Err(format!(
                        "the forcing takes `{}` to {v} at year {t}; allowed: {allowed}",
                        c.name
                    ));
                }
            }
        }
        Ok(())
    }

    /// Every time (years, increasing) where the forcing jumps or changes slope: rows of the
    /// series where a slope changes or a step jumps, and each piece's start and end.
    pub fn breakpoints(&self) -> &[f64] {
        &self.breaks
    }

    /// The first breakpoint strictly after `t` (years), if any.
    pub fn next_breakpoint(&self, t: f64) -> Option<f64> {
        self.breaks.get(self.breaks.partition_point(|&b| b <= t)).copied()
    }

    /// The forcing's own time scale over `[a, b]` (years, `a <= b`): the shortest row spacing of
    /// the series around it, and the [`Piece::time_scale`] of every piece active in it; a
    /// time stepper that keeps its steps below this (and lands on every breakpoint) never
    /// steps across a feature of the forcing.
    pub fn time_scale(&self, a: f64, b: f64) -> f64 {
        let mut m = self
            .series
            .as_ref()
            .map_or(f64::INFINITY, |s| s.row_spacing(a, b));
        for c in &self.channels {
            for p in &c.pieces {
                // Active somewhere in [a, b) (at `a` itself when a == b).
                if (p.start < b || p.start <= a) && p.end > a {
                    m = m.min(p.time_scale());
                }
            }
        }
        m
    }

    /// Names of the channels, in order of first appearance (CSV columns, then pieces).
    pub fn channel_names(&self) -> Vec<&'static str> {
        self.channels.iter().map(|c| c.name).collect()
    }

    /// Value of the channel `name` at `t` (years), if the forcing has it.
    pub fn value(&self, name: &str, t: f64) -> Option<f64> {
        self.channels
            .iter()
            .find(|c| c.name == canonical(name))
            .map(|c| self.channel_value(c, t))
    }

    #[inline]
    fn channel_value(&self, c: &Channel, t: f64) -> f64 {
        let mut v = match (c.column, &self.series) {
            (Some(k), Some(s)) => s.value(k, t),
            _ => c.base,
        };
        let mut f = 1.0;
        for p in &c.pieces {
            v += p.additive(t);
            f *= p.factor(t);
        }
        v * f
    }
}

/// Drivers from a forcing on top of the configured constant values.
#[derive(Debug, Clone)]
pub struct TimeDrivers {
    spec: Arc<ForcingSpec>,
    base: Drivers,
}

impl TimeDrivers {
    /// Combine a forcing with the configured drivers.
    pub fn new(spec: Arc<ForcingSpec>, base: Drivers) -> TimeDrivers {
        TimeDrivers { spec, base }
    }

    /// The forcing.
    pub fn spec(&self) -> &ForcingSpec {
        &self.spec
    }
}

impl DriverSource for TimeDrivers {
    fn at(&self, t: f64) -> Drivers {
        let b = &self.spec.bases;
        let mut d = self.base;
        let (mut co2, mut reference, mut k, mut greenhouse) =
            (b.co2_ppm, b.reference_co2_ppm, b.log_coefficient_wm2, false);
        let (mut solar_key, mut solar_mult, mut s0_factor) = (self.base.solar_scale, 1.0, 1.0);
        let (mut extra_base, mut extra_added) = (self.base.extra_wm2, 0.0);
        for c in &self.spec.channels {
            let v = self.spec.channel_value(c, t);
            match c.role {
                Role::Co2 => (co2, greenhouse) = (v, true),
                Role::ReferenceCo2 => (reference, greenhouse) = (v, true),
                Role::LogCoefficient => (k, greenhouse) = (v, true),
                Role::SolarMultiplier => solar_mult *= v,
                Role::SolarScale => solar_key = v,
                Role::SolarConstant => s0_factor = v / c.base,
                Role::ExtraAdded => extra_added += v,
                Role::ConstantForcing => extra_base = v,
                Role::LinearA => d.olr_offset_wm2 = v - c.base,
                Role::LinearB => d.olr_slope_wm2_per_k = v - c.base,
                Role::Emissivity => d.olr_scale = v / c.base,
                Role::Diffusivity | Role::RelaxationRate => d.transport_scale = v / c.base,
            }
        }
        d.solar_scale = solar_key * solar_mult * s0_factor;
        if greenhouse {
            d.greenhouse_wm2 = co2_forcing(k, co2, reference);
        }
        d.extra_wm2 = extra_base + extra_added;
        d
    }

    fn parameter_keys(&self) -> Vec<String> {
        self.spec
            .channels
            .iter()
            .filter(|c| !matches!(c.role, Role::SolarMultiplier | Role::ExtraAdded))
            .map(|c| c.name.to_string())
            .collect()
    }

    fn next_breakpoint(&self, t: f64) -> Option<f64> {
        self.spec.next_breakpoint(t)
    }

    fn time_scale(&self, a: f64, b: f64) -> f64 {
        self.spec.time_scale(a, b)
    }

    fn parameter_values(&self, t: f64, out: &mut [f64]) {
        let chans = self
            .spec
            .channels
            .iter()
            .filter(|c| !matches!(c.role, Role::SolarMultiplier | Role::ExtraAdded));
        for (o, c) in out.iter_mut().zip(chans) {
            *o = self.spec.channel_value(c, t);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn bases() -> Bases {
        Bases {
            co2_ppm: 280.0,
            reference_co2_ppm: 280.0,
            log_coefficient_wm2: 5.35,
            constant_wm2: 0.5,
            solar_scale: 1.0,
            solar_constant: 1361.0,
            linear_a: Some(203.3),
            linear_b: Some(2.09),
            emissivity: None,
            diffusivity: Some(0.55),
            relaxation_rate: None,
        }
    }

    #[test]
    fn linear_and_step_interpolation_and_holds() {
        let text = "year,co2_ppm,forcing_wm2\n0,280,0\n10,560,2\n20,560,-2\n";
        let lin = ForcingSeries::parse(text, Interpolation::Linear, false).unwrap();
        assert_eq!(lin.value(0, 5.0), 420.0);
        assert_eq!(lin.value(1, 15.0), 0.0);
        let st = ForcingSeries::parse(text, Interpolation::Step, true).unwrap();
        assert_eq!(st.value(0, 9.99), 280.0);
        assert_eq!(st.value(1, 25.0), -2.0);
        assert!(lin.check_covers(30.0).is_err());
        assert!(st.check_covers(30.0).is_ok());
    }

    #[test]
    fn bad_files_name_the_line() {
        for (text, line, frag) in [
            ("", 1, "empty"),
            ("# only a comment\n", 1, "empty"),
            ("year,co2_ppm\n0,280\n0,300\n", 3, "increase strictly"),
            ("year,co2_ppm\n0,nan\n", 2, "not finite"),
            ("year,co2_ppm\n0,abc\n", 2, "not a number"),
            ("year,carbon\n0,280\n", 1, "unknown column"),
            ("year,co2_ppm\n0\n", 2, "expected 2 fields"),
            ("year,co2_ppm\n", 1, "no data rows"),
            ("co2_ppm,year\n", 1, "first column"),
            ("year,co2_ppm,greenhouse.co2_ppm\n", 1, "appears twice"),
            ("year,longwave.emissivity\n0,1.5\n", 2, "out of range"),
        ] {
            let e = ForcingSeries::parse(text, Interpolation::Linear, false).unwrap_err();
            assert_eq!(e.line, line, "{text:?}: {e}");
            assert!(e.message.contains(frag), "{text:?}: {e}");
        }
    }

    #[test]
    fn pieces_combine_with_a_series() {
        // By hand: CSV forcing_wm2 ramps 0 -> 2 over 10 years; a step of +1 from year 5; CO2
        // grows 1 %/year from 280 ppm (exponential piece).
        let s = ForcingSeries::parse("year,forcing_wm2\n0,0\n10,2\n", Interpolation::Linear, false).unwrap();
        let pieces = vec![
            Piece {
                target: "forcing_wm2".into(),
                shape: PieceShape::Step { size: 1.0 },
                start: 5.0,
                end: f64::INFINITY,
            },
            Piece {
                target: "co2_ppm".into(),
                shape: PieceShape::Exponential { rate: 0.01 },
                start: 0.0,
                end: 70.0,
            },
        ];
        let spec = Arc::new(ForcingSpec::new(Some(s), pieces, bases()).unwrap());
        let base = Drivers::plain(1.0, 0.0, 0.5);
        let d = TimeDrivers::new(spec.clone(), base);
        let at4 = d.at(4.0);
        assert!((at4.extra_wm2 - (0.5 + 0.8)).abs() < 1e-12);
        let at6 = d.at(6.0);
        assert!((at6.extra_wm2 - (0.5 + 1.2 + 1.0)).abs() < 1e-12);
        let co2_70 = 280.0 * 1.01_f64.powf(70.0);
        assert!((spec.value("greenhouse.co2_ppm", 100.0).unwrap() - co2_70).abs() < 1e-9);
        assert!((d.at(70.0).greenhouse_wm2 - 5.35 * (co2_70 / 280.0).ln()).abs() < 1e-12);
        assert_eq!(d.parameter_keys(), ["greenhouse.co2_ppm"]);
    }

    #[test]
    fn parameters_enter_the_drivers() {
        let pieces = vec![
            Piece {
                target: "longwave.b".into(),
                shape: PieceShape::Ramp { rate: 0.1 },
                start: 0.0,
                end: 10.0,
            },
            Piece {
                target: "transport.diffusivity".into(),
                shape: PieceShape::Sinusoid {
                    amplitude: 0.11,
                    period: 4.0,
                    phase: 0.0,
                },
                start: 0.0,
                end: f64::INFINITY,
            },
            Piece {
                target: "insolation.solar_constant".into(),
                shape: PieceShape::Step { size: 13.61 },
                start: 2.0,
                end: 3.0,
            },
        ];
        let spec = Arc::new(ForcingSpec::new(None, pieces, bases()).unwrap());
        let d = TimeDrivers::new(spec, Drivers::plain(1.0, 0.0, 0.0)).at(2.5);
        assert!((d.olr_slope_wm2_per_k - 0.25).abs() < 1e-12);
        // sin(2 pi 2.5 / 4) = sin(1.25 pi) = -sqrt(2)/2.
        assert!((d.transport_scale - (0.55 - 0.11 * 0.5_f64.sqrt()) / 0.55).abs() < 1e-12);
        assert!((d.solar_scale - 1.01).abs() < 1e-12);
        for bad in ["longwave.emissivity", "albedo.ice", "transport.relaxation_rate"] {
            let p = Piece {
                target: bad.into(),
                shape: PieceShape::Step { size: 0.1 },
                start: 0.0,
                end: 1.0,
            };
            assert!(ForcingSpec::new(None, vec![p], bases()).is_err(), "{bad}");
        }
    }

    #[test]
    fn out_of_range_values_over_the_run_are_found() {
        let p = Piece {
            target: "co2_ppm".into(),
            shape: PieceShape::Ramp { rate: -10.0 },
            start: 0.0,
            end: f64::INFINITY,
        };
        let spec = ForcingSpec::new(None, vec![p], bases()).unwrap();
        assert!(spec.check_values(20.0).is_ok());
        let e = spec.check_values(40.0).unwrap_err();
        assert!(e.contains("greenhouse.co2_ppm") && e.contains("above 0"), "{e}");
    }

    #[test]
    fn breakpoints_are_the_kinks_and_jumps_and_the_time_scale_the_features() {
        // By hand: rows 0, 10, 20, 30 on one line except the kink at 20; a step series jumps
        // at 10 only.
        let lin = ForcingSeries::parse(
            "year,forcing_wm2\n0,0\n10,1\n20,2\n30,0\n",
            Interpolation::Linear,
            false,
        )
        .unwrap();
        assert_eq!(lin.breakpoints(), [0.0, 20.0, 30.0]);
        let st =
            ForcingSeries::parse("year,forcing_wm2\n0,0\n10,1\n20,1\n", Interpolation::Step, false).unwrap();
        assert_eq!(st.breakpoints(), [10.0]);
        let pulse = Piece {
            target: "forcing_wm2".into(),
            shape: PieceShape::Step { size: -3.0 },
            start: 12.0,
            end: 12.5,
        };
        let cycle = Piece {
            target: "solar_scale".into(),
            shape: PieceShape::Sinusoid {
                amplitude: 0.001,
                period: 11.0,
                phase: 0.0,
            },
            start: 0.0,
            end: f64::INFINITY,
        };
        let spec = ForcingSpec::new(Some(st), vec![pulse, cycle], bases()).unwrap();
        assert_eq!(spec.breakpoints(), [0.0, 10.0, 12.0, 12.5]);
        assert_eq!(spec.next_breakpoint(10.0), Some(12.0));
        assert_eq!(spec.next_breakpoint(12.5), None);
        // Row spacing 10, the sinusoid's period / 20 = 0.55, the pulse's 0.5 while it lasts.
        assert_eq!(spec.time_scale(5.0, 5.0), 0.55);
        assert_eq!(spec.time_scale(12.2, 12.2), 0.5);
        assert_eq!(spec.time_scale(11.0, 12.0), 0.55);
        assert_eq!(spec.time_scale(11.0, 12.1), 0.5);
        assert_eq!(
            spec.series.as_ref().unwrap().row_spacing(25.0, 30.0),
            f64::INFINITY
        );
    }
}
