//! Pseudo-arclength continuation of equilibria in one control parameter, through folds and
//! through the corners of the piecewise-smooth `step` albedo.
//!
//! Unknowns `(T, p)` with `G(T, p) = 0` (W m-2). Arclength is measured in scaled variables,
//! `ds^2 = (1/n) sum (dT_i / T_scale)^2 + (dp / p_scale)^2` with `T_scale` = 50 K and `p_scale`
//! the width of the range. Each step predicts along the unit tangent and corrects with Newton on
//! `G = 0` plus one linear constraint `<v, x> = level` (the hyperplane normal to the tangent for
//! pseudo-arclength, `p = value` to land on a range end), solved by block elimination with the
//! tridiagonal `G_T` (the bordering algorithm: `G_T a = -G`, `G_T b = -G_p`, then
//! `dp = (r - <v, a>) / (<v, b> + v_p)`). The factorisation at the converged point gives the
//! next tangent, and its Jacobian the leading eigenvalue, with no further evaluation. `G_p` is
//! in closed form for the fast control keys and a central difference otherwise.
//!
//! The `step` albedo makes `G` only piecewise smooth: the curve has a kink wherever the
//! interpolated edge crosses a band centre or face, and a sharp corner where ice first appears at
//! the pole (or vanishes at the equator), because the outermost half band's ice fraction
//! responds strongly. A hyperplane normal to the incoming tangent does not meet the outgoing
//! curve when the turn exceeds 90 degrees, so steps there shrink. When they reach
//! `CORNER_FRACTION` of the first step, the tangent of the outgoing piece is taken from the
//! linearisation just beyond the corner, and the corrector is constrained along the bisector of
//! the incoming and outgoing tangents, which both pieces cross transversally; each tangent is
//! oriented by the constraint its point was solved with. Where ice first appears at the pole the
//! two pieces meet almost head-on (a cusp in these variables): ordinary steps between an
//! ice-free (or ice-covered) and a partly covered state are refused there, so that the crossing
//! always goes through the bisector.
//!
//! A fold (saddle-node, smooth or at a corner) is where `dp/ds` changes sign between two
//! points. It is located as the zero of `dp/ds` along the curve, parametrised by the bisector of
//! the two tangents: regula falsi (Illinois) with a bisection whenever the bracket fails to halve,
//! which converges superlinearly at a smooth fold and brackets a corner (where `dp/ds` jumps),
//! until `p` moves by less than a tenth of `fold_tolerance` relative.
//!
//! Reference: Keller (1977), in Applications of Bifurcation Theory, Academic Press, 359-384;
//! Allgower and Georg, Introduction to Numerical Continuation Methods (1990/2003), chapters 2,
//! 6 and 10 (bordering, step control, piecewise-smooth problems).

use super::control::Controlled;
use super::stability::{SpectrumMethod, Stability};
use crate::config::spec::BranchesSpec;
use crate::config::ConfigError;
use crate::linalg::{dot, Tridiag, TridiagLu};
use crate::model::{Model, Workspace};

/// Temperature scale of the arclength metric, K.
const T_SCALE: f64 = 50.0;
/// Newton iterations allowed per correction.
const MAX_CORRECTOR_ITERATIONS: usize = 12;
/// Smallest cosine between successive tangents for an ordinary step.
const MIN_TANGENT_COSINE: f64 = 0.9;
/// Steps below this fraction of the first step trigger the corner crossing.
const CORNER_FRACTION: f64 = 1e-3;
/// Largest move of the northern ice edge in one ordinary step, degrees of latitude: where the
/// edge moves fast against the scaled metric (a small cap near its fold, where a small change
/// of state moves the edge many degrees) the points of a branch stay close enough that the
/// curve drawn through them in (control, ice edge) shows no kinks.
const MAX_EDGE_STEP_DEG: f64 = 2.0;
/// Steps at or below this fraction of the first step are not shortened for the ice edge's
/// sake (so the rule never drives a step down to the corner crossing).
const EDGE_STEP_FLOOR: f64 = 0.1;
/// Turning points of a branch closer than this many band widths in ice edge form one cluster
/// (the sub-band wiggles of the `step` albedo's edge rule span about one band: measured 0.6
/// to 0.9 band at 90 and 720 bands).
const CLUSTER_BANDS: f64 = 2.0;
/// The ice-edge window scanned for a cluster's extreme control reaches this many band widths
/// beyond its outermost turning points (and is widened while the extreme sits on its end).
const SCAN_BANDS: f64 = 2.0;

/// Options.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ContinuationOptions {
    /// Control range, lower end.
    pub from: f64,
    /// Control range, upper end.
    pub to: f64,
    /// First arclength step (scaled units).
    pub step: f64,
    /// Largest arclength step.
    pub max_step: f64,
    /// Smallest arclength step before giving up on a branch.
    pub min_step: f64,
    /// Point limit per branch.
    pub max_points: usize,
    /// Newton residual target (largest |G_i|), W m-2.
    pub tolerance_wm2: f64,
    /// Relative precision of fold locations in the control.
    pub fold_tolerance: f64,
}

impl ContinuationOptions {
    /// Options from a validated `[branches]` section and the Newton tolerance.
    pub fn from_spec(spec: &BranchesSpec, tolerance_wm2: f64) -> ContinuationOptions {
        ContinuationOptions {
            from: spec.from,
            to: spec.to,
            step: spec.step.min(spec.max_step),
            max_step: spec.max_step,
            min_step: 1e-9,
            max_points: spec.max_points,
            tolerance_wm2,
            fold_tolerance: 1e-7,
        }
    }
}

/// One point of a branch.
#[derive(Debug, Clone, PartialEq)]
pub struct BranchPoint {
    /// Control value.
    pub control: f64,
    /// Temperatures, K.
    pub state: Vec<f64>,
    /// `dp/ds`: control units per unit of scaled arclength, in the branch's point order.
    pub dpds: f64,
    /// Leading eigenvalue, 1/year.
    pub leading: f64,
    /// How the leading eigenvalue was computed.
    pub method: SpectrumMethod,
    /// Scaled arclength from the branch's first point.
    pub arclength: f64,
}

/// A located fold.
#[derive(Debug, Clone, PartialEq)]
pub struct FoldPoint {
    /// Control value at the fold.
    pub control: f64,
    /// State at the fold, K.
    pub state: Vec<f64>,
    /// Index (into the branch's points) of the point before the fold.
    pub after_point: usize,
    /// Whether the fold sits at a corner of the piecewise-smooth curve (the tangent jumps there)
    /// rather than at a smooth turning point.
    pub corner: bool,
    /// Whether the search converged to `fold_tolerance` (otherwise the best point found).
    pub converged: bool,
    /// Whether the control has a local minimum here (the branch lies at larger control on
    /// both sides), rather than a maximum; independent of the direction of travel.
    pub minimum: bool,
    /// How many turning points of the discrete curve this fold stands for: 1, or an odd number
    /// when sub-band wiggles of the `step` albedo's edge rule made a cluster of them (the fold
    /// is then the cluster's extreme control).
    pub turns: usize,
}

