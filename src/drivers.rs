//! What varies in time outside the model's state: the drivers at one instant ([`Drivers`]) and
//! where they come from ([`DriverSource`]: constant, or a forcing history from the forcing
//! module). The model reads them without knowing their source, so the dependencies run one
//! way: forcing and model both use this module, and the model builds a forcing history from
//! its spec (model -> forcing -> drivers).

use crate::physics::longwave::ZERO_CELSIUS;

/// Time-dependent drivers at one instant.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Drivers {
    /// Multiplies the insolation (1 = as configured).
    pub solar_scale: f64,
    /// Greenhouse forcing subtracted from OLR, W m-2.
    pub greenhouse_wm2: f64,
    /// Additive forcing, W m-2.
    pub extra_wm2: f64,
    /// Multiplies the OLR (1 = as configured; a time-varying emissivity).
    pub olr_scale: f64,
    /// Added to the OLR, W m-2 (a time-varying `longwave.a`).
    pub olr_offset_wm2: f64,
    /// Added OLR slope, W m-2 K-1, times `T - 273.15 K` (a time-varying `longwave.b`).
    pub olr_slope_wm2_per_k: f64,
    /// Multiplies the transport (1 = as configured; a time-varying diffusivity or rate).
    pub transport_scale: f64,
}

impl Drivers {
    /// Drivers with the three configured values and every parameter override neutral.
    pub fn plain(solar_scale: f64, greenhouse_wm2: f64, extra_wm2: f64) -> Drivers {
        Drivers {
            solar_scale,
            greenhouse_wm2,
            extra_wm2,
            olr_scale: 1.0,
            olr_offset_wm2: 0.0,
            olr_slope_wm2_per_k: 0.0,
            transport_scale: 1.0,
        }
    }

    /// Effective OLR (W m-2, before the greenhouse forcing) and its derivative (W m-2 K-1) from
    /// the model's OLR and derivative at `t_k` (K).
    #[inline]
    pub fn olr(&self, olr: f64, dolr: f64, t_k: f64) -> (f64, f64) {
        (
            self.olr_scale * olr + self.olr_offset_wm2 + self.olr_slope_wm2_per_k * (t_k - ZERO_CELSIUS),
            self.olr_scale * dolr + self.olr_slope_wm2_per_k,
        )
    }
}

/// Supplies the drivers at a model time (years). The constant case is `Drivers` itself.
pub trait DriverSource: Send + Sync + std::fmt::Debug {
    /// Drivers at `t_years`.
    fn at(&self, t_years: f64) -> Drivers;
    /// Dotted config keys this source varies in time besides the three drivers (written to
    /// run files as applied parameters).
    fn parameter_keys(&self) -> Vec<String> {
        Vec::new()
    }
    /// Values of `parameter_keys` at `t_years`, in the same order, into `out`.
    fn parameter_values(&self, _t_years: f64, _out: &mut [f64]) {}
    /// The first time (years) strictly after `t_years` where the drivers jump or change slope
    /// (a breakpoint every time stepper must land on), if any.
    fn next_breakpoint(&self, _t_years: f64) -> Option<f64> {
        None
    }
    /// The longest step (years) that resolves the drivers over `[a, b]` (years, `a <= b`; `a == b`
    /// for the drivers at one time): the forcing's own time scale there.
    fn time_scale(&self, _a: f64, _b: f64) -> f64 {
        f64::INFINITY
    }
}
