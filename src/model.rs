//! The assembled energy-balance model: grid plus one of each parameterisation.
//!
//! `C_i dT_i/dt = G_i(t, T)` with the net heating
//! `G_i = S_i (1 - albedo_i(T)) - [OLR(T_i) - F_co2] + L_i(T) + F(t)` in W m-2
//! (DESIGN section 2; docs/discrete-model.md has the exact discrete equations). This is the only
//! module that knows every piece; it does no I/O.

pub use crate::drivers::{DriverSource, Drivers};
use crate::grid::Grid;
use crate::linalg::Tridiag;
use crate::physics::albedo::{step, Albedo, AlbedoForm, EdgeRule};
use crate::physics::insolation::{self, SeasonalTable};
use crate::physics::longwave::{linear, Longwave};
use crate::physics::transport::diffusive::{band_convergence, band_convergence_at, band_jacobian, face_flux};
use crate::physics::transport::Transport;

/// Seconds in a model year (365.25 days).
pub const YEAR_SECONDS: f64 = 365.25 * 86400.0;

/// Where the insolation comes from.
#[derive(Debug, Clone)]
pub enum Sunlight {
    /// Fixed in time: band means in W m-2 for `solar_scale = 1`.
    Fixed(Vec<f64>),
    /// Daily mean at the model time (seasonal cycle), from a table over the orbit.
    Seasonal(std::sync::Arc<SeasonalTable>),
}

/// The model.
#[derive(Debug, Clone)]
pub struct Model {
    /// Latitude grid.
    pub grid: Grid,
    /// Insolation source.
    pub sunlight: Sunlight,
    /// Albedo.
    pub albedo: Albedo,
    /// Outgoing longwave.
    pub longwave: Longwave,
    /// Transport.
    pub transport: Transport,
    /// Heat capacity by band, J m-2 K-1.
    pub heat_capacity: Vec<f64>,
    /// Constant drivers (used when `forcing` is `None`).
    pub drivers: Drivers,
    /// Time-varying drivers, if any.
    pub forcing: Option<std::sync::Arc<dyn DriverSource>>,
}

/// Scratch space for one model evaluation thread (no allocation in the hot loop).
#[derive(Debug, Clone)]
pub struct Workspace {
    /// Insolation at `sun_time`, W m-2 (used by the seasonal source).
    pub sun: Vec<f64>,
    sun_time: f64,
    /// Transport convergence scratch, W m-2.
    pub conv: Vec<f64>,
}

impl Workspace {
    /// Scratch for a model with `n` bands.
    pub fn new(n: usize) -> Workspace {
        Workspace {
            sun: vec![0.0; n],
            sun_time: f64::NAN,
            conv: vec![0.0; n],
        }
    }
}

/// Net heating split into its parts, W m-2 per band.
#[derive(Debug, Clone, PartialEq)]
pub struct Budget {
    /// Absorbed sunlight.
    pub absorbed: Vec<f64>,
    /// OLR net of the greenhouse forcing.
    pub olr: Vec<f64>,
    /// Transport convergence.
    pub transport: Vec<f64>,
    /// Additive forcing (same in every band).
    pub extra: f64,
}

/// Run `$body` with `$alb` bound to the albedo of one band (`(temps, i) -> (albedo, d/dT)`)
/// and `$olr` to the OLR (`T -> (OLR, dOLR/dT)`), the forms chosen once here so that the band
/// loops in `$body` are specialised (the step albedo and linear OLR inlined).
macro_rules! with_forms {
    ($self:ident, |$alb:ident, $olr:ident| $body:block) => {
        match (&$self.albedo.form, &$self.longwave) {
            (AlbedoForm::Step, Longwave::Linear { a, b }) => {
                let (a0, b0) = (*a, *b);
                let $alb = |t: &[f64], i: usize| $self.albedo.step_band(t, i);
                let $olr = move |t: f64| linear::olr(a0, b0, t);
                $body
            }
            (AlbedoForm::Step, _) => {
                let $alb = |t: &[f64], i: usize| $self.albedo.step_band(t, i);
                let $olr = |t: f64| $self.longwave.eval(t);
                $body
            }
            (_, Longwave::Linear { a, b }) => {
                let (a0, b0) = (*a, *b);
                let $alb = |t: &[f64], i: usize| $self.albedo.band(t, i);
                let $olr = move |t: f64| linear::olr(a0, b0, t);
                $body
            }
            _ => {
                let $alb = |t: &[f64], i: usize| $self.albedo.band(t, i);
                let $olr = |t: f64| $self.longwave.eval(t);
                $body
            }
        }
    };
}

