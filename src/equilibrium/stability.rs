//! Linear stability of an equilibrium: eigenvalues of `yr C^-1 dG/dT` in 1/year.
//!
//! The Jacobian is tridiagonal (plus rank one for relaxation transport). When every pair of
//! off-diagonal entries has a non-negative product, a diagonal similarity makes the matrix
//! symmetric (Wilkinson, The Algebraic Eigenvalue Problem, 1965, section 5.11), so all
//! eigenvalues are real. This holds for diffusion (positive conductances) and for the `step`
//! albedo's interior edge band too: warming a neighbour moves the interpolated edge poleward and
//! lowers the edge band's albedo, adding a positive entry. It can fail only where an outermost
//! band holds the edge (its outer half band extends the line through the two nearest centres,
//! so warming the inner neighbour cools the extrapolated end) and with relaxation transport.
//!
//! Symmetric case: the leading eigenvalue is isolated by Sturm-sequence bisection and polished
//! by Newton's method on the characteristic polynomial from above (monotone for a polynomial
//! with real zeros), in O(n) per step without allocation; the full spectrum comes from a dense
//! symmetric eigen-solve. Otherwise a general dense eigen-solve (nalgebra's real Schur form)
//! gives complex eigenvalues, reported by real and imaginary part.
//!
//! Reference: Golub and Van Loan, Matrix Computations (4th ed.), sections 8.4.1 (Sturm
//! sequences) and 7.5 (the QR algorithm).

use crate::linalg::{dot, Tridiag};
use crate::model::{Model, Workspace, YEAR_SECONDS};
use nalgebra::DMatrix;

/// How the spectrum was computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SpectrumMethod {
    /// Symmetrised tridiagonal (all eigenvalues real).
    SymmetricTridiagonal,
    /// Symmetrisable except for the coupling of one outermost band: the leading eigenvalue is
    /// the largest zero of the secular function of the symmetric part, proven real.
    SymmetricWithEdge,
    /// Tridiagonal plus rank one (relaxation transport): zeros of the secular function of the
    /// symmetrisable tridiagonal part.
    SecularRankOne,
    /// General dense eigen-solve (possibly complex eigenvalues).
    GeneralDense,
}

impl SpectrumMethod {
    /// Short name for files and messages.
    pub fn name(self) -> &'static str {
        match self {
            SpectrumMethod::SymmetricTridiagonal => "symmetric",
            SpectrumMethod::SymmetricWithEdge => "symmetric with edge coupling",
            SpectrumMethod::SecularRankOne => "tridiagonal plus rank one",
            SpectrumMethod::GeneralDense => "general",
        }
    }

    /// One-line description.
    pub fn describe(self) -> &'static str {
        match self {
            SpectrumMethod::SymmetricTridiagonal => {
                "tridiagonal Jacobian symmetrised by a diagonal similarity (all eigenvalues real): \
                 Sturm bisection and Newton for the leading one, dense symmetric solve for the rest"
            }
            SpectrumMethod::SymmetricWithEdge => {
                "tridiagonal Jacobian symmetrisable except for one outermost band's coupling: \
                 leading eigenvalue from the secular equation of the symmetric part (shown real)"
            }
            SpectrumMethod::SecularRankOne => {
                "relaxation transport makes the Jacobian tridiagonal plus rank one: eigenvalues as the \
                 zeros of 1 + w^T (T - x)^-1 u between and above the eigenvalues of the symmetrisable \
                 tridiagonal part T (real, interlacing)"
            }
            SpectrumMethod::GeneralDense => {
                "Jacobian not symmetrisable (outermost edge band or relaxation transport): \
                 general dense eigen-solve (real Schur form)"
            }
        }
    }
}

/// Reusable buffers for the leading eigenvalue (no allocation on the symmetric path).
#[derive(Debug, Clone)]
pub struct Stability {
    jac: Tridiag,
    ws: Workspace,
    d: Vec<f64>,
    e2: Vec<f64>,
    scale: Vec<f64>,
    weights: Vec<f64>,
    /// The last symmetric result, the guess for the next call.
    last: f64,
}

impl Stability {
    /// Buffers for `model`'s size.
    pub fn new(model: &Model) -> Stability {
        let n = model.len();
        Stability {
            jac: Tridiag::zeros(n),
            ws: Workspace::new(n),
            d: vec![0.0; n],
            e2: vec![0.0; n.saturating_sub(1)],
            scale: model.heat_capacity.iter().map(|c| YEAR_SECONDS / c).collect(),
            weights: model.grid.weights.clone(),
            last: f64::NAN,
        }
    }

