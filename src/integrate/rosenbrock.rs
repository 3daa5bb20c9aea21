//! ROS2: a two-stage linearly implicit Rosenbrock-W scheme of order 2, L-stable, with an
//! embedded first-order error estimate and cubic Hermite dense output.
//!
//! With `M = C/yr - gamma h dG/dT` (tridiagonal, plus rank one for relaxation transport):
//!
//! ```text
//! M k1 = G(t, y)
//! M k2 = G(t + h, y + h k1) - 2 (C/yr) k1
//! y'   = y + h (3/2 k1 + 1/2 k2),    error = h/2 (k1 + k2),    gamma = 1 + 1/sqrt(2)
//! ```
//!
//! The Jacobian holds transport, the OLR derivative and the albedo derivative (the edge band of
//! the `step` albedo couples neighbours, still tridiagonal); sunlight and forcing enter through
//! `G` explicitly. The order holds for any matrix in place of the Jacobian (a W-method), so a
//! lagged or approximate Jacobian costs accuracy of the error estimate, never the order.
//!
//! Reference: Verwer, Spee, Blom and Hundsdorfer (1999, SIAM J. Sci. Comput. 20, 1456-1480).

use super::{step_collapsed, Integrator, SolverError, Stats};
use crate::linalg::{Tridiag, TridiagLu};
use crate::model::{Model, Workspace, YEAR_SECONDS};

const GAMMA: f64 = 1.0 + std::f64::consts::FRAC_1_SQRT_2;

/// Step-size policy.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum StepPolicy {
    /// Fixed step, years.
    Fixed(f64),
    /// Adaptive to a local error tolerance (K), with a largest step (years).
    Adaptive {
        /// Tolerance, K.
        tolerance: f64,
        /// Longest step, years.
        max_step: f64,
    },
}

/// The ROS2 integrator over one model.
pub struct Ros2<'m> {
    model: &'m Model,
    ws: Workspace,
    policy: StepPolicy,
    t_end: f64,
    t0: f64,
    n_fixed: u64,
    /// Current step start (years) and state (K), with `f = dT/dt` (K/yr) there.
    t: f64,
    y: Vec<f64>,
    f: Vec<f64>,
    /// Previous accepted step, for dense output.
    t_prev: f64,
    y_prev: Vec<f64>,
    f_prev: Vec<f64>,
    h: f64,
    max_steps: u64,
    cap: Vec<f64>,
    inv_cap: Vec<f64>,
    /// Jacobian at `(t, y)`, valid when `jac_fresh`.
    jac: Tridiag,
    jac_fresh: bool,
    mat: Tridiag,
    lu: TridiagLu,
    /// The `gamma h` and Jacobian `lu` currently factorises (`NaN`: none valid).
    lu_gh: f64,
    lu_jac: Tridiag,
    k1: Vec<f64>,
    k2: Vec<f64>,
    tmp: Vec<f64>,
    stats: Stats,
    /// Run the AVX2 and FMA copy of the step (see [`crate::cpu`]).
    wide: bool,
}

