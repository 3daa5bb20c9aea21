//! Pseudo-arclength continuation of equilibria in one control parameter, through folds.
//!
//! Unknowns `(T, p)` with `G(T, p) = 0`. Arclength is measured in scaled variables,
//! `ds^2 = (1/n) sum (dT_i / T_scale)^2 + (dp / p_scale)^2` with `T_scale` = 50 K and `p_scale`
//! the width of the range. Each step predicts along the unit tangent and corrects with Newton on
//! the bordered system `[G_T G_p; v^T w]` (solved by block elimination with the tridiagonal
//! `G_T`, the bordering algorithm), adapting the step length to the corrector's effort. A fold
//! (saddle-node) is where `dp/ds` changes sign; it is located by bisection on the arclength
//! from the last point before it until the control is known to `fold_tolerance` relative.
//! `G_p` is a central difference in `p`.
//!
//! Reference: Keller (1977), in Applications of Bifurcation Theory, Academic Press, 359-384;
//! Allgower and Georg, Introduction to Numerical Continuation Methods (1990/2003), chapter 2.

use super::control::Controlled;
use super::stability::leading_eigenvalue;
use crate::config::ConfigError;
use crate::linalg::{dot, Tridiag, TridiagLu};
use crate::model::{Model, Workspace};

/// Temperature scale of the arclength metric, K.
const T_SCALE: f64 = 50.0;

/// Options.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ContinuationOptions {
    /// Control range.
    pub from: f64,
    /// Control range.
    pub to: f64,
    /// First arclength step (scaled units).
    pub step: f64,
    /// Largest arclength step.
    pub max_step: f64,
    /// Smallest arclength step before giving up on a branch.
    pub min_step: f64,
    /// Point limit per branch.
    pub max_points: usize,
    /// Newton residual target, W m-2.
    pub tolerance_wm2: f64,
    /// Relative precision of fold locations in the control.
    pub fold_tolerance: f64,
}

/// One point of a branch.
#[derive(Debug, Clone, PartialEq)]
pub struct BranchPoint {
    /// Control value.
    pub control: f64,
    /// Temperatures, K.
    pub state: Vec<f64>,
    /// `dp/ds` (scaled), its sign tells the direction of travel in the control.
    pub dpds: f64,
    /// Leading eigenvalue, 1/year.
    pub leading: f64,
}

/// A located fold.
#[derive(Debug, Clone, PartialEq)]
pub struct FoldPoint {
    /// Control value at the fold.
    pub control: f64,
    /// State at the fold, K.
    pub state: Vec<f64>,
    /// Index (into the branch's points) of the last point before the fold.
    pub after_point: usize,
}

/// A traced branch.
#[derive(Debug, Clone, PartialEq)]
pub struct Branch {
    /// Points in arclength order.
    pub points: Vec<BranchPoint>,
    /// Folds along it.
    pub folds: Vec<FoldPoint>,
}

/// Why continuation failed.
#[derive(Debug, thiserror::Error)]
pub enum ContinuationError {
    /// The control could not be applied.
    #[error(transparent)]
    Config(#[from] ConfigError),
    /// The starting point is not an equilibrium.
    #[error("continuation start is not an equilibrium: {0}")]
    Start(String),
}

struct Tracer<'a> {
    fam: &'a Controlled,
    model: Model,
    model_p: f64,
    ws: Workspace,
    n: usize,
    p_scale: f64,
    opts: ContinuationOptions,
    jac: Tridiag,
    lu: TridiagLu,
    g: Vec<f64>,
    gp: Vec<f64>,
    a: Vec<f64>,
    b: Vec<f64>,
    tmp: Vec<f64>,
}

/// The tangent at a point: `dT/ds` (K per unit s) and `dp/ds` (control units per unit s).
#[derive(Debug, Clone)]
struct Tangent {
    dt: Vec<f64>,
    dp: f64,
}