    /// Leading eigenvalue (1/year) at an equilibrium `temps` of `model`.
    pub fn leading(&mut self, model: &Model, t_years: f64, temps: &[f64]) -> (f64, SpectrumMethod) {
        let mut jac = std::mem::replace(&mut self.jac, Tridiag::zeros(0));
        model.heating_jacobian(t_years, temps, &mut self.ws, &mut jac);
        let r = self.leading_from_jacobian(model, &jac);
        self.jac = jac;
        r
    }

    /// Leading eigenvalue (1/year) from the heating Jacobian `jac` (W m-2 K-1) already
    /// evaluated at the state.
    pub fn leading_from_jacobian(&mut self, model: &Model, jac: &Tridiag) -> (f64, SpectrumMethod) {
        if self.symmetrise(jac) {
            self.last = largest_symmetric_near(&self.d, &self.e2, self.last);
            (self.last, SpectrumMethod::SymmetricTridiagonal)
        } else if let Some(lead) = self.edge_coupled(jac) {
            (lead, SpectrumMethod::SymmetricWithEdge)
        } else if let Some(lead) = RankOne::new(self, jac).and_then(|mut r| r.leading()) {
            (lead, SpectrumMethod::SecularRankOne)
        } else {
            let lead = general_eigenvalues(dense(model, jac))
                .map(|ev| ev.iter().map(|c| c.0).fold(f64::NEG_INFINITY, f64::max))
                .unwrap_or(f64::NAN);
            (lead, SpectrumMethod::GeneralDense)
        }
    }

    /// Diagonal and squared off-diagonal of the symmetrised scaled Jacobian; false when an
    /// off-diagonal product is negative or there is a rank-one part.
    fn symmetrise(&mut self, j: &Tridiag) -> bool {
        if j.rank_one.is_some() {
            return false;
        }
        let n = j.len();
        for i in 0..n {
            self.d[i] = j.diag[i] * self.scale[i];
        }
        for i in 0..n.saturating_sub(1) {
            let p = j.upper[i] * self.scale[i] * j.lower[i + 1] * self.scale[i + 1];
            if p < 0.0 {
                return false;
            }
            self.e2[i] = p;
        }
        true
    }
}

impl Stability {
    /// The leading eigenvalue when the only negative off-diagonal product couples an outermost
    /// band, and the secular equation shows it real; `None` otherwise.
    ///
    /// With the negative product `c` between the last two bands, the eigenvalues are the zeros
    /// of `f(x) = d_n - x - c r(x)` with `r = D_{n-2} / D_{n-1} = sum_k w_k / (mu_k - x)`,
    /// `w_k >= 0`, the `mu_k` the (real) eigenvalues of the symmetric leading block. Between
    /// consecutive poles `f` runs from -inf to +inf (n - 2 real zeros); above the largest pole it
    /// is concave and tends to -inf at both ends. If its maximum there is positive it has two
    /// more zeros, so all n eigenvalues are real and the larger of those two leads.
    fn edge_coupled(&mut self, j: &Tridiag) -> Option<f64> {
        if j.rank_one.is_some() || j.len() < 2 {
            return None;
        }
        let n = j.len();
        let prod = |i: usize| j.upper[i] * self.scale[i] * j.lower[i + 1] * self.scale[i + 1];
        let negative: Vec<usize> = (0..n - 1).filter(|&i| prod(i) < 0.0).collect();
        if negative.len() != 1 || (negative[0] != 0 && negative[0] != n - 2) {
            return None;
        }
        // Order the bands so that the negative coupling is the last one.
        let rev = negative[0] == 0 && n > 2;
        for k in 0..n {
            let i = if rev { n - 1 - k } else { k };
            self.d[k] = j.diag[i] * self.scale[i];
        }
        for k in 0..n - 1 {
            let i = if rev { n - 2 - k } else { k };
            self.e2[k] = prod(i);
        }
        let (d, c) = (&self.d, &self.e2);
        let mu = if n > 2 {
            largest_symmetric(&d[..n - 1], &c[..n - 2])
        } else {
            d[0]
        };
        // f and f' at x > mu by the pivot recurrence.
        let f = |x: f64| -> (f64, f64) {
            let (mut q, mut dq) = (d[0] - x, -1.0);
            for i in 1..n {
                let inv = 1.0 / q;
                let r = c[i - 1] * inv;
                let nq = d[i] - x - r;
                dq = -1.0 + r * dq * inv;
                q = nq;
            }
            (q, dq)
        };
        // Gershgorin upper bound (with |c| for the off-diagonals).
        let mut hi = f64::NEG_INFINITY;
        for i in 0..n {
            let r = if i > 0 { c[i - 1].abs().sqrt() } else { 0.0 }
                + if i + 1 < n { c[i].abs().sqrt() } else { 0.0 };
            hi = hi.max(d[i] + r);
        }
        let span = (hi - mu).abs().max(1e-300);
        hi += 1e-9 * span + 1e-300;
        // Maximum of the concave f on (mu, hi]: bisection on the sign of f'.
        let (mut a, mut b) = (mu + 1e-12 * span.max(mu.abs()), hi);
        if f(b).1 > 0.0 {
            return None;
        }
        for _ in 0..200 {
            let m = 0.5 * (a + b);
            if m <= a || m >= b {
                break;
            }
            if f(m).1 > 0.0 {
                a = m;
            } else {
                b = m;
            }
        }
        let top = 0.5 * (a + b);
        // (A NaN fails every comparison and so returns here too.)
        if f(top).0.is_nan() || f(top).0 <= 0.0 {
            return None;
        }
        // Larger zero: Newton from hi, monotone for a concave decreasing f.
        let mut x = hi;
        for _ in 0..100 {
            let (fx, dfx) = f(x);
            if fx.is_nan() || dfx.is_nan() || fx >= 0.0 || dfx >= 0.0 {
                break;
            }
            let next = x - fx / dfx;
            if next.is_nan() || next >= x || next <= top {
                break;
            }
            let done = x - next <= 4.0 * f64::EPSILON * x.abs();
            x = next;
            if done {
                break;
            }
        }
        Some(x)
    }
}