impl<'m> Ros2<'m> {
    /// Start at `t0` (years) from `y0` (K), integrating at most to `t_end`.
    pub fn new(
        model: &'m Model,
        t0: f64,
        y0: &[f64],
        t_end: f64,
        policy: StepPolicy,
        max_steps: u64,
    ) -> Ros2<'m> {
        let n = model.len();
        let mut ws = Workspace::new(n);
        let cap: Vec<f64> = model.heat_capacity.iter().map(|c| c / YEAR_SECONDS).collect();
        let mut f = vec![0.0; n];
        model.heating(t0, y0, &mut ws, &mut f);
        for (fi, c) in f.iter_mut().zip(&cap) {
            *fi /= c;
        }
        let h = match policy {
            StepPolicy::Fixed(h) => h,
            StepPolicy::Adaptive { tolerance, max_step } => {
                // First step: a change of about sqrt(tolerance) K of the fastest band, clipped
                // (the controller grows it by up to 5x per step).
                let fmax = f.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
                let h0 = if fmax > 0.0 {
                    tolerance.sqrt() / fmax
                } else {
                    max_step
                };
                // Not `clamp`: a step limit below 1e-9 years must not panic (issue 20).
                h0.max(1e-9).min(max_step)
            }
        };
        Ros2 {
            model,
            ws,
            policy,
            t_end,
            t0,
            n_fixed: 0,
            t: t0,
            y: y0.to_vec(),
            f_prev: f.clone(),
            f,
            t_prev: t0,
            y_prev: y0.to_vec(),
            h,
            max_steps,
            inv_cap: cap.iter().map(|c| 1.0 / c).collect(),
            cap,
            jac: Tridiag::zeros(n),
            jac_fresh: false,
            mat: Tridiag::zeros(n),
            lu: TridiagLu::new(n, &model.grid.weights),
            lu_gh: f64::NAN,
            lu_jac: Tridiag::zeros(n),
            k1: vec![0.0; n],
            k2: vec![0.0; n],
            tmp: vec![0.0; n],
            stats: Stats::default(),
            wide: crate::cpu::wide_fma(),
        }
    }

    /// Current step time (years).
    pub fn time(&self) -> f64 {
        self.t
    }

    /// Current state (K) at `time()`.
    pub fn state(&self) -> &[f64] {
        &self.y
    }

    /// Largest |dT/dt| (K per year) at the current state.
    pub fn max_rate(&self) -> f64 {
        self.f.iter().fold(0.0, |m, v| m.max(v.abs()))
    }

    /// One accepted step (retrying with smaller steps on rejection). Returns the step taken.
    pub fn step(&mut self) -> Result<f64, SolverError> {
        #[cfg(target_arch = "x86_64")]
        if self.wide {
            // SAFETY: `wide` is set only when the CPU has AVX2 and FMA (`cpu::wide_fma`).
            return unsafe { self.step_wide() };
        }
        self.step_impl()
    }

    /// [`Ros2::step`] compiled for AVX2 and FMA (the same numbers: see [`crate::cpu`]).
    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx2,fma")]
    unsafe fn step_wide(&mut self) -> Result<f64, SolverError> {
        self.step_impl()
    }

    #[inline(always)]
    fn step_impl(&mut self) -> Result<f64, SolverError> {
        let model = self.model;
        let n = self.y.len();
        if self.stats.steps >= self.max_steps {
            return Err(SolverError::TooManySteps {
                t: self.t,
                limit: self.max_steps,
            });
        }
        if !self.jac_fresh {
            model.heating_jacobian(self.t, &self.y, &mut self.ws, &mut self.jac);
            self.jac_fresh = true;
        }
        // Every step lands on the next forcing breakpoint (or the end) and stays within the
        // forcing's own time scale, so no jump or kink of the forcing is stepped over.
        let bound = match model.next_breakpoint(self.t) {
            Some(b) if b < self.t_end => b,
            _ => self.t_end,
        };
        let scale = model.forcing_time_scale(self.t, self.t);
        loop {
            let remaining = bound - self.t;
            // `last`: the step ends exactly on `bound`; `grid`: a fixed step reaches its grid.
            let (h, last, grid) = match self.policy {
                StepPolicy::Fixed(hf) => {
                    let next = self.t0 + (self.n_fixed + 1) as f64 * hf;
                    if next >= bound - 1e-9 * hf {
                        (remaining, true, next <= bound + 1e-9 * hf)
                    } else {
                        (next - self.t, false, true)
                    }
                }
                StepPolicy::Adaptive { .. } => {
                    let h = self.h.min(scale);
                    if h >= remaining * (1.0 - 1e-12) {
                        (remaining, true, false)
                    } else {
                        (h, false, false)
                    }
                }
            };
            // M = C/yr - gamma h J, refactorised only in the rows whose Jacobian entries
            // changed since the last factorisation with the same step (the twisted
            // factorisation keeps the rows on either side); unchanged (ice free, ice covered,
            // linear OLR): no work at all.
            let gh = GAMMA * h;
            let (lo, hi) = self.changed_rows(gh);
            let factored = if lo < hi {
                let (jac, mat) = (&self.jac, &mut self.mat);
                let (cap, jd, jl, ju) = (
                    &self.cap[lo..hi],
                    &jac.diag[lo..hi],
                    &jac.lower[lo..hi],
                    &jac.upper[lo..hi],
                );
                let (md, ml, mu) = (
                    &mut mat.diag[lo..hi],
                    &mut mat.lower[lo..hi],
                    &mut mat.upper[lo..hi],
                );
                for i in 0..hi - lo {
                    md[i] = cap[i] - gh * jd[i];
                    ml[i] = -gh * jl[i];
                    mu[i] = -gh * ju[i];
                }
                mat.rank_one = jac.rank_one.map(|s| -gh * s);
                self.stats.factorisations += 1;
                let ok = self.lu.factor_rows(&self.mat, lo, hi).is_ok();
                if ok {
                    if lo == 0 && hi == n {
                        self.lu_gh = gh;
                    }
                    self.lu_jac.diag[lo..hi].copy_from_slice(&self.jac.diag[lo..hi]);
                    self.lu_jac.lower[lo..hi].copy_from_slice(&self.jac.lower[lo..hi]);
                    self.lu_jac.upper[lo..hi].copy_from_slice(&self.jac.upper[lo..hi]);
                    self.lu_jac.rank_one = self.jac.rank_one;
                } else {
                    self.lu_gh = f64::NAN;
                }
                ok
            } else {
                true
            };
            let mut err = f64::INFINITY;
            crate::tally::add(crate::tally::Kernel::Ros2Row, n);
            if factored {
                // Stage 1: k1 = M^-1 G(t, y) = M^-1 (C/yr) f.
                for ((k, c), f) in self.k1.iter_mut().zip(&self.cap).zip(&self.f) {
                    *k = c * f;
                }
                self.lu.solve(&mut self.k1);
                // Stage 2.
                for ((x, y), k) in self.tmp.iter_mut().zip(&self.y).zip(&self.k1) {
                    *x = y + h * k;
                }
                model.heating_inline(self.t + h, &self.tmp, &mut self.ws, &mut self.k2);
                self.stats.rhs_evals += 1;
                for ((k2, c), k1) in self.k2.iter_mut().zip(&self.cap).zip(&self.k1) {
                    *k2 -= 2.0 * c * k1;
                }
                self.lu.solve(&mut self.k2);
                err = match self.policy {
                    StepPolicy::Fixed(_) => 0.0,
                    StepPolicy::Adaptive { tolerance, .. } => {
                        let e = self
                            .k1
                            .iter()
                            .zip(&self.k2)
                            .fold(0.0_f64, |e, (a, b)| e.max((0.5 * h * (a + b)).abs()));
                        if e.is_nan() {
                            f64::INFINITY
                        } else {
                            e / tolerance
                        }
                    }
                };
            }
            if err <= 1.0 {
                // Accept.
                std::mem::swap(&mut self.y_prev, &mut self.y);
                std::mem::swap(&mut self.f_prev, &mut self.f);
                self.t_prev = self.t;
                for (((y, yp), k1), k2) in self.y.iter_mut().zip(&self.y_prev).zip(&self.k1).zip(&self.k2) {
                    *y = yp + h * (1.5 * k1 + 0.5 * k2);
                }
                self.t = if last { bound } else { self.t + h };
                super::check_state_inline(model, self.t, &self.y)?;
                // FSAL: the new state's heating starts the next step, and its Jacobian with it.
                model.heating_with_jacobian_inline(self.t, &self.y, &mut self.ws, &mut self.f, &mut self.jac);
                self.jac_fresh = true;
                self.stats.rhs_evals += 1;
                for (fi, c) in self.f.iter_mut().zip(&self.inv_cap) {
                    *fi *= c;
                }
                self.stats.steps += 1;
                match self.policy {
                    StepPolicy::Fixed(_) => self.n_fixed += u64::from(grid),
                    StepPolicy::Adaptive { max_step, .. } => {
                        let fac = if err > 0.0 {
                            (0.9 / err.sqrt()).clamp(0.2, 5.0)
                        } else {
                            5.0
                        };
                        // After a shortened last step keep the controller's own proposal.
                        if !last {
                            self.h = (h * fac).min(max_step);
                        }
                    }
                }
                return Ok(h);
            }
            // Reject and retry smaller.
            self.stats.rejected += 1;
            let fac = if err.is_finite() {
                (0.9 / err.sqrt()).clamp(0.1, 0.5)
            } else {
                0.25
            };
            match self.policy {
                StepPolicy::Fixed(hf) => {
                    return Err(SolverError::NoConvergence {
                        what: "the fixed-step implicit scheme".into(),
                        detail: format!("singular step matrix at model year {:.6} with step {hf} years; use a shorter time.step_days", self.t),
                    })
                }
                StepPolicy::Adaptive { .. } => {
                    self.h = h * fac;
                    if self.h < 1e-12 * (1.0 + self.t.abs()) {
                        return Err(step_collapsed(model, self.t, self.h, &self.y, &self.f));
                    }
                }
            }
        }
    }

    /// The rows `lo..hi` whose factorisation must be redone for `gh = gamma h` (`lo >= hi`:
    /// none; `0..n`: all).
    #[inline(always)]
    fn changed_rows(&self, gh: f64) -> (usize, usize) {
        let n = self.y.len();
        // A fixed step is `t0 + (k + 1) h - t`, equal to `h` only to round-off: a relative
        // difference below 1e-12 keeps the factorisation (a W-method keeps its order with any
        // matrix; the change is 1e-12 of the implicit part). Measured against the `gamma h` of
        // the last full factorisation, so differences never accumulate.
        if !((gh - self.lu_gh).abs() <= 1e-12 * gh.abs()) || self.jac.rank_one != self.lu_jac.rank_one {
            return (0, n);
        }
        let (a, b) = (&self.jac, &self.lu_jac);
        let (ad, al, au) = (&a.diag[..n], &a.lower[..n], &a.upper[..n]);
        let (bd, bl, bu) = (&b.diag[..n], &b.lower[..n], &b.upper[..n]);
        let differs = |i: usize| (ad[i] != bd[i]) | (al[i] != bl[i]) | (au[i] != bu[i]);
        let (mut lo, mut hi) = (n, 0);
        crate::linalg::for_each_flagged(n, differs, |i| {
            lo = lo.min(i);
            hi = i + 1;
        });
        if lo >= hi {
            return (n, n);
        }
        // With a rank-one part every row's z changes with any entry: all or nothing.
        if a.rank_one.is_some() {
            return (0, n);
        }
        (lo, hi)
    }

    /// Start of the last accepted step (years; the current time before the first step).
    pub fn previous_time(&self) -> f64 {
        self.t_prev
    }

    /// The dense output: the state (K) at `t` within the last accepted step into `out`.
    pub fn dense(&self, t: f64, out: &mut [f64]) {
        self.interpolate(t, out)
    }

    /// Cubic Hermite interpolation of the state at `t` within the last step into `out`.
    fn interpolate(&self, t: f64, out: &mut [f64]) {
        let h = self.t - self.t_prev;
        if h <= 0.0 {
            out.copy_from_slice(&self.y);
            return;
        }
        let s = ((t - self.t_prev) / h).clamp(0.0, 1.0);
        let [h00, h10, h01, h11] = crate::interpolation::hermite_basis(s);
        for i in 0..out.len() {
            out[i] = h00 * self.y_prev[i] + h10 * h * self.f_prev[i] + h01 * self.y[i] + h11 * h * self.f[i];
        }
    }
}