/// An equilibrium at a fixed control value, with its stability and sensitivity.
#[derive(Debug, Clone, PartialEq)]
pub struct FixedControl {
    /// Temperatures, K.
    pub state: Vec<f64>,
    /// Control value.
    pub control: f64,
    /// Leading eigenvalue, 1/year.
    pub leading: f64,
    /// How it was computed.
    pub method: SpectrumMethod,
    /// `dT/dp`, K per control unit (from `G_T dT/dp = -G_p`).
    pub dtdp: Vec<f64>,
}

/// Why a branch ends on one side.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum LegEnd {
    /// It left the control range (the last point sits on the range end).
    LeftRange,
    /// The point limit was reached.
    PointLimit,
    /// It closed on itself (an isola).
    Closed,
    /// The corrector failed at ever smaller steps at this control value.
    Stuck {
        /// Control value of the last point.
        control: f64,
    },
    /// It meets the symmetric states at a branch point (asymmetric branches on a globe; set by
    /// `symmetry`, never by the tracer).
    BranchPoint {
        /// Control value of the last point.
        control: f64,
    },
}

/// A traced branch.
#[derive(Debug, Clone, PartialEq)]
pub struct Branch {
    /// Points in arclength order.
    pub points: Vec<BranchPoint>,
    /// Folds along it, in arclength order.
    pub folds: Vec<FoldPoint>,
    /// How the branch ends at its first and its last point.
    pub ends: [LegEnd; 2],
}

/// Why continuation failed.
#[derive(Debug, thiserror::Error)]
pub enum ContinuationError {
    /// The control could not be applied.
    #[error(transparent)]
    Config(#[from] ConfigError),
    /// The starting point is not a regular equilibrium.
    #[error("continuation start at control {control} is not usable: {reason}")]
    Start {
        /// Control value of the start.
        control: f64,
        /// What is wrong.
        reason: String,
    },
}

/// A unit tangent (or constraint direction) in the scaled metric: `dT/ds` in K and `dp/ds` in
/// control units per unit of scaled arclength.
#[derive(Debug, Clone, PartialEq)]
struct Tan {
    dt: Vec<f64>,
    dp: f64,
}

impl Tan {
    fn zeros(n: usize) -> Tan {
        Tan {
            dt: vec![0.0; n],
            dp: 0.0,
        }
    }

    fn negate(&mut self) {
        self.dt.iter_mut().for_each(|v| *v = -*v);
        self.dp = -self.dp;
    }
}

/// The extra equation of a correction.
#[derive(Clone, Copy)]
enum Constraint<'c> {
    /// `<v, (T, p)> = level` in the scaled metric.
    Along(&'c Tan, f64),
    /// `p = value`.
    Control(f64),
    /// `T_k = value` (a local parametrisation by one band).
    Band(usize, f64),
    /// `(1 - theta) T_k + theta T_{k+1} = T_freeze(p)`: the interpolated profile freezes at
    /// one position, i.e. the ice edge is held there (the ice-edge parametrisation).
    Edge(usize, f64),
}

/// The metric weights.
#[derive(Debug, Clone, Copy)]
struct Metric {
    wt: f64,
    wp: f64,
}

impl Metric {
    fn inner(&self, at: &[f64], ap: f64, bt: &[f64], bp: f64) -> f64 {
        dot(at, bt) * self.wt + ap * bp * self.wp
    }

    fn tan(&self, a: &Tan, b: &Tan) -> f64 {
        self.inner(&a.dt, a.dp, &b.dt, b.dp)
    }

    fn dist(&self, at: &[f64], ap: f64, bt: &[f64], bp: f64) -> f64 {
        let mut s = 0.0;
        for (x, y) in at.iter().zip(bt) {
            s += (x - y) * (x - y);
        }
        (s * self.wt + (ap - bp) * (ap - bp) * self.wp).sqrt()
    }
}

/// A point on the curve with its unit tangent (oriented along the direction of travel).
#[derive(Debug, Clone)]
struct Node {
    t: Vec<f64>,
    p: f64,
    tan: Tan,
    leading: f64,
    method: SpectrumMethod,
}

/// The continuation machinery for one control family; all buffers are allocated once.
pub struct Tracer<'a> {
    fam: &'a Controlled,
    model: Model,
    model_p: f64,
    scratch: Model,
    ws: Workspace,
    n: usize,
    metric: Metric,
    opts: ContinuationOptions,
    jac: Tridiag,
    lu: TridiagLu,
    g: Vec<f64>,
    gp: Vec<f64>,
    a: Vec<f64>,
    b: Vec<f64>,
    tmp: Vec<f64>,
    /// Corrector result.
    xt: Vec<f64>,
    /// Predictor scratch.
    pt: Vec<f64>,
    stab: Stability,
    /// Linearisations performed (G, G_T, G_p and a factorisation each).
    pub linearisations: u64,
}

