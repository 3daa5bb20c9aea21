//! Diffusive transport `d/dx[D(x) (1 - x^2) dT/dx]` with `D(x) = D0 (1 + d2 P2(x))`, in finite
//! volume: the flux through each interior face is `-D_f (1 - x_f^2) (T_{i+1} - T_i) / (x_{i+1} -
//! x_i)`, zero at the outer faces, and a band's convergence is the difference of its two face
//! fluxes over its width.
//!
//! When to use it: the default; the temperature profile is continuous in latitude, and the
//! `step` albedo's interpolated edge rule converges at second order in band width.
//!
//! Reference: North (1975, J. Atmos. Sci. 32, 2033-2043); exact discrete equations in
//! docs/discrete-model.md.

use super::TransportForm;
use crate::grid::{p2, Grid};
use crate::linalg::Tridiag;
use crate::registry::{Fast, Key, Kind, Range};

/// `D(x) = D0 (1 + d2 P2(x)) >= 0` for P2 in [-1/2, 1]; `Err` holds the `allowed: ...` text.
pub fn check_p2(d2: f64) -> Result<(), String> {
    if 1.0 + d2 < 0.0 || 1.0 - 0.5 * d2 < 0.0 {
        return Err("allowed: -1 to 2 (keeps D(x) >= 0)".into());
    }
    Ok(())
}

/// `transport.kind = "diffusive"`: its keys (the diffusivity a forcing channel and a fast
/// control) and form.
pub const KIND: Kind<TransportForm> = Kind {
    name: "diffusive",
    keys: &[
        Key::number(
            "transport.diffusivity",
            "W m-2 K-1",
            0.55,
            Range::Closed(0.0, 1e6),
        )
        .label("Diffusivity D (W m⁻² K⁻¹)")
        .kinds(&["diffusive"])
        .varies()
        .set(|t, v| {
            if let TransportForm::Diffusive { d0, .. } = t {
                *d0 = v;
            }
            Ok(())
        })
        .fast(Fast::Diffusivity),
        Key::number("transport.diffusivity_p2", "1", 0.0, Range::Any)
            .label("Diffusivity, P2 part d2")
            .kinds(&["diffusive"])
            .set(|t, v| {
                check_p2(v)?;
                if let TransportForm::Diffusive { d2, .. } = t {
                    *d2 = v;
                }
                Ok(())
            }),
    ],
    build: |r| {
        let d0 = r.num("transport.diffusivity")?;
        let d2 = r.num("transport.diffusivity_p2")?;
        check_p2(d2).map_err(|allowed| r.reject("transport.diffusivity_p2", d2, allowed))?;
        Ok(TransportForm::Diffusive { d0, d2 })
    },
};

/// Face conductances `D_k (1 - x_k^2) / (x_c[k] - x_c[k-1])` (W m-2 K-1), `n + 1` values, zero
/// at the outer faces, for `D(x) = d0 (1 + d2 P2(x))`.
pub fn face_conductances(grid: &Grid, d0: f64, d2: f64) -> Vec<f64> {
    let n = grid.len();
    let mut face_k = vec![0.0; n + 1];
    for (k, fk) in face_k.iter_mut().enumerate().take(n).skip(1) {
        let xf = grid.x_faces[k];
        let d = d0 * (1.0 + d2 * p2(xf));
        *fk = d * (1.0 - xf * xf) / (grid.x_centres[k] - grid.x_centres[k - 1]);
    }
    face_k
}

/// Heat flux toward the lower band through a face of conductance `k` between a lower band at
/// `t_lo` and an upper band at `t_hi` (K): `k (t_hi - t_lo)`, W m-2 K-1 times K.
#[inline(always)]
pub fn face_flux(k: f64, t_lo: f64, t_hi: f64) -> f64 {
    k * (t_hi - t_lo)
}

/// Convergence of a band (W m-2) from the [`face_flux`] at its lower and upper faces and its
/// inverse width.
#[inline(always)]
pub fn band_convergence(flux_lo: f64, flux_hi: f64, inv_dx: f64) -> f64 {
    (flux_hi - flux_lo) * inv_dx
}

/// Transport convergence (W m-2) of every band into `out`.
#[inline]
pub fn convergence(face_k: &[f64], inv_dx: &[f64], temps: &[f64], out: &mut [f64]) {
    let n = temps.len();
    let mut flux_lo = 0.0; // K_i (T_i - T_{i-1}) at the lower face
    for i in 0..n {
        let flux_hi = if i + 1 < n {
            face_flux(face_k[i + 1], temps[i], temps[i + 1])
        } else {
            0.0
        };
        out[i] = band_convergence(flux_lo, flux_hi, inv_dx[i]);
        flux_lo = flux_hi;
    }
}

/// Convergence (W m-2) of band `i` of `t` (all `n` bands), no flux through the outer faces.
#[inline(always)]
pub fn band_convergence_at(face_k: &[f64], inv_dx: &[f64], t: &[f64], i: usize) -> f64 {
    let n = t.len();
    let flux_hi = if i + 1 < n {
        face_flux(face_k[i + 1], t[i], t[i + 1])
    } else {
        0.0
    };
    let flux_lo = if i > 0 {
        face_flux(face_k[i], t[i - 1], t[i])
    } else {
        0.0
    };
    band_convergence(flux_lo, flux_hi, inv_dx[i])
}

/// The Jacobian entries of a band's convergence from the conductances of its lower and upper
/// faces and its inverse width: `(lo, hi)` by `T_{i-1}` and `T_{i+1}`; by `T_i` it is
/// `-(lo + hi)` (W m-2 K-1).
#[inline(always)]
pub fn band_jacobian(k_lo: f64, k_hi: f64, inv_dx: f64) -> (f64, f64) {
    (k_lo * inv_dx, k_hi * inv_dx)
}

/// Add the Jacobian of the convergence (W m-2 K-1) to `jac`.
pub fn add_jacobian(face_k: &[f64], inv_dx: &[f64], jac: &mut Tridiag) {
    for i in 0..jac.len() {
        let (lo, hi) = band_jacobian(face_k[i], face_k[i + 1], inv_dx[i]);
        jac.lower[i] += lo;
        jac.upper[i] += hi;
        jac.diag[i] -= lo + hi;
    }
}
