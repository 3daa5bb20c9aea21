//! Surface albedo as a function of band temperature: the ice-albedo feedback.
//!
//! Three forms (DESIGN section 2), one enum variant each:
//! - `Step`: ice where the surface is colder than `T_freeze`; the band holding the ice edge gets
//!   the area-weighted mix of ice and ice-free albedo, with the edge placed by an [`EdgeRule`]:
//!   by interpolating T linearly between band centres (diffusive transport), or by the edge
//!   balance (relaxation transport, where T jumps at the edge). Absorbed sunlight is then
//!   continuous in T and equilibria converge at second order in band width. On a globe with a
//!   face at the equator the two half bands next to it extend the line through their own
//!   hemisphere's two nearest centres (as the hemisphere's equator half band does) instead of
//!   interpolating across the equator: for a symmetric state that line is flat, so both equator
//!   bands would lose their ice at once (a jump in absorbed sunlight, and no fold where the last
//!   ice leaves the equator). Symmetric states of a globe of `2n` bands are then exactly those
//!   of a hemisphere of `n`.
//! - `Smooth`: `ice + (ice_free(x) - ice) (1 + tanh((T - T_freeze)/width)) / 2`.
//! - `Ramp`: ice albedo below `T_freeze - width/2`, ice-free above `T_freeze + width/2`, linear between.
//!
//! The ice-free albedo is `a0 + a2 P2(x)` averaged over each band.

use crate::grid::Grid;

/// Which albedo form.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum AlbedoForm {
    /// Step at the freezing temperature with edge-band mixing.
    Step,
    /// `tanh` transition of width `width` (K).
    Smooth {
        /// Transition width in K.
        width: f64,
    },
    /// Linear ramp over `width` (K) centred on the freezing temperature.
    Ramp {
        /// Ramp width in K.
        width: f64,
    },
}

/// Where the `step` albedo puts the ice edge inside the band that holds it (the sub-band rule).
///
/// The choice follows the transport (`Model::from_spec`): the temperature profile is continuous
/// under diffusion but jumps at the ice edge under relaxation, and a rule that interpolates T
/// across the jump does not converge (docs/discrete-model.md, "step albedo").
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum EdgeRule {
    /// The edge where T, linear between band centres, crosses `T_freeze`: for continuous
    /// profiles (diffusive transport), equilibria converge at second order in band width.
    ///
    /// Reference: common practice (linear interpolation of the freezing line between grid
    /// points); exact discrete equations in docs/discrete-model.md.
    Interpolated,
    /// Edge balance, for profiles that jump at the edge (relaxation transport): band `i` holds
    /// its edge `x_e` where `R(T_i) = S_i c_i(f) - q(x_e)`, with `R(T) = OLR(T) - OLR(T_f) +
    /// gamma (T - T_f)`, `c_i(f)` the band's coalbedo at ice fraction `f` and `q` the absorbed
    /// sunlight with the mean of the two coalbedos, linear between band centres. Subtracting
    /// the band's energy balance from that of the edge point shows that at an equilibrium this
    /// is the closed form's edge condition (T = T_f at the edge with the mean coalbedo), so the
    /// equilibria converge to it; `f` depends on `T_i` alone and continuously (a ramp whose
    /// width is the jump of T at the edge). See [`Albedo::balance_band`].
    ///
    /// Reference: Budyko (1969, Tellus 21, 611-619) for the model and the mean-coalbedo edge
    /// convention; the discrete rule is derived in docs/discrete-model.md.
    EdgeBalance,
}

