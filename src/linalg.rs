//! Tridiagonal matrices with an optional rank-one part, and their direct solution.
//!
//! The Jacobian of the model is tridiagonal (diffusive transport, edge-band albedo) plus, for
//! relaxation transport `gamma (T_mean - T)`, the rank-one term `gamma 1 w^T`. Systems with it
//! are solved by the Thomas algorithm and the Sherman-Morrison formula, in O(n) with no
//! allocation after construction.
//!
//! Reference: Golub and Van Loan, Matrix Computations (4th ed.), sections 4.3 and 2.1.4.

/// `lower[i] = A[i][i-1]`, `diag[i] = A[i][i]`, `upper[i] = A[i][i+1]`, plus `u v^T`.
#[derive(Debug, Clone, PartialEq)]
pub struct Tridiag {
    /// Sub-diagonal (`lower[0]` unused).
    pub lower: Vec<f64>,
    /// Diagonal.
    pub diag: Vec<f64>,
    /// Super-diagonal (`upper[n-1]` unused).
    pub upper: Vec<f64>,
    /// Rank-one part `scale * ones * weights^T` when `Some(scale)`.
    pub rank_one: Option<f64>,
}

impl Tridiag {
    /// A zero matrix of size `n`.
    pub fn zeros(n: usize) -> Tridiag {
        Tridiag {
            lower: vec![0.0; n],
            diag: vec![0.0; n],
            upper: vec![0.0; n],
            rank_one: None,
        }
    }

    /// Size.
    pub fn len(&self) -> usize {
        self.diag.len()
    }

    /// True for a 0x0 matrix.
    pub fn is_empty(&self) -> bool {
        self.diag.is_empty()
    }

    /// `out = A x` with `weights` defining the rank-one part.
    pub fn mul(&self, weights: &[f64], x: &[f64], out: &mut [f64]) {
        let n = self.len();
        let r = self.rank_one.map(|s| s * dot(weights, x)).unwrap_or(0.0);
        for i in 0..n {
            let mut v = self.diag[i] * x[i] + r;
            if i > 0 {
                v += self.lower[i] * x[i - 1];
            }
            if i + 1 < n {
                v += self.upper[i] * x[i + 1];
            }
            out[i] = v;
        }
    }

    /// Dense copy (row-major), for eigenvalue solvers and tests.
    pub fn to_dense(&self, weights: &[f64]) -> Vec<f64> {
        let n = self.len();
        let mut a = vec![0.0; n * n];
        for i in 0..n {
            a[i * n + i] = self.diag[i];
            if i > 0 {
                a[i * n + i - 1] = self.lower[i];
            }
            if i + 1 < n {
                a[i * n + i + 1] = self.upper[i];
            }
            if let Some(s) = self.rank_one {
                for j in 0..n {
                    a[i * n + j] += s * weights[j];
                }
            }
        }
        a
    }
}

/// Dot product.
#[inline]
pub fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

/// An LU factorisation of a `Tridiag`, reusable for many right-hand sides.
///
/// Stored so that both sweeps of a solve are one multiply-add per row on the dependency chain
/// (no division): forward `y_i = b_i p_i - l_i y_{i-1}` with `p_i = 1/pivot_i` and
/// `l_i = a_i / pivot_i`, backward `x_i = y_i - c_i x_{i+1}`.
#[derive(Debug, Clone)]
pub struct TridiagLu {
    /// Modified super-diagonal of the Thomas algorithm, `upper_i / pivot_i`.
    c: Vec<f64>,
    /// Inverse pivots.
    inv_piv: Vec<f64>,
    /// Sub-diagonal over the pivot, `lower_i / pivot_i`.
    l: Vec<f64>,
    /// For the rank-one part: `z = T^-1 (scale * ones)` and `1 + w.z`.
    z: Vec<f64>,
    denom: f64,
    has_rank_one: bool,
    weights: Vec<f64>,
}

/// The factorisation met a zero pivot (a singular or badly conditioned matrix).
#[derive(Debug, Clone, Copy, PartialEq, thiserror::Error)]
#[error("singular tridiagonal system (pivot {pivot:e} at row {row})")]
pub struct SingularMatrix {
    /// Row of the failing pivot.
    pub row: usize,
    /// The pivot value.
    pub pivot: f64,
}

