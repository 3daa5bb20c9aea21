//! Linear stability of an equilibrium: eigenvalues of `C^-1 dG/dT` in 1/year.
//!
//! The Jacobian is tridiagonal (plus rank one for relaxation transport). When every pair of
//! off-diagonal entries has a non-negative product, a diagonal similarity makes the matrix
//! symmetric (Wilkinson, The Algebraic Eigenvalue Problem, 1965, section 5.11), so all
//! eigenvalues are real: this holds for diffusion (positive conductances) and for the `step`
//! albedo's edge band too, because warming a neighbour moves the interpolated edge poleward and
//! lowers the edge band's albedo, adding a positive entry. Then the leading eigenvalue is found
//! by Sturm-sequence bisection in O(n) per step (no allocation beyond the work vectors), and the
//! full spectrum by a symmetric eigen-solve. Otherwise (relaxation transport, or an unusual
//! sign) a general dense eigen-solve (nalgebra's Schur form) is used and real parts reported.

use crate::linalg::Tridiag;
use crate::model::{Model, Workspace, YEAR_SECONDS};
use nalgebra::DMatrix;

/// How the spectrum was computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SpectrumMethod {
    /// Symmetrised tridiagonal (all eigenvalues real).
    SymmetricTridiagonal,
    /// General dense eigen-solve (real parts of possibly complex eigenvalues).
    GeneralDense,
}

impl SpectrumMethod {
    /// Short name for files.
    pub fn name(self) -> &'static str {
        match self {
            SpectrumMethod::SymmetricTridiagonal => "symmetrised tridiagonal",
            SpectrumMethod::GeneralDense => "general dense (Schur)",
        }
    }
}

/// The per-year Jacobian `yr C^-1 dG/dT` at a state.
pub fn scaled_jacobian(model: &Model, t_years: f64, temps: &[f64]) -> Tridiag {
    let n = model.len();
    let mut ws = Workspace::new(n);
    let mut jac = Tridiag::zeros(n);
    model.heating_jacobian(t_years, temps, &mut ws, &mut jac);
    // Row scaling by yr / C_i; the rank-one part scale * 1 w^T becomes scale * (yr/C) w^T, which is
    // still rank one but no longer of the form ones * w^T when C varies: handled as dense.
    for i in 0..n {
        let f = YEAR_SECONDS / model.heat_capacity[i];
        jac.diag[i] *= f;
        jac.lower[i] *= f;
        jac.upper[i] *= f;
    }
    jac
}

/// Symmetric tridiagonal form `(diag, off)` if the off-diagonal products are all >= 0.
fn symmetrise(j: &Tridiag) -> Option<(Vec<f64>, Vec<f64>)> {
    if j.rank_one.is_some() {
        return None;
    }
    let n = j.len();
    let mut off = vec![0.0; n.saturating_sub(1)];
    for (i, o) in off.iter_mut().enumerate() {
        let p = j.upper[i] * j.lower[i + 1];
        if p < 0.0 {
            return None;
        }
        *o = p.sqrt();
    }
    Some((j.diag.clone(), off))
}

/// Number of eigenvalues of the symmetric tridiagonal `(d, e)` below `x` (Sturm count).
fn sturm_count(d: &[f64], e: &[f64], x: f64) -> usize {
    let mut count = 0;
    let mut q = 1.0_f64;
    for i in 0..d.len() {
        let e2 = if i > 0 { e[i - 1] * e[i - 1] } else { 0.0 };
        q = d[i] - x - if i > 0 { e2 / q } else { 0.0 };
        if q == 0.0 {
            q = -1e-300;
        }
        if q < 0.0 {
            count += 1;
        }
    }
    count
}

/// Largest eigenvalue of a symmetric tridiagonal by bisection to round-off.
fn largest_symmetric(d: &[f64], e: &[f64]) -> f64 {
    let n = d.len();
    // Gershgorin bounds.
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for i in 0..n {
        let r = if i > 0 { e[i - 1].abs() } else { 0.0 } + if i + 1 < n { e[i].abs() } else { 0.0 };
        lo = lo.min(d[i] - r);
        hi = hi.max(d[i] + r);
    }
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if mid <= lo || mid >= hi {
            break;
        }
        if sturm_count(d, e, mid) < n {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

fn dense(model: &Model, t_years: f64, temps: &[f64]) -> DMatrix<f64> {
    let n = model.len();
    let mut ws = Workspace::new(n);
    let mut jac = Tridiag::zeros(n);
    model.heating_jacobian(t_years, temps, &mut ws, &mut jac);
    let a = jac.to_dense(&model.grid.weights);
    DMatrix::from_fn(n, n, |i, j| a[i * n + j] * YEAR_SECONDS / model.heat_capacity[i])
}

/// The leading (largest real part) eigenvalue in 1/year.
pub fn leading_eigenvalue(model: &Model, t_years: f64, temps: &[f64]) -> (f64, SpectrumMethod) {
    let j = scaled_jacobian(model, t_years, temps);
    if let Some((d, e)) = symmetrise(&j) {
        return (largest_symmetric(&d, &e), SpectrumMethod::SymmetricTridiagonal);
    }
    let m = dense(model, t_years, temps);
    let ev = m.complex_eigenvalues();
    let lead = ev.iter().map(|c| c.re).fold(f64::NEG_INFINITY, f64::max);
    (lead, SpectrumMethod::GeneralDense)
}

/// All eigenvalues (real parts), largest first, in 1/year.
pub fn spectrum(model: &Model, t_years: f64, temps: &[f64]) -> (Vec<f64>, SpectrumMethod) {
    let j = scaled_jacobian(model, t_years, temps);
    let n = model.len();
    let (mut ev, method) = if let Some((d, e)) = symmetrise(&j) {
        let m = DMatrix::from_fn(n, n, |r, c| {
            if r == c {
                d[r]
            } else if r + 1 == c {
                e[r]
            } else if c + 1 == r {
                e[c]
            } else {
                0.0
            }
        });
        (
            m.symmetric_eigenvalues().iter().copied().collect::<Vec<f64>>(),
            SpectrumMethod::SymmetricTridiagonal,
        )
    } else {
        let m = dense(model, t_years, temps);
        (
            m.complex_eigenvalues().iter().map(|c| c.re).collect(),
            SpectrumMethod::GeneralDense,
        )
    };
    ev.sort_by(|a, b| b.total_cmp(a));
    (ev, method)
}