/// The edge-balance curve of one band: `P(f) = S_i c_i(f) - q(x_e(f))` (W m-2) is piecewise
/// linear in the ice fraction `f` through `(0, p0)`, `(fc, pc)`, `(1, p1)`, strictly
/// decreasing; the ice lies toward the upper face (larger x) when `upper`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BalanceCurve {
    /// `P` with no ice (the edge at the ice-side face), W m-2.
    pub p0: f64,
    /// `P` with the edge at the band centre, W m-2.
    pub pc: f64,
    /// `P` all ice (the edge at the warm-side face), W m-2.
    pub p1: f64,
    /// Ice fraction with the edge at the band centre.
    pub fc: f64,
    /// Whether the ice lies toward the upper face.
    pub upper: bool,
}

impl BalanceCurve {
    /// Ice fraction where `P(f) = r` (clamped to 0..1) and its derivative by `r` (per W m-2).
    #[inline(always)]
    pub fn fraction(&self, r: f64) -> (f64, f64) {
        let BalanceCurve { p0, pc, p1, fc, .. } = *self;
        if r >= p0 {
            (0.0, 0.0)
        } else if r >= pc {
            let s = fc / (p0 - pc);
            (s * (p0 - r), -s)
        } else if r > p1 {
            let s = (1.0 - fc) / (pc - p1);
            (fc + s * (pc - r), -s)
        } else {
            (1.0, 0.0)
        }
    }
}

/// Albedo parameterisation on a grid.
#[derive(Debug, Clone, PartialEq)]
pub struct Albedo {
    /// The form.
    pub form: AlbedoForm,
    /// The `step` form's sub-band edge rule.
    pub edge_rule: EdgeRule,
    /// Ice-free albedo by band (dimensionless).
    pub ice_free: Vec<f64>,
    /// Ice albedo (dimensionless).
    pub ice: f64,
    /// Freezing temperature in K.
    pub freeze: f64,
    /// Per band: distance from centre to lower face, and to the lower neighbour's centre
    /// (for the first band: to the upper neighbour's, whose line is extended; 0 for one band).
    half_lo: Vec<(f64, f64)>,
    /// Per band: distance from centre to upper face, and to the upper neighbour's centre.
    half_hi: Vec<(f64, f64)>,
    /// Per band: whether the nearer pole lies toward the upper face (the edge-balance rule's
    /// side for the ice when the absorbed sunlight is level across the band).
    pole_upper: Vec<bool>,
    /// On a globe with a face at the equator: the first band north of it (the equator seam).
    seam: Option<usize>,
}

/// The first band north of the equator on a globe whose grid has a face at the equator.
fn equator_seam(grid: &Grid) -> Option<usize> {
    let n = grid.len();
    (grid.domain == crate::grid::Domain::Globe && n >= 2 && n % 2 == 0 && grid.x_faces[n / 2].abs() < 1e-12)
        .then_some(n / 2)
}

/// Sub-band geometry of a grid: the two half bands of each band.
fn half_bands(grid: &Grid, seam: Option<usize>) -> (Vec<(f64, f64)>, Vec<(f64, f64)>) {
    let n = grid.len();
    let xc = &grid.x_centres;
    let xf = &grid.x_faces;
    // Outer half bands (and those next to the equator seam) extend the line through the
    // nearest two centres on their side (so the ice fraction stays continuous when such a
    // band crosses freezing alone); `line_lo` / `line_hi` say which two.
    let gap = |k: Option<usize>| k.map_or(0.0, |k| xc[k + 1] - xc[k]);
    let lo = (0..n)
        .map(|i| (xc[i] - xf[i], gap(line_lo(n, seam, i))))
        .collect();
    let hi = (0..n)
        .map(|i| (xf[i + 1] - xc[i], gap(line_hi(n, seam, i))))
        .collect();
    (lo, hi)
}

/// The line that gives T in the lower half of band `i`: through centres `k` and `k + 1`
/// (`None`: T is constant there, a lone band).
fn line_lo(n: usize, seam: Option<usize>, i: usize) -> Option<usize> {
    let first = seam.filter(|&s| i >= s).unwrap_or(0);
    let last = seam.filter(|&s| i < s).unwrap_or(n);
    if last - first < 2 {
        None
    } else if i > first {
        Some(i - 1)
    } else {
        Some(i)
    }
}