impl<'a> Tracer<'a> {
    /// Buffers for `fam` with `opts`.
    pub fn new(fam: &'a Controlled, opts: ContinuationOptions) -> Tracer<'a> {
        let model = fam.base_model().clone();
        let n = model.len();
        let p_scale = (opts.to - opts.from).abs().max(f64::MIN_POSITIVE);
        Tracer {
            fam,
            model_p: fam.base_value(),
            scratch: model.clone(),
            ws: Workspace::new(n),
            n,
            metric: Metric {
                wt: 1.0 / (n as f64 * T_SCALE * T_SCALE),
                wp: 1.0 / (p_scale * p_scale),
            },
            opts,
            jac: Tridiag::zeros(n),
            lu: TridiagLu::new(n, &model.grid.weights),
            g: vec![0.0; n],
            gp: vec![0.0; n],
            a: vec![0.0; n],
            b: vec![0.0; n],
            tmp: vec![0.0; n],
            xt: vec![0.0; n],
            pt: vec![0.0; n],
            stab: Stability::new(&model),
            model,
            linearisations: 0,
        }
    }

    /// The model at the control value of the last evaluation.
    pub fn model(&self) -> &Model {
        &self.model
    }

    fn set_p(&mut self, p: f64) -> Result<(), ConfigError> {
        if p != self.model_p {
            self.fam.apply(&mut self.model, p)?;
            self.model_p = p;
        }
        Ok(())
    }

    /// `G`, `G_T` (factored) and `G_p` at `(t, p)`. Ok(false) when `G_T` is singular.
    fn linearise(&mut self, t: &[f64], p: f64) -> Result<bool, ConfigError> {
        self.linearisations += 1;
        self.set_p(p)?;
        self.model.heating(0.0, t, &mut self.ws, &mut self.g);
        self.model.heating_jacobian(0.0, t, &mut self.ws, &mut self.jac);
        if !self.fam.heating_derivative(&self.model, p, t, &mut self.gp) {
            // Central difference; the step balances truncation and round-off (common practice).
            let h = 1e-6 * p.abs().max(1e-3 / self.metric.wp.sqrt());
            self.fam.apply(&mut self.scratch, p + h)?;
            self.scratch.heating(0.0, t, &mut self.ws, &mut self.gp);
            self.fam.apply(&mut self.scratch, p - h)?;
            self.scratch.heating(0.0, t, &mut self.ws, &mut self.tmp);
            for i in 0..self.n {
                self.gp[i] = (self.gp[i] - self.tmp[i]) / (2.0 * h);
            }
        }
        Ok(self.lu.factor(&self.jac).is_ok())
    }

    /// The unit tangent from the current factorisation, oriented with `dp >= 0`.
    fn tangent_into(&mut self, out: &mut Tan) -> bool {
        for i in 0..self.n {
            out.dt[i] = -self.gp[i];
        }
        self.lu.solve(&mut out.dt);
        let zz = dot(&out.dt, &out.dt);
        let c = 1.0 / (zz * self.metric.wt + self.metric.wp).sqrt();
        if !c.is_finite() || out.dt.iter().any(|v| !v.is_finite()) {
            return false;
        }
        out.dt.iter_mut().for_each(|v| *v *= c);
        out.dp = c;
        true
    }

    /// Newton on `G = 0` and the constraint from `(pred_t, pred_p)`. On success the state is
    /// in `self.xt`, the linearisation (and factorisation) is that of the result, and the
    /// control and iteration count are returned. Fails when an iterate strays farther than
    /// `max_dist` (scaled) from the predictor, diverges, or leaves the valid range.
    fn correct(
        &mut self,
        pred_t: &[f64],
        pred_p: f64,
        c: Constraint<'_>,
        max_dist: f64,
    ) -> Result<Option<(f64, usize)>, ConfigError> {
        let mut xt = std::mem::take(&mut self.xt);
        xt.copy_from_slice(pred_t);
        let r = self.correct_inner(&mut xt, pred_t, pred_p, c, max_dist);
        self.xt = xt;
        r
    }

    fn correct_inner(
        &mut self,
        xt: &mut [f64],
        pred_t: &[f64],
        pred_p: f64,
        c: Constraint<'_>,
        max_dist: f64,
    ) -> Result<Option<(f64, usize)>, ConfigError> {
        let mut p = pred_p;
        let (lo, hi) = self.model.valid_range();
        let m = self.metric;
        let mut prev_step = f64::INFINITY;
        // d(T_freeze)/dp for the ice-edge constraint: nonzero only for albedo controls.
        let dfreeze = match c {
            Constraint::Edge(..) if self.fam.key.starts_with("albedo.") => {
                let h = 1e-6 * p.abs().max(1e-3 / m.wp.sqrt());
                let ok = self.fam.apply(&mut self.scratch, p + h).is_ok();
                let up = self.scratch.albedo.freeze;
                let ok = ok && self.fam.apply(&mut self.scratch, p - h).is_ok();
                if !ok {
                    return Ok(None);
                }
                (up - self.scratch.albedo.freeze) / (2.0 * h)
            }
            _ => 0.0,
        };
        for it in 0..=MAX_CORRECTOR_ITERATIONS {
            // A control value the family refuses (e.g. CO2 <= 0) ends this correction.
            match self.linearise(xt, p) {
                Ok(true) => {}
                Ok(false) | Err(_) => return Ok(None),
            }
            let res = self.g.iter().fold(0.0_f64, |a, v| a.max(v.abs()));
            if !res.is_finite() {
                return Ok(None);
            }
            let (cres, scale) = match c {
                Constraint::Along(v, level) => (level - m.inner(&v.dt, v.dp, xt, p), 1.0 + level.abs()),
                Constraint::Control(value) => (value - p, value.abs().max(1.0 / m.wp.sqrt())),
                Constraint::Band(k, value) => (value - xt[k], value.abs().max(1.0)),
                Constraint::Edge(k, th) => {
                    let tf = self.model.albedo.freeze;
                    (tf - ((1.0 - th) * xt[k] + th * xt[k + 1]), tf.abs().max(1.0))
                }
            };
            // Round-off floor of G: the transport terms cancel to about eps |G_T| |T|.
            let jmax = self.jac.diag.iter().fold(0.0_f64, |a, v| a.max(v.abs()));
            let tmax = xt.iter().fold(0.0_f64, |a, v| a.max(v.abs()));
            let floor = f64::EPSILON * jmax * tmax;
            if res <= self.opts.tolerance_wm2.max(floor) && cres.abs() <= 1e-12 * scale {
                return Ok(Some((p, it)));
            }
            if it == MAX_CORRECTOR_ITERATIONS {
                break;
            }
            for i in 0..self.n {
                self.a[i] = -self.g[i];
                self.b[i] = -self.gp[i];
            }
            self.lu.solve(&mut self.a);
            self.lu.solve(&mut self.b);
            let dp = match c {
                Constraint::Along(v, _) => {
                    let va = dot(&v.dt, &self.a) * m.wt;
                    let vb = dot(&v.dt, &self.b) * m.wt;
                    (cres - va) / (vb + v.dp * m.wp)
                }
                Constraint::Control(_) => cres,
                // dT_k = a_k + b_k dp must close the gap.
                Constraint::Band(k, _) => (cres - self.a[k]) / self.b[k],
                Constraint::Edge(k, th) => {
                    let ca = (1.0 - th) * self.a[k] + th * self.a[k + 1];
                    let cb = (1.0 - th) * self.b[k] + th * self.b[k + 1];
                    (cres - ca) / (cb - dfreeze)
                }
            };
            if !dp.is_finite() {
                return Ok(None);
            }
            let mut step2 = dp * dp * m.wp;
            for ((x, a), b) in xt.iter_mut().zip(&self.a).zip(&self.b) {
                let d = a + b * dp;
                step2 += d * d * m.wt;
                *x += d;
            }
            p += dp;
            let step = step2.sqrt();
            // Divergence: Newton steps must not grow (kinks of G allow some slack).
            if !step.is_finite() || (it >= 1 && step > 2.0 * prev_step && step > 1e-12) {
                return Ok(None);
            }
            prev_step = step;
            if xt.iter().any(|v| !(*v >= lo && *v <= hi)) || m.dist(xt, p, pred_t, pred_p) > max_dist {
                return Ok(None);
            }
        }
        Ok(None)
    }

    /// A node at the corrector's result, with its tangent oriented to increase `<along, x>` (the
    /// constraint the step was solved with, which the curve crosses in that direction), or with
    /// `dp >= 0` when `along` is `None`. (Orienting by the secant fails at a cusp-like corner,
    /// where the secant from the incoming piece points back along the outgoing one.)
    fn node_at_result(&mut self, p: f64, along: Option<&Tan>) -> Option<Node> {
        let mut tan = Tan::zeros(self.n);
        if !self.tangent_into(&mut tan) {
            return None;
        }
        if let Some(v) = along {
            if self.metric.tan(&tan, v) < 0.0 {
                tan.negate();
            }
        }
        // The eigenvalue is computed only for accepted nodes (`stabilise`).
        Some(Node {
            t: self.xt.clone(),
            p,
            tan,
            leading: f64::NAN,
            method: SpectrumMethod::SymmetricTridiagonal,
        })
    }

    /// The leading eigenvalue of an accepted node.
    fn stabilise(&mut self, nd: &mut Node) -> Result<(), ConfigError> {
        self.set_p(nd.p)?;
        let (leading, method) = self.stab.leading(&self.model, 0.0, &nd.t);
        nd.leading = leading;
        nd.method = method;
        Ok(())
    }

    /// The node at an equilibrium `t` at control `p` (tangent with `dp >= 0`).
    fn start_node(&mut self, t: &[f64], p: f64) -> Result<Node, ContinuationError> {
        let bad = |reason: &str| ContinuationError::Start {
            control: p,
            reason: reason.to_string(),
        };
        self.set_p(p)?;
        let r = self.correct(t, p, Constraint::Control(p), 1.0)?;
        let Some((p, _)) = r else {
            return Err(bad("Newton at fixed control does not converge from it"));
        };
        let mut nd = self
            .node_at_result(p, None)
            .ok_or_else(|| bad("singular Jacobian (the start sits on a fold)"))?;
        self.stabilise(&mut nd)?;
        Ok(nd)
    }

    /// Predictor `from + h tan` into `self.pt`; returns its control.
    fn predict(&mut self, from_t: &[f64], from_p: f64, tan: &Tan, h: f64) -> f64 {
        for ((q, t), d) in self.pt.iter_mut().zip(from_t).zip(&tan.dt) {
            *q = t + h * d;
        }
        from_p + h * tan.dp
    }

    /// One ordinary pseudo-arclength step of length `ds` from `cur`.
    fn step(&mut self, cur: &Node, ds: f64) -> Result<Option<(Node, usize)>, ConfigError> {
        let pp = self.predict(&cur.t, cur.p, &cur.tan, ds);
        let pt = std::mem::take(&mut self.pt);
        let level = self.metric.inner(&cur.tan.dt, cur.tan.dp, &pt, pp);
        let r = self.correct(&pt, pp, Constraint::Along(&cur.tan, level), ds.max(1e-12));
        self.pt = pt;
        let Some((p, iters)) = r? else { return Ok(None) };
        Ok(self.node_at_result(p, Some(&cur.tan)).map(|nd| (nd, iters)))
    }

    /// Ice measure (ice-covered length in x over the whole grid) of a state.
    fn ice_measure(&self, t: &[f64]) -> f64 {
        let g = &self.model.grid;
        self.model.ice_measure_in(t, g.x_faces[0], g.x_faces[g.len()])
    }

    /// Whether an ice measure means ice free (-1), ice covered (+1) or partly covered (0).
    fn ice_end(&self, measure: f64) -> i32 {
        let g = &self.model.grid;
        let total = g.x_faces[g.len()] - g.x_faces[0];
        if measure <= 1e-12 * total {
            -1
        } else if measure >= total * (1.0 - 1e-12) {
            1
        } else {
            0
        }
    }

    /// Cross a corner just ahead of `cur` (steps of `ds` along its tangent failed): take the
    /// outgoing piece's tangent from the linearisation beyond the corner and correct along the
    /// bisector of the two tangents. `prev_ice` is the ice measure of the node before `cur`.
    ///
    /// Where the two pieces meet almost head-on (a cusp, as where ice first appears at the
    /// pole), the incoming curve can bend back across the bisector's level set; a candidate is
    /// rejected as such a reversal when its ice measure goes back against the incoming trend
    /// (or stays put after an ice-free or snowball stretch). The ice measure is monotone along
    /// partly ice-covered branches (Q is a function of the edge there, North 1975).
    fn cross_corner(&mut self, cur: &Node, ds: f64, prev_ice: f64) -> Result<Option<Node>, ConfigError> {
        let m = self.metric;
        let ice_cur = self.ice_measure(&cur.t);
        let trend = ice_cur - prev_ice;
        let mut best: Option<(Node, f64)> = None;
        for h in [4.0 * ds, 16.0 * ds, 64.0 * ds] {
            let py = self.predict(&cur.t, cur.p, &cur.tan, h);
            let y = self.pt.clone();
            match self.linearise(&y, py) {
                Ok(true) => {}
                _ => continue,
            }
            let mut t2 = Tan::zeros(self.n);
            if !self.tangent_into(&mut t2) {
                continue;
            }
            for s in [1.0, -1.0] {
                let mut v = Tan {
                    dt: cur.tan.dt.iter().zip(&t2.dt).map(|(a, b)| a + s * b).collect(),
                    dp: cur.tan.dp + s * t2.dp,
                };
                let norm = m.tan(&v, &v).sqrt();
                if norm < 1e-6 {
                    continue;
                }
                v.dt.iter_mut().for_each(|x| *x /= norm);
                v.dp /= norm;
                let v1 = m.tan(&v, &cur.tan);
                let v2 = s * m.tan(&v, &t2);
                if v1 <= 1e-6 || v2 <= 1e-6 {
                    continue;
                }
                // Beyond the corner along v, then along the outgoing tangent from y.
                let r = 2.0 * h * v1;
                let level = m.inner(&v.dt, v.dp, &cur.t, cur.p) + r;
                let alpha = (r - h * v1) / v2;
                let pred: Vec<f64> = y.iter().zip(&t2.dt).map(|(a, b)| a + alpha * s * b).collect();
                let pred_p = py + alpha * s * t2.dp;
                if let Some((p, _)) = self.correct(&pred, pred_p, Constraint::Along(&v, level), 8.0 * h)? {
                    let step = self.ice_measure(&self.xt) - ice_cur;
                    let tiny = 1e-12;
                    let reversal = if trend.abs() > tiny {
                        step * trend < 0.0
                    } else {
                        step.abs() <= tiny
                    };
                    if reversal {
                        continue;
                    }
                    let d = m.dist(&self.xt, p, &pred, pred_p);
                    if best.as_ref().is_none_or(|(_, bd)| d < *bd) {
                        if let Some(nd) = self.node_at_result(p, Some(&v)) {
                            best = Some((nd, d));
                        }
                    }
                }
            }
            if best.is_some() {
                break;
            }
        }
        Ok(best.map(|(nd, _)| nd))
    }

    /// Locate the fold between `a` and `b` (their tangents' `dp` differ in sign) as the
    /// extremum of `p` along the curve, by golden-section search on the bisector parameter.
    fn locate_fold(&mut self, a: &Node, b: &Node, corner: bool) -> Result<FoldPoint, ConfigError> {
        let m = self.metric;
        // Bisector of the two tangents: both pieces cross its level sets transversally.
        let mut v = Tan {
            dt: a.tan.dt.iter().zip(&b.tan.dt).map(|(x, y)| x + y).collect(),
            dp: a.tan.dp + b.tan.dp,
        };
        let mut norm = m.tan(&v, &v).sqrt();
        if norm < 1e-3 {
            // Tangents opposite: use the chord.
            v = Tan {
                dt: b.t.iter().zip(&a.t).map(|(x, y)| x - y).collect(),
                dp: b.p - a.p,
            };
            norm = m.tan(&v, &v).sqrt();
        }
        v.dt.iter_mut().for_each(|x| *x /= norm);
        v.dp /= norm;
        let base = m.inner(&v.dt, v.dp, &a.t, a.p);
        let len = m.inner(&v.dt, v.dp, &b.t, b.p) - base;
        // Minimise sign * p: a minimum of p when dp/ds goes from negative to positive.
        let sign = if a.tan.dp < 0.0 { 1.0 } else { -1.0 };
        let chord = m.dist(&a.t, a.p, &b.t, b.p);
        let mut best: (f64, Vec<f64>, f64) = if sign * a.p <= sign * b.p {
            (a.p, a.t.clone(), 0.0)
        } else {
            (b.p, b.t.clone(), len)
        };
        let mut pred = vec![0.0; self.n];
        let mut tan = Tan::zeros(self.n);
        // The curve point at bisector parameter sigma: (p, dp/ds with the tangent oriented along
        // v); keeps the most extreme p.
        let mut eval = |tr: &mut Tracer<'a>, best: &mut (f64, Vec<f64>, f64), sigma: f64| {
            // Predictor: the chord at the same fraction.
            let f = if len > 0.0 { sigma / len } else { 0.5 };
            for ((q, x), y) in pred.iter_mut().zip(&a.t).zip(&b.t) {
                *q = x + f * (y - x);
            }
            let pred_p = a.p + f * (b.p - a.p);
            let r = tr.correct(
                &pred,
                pred_p,
                Constraint::Along(&v, base + sigma),
                2.0 * chord + 1e-9,
            );
            let Ok(Some((p, _))) = r else { return None };
            if sign * p < sign * best.0 {
                best.0 = p;
                best.1.copy_from_slice(&tr.xt);
                best.2 = sigma;
            }
            if !tr.tangent_into(&mut tan) {
                return Some((p, 0.0));
            }
            let along = m.tan(&tan, &v);
            Some((p, if along < 0.0 { -tan.dp } else { tan.dp }))
        };
        // The zero of dp/ds: regula falsi (Illinois) with bisection whenever the bracket does
        // not halve, so that corners (where dp/ds jumps) are bracketed too.
        let (mut lo, mut hi) = (0.0, len);
        let (mut g_lo, mut g_hi) = (a.tan.dp, b.tan.dp);
        let g_scale = g_lo.abs().max(g_hi.abs());
        let mut side = 0i32;
        let mut p_prev = f64::NAN;
        let mut width_before = hi - lo;
        let mut converged = false;
        for it in 0..200 {
            let falsi = lo - g_lo * (hi - lo) / (g_hi - g_lo);
            let bisect = it % 3 == 2 && hi - lo > 0.5 * width_before;
            if it % 3 == 2 {
                width_before = hi - lo;
            }
            let mut sigma = if bisect || !falsi.is_finite() || falsi <= lo || falsi >= hi {
                0.5 * (lo + hi)
            } else {
                falsi
            };
            let mut r = eval(self, &mut best, sigma);
            if r.is_none() && sigma != 0.5 * (lo + hi) {
                sigma = 0.5 * (lo + hi);
                r = eval(self, &mut best, sigma);
            }
            let Some((p, g)) = r else { break };
            let tol = self.opts.fold_tolerance * p.abs().max(1e-3 / m.wp.sqrt());
            // Converged when p stops moving near the zero (smooth fold) or in a tight bracket
            // (corner).
            let near = g.abs() <= 1e-2 * g_scale || hi - lo <= 1e-4 * len;
            if g == 0.0 || ((p - p_prev).abs() <= 0.1 * tol && near) || hi - lo <= 1e-14 * (1.0 + base.abs())
            {
                converged = true;
                break;
            }
            p_prev = p;
            if (g < 0.0) == (g_lo < 0.0) {
                lo = sigma;
                g_lo = g;
                if side == -1 {
                    g_hi *= 0.5;
                }
                side = -1;
            } else {
                hi = sigma;
                g_hi = g;
                if side == 1 {
                    g_lo *= 0.5;
                }
                side = 1;
            }
        }
        let (control, state, _) = best;
        Ok(FoldPoint {
            control,
            state,
            after_point: 0,
            corner,
            converged,
            minimum: sign > 0.0,
            turns: 1,
        })
    }

