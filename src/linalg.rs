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

/// Call `f(i)` for every `i < n` with `flag(i)`, in increasing order. Blocks of eight are
/// tested branch-free (the compiler vectorises the test) and only a block holding a flag is
/// searched, so the common case, no flag at all, is one pass without branches.
#[inline(always)]
pub fn for_each_flagged(n: usize, flag: impl Fn(usize) -> bool, mut f: impl FnMut(usize)) {
    let mut k = 0;
    while k + 8 <= n {
        let mut any = false;
        for j in k..k + 8 {
            any |= flag(j);
        }
        if any {
            for j in k..k + 8 {
                if flag(j) {
                    f(j);
                }
            }
        }
        k += 8;
    }
    for j in k..n {
        if flag(j) {
            f(j);
        }
    }
}

/// A twisted ("burn at both ends") LU factorisation of a `Tridiag`, reusable for many
/// right-hand sides.
///
/// Rows `0..=mid` are eliminated downward from the first row and rows `mid+1..n` upward from the
/// last, meeting at `mid = (n-1)/2`: each sweep of a solve is two independent dependency chains
/// of half the length, which a CPU overlaps. Each row stores `1/pivot` and its two couplings
/// over the pivot, so every chain link is one fused multiply-add and no division:
///
/// ```text
/// elimination   y_i = b_i p_i - e_i y_prev(i)      prev(i) = i-1 above mid, i+1 below
/// meeting       x_mid = (y_mid - g_mid y_mid+1) / (1 - g_mid g_mid+1),  x_mid+1 = y_mid+1 - g_mid+1 x_mid
/// back-substitution   x_i = y_i - g_i x_next(i)    next(i) = i+1 above mid, i-1 below
/// ```
///
/// `f64::mul_add` is exactly rounded on every CPU (fused in hardware where the CPU has FMA,
/// see [`crate::cpu`]), so a solve gives the same bits whichever path runs.
#[derive(Debug, Clone)]
pub struct TridiagLu {
    /// Coupling to the row eliminated before this one, over the pivot (`e_i`).
    elim: Vec<f64>,
    /// Inverse pivots (`p_i`).
    inv_piv: Vec<f64>,
    /// Coupling to the row substituted before this one, over the pivot (`g_i`).
    back: Vec<f64>,
    /// `1 / (1 - g_mid g_mid+1)`, the meeting rows' 2x2 system.
    inv_meet: f64,
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

#[inline(always)]
fn pivot_ok(piv: f64, row: usize) -> Result<f64, SingularMatrix> {
    if piv.abs() < 1e-300 || !piv.is_finite() {
        Err(SingularMatrix { row, pivot: piv })
    } else {
        Ok(1.0 / piv)
    }
}

/// The rows of a matrix being factorised.
struct Rows<'a> {
    a: &'a [f64],
    b: &'a [f64],
    c: &'a [f64],
    n: usize,
}

impl Rows<'_> {
    /// Eliminate row `i` downward, given `g` of row `i - 1`; returns `g` of row `i`.
    #[inline(always)]
    fn down(
        &self,
        i: usize,
        g_prev: f64,
        elim: &mut [f64],
        inv_piv: &mut [f64],
        back: &mut [f64],
    ) -> Result<f64, SingularMatrix> {
        let ai = if i > 0 { self.a[i] } else { 0.0 };
        let p = pivot_ok(self.b[i] - ai * g_prev, i)?;
        elim[i] = ai * p;
        inv_piv[i] = p;
        let g = if i + 1 < self.n { self.c[i] * p } else { 0.0 };
        back[i] = g;
        Ok(g)
    }

    /// Eliminate row `i` upward, given `g` of row `i + 1`; returns `g` of row `i`.
    #[inline(always)]
    fn up(
        &self,
        i: usize,
        g_prev: f64,
        elim: &mut [f64],
        inv_piv: &mut [f64],
        back: &mut [f64],
    ) -> Result<f64, SingularMatrix> {
        let ci = if i + 1 < self.n { self.c[i] } else { 0.0 };
        let p = pivot_ok(self.b[i] - ci * g_prev, i)?;
        elim[i] = ci * p;
        inv_piv[i] = p;
        let g = self.a[i] * p;
        back[i] = g;
        Ok(g)
    }
}

impl TridiagLu {
    /// Workspace for size `n`.
    pub fn new(n: usize, weights: &[f64]) -> TridiagLu {
        TridiagLu {
            elim: vec![0.0; n],
            inv_piv: vec![0.0; n],
            back: vec![0.0; n],
            inv_meet: 1.0,
            z: vec![0.0; n],
            denom: 1.0,
            has_rank_one: false,
            weights: weights.to_vec(),
        }
    }