/// The line that gives T in the upper half of band `i` (see [`line_lo`]).
fn line_hi(n: usize, seam: Option<usize>, i: usize) -> Option<usize> {
    let first = seam.filter(|&s| i >= s).unwrap_or(0);
    let last = seam.filter(|&s| i < s).unwrap_or(n);
    if last - first < 2 {
        None
    } else if i + 1 < last {
        Some(i)
    } else {
        Some(i - 1)
    }
}

/// Cold length (where T < `tf`) of the half band of length `h` that starts at a band centre with
/// temperature `ti` and points toward a neighbour centre at distance `l` with temperature `tj`
/// (`l = 0`: no neighbour, T constant). Returns the length and its derivatives by `ti`, `tj`.
#[inline(always)]
fn half_cold(ti: f64, tj: f64, h: f64, l: f64, tf: f64) -> (f64, f64, f64) {
    let cold_i = ti < tf;
    // The far end's value lies between ti and tj (h <= l), so equal sides decide without
    // computing it: the common case, away from the ice edge.
    if l == 0.0 || cold_i == (tj < tf) {
        return (if cold_i { h } else { 0.0 }, 0.0, 0.0);
    }
    let te = ti + (tj - ti) * h / l;
    let cold_e = te < tf;
    if cold_i == cold_e {
        return (if cold_i { h } else { 0.0 }, 0.0, 0.0);
    }
    let d = tj - ti;
    let inv = 1.0 / (d * d);
    let s = l * (tf - ti) * d * inv;
    let ds_i = l * (tf - tj) * inv;
    let ds_j = -l * (tf - ti) * inv;
    if cold_i {
        (s, ds_i, ds_j)
    } else {
        (h - s, -ds_i, -ds_j)
    }
}

/// Cold length of a linear function on an interval of length `len` with end values `va`, `vb`.
fn linear_cold(va: f64, vb: f64, len: f64, tf: f64) -> f64 {
    match (va < tf, vb < tf) {
        (true, true) => len,
        (false, false) => 0.0,
        (true, false) => len * (tf - va) / (vb - va),
        (false, true) => len * (vb - tf) / (vb - va),
    }
}

/// Call `f(k)` for every pair of neighbouring bands `k`, `k + 1` on opposite sides of `tf`
/// (a freezing crossing), in increasing `k`.
#[inline(always)]
pub fn for_each_crossing(t: &[f64], tf: f64, f: impl FnMut(usize)) {
    let pairs = t.len().saturating_sub(1);
    let (a, b) = (&t[..pairs], &t[t.len() - pairs..]);
    crate::linalg::for_each_flagged(pairs, |k| (a[k] < tf) != (b[k] < tf), f);
}

impl Albedo {
    /// Build from the band ice-free albedo, ice albedo and freezing temperature (K).
    pub fn new(grid: &Grid, form: AlbedoForm, ice_free: Vec<f64>, ice: f64, freeze: f64) -> Albedo {
        let seam = equator_seam(grid);
        let (half_lo, half_hi) = half_bands(grid, seam);
        Albedo {
            form,
            edge_rule: EdgeRule::Interpolated,
            ice_free,
            ice,
            freeze,
            half_lo,
            half_hi,
            seam,
            pole_upper: grid.x_centres.iter().map(|x| *x >= 0.0).collect(),
        }
    }

    /// The same with the sub-band edge rule `rule`.
    pub fn with_edge_rule(mut self, rule: EdgeRule) -> Albedo {
        self.edge_rule = rule;
        self
    }