/// Number of eigenvalues below `x` of the symmetric tridiagonal with diagonal `d` and squared
/// off-diagonal `e2` (Sturm count).
fn sturm_count(d: &[f64], e2: &[f64], x: f64) -> usize {
    crate::tally::add(crate::tally::Kernel::SturmRow, d.len());
    let mut count = 0;
    let mut q = 1.0_f64;
    for i in 0..d.len() {
        q = d[i] - x - if i > 0 { e2[i - 1] / q } else { 0.0 };
        if q == 0.0 {
            q = -f64::MIN_POSITIVE;
        }
        if q < 0.0 {
            count += 1;
        }
    }
    count
}

/// `det(A - x I) / (d/dx det(A - x I))` by the pivot recurrence, or `None` when a pivot
/// vanishes.
fn newton_ratio(d: &[f64], e2: &[f64], x: f64) -> Option<f64> {
    crate::tally::add(crate::tally::Kernel::RatioRow, d.len());
    // q_i = d_i - x - e2_{i-1} / q_{i-1};  q_i' = -1 + e2_{i-1} q_{i-1}' / q_{i-1}^2;
    // (log det)' = sum q_i' / q_i.
    let (mut q, mut dq) = (1.0_f64, 0.0_f64);
    let mut sum = 0.0;
    for i in 0..d.len() {
        let (nq, ndq) = if i > 0 {
            let inv = 1.0 / q;
            let r = e2[i - 1] * inv;
            (d[i] - x - r, -1.0 + r * dq * inv)
        } else {
            (d[0] - x, -1.0)
        };
        if nq == 0.0 || !nq.is_finite() {
            return None;
        }
        q = nq;
        dq = ndq;
        sum += dq / q;
    }
    Some(1.0 / sum)
}

/// Largest eigenvalue of a symmetric tridiagonal: bisection until it is isolated, then Newton
/// from above (monotone for a real-rooted polynomial), to round-off.
fn largest_symmetric(d: &[f64], e2: &[f64]) -> f64 {
    largest_symmetric_near(d, e2, f64::NAN)
}