    /// Land on the range end `edge` between `cur` (inside) and `next` (outside).
    fn land(&mut self, cur: &Node, next: &Node, edge: f64) -> Result<Option<Node>, ConfigError> {
        let f = (edge - cur.p) / (next.p - cur.p);
        let pred: Vec<f64> = cur.t.iter().zip(&next.t).map(|(a, b)| a + f * (b - a)).collect();
        let d = self.metric.dist(&cur.t, cur.p, &next.t, next.p);
        if let Some((p, _)) = self.correct(&pred, edge, Constraint::Control(edge), d + 1e-9)? {
            return Ok(self.node_at_result(p, Some(&cur.tan)));
        }
        Ok(None)
    }

    /// Trace from `start` along its tangent until the branch leaves the range, closes, or the
    /// point budget is spent. Pushes the nodes after the start and the folds (with
    /// `after_point` counted in this leg, 0 = the start).
    fn leg(
        &mut self,
        start: &Node,
        budget: usize,
        nodes: &mut Vec<Node>,
        folds: &mut Vec<FoldPoint>,
    ) -> Result<LegEnd, ConfigError> {
        let (pmin, pmax) = (self.opts.from.min(self.opts.to), self.opts.from.max(self.opts.to));
        let corner_step = (CORNER_FRACTION * self.opts.step).max(self.opts.min_step);
        let mut cur = start.clone();
        let mut cur_ice = self.ice_measure(&start.t);
        let mut prev_ice = cur_ice;
        let mut ds = self.opts.step;
        let mut travelled = 0.0;
        loop {
            if nodes.len() >= budget {
                return Ok(LegEnd::PointLimit);
            }
            let mut corner = false;
            let mut next = None;
            let stepped = self.step(&cur, ds)?;
            // A correction that lands far to the side of the tangent has jumped to another
            // piece across a cusp (the hyperplane cuts both pieces there): refuse it, so that
            // the corner crossing (oriented by the bisector) takes over.
            //
            // Also refuse a step between an ice-free (or ice-covered) state and a partly covered
            // one: where ice first appears at the pole the two pieces meet almost head-on, the
            // step can land on the far piece with no sign of the turn, and only the corner
            // crossing orients the outgoing tangent correctly.
            let cur_end = self.ice_end(cur_ice);
            let stepped = stepped.filter(|(nd, _)| self.ice_end(self.ice_measure(&nd.t)) == cur_end);
            let stepped = stepped.filter(|(nd, _)| {
                let chord = self.metric.dist(&nd.t, nd.p, &cur.t, cur.p);
                let along = self.metric.inner(&cur.tan.dt, cur.tan.dp, &nd.t, nd.p)
                    - self.metric.inner(&cur.tan.dt, cur.tan.dp, &cur.t, cur.p);
                along
                    >= if ds <= corner_step {
                        0.5
                    } else {
                        MIN_TANGENT_COSINE
                    } * chord
            });
            // A step that moves the ice edge too far is shortened (above a floor), so the
            // branch is sampled finely where its edge moves fast.
            let edge_far = stepped.as_ref().is_some_and(|(nd, _)| {
                ds > EDGE_STEP_FLOOR * self.opts.step
                    && (self.model.ice_edges(&nd.t).0 - self.model.ice_edges(&cur.t).0).abs()
                        > MAX_EDGE_STEP_DEG
            });
            if edge_far {
                ds *= 0.5;
                continue;
            }
            if let Some((nd, iters)) = stepped {
                let cosang = self.metric.tan(&nd.tan, &cur.tan);
                if cosang >= MIN_TANGENT_COSINE || ds <= corner_step {
                    corner = cosang < MIN_TANGENT_COSINE;
                    next = Some(nd);
                    // Step control on the corrector's effort and the turn of the tangent.
                    let grow = if iters <= 2 && cosang > 0.995 {
                        1.5
                    } else if iters >= 5 || cosang < 0.98 {
                        0.6
                    } else {
                        1.0
                    };
                    ds = (ds * grow).clamp(self.opts.min_step, self.opts.max_step);
                } else {
                    ds *= 0.5;
                }
            } else if ds <= corner_step {
                if let Some(nd) = self.cross_corner(&cur, ds, prev_ice)? {
                    corner = true;
                    next = Some(nd);
                    ds = (8.0 * ds).min(self.opts.max_step);
                } else {
                    ds *= 0.5;
                }
            } else {
                ds *= 0.5;
            }
            let Some(mut nd) = next else {
                if ds < self.opts.min_step {
                    return Ok(LegEnd::Stuck { control: cur.p });
                }
                continue;
            };
            if nd.tan.dp * cur.tan.dp < 0.0 {
                let mut f = self.locate_fold(&cur, &nd, corner)?;
                f.after_point = nodes.len();
                folds.push(f);
            }
            if nd.p < pmin || nd.p > pmax {
                let edge = if nd.p < pmin { pmin } else { pmax };
                // A leg that starts on the range end leaves it at once: landing again would
                // repeat the start.
                if let Some(mut end) = self.land(&cur, &nd, edge)? {
                    if self.metric.dist(&end.t, end.p, &cur.t, cur.p) > 1e-12 {
                        self.stabilise(&mut end)?;
                        nodes.push(end);
                    }
                }
                return Ok(LegEnd::LeftRange);
            }
            self.stabilise(&mut nd)?;
            travelled += self.metric.dist(&nd.t, nd.p, &cur.t, cur.p);
            let back = self.metric.dist(&nd.t, nd.p, &start.t, start.p);
            nodes.push(nd.clone());
            if travelled > 10.0 * self.opts.max_step && back < 0.5 * ds.max(self.opts.step) {
                return Ok(LegEnd::Closed);
            }
            prev_ice = cur_ice;
            cur_ice = self.ice_measure(&nd.t);
            cur = nd;
        }
    }

