//! Typed, validated specifications built from the raw configuration. Physics and solvers see
//! only these (never TOML or flags).

use crate::grid::{Domain, Spacing};
use crate::physics::albedo::AlbedoForm;
use crate::physics::longwave::Longwave;
use crate::physics::transport::TransportForm;

/// Insolation form.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum InsolationForm {
    /// `S0/4 (1 + s2 P2(x))`.
    Legendre {
        /// The P2 coefficient.
        s2: f64,
    },
    /// Exact annual mean from the orbit.
    AnnualMean,
    /// Daily mean at the model time.
    Seasonal,
}

/// `[insolation]`, validated.
#[derive(Debug, Clone, PartialEq)]
pub struct InsolationSpec {
    /// Form.
    pub form: InsolationForm,
    /// S0, W m-2.
    pub solar_constant: f64,
    /// Obliquity, radians.
    pub obliquity: f64,
    /// Eccentricity.
    pub eccentricity: f64,
    /// Longitude of perihelion, radians.
    pub perihelion: f64,
}

/// `[albedo]`, validated.
#[derive(Debug, Clone, PartialEq)]
pub struct AlbedoSpec {
    /// Form.
    pub form: AlbedoForm,
    /// Ice-free albedo P0 part.
    pub ice_free: f64,
    /// Ice-free albedo P2 part.
    pub ice_free_p2: f64,
    /// Ice albedo.
    pub ice: f64,
    /// Freezing temperature, K.
    pub freeze_k: f64,
}

/// `[heat_capacity]`, validated: ocean value, land value and land fraction by band.
#[derive(Debug, Clone, PartialEq)]
pub struct HeatCapacitySpec {
    /// Ocean (or the only) heat capacity, J m-2 K-1.
    pub ocean: f64,
    /// Land heat capacity, J m-2 K-1.
    pub land: f64,
    /// Land fraction per band (empty: no land).
    pub land_fraction: Vec<f64>,
}

/// Everything that defines the model's equations.
#[derive(Debug, Clone)]
pub struct ModelSpec {
    /// Domain.
    pub domain: Domain,
    /// Spacing.
    pub spacing: Spacing,
    /// Number of bands.
    pub bands: usize,
    /// Insolation.
    pub insolation: InsolationSpec,
    /// Albedo.
    pub albedo: AlbedoSpec,
    /// OLR.
    pub longwave: Longwave,
    /// Greenhouse forcing subtracted from OLR, W m-2.
    pub greenhouse_wm2: f64,
    /// Transport.
    pub transport: TransportForm,
    /// Heat capacity.
    pub heat_capacity: HeatCapacitySpec,
    /// Constant additive forcing, W m-2.
    pub extra_wm2: f64,
    /// Insolation multiplier.
    pub solar_scale: f64,
    /// CO2 (ppm), its reference (ppm) and the log coefficient (W m-2).
    pub co2: (f64, f64, f64),
    /// Forcing history (CSV and analytic pieces), if any.
    pub forcing: Option<std::sync::Arc<crate::forcing::ForcingSpec>>,
}

/// Time-stepping scheme.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// Linearly implicit Rosenbrock (ROS2) with tridiagonal solves.
    Implicit,
    /// Dormand-Prince 5(4) through `ode_solvers`.
    Dopri5,
    /// Dormand-Prince 8(5,3) through `ode_solvers`.
    Dop853,
}

/// What the records of a run file hold (`time.output`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum OutputMode {
    /// The state at each output time.
    Instant,
    /// The state after every accepted step (implicit scheme).
    EveryStep,
    /// Time means over each whole model year: the integral of the dense trajectory (every
    /// step's interpolant, by Gauss-Legendre quadrature) divided by the year.
    AnnualMean,
}

/// `[time]`, validated.
#[derive(Debug, Clone, PartialEq)]
pub struct TimeSpec {
    /// Run length, years.
    pub years: f64,
    /// Output cadence, years.
    pub output_every: f64,
    /// Scheme.
    pub method: Method,
    /// Fixed step, years (implicit only); `None`: adaptive.
    pub fixed_step: Option<f64>,
    /// Local error tolerance, K.
    pub tolerance: f64,
    /// Longest adaptive step, years.
    pub max_step: f64,
    /// Stop explicit schemes on detected stiffness.
    pub stiffness_check: bool,
    /// Step limit.
    pub max_steps: u64,
    /// What the records hold.
    pub output: OutputMode,
}