/// The interior bands `i = 1..n-1` as slices of one length `n - 2` (index `j = i - 1`), so that
/// loops over them carry no bounds checks and vectorise: temperatures of the band below, the band
/// and the band above; conductances of the lower and upper faces; inverse widths, insolation and
/// ice-free albedo of the band.
struct Interior<'a> {
    tl: &'a [f64],
    tc: &'a [f64],
    th: &'a [f64],
    k_lo: &'a [f64],
    k_hi: &'a [f64],
    idx: &'a [f64],
    sn: &'a [f64],
    afs: &'a [f64],
}

impl<'a> Interior<'a> {
    /// For `n > 2` bands: `t`, `inv_dx`, `sun`, `af` hold `n` values, `face_k` `n + 1`.
    #[inline(always)]
    fn new(t: &'a [f64], face_k: &'a [f64], inv_dx: &'a [f64], sun: &'a [f64], af: &'a [f64]) -> Self {
        let m = t.len() - 2;
        Interior {
            tl: &t[..m],
            tc: &t[1..m + 1],
            th: &t[2..m + 2],
            k_lo: &face_k[1..m + 1],
            k_hi: &face_k[2..m + 2],
            idx: &inv_dx[1..m + 1],
            sn: &sun[1..m + 1],
            afs: &af[1..m + 1],
        }
    }
}

/// Run `$body` with `$olr` bound to the OLR (`T -> (OLR, dOLR/dT)`), the linear form inlined.
macro_rules! with_olr {
    ($self:ident, |$olr:ident| $body:block) => {
        match &$self.longwave {
            Longwave::Linear { a, b } => {
                let (a0, b0) = (*a, *b);
                let $olr = move |t: f64| linear::olr(a0, b0, t);
                $body
            }
            _ => {
                let $olr = |t: f64| $self.longwave.eval(t);
                $body
            }
        }
    };
}

/// Net heating of one band, W m-2: the absorbed sunlight `s (1 - a)` for scaled insolation `s`
/// and albedo `a`, minus the OLR `o` net of the greenhouse forcing `g`, plus the (scaled)
/// transport convergence `c` and the additive forcing `extra` (all W m-2).
#[inline(always)]
fn net_heating(s: f64, a: f64, o: f64, g: f64, c: f64, extra: f64) -> f64 {
    s * (1.0 - a) - (o - g) + c + extra
}

/// The local part of a band's Jacobian row (W m-2 K-1): by `T_{i-1}`, `T_i`, `T_{i+1}` from
/// the scaled insolation `s`, the albedo derivatives `da` and the OLR slope `dolr`.
#[inline(always)]
fn local_jacobian(s: f64, da: [f64; 3], dolr: f64) -> [f64; 3] {
    [-s * da[0], -s * da[1] - dolr, -s * da[2]]
}

impl Model {
    /// Number of bands.
    pub fn len(&self) -> usize {
        self.grid.len()
    }

    /// Always false (a grid has at least one band).
    pub fn is_empty(&self) -> bool {
        self.grid.is_empty()
    }

    /// Drivers at a model time.
    #[inline]
    pub fn drivers_at(&self, t_years: f64) -> Drivers {
        match &self.forcing {
            Some(f) => f.at(t_years),
            None => self.drivers,
        }
    }

    /// The first forcing breakpoint strictly after `t_years` (see [`DriverSource::next_breakpoint`]).
    #[inline]
    pub fn next_breakpoint(&self, t_years: f64) -> Option<f64> {
        self.forcing.as_ref().and_then(|f| f.next_breakpoint(t_years))
    }

    /// The forcing's time scale over `[a, b]`, years (see [`DriverSource::time_scale`]);
    /// infinite without a forcing history.
    #[inline]
    pub fn forcing_time_scale(&self, a: f64, b: f64) -> f64 {
        self.forcing
            .as_ref()
            .map_or(f64::INFINITY, |f| f.time_scale(a, b))
    }

    /// Insolation (W m-2, before `solar_scale`) at a model time, cached in `ws`.
    #[inline]
    fn refresh_sun(&self, t_years: f64, ws: &mut Workspace) {
        if let Sunlight::Seasonal(table) = &self.sunlight {
            if ws.sun_time != t_years {
                table.eval(t_years, &mut ws.sun);
                ws.sun_time = t_years;
            }
        }
    }

    #[inline]
    fn sun<'a>(&'a self, ws: &'a Workspace) -> &'a [f64] {
        match &self.sunlight {
            Sunlight::Fixed(s) => s,
            Sunlight::Seasonal(_) => &ws.sun,
        }
    }