/// [`largest_symmetric`] starting from a guess: when a window around `hint` (e.g. the value at
/// a neighbouring point of a branch) isolates the largest eigenvalue, the bisection is skipped.
fn largest_symmetric_near(d: &[f64], e2: &[f64], hint: f64) -> f64 {
    let n = d.len();
    if hint.is_finite() && n > 0 {
        let delta = 0.1 * hint.abs() + 1e-3;
        let (lo, hi) = (hint - delta, hint + delta);
        if sturm_count(d, e2, hi) == n && sturm_count(d, e2, lo) == n - 1 {
            return newton_from_above(d, e2, lo, hi);
        }
    }
    // Gershgorin bounds.
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for i in 0..n {
        let r = if i > 0 { e2[i - 1].sqrt() } else { 0.0 } + if i + 1 < n { e2[i].sqrt() } else { 0.0 };
        lo = lo.min(d[i] - r);
        hi = hi.max(d[i] + r);
    }
    let width = hi - lo;
    hi += 1e-12 * width.max(1.0);
    lo -= 1e-12 * width.max(1.0);
    // Isolate: exactly one eigenvalue in (lo, hi], none above hi.
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if mid <= lo || mid >= hi {
            return 0.5 * (lo + hi);
        }
        let c = sturm_count(d, e2, mid);
        if c == n {
            hi = mid;
        } else {
            lo = mid;
            if c == n - 1 && hi - lo < 1e-3 * (1.0 + hi.abs()) {
                break;
            }
        }
    }
    newton_from_above(d, e2, lo, hi)
}

/// Newton on the characteristic polynomial from `hi`, above the largest eigenvalue and with
/// no other eigenvalue above `lo`: decreases monotonically to the largest zero.
fn newton_from_above(d: &[f64], e2: &[f64], lo: f64, hi: f64) -> f64 {
    let mut x = hi;
    for _ in 0..60 {
        let Some(step) = newton_ratio(d, e2, x) else { break };
        let next = x - step;
        if next.is_nan() || next >= x || next <= lo {
            break;
        }
        let done = x - next <= 4.0 * f64::EPSILON * x.abs().max(1e-300);
        x = next;
        if done {
            break;
        }
    }
    x
}

/// The scaled Jacobian `T + u w^T` of relaxation transport: `T` tridiagonal with non-negative
/// off-diagonal products (eigenvalues `tau`, real), `u = scale * gamma * 1`, `w` the area
/// weights. Its eigenvalues are the zeros of `det(T - x) (1 + w^T (T - x)^-1 u)`; when the
/// residues of the secular function are positive (as for a diagonal `T` with `u_i w_i > 0`)
/// there is one zero in each gap between distinct `tau` and one above the largest, and each
/// `tau` of multiplicity m stays an eigenvalue m - 1 times (Golub 1973, SIAM Rev. 15, 318-334).
/// The sign pattern of the secular function at the gaps is checked; `None` when it does not
/// hold.
struct RankOne {
    t: Tridiag,
    u: Vec<f64>,
    w: Vec<f64>,
    d: Vec<f64>,
    e2: Vec<f64>,
    /// Whether `T` is diagonal (every off-diagonal zero): then the secular function is a sum.
    diagonal: bool,
    /// Thomas-algorithm scratch (no allocation per evaluation).
    c: Vec<f64>,
    z: Vec<f64>,
}

impl RankOne {
    fn new(st: &Stability, jac: &Tridiag) -> Option<RankOne> {
        let gamma = jac.rank_one?;
        let n = jac.len();
        let mut t = jac.clone();
        t.rank_one = None;
        for i in 0..n {
            t.diag[i] *= st.scale[i];
            t.lower[i] *= st.scale[i];
            t.upper[i] *= st.scale[i];
        }
        let mut e2 = vec![0.0; n.saturating_sub(1)];
        for (i, e) in e2.iter_mut().enumerate() {
            let p = t.upper[i] * t.lower[i + 1];
            if p < 0.0 {
                return None;
            }
            *e = p;
        }
        let diagonal = (1..n).all(|i| t.lower[i] == 0.0 && t.upper[i - 1] == 0.0);
        Some(RankOne {
            d: t.diag.clone(),
            u: st.scale.iter().map(|c| c * gamma).collect(),
            w: st.weights.clone(),
            t,
            e2,
            diagonal,
            c: vec![0.0; n],
            z: vec![0.0; n],
        })
    }