/// `[initial]`, validated.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct InitialSpec {
    /// Uniform part, K.
    pub temperature_k: f64,
    /// P2 part, K.
    pub p2_k: f64,
    /// P1 part (`x`), K: antisymmetric about the equator.
    pub p1_k: f64,
}

/// `[equilibrium]`, validated.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EquilibriumSpec {
    /// Newton residual target (largest |G|), W m-2.
    pub tolerance_wm2: f64,
    /// Iteration limit.
    pub max_iterations: usize,
    /// Write the doubled-CO2 sensitivity into run files.
    pub sensitivity: bool,
}

/// Deflate level of the writer by default (`output.deflate_level`): 1 keeps most of the size
/// gain of the usual 4 at 20 % fewer instructions per streamed record (measured with callgrind
/// on a run file).
pub const DEFAULT_DEFLATE_LEVEL: u8 = 1;
/// Highest zlib deflate level (smallest files, slowest).
pub const MAX_DEFLATE_LEVEL: u8 = 9;

/// `[output]`, validated.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct OutputSpec {
    /// zlib deflate level of record and large variables: 0 (stored without filters) to 9.
    pub deflate_level: u8,
}

/// `[sweep]`, validated.
#[derive(Debug, Clone, PartialEq)]
pub struct SweepSpec {
    /// Dotted key of the control.
    pub control: String,
    /// First value.
    pub from: f64,
    /// Last value.
    pub to: f64,
    /// Values per direction.
    pub steps: usize,
    /// Settle criterion, K per year.
    pub settle_k_per_year: f64,
    /// Settle time limit, years.
    pub settle_max_years: f64,
    /// Relative precision of refined tipping points.
    pub refine_relative: f64,
    /// How the values between `from` and `to` are spaced.
    pub spacing: AxisSpacing,
}

/// How the values of a control axis are spaced (`sweep.spacing`, `branches.spacing`,
/// `regimes.spacing`, `regimes.row_spacing`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum AxisSpacing {
    /// Equal steps in the control (the default).
    #[default]
    Linear,
    /// Equal steps in ln(control); both ends positive.
    Log,
}

impl AxisSpacing {
    /// Name in configs and files (`"linear"`, `"log"`).
    pub fn name(self) -> &'static str {
        match self {
            AxisSpacing::Linear => "linear",
            AxisSpacing::Log => "log",
        }
    }

    /// `n` values from `a` to `b` (both included; `a` alone when `n` is 1), equally spaced in
    /// the control or in its logarithm.
    pub fn values(self, a: f64, b: f64, n: usize) -> Vec<f64> {
        if n <= 1 {
            return vec![a];
        }
        let at = |i: usize| {
            let f = i as f64 / (n - 1) as f64;
            match self {
                AxisSpacing::Linear => a + (b - a) * f,
                // The ends exactly as given (exp(ln a) may differ from a in the last bit).
                AxisSpacing::Log if i == 0 => a,
                AxisSpacing::Log if i == n - 1 => b,
                AxisSpacing::Log => (a.ln() + (b.ln() - a.ln()) * f).exp(),
            }
        };
        (0..n).map(at).collect()
    }

    /// The middle of `a` and `b` on this axis (arithmetic or geometric mean).
    pub fn midpoint(self, a: f64, b: f64) -> f64 {
        match self {
            AxisSpacing::Linear => 0.5 * (a + b),
            AxisSpacing::Log => (a * b).sqrt(),
        }
    }
}

/// `[branches]`, validated.
#[derive(Debug, Clone, PartialEq)]
pub struct BranchesSpec {
    /// Dotted key of the control.
    pub control: String,
    /// Lower end.
    pub from: f64,
    /// Upper end.
    pub to: f64,
    /// Initial arclength step (in the scaled variables).
    pub step: f64,
    /// Largest arclength step.
    pub max_step: f64,
    /// Point limit per branch.
    pub max_points: usize,
    /// Continuation in the control or in its logarithm.
    pub spacing: AxisSpacing,
}

/// The whole validated configuration.
#[derive(Debug, Clone)]
pub struct Spec {
    /// Title.
    pub title: String,
    /// Model equations.
    pub model: ModelSpec,
    /// Initial state.
    pub initial: InitialSpec,
    /// Time stepping.
    pub time: TimeSpec,
    /// Equilibrium solver.
    pub equilibrium: EquilibriumSpec,
    /// How files are written.
    pub output: OutputSpec,
    /// Sweep, if configured.
    pub sweep: Option<SweepSpec>,
    /// Continuation, if configured.
    pub branches: Option<BranchesSpec>,
    /// Ensemble, if configured.
    pub ensemble: Option<EnsembleSpec>,
    /// Regime map, if configured.
    pub regimes: Option<RegimesSpec>,
}