    /// Trace the whole branch through an equilibrium `start` at control `p`, both ways.
    pub fn trace(&mut self, start: &[f64], p: f64) -> Result<Branch, ContinuationError> {
        let first = self.start_node(start, p)?;
        let budget = self.opts.max_points.max(2);
        let (mut back_nodes, mut back_folds) = (Vec::new(), Vec::new());
        let (mut fwd_nodes, mut fwd_folds) = (Vec::new(), Vec::new());
        let mut rev = first.clone();
        rev.tan.negate();
        let end_back = self.leg(&rev, budget / 2, &mut back_nodes, &mut back_folds)?;
        let end_fwd = if end_back == LegEnd::Closed {
            LegEnd::Closed
        } else {
            self.leg(&first, budget - back_nodes.len(), &mut fwd_nodes, &mut fwd_folds)?
        };
        // One arclength order: reversed backward leg, the start, the forward leg.
        let nb = back_nodes.len();
        let mut nodes: Vec<Node> = back_nodes.into_iter().rev().collect();
        for nd in nodes.iter_mut() {
            nd.tan.negate();
        }
        nodes.push(first);
        nodes.extend(fwd_nodes);
        let mut folds: Vec<FoldPoint> = back_folds
            .into_iter()
            .map(|mut f| {
                // Backward leg: between its nodes k and k+1 (k = 0 the start) means between
                // assembled indices nb - 1 - k and nb - k.
                f.after_point = nb.saturating_sub(1 + f.after_point);
                f
            })
            .collect();
        folds.reverse();
        folds.extend(fwd_folds.into_iter().map(|mut f| {
            f.after_point += nb;
            f
        }));
        let folds = self.resolve_folds(&nodes, folds)?;
        let mut arclength = 0.0;
        let mut points: Vec<BranchPoint> = Vec::with_capacity(nodes.len());
        for (k, nd) in nodes.iter().enumerate() {
            if k > 0 {
                let pr = &nodes[k - 1];
                arclength += self.metric.dist(&nd.t, nd.p, &pr.t, pr.p);
            }
            points.push(BranchPoint {
                control: nd.p,
                state: nd.t.clone(),
                dpds: nd.tan.dp,
                leading: nd.leading,
                method: nd.method,
                arclength,
            });
        }
        Ok(Branch {
            points,
            folds,
            ends: [end_back, end_fwd],
        })
    }

