//! Meridional heat transport: its convergence by band (W m-2) and Jacobian.
//!
//! - `Diffusive`: `d/dx[D(x) (1 - x^2) dT/dx]` in finite volume, flux through each interior face
//!   `-D_f (1 - x_f^2) (T_{i+1} - T_i) / (x_{i+1} - x_i)`, zero at the outer faces, with
//!   `D(x) = D0 (1 + d2 P2(x))` (North 1975, J. Atmos. Sci. 32).
//! - `Relaxation`: `gamma (T_mean - T)` (Budyko 1969, Tellus 21).
//!
//! Both conserve energy: the area-weighted sum of the convergence is zero to round-off.

use crate::grid::{p2, Grid};
use crate::linalg::Tridiag;

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
        let n = grid.len();
        let mut face_k = vec![0.0; n + 1];
        for (k, fk) in face_k.iter_mut().enumerate().take(n).skip(1) {
            let xf = grid.x_faces[k];
            let d = d0 * (1.0 + d2 * p2(xf));
            *fk = d * (1.0 - xf * xf) / (grid.x_centres[k] - grid.x_centres[k - 1]);
        }
        Transport::Diffusive {
            face_k,
            inv_dx: grid.dx.iter().map(|d| 1.0 / d).collect(),
        }
    }

    /// Transport convergence (W m-2) into `out`.
    #[inline]
    pub fn convergence(&self, grid: &Grid, temps: &[f64], out: &mut [f64]) {
        let n = temps.len();
        match self {
            Transport::Diffusive { face_k, inv_dx } => {
                let mut flux_lo = 0.0; // K_i (T_i - T_{i-1}) at the lower face
                for i in 0..n {
                    let flux_hi = if i + 1 < n {
                        face_k[i + 1] * (temps[i + 1] - temps[i])
                    } else {
                        0.0
                    };
                    out[i] = (flux_hi - flux_lo) * inv_dx[i];
                    flux_lo = flux_hi;
                }
            }
            Transport::Relaxation { rate } => {
                let mean = grid.mean(temps);
                for (o, t) in out.iter_mut().zip(temps) {
                    *o = rate * (mean - t);
                }
            }
        }
    }

    /// Add the Jacobian of the convergence (W m-2 K-1) to `jac`.
    pub fn add_jacobian(&self, jac: &mut Tridiag) {
        let n = jac.len();
        match self {
            Transport::Diffusive { face_k, inv_dx } => {
                for i in 0..n {
                    let lo = face_k[i] * inv_dx[i];
                    let hi = face_k[i + 1] * inv_dx[i];
                    jac.lower[i] += lo;
                    jac.upper[i] += hi;
                    jac.diag[i] -= lo + hi;
                }
            }
            Transport::Relaxation { rate } => {
                for d in jac.diag.iter_mut() {
                    *d -= rate;
                }
                jac.rank_one = Some(jac.rank_one.unwrap_or(0.0) + rate);
            }
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