/// `[ensemble]`, validated.
#[derive(Debug, Clone, PartialEq)]
pub struct EnsembleSpec {
    /// Number of members.
    pub members: usize,
    /// Seed of the Latin hypercube.
    pub seed: u64,
    /// Write every member's surface temperature field.
    pub fields: bool,
    /// Compute each member's equilibrium sensitivity to doubled CO2.
    pub sensitivity: bool,
    /// Sampled keys with their distributions, in config order.
    pub parameters: Vec<(String, crate::ensemble::Distribution)>,
}

// ---- [regimes] (the 2-D regime map) ----

/// Default ice-edge latitude at and poleward of which a partial cap counts as small, degrees
/// north (`regimes.small_cap_min_latitude_deg`).
pub const DEFAULT_SMALL_CAP_MIN_LATITUDE: f64 = 60.0;

/// `[regimes]`, validated.
#[derive(Debug, Clone, PartialEq)]
pub struct RegimesSpec {
    /// Dotted key continued in along each row (x axis).
    pub control: String,
    /// Lower end of `control`.
    pub from: f64,
    /// Upper end of `control`.
    pub to: f64,
    /// Cells along `control`.
    pub columns: usize,
    /// Dotted key held fixed in each row (y axis).
    pub row_control: String,
    /// First value of `row_control`.
    pub row_from: f64,
    /// Last value of `row_control`.
    pub row_to: f64,
    /// Number of rows.
    pub rows: usize,
    /// Initial arclength step (scaled variables).
    pub step: f64,
    /// Largest arclength step.
    pub max_step: f64,
    /// Point limit per branch.
    pub max_points: usize,
    /// Spacing along `control` (columns, continuation in the control or its logarithm).
    pub spacing: AxisSpacing,
    /// Spacing of the rows' values of `row_control`.
    pub row_spacing: AxisSpacing,
    /// Ice-edge latitude at and poleward of which a partial cap counts as small rather than
    /// large, degrees north: a naming convention for the map's classes, not a bifurcation.
    pub small_cap_min_latitude: f64,
}

impl RegimesSpec {
    /// The continuation settings of one row, as a `[branches]` section over `control`.
    pub fn row_branches(&self) -> BranchesSpec {
        BranchesSpec {
            control: self.control.clone(),
            from: self.from,
            to: self.to,
            step: self.step,
            max_step: self.max_step,
            max_points: self.max_points,
            spacing: self.spacing,
        }
    }

    /// Values of `control` at the cell centres: `columns` evenly spaced (in the control or its
    /// logarithm) from `from` to `to`.
    pub fn column_values(&self) -> Vec<f64> {
        self.spacing.values(self.from, self.to, self.columns)
    }

    /// Values of `row_control`: `rows` evenly spaced (in the key or its logarithm) from
    /// `row_from` to `row_to`.
    pub fn row_values(&self) -> Vec<f64> {
        self.row_spacing.values(self.row_from, self.row_to, self.rows)
    }
}

impl ModelSpec {
    /// The configured value of every key that may vary in time (`None` where the configured
    /// kinds do not use it), the bases of a forcing history.
    pub fn forcing_bases(&self) -> crate::forcing::Bases {
        let (co2_ppm, reference_co2_ppm, log_coefficient_wm2) = self.co2;
        let (linear_a, linear_b) = match &self.longwave {
            Longwave::Linear { a, b } => (Some(*a), Some(*b)),
            _ => (None, None),
        };
        crate::forcing::Bases {
            co2_ppm,
            reference_co2_ppm,
            log_coefficient_wm2,
            constant_wm2: self.extra_wm2,
            solar_scale: self.solar_scale,
            solar_constant: self.insolation.solar_constant,
            linear_a,
            linear_b,
            emissivity: match &self.longwave {
                Longwave::GrayBody { emissivity } => Some(*emissivity),
                _ => None,
            },
            diffusivity: match self.transport {
                TransportForm::Diffusive { d0, .. } => Some(d0),
                _ => None,
            },
            relaxation_rate: match self.transport {
                TransportForm::Relaxation { rate } => Some(rate),
                _ => None,
            },
        }
    }
}
