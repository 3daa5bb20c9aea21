//! Latitude bands: faces and centres in `x = sin(latitude)`, area weights and Legendre helpers.
//!
//! The grid is a finite-volume partition of `x` (DESIGN section 2). Everything here is pure
//! geometry; the physics modules take slices laid out band by band on this grid.

use serde::{Deserialize, Serialize};

/// Which part of the sphere the model covers.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Domain {
    /// `0 <= x <= 1`, symmetric about the equator (no flux through it).
    Hemisphere,
    /// `-1 <= x <= 1`.
    Globe,
}

/// How band faces are placed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Spacing {
    /// Faces equally spaced in `x` (equal area).
    EqualArea,
    /// Faces equally spaced in latitude.
    EqualAngle,
}

/// Legendre polynomial `P2(x) = (3x^2 - 1)/2`.
pub fn p2(x: f64) -> f64 {
    0.5 * (3.0 * x * x - 1.0)
}

/// Legendre polynomial `P4(x) = (35x^4 - 30x^2 + 3)/8`.
pub fn p4(x: f64) -> f64 {
    let x2 = x * x;
    (35.0 * x2 * x2 - 30.0 * x2 + 3.0) / 8.0
}

/// Mean of `P2` over `[a, b]`: `(a^2 + ab + b^2 - 1)/2`.
pub fn p2_band_mean(a: f64, b: f64) -> f64 {
    0.5 * (a * a + a * b + b * b - 1.0)
}

/// The latitude grid.
#[derive(Debug, Clone, PartialEq)]
pub struct Grid {
    /// Domain covered.
    pub domain: Domain,
    /// Face placement.
    pub spacing: Spacing,
    /// Face positions in `x`, `n + 1` values, increasing.
    pub x_faces: Vec<f64>,
    /// Band centres in `x`, `n` values.
    pub x_centres: Vec<f64>,
    /// Band widths in `x`.
    pub dx: Vec<f64>,
    /// Area weights (fraction of the domain's area), summing to 1.
    pub weights: Vec<f64>,
    /// Band-mean `P2(x)`.
    pub p2_mean: Vec<f64>,
}

impl Grid {
    /// Build a grid of `bands` bands (`bands >= 1`).
    pub fn new(domain: Domain, spacing: Spacing, bands: usize) -> Grid {
        assert!(bands >= 1, "a grid needs at least one band");
        let (lo, hi) = match domain {
            Domain::Hemisphere => (0.0, 1.0),
            Domain::Globe => (-1.0, 1.0),
        };
        let n = bands;
        let frac = |k: usize| k as f64 / n as f64;
        let (x_faces, x_centres): (Vec<f64>, Vec<f64>) = match spacing {
            Spacing::EqualArea => {
                let f: Vec<f64> = (0..=n).map(|k| lo + (hi - lo) * frac(k)).collect();
                let c = (0..n).map(|i| 0.5 * (f[i] + f[i + 1])).collect();
                (f, c)
            }
            Spacing::EqualAngle => {
                let (plo, phi) = (lo.asin(), hi.asin());
                let ang: Vec<f64> = (0..=n).map(|k| plo + (phi - plo) * frac(k)).collect();
                let mut f: Vec<f64> = ang.iter().map(|a| a.sin()).collect();
                // Pin the ends exactly so the outer faces sit at the poles/equator.
                f[0] = lo;
                f[n] = hi;
                let c = (0..n).map(|i| (0.5 * (ang[i] + ang[i + 1])).sin()).collect();
                (f, c)
            }
        };
        let dx: Vec<f64> = (0..n).map(|i| x_faces[i + 1] - x_faces[i]).collect();
        let total = hi - lo;
        let weights = dx.iter().map(|d| d / total).collect();
        let p2_mean = (0..n).map(|i| p2_band_mean(x_faces[i], x_faces[i + 1])).collect();
        Grid {
            domain,
            spacing,
            x_faces,
            x_centres,
            dx,
            weights,
            p2_mean,
        }
    }

    /// Number of bands.
    pub fn len(&self) -> usize {
        self.x_centres.len()
    }

    /// Always false: a grid has at least one band.
    pub fn is_empty(&self) -> bool {
        self.x_centres.is_empty()
    }

    /// Band-centre latitudes in degrees north.
    pub fn lat_centres_deg(&self) -> Vec<f64> {
        self.x_centres.iter().map(|x| x.asin().to_degrees()).collect()
    }

    /// Band-face latitudes in degrees north (`n + 1` values).
    pub fn lat_faces_deg(&self) -> Vec<f64> {
        self.x_faces
            .iter()
            .map(|x| x.clamp(-1.0, 1.0).asin().to_degrees())
            .collect()
    }

    /// Area-weighted mean of a field over the domain.
    pub fn mean(&self, field: &[f64]) -> f64 {
        self.weights.iter().zip(field).map(|(w, v)| w * v).sum()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn weights_sum_to_one_for_every_layout() {
        for d in [Domain::Hemisphere, Domain::Globe] {
            for s in [Spacing::EqualArea, Spacing::EqualAngle] {
                for n in [1, 2, 7, 90] {
                    let g = Grid::new(d, s, n);
                    let sum: f64 = g.weights.iter().sum();
                    assert_relative_eq!(sum, 1.0, epsilon = 1e-14);
                    assert!(g.x_centres.iter().zip(&g.x_faces).all(|(c, f)| c > f));
                }
            }
        }
    }

    #[test]
    fn p2_band_mean_matches_quadrature() {
        // Exact for a quadratic: Simpson's rule (common practice).
        let (a, b) = (0.2_f64, 0.7_f64);
        let simpson = (p2(a) + 4.0 * p2(0.5 * (a + b)) + p2(b)) / 6.0;
        assert_relative_eq!(p2_band_mean(a, b), simpson, epsilon = 1e-15);
    }
}