    /// Net heating `G(t, T)` in W m-2 into `out`.
    pub fn heating(&self, t_years: f64, temps: &[f64], ws: &mut Workspace, out: &mut [f64]) {
        self.heating_inline(t_years, temps, ws, out)
    }

    /// [`Model::heating`], inlined into the caller (the time-stepping kernels, which are
    /// compiled once per CPU feature level: see [`crate::cpu`]).
    #[inline(always)]
    pub(crate) fn heating_inline(&self, t_years: f64, temps: &[f64], ws: &mut Workspace, out: &mut [f64]) {
        crate::tally::add(crate::tally::Kernel::Heating, temps.len());
        self.refresh_sun(t_years, ws);
        let d = self.drivers_at(t_years);
        let n = temps.len();
        let Workspace {
            sun: ws_sun, conv, ..
        } = ws;
        let sun: &[f64] = match &self.sunlight {
            Sunlight::Fixed(s) => s,
            Sunlight::Seasonal(_) => ws_sun,
        };
        let (sun, out) = (&sun[..n], &mut out[..n]);
        // One pass over the bands with the albedo and OLR forms chosen once outside the loop;
        // diffusive transport is folded in (the band functions `Transport::convergence` uses).
        let diffusive = match &self.transport {
            Transport::Diffusive { face_k, inv_dx } => Some((&face_k[..n + 1], &inv_dx[..n])),
            _ => {
                self.transport.convergence(&self.grid, temps, conv);
                None
            }
        };
        let conv = &conv[..n];
        if let (AlbedoForm::Step, Some((face_k, inv_dx))) = (self.albedo.form, diffusive) {
            // Two phases, the same numbers as the one-pass loop below: every interior band as
            // if away from the ice edge (branch-free, so the loop vectorises), then the bands
            // next to a freezing crossing and the two outer bands redone with the full rule.
            let (tf, ai, af) = (self.albedo.freeze, self.albedo.ice, &self.albedo.ice_free[..n]);
            let t = &temps[..n];
            with_olr!(self, |olr_of| {
                let (ss, ts, g, extra) = (d.solar_scale, d.transport_scale, d.greenhouse_wm2, d.extra_wm2);
                let band = |i: usize, a: f64| {
                    let ti = t[i];
                    let (o, dolr) = olr_of(ti);
                    let (o, _) = d.olr(o, dolr, ti);
                    let c = band_convergence_at(face_k, inv_dx, t, i);
                    net_heating(ss * sun[i], a, o, g, ts * c, extra)
                };
                if n > 2 {
                    // Interior band i = j + 1, over slices of one length (no bounds checks, so
                    // the loop vectorises).
                    let m = n - 2;
                    let Interior {
                        tl,
                        tc,
                        th,
                        k_lo,
                        k_hi,
                        idx,
                        sn,
                        afs,
                    } = Interior::new(t, face_k, inv_dx, sun, af);
                    let o_in = &mut out[1..m + 1];
                    for j in 0..m {
                        let ti = tc[j];
                        let a = step::whole_band(afs[j], ai, tf, ti);
                        let (o, dolr) = olr_of(ti);
                        let (o, _) = d.olr(o, dolr, ti);
                        let c = band_convergence(
                            face_flux(k_lo[j], tl[j], ti),
                            face_flux(k_hi[j], ti, th[j]),
                            idx[j],
                        );
                        o_in[j] = net_heating(ss * sn[j], a, o, g, ts * c, extra);
                    }
                }
                self.albedo
                    .for_each_edge_band(t, |i| out[i] = band(i, self.albedo.step_band(t, i).0));
            });
            return;
        }
        if let Some(bal) = self.balance(&d) {
            // Step albedo with the edge-balance rule (relaxation transport): the band's
            // albedo from its own temperature through R(T).
            with_olr!(self, |olr_of| {
                for i in 0..n {
                    let ti = temps[i];
                    let (o, dolr) = olr_of(ti);
                    let (o, dolr) = d.olr(o, dolr, ti);
                    let (r, dr) = bal.restoring(o, dolr, ti);
                    let (a, _) = self.albedo.balance_band(sun, bal.scale, temps, i, r, dr);
                    let c = d.transport_scale * conv[i];
                    out[i] = net_heating(d.solar_scale * sun[i], a, o, d.greenhouse_wm2, c, d.extra_wm2);
                }
            });
            return;
        }
        with_forms!(self, |alb, olr_of| {
            let mut flux_lo = 0.0;
            for i in 0..n {
                let ti = temps[i];
                let (a, _) = alb(temps, i);
                let (o, dolr) = olr_of(ti);
                let (o, _) = d.olr(o, dolr, ti);
                let tr = match diffusive {
                    Some((face_k, inv_dx)) => {
                        // Each face flux once, carried to the band above.
                        let flux_hi = if i + 1 < n {
                            face_flux(face_k[i + 1], ti, temps[i + 1])
                        } else {
                            0.0
                        };
                        let c = band_convergence(flux_lo, flux_hi, inv_dx[i]);
                        flux_lo = flux_hi;
                        c
                    }
                    None => conv[i],
                };
                let c = d.transport_scale * tr;
                out[i] = net_heating(d.solar_scale * sun[i], a, o, d.greenhouse_wm2, c, d.extra_wm2);
            }
        });
    }