    /// Newton at fixed control `p` from `guess`, accepted when it stays within `max_dist`
    /// (scaled metric) of the guess; with the leading eigenvalue and `dT/dp` there.
    pub fn equilibrium_at(
        &mut self,
        guess: &[f64],
        p: f64,
        max_dist: f64,
    ) -> Result<Option<FixedControl>, ConfigError> {
        let Some((p, _)) = self.correct(guess, p, Constraint::Control(p), max_dist)? else {
            return Ok(None);
        };
        let mut dtdp: Vec<f64> = self.gp.iter().map(|g| -g).collect();
        self.lu.solve(&mut dtdp);
        let jac = std::mem::replace(&mut self.jac, Tridiag::zeros(0));
        let (leading, method) = self.stab.leading_from_jacobian(&self.model, &jac);
        self.jac = jac;
        Ok(Some(FixedControl {
            state: self.xt.clone(),
            control: p,
            leading,
            method,
            dtdp,
        }))
    }

    /// The equilibrium whose band `k` sits exactly at `value` (K), with the control free: Newton
    /// on `G = 0, T_k = value` from `(guess, guess_p)`. Returns the state and the control.
    pub fn pinned(
        &mut self,
        k: usize,
        value: f64,
        guess: &[f64],
        guess_p: f64,
    ) -> Result<Option<(Vec<f64>, f64)>, ConfigError> {
        let Some((p, _)) = self.correct(guess, guess_p, Constraint::Band(k, value), 100.0)? else {
            return Ok(None);
        };
        Ok(Some((self.xt.clone(), p)))
    }

    /// Scaled distance between two states with their controls.
    pub fn distance(&self, at: &[f64], ap: f64, bt: &[f64], bp: f64) -> f64 {
        self.metric.dist(at, ap, bt, bp)
    }
}

/// Trace the whole branch through an equilibrium `start` at control `p`, both ways.
pub fn trace_branch(
    fam: &Controlled,
    start: &[f64],
    p: f64,
    opts: ContinuationOptions,
) -> Result<Branch, ContinuationError> {
    Tracer::new(fam, opts).trace(start, p)
}

