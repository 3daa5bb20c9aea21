//! Meridional heat transport: its convergence by band (W m-2) and Jacobian.
//!
//! - `Diffusive`: `d/dx[D(x) (1 - x^2) dT/dx]` in finite volume, flux through each interior face
//!   `-D_f (1 - x_f^2) (T_{i+1} - T_i) / (x_{i+1} - x_i)`, zero at the outer faces, with
//!   `D(x) = D0 (1 + d2 P2(x))` (North 1975, J. Atmos. Sci. 32).
//! - `Relaxation`: `gamma (T_mean - T)` (Budyko 1969, Tellus 21).
//!
//! Both conserve energy: the area-weighted sum of the convergence is zero to round-off.

use crate::grid::Grid;
use crate::linalg::Tridiag;

pub mod diffusive;
pub mod relaxation;

/// Every transport kind with its config keys and how it is built from them (the config
/// registry and validation read this list).
pub const KINDS: &[crate::registry::Kind<TransportForm>] = &[diffusive::KIND, relaxation::KIND];

/// The names of [`KINDS`], in order (the values `transport.kind` allows).
pub const NAMES: &[&str] = &["diffusive", "relaxation"];

/// The transport form and its coefficients, before it is laid on a grid (the validated
/// `[transport]` section).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum TransportForm {
    /// `D0 (1 + d2 P2(x))`, W m-2 K-1.
    Diffusive {
        /// D0, W m-2 K-1.
        d0: f64,
        /// d2.
        d2: f64,
    },
    /// `gamma (T_mean - T)`, W m-2 K-1.
    Relaxation {
        /// gamma, W m-2 K-1.
        rate: f64,
    },
}

impl TransportForm {
    /// The transport on `grid`.
    pub fn on(&self, grid: &Grid) -> Transport {
        match *self {
            TransportForm::Diffusive { d0, d2 } => Transport::diffusive(grid, d0, d2),
            TransportForm::Relaxation { rate } => Transport::Relaxation { rate },
        }
    }
}

/// The transport form, with its coefficients on a grid.
#[derive(Debug, Clone, PartialEq)]
pub enum Transport {
    /// Diffusion; `face_k[k]` is `D_k (1 - x_k^2) / (x_c[k] - x_c[k-1])` at face `k`
    /// (W m-2 K-1, zero at the outer faces), `inv_dx[i]` is `1 / dx_i`.
    Diffusive {
        /// Face conductances, `n + 1` values.
        face_k: Vec<f64>,
        /// Inverse band widths.
        inv_dx: Vec<f64>,
    },
    /// Relaxation toward the global mean at `rate` W m-2 K-1.
    Relaxation {
        /// Relaxation rate gamma, W m-2 K-1.
        rate: f64,
    },
}

impl Transport {
    /// Diffusive transport with `D(x) = d0 (1 + d2 P2(x))` (W m-2 K-1).
    pub fn diffusive(grid: &Grid, d0: f64, d2: f64) -> Transport {
        Transport::Diffusive {
            face_k: diffusive::face_conductances(grid, d0, d2),
            inv_dx: grid.dx.iter().map(|d| 1.0 / d).collect(),
        }
    }

    /// Whether the temperature stays continuous across the ice edge (diffusion), so the `step`
    /// albedo may interpolate the edge; otherwise it uses the edge-balance rule, whose
    /// constants `Model::balance` derives for relaxation only (a new kind that answers `false`
    /// needs its own there).
    pub fn continuous(&self) -> bool {
        match self {
            Transport::Diffusive { .. } => true,
            Transport::Relaxation { .. } => false,
        }
    }

    /// Transport convergence (W m-2) into `out`.
    #[inline]
    pub fn convergence(&self, grid: &Grid, temps: &[f64], out: &mut [f64]) {
        match self {
            Transport::Diffusive { face_k, inv_dx } => diffusive::convergence(face_k, inv_dx, temps, out),
            Transport::Relaxation { rate } => relaxation::convergence(grid, *rate, temps, out),
        }
    }

    /// Add the Jacobian of the convergence (W m-2 K-1) to `jac`.
    pub fn add_jacobian(&self, jac: &mut Tridiag) {
        match self {
            Transport::Diffusive { face_k, inv_dx } => diffusive::add_jacobian(face_k, inv_dx, jac),
            Transport::Relaxation { rate } => relaxation::add_jacobian(*rate, jac),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::grid::{Domain, Spacing};

    #[test]
    fn transport_conserves_energy_on_every_layout() {
        // DESIGN section 2: the area-weighted sum of the tendency is zero to round-off;
        // the sum telescopes, so it is bounded by a few ulps of the largest term.
        for d in [Domain::Hemisphere, Domain::Globe] {
            for s in [Spacing::EqualArea, Spacing::EqualAngle] {
                let g = Grid::new(d, s, 90);
                let t: Vec<f64> = g
                    .x_centres
                    .iter()
                    .map(|x| 280.0 + 30.0 * (3.0 * x).cos() + 5.0 * x)
                    .collect();
                for tr in [
                    Transport::diffusive(&g, 0.6, 0.0),
                    Transport::diffusive(&g, 0.6, 0.4),
                    Transport::Relaxation { rate: 3.8 },
                ] {
                    let mut out = vec![0.0; 90];
                    tr.convergence(&g, &t, &mut out);
                    let biggest = out
                        .iter()
                        .zip(&g.weights)
                        .map(|(o, w)| (o * w).abs())
                        .fold(0.0, f64::max);
                    let sum = g.mean(&out);
                    assert!(sum.abs() <= 1e-12 * biggest, "{d:?} {s:?} {tr:?}: {sum}");
                }
            }
        }
    }
}