    /// `1 + w^T (T - x)^-1 u`, or `None` at a pole.
    fn secular(&mut self, x: f64) -> Option<f64> {
        crate::tally::add(crate::tally::Kernel::SolveRow, self.t.len());
        if self.diagonal {
            let mut sum = 0.0;
            for ((d, w), u) in self.d.iter().zip(&self.w).zip(&self.u) {
                let piv = d - x;
                if piv == 0.0 || !piv.is_finite() {
                    return None;
                }
                sum += w * u / piv;
            }
            return Some(1.0 + sum);
        }
        // Thomas algorithm on T - x for the right-hand side u.
        let n = self.t.len();
        let (c, z) = (&mut self.c, &mut self.z);
        let mut prev_c = 0.0;
        let mut prev_z = 0.0;
        for i in 0..n {
            let a = if i > 0 { self.t.lower[i] } else { 0.0 };
            let piv = self.t.diag[i] - x - a * prev_c;
            if piv == 0.0 || !piv.is_finite() {
                return None;
            }
            prev_c = if i + 1 < n { self.t.upper[i] / piv } else { 0.0 };
            prev_z = (self.u[i] - a * prev_z) / piv;
            c[i] = prev_c;
            z[i] = prev_z;
        }
        for i in (0..n.saturating_sub(1)).rev() {
            z[i] -= c[i] * z[i + 1];
        }
        Some(1.0 + dot(&self.w, z))
    }

    /// The zero of the secular function in `(lo, hi)` where it rises from negative to positive,
    /// to a few ulps: regula falsi with the Illinois modification (superlinear, the bracket kept;
    /// Dahlquist and Bjorck, Numerical Methods, 1974, section 6.2), a bisection step whenever
    /// the bracket shrinks too slowly.
    fn zero_between(&mut self, lo: f64, hi: f64) -> Option<f64> {
        let width = hi - lo;
        let (mut a, mut b) = (lo + 1e-13 * width.max(lo.abs()), hi - 1e-13 * width.max(hi.abs()));
        let (mut fa, mut fb) = (self.secular(a)?, self.secular(b)?);
        if !(fa < 0.0 && fb > 0.0) {
            return None;
        }
        // Which end moved last (-1: a, +1: b), for the Illinois halving.
        let mut side = 0;
        for it in 0..200 {
            let span = b - a;
            if span <= 4.0 * f64::EPSILON * a.abs().max(b.abs()) {
                break;
            }
            let mut m = if it % 4 == 3 {
                0.5 * (a + b)
            } else {
                (a * fb - b * fa) / (fb - fa)
            };
            if !(m > a && m < b) {
                m = 0.5 * (a + b);
            }
            let fm = self.secular(m)?;
            if fm == 0.0 {
                return Some(m);
            }
            if fm < 0.0 {
                (a, fa) = (m, fm);
                if side == -1 {
                    fb *= 0.5;
                }
                side = -1;
            } else {
                (b, fb) = (m, fm);
                if side == 1 {
                    fa *= 0.5;
                }
                side = 1;
            }
        }
        Some(if fa.abs() < fb.abs() { a } else { b })
    }

    /// Upper bound of the spectrum of `T + u w^T` (Gershgorin on rows).
    fn upper_bound(&self) -> f64 {
        let n = self.t.len();
        let wsum: f64 = self.w.iter().map(|v| v.abs()).sum();
        (0..n)
            .map(|i| {
                let off = if i > 0 { self.t.lower[i].abs() } else { 0.0 }
                    + if i + 1 < n { self.t.upper[i].abs() } else { 0.0 };
                self.t.diag[i] + off + self.u[i].abs() * wsum
            })
            .fold(f64::NEG_INFINITY, f64::max)
    }

    fn leading(&mut self) -> Option<f64> {
        let tau = if self.diagonal {
            self.d.iter().copied().fold(f64::NEG_INFINITY, f64::max)
        } else {
            largest_symmetric(&self.d, &self.e2)
        };
        let hi = self.upper_bound().max(tau) + 1e-9 * (1.0 + tau.abs());
        self.zero_between(tau, hi)
    }

    /// All eigenvalues, largest first.
    fn spectrum(&mut self) -> Option<Vec<f64>> {
        let n = self.t.len();
        let m = DMatrix::from_fn(n, n, |r, c| {
            if r == c {
                self.d[r]
            } else if r + 1 == c {
                self.e2[r].sqrt()
            } else if c + 1 == r {
                self.e2[c].sqrt()
            } else {
                0.0
            }
        });
        let mut tau: Vec<f64> = m.symmetric_eigenvalues().iter().copied().collect();
        tau.sort_by(|a, b| a.total_cmp(b));
        let scale = tau
            .iter()
            .fold(0.0_f64, |a, v| a.max(v.abs()))
            .max(f64::MIN_POSITIVE);
        // Distinct poles (clusters within 1e-10 of the scale are one pole).
        let mut poles: Vec<(f64, usize)> = Vec::new();
        for t in tau {
            match poles.last_mut() {
                Some((p, k)) if (t - *p).abs() <= 1e-10 * scale => *k += 1,
                _ => poles.push((t, 1)),
            }
        }
        let mut ev = Vec::with_capacity(n);
        for (p, k) in &poles {
            ev.extend(std::iter::repeat_n(*p, k - 1));
        }
        for w in poles.windows(2) {
            ev.push(self.zero_between(w[0].0, w[1].0)?);
        }
        ev.push(self.leading()?);
        if ev.len() != n {
            return None;
        }
        ev.sort_by(|a, b| b.total_cmp(a));
        Some(ev)
    }
}