    /// `dT/dt` in K per year into `out`.
    pub fn tendency(&self, t_years: f64, temps: &[f64], ws: &mut Workspace, out: &mut [f64]) {
        self.heating(t_years, temps, ws, out);
        for (o, c) in out.iter_mut().zip(&self.heat_capacity) {
            *o *= YEAR_SECONDS / c;
        }
    }

    /// Jacobian of the net heating, `dG_i/dT_j` in W m-2 K-1, into `jac` (overwritten).
    pub fn heating_jacobian(&self, t_years: f64, temps: &[f64], ws: &mut Workspace, jac: &mut Tridiag) {
        let d = self.drivers_at(t_years);
        if matches!(self.transport, Transport::Diffusive { .. }) && d.transport_scale == 1.0 {
            // The fused pass of `heating_with_jacobian` (vectorised, the step albedo decided
            // with two comparisons away from the edge) gives the same Jacobian bits: its entries
            // are the same sums in another order of two terms, and IEEE addition commutes.
            let mut scratch = std::mem::take(&mut ws.conv);
            scratch.resize(temps.len(), 0.0);
            self.heating_with_jacobian(t_years, temps, ws, &mut scratch, jac);
            ws.conv = scratch;
            return;
        }
        crate::tally::add(crate::tally::Kernel::Jacobian, temps.len());
        self.refresh_sun(t_years, ws);
        jac.diag.iter_mut().for_each(|v| *v = 0.0);
        jac.lower.iter_mut().for_each(|v| *v = 0.0);
        jac.upper.iter_mut().for_each(|v| *v = 0.0);
        jac.rank_one = None;
        // Transport first (then scaled by a time-varying transport factor), local terms added.
        self.transport.add_jacobian(jac);
        if d.transport_scale != 1.0 {
            let f = d.transport_scale;
            jac.diag
                .iter_mut()
                .chain(jac.lower.iter_mut())
                .chain(jac.upper.iter_mut())
                .for_each(|v| *v *= f);
            jac.rank_one = jac.rank_one.map(|r| r * f);
        }
        let sun = self.sun(ws);
        let n = temps.len();
        let bal = self.balance(&d);
        for i in 0..n {
            let (_, da) = self.albedo_band(bal.as_ref(), &d, sun, temps, i);
            let (olr, dolr) = self.longwave.eval(temps[i]);
            let (_, dolr) = d.olr(olr, dolr, temps[i]);
            let [l, dd, u] = local_jacobian(d.solar_scale * sun[i], da, dolr);
            jac.diag[i] += dd;
            if i > 0 {
                jac.lower[i] += l;
            }
            if i + 1 < n {
                jac.upper[i] += u;
            }
        }
    }

    /// Net heating `G` (W m-2) and its Jacobian (W m-2 K-1) at one state in one pass (the
    /// albedo and OLR of each band are evaluated once for both).
    pub fn heating_with_jacobian(
        &self,
        t_years: f64,
        temps: &[f64],
        ws: &mut Workspace,
        out: &mut [f64],
        jac: &mut Tridiag,
    ) {
        self.heating_with_jacobian_inline(t_years, temps, ws, out, jac)
    }

