"""Self-checks of the numpy/scipy reference (icefold_ref.discrete) before it judges icefold.

Each check names its source. Units: K, W m-2, years.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.optimize import brentq

from icefold_ref import discrete as d
from icefold_ref import north1975 as n75
from refcases import classic

GRIDS = [(dom, sp) for dom in ("hemisphere", "globe") for sp in ("equal_area", "equal_angle")]


@pytest.mark.parametrize("domain,spacing", GRIDS)
@pytest.mark.parametrize("bands", [1, 7, 90])
def test_grid_geometry(domain, spacing, bands):
    # Source: docs/discrete-model.md "Grid" (faces, centres, weights, lat bounds).
    g = d.make_grid(domain, bands, spacing)
    lo = 0.0 if domain == "hemisphere" else -1.0
    assert g.x_f[0] == lo and g.x_f[-1] == 1.0
    assert np.all(np.diff(g.x_f) > 0)
    assert np.all((g.x_c > g.x_f[:-1]) & (g.x_c < g.x_f[1:]))
    assert abs(g.w.sum() - 1.0) < 1e-14
    assert np.all((g.lat_bnds_deg[:, 0] < g.lat_deg) & (g.lat_deg < g.lat_bnds_deg[:, 1]))
    if spacing == "equal_angle":
        phi = np.arcsin(g.x_f)
        np.testing.assert_allclose(np.diff(phi), np.diff(phi)[0], rtol=1e-12)
        np.testing.assert_allclose(g.x_c, np.sin(0.5 * (phi[:-1] + phi[1:])), rtol=0, atol=1e-15)
    else:
        np.testing.assert_allclose(g.dx, g.dx[0], rtol=1e-12)


def test_band_mean_p2_against_quad():
    # Source: scipy quad of P2 = (3x^2 - 1)/2 over the band.
    g = d.make_grid("globe", 13, "equal_angle")
    pbar = d.band_mean_p2(g.x_f[:-1], g.x_f[1:])
    for i in range(g.n):
        val, _ = quad(lambda x: float(d.p2(x)), g.x_f[i], g.x_f[i + 1], epsabs=1e-15)
        assert abs(pbar[i] - val / g.dx[i]) < 1e-14


@pytest.mark.parametrize("domain,spacing", GRIDS)
@pytest.mark.parametrize("transport", [
    {"kind": "diffusive", "diffusivity": 0.52},
    {"kind": "diffusive", "diffusivity": 0.44, "diffusivity_p2": -1.3},
    {"kind": "relaxation", "relaxation_rate": 3.8},
])
def test_transport_area_weighted_sum_is_zero(domain, spacing, transport):
    # Source: DESIGN.md section 2 (finite volume, zero flux through the outer faces): the
    # area-weighted sum telescopes to zero; round-off ~ 1e-16 x the largest term.
    cfg = classic(grid={"domain": domain, "bands": 37, "spacing": spacing})
    cfg["transport"] = transport
    m = d.model_from_config(cfg)
    rng = np.random.default_rng(1975)
    t = 250.0 + 40.0 * rng.random(m.grid.n)
    tend = m.transport(t)
    scale = np.max(np.abs(tend))
    assert scale > 1.0  # the check is not vacuous
    assert abs(np.dot(m.grid.w, tend)) < 1e-13 * scale


def _exact_ice_free(grid, q, params):
    """North (1975) ice-free exact solution at the band centres, K (even in x on a globe)."""
    return np.array([n75.ice_free_temperature(abs(x), q, params) for x in grid.x_c]) + d.KELVIN


@pytest.mark.parametrize("domain,spacing", GRIDS)
def test_ice_free_exact_solution_second_order(domain, spacing):
    # Source: North (1975, J. Atmos. Sci. 32): with constant D, ice-free albedo a0 + a2 P2 and
    # S0/4 (1 + s2 P2) the equilibrium is sum_{n=0,2,4} c_n P_n / (B + n(n+1) D). The long-time
    # state of the discrete model (800 years >> C/B ~ 6 years: e^-130) must converge to it at
    # second order in band width: observed order >= 1.9 between successive doublings (measured
    # 1.95-2.02), and the 80-band error below 4e-3 K (measured 9e-4 K).
    base = classic(grid={"domain": domain, "spacing": spacing},
                   albedo={"freeze_temperature_c": -150.0})  # never freezes: ice free
    params = n75.Params.from_config(base)
    q = base["insolation"]["solar_constant"] / 4.0
    errors = []
    for bands in (10, 20, 40, 80):
        cfg = d.apply_overrides(base, {"grid.bands": bands})
        run = d.integrate(cfg, [0.0, 800.0])
        m = d.model_from_config(cfg)
        assert np.all(run.ice_edge_north == [90.0, 90.0])
        errors.append(np.max(np.abs(run.temperature[-1] - _exact_ice_free(m.grid, q, params))))
    errors = np.array(errors)
    orders = np.log2(errors[:-1] / errors[1:])
    assert np.all(orders >= 1.9), (errors, orders)
    assert errors[-1] < 4e-3


def test_step_equilibrium_converges_to_north1975():
    # Source: North (1975, J. Atmos. Sci. 32, 1301-1307) exact step-albedo solution; DESIGN.md
    # section 2 claims the sub-band edge mixing gives second order in band width. Measured:
    # |x_s - x_s,exact| * bands^2 between 0.6 and 3.5 for 45-360 bands (it depends on where the
    # edge sits inside its band), so bound it by 5 h^2; an edge snapped to band faces would be
    # off by up to h/2 (0.0014 at 360 bands, 36x the bound).
    base = classic()
    params = n75.Params.from_config(base)
    q = base["insolation"]["solar_constant"] / 4.0
    xs_exact = brentq(lambda x: n75.q_of_xs(x, params) - q, 0.90, 0.98, xtol=1e-14)
    exact = n75.solve(xs_exact, params)
    slope = (n75.q_of_xs(xs_exact + 1e-6, params) - n75.q_of_xs(xs_exact - 1e-6, params)) / 2e-6
    for bands in (45, 90, 180, 360):
        m = d.model_from_config(d.apply_overrides(base, {"grid.bands": bands}))
        t0 = np.array([exact.temperature(x) for x in m.grid.x_c]) + d.KELVIN
        t = d.equilibrium(m, t0)
        xs = 1.0 - d.ice_measure(m.grid, t, m.tf, 0.0, 1.0)
        h = 1.0 / bands
        assert abs(xs - xs_exact) < 5.0 * h * h, (bands, xs, xs_exact)
        # Q(x_s) from the exact curve at the discrete edge, against the configured Q.
        assert abs(n75.q_of_xs(xs, params) - q) < 5.0 * h * h * 1.01 * abs(slope)


@pytest.mark.parametrize("domain", ["hemisphere", "globe"])
@pytest.mark.parametrize("obliquity,ecc", [(0.0, 0.0), (23.44, 0.0167), (60.0, 0.1), (90.0, 0.3)])
def test_annual_mean_global_mean(domain, obliquity, ecc):
    # Source: DESIGN.md section 6 (Kepler's second law): the global annual mean is
    # S0 / (4 sqrt(1 - e^2)); the quadrature reaches it to ~1e-13 relative.
    s0 = 1361.0
    expected = s0 / (4.0 * np.sqrt(1.0 - ecc**2))
    for bands, spacing in ((1, "equal_area"), (18, "equal_angle"), (90, "equal_area")):
        g = d.make_grid(domain, bands, spacing)
        s = d.annual_mean_insolation_bands(g, s0, obliquity, ecc)
        assert abs(np.dot(g.w, s) / expected - 1.0) < 1e-12, (bands, spacing)
        if domain == "globe":  # the annual mean is symmetric about the equator
            np.testing.assert_allclose(s, s[::-1], rtol=1e-12)


def test_annual_mean_bands_against_scipy_quad():
    # Source: scipy's adaptive quad (nested: x outside, true longitude inside) of the daily-mean
    # formula (Berger 1978, J. Atmos. Sci. 35); both reach ~1e-12, so agree to 1e-10 relative.
    s0, obl, ecc = 1361.0, 23.44, 0.0167
    g = d.make_grid("hemisphere", 12, "equal_angle")  # a face at 67.5 deg, near the polar circle
    s = d.annual_mean_insolation_bands(g, s0, obl, ecc)
    polar = np.cos(np.radians(obl))
    for i in (0, 6, 10, 11):
        a, b = g.x_f[i], g.x_f[i + 1]
        pts = [polar] if a < polar < b else None
        val, _ = quad(lambda x: d.annual_mean_insolation_at(x, s0, obl, ecc), a, b, points=pts,
                      epsabs=1e-12, epsrel=1e-13, limit=200)
        assert abs(s[i] / (val / (b - a)) - 1.0) < 1e-10, i


@pytest.mark.parametrize("obliquity", [23.44, 60.0])
def test_annual_mean_p2_coefficient(obliquity):
    # Source: Nadeau and McGehee (2017, Icarus): s2 = -(5/8) P2(cos obliquity). It is exact: the
    # P2 part of max(0, mu) is (5/16) P2(mu), whose zonal and annual mean is
    # (5/16) P2(x) <P2(sin dec)> (from memory). Projection by scipy quad, 1e-9 relative.
    s0 = 1361.0
    polar = np.cos(np.radians(obliquity))
    f = lambda x: d.annual_mean_insolation_at(x, s0, obliquity, 0.0)  # noqa: E731
    c0, _ = quad(f, 0.0, 1.0, points=[polar], epsabs=1e-12, limit=200)
    c2, _ = quad(lambda x: f(x) * float(d.p2(x)), 0.0, 1.0, points=[polar], epsabs=1e-12,
                 limit=200)
    assert abs(c0 - s0 / 4.0) < 1e-9 * s0
    s2 = 5.0 * c2 / c0
    assert abs(s2 - d.s2_from_obliquity(obliquity)) < 1e-9
    if obliquity == 23.44:  # the often-quoted value -0.477 (North et al. 1981, from memory)
        assert abs(s2 + 0.477) < 5e-4


def test_ice_fraction_sub_band_rule():
    # Source: docs/discrete-model.md, `step` albedo (piecewise-linear interpolant through the
    # centres, outer half bands on the line through the two nearest centres, strict inequality).
    # Cases worked by hand.
    g = d.make_grid("hemisphere", 4, "equal_area")  # faces 0, .25, .5, .75, 1
    tf = 263.15
    # T linear in x through the centres: T = tf + 40 (0.6 - x) crosses tf at x = 0.6. The
    # interpolant is exact on the inner half bands; band 2 = [0.5, 0.75] has 0.6 inside.
    t = tf + 40.0 * (0.6 - g.x_c)
    f = d.ice_fraction(g, t, tf)
    np.testing.assert_allclose(f, [0.0, 0.0, (0.75 - 0.6) / 0.25, 1.0], atol=1e-14)
    assert abs(d.ice_measure(g, t, tf, 0.0, 1.0) - 0.4) < 1e-14
    # Outer half band extends the line: the crossing at x = 0.9 lies in band 3's outer half
    # [0.875, 1], so ice covers [0.9, 1]: fraction 0.1 / 0.25 = 0.4 of band 3, even though
    # T_3 = tf + 40 (0.9 - 0.875) is above freezing (continuity as the pole band crosses tf).
    t = tf + 40.0 * (0.9 - g.x_c)
    np.testing.assert_allclose(d.ice_fraction(g, t, tf), [0.0, 0.0, 0.0, 0.4], atol=1e-14)
    # The same line at the equator end: crossing at x = 0.05 in band 0's outer half [0, 0.125].
    t = tf + 40.0 * (g.x_c - 0.05)
    np.testing.assert_allclose(d.ice_fraction(g, t, tf), [0.05 / 0.25, 0.0, 0.0, 0.0], atol=1e-14)
    # Strict inequality: T exactly at tf is not ice.
    assert np.all(d.ice_fraction(g, np.full(4, tf), tf) == 0.0)
    assert np.all(d.ice_fraction(g, np.full(4, tf - 1e-9), tf) == 1.0)
    # One band: all or nothing.
    g1 = d.make_grid("globe", 1, "equal_area")
    assert d.ice_fraction(g1, np.array([tf - 1.0]), tf)[0] == 1.0


@pytest.mark.parametrize("bands", [6, 7])
def test_ice_edges_on_a_globe(bands):
    # Source: docs/discrete-model.md "Diagnostics": a symmetric state has edges at +-lat; with
    # an odd band count the centre band is split at x = 0. Check against the hand value.
    cfg = classic(grid={"domain": "globe", "bands": bands, "spacing": "equal_area"})
    m = d.model_from_config(cfg)
    t = m.tf + 40.0 * (0.6 - np.abs(m.grid.x_c))
    north, south = m.ice_edge_north(t), m.ice_edge_south(t)
    assert abs(north + south) < 1e-12
    measure = d.ice_measure(m.grid, t, m.tf, 0.0, 1.0)
    assert abs(north - np.degrees(np.arcsin(1.0 - measure))) < 1e-12
    assert 0.0 < measure < 1.0
    cold = np.full(bands, m.tf - 5.0)
    assert m.ice_edge_north(cold) == 0.0 and m.ice_edge_south(cold) == 0.0
    warm = np.full(bands, m.tf + 5.0)
    assert m.ice_edge_north(warm) == 90.0 and m.ice_edge_south(warm) == -90.0


def test_smooth_and_ramp_albedo():
    # Source: docs/discrete-model.md (smooth: tanh form, the mean at T = Tf; ramp: linear).
    cfg = classic(albedo={"kind": "smooth", "width_k": 4.0})
    m = d.model_from_config(cfg)
    at_tf = m.albedo(np.full(m.grid.n, m.tf))
    np.testing.assert_allclose(at_tf, 0.5 * (m.af + m.ai), rtol=1e-15)
    cfg["albedo"]["kind"] = "ramp"
    m = d.model_from_config(cfg)
    np.testing.assert_allclose(m.albedo(np.full(m.grid.n, m.tf - 2.0)), m.ai, rtol=1e-15)
    np.testing.assert_allclose(m.albedo(np.full(m.grid.n, m.tf + 2.0)), m.af, rtol=1e-15)
    np.testing.assert_allclose(m.albedo(np.full(m.grid.n, m.tf + 1.0)),
                               m.ai + 0.75 * (m.af - m.ai), rtol=1e-15)


def test_co2_doubling_forcing():
    # Source: Myhre et al. (1998): 5.35 ln 2 = 3.7 W m-2 for doubled CO2.
    cfg = classic(greenhouse={"co2_ppm": 560.0, "reference_co2_ppm": 280.0})
    m = d.model_from_config(cfg)
    assert abs(m.co2_term - 3.708) < 1e-3
    base = d.model_from_config(classic())
    t = np.full(m.grid.n, 280.0)
    np.testing.assert_allclose(m.net_flux(t) - base.net_flux(t), m.co2_term, rtol=1e-12)


def _zero_d(longwave: dict) -> dict:
    """One-band globe (the zero-dimensional model) with a constant albedo 0.3 (never ice)."""
    return classic(
        grid={"domain": "globe", "bands": 1, "spacing": "equal_area"},
        insolation={"kind": "legendre", "solar_constant": 1361.0, "s2": 0.0},
        albedo={"ice_free": 0.3, "ice_free_p2": 0.0, "freeze_temperature_c": -200.0},
        longwave=longwave,
        initial={"temperature_c": 15.0},
    )


def test_zero_dimensional_emission_temperature():
    # Source: common practice: a planet with S0 = 1361 W m-2 and albedo 0.3 radiates at about
    # 255 K; exactly (S0 (1 - 0.3) / (4 sigma))^(1/4) with sigma from CODATA 2018. Emission
    # level: T_s = T_e + lapse rate x height. 600 years >> C/(4 sigma T^3) ~ 3.4 years.
    te = (1361.0 * 0.7 / (4.0 * d.SIGMA)) ** 0.25
    assert abs(te - 255.0) < 0.5
    run = d.integrate(_zero_d({"kind": "gray_body", "emissivity": 1.0}), [0.0, 600.0])
    assert abs(run.temperature[-1, 0] - te) < 1e-7
    run = d.integrate(_zero_d({"kind": "emission_level", "lapse_rate_k_per_km": 6.5,
                               "emission_height_km": 5.0}), [0.0, 600.0])
    assert abs(run.temperature[-1, 0] - (te + 32.5)) < 1e-7
    assert run.global_mean[-1] == run.temperature[-1, 0]


def test_radau_and_bdf_agree():
    # Source: scipy solve_ivp, two different implicit methods on the same equations: at rtol
    # 1e-11 each is within ~1e-8 K of the true trajectory, so they agree to 1e-6 K.
    cfg = classic(grid={"bands": 45}, time={"years": 50, "output_every_years": 5})
    a = d.integrate(cfg, method="Radau")
    b = d.integrate(cfg, method="BDF")
    assert np.max(np.abs(a.temperature - b.temperature)) < 1e-6
    assert a.temperature.shape == (11, 45)
    assert np.all(a.time == np.arange(0.0, 51.0, 5.0))


def test_overrides_and_output_times():
    # Source: DESIGN.md section 4 (`--set` takes dotted keys; values are TOML values).
    cfg = d.apply_overrides(classic(), {"grid.bands": "45", "albedo.kind": "smooth",
                                        "time.years": 10, "time.output_every_years": 4})
    assert cfg["grid"]["bands"] == 45 and cfg["albedo"]["kind"] == "smooth"
    np.testing.assert_allclose(d.output_times(cfg), [0.0, 4.0, 8.0, 10.0])
    with pytest.raises(d.ConfigError, match="width_k"):
        d.model_from_config(cfg)