impl Tracer<'_> {
    /// The warm start of the leading-eigenvalue iteration (for checkpoints; NaN: none).
    pub fn eigen_guess(&self) -> f64 {
        self.stab.warm_start()
    }

    /// Restore a warm start saved with [`eigen_guess`](Self::eigen_guess).
    pub fn set_eigen_guess(&mut self, guess: f64) {
        self.stab.set_warm_start(guess);
    }
}

/// A state on the curve with its northern ice edge held at `x`.
#[derive(Debug, Clone)]
struct EdgePoint {
    /// Ice edge, `x = sin(latitude)`.
    x: f64,
    /// Control value.
    p: f64,
    /// Temperatures, K.
    t: Vec<f64>,
    /// `dp/dx` along the curve (within one smooth piece).
    slope: f64,
}

/// Fold clusters: the sub-band wiggles of the discrete curve.
///
/// With the `step` albedo the curve is smooth only between the ice-edge positions where the
/// edge crosses a band centre or face (the edge rule switches pieces there). Near a fold, where
/// `dp/ds` is small, these kinks make the discrete curve wiggle: a cluster of turning points
/// within about one band of ice edge, which ordinary steps may step over. Each cluster found
/// along a branch (turning points closer than `CLUSTER_BANDS` bands, none at the ice-free or
/// snowball end) is one fold of the model when it holds an odd number of turning points, and
/// none when even (a wiggle with no net turn). An odd cluster is reported at the discrete
/// curve's extreme control: on partly ice-covered branches the control is a function of the
/// northern ice edge (North 1975, J. Atmos. Sci. 32), so the curve is followed by the ice-edge
/// parametrisation (`Constraint::Edge`), scanned piece by piece over a window around the
/// cluster (every kink, and the zero of `dp/dx` inside any piece whose end slopes bracket one,
/// by regula falsi). Where that parametrisation does not hold (no single polar cap), the
/// turning points located along the curve are kept as they are.
impl Tracer<'_> {
    /// Northern ice-edge position `x = sin(latitude)` of a state, read as one polar cap.
    fn edge_x(&self, t: &[f64]) -> f64 {
        1.0 - self.model.albedo.ice_measure_in(&self.model.grid, t, 0.0, 1.0)
    }

    /// Width in `x` of the band holding `x`.
    fn band_width_at(&self, x: f64) -> f64 {
        let g = &self.model.grid;
        let n = g.len();
        g.dx[g.x_faces[1..n].partition_point(|&f| f <= x)]
    }

    /// `d(T_freeze)/dp` at `p` (nonzero only for albedo controls).
    fn freeze_slope(&mut self, p: f64) -> Option<f64> {
        if !self.fam.key.starts_with("albedo.") {
            return Some(0.0);
        }
        let h = 1e-6 * p.abs().max(1e-3 / self.metric.wp.sqrt());
        self.fam.apply(&mut self.scratch, p + h).ok()?;
        let up = self.scratch.albedo.freeze;
        self.fam.apply(&mut self.scratch, p - h).ok()?;
        Some((up - self.scratch.albedo.freeze) / (2.0 * h))
    }

    /// The equilibrium with its northern ice edge at `x`, by Newton from `(guess, guess_p)`;
    /// `None` when it does not converge or its ice is not one polar cap with that edge.
    fn at_edge(&mut self, x: f64, guess: &[f64], guess_p: f64) -> Result<Option<EdgePoint>, ConfigError> {
        let Some((k, th)) = self.model.albedo.line_at(&self.model.grid, x) else {
            return Ok(None);
        };
        let Some((p, _)) = self.correct(guess, guess_p, Constraint::Edge(k, th), 1.0)? else {
            return Ok(None);
        };

        // Round-off of the ice measure is ~1e-15; a different edge means other crossings.
        if (self.edge_x(&self.xt) - x).abs() > 1e-9 {
            return Ok(None);
        }
        // Along the pinned family G_T dT = -G_p dp, and (1 - theta) dT_k + theta dT_{k+1}
        // + (T_{k+1} - T_k) dtheta = T_freeze' dp.
        for i in 0..self.n {
            self.b[i] = -self.gp[i];
        }
        self.lu.solve(&mut self.b);
        let Some(df) = self.freeze_slope(p) else {
            return Ok(None);
        };
        let cb = (1.0 - th) * self.b[k] + th * self.b[k + 1];
        let g = &self.model.grid;
        let dtheta_dx = 1.0 / (g.x_centres[k + 1] - g.x_centres[k]);
        let slope = -(self.xt[k + 1] - self.xt[k]) * dtheta_dx / (cb - df);
        if !slope.is_finite() {
            return Ok(None);
        }
        Ok(Some(EdgePoint {
            x,
            p,
            t: self.xt.clone(),
            slope,
        }))
    }

    /// [`at_edge`](Self::at_edge) at `x` from `from`, through intermediate edges (halving the
    /// move, up to 2^10 substeps) where Newton does not converge in one move (near the pole
    /// the curve turns sharply).
    fn march(&mut self, from: &EdgePoint, x: f64) -> Result<Option<EdgePoint>, ConfigError> {
        let mut cur = from.clone();
        let mut h = x - from.x;
        let mut halvings = 0;
        while cur.x != x {
            let target = if (x - cur.x).abs() <= h.abs() {
                x
            } else {
                cur.x + h
            };
            match self.at_edge(target, &cur.t, cur.p)? {
                Some(q) => cur = q,
                None if halvings < 10 => {
                    h *= 0.5;
                    halvings += 1;
                }
                None => return Ok(None),
            }
        }
        Ok(Some(cur))
    }

    /// The extreme control (the least when `minimum`) of the curve over ice edges in
    /// `[lo, hi]`, scanned piece by piece from `start`: `(point, at a kink, converged)`.
    fn edge_extremum(
        &mut self,
        lo: f64,
        hi: f64,
        minimum: bool,
        start: &EdgePoint,
    ) -> Result<Option<(EdgePoint, bool, bool)>, ConfigError> {
        let sign = if minimum { 1.0 } else { -1.0 };
        let g = &self.model.grid;
        // Breakpoints: the window's ends and every band centre and face inside it.
        let mut breaks: Vec<f64> = vec![lo, hi];
        breaks.extend(
            g.x_centres
                .iter()
                .chain(&g.x_faces)
                .filter(|&&x| x > lo && x < hi),
        );
        breaks.sort_by(f64::total_cmp);
        breaks.dedup();
        // Sample points: each breakpoint, and each piece's ends from inside (their slopes are
        // the piece's own).
        let mut xs: Vec<(f64, bool)> = Vec::with_capacity(3 * breaks.len());
        for w in breaks.windows(2) {
            let d = 1e-7 * (w[1] - w[0]);
            xs.extend([(w[0], true), (w[0] + d, false), (w[1] - d, false)]);
        }
        xs.push((hi, true));
        // Solve outward from the sample nearest the start, each from its neighbour.
        let c = xs
            .iter()
            .enumerate()
            .min_by(|a, b| (a.1 .0 - start.x).abs().total_cmp(&(b.1 .0 - start.x).abs()))
            .map_or(0, |(i, _)| i);
        let mut pts: Vec<Option<EdgePoint>> = vec![None; xs.len()];
        let mut prev = start.clone();
        for i in c..xs.len() {
            let Some(q) = self.march(&prev, xs[i].0)? else {
                return Ok(None);
            };
            prev = q.clone();
            pts[i] = Some(q);
        }
        if let Some(Some(q)) = pts.get(c) {
            prev = q.clone();
        }
        for i in (0..c).rev() {
            let Some(q) = self.march(&prev, xs[i].0)? else {
                return Ok(None);
            };
            prev = q.clone();
            pts[i] = Some(q);
        }
        let pts: Vec<EdgePoint> = pts.into_iter().map(|q| q.expect("every sample solved")).collect();
        // Candidates: the breakpoints, and a zero of dp/dx of the right sense inside a piece.
        let mut best: Option<(EdgePoint, bool, bool)> = None;
        let mut consider = |q: EdgePoint, kink: bool, conv: bool| {
            if best.as_ref().is_none_or(|b| sign * q.p < sign * b.0.p) {
                best = Some((q, kink, conv));
            }
        };
        for (i, q) in pts.iter().enumerate() {
            if xs[i].1 {
                consider(q.clone(), true, true);
            }
        }
        for j in 0..breaks.len() - 1 {
            let (a, b) = (&pts[3 * j + 1], &pts[3 * j + 2]);
            if !(sign * a.slope < 0.0 && sign * b.slope > 0.0) {
                continue;
            }
            if let Some((q, conv)) = self.piece_root(a.clone(), b.clone())? {
                consider(q, false, conv);
            }
        }
        Ok(best)
    }

    /// The zero of `dp/dx` between `a` and `b` (one smooth piece, slopes of opposite sign) by
    /// regula falsi (Illinois), to 1e-12 in `x`.
    fn piece_root(
        &mut self,
        mut a: EdgePoint,
        mut b: EdgePoint,
    ) -> Result<Option<(EdgePoint, bool)>, ConfigError> {
        let (mut ga, mut gb) = (a.slope, b.slope);
        let mut side = 0;
        for _ in 0..60 {
            let x = a.x - ga * (b.x - a.x) / (gb - ga);
            let x = if x > a.x && x < b.x { x } else { 0.5 * (a.x + b.x) };
            let near = if x - a.x < b.x - x { &a } else { &b };
            let (gt, gp) = (near.t.clone(), near.p);
            let Some(q) = self.at_edge(x, &gt, gp)? else {
                return Ok(None);
            };
            if b.x - a.x <= 1e-12 || q.slope == 0.0 {
                return Ok(Some((q, true)));
            }
            if (q.slope < 0.0) == (a.slope < 0.0) {
                ga = q.slope;
                a = q;
                if side == -1 {
                    gb *= 0.5;
                }
                side = -1;
            } else {
                gb = q.slope;
                b = q;
                if side == 1 {
                    ga *= 0.5;
                }
                side = 1;
            }
        }
        let q = if a.slope.abs() < b.slope.abs() { a } else { b };
        Ok(Some((q, false)))
    }

    /// Replace each cluster of turning points along the branch `nodes` by the fold it stands
    /// for (see the section comment above).
    fn resolve_folds(&mut self, nodes: &[Node], raw: Vec<FoldPoint>) -> Result<Vec<FoldPoint>, ConfigError> {
        let last = nodes.len().saturating_sub(1);
        let partial = |tr: &Self, i: usize| tr.ice_end(tr.ice_measure(&nodes[i.min(last)].t)) == 0;
        let end: Vec<bool> = raw
            .iter()
            .map(|f| !(partial(self, f.after_point) && partial(self, f.after_point + 1)))
            .collect();
        let xf: Vec<f64> = raw.iter().map(|f| self.edge_x(&f.state)).collect();
        let mut out = Vec::with_capacity(raw.len());
        let mut i = 0;
        while i < raw.len() {
            if end[i] {
                out.push(raw[i].clone());
                i += 1;
                continue;
            }
            let mut j = i;
            while j + 1 < raw.len()
                && !end[j + 1]
                && (xf[j + 1] - xf[j]).abs() <= CLUSTER_BANDS * self.band_width_at(xf[j])
            {
                j += 1;
            }
            let count = j - i + 1;
            if count % 2 == 0 {
                // A wiggle with no net turn: no fold of the model.
                i = j + 1;
                continue;
            }
            match self.cluster_fold(nodes, &raw, &xf, i, j)? {
                Some(f) => out.push(f),
                None => out.extend(raw[i..=j].iter().cloned()),
            }
            i = j + 1;
        }
        Ok(out)
    }

    /// The fold of the odd cluster `raw[i..=j]` at the discrete curve's extreme control.
    fn cluster_fold(
        &mut self,
        nodes: &[Node],
        raw: &[FoldPoint],
        xf: &[f64],
        i: usize,
        j: usize,
    ) -> Result<Option<FoldPoint>, ConfigError> {
        let minimum = raw[i].minimum;
        let (cmin, cmax) = xf[i..=j]
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
                (a.min(x), b.max(x))
            });
        // The window may not reach a neighbouring fold nor leave [0, 1].
        let (mut stop_lo, mut stop_hi) = (0.0_f64, 1.0_f64);
        for k in [i.wrapping_sub(1), j + 1] {
            if let Some(&x) = xf.get(k) {
                if x < cmin {
                    stop_lo = stop_lo.max(x);
                } else if x > cmax {
                    stop_hi = stop_hi.min(x);
                }
            }
        }
        let centre = &raw[i + (j - i) / 2];
        let Some(start) = self.at_edge(xf[i + (j - i) / 2], &centre.state, centre.control)? else {
            return Ok(None);
        };
        let (mut wlo, mut whi) = (cmin, cmax);
        let mut found = None;
        for _ in 0..6 {
            wlo = (wlo - SCAN_BANDS * self.band_width_at(wlo)).max(stop_lo);
            whi = (whi + SCAN_BANDS * self.band_width_at(whi)).min(stop_hi);
            let Some(best) = self.edge_extremum(wlo, whi, minimum, &start)? else {
                return Ok(None);
            };
            let x = best.0.x;
            let open_end = (x == wlo && wlo > stop_lo) || (x == whi && whi < stop_hi);
            found = Some(best);
            if !open_end {
                break;
            }
        }
        let Some((q, kink, converged)) = found else {
            return Ok(None);
        };
        // The fold goes between the two nodes whose edges bracket it (else by the nearest
        // turning point of the cluster).
        let (a0, a1) = (raw[i].after_point, (raw[j].after_point + 1).min(nodes.len() - 1));
        let mut after = raw[(i..=j)
            .min_by(|&a, &b| (xf[a] - q.x).abs().total_cmp(&(xf[b] - q.x).abs()))
            .unwrap_or(i)]
        .after_point;
        for k in a0..a1 {
            let (u, v) = (self.edge_x(&nodes[k].t), self.edge_x(&nodes[k + 1].t));
            if (u - q.x) * (v - q.x) <= 0.0 {
                after = k;
                break;
            }
        }
        Ok(Some(FoldPoint {
            control: q.p,
            state: q.t,
            after_point: after,
            corner: kink,
            converged,
            minimum,
            turns: j - i + 1,
        }))
    }
}