impl TridiagLu {
    /// Workspace for size `n`.
    pub fn new(n: usize, weights: &[f64]) -> TridiagLu {
        TridiagLu {
            c: vec![0.0; n],
            inv_piv: vec![0.0; n],
            l: vec![0.0; n],
            z: vec![0.0; n],
            denom: 1.0,
            has_rank_one: false,
            weights: weights.to_vec(),
        }
    }

    /// Factorise `m` in place of the previous factorisation (no allocation).
    pub fn factor(&mut self, m: &Tridiag) -> Result<(), SingularMatrix> {
        self.factor_from(m, 0)
    }

    /// Refactorise from row `start` on, keeping rows `0..start` of the previous factorisation:
    /// exact when `m` agrees with the previously factorised matrix in those rows (row `i` of
    /// the forward elimination depends only on rows `0..=i`). The rank-one part is redone.
    pub fn factor_from(&mut self, m: &Tridiag, start: usize) -> Result<(), SingularMatrix> {
        let n = m.len();
        let mut prev_c = if start > 0 { self.c[start - 1] } else { 0.0 };
        for i in start..n {
            let a = if i > 0 { m.lower[i] } else { 0.0 };
            let piv = m.diag[i] - a * prev_c;
            if piv.abs() < 1e-300 || !piv.is_finite() {
                return Err(SingularMatrix { row: i, pivot: piv });
            }
            let inv = 1.0 / piv;
            self.l[i] = a * inv;
            self.inv_piv[i] = inv;
            prev_c = if i + 1 < n { m.upper[i] * inv } else { 0.0 };
            self.c[i] = prev_c;
        }
        self.has_rank_one = false;
        if let Some(s) = m.rank_one {
            self.z.iter_mut().for_each(|v| *v = s);
            let mut z = std::mem::take(&mut self.z);
            self.solve_tridiag(&mut z);
            self.z = z;
            self.denom = 1.0 + dot(&self.weights, &self.z);
            if self.denom.abs() < 1e-300 {
                return Err(SingularMatrix {
                    row: n,
                    pivot: self.denom,
                });
            }
            self.has_rank_one = true;
        }
        Ok(())
    }

    #[inline]
    fn solve_tridiag(&self, b: &mut [f64]) {
        let n = b.len();
        let (c, p, l) = (&self.c[..n], &self.inv_piv[..n], &self.l[..n]);
        let mut prev = 0.0;
        for i in 0..n {
            let v = b[i] * p[i] - l[i] * prev;
            b[i] = v;
            prev = v;
        }
        for i in (0..n.saturating_sub(1)).rev() {
            let v = b[i] - c[i] * prev;
            b[i] = v;
            prev = v;
        }
    }

    /// Solve `A x = b` in place.
    #[inline]
    pub fn solve(&self, b: &mut [f64]) {
        self.solve_tridiag(b);
        if self.has_rank_one {
            let f = dot(&self.weights, b) / self.denom;
            for (bi, zi) in b.iter_mut().zip(&self.z) {
                *bi -= f * zi;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn solves_tridiagonal_plus_rank_one() {
        let n = 7;
        let w: Vec<f64> = (0..n).map(|i| (i + 1) as f64 / 28.0).collect();
        let mut m = Tridiag::zeros(n);
        for i in 0..n {
            m.diag[i] = 4.0 + i as f64;
            m.lower[i] = -1.0;
            m.upper[i] = -1.5;
        }
        for r1 in [None, Some(0.7)] {
            m.rank_one = r1;
            let x: Vec<f64> = (0..n).map(|i| (i as f64).sin()).collect();
            let mut b = vec![0.0; n];
            m.mul(&w, &x, &mut b);
            let mut lu = TridiagLu::new(n, &w);
            lu.factor(&m).unwrap();
            lu.solve(&mut b);
            for i in 0..n {
                assert_relative_eq!(b[i], x[i], epsilon = 1e-12);
            }
        }
    }
}
