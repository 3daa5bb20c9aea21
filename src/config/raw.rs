//! Raw configuration as written in TOML: every key optional, unknown keys rejected.
//!
//! `validate` turns this into typed specs; `resolve` fills in every default so that the resolved
//! configuration can be printed (`icefold check`) and stored in output files.

use serde::{Deserialize, Serialize};

/// The whole file.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawConfig {
    /// Free-text title of the scenario.
    pub title: Option<String>,
    /// `[grid]`.
    #[serde(default)]
    pub grid: RawGrid,
    /// `[insolation]`.
    #[serde(default)]
    pub insolation: RawInsolation,
    /// `[albedo]`.
    #[serde(default)]
    pub albedo: RawAlbedo,
    /// `[longwave]`.
    #[serde(default)]
    pub longwave: RawLongwave,
    /// `[greenhouse]`.
    #[serde(default)]
    pub greenhouse: RawGreenhouse,
    /// `[transport]`.
    #[serde(default)]
    pub transport: RawTransport,
    /// `[heat_capacity]`.
    #[serde(default)]
    pub heat_capacity: RawHeatCapacity,
    /// `[initial]`.
    #[serde(default)]
    pub initial: RawInitial,
    /// `[time]`.
    #[serde(default)]
    pub time: RawTime,
    /// `[forcing]`.
    #[serde(default)]
    pub forcing: RawForcing,
    /// `[equilibrium]`.
    #[serde(default)]
    pub equilibrium: RawEquilibrium,
    /// `[output]`.
    #[serde(default)]
    pub output: RawOutput,
    /// `[sweep]`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub sweep: Option<RawSweep>,
    /// `[branches]`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub branches: Option<RawBranches>,
    /// `[ensemble]`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ensemble: Option<RawEnsemble>,
    /// `[regimes]`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub regimes: Option<RawRegimes>,
}

/// `[grid]`.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawGrid {
    /// "hemisphere" or "globe".
    pub domain: Option<String>,
    /// Number of bands.
    pub bands: Option<i64>,
    /// "equal_area" or "equal_angle".
    pub spacing: Option<String>,
}

/// `[insolation]`.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawInsolation {
    /// "legendre", "annual_mean" or "seasonal".
    pub kind: Option<String>,
    /// S0, W m-2.
    pub solar_constant: Option<f64>,
    /// P2 coefficient (legendre); from the obliquity when absent.
    pub s2: Option<f64>,
    /// Obliquity, degrees.
    pub obliquity_deg: Option<f64>,
    /// Orbital eccentricity.
    pub eccentricity: Option<f64>,
    /// True longitude of perihelion from the northern spring equinox, degrees.
    pub perihelion_deg: Option<f64>,
}

/// `[albedo]`.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawAlbedo {
    /// "step", "smooth" or "ramp".
    pub kind: Option<String>,
    /// Ice-free albedo, P0 part.
    pub ice_free: Option<f64>,
    /// Ice-free albedo, P2 part.
    pub ice_free_p2: Option<f64>,
    /// Ice albedo.
    pub ice: Option<f64>,
    /// Freezing temperature, degrees C.
    pub freeze_temperature_c: Option<f64>,
    /// Transition width (smooth, ramp), K.
    pub width_k: Option<f64>,
}

/// `[longwave]`.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawLongwave {
    /// "linear", "gray_body", "emission_level", "table" or "gray_layer".
    pub kind: Option<String>,
    /// Linear OLR at 0 C, W m-2.
    pub a: Option<f64>,
    /// Linear OLR slope, W m-2 K-1.
    pub b: Option<f64>,
    /// Gray-body emissivity.
    pub emissivity: Option<f64>,
    /// Lapse rate, K per km.
    pub lapse_rate_k_per_km: Option<f64>,
    /// Height of the emitting layer, km.
    pub emission_height_km: Option<f64>,
    /// CSV path of an OLR table (relative to the config file).
    pub table: Option<String>,
    /// Longwave emissivity of the gray layer.
    pub layer_emissivity: Option<f64>,
}

/// `[greenhouse]`.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawGreenhouse {
    /// CO2, ppm.
    pub co2_ppm: Option<f64>,
    /// Reference CO2, ppm (no forcing at this value).
    pub reference_co2_ppm: Option<f64>,
    /// Forcing per e-folding of CO2, W m-2 (Myhre et al. 1998: 5.35).
    pub log_coefficient_wm2: Option<f64>,
}

