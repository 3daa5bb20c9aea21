//! Outgoing longwave radiation (OLR) at the top of the atmosphere, in W m-2, as a function of
//! surface temperature in K. One enum variant per form (DESIGN section 2).
//!
//! Reference: CODATA 2018 for the Stefan-Boltzmann constant; Fritsch and Carlson (1980, SIAM J.
//! Numer. Anal. 17) for the monotone piecewise-cubic interpolation of tabulated OLR.

/// Stefan-Boltzmann constant, W m-2 K-4 (CODATA 2018, exact in the 2019 SI).
pub const STEFAN_BOLTZMANN: f64 = 5.670_374_419e-8;

/// 0 degrees C in K.
pub const ZERO_CELSIUS: f64 = 273.15;

pub mod emission_level;
pub mod gray_body;
pub mod gray_layer;
pub mod linear;
pub mod table;

pub use table::OlrTable;

/// Every OLR kind with its config keys and how it is built from them (the config registry and
/// validation read this list).
pub const KINDS: &[crate::registry::Kind<Longwave>] = &[
    linear::KIND,
    gray_body::KIND,
    emission_level::KIND,
    table::KIND,
    gray_layer::KIND,
];

/// The names of [`KINDS`], in order (the values `longwave.kind` allows).
pub const NAMES: &[&str] = &["linear", "gray_body", "emission_level", "table", "gray_layer"];

/// The OLR form.
#[derive(Debug, Clone, PartialEq)]
pub enum Longwave {
    /// `A + B (T - 273.15)`; `a` in W m-2, `b` in W m-2 K-1 (Budyko 1969).
    Linear {
        /// OLR at 0 C, W m-2.
        a: f64,
        /// Slope, W m-2 K-1.
        b: f64,
    },
    /// `eps sigma T^4`.
    GrayBody {
        /// Effective emissivity (0..1].
        emissivity: f64,
    },
    /// `sigma (T - lapse_rate * emission_height)^4`: the emitting layer sits `emission_height`
    /// above the surface on a fixed lapse rate.
    EmissionLevel {
        /// Lapse rate in K per km.
        lapse_rate: f64,
        /// Height of the emitting layer in km.
        height: f64,
    },
    /// Tabulated OLR(T).
    Table(OlrTable),
    /// `(1 - eps/2) sigma T^4` under one gray layer.
    GrayLayer {
        /// The layer's longwave emissivity, 0 to 1.
        eps: f64,
    },
}

impl Longwave {
    /// OLR (W m-2) and dOLR/dT (W m-2 K-1) at surface temperature `t` (K).
    #[inline(always)]
    pub fn eval(&self, t: f64) -> (f64, f64) {
        match self {
            Longwave::Linear { a, b } => linear::olr(*a, *b, t),
            Longwave::GrayBody { emissivity } => gray_body::olr(*emissivity, t),
            Longwave::EmissionLevel { lapse_rate, height } => emission_level::olr(*lapse_rate, *height, t),
            Longwave::Table(table) => table.eval(t),
            Longwave::GrayLayer { eps } => gray_layer::olr(*eps, t),
        }
    }

    /// The temperature range (K) where the form is defined; `None` for the closed forms.
    pub fn valid_range(&self) -> Option<(f64, f64)> {
        match self {
            Longwave::Table(t) => Some(t.range()),
            _ => None,
        }
    }
}

/// Radiative forcing of CO2 relative to a reference concentration, `k ln(c / c_ref)` W m-2.
/// Reference: Myhre et al. (1998, Geophys. Res. Lett. 25), `k = 5.35` W m-2.
pub fn co2_forcing(k: f64, co2: f64, reference: f64) -> f64 {
    k * (co2 / reference).ln()
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn doubling_co2_gives_3_71_w_m2() {
        // Reference: Myhre et al. (1998): 5.35 ln 2 = 3.708 W m-2.
        assert_relative_eq!(co2_forcing(5.35, 560.0, 280.0), 3.708, epsilon = 5e-4);
    }
}