    /// [`Model::heating_with_jacobian`], inlined into the caller (see [`Model::heating_inline`]).
    #[inline(always)]
    pub(crate) fn heating_with_jacobian_inline(
        &self,
        t_years: f64,
        temps: &[f64],
        ws: &mut Workspace,
        out: &mut [f64],
        jac: &mut Tridiag,
    ) {
        crate::tally::add(crate::tally::Kernel::HeatingJacobian, temps.len());
        self.refresh_sun(t_years, ws);
        let d = self.drivers_at(t_years);
        if let (Transport::Diffusive { face_k, inv_dx }, 1.0) = (&self.transport, d.transport_scale) {
            // The common case in one fused pass: heating, local Jacobian and the (constant)
            // diffusive Jacobian, the same expressions as the general path below.
            let n = temps.len();
            let sun: &[f64] = match &self.sunlight {
                Sunlight::Fixed(s) => s,
                Sunlight::Seasonal(_) => &ws.sun,
            };
            let (sun, out, face_k, inv_dx) = (&sun[..n], &mut out[..n], &face_k[..n + 1], &inv_dx[..n]);
            let (jd, jl, ju) = (&mut jac.diag[..n], &mut jac.lower[..n], &mut jac.upper[..n]);
            jac.rank_one = None;
            if self.albedo.form == AlbedoForm::Step {
                // Two phases as in `heating`: interior bands as if away from the ice edge, then
                // the outer bands and those next to a crossing with the full rule.
                let (tf, ai, af) = (self.albedo.freeze, self.albedo.ice, &self.albedo.ice_free[..n]);
                let t = &temps[..n];
                // Every interior band as if away from the edge (zero albedo derivatives,
                // branch-free); the bands that need the full rule are redone after.
                with_olr!(self, |olr_of| {
                    let (g, extra) = (d.greenhouse_wm2, d.extra_wm2);
                    if n > 2 {
                        // Interior band i = j + 1 over slices of one length (vectorised).
                        let m = n - 2;
                        let Interior {
                            tl,
                            tc,
                            th,
                            k_lo,
                            k_hi,
                            idx,
                            sn,
                            afs,
                        } = Interior::new(t, face_k, inv_dx, sun, af);
                        let o_in = &mut out[1..m + 1];
                        let (jd, jl, ju) = (&mut jd[1..m + 1], &mut jl[1..m + 1], &mut ju[1..m + 1]);
                        for j in 0..m {
                            let ti = tc[j];
                            let a = step::whole_band(afs[j], ai, tf, ti);
                            let (o, dolr) = olr_of(ti);
                            let (o, dolr) = d.olr(o, dolr, ti);
                            let s = d.solar_scale * sn[j];
                            let conv = band_convergence(
                                face_flux(k_lo[j], tl[j], ti),
                                face_flux(k_hi[j], ti, th[j]),
                                idx[j],
                            );
                            o_in[j] = net_heating(s, a, o, g, conv, extra);
                            // Away from the edge the albedo derivatives are zero.
                            let (lo, hi) = band_jacobian(k_lo[j], k_hi[j], idx[j]);
                            let [l, dd, u] = local_jacobian(s, [0.0; 3], dolr);
                            jd[j] = dd - (lo + hi);
                            jl[j] = l + lo;
                            ju[j] = u + hi;
                        }
                    }
                });
                with_olr!(self, |olr_of| {
                    let (g, extra) = (d.greenhouse_wm2, d.extra_wm2);
                    let mut band = |i: usize, a: f64, da: [f64; 3]| {
                        let ti = t[i];
                        let (o, dolr) = olr_of(ti);
                        let (o, dolr) = d.olr(o, dolr, ti);
                        let s = d.solar_scale * sun[i];
                        let conv = band_convergence_at(face_k, inv_dx, t, i);
                        out[i] = net_heating(s, a, o, g, conv, extra);
                        let (lo, hi) = band_jacobian(face_k[i], face_k[i + 1], inv_dx[i]);
                        let [l, dd, u] = local_jacobian(s, da, dolr);
                        jd[i] = dd - (lo + hi);
                        jl[i] = (if i > 0 { l } else { 0.0 }) + lo;
                        ju[i] = (if i + 1 < n { u } else { 0.0 }) + hi;
                    };
                    self.albedo.for_each_edge_band(t, |i| {
                        let (a, da) = self.albedo.step_band(t, i);
                        band(i, a, da);
                    });
                });
                return;
            }
            with_forms!(self, |alb, olr_of| {
                let mut flux_lo = 0.0;
                for i in 0..n {
                    let ti = temps[i];
                    let (a, da) = alb(temps, i);
                    let (o, dolr) = olr_of(ti);
                    let (o, dolr) = d.olr(o, dolr, ti);
                    let s = d.solar_scale * sun[i];
                    // Each face flux once, carried to the band above.
                    let flux_hi = if i + 1 < n {
                        face_flux(face_k[i + 1], ti, temps[i + 1])
                    } else {
                        0.0
                    };
                    let conv = band_convergence(flux_lo, flux_hi, inv_dx[i]);
                    flux_lo = flux_hi;
                    out[i] = net_heating(s, a, o, d.greenhouse_wm2, conv, d.extra_wm2);
                    let (lo, hi) = band_jacobian(face_k[i], face_k[i + 1], inv_dx[i]);
                    let [l, dd, u] = local_jacobian(s, da, dolr);
                    jd[i] = dd - (lo + hi);
                    jl[i] = (if i > 0 { l } else { 0.0 }) + lo;
                    ju[i] = (if i + 1 < n { u } else { 0.0 }) + hi;
                }
            });
            return;
        }
        let mut conv = std::mem::take(&mut ws.conv);
        self.transport.convergence(&self.grid, temps, &mut conv);
        jac.rank_one = None;
        let sun = self.sun(ws);
        let n = temps.len();
        let bal = self.balance(&d);
        for i in 0..n {
            let (alb, da) = self.albedo_band(bal.as_ref(), &d, sun, temps, i);
            let (olr, dolr) = self.longwave.eval(temps[i]);
            let (olr, dolr) = d.olr(olr, dolr, temps[i]);
            let s = d.solar_scale * sun[i];
            let c = d.transport_scale * conv[i];
            out[i] = net_heating(s, alb, olr, d.greenhouse_wm2, c, d.extra_wm2);
            let [l, dd, u] = local_jacobian(s, da, dolr);
            jac.diag[i] = dd;
            jac.lower[i] = if i > 0 { l } else { 0.0 };
            jac.upper[i] = if i + 1 < n { u } else { 0.0 };
        }
        ws.conv = conv;
        // A time-varying transport factor f scales only the transport part: (J/f + T) f.
        let f = d.transport_scale;
        if f == 1.0 {
            self.transport.add_jacobian(jac);
        } else if f != 0.0 {
            let scale = |jac: &mut Tridiag, by: f64| {
                jac.diag
                    .iter_mut()
                    .chain(jac.lower.iter_mut())
                    .chain(jac.upper.iter_mut())
                    .for_each(|v| *v *= by);
                jac.rank_one = jac.rank_one.map(|r| r * by);
            };
            scale(jac, 1.0 / f);
            self.transport.add_jacobian(jac);
            scale(jac, f);
        }
    }