/// `[transport]`.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawTransport {
    /// "diffusive" or "relaxation".
    pub kind: Option<String>,
    /// D0, W m-2 K-1.
    pub diffusivity: Option<f64>,
    /// d2 in `D(x) = D0 (1 + d2 P2(x))`.
    pub diffusivity_p2: Option<f64>,
    /// gamma of the relaxation form, W m-2 K-1.
    pub relaxation_rate: Option<f64>,
}

/// Land fraction: one value for every band, or one per band.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(untagged)]
pub enum RawLandFraction {
    /// The same in every band.
    Uniform(f64),
    /// One value per band, equator (or south pole) first.
    PerBand(Vec<f64>),
}

/// `[heat_capacity]`.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawHeatCapacity {
    /// J m-2 K-1 (exclusive with `mixed_layer_depth_m`).
    pub value: Option<f64>,
    /// Depth of a sea-water mixed layer, m.
    pub mixed_layer_depth_m: Option<f64>,
    /// Heat capacity of land, J m-2 K-1.
    pub land_value: Option<f64>,
    /// Land fraction.
    pub land_fraction: Option<RawLandFraction>,
}

/// `[initial]`.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawInitial {
    /// Uniform start temperature, degrees C.
    pub temperature_c: Option<f64>,
    /// Added `P2(x)` shape, K (negative: colder poles).
    pub temperature_p2_k: Option<f64>,
    /// Added `P1(x) = x` part, K (positive: warmer north; an asymmetric start on a globe).
    pub temperature_p1_k: Option<f64>,
}

/// `[time]`.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawTime {
    /// Run length, years.
    pub years: Option<f64>,
    /// Output cadence, years.
    pub output_every_years: Option<f64>,
    /// "implicit", "dopri5" or "dop853".
    pub method: Option<String>,
    /// Fixed step for the implicit scheme, days (absent: adaptive).
    pub step_days: Option<f64>,
    /// Local error tolerance per step, K.
    pub tolerance: Option<f64>,
    /// Longest step of the adaptive schemes, years.
    pub max_step_years: Option<f64>,
    /// Whether Dopri5/Dop853 stop on detected stiffness.
    pub stiffness_check: Option<bool>,
    /// Step limit of the whole run.
    pub max_steps: Option<i64>,
    /// What the records hold: "instant" (the state at each output time), "every_step" (every
    /// accepted step of the implicit scheme) or "annual_mean" (time means over each model year
    /// of the whole trajectory, integrated step by step).
    pub output: Option<String>,
}

/// `[forcing]`: constant additive forcing (time histories come with `file`).
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawForcing {
    /// Constant additive forcing, W m-2.
    pub constant_wm2: Option<f64>,
    /// Solar-constant multiplier.
    pub solar_scale: Option<f64>,
    /// CSV forcing history (relative to the config file): `year` plus any of `co2_ppm`,
    /// `solar_scale`, `forcing_wm2`.
    pub file: Option<String>,
    /// "linear" or "step" interpolation between rows.
    pub interpolation: Option<String>,
    /// Outside the file's years: "error" or "hold" (keep the end values).
    pub outside: Option<String>,
    /// Analytic pieces added to (or, exponential, multiplying) the forcing channels.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub pieces: Option<Vec<RawPiece>>,
}

/// One `[[forcing.pieces]]` entry.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawPiece {
    /// Channel: `co2_ppm`, `solar_scale`, `forcing_wm2` or a time-varying dotted key.
    pub target: Option<String>,
    /// "step", "ramp", "exponential" or "sinusoid".
    pub kind: Option<String>,
    /// Start, years.
    pub start_year: Option<f64>,
    /// End, years (steps and sinusoids stop, ramps hold; absent: never).
    pub end_year: Option<f64>,
    /// Step size, target units.
    pub size: Option<f64>,
    /// Ramp: change per year (target units); exponential: fractional growth per year.
    pub rate_per_year: Option<f64>,
    /// Sinusoid amplitude, target units.
    pub amplitude: Option<f64>,
    /// Sinusoid period, years.
    pub period_years: Option<f64>,
    /// Sinusoid phase, degrees.
    pub phase_deg: Option<f64>,
}

