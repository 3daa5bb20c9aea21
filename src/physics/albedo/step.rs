//! The step albedo: ice where the surface is colder than the freezing temperature, with the
//! band that holds the ice edge given the area-weighted mix of the ice and ice-free albedos.
//!
//! The edge is placed inside its band by an [`EdgeRule`]: by interpolating T linearly between
//! band centres (diffusive transport), or by the edge balance (relaxation transport, where T
//! jumps at the edge). Absorbed sunlight is then continuous in T and equilibria converge at
//! second order in band width. On a globe with a face at the equator the two half bands next
//! to it extend the line through their own hemisphere's two nearest centres (as the
//! hemisphere's equator half band does) instead of interpolating across the equator: for a
//! symmetric state that line is flat, so both equator bands would lose their ice at once (a
//! jump in absorbed sunlight, and no fold where the last ice leaves the equator). Symmetric
//! states of a globe of `2n` bands are then exactly those of a hemisphere of `n`.
//!
//! When to use it: the classic sharp ice edge, whose folds (the large- and small-ice-cap
//! instabilities) are the tipping points the tool looks for; the default.
//!
//! Reference: Budyko (1969, Tellus 21, 611-619) for the step albedo at a freezing
//! temperature; the sub-band edge rules are our own, derived in docs/discrete-model.md.

use super::Albedo;

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

/// Call `f(k)` for every pair of neighbouring bands `k`, `k + 1` on opposite sides of `tf`
/// (a freezing crossing), in increasing `k`.
#[inline(always)]
pub fn for_each_crossing(t: &[f64], tf: f64, f: impl FnMut(usize)) {
    let pairs = t.len().saturating_sub(1);
    let (a, b) = (&t[..pairs], &t[t.len() - pairs..]);
    crate::linalg::for_each_flagged(pairs, |k| (a[k] < tf) != (b[k] < tf), f);
}

impl Albedo {
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
}