/// Eigenvalues `(re, im)` of a general dense matrix by the real Schur form, with an iteration
/// cap. nalgebra's QR iteration can cycle on matrices with many equal eigenvalues (its issues
/// 611 and 764, e.g. relaxation transport on a uniform state); then the diagonal is perturbed by
/// a few ulps of the matrix norm, which moves the eigenvalues by about as much, and it retries.
fn general_eigenvalues(m: DMatrix<f64>) -> Option<Vec<(f64, f64)>> {
    let n = m.nrows();
    let norm = m
        .iter()
        .fold(0.0_f64, |a, v| a.max(v.abs()))
        .max(f64::MIN_POSITIVE);
    for attempt in 0..4 {
        let mut a = m.clone();
        if attempt > 0 {
            let eps = f64::EPSILON * norm * 10f64.powi(2 * attempt - 1);
            for i in 0..n {
                a[(i, i)] += eps * ((i % 7) as f64 - 3.0) / 3.0;
            }
        }
        if let Some(s) = nalgebra::linalg::Schur::try_new(a, f64::EPSILON, 50 * n.max(10)) {
            return Some(s.complex_eigenvalues().iter().map(|c| (c.re, c.im)).collect());
        }
    }
    None
}

/// The dense per-year Jacobian `yr C^-1 dG/dT`.
fn dense(model: &Model, jac: &Tridiag) -> DMatrix<f64> {
    let n = model.len();
    let a = jac.to_dense(&model.grid.weights);
    DMatrix::from_fn(n, n, |i, j| a[i * n + j] * YEAR_SECONDS / model.heat_capacity[i])
}

/// The leading (largest real part) eigenvalue in 1/year.
pub fn leading_eigenvalue(model: &Model, t_years: f64, temps: &[f64]) -> (f64, SpectrumMethod) {
    Stability::new(model).leading(model, t_years, temps)
}

/// A full spectrum.
#[derive(Debug, Clone, PartialEq)]
pub struct Spectrum {
    /// Real parts, 1/year, largest first.
    pub real: Vec<f64>,
    /// Imaginary parts, 1/year (all zero on the symmetric path).
    pub imag: Vec<f64>,
    /// How it was computed.
    pub method: SpectrumMethod,
}

/// All eigenvalues, largest real part first, in 1/year.
pub fn spectrum(model: &Model, t_years: f64, temps: &[f64]) -> Spectrum {
    let n = model.len();
    let mut st = Stability::new(model);
    let mut ws = Workspace::new(n);
    let mut jac = Tridiag::zeros(n);
    model.heating_jacobian(t_years, temps, &mut ws, &mut jac);
    let symmetric = st.symmetrise(&jac);
    let mut rank_one = false;
    let mut pairs: Vec<(f64, f64)> = if symmetric {
        let (d, e2) = (&st.d, &st.e2);
        let m = DMatrix::from_fn(n, n, |r, c| {
            if r == c {
                d[r]
            } else if r + 1 == c {
                e2[r].sqrt()
            } else if c + 1 == r {
                e2[c].sqrt()
            } else {
                0.0
            }
        });
        let mut ev: Vec<(f64, f64)> = m.symmetric_eigenvalues().iter().map(|v| (*v, 0.0)).collect();
        // The dense solver's largest value to round-off of the whole matrix; the bisection's is
        // relative to the value itself, so use it for the leading mode.
        ev.sort_by(|a, b| b.0.total_cmp(&a.0));
        if let Some(first) = ev.first_mut() {
            first.0 = largest_symmetric(d, e2);
        }
        ev
    } else if let Some(ev) = RankOne::new(&st, &jac).and_then(|mut r| r.spectrum()) {
        rank_one = true;
        ev.into_iter().map(|v| (v, 0.0)).collect()
    } else {
        general_eigenvalues(dense(model, &jac)).unwrap_or_else(|| vec![(f64::NAN, f64::NAN); n])
    };
    let method = if symmetric {
        SpectrumMethod::SymmetricTridiagonal
    } else if rank_one {
        SpectrumMethod::SecularRankOne
    } else {
        SpectrumMethod::GeneralDense
    };
    pairs.sort_by(|a, b| b.0.total_cmp(&a.0).then(b.1.total_cmp(&a.1)));
    Spectrum {
        real: pairs.iter().map(|p| p.0).collect(),
        imag: pairs.iter().map(|p| p.1).collect(),
        method,
    }
}