/// `[ensemble]`.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawEnsemble {
    /// Number of members.
    pub members: Option<i64>,
    /// Seed of the Latin hypercube.
    pub seed: Option<i64>,
    /// Write every member's surface temperature field.
    pub fields: Option<bool>,
    /// Compute each member's equilibrium sensitivity to doubled CO2.
    pub sensitivity: Option<bool>,
    /// Sampled keys.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub parameters: Option<Vec<RawEnsembleParameter>>,
}

/// One `[[ensemble.parameters]]` entry.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawEnsembleParameter {
    /// Dotted numeric config key.
    pub key: Option<String>,
    /// "uniform", "normal", "log_uniform" or "values".
    pub distribution: Option<String>,
    /// Lower end (uniform, log-uniform).
    pub min: Option<f64>,
    /// Upper end (uniform, log-uniform).
    pub max: Option<f64>,
    /// Mean (normal).
    pub mean: Option<f64>,
    /// Standard deviation (normal).
    pub sd: Option<f64>,
    /// Listed values ("values").
    pub values: Option<Vec<f64>>,
}

/// `[equilibrium]`.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawEquilibrium {
    /// Newton residual target, W m-2.
    pub tolerance_wm2: Option<f64>,
    /// Newton iteration limit.
    pub max_iterations: Option<i64>,
    /// Also write the doubled-CO2 equilibrium sensitivity into run files.
    pub sensitivity: Option<bool>,
}

/// `[output]`: how files are written (never what they hold).
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawOutput {
    /// zlib deflate level of record and large variables, 0 (none) to 9.
    pub deflate_level: Option<i64>,
}

/// `[sweep]`.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawSweep {
    /// Dotted config key that is stepped.
    pub control: Option<String>,
    /// First value.
    pub from: Option<f64>,
    /// Last value.
    pub to: Option<f64>,
    /// Values per direction.
    pub steps: Option<i64>,
    /// Settled when the largest |dT/dt| is below this, K per year.
    pub settle_k_per_year: Option<f64>,
    /// Longest settling time per step, years.
    pub settle_max_years: Option<f64>,
    /// Relative precision of the refined tipping points.
    pub refine_relative: Option<f64>,
    /// Spacing of the values: "linear" or "log".
    pub spacing: Option<String>,
}

/// `[branches]`.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawBranches {
    /// Dotted config key that is continued in.
    pub control: Option<String>,
    /// Lower end of the range.
    pub from: Option<f64>,
    /// Upper end of the range.
    pub to: Option<f64>,
    /// Initial arclength step.
    pub step: Option<f64>,
    /// Largest arclength step.
    pub max_step: Option<f64>,
    /// Point limit per branch.
    pub max_points: Option<i64>,
    /// Continue in the control ("linear") or in its logarithm ("log").
    pub spacing: Option<String>,
}

// ---- [regimes] (the 2-D regime map) ----

/// `[regimes]`: a map over two control keys. Along `control` (the map's columns) each row is
/// one continuation; `row_control` takes one value per row.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawRegimes {
    /// Dotted key continued in along each row (the map's x axis).
    pub control: Option<String>,
    /// Lower end of `control`.
    pub from: Option<f64>,
    /// Upper end of `control`.
    pub to: Option<f64>,
    /// Cells along `control`.
    pub columns: Option<i64>,
    /// Dotted key held fixed in each row (the map's y axis).
    pub row_control: Option<String>,
    /// First value of `row_control`.
    pub row_from: Option<f64>,
    /// Last value of `row_control`.
    pub row_to: Option<f64>,
    /// Number of rows (values of `row_control`).
    pub rows: Option<i64>,
    /// Initial arclength step of each continuation.
    pub step: Option<f64>,
    /// Largest arclength step.
    pub max_step: Option<f64>,
    /// Point limit per branch.
    pub max_points: Option<i64>,
    /// Spacing along `control`: "linear" or "log".
    pub spacing: Option<String>,
    /// Spacing of the rows' values of `row_control`: "linear" or "log".
    pub row_spacing: Option<String>,
    /// Ice-edge latitude at and poleward of which a partial cap counts as small, degrees north.
    pub small_cap_min_latitude_deg: Option<f64>,
}
