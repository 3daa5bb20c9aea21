//! Outgoing longwave radiation (OLR) at the top of the atmosphere, in W m-2, as a function of
//! surface temperature in K. One enum variant per form (DESIGN section 2).
//!
//! Reference: CODATA 2018 for the Stefan-Boltzmann constant; Fritsch and Carlson (1980, SIAM J.
//! Numer. Anal. 17) for the monotone piecewise-cubic interpolation of tabulated OLR.

/// Stefan-Boltzmann constant, W m-2 K-4 (CODATA 2018, exact in the 2019 SI).
pub const STEFAN_BOLTZMANN: f64 = 5.670_374_419e-8;

/// 0 degrees C in K.
pub const ZERO_CELSIUS: f64 = 273.15;

/// A tabulated OLR curve with monotone cubic (PCHIP) interpolation.
#[derive(Debug, Clone, PartialEq)]
pub struct OlrTable {
    /// Temperatures in K, strictly increasing.
    pub temps: Vec<f64>,
    /// OLR in W m-2 at `temps`.
    pub olr: Vec<f64>,
    /// PCHIP slopes at the nodes, W m-2 K-1.
    slopes: Vec<f64>,
}

impl OlrTable {
    /// Build from at least two points with strictly increasing temperatures (checked by the
    /// config layer, which names the file and line).
    pub fn new(temps: Vec<f64>, olr: Vec<f64>) -> OlrTable {
        let slopes = pchip_slopes(&temps, &olr);
        OlrTable { temps, olr, slopes }
    }

    /// Valid temperature range in K.
    pub fn range(&self) -> (f64, f64) {
        (self.temps[0], *self.temps.last().expect("non-empty table"))
    }

    /// OLR and its derivative at `t`; linear extrapolation outside the range (the run driver
    /// stops the run there with a message).
    #[inline]
    pub fn eval(&self, t: f64) -> (f64, f64) {
        let x = &self.temps;
        let n = x.len();
        if t <= x[0] {
            return (self.olr[0] + self.slopes[0] * (t - x[0]), self.slopes[0]);
        }
        if t >= x[n - 1] {
            return (
                self.olr[n - 1] + self.slopes[n - 1] * (t - x[n - 1]),
                self.slopes[n - 1],
            );
        }
        let k = x.partition_point(|&v| v <= t) - 1;
        let h = x[k + 1] - x[k];
        let s = (t - x[k]) / h;
        crate::interpolation::hermite(
            self.olr[k],
            self.olr[k + 1],
            self.slopes[k],
            self.slopes[k + 1],
            h,
            s,
        )
    }
}

/// PCHIP node slopes: weighted harmonic mean of neighbouring secants, zero at local extrema;
/// one-sided three-point ends (as in scipy's `PchipInterpolator`).
fn pchip_slopes(x: &[f64], y: &[f64]) -> Vec<f64> {
    let n = x.len();
    let h: Vec<f64> = x.windows(2).map(|w| w[1] - w[0]).collect();
    let del: Vec<f64> = (0..n - 1).map(|k| (y[k + 1] - y[k]) / h[k]).collect();
    let mut d = vec![0.0; n];
    if n == 2 {
        d[0] = del[0];
        d[1] = del[0];
        return d;
    }
    for k in 1..n - 1 {
        if del[k - 1] * del[k] > 0.0 {
            let w1 = 2.0 * h[k] + h[k - 1];
            let w2 = h[k] + 2.0 * h[k - 1];
            d[k] = (w1 + w2) / (w1 / del[k - 1] + w2 / del[k]);
        }
    }
    let edge = |h0: f64, h1: f64, m0: f64, m1: f64| {
        let mut d = ((2.0 * h0 + h1) * m0 - h0 * m1) / (h0 + h1);
        if d.signum() != m0.signum() {
            d = 0.0;
        } else if m0.signum() != m1.signum() && d.abs() > 3.0 * m0.abs() {
            d = 3.0 * m0;
        }
        d
    };
    d[0] = edge(h[0], h[1], del[0], del[1]);
    d[n - 1] = edge(h[n - 2], h[n - 3], del[n - 2], del[n - 3]);
    d
}

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
}

impl Longwave {
    /// OLR (W m-2) and dOLR/dT (W m-2 K-1) at surface temperature `t` (K).
    #[inline(always)]
    pub fn eval(&self, t: f64) -> (f64, f64) {
        match self {
            Longwave::Linear { a, b } => (a + b * (t - ZERO_CELSIUS), *b),
            Longwave::GrayBody { emissivity } => {
                let t3 = t * t * t;
                (
                    emissivity * STEFAN_BOLTZMANN * t3 * t,
                    4.0 * emissivity * STEFAN_BOLTZMANN * t3,
                )
            }
            Longwave::EmissionLevel { lapse_rate, height } => {
                let te = t - lapse_rate * height;
                let t3 = te * te * te;
                (STEFAN_BOLTZMANN * t3 * te, 4.0 * STEFAN_BOLTZMANN * t3)
            }
            Longwave::Table(table) => table.eval(t),
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

    #[test]
    fn dry_adiabat_emission_level() {
        // Common practice: dry adiabatic lapse rate g/cp = 9.80665/1004 = 9.77 K/km ~ 9.8 K/km.
        let g_over_cp = 9.80665 / 1004.0 * 1000.0;
        assert_relative_eq!(g_over_cp, 9.8, epsilon = 0.05);
        let lw = Longwave::EmissionLevel {
            lapse_rate: 6.5,
            height: 5.0,
        };
        let (v, _) = lw.eval(288.0);
        assert_relative_eq!(v, STEFAN_BOLTZMANN * (288.0_f64 - 32.5).powi(4), epsilon = 1e-9);
    }

    #[test]
    fn pchip_is_monotone_and_interpolates() {
        // Fritsch and Carlson (1980): monotone data give a monotone interpolant.
        let t = vec![200.0, 230.0, 250.0, 260.0, 300.0, 330.0];
        let o = vec![90.0, 130.0, 180.0, 185.0, 290.0, 300.0];
        let tab = OlrTable::new(t.clone(), o.clone());
        for (ti, oi) in t.iter().zip(&o) {
            assert_relative_eq!(tab.eval(*ti).0, *oi, epsilon = 1e-12);
        }
        let mut prev = f64::MIN;
        for k in 0..=1300 {
            let v = tab.eval(200.0 + k as f64 * 0.1).0;
            assert!(v >= prev - 1e-12);
            prev = v;
        }
        // Derivative against central differences.
        let (_, d) = tab.eval(255.0);
        let fd = (tab.eval(255.0 + 1e-5).0 - tab.eval(255.0 - 1e-5).0) / 2e-5;
        assert_relative_eq!(d, fd, epsilon = 1e-6);
    }
}