    /// The edge-balance curve `P(f)` of band `i` (see [`EdgeRule::EdgeBalance`]) for band
    /// insolation `sun` (W m-2) times `scale` (the solar scale), or `None` when ice does not
    /// absorb less than the ice-free surface there (no sunlight, or an ice albedo not above the
    /// ice-free one): then the band is wholly ice below `T_freeze` and ice free above.
    ///
    /// `q_j = scale S_j (1 - (a_free_j + a_ice) / 2)` is taken linear between band centres (on
    /// an outer half band, the line through the two nearest centres); the ice lies on the side
    /// of the lower neighbour value of `q` (the nearer pole on a tie); `A = scale S_i (a_ice -
    /// a_free_i)`; with `d_ice`, `d_warm` the values of `q - q_i` at the ice-side and warm-side
    /// faces, `P(0) = A/2 - d_ice`, `P(fc) = A (1/2 - fc)`, `P(1) = -A/2 - d_warm`. `d_ice` is
    /// capped at `A fc / 2` and `d_warm` floored at `-A (1 - fc) / 2` so that `P` decreases
    /// strictly (they bind only at a sharp extremum of `q` on a coarse grid).
    #[inline(always)]
    pub fn balance_curve(&self, sun: &[f64], scale: f64, i: usize) -> Option<BalanceCurve> {
        let n = sun.len();
        let (ai, af) = (self.ice, &self.ice_free);
        let jump = scale * sun[i] * (ai - af[i]);
        // (Also rejects a NaN.)
        if !(jump > 0.0) {
            return None;
        }
        let q = |j: usize| scale * sun[j] * (1.0 - 0.5 * (af[j] + ai));
        let qi = q(i);
        let (ql, qh) = match (i > 0, i + 1 < n) {
            (true, true) => (q(i - 1), q(i + 1)),
            (false, true) => {
                let h = q(1);
                (2.0 * qi - h, h)
            }
            (true, false) => {
                let l = q(i - 1);
                (l, 2.0 * qi - l)
            }
            (false, false) => (qi, qi),
        };
        let (hl, ll) = self.half_lo[i];
        let (hh, lh) = self.half_hi[i];
        let d_lo = if ll > 0.0 { (ql - qi) * hl / ll } else { 0.0 };
        let d_hi = if lh > 0.0 { (qh - qi) * hh / lh } else { 0.0 };
        let upper = if qh == ql { self.pole_upper[i] } else { qh < ql };
        let w = hl + hh;
        let (d_ice, d_warm, fc) = if upper {
            (d_hi, d_lo, hh / w)
        } else {
            (d_lo, d_hi, hl / w)
        };
        let d_ice = d_ice.min(0.5 * jump * fc);
        let d_warm = d_warm.max(-0.5 * jump * (1.0 - fc));
        Some(BalanceCurve {
            p0: 0.5 * jump - d_ice,
            pc: jump * (0.5 - fc),
            p1: -0.5 * jump - d_warm,
            fc,
            upper,
        })
    }

    /// Albedo of band `i` under the edge-balance rule and its derivative by `T_i` (per K), from
    /// `r = R(T_i)` and `dr = R'(T_i)` (W m-2 and W m-2 K-1; see [`EdgeRule::EdgeBalance`]).
    #[inline(always)]
    pub fn balance_band(
        &self,
        sun: &[f64],
        scale: f64,
        temps: &[f64],
        i: usize,
        r: f64,
        dr: f64,
    ) -> (f64, f64) {
        let af = self.ice_free[i];
        let d = self.ice - af;
        match self.balance_curve(sun, scale, i) {
            Some(c) => {
                let (f, df) = c.fraction(r);
                (af + f * d, d * df * dr)
            }
            None => (if temps[i] < self.freeze { af + d } else { af }, 0.0),
        }
    }

    /// On a globe with a face at the equator, the two bands next to it (`[south, north]`):
    /// like the outer bands, they always take the full edge rule.
    pub fn seam_bands(&self) -> Option<[usize; 2]> {
        self.seam.map(|s| [s - 1, s])
    }