impl Integrator for Ros2<'_> {
    fn advance_to(&mut self, t_target: f64, out: &mut [f64]) -> Result<(), SolverError> {
        while self.t < t_target - 1e-12 * (1.0 + t_target.abs()) {
            self.step()?;
        }
        if (self.t - t_target).abs() <= 1e-12 * (1.0 + t_target.abs()) {
            out.copy_from_slice(&self.y);
        } else {
            self.interpolate(t_target, out);
        }
        Ok(())
    }

    fn stats(&self) -> Stats {
        self.stats
    }
}

/// The complete mutable state of a [`Ros2`] (for checkpoints): restoring it into an
/// integrator built with the same model, end time and policy continues with exactly the steps
/// the saved one would have taken.
#[derive(Debug, Clone, PartialEq)]
pub struct Ros2Snapshot {
    /// Current time, years.
    pub t: f64,
    /// Previous accepted step start, years.
    pub t_prev: f64,
    /// Step size the controller proposes next, years.
    pub h: f64,
    /// Fixed steps taken.
    pub n_fixed: u64,
    /// State at `t`, K.
    pub y: Vec<f64>,
    /// `dT/dt` at `t`, K/yr (the FSAL stage that starts the next step).
    pub f: Vec<f64>,
    /// State at `t_prev`, K (dense output).
    pub y_prev: Vec<f64>,
    /// `dT/dt` at `t_prev`, K/yr (dense output).
    pub f_prev: Vec<f64>,
    /// Jacobian at `(t, y)`: lower, diagonal, upper, rank-one scale; and whether it is fresh.
    pub jac: (Vec<f64>, Vec<f64>, Vec<f64>, Option<f64>, bool),
    /// Counters.
    pub stats: Stats,
}

