//! Ordinary least squares of one series on another, accumulated one pair at a time (memory
//! flat in run length).

/// Running sums for the straight-line fit `y = intercept + slope x`, shifted by the first pair
/// so that large offsets (temperatures near 288 K) do not cost precision.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Ols {
    n: u64,
    x0: f64,
    y0: f64,
    sx: f64,
    sy: f64,
    sxx: f64,
    sxy: f64,
    syy: f64,
}

/// A fitted straight line.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Fit {
    /// Slope, units of y per unit of x.
    pub slope: f64,
    /// Value of the line at `x = x_first` (the first pair's x).
    pub intercept_at_first: f64,
    /// Coefficient of determination.
    pub r2: f64,
    /// Number of pairs.
    pub n: u64,
    /// Spread of x (largest minus smallest is not tracked; this is the standard deviation).
    pub x_sd: f64,
}

impl Ols {
    /// Add one pair (non-finite pairs are skipped).
    pub fn add(&mut self, x: f64, y: f64) {
        if !(x.is_finite() && y.is_finite()) {
            return;
        }
        if self.n == 0 {
            self.x0 = x;
            self.y0 = y;
        }
        let (dx, dy) = (x - self.x0, y - self.y0);
        self.n += 1;
        self.sx += dx;
        self.sy += dy;
        self.sxx += dx * dx;
        self.sxy += dx * dy;
        self.syy += dy * dy;
    }

    /// The least-squares line, if there are at least 3 pairs and x varies.
    pub fn fit(&self) -> Option<Fit> {
        if self.n < 3 {
            return None;
        }
        let n = self.n as f64;
        let vxx = self.sxx - self.sx * self.sx / n;
        let vxy = self.sxy - self.sx * self.sy / n;
        let vyy = self.syy - self.sy * self.sy / n;
        if vxx <= 1e-24 * n {
            return None;
        }
        let slope = vxy / vxx;
        let mean_dx = self.sx / n;
        let mean_dy = self.sy / n;
        let r2 = if vyy > 0.0 {
            (vxy * vxy / (vxx * vyy)).min(1.0)
        } else {
            1.0
        };
        Some(Fit {
            slope,
            intercept_at_first: self.y0 + mean_dy - slope * mean_dx,
            r2,
            n: self.n,
            x_sd: (vxx / n).sqrt(),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn recovers_an_exact_line_and_a_noisy_slope() {
        // By hand: y = 3 - 2 (x - 288) exactly.
        let mut o = Ols::default();
        for k in 0..10 {
            let x = 288.0 + 0.1 * k as f64;
            o.add(x, 3.0 - 2.0 * (x - 288.0));
        }
        let f = o.fit().unwrap();
        assert!((f.slope + 2.0).abs() < 1e-12 && (f.intercept_at_first - 3.0).abs() < 1e-12);
        assert!((f.r2 - 1.0).abs() < 1e-12);
        // Symmetric +-1 noise on alternate points leaves the slope of x = 0..3 data known:
        // points (0,1),(1,-1),(2,1),(3,-1): slope = -0.4 (by hand).
        let mut o = Ols::default();
        for (x, y) in [(0.0, 1.0), (1.0, -1.0), (2.0, 1.0), (3.0, -1.0)] {
            o.add(x, y);
        }
        assert!((o.fit().unwrap().slope + 0.4).abs() < 1e-12);
        let mut flat = Ols::default();
        for _ in 0..5 {
            flat.add(1.0, 2.0);
        }
        assert!(flat.fit().is_none());
    }
}
