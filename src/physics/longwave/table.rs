//! OLR tabulated against surface temperature (from a CSV file), interpolated by monotone
//! piecewise cubics (PCHIP).
//!
//! When to use it: OLR from a radiation code or observations, where no closed form fits over
//! the temperatures the runs visit; the model is defined only inside the table's range.
//!
//! Reference: Fritsch and Carlson (1980, SIAM J. Numer. Anal. 17) for the monotone
//! piecewise-cubic interpolation; the end slopes as in scipy's `PchipInterpolator`.

use crate::registry::{Key, Kind};

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

/// `longwave.kind = "table"`: its key (the CSV path, relative to the config file) and form.
pub const KIND: Kind<super::Longwave> = Kind {
    name: "table",
    keys: &[Key::text("longwave.table", "(none)").kinds(&["table"])],
    build: |r| {
        let (temps, olr) = r.table("longwave.table")?;
        Ok(super::Longwave::Table(OlrTable::new(temps, olr)))
    },
};

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

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