impl<'a> Tracer<'a> {
    fn new(fam: &'a Controlled, opts: ContinuationOptions) -> Tracer<'a> {
        let model = fam.base_model().clone();
        let n = model.len();
        Tracer {
            fam,
            model_p: fam.base_value(),
            ws: Workspace::new(n),
            n,
            p_scale: (opts.to - opts.from).abs(),
            opts,
            jac: Tridiag::zeros(n),
            lu: TridiagLu::new(n, &model.grid.weights),
            model,
            g: vec![0.0; n],
            gp: vec![0.0; n],
            a: vec![0.0; n],
            b: vec![0.0; n],
            tmp: vec![0.0; n],
        }
    }

    fn set_p(&mut self, p: f64) -> Result<(), ConfigError> {
        if p != self.model_p {
            self.fam.apply(&mut self.model, p)?;
            self.model_p = p;
        }
        Ok(())
    }

    /// `G` into `self.g` and `G_p` into `self.gp`, and factor `G_T`. Returns false if singular.
    fn linearise(&mut self, t: &[f64], p: f64) -> Result<bool, ConfigError> {
        let h = 1e-6 * self.p_scale.max(p.abs() * 1e-3);
        self.set_p(p + h)?;
        self.model.heating(0.0, t, &mut self.ws, &mut self.gp);
        self.set_p(p - h)?;
        self.model.heating(0.0, t, &mut self.ws, &mut self.tmp);
        for i in 0..self.n {
            self.gp[i] = (self.gp[i] - self.tmp[i]) / (2.0 * h);
        }
        self.set_p(p)?;
        self.model.heating(0.0, t, &mut self.ws, &mut self.g);
        self.model.heating_jacobian(0.0, t, &mut self.ws, &mut self.jac);
        Ok(self.lu.factor(&self.jac).is_ok())
    }

    fn tangent(
        &mut self,
        t: &[f64],
        p: f64,
        orient: Option<&Tangent>,
    ) -> Result<Option<Tangent>, ConfigError> {
        if !self.linearise(t, p)? {
            return Ok(None);
        }
        // G_T z = -G_p.
        for i in 0..self.n {
            self.b[i] = -self.gp[i];
        }
        self.lu.solve(&mut self.b);
        let ps = self.p_scale;
        let zz = dot(&self.b, &self.b);
        let w = 1.0 / (1.0 + ps * ps * zz / (self.n as f64 * T_SCALE * T_SCALE)).sqrt();
        let mut tan = Tangent {
            dt: self.b.iter().map(|z| z * ps * w).collect(),
            dp: w * ps,
        };
        if let Some(o) = orient {
            if self.inner(&tan, o) < 0.0 {
                tan.dt.iter_mut().for_each(|v| *v = -*v);
                tan.dp = -tan.dp;
            }
        }
        Ok(Some(tan))
    }

    fn inner(&self, a: &Tangent, b: &Tangent) -> f64 {
        dot(&a.dt, &b.dt) / (self.n as f64 * T_SCALE * T_SCALE) + a.dp * b.dp / (self.p_scale * self.p_scale)
    }

    /// Newton on `G = 0` and the hyperplane through `(t_pred, p_pred)` normal to `tan`.
    fn correct(
        &mut self,
        t_pred: &[f64],
        p_pred: f64,
        tan: &Tangent,
    ) -> Result<Option<(Vec<f64>, f64, usize)>, ConfigError> {
        let mut t = t_pred.to_vec();
        let mut p = p_pred;
        let (lo, hi) = self.model.valid_range();
        let nt = self.n as f64 * T_SCALE * T_SCALE;
        let ps2 = self.p_scale * self.p_scale;
        for it in 0..12 {
            if !self.linearise(&t, p)? {
                return Ok(None);
            }
            let r = self.g.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
            let mut nres = 0.0;
            for i in 0..self.n {
                nres += tan.dt[i] * (t[i] - t_pred[i]);
            }
            nres = nres / nt + tan.dp * (p - p_pred) / ps2;
            if r.is_finite() && r <= self.opts.tolerance_wm2 && nres.abs() < 1e-12 {
                return Ok(Some((t, p, it)));
            }
            for i in 0..self.n {
                self.a[i] = -self.g[i];
                self.b[i] = -self.gp[i];
            }
            self.lu.solve(&mut self.a);
            self.lu.solve(&mut self.b);
            let den = dot(&tan.dt, &self.b) / nt + tan.dp / ps2;
            let dp = (-nres - dot(&tan.dt, &self.a) / nt) / den;
            if !dp.is_finite() {
                return Ok(None);
            }
            let mut big = 0.0_f64;
            for i in 0..self.n {
                let d = self.a[i] + self.b[i] * dp;
                big = big.max(d.abs());
                t[i] += d;
            }
            p += dp;
            if !big.is_finite() || big > 30.0 || t.iter().any(|v| *v < lo || *v > hi) {
                return Ok(None);
            }
        }
        Ok(None)
    }

    fn leading(&mut self, t: &[f64], p: f64) -> Result<f64, ConfigError> {
        self.set_p(p)?;
        Ok(leading_eigenvalue(&self.model, 0.0, t).0)
    }

    fn point(&mut self, t: Vec<f64>, p: f64, tan: &Tangent) -> Result<BranchPoint, ConfigError> {
        let leading = self.leading(&t, p)?;
        Ok(BranchPoint {
            control: p,
            state: t,
            dpds: tan.dp / self.p_scale,
            leading,
        })
    }

    /// Newton in `T` at fixed `p` (to land on the range ends).
    fn fixed_p(&mut self, t0: &[f64], p: f64) -> Result<Option<Vec<f64>>, ConfigError> {
        self.set_p(p)?;
        let opts = super::NewtonOptions {
            tolerance_wm2: self.opts.tolerance_wm2,
            max_iterations: 30,
            max_change: 20.0,
        };
        Ok(super::newton(&self.model, 0.0, t0, opts).ok().map(|r| r.state))
    }

    /// Locate a fold between `x0` (tangent `tan0`) and the next point at arclength `ds`.
    fn locate_fold(
        &mut self,
        x0: &BranchPoint,
        tan0: &Tangent,
        ds: f64,
    ) -> Result<Option<FoldPoint>, ConfigError> {
        let sign0 = tan0.dp.signum();
        let (mut lo, mut hi) = (0.0, ds);
        let mut best: Option<(Vec<f64>, f64)> = None;
        let mut p_prev = f64::NAN;
        for _ in 0..60 {
            let mid = 0.5 * (lo + hi);
            let t_pred: Vec<f64> = x0.state.iter().zip(&tan0.dt).map(|(t, d)| t + mid * d).collect();
            let p_pred = x0.control + mid * tan0.dp;
            let Some((t, p, _)) = self.correct(&t_pred, p_pred, tan0)? else {
                break;
            };
            let Some(tan) = self.tangent(&t, p, Some(tan0))? else {
                best = Some((t, p));
                break;
            };
            if tan.dp.signum() == sign0 {
                lo = mid;
            } else {
                hi = mid;
            }
            let done =
                (p - p_prev).abs() <= self.opts.fold_tolerance * 0.1 * p.abs().max(self.p_scale * 1e-3);
            p_prev = p;
            best = Some((t, p));
            if done && hi - lo < 1e-6 * ds {
                break;
            }
        }
        Ok(best.map(|(state, control)| FoldPoint {
            control,
            state,
            after_point: 0,
        }))
    }

    /// Trace from an equilibrium in one direction (+1: increasing control first) until the
    /// branch leaves the range. Returns the points after the start, and folds.
    fn trace_one_way(
        &mut self,
        start: &BranchPoint,
        dir: f64,
    ) -> Result<(Vec<BranchPoint>, Vec<FoldPoint>), ConfigError> {
        let (pmin, pmax) = (self.opts.from.min(self.opts.to), self.opts.from.max(self.opts.to));
        let mut pts: Vec<BranchPoint> = Vec::new();
        let mut folds = Vec::new();
        let Some(mut tan) = self.tangent(&start.state, start.control, None)? else {
            return Ok((pts, folds));
        };
        if tan.dp.signum() != dir.signum() {
            tan.dt.iter_mut().for_each(|v| *v = -*v);
            tan.dp = -tan.dp;
        }
        let mut cur = start.clone();
        let mut ds = self.opts.step;
        while pts.len() < self.opts.max_points {
            let t_pred: Vec<f64> = cur.state.iter().zip(&tan.dt).map(|(t, d)| t + ds * d).collect();
            let p_pred = cur.control + ds * tan.dp;
            let corrected = self.correct(&t_pred, p_pred, &tan)?;
            let Some((t, p, iters)) = corrected else {
                ds *= 0.5;
                if ds < self.opts.min_step {
                    break;
                }
                continue;
            };
            // Orient the new tangent with the secant.
            let secant = Tangent {
                dt: t.iter().zip(&cur.state).map(|(a, b)| a - b).collect(),
                dp: p - cur.control,
            };
            let Some(new_tan) = self.tangent(&t, p, Some(&secant))? else {
                ds *= 0.5;
                if ds < self.opts.min_step {
                    break;
                }
                continue;
            };
            if new_tan.dp.signum() != tan.dp.signum() {
                if let Some(mut f) = self.locate_fold(&cur, &tan, ds)? {
                    f.after_point = pts.len();
                    folds.push(f);
                }
            }
            if p < pmin || p > pmax {
                // Land on the range end by Newton at fixed control.
                let edge = if p < pmin { pmin } else { pmax };
                let s = (edge - cur.control) / (p - cur.control);
                let guess: Vec<f64> = cur.state.iter().zip(&t).map(|(a, b)| a + s * (b - a)).collect();
                if let Some(te) = self.fixed_p(&guess, edge)? {
                    let pt = self.point(te, edge, &new_tan)?;
                    pts.push(pt);
                }
                break;
            }
            let pt = self.point(t, p, &new_tan)?;
            pts.push(pt.clone());
            cur = pt;
            tan = new_tan;
            ds = if iters <= 2 {
                (ds * 1.6).min(self.opts.max_step)
            } else if iters >= 6 {
                ds * 0.6
            } else {
                ds
            };
        }
        Ok((pts, folds))
    }
}

/// Trace the whole branch through an equilibrium `start` at control `p`, both ways.
pub fn trace_branch(
    fam: &Controlled,
    start: &[f64],
    p: f64,
    opts: ContinuationOptions,
) -> Result<Branch, ContinuationError> {
    let mut tr = Tracer::new(fam, opts);
    tr.set_p(p)?;
    let Some(tan) = tr.tangent(start, p, None)? else {
        return Err(ContinuationError::Start("singular Jacobian at the start".into()));
    };
    let lead = tr.leading(start, p)?;
    let first = BranchPoint {
        control: p,
        state: start.to_vec(),
        dpds: tan.dp / tr.p_scale,
        leading: lead,
    };
    let (down, fdown) = tr.trace_one_way(&first, -1.0)?;
    let (up, fup) = tr.trace_one_way(&first, 1.0)?;
    // Assemble in one arclength order: reversed "down" leg, start, "up" leg.
    let nd = down.len();
    let mut points: Vec<BranchPoint> = down.into_iter().rev().collect();
    points.push(first);
    points.extend(up);
    let mut folds: Vec<FoldPoint> = fdown
        .into_iter()
        .map(|mut f| {
            // In the down leg, fold after its point k (0 = start) lies between reversed indices.
            f.after_point = nd - 1 - f.after_point.min(nd.saturating_sub(1));
            f
        })
        .collect();
    folds.extend(fup.into_iter().map(|mut f| {
        f.after_point += nd;
        f
    }));
    folds.sort_by_key(|f| f.after_point);
    // Orient dp/ds along the assembled order: the down leg was traced backwards.
    for pt in points.iter_mut().take(nd) {
        pt.dpds = -pt.dpds;
    }
    Ok(Branch { points, folds })
}