    /// The meeting row: rows `0..=mid` are eliminated downward, the rest upward.
    #[inline]
    pub fn mid(n: usize) -> usize {
        n.saturating_sub(1) / 2
    }

    /// Factorise `m` in place of the previous factorisation (no allocation).
    pub fn factor(&mut self, m: &Tridiag) -> Result<(), SingularMatrix> {
        self.factor_rows(m, 0, m.len())
    }

    /// Refactorise after rows `lo..hi` of the matrix changed, keeping the rest of the previous
    /// factorisation: exact when `m` agrees with the previously factorised matrix outside
    /// those rows (the downward elimination of row `i` depends only on rows `0..=i`, the upward
    /// one only on rows `i..n`). `lo >= hi` redoes only the meeting and the rank-one part.
    #[inline]
    pub fn factor_rows(&mut self, m: &Tridiag, lo: usize, hi: usize) -> Result<(), SingularMatrix> {
        let n = m.len();
        if n == 0 {
            return Ok(());
        }
        let mid = Self::mid(n);
        let (a, b, c) = (&m.lower[..n], &m.diag[..n], &m.upper[..n]);
        let (elim, inv_piv, back) = (&mut self.elim[..n], &mut self.inv_piv[..n], &mut self.back[..n]);
        // Downward over rows lo..=mid and upward over rows hi-1 down to mid+1, the two
        // chains (each with a division per row) interleaved where both have rows left.
        let down = if lo <= mid && lo < hi { mid + 1 - lo } else { 0 };
        let top = hi.min(n).saturating_sub(1);
        let up = if hi > mid + 1 && lo < hi { top - mid } else { 0 };
        let mut g_dn = if lo > 0 && down > 0 { back[lo - 1] } else { 0.0 };
        let mut g_up = if top + 1 < n && up > 0 { back[top + 1] } else { 0.0 };
        let rows = Rows { a, b, c, n };
        for k in 0..down.min(up) {
            g_dn = rows.down(lo + k, g_dn, elim, inv_piv, back)?;
            g_up = rows.up(top - k, g_up, elim, inv_piv, back)?;
        }
        for k in down.min(up)..down {
            g_dn = rows.down(lo + k, g_dn, elim, inv_piv, back)?;
        }
        for k in down.min(up)..up {
            g_up = rows.up(top - k, g_up, elim, inv_piv, back)?;
        }
        crate::tally::add(crate::tally::Kernel::FactorRow, down + up);
        self.inv_meet = if mid + 1 < n {
            let det = 1.0 - back[mid] * back[mid + 1];
            pivot_ok(det, mid + 1)?
        } else {
            1.0
        };
        self.has_rank_one = false;
        if let Some(s) = m.rank_one {
            self.z.iter_mut().for_each(|v| *v = s);
            let mut z = std::mem::take(&mut self.z);
            crate::tally::add(crate::tally::Kernel::SolveRow, n);
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

    /// The tridiagonal part of a solve: two interleaved chains per sweep.
    #[inline(always)]
    fn solve_tridiag(&self, x: &mut [f64]) {
        let n = x.len();
        if n == 0 {
            return;
        }
        let mid = Self::mid(n);
        let (e, p, g) = (&self.elim[..n], &self.inv_piv[..n], &self.back[..n]);
        // Elimination: row k from the top with row n-1-k from the bottom.
        let lower_rows = n - 1 - mid; // rows mid+1..n, never more than the upper ones
        let (mut up, mut dn) = (0.0_f64, 0.0_f64);
        for k in 0..lower_rows {
            let (i, j) = (k, n - 1 - k);
            up = (-e[i]).mul_add(up, x[i] * p[i]);
            dn = (-e[j]).mul_add(dn, x[j] * p[j]);
            x[i] = up;
            x[j] = dn;
        }
        if lower_rows < mid + 1 {
            // Odd n: the upper half has one row more.
            up = (-e[mid]).mul_add(up, x[mid] * p[mid]);
            x[mid] = up;
        }
        // Meeting.
        if mid + 1 < n {
            let xm = (-g[mid]).mul_add(x[mid + 1], x[mid]) * self.inv_meet;
            x[mid] = xm;
            x[mid + 1] = (-g[mid + 1]).mul_add(xm, x[mid + 1]);
        }
        // Back-substitution outward from the meeting rows.
        let (mut up, mut dn) = (x[mid], if mid + 1 < n { x[mid + 1] } else { 0.0 });
        let upper_rest = mid; // rows mid-1 down to 0
        let lower_rest = n - 1 - mid - usize::from(mid + 1 < n); // rows mid+2..n
        for k in 0..lower_rest {
            let (i, j) = (mid - 1 - k, mid + 2 + k);
            up = (-g[i]).mul_add(up, x[i]);
            dn = (-g[j]).mul_add(dn, x[j]);
            x[i] = up;
            x[j] = dn;
        }
        for i in (0..upper_rest - lower_rest).rev() {
            up = (-g[i]).mul_add(up, x[i]);
            x[i] = up;
        }
    }

    /// Solve `A x = b` in place.
    #[inline(always)]
    pub fn solve(&self, b: &mut [f64]) {
        crate::tally::add(crate::tally::Kernel::SolveRow, b.len());
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

    /// A test matrix of size `n`: diagonally dominant, rows differing.
    fn matrix(n: usize, shift: f64) -> Tridiag {
        let mut m = Tridiag::zeros(n);
        for i in 0..n {
            m.diag[i] = 4.0 + (i as f64 * 0.7 + shift).sin();
            m.lower[i] = if i > 0 { -1.0 - 0.1 * (i as f64).cos() } else { 0.0 };
            m.upper[i] = if i + 1 < n {
                -1.5 + 0.2 * (i as f64 * 1.3).sin()
            } else {
                0.0
            };
        }
        m
    }

    #[test]
    fn twisted_solve_inverts_every_size() {
        // Sizes 1..40 cover even and odd halves, the meeting rows and the one-row edge cases.
        // Residual tolerance: a few ulps times the row norm (about 7) of a well-conditioned
        // (diagonally dominant) system.
        for n in 1..40 {
            let m = matrix(n, 0.0);
            let w = vec![1.0 / n as f64; n];
            let x: Vec<f64> = (0..n).map(|i| 1.0 + (i as f64 * 0.37).cos()).collect();
            let mut b = vec![0.0; n];
            m.mul(&w, &x, &mut b);
            let mut lu = TridiagLu::new(n, &w);
            lu.factor(&m).unwrap();
            lu.solve(&mut b);
            for i in 0..n {
                assert!((b[i] - x[i]).abs() < 1e-14, "n={n} row {i}: {} vs {}", b[i], x[i]);
            }
        }
    }

    #[test]
    fn partial_refactorisation_equals_a_full_one() {
        // Changing rows lo..hi and refactorising only those must give the same bits as a
        // factorisation from scratch (the kept rows are computed by the same operations).
        for n in [1usize, 2, 3, 8, 9, 45, 90] {
            let w = vec![1.0 / n as f64; n];
            for lo in 0..n {
                for hi in lo + 1..=n.min(lo + 4) {
                    let mut m = matrix(n, 0.0);
                    let mut lu = TridiagLu::new(n, &w);
                    lu.factor(&m).unwrap();
                    for i in lo..hi {
                        m.diag[i] += 0.25;
                        m.lower[i] *= 1.1;
                        m.upper[i] *= 0.9;
                    }
                    lu.factor_rows(&m, lo, hi).unwrap();
                    let mut full = TridiagLu::new(n, &w);
                    full.factor(&m).unwrap();
                    let mut b1: Vec<f64> = (0..n).map(|i| (i as f64).sin() + 2.0).collect();
                    let mut b2 = b1.clone();
                    lu.solve(&mut b1);
                    full.solve(&mut b2);
                    assert_eq!(b1, b2, "n={n} rows {lo}..{hi}");
                }
            }
        }
    }

    #[test]
    fn flagged_indices_come_in_order_across_block_edges() {
        for n in [0usize, 1, 7, 8, 9, 16, 23] {
            let flag = |i: usize| i % 7 == 0 || i == n.saturating_sub(1) || i == 8;
            let mut seen = Vec::new();
            for_each_flagged(n, flag, |i| seen.push(i));
            let want: Vec<usize> = (0..n).filter(|&i| flag(i)).collect();
            assert_eq!(seen, want, "n={n}");
        }
    }

    #[test]
    fn singular_matrix_is_reported() {
        let mut m = matrix(6, 0.0);
        m.diag[0] = 0.0;
        let mut lu = TridiagLu::new(6, &[1.0 / 6.0; 6]);
        assert_eq!(lu.factor(&m).unwrap_err().row, 0);
        // Rows 0 and 1 equal to each other's mirror: the 2x2 meeting system of a 2x2 matrix
        // [[1, 1], [1, 1]] is singular.
        let mut m = Tridiag::zeros(2);
        m.diag = vec![1.0, 1.0];
        m.lower = vec![0.0, 1.0];
        m.upper = vec![1.0, 0.0];
        let mut lu = TridiagLu::new(2, &[0.5, 0.5]);
        assert!(lu.factor(&m).is_err());
    }
}