impl Ros2<'_> {
    /// The integrator's state, for a checkpoint.
    pub fn snapshot(&self) -> Ros2Snapshot {
        Ros2Snapshot {
            t: self.t,
            t_prev: self.t_prev,
            h: self.h,
            n_fixed: self.n_fixed,
            y: self.y.clone(),
            f: self.f.clone(),
            y_prev: self.y_prev.clone(),
            f_prev: self.f_prev.clone(),
            jac: (
                self.jac.lower.clone(),
                self.jac.diag.clone(),
                self.jac.upper.clone(),
                self.jac.rank_one,
                self.jac_fresh,
            ),
            stats: self.stats,
        }
    }

    /// Continue from a snapshot of an integrator of the same model size; `false` (nothing
    /// changed) when the sizes differ.
    pub fn restore(&mut self, s: &Ros2Snapshot) -> bool {
        let n = self.y.len();
        if [&s.y, &s.f, &s.y_prev, &s.f_prev, &s.jac.0, &s.jac.1, &s.jac.2]
            .iter()
            .any(|v| v.len() != n)
        {
            return false;
        }
        self.t = s.t;
        self.t_prev = s.t_prev;
        self.h = s.h;
        self.n_fixed = s.n_fixed;
        self.y.copy_from_slice(&s.y);
        self.f.copy_from_slice(&s.f);
        self.y_prev.copy_from_slice(&s.y_prev);
        self.f_prev.copy_from_slice(&s.f_prev);
        self.jac.lower.copy_from_slice(&s.jac.0);
        self.jac.diag.copy_from_slice(&s.jac.1);
        self.jac.upper.copy_from_slice(&s.jac.2);
        self.jac.rank_one = s.jac.3;
        self.jac_fresh = s.jac.4;
        self.stats = s.stats;
        true
    }
}