    /// The parts of the net heating at a state.
    pub fn budget(&self, t_years: f64, temps: &[f64], ws: &mut Workspace) -> Budget {
        let n = temps.len();
        let mut b = Budget {
            absorbed: vec![0.0; n],
            olr: vec![0.0; n],
            transport: vec![0.0; n],
            extra: 0.0,
        };
        self.budget_into(t_years, temps, ws, &mut b);
        b
    }

    /// [`Model::budget`] into `b` (its vectors sized to the bands), allocating nothing.
    pub fn budget_into(&self, t_years: f64, temps: &[f64], ws: &mut Workspace, b: &mut Budget) {
        self.refresh_sun(t_years, ws);
        let d = self.drivers_at(t_years);
        let n = temps.len();
        self.transport.convergence(&self.grid, temps, &mut b.transport);
        b.transport.iter_mut().for_each(|v| *v *= d.transport_scale);
        let sun = self.sun(ws);
        let bal = self.balance(&d);
        for i in 0..n {
            let a = self.albedo_band(bal.as_ref(), &d, sun, temps, i).0;
            b.absorbed[i] = d.solar_scale * sun[i] * (1.0 - a);
            let (o, dolr) = self.longwave.eval(temps[i]);
            b.olr[i] = d.olr(o, dolr, temps[i]).0 - d.greenhouse_wm2;
        }
        b.extra = d.extra_wm2;
    }

    /// Global-mean temperature, K.
    pub fn global_mean(&self, temps: &[f64]) -> f64 {
        self.grid.mean(temps)
    }

    /// Ice measure (length in x covered by ice) inside `[lo, hi]` at model time `t_years`, by
    /// the same sub-band ice fractions as the `step` albedo (docs/discrete-model.md,
    /// "Diagnostics"). The time matters only for the edge-balance rule (its drivers and
    /// seasonal sunlight).
    pub fn ice_measure_at(&self, t_years: f64, temps: &[f64], lo: f64, hi: f64) -> f64 {
        let d = self.drivers_at(t_years);
        let Some(bal) = self.balance(&d) else {
            return self.albedo.ice_measure_in(&self.grid, temps, lo, hi);
        };
        let n = temps.len();
        let seasonal;
        let sun: &[f64] = match &self.sunlight {
            Sunlight::Fixed(s) => s,
            Sunlight::Seasonal(table) => {
                let mut s = vec![0.0; n];
                table.eval(t_years, &mut s);
                seasonal = s;
                &seasonal
            }
        };
        let g = &self.grid;
        let mut total = 0.0;
        for (i, &ti) in temps.iter().enumerate() {
            let (a, b) = (g.x_faces[i], g.x_faces[i + 1]);
            // The ice segment of the band: its ice fraction on the curve's ice side.
            let (p, q) = match self.albedo.balance_curve(sun, bal.scale, i) {
                Some(c) => {
                    let (o, dolr) = self.longwave.eval(ti);
                    let (o, dolr) = d.olr(o, dolr, ti);
                    let (f, _) = c.fraction(bal.restoring(o, dolr, ti).0);
                    if c.upper {
                        (b - f * (b - a), b)
                    } else {
                        (a, a + f * (b - a))
                    }
                }
                None if ti < self.albedo.freeze => (a, b),
                None => (a, a),
            };
            total += (q.min(hi) - p.max(lo)).max(0.0);
        }
        total
    }