    /// Where the interpolated temperature profile at `x` comes from: `(k, theta)` with
    /// `T(x) = (1 - theta) T_k + theta T_{k+1}` under the edge rule (`theta` outside `[0, 1]`
    /// on an extended line at an outer face or the equator seam). `None` for a lone band.
    pub fn line_at(&self, grid: &Grid, x: f64) -> Option<(usize, f64)> {
        let n = grid.len();
        let i = grid.x_faces[1..n].partition_point(|&f| f <= x);
        let k = if x < grid.x_centres[i] {
            line_lo(n, self.seam, i)
        } else {
            line_hi(n, self.seam, i)
        }?;
        let (a, b) = (grid.x_centres[k], grid.x_centres[k + 1]);
        Some((k, (x - a) / (b - a)))
    }

    /// Ice fraction of band `i` (0..1) under the sub-band interpolation rule, with its
    /// derivatives by `T_{i-1}`, `T_i`, `T_{i+1}` (per K).
    #[inline(always)]
    pub fn ice_fraction(&self, temps: &[f64], i: usize) -> (f64, [f64; 3]) {
        let n = temps.len();
        let ti = temps[i];
        let (hl, ll) = self.half_lo[i];
        let (hh, lh) = self.half_hi[i];
        if n == 1 {
            let f = if ti < self.freeze { 1.0 } else { 0.0 };
            return (f, [0.0; 3]);
        }
        // At an outer face (or the equator seam) the half band sees a virtual neighbour
        // 2 T_i - T_other on the line through the two nearest centres on its side.
        let has_lo = i > 0 && self.seam != Some(i);
        let has_hi = i + 1 < n && self.seam != Some(i + 1);
        let (tl, th) = match (has_lo, has_hi) {
            (true, true) => (temps[i - 1], temps[i + 1]),
            (false, true) => (2.0 * ti - temps[i + 1], temps[i + 1]),
            (true, false) => (temps[i - 1], 2.0 * ti - temps[i - 1]),
            (false, false) => (ti, ti),
        };
        let (ml, dl_i, dl_j) = half_cold(ti, tl, hl, ll, self.freeze);
        let (mh, dh_i, dh_j) = half_cold(ti, th, hh, lh, self.freeze);
        let w = hl + hh;
        // Chain rule through the virtual neighbour.
        let (d_lo, d_mid, d_hi) = match (has_lo, has_hi) {
            (true, true) => (dl_j, dl_i + dh_i, dh_j),
            (false, true) => (0.0, dl_i + dh_i + 2.0 * dl_j, dh_j - dl_j),
            (true, false) => (dl_j - dh_j, dl_i + dh_i + 2.0 * dh_j, 0.0),
            (false, false) => (0.0, dl_i + dh_i, 0.0),
        };
        ((ml + mh) / w, [d_lo / w, d_mid / w, d_hi / w])
    }

    /// Albedo of every band, written into `out`.
    pub fn evaluate(&self, temps: &[f64], out: &mut [f64]) {
        for i in 0..temps.len() {
            out[i] = self.band(temps, i).0;
        }
    }

    /// `band` for the `step` form (what `band` returns when the form is `Step`).
    #[inline(always)]
    pub fn step_band(&self, temps: &[f64], i: usize) -> (f64, [f64; 3]) {
        let af = self.ice_free[i];
        let ai = self.ice;
        let t = temps[i];
        // Away from the ice edge (an interior band whose neighbours lie on its side of freezing)
        // both half bands are wholly warm or wholly cold: the fraction is 0 or exactly 1 with
        // zero derivatives, the same numbers `ice_fraction` gives, found with two comparisons.
        // Only the bands next to a crossing (and the two outer bands, whose virtual neighbour
        // can cross alone) take the full rule.
        let n = temps.len();
        if i > 0 && i + 1 < n && self.seam.is_none_or(|s| i + 1 != s && i != s) {
            let tf = self.freeze;
            let cold = t < tf;
            if (temps[i - 1] < tf) == cold && (temps[i + 1] < tf) == cold {
                let a = if cold { af + (ai - af) } else { af };
                return (a, [0.0; 3]);
            }
        }
        let (f, df) = self.ice_fraction(temps, i);
        let d = ai - af;
        (af + f * d, [d * df[0], d * df[1], d * df[2]])
    }

