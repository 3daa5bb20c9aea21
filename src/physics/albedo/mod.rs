//! Surface albedo as a function of band temperature: the ice-albedo feedback.
//!
//! Three forms (DESIGN section 2), one enum variant each:
//! - `Step` ([`step`]): ice below `T_freeze`, the band holding the ice edge mixed by area, the
//!   edge placed by an [`EdgeRule`].
//! - `Smooth` ([`smooth`]): `ice + (ice_free(x) - ice) (1 + tanh((T - T_freeze)/width)) / 2`.
//! - `Ramp` ([`ramp`]): ice albedo below `T_freeze - width/2`, ice-free above `T_freeze + width/2`, linear between.
//!
//! The ice-free albedo is `a0 + a2 P2(x)` averaged over each band. This module holds the
//! sub-band geometry the `step` form and the ice-edge diagnostics (of every form) share.

use crate::grid::Grid;

pub mod ramp;
pub mod smooth;
pub mod step;

pub use step::{for_each_crossing, BalanceCurve, EdgeRule};

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

/// Cold length of a linear function on an interval of length `len` with end values `va`, `vb`.
fn linear_cold(va: f64, vb: f64, len: f64, tf: f64) -> f64 {
    match (va < tf, vb < tf) {
        (true, true) => len,
        (false, false) => 0.0,
        (true, false) => len * (tf - va) / (vb - va),
        (false, true) => len * (vb - tf) / (vb - va),
    }
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

    /// Albedo of every band, written into `out`.
    pub fn evaluate(&self, temps: &[f64], out: &mut [f64]) {
        for i in 0..temps.len() {
            out[i] = self.band(temps, i).0;
        }
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
            AlbedoForm::Smooth { width } => smooth::band(af, ai, self.freeze, width, t),
            AlbedoForm::Ramp { width } => ramp::band(af, ai, self.freeze, width, t),
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