    /// [`Model::ice_measure_at`] for a state without a time (the drivers at time 0).
    pub fn ice_measure_in(&self, temps: &[f64], lo: f64, hi: f64) -> f64 {
        self.ice_measure_at(0.0, temps, lo, hi)
    }

    /// Ice-edge latitudes `(north, south)` in degrees north: north is 90 when ice free and 0
    /// when ice covered; south (globe only) is -90 when ice free and 0 when ice covered.
    /// For a state without a time: [`Model::ice_edges_at`] time 0.
    pub fn ice_edges(&self, temps: &[f64]) -> (f64, Option<f64>) {
        self.ice_edges_at(0.0, temps)
    }

    /// [`Model::ice_edges`] of a state at model time `t_years` (the drivers and seasonal
    /// sunlight at that time enter the edge-balance rule of relaxation transport).
    pub fn ice_edges_at(&self, t_years: f64, temps: &[f64]) -> (f64, Option<f64>) {
        let g = &self.grid;
        let north = self.ice_measure_at(t_years, temps, 0.0, 1.0);
        let north_lat = (1.0 - north).clamp(0.0, 1.0).asin().to_degrees();
        let south = match g.domain {
            crate::grid::Domain::Globe => {
                let s = self.ice_measure_at(t_years, temps, -1.0, 0.0);
                Some(-(1.0 - s).clamp(0.0, 1.0).asin().to_degrees())
            }
            crate::grid::Domain::Hemisphere => None,
        };
        (north_lat, south)
    }

    /// The temperature range (K) in which the model is defined: 1 K to 2000 K, narrowed to an
    /// OLR table's range.
    pub fn valid_range(&self) -> (f64, f64) {
        let (mut lo, mut hi) = (1.0, 2000.0);
        if let Some((a, b)) = self.longwave.valid_range() {
            lo = f64::max(lo, a);
            hi = f64::min(hi, b);
        }
        (lo, hi)
    }
}

/// Per-evaluation constants of the edge-balance rule (step albedo, relaxation transport):
/// `R(T) = OLR(T) - OLR(T_f) + gamma (T - T_f)` in W m-2 with the effective OLR and rate.
#[derive(Debug, Clone, Copy)]
struct Balance {
    /// Effective OLR at freezing, W m-2.
    olr_freeze: f64,
    /// Effective relaxation rate, W m-2 K-1.
    gamma: f64,
    /// Freezing temperature, K.
    freeze: f64,
    /// Solar scale of the insolation.
    scale: f64,
}

impl Balance {
    /// `R(T)` and `R'(T)` at `t` (K) from the effective OLR `o` and its slope `dolr` there.
    #[inline(always)]
    fn restoring(&self, o: f64, dolr: f64, t: f64) -> (f64, f64) {
        (
            o - self.olr_freeze + self.gamma * (t - self.freeze),
            dolr + self.gamma,
        )
    }
}

impl Model {
    /// The edge-balance constants at drivers `d` when the model uses that rule: the `step`
    /// albedo with [`EdgeRule::EdgeBalance`] and relaxation transport (with another transport
    /// the interpolated rule applies).
    #[inline]
    fn balance(&self, d: &Drivers) -> Option<Balance> {
        let Transport::Relaxation { rate } = self.transport else {
            return None;
        };
        if self.albedo.form != AlbedoForm::Step || self.albedo.edge_rule != EdgeRule::EdgeBalance {
            return None;
        }
        let tf = self.albedo.freeze;
        let (o, dolr) = self.longwave.eval(tf);
        Some(Balance {
            olr_freeze: d.olr(o, dolr, tf).0,
            gamma: rate * d.transport_scale,
            freeze: tf,
            scale: d.solar_scale,
        })
    }