    /// Albedo of band `i` and its derivatives by `T_{i-1}`, `T_i`, `T_{i+1}` (per K), the `step`
    /// form by the interpolated edge rule (the model applies the edge-balance rule, which also
    /// needs the insolation and OLR, through [`Albedo::balance_band`]).
    #[inline(always)]
    pub fn band(&self, temps: &[f64], i: usize) -> (f64, [f64; 3]) {
        let af = self.ice_free[i];
        let ai = self.ice;
        let t = temps[i];
        match self.form {
            AlbedoForm::Step => self.step_band(temps, i),
            AlbedoForm::Smooth { width } => {
                let th = ((t - self.freeze) / width).tanh();
                let a = ai + (af - ai) * 0.5 * (1.0 + th);
                (a, [0.0, (af - ai) * 0.5 * (1.0 - th * th) / width, 0.0])
            }
            AlbedoForm::Ramp { width } => {
                let lo = self.freeze - 0.5 * width;
                if t <= lo {
                    (ai, [0.0; 3])
                } else if t >= lo + width {
                    (af, [0.0; 3])
                } else {
                    let s = (af - ai) / width;
                    (ai + s * (t - lo), [0.0, s, 0.0])
                }
            }
        }
    }

    /// Ice measure (length in x where the interpolated T is below freezing) inside `[lo, hi]`.
    /// Used for the ice-edge diagnostics with every albedo form.
    pub fn ice_measure_in(&self, grid: &Grid, temps: &[f64], lo: f64, hi: f64) -> f64 {
        let n = temps.len();
        let tf = self.freeze;
        let mut total = 0.0;
        for i in 0..n {
            let xc = grid.x_centres[i];
            // The two half bands as (start x, end x, T at start, slope).
            let seg = |k: Option<usize>| {
                k.map_or(0.0, |k| {
                    (temps[k + 1] - temps[k]) / (grid.x_centres[k + 1] - grid.x_centres[k])
                })
            };
            let (slope_lo, slope_hi) = (seg(line_lo(n, self.seam, i)), seg(line_hi(n, self.seam, i)));
            for (a, b, slope) in [
                (grid.x_faces[i], xc, slope_lo),
                (xc, grid.x_faces[i + 1], slope_hi),
            ] {
                let (p, q) = (a.max(lo), b.min(hi));
                if q > p {
                    let at = |x: f64| temps[i] + slope * (x - xc);
                    total += linear_cold(at(p), at(q), q - p, tf);
                }
            }
        }
        total
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::grid::{p2, Domain, Spacing};
    use approx::assert_relative_eq;

    fn profile(grid: &Grid, warm: f64, drop: f64) -> Vec<f64> {
        grid.x_centres.iter().map(|x| warm - drop * x * x).collect()
    }

    #[test]
    fn step_ice_measure_matches_the_interpolated_edge() {
        // Common practice: with T linear between centres, the ice measure of a monotone profile
        // is the distance from the interpolated freezing point to the pole.
        let g = Grid::new(Domain::Hemisphere, Spacing::EqualArea, 10);
        let t = profile(&g, 300.0, 60.0);
        let alb = Albedo::new(&g, AlbedoForm::Step, vec![0.3; 10], 0.6, 263.0);
        let fr: f64 = (0..10).map(|i| alb.ice_fraction(&t, i).0 * g.dx[i]).sum();
        // Find the crossing between centres.
        let k = (0..9).find(|&k| t[k] >= 263.0 && t[k + 1] < 263.0).unwrap();
        let xs = g.x_centres[k] + (263.0 - t[k]) / (t[k + 1] - t[k]) * (g.x_centres[k + 1] - g.x_centres[k]);
        assert_relative_eq!(fr, 1.0 - xs, epsilon = 1e-13);
        assert_relative_eq!(alb.ice_measure_in(&g, &t, 0.0, 1.0), 1.0 - xs, epsilon = 1e-13);
    }

    #[test]
    fn balance_fraction_is_continuous_and_puts_freezing_at_the_band_centre() {
        // From the rule's definition (docs/discrete-model.md): f(R) is continuous and
        // non-increasing, 0 above P(0), 1 below P(1), on every band of a globe (ice toward either
        // pole); on equal-area bands R = 0 (T = T_freeze) gives f = fc = 1/2, the edge at the
        // band centre.
        for spacing in [Spacing::EqualArea, Spacing::EqualAngle] {
            let g = Grid::new(Domain::Globe, spacing, 16);
            let sun: Vec<f64> = g
                .x_centres
                .iter()
                .map(|x| 340.0 * (1.0 - 0.48 * p2(*x)))
                .collect();
            let af: Vec<f64> = g.x_centres.iter().map(|x| 0.3 + 0.08 * p2(*x)).collect();
            let alb =
                Albedo::new(&g, AlbedoForm::Step, af, 0.62, 263.15).with_edge_rule(EdgeRule::EdgeBalance);
            for i in 0..16 {
                let c = alb
                    .balance_curve(&sun, 0.98, i)
                    .expect("ice brighter than the ground");
                assert!(c.p0 > c.pc && c.pc > c.p1, "band {i}: {c:?}");
                assert_eq!(c.upper, g.x_centres[i] > 0.0, "ice toward the pole, band {i}");
                if spacing == Spacing::EqualArea {
                    assert_relative_eq!(c.fraction(0.0).0, 0.5, epsilon = 1e-12);
                    assert_relative_eq!(c.fc, 0.5, epsilon = 1e-12);
                }
                let mut prev = c.fraction(c.p0 + 1.0).0;
                assert_eq!(prev, 0.0);
                for k in 0..=4000 {
                    let r = c.p0 + 1.0 - (c.p0 - c.p1 + 2.0) * k as f64 / 4000.0;
                    let (f, _) = c.fraction(r);
                    assert!(f >= prev && f - prev < 0.01, "band {i}: jump at R = {r}");
                    prev = f;
                }
                assert_eq!(prev, 1.0);
            }
        }
    }

    #[test]
    fn albedo_derivatives_match_finite_differences() {
        // Property test against central differences (common practice); step 1e-6 K gives
        // truncation ~1e-12 and round-off ~1e-10 on O(1) albedo.
        let g = Grid::new(Domain::Globe, Spacing::EqualAngle, 12);
        for form in [
            AlbedoForm::Step,
            AlbedoForm::Smooth { width: 3.0 },
            AlbedoForm::Ramp { width: 8.0 },
        ] {
            let t: Vec<f64> = g
                .x_centres
                .iter()
                .map(|x| 290.0 - 40.0 * x * x + 3.0 * x)
                .collect();
            let alb = Albedo::new(&g, form, vec![0.3; 12], 0.62, 263.15);
            for i in 0..12 {
                let (_, d) = alb.band(&t, i);
                for (k, j) in [(0usize, i as isize - 1), (1, i as isize), (2, i as isize + 1)] {
                    if !(0..12).contains(&j) {
                        continue;
                    }
                    let h = 1e-6;
                    let mut tp = t.clone();
                    tp[j as usize] += h;
                    let mut tm = t.clone();
                    tm[j as usize] -= h;
                    let fd = (alb.band(&tp, i).0 - alb.band(&tm, i).0) / (2.0 * h);
                    assert!(
                        (fd - d[k]).abs() < 1e-7,
                        "{form:?} band {i} k {k}: {fd} vs {}",
                        d[k]
                    );
                }
            }
        }
    }
}