impl Stability {
    /// The warm start of the next symmetric leading-eigenvalue iteration (1/year, NaN: none),
    /// saved in checkpoints so a resumed sweep repeats the same iterations.
    pub fn warm_start(&self) -> f64 {
        self.last
    }

    /// Set the warm start (a value from [`warm_start`](Self::warm_start)).
    pub fn set_warm_start(&mut self, guess: f64) {
        self.last = guess;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn relaxation_spectrum_is_the_analytic_one() {
        // Analytic (common practice): on an ice-free state with linear OLR and relaxation
        // transport, C dT/dt = -(B + gamma) T' + gamma mean(T'): the global mode decays at B/C,
        // every other mode at (B + gamma)/C.
        let text = "[grid]\nbands = 24\n[albedo]\nice_free = 0.3\nice = 0.3\nfreeze_temperature_c = -250\n\
                    [longwave]\na = 203.3\nb = 2.0\n[transport]\nkind = \"relaxation\"\nrelaxation_rate = 3.0\n\
                    [heat_capacity]\nvalue = 4.0e8\n";
        let cfg = crate::config::load_str(text, "t", std::path::Path::new("."), &[]).unwrap();
        let model = Model::from_spec(&cfg.spec.model);
        let t = vec![288.0; 24];
        let c = YEAR_SECONDS / 4.0e8;
        let (lead, method) = leading_eigenvalue(&model, 0.0, &t);
        assert_eq!(method, SpectrumMethod::SecularRankOne);
        assert!((lead + 2.0 * c).abs() < 1e-12 * c, "{lead}");
        let sp = spectrum(&model, 0.0, &t);
        assert_eq!(sp.method, SpectrumMethod::SecularRankOne);
        assert!((sp.real[0] + 2.0 * c).abs() < 1e-12 * c);
        for v in &sp.real[1..] {
            assert!((v + 5.0 * c).abs() < 1e-12 * c, "{v}");
        }
    }

    #[test]
    fn relaxation_leading_eigenvalue_matches_a_dense_solve() {
        // Reference: nalgebra's general (Schur) eigen-solver on the dense Jacobian. Relaxation
        // transport with the step albedo's edge-balance rule (diagonal plus rank one, the edge
        // bands nearly neutral) at states with the edge inside a band, and with the smooth
        // albedo; the secular root must agree to round-off of the matrix norm (~5 / year).
        for (kind, edge) in [("step", 0.3), ("step", 0.7), ("smooth", 0.5)] {
            let text = format!(
                "[grid]\nbands = 40\n[insolation]\nsolar_constant = 1370\ns2 = -0.482\n\
                 [albedo]\nkind = \"{kind}\"\nwidth_k = 4.0\nice_free = 0.32\nice = 0.62\n\
                 freeze_temperature_c = -10\n[longwave]\na = 202\nb = 1.9\n\
                 [transport]\nkind = \"relaxation\"\nrelaxation_rate = 3.04\n\
                 [heat_capacity]\nvalue = 4.0e8\n"
            );
            let cfg = crate::config::load_str(&text, "t", std::path::Path::new("."), &[]).unwrap();
            let model = Model::from_spec(&cfg.spec.model);
            let g = &model.grid;
            // The edge band at T_f + 5 K (inside its ramp), warm and cold sides 15 K away.
            let k = (edge * 40.0) as usize;
            let t: Vec<f64> = (0..40)
                .map(|i| match i.cmp(&k) {
                    std::cmp::Ordering::Less => 290.0 - 20.0 * g.x_centres[i],
                    std::cmp::Ordering::Equal => 268.15,
                    std::cmp::Ordering::Greater => 248.0 - 10.0 * g.x_centres[i],
                })
                .collect();
            let (lead, method) = leading_eigenvalue(&model, 0.0, &t);
            assert_eq!(method, SpectrumMethod::SecularRankOne);
            let mut ws = Workspace::new(40);
            let mut jac = Tridiag::zeros(40);
            model.heating_jacobian(0.0, &t, &mut ws, &mut jac);
            // The Jacobian is diagonal plus `gamma 1 w^T` with one heat capacity: similar (by
            // W^1/2) to the symmetric `D + gamma sqrt(w) sqrt(w)^T`, whose dense symmetric
            // solve is robust (the general Schur iteration cycles on the many equal diagonal
            // entries, nalgebra issues 611 and 764).
            assert!(jac.lower.iter().chain(&jac.upper).all(|v| *v == 0.0));
            let gamma = jac.rank_one.unwrap();
            let c = YEAR_SECONDS / 4.0e8;
            let w = &g.weights;
            let m = DMatrix::from_fn(40, 40, |r, q| {
                c * ((if r == q { jac.diag[r] } else { 0.0 }) + gamma * (w[r] * w[q]).sqrt())
            });
            let want = m
                .symmetric_eigenvalues()
                .iter()
                .copied()
                .fold(f64::NEG_INFINITY, f64::max);
            assert!(
                (lead - want).abs() < 1e-12 * 5.0 + 1e-12 * want.abs(),
                "{kind} {edge}: {lead} vs {want}"
            );
            let sp = spectrum(&model, 0.0, &t);
            assert!(
                (sp.real[0] - want).abs() < 1e-11,
                "{kind}: {} vs {want}",
                sp.real[0]
            );
        }
    }

    #[test]
    fn edge_coupled_leading_matches_a_dense_solve() {
        // Reference: nalgebra's general (Schur) eigen-solver. A diffusion-like tridiagonal whose
        // last coupling has a negative product and whose last band is strongly unstable (as at
        // an ice edge in the polar band), and the same mirrored onto the first band.
        let n = 30;
        for mirrored in [false, true] {
            let mut j = Tridiag::zeros(n);
            for i in 0..n {
                j.diag[i] = -2.0 - 0.05 * i as f64;
                if i > 0 {
                    j.lower[i] = 1.0;
                }
                if i + 1 < n {
                    j.upper[i] = 0.9;
                }
            }
            j.diag[n - 1] = 40.0;
            j.lower[n - 1] = -3.0;
            if mirrored {
                let r = |v: &Vec<f64>| v.iter().rev().copied().collect::<Vec<f64>>();
                let (lo, up) = (r(&j.upper), r(&j.lower));
                j = Tridiag {
                    lower: lo,
                    diag: r(&j.diag),
                    upper: up,
                    rank_one: None,
                };
            }
            let mut st = Stability {
                jac: Tridiag::zeros(n),
                ws: Workspace::new(n),
                d: vec![0.0; n],
                e2: vec![0.0; n - 1],
                scale: vec![1.0; n],
                weights: vec![1.0 / n as f64; n],
                last: f64::NAN,
            };
            assert!(!st.symmetrise(&j));
            let got = st.edge_coupled(&j).expect("real leading eigenvalue");
            let a = j.to_dense(&vec![0.0; n]);
            let m = DMatrix::from_fn(n, n, |r, c| a[r * n + c]);
            let ev = m.complex_eigenvalues();
            let want = ev.iter().map(|c| c.re).fold(f64::NEG_INFINITY, f64::max);
            assert!(
                ev.iter().all(|c| c.im.abs() < 1e-9),
                "spectrum real as the secular argument says"
            );
            assert!((got - want).abs() < 1e-11 * want.abs(), "{got} vs {want}");
        }
    }

    #[test]
    fn largest_symmetric_matches_a_dense_solve() {
        // Reference: nalgebra's dense symmetric eigen-solver (general-purpose library).
        let n = 40;
        let d: Vec<f64> = (0..n)
            .map(|i| -3.0 - (i as f64 * 0.7).sin() * 2.0 - 0.1 * i as f64)
            .collect();
        let e: Vec<f64> = (0..n - 1).map(|i| 0.5 + 0.4 * (i as f64 * 1.3).cos()).collect();
        let e2: Vec<f64> = e.iter().map(|v| v * v).collect();
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
        let want = m
            .symmetric_eigenvalues()
            .iter()
            .copied()
            .fold(f64::NEG_INFINITY, f64::max);
        let got = largest_symmetric(&d, &e2);
        // Both are backward stable: agreement to a few ulps of the matrix norm (~5).
        assert!((got - want).abs() < 1e-13 * 5.0, "{got} vs {want}");
        assert_eq!(sturm_count(&d, &e2, got + 1e-9), n);
        assert_eq!(sturm_count(&d, &e2, got - 1e-9), n - 1);
    }
}