    /// Albedo of band `i` and its derivatives by `T_{i-1}`, `T_i`, `T_{i+1}` (per K) under the
    /// model's edge rule, at drivers `d` and insolation `sun` (before the solar scale).
    #[inline(always)]
    fn albedo_band(
        &self,
        bal: Option<&Balance>,
        d: &Drivers,
        sun: &[f64],
        temps: &[f64],
        i: usize,
    ) -> (f64, [f64; 3]) {
        match bal {
            None => self.albedo.band(temps, i),
            Some(b) => {
                let t = temps[i];
                let (o, dolr) = self.longwave.eval(t);
                let (o, dolr) = d.olr(o, dolr, t);
                let (r, dr) = b.restoring(o, dolr, t);
                let (a, da) = self.albedo.balance_band(sun, b.scale, temps, i, r, dr);
                (a, [0.0, da, 0.0])
            }
        }
    }

    /// Whether the `step` albedo uses the edge-balance rule here (relaxation transport).
    pub fn uses_edge_balance(&self) -> bool {
        self.balance(&self.drivers).is_some()
    }

    /// Albedo of every band at model time `t_years` under the model's edge rule, into `out`.
    pub fn albedo_at(&self, t_years: f64, temps: &[f64], ws: &mut Workspace, out: &mut [f64]) {
        self.refresh_sun(t_years, ws);
        let d = self.drivers_at(t_years);
        let bal = self.balance(&d);
        let sun = self.sun(ws);
        for (i, o) in out.iter_mut().enumerate().take(temps.len()) {
            *o = self.albedo_band(bal.as_ref(), &d, sun, temps, i).0;
        }
    }
}

impl Model {
    /// Assemble the model a validated spec describes.
    pub fn from_spec(spec: &crate::config::spec::ModelSpec) -> Model {
        use crate::config::spec::InsolationForm;
        use crate::physics::albedo::Albedo;
        let grid = Grid::new(spec.domain, spec.spacing, spec.bands);
        let n = grid.len();
        let ins = &spec.insolation;
        let sunlight = match ins.form {
            InsolationForm::Legendre { s2 } => {
                let mut s = vec![0.0; n];
                insolation::legendre_bands(&grid, ins.solar_constant, s2, &mut s);
                Sunlight::Fixed(s)
            }
            InsolationForm::AnnualMean => {
                let mut s = vec![0.0; n];
                insolation::annual_mean_bands(
                    &grid,
                    ins.solar_constant,
                    ins.obliquity,
                    ins.eccentricity,
                    &mut s,
                );
                Sunlight::Fixed(s)
            }
            InsolationForm::Seasonal => Sunlight::Seasonal(std::sync::Arc::new(SeasonalTable::new(
                &grid,
                ins.solar_constant,
                ins.obliquity,
                ins.eccentricity,
                ins.perihelion,
            ))),
        };
        let a = &spec.albedo;
        let ice_free = grid
            .p2_mean
            .iter()
            .map(|p| a.ice_free + a.ice_free_p2 * p)
            .collect();
        let transport = spec.transport.on(&grid);
        // T is continuous under diffusion and jumps at the edge under relaxation.
        let edge_rule = if transport.continuous() {
            EdgeRule::Interpolated
        } else {
            EdgeRule::EdgeBalance
        };
        let albedo = Albedo::new(&grid, a.form, ice_free, a.ice, a.freeze_k).with_edge_rule(edge_rule);
        let hc = &spec.heat_capacity;
        let heat_capacity =
            crate::physics::heat_capacity::mixed_layer::by_band(n, hc.ocean, hc.land, &hc.land_fraction);
        Model {
            grid,
            sunlight,
            albedo,
            longwave: spec.longwave.clone(),
            transport,
            heat_capacity,
            drivers: Drivers::plain(spec.solar_scale, spec.greenhouse_wm2, spec.extra_wm2),
            forcing: spec.forcing.as_ref().map(|f| {
                let base = Drivers::plain(spec.solar_scale, spec.greenhouse_wm2, spec.extra_wm2);
                std::sync::Arc::new(crate::forcing::TimeDrivers::new(f.clone(), base)) as _
            }),
        }
    }

    /// The initial state a spec describes: uniform plus P1 and P2 shapes, K.
    pub fn initial_state(&self, init: &crate::config::spec::InitialSpec) -> Vec<f64> {
        self.grid
            .x_centres
            .iter()
            .map(|&x| init.temperature_k + init.p1_k * x + init.p2_k * crate::grid::p2(x))
            .collect()
    }
}
