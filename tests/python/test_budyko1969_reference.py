"""Checks of the closed-form relaxation-transport reference (icefold_ref.budyko1969).

Source of the reference: Budyko (1969, Tellus 21, 611-619); closed form derived in the module.
Independent checks: a brute-force fine-grid fixed point, scipy quad for the global balance, and
the discrete reference (icefold_ref.discrete) for the edge window of the discrete model.
Units: W m-2, degrees C.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.optimize import brentq

from icefold_ref import budyko1969 as bu
from icefold_ref import discrete as d
from refcases import classic

# The classic set with relaxation transport; gamma = 3.8 W m-2 K-1, of the size Budyko used
# (from memory).
RELAX = classic(transport={"kind": "relaxation", "relaxation_rate": 3.8})
PARAMS = {
    "classic_relaxation": bu.Params.from_config(RELAX),
    "weak_2xco2": bu.Params.from_config(d.apply_overrides(
        RELAX, {"transport.relaxation_rate": 1.2, "greenhouse.co2_ppm": 560.0,
                "greenhouse.reference_co2_ppm": 280.0})),
}


def brute_force_q(xs: float, p: bu.Params, theta: float, points: int = 20000) -> float:
    """Q with its edge at x_s by brute force: midpoint grids on [0, x_s] and [x_s, 1] (error
    O(points^-2)), T_mean by fixed-point iteration (contraction factor gamma/(B + gamma)), and
    the edge condition T_f = theta T(x_s-) + (1 - theta) T(x_s+) solved by brentq in Q."""
    xf = (np.arange(points) + 0.5) / points * xs
    xi = xs + (np.arange(points) + 0.5) / points * (1.0 - xs)
    x = np.concatenate([xf, xi])
    wts = np.concatenate([np.full(points, xs / points), np.full(points, (1.0 - xs) / points)])
    pp2 = 0.5 * (3.0 * x * x - 1.0)
    s = 1.0 + p.s2 * pp2
    c = np.where(x < xs, 1.0 - p.a0 - p.a2 * pp2, 1.0 - p.a_ice)

    def tmean(q):
        tm = 0.0
        for _ in range(500):
            t = (q * s * c - p.a_eff + p.gamma * tm) / (p.b + p.gamma)
            new = float(np.dot(wts, t))
            if abs(new - tm) <= 1e-13 * (1.0 + abs(new)):
                break
            tm = new
        return new

    def edge_residual(q):
        tm = tmean(q)
        s_e = 1.0 + p.s2 * 0.5 * (3.0 * xs * xs - 1.0)
        warm = (q * s_e * (1.0 - p.a0 - p.a2 * 0.5 * (3.0 * xs * xs - 1.0)) - p.a_eff
                + p.gamma * tm) / (p.b + p.gamma)
        cold = (q * s_e * (1.0 - p.a_ice) - p.a_eff + p.gamma * tm) / (p.b + p.gamma)
        return theta * warm + (1.0 - theta) * cold - p.tf_c

    return brentq(edge_residual, 100.0, 1000.0, xtol=1e-12, rtol=1e-15)


@pytest.mark.parametrize("name", list(PARAMS))
@pytest.mark.parametrize("edge", ["mean", "warm", "cold", 0.3])
@pytest.mark.parametrize("xs", [0.2, 0.9, 0.99])
def test_closed_form_matches_brute_force(name, edge, xs):
    # Source: brute-force fixed point on a fine grid (midpoint rule, error ~ (1/20000)^2 x
    # curvature ~ 1e-9 relative), so agree to 1e-8 relative.
    p = PARAMS[name]
    q = float(bu.q_of_xs(xs, p, edge))
    assert abs(q / brute_force_q(xs, p, bu.edge_weight(edge)) - 1.0) < 1e-8


@pytest.mark.parametrize("name", list(PARAMS))
def test_global_energy_balance(name):
    # Source: energy conservation (common practice): at equilibrium the hemispheric mean of
    # absorbed sunlight equals the mean OLR; scipy quad with the edge as a break point.
    p = PARAMS[name]
    xs = 0.8
    q = float(bu.q_of_xs(xs, p))
    def net(x):
        t = float(bu.temperature(x, xs, q, p))
        s = 1.0 + p.s2 * 0.5 * (3 * x * x - 1)
        c = 1.0 - p.a0 - p.a2 * 0.5 * (3 * x * x - 1) if x < xs else 1.0 - p.a_ice
        return q * s * c - (p.a_eff + p.b * t)
    val, _ = quad(net, 0.0, 1.0, points=[xs], epsabs=1e-12)
    assert abs(val) < 1e-9
    tbar, _ = quad(lambda x: float(bu.temperature(x, xs, q, p)), 0.0, 1.0, points=[xs],
                   epsabs=1e-12)
    assert abs(tbar - bu.global_mean(xs, q, p)) < 1e-10
    assert abs(float(bu.temperature(xs, xs, q, p)) - p.tf_c) < 1e-12


def test_conventions_order_and_fold():
    # Source: the closed form: the edge coalbedo grows with theta, so Q_warm < Q_mean < Q_cold
    # at every x_s; the mean curve has an interior minimum (the Budyko fold), checked against a
    # 400-point scan.
    p = PARAMS["classic_relaxation"]
    xs = np.linspace(0.01, 0.99, 400)
    qw, qm, qc = (bu.q_of_xs(xs, p, e) for e in ("warm", "mean", "cold"))
    assert np.all(qw < qm) and np.all(qm < qc)
    x_f, q_f = bu.fold(p, "mean")
    assert 0.05 < x_f < 0.95
    assert q_f <= qm.min() + 1e-12 and qm.min() - q_f < 1e-2


def _effective_theta(xs, q, p: bu.Params) -> float:
    """The edge weight theta for which (x_s, Q) lies on the closed-form curve Q_theta(x_s)."""
    s = 1.0 + p.s2 * 0.5 * (3 * xs * xs - 1)
    num = (p.b + p.gamma) * (p.tf_c + p.a_eff / p.b)
    c_edge = (num / q - p.gamma * float(bu.absorbed_integral(xs, p)) / p.b) / s
    cf = 1.0 - p.a0 - p.a2 * 0.5 * (3 * xs * xs - 1)
    ci = 1.0 - p.a_ice
    return (c_edge - ci) / (cf - ci)


def _discrete_edge(p: bu.Params, bands: int, q: float, xs0: float) -> float:
    """x_s of the discrete model's equilibrium (docs/discrete-model.md, solved by
    icefold_ref.discrete) at insolation Q, started from the closed form with its edge at xs0."""
    m = d.model_from_config(d.apply_overrides(RELAX, {"grid.bands": bands}))
    m.insolation = d.legendre_insolation(m.grid, 4.0 * q, p.s2)
    t = d.equilibrium(m, bu.temperature(m.grid.x_c, xs0, q, p) + d.KELVIN)
    return 1.0 - m.ice_measure(t, 0.0, 1.0)


def test_discrete_equilibria_converge_to_the_mean_convention():
    # Source: the discrete model (docs/discrete-model.md, the step albedo's edge-balance rule
    # under relaxation transport) solved by icefold_ref.discrete, against the closed form with
    # the mean coalbedo at the edge (Budyko 1969; icefold_ref.budyko1969). The rule makes every
    # discrete equilibrium satisfy the closed form's edge condition with the discrete global
    # mean and the edge insolation linear between band centres, both second order in band
    # width: the effective edge weight must approach 1/2 at least at first order (measured:
    # second), and at 90 bands lie within 0.01 of it (the old interpolation rule gave
    # anything in [7/16, 9/16], not shrinking).
    p = PARAMS["classic_relaxation"]
    q = 325.0
    xs_closed = brentq(lambda x: float(bu.q_of_xs(x, p)) - q, 0.7, 0.999)
    devs = []
    for bands in (23, 45, 90):
        xs = _discrete_edge(p, bands, q, xs_closed)
        devs.append(abs(_effective_theta(xs, q, p) - 0.5))
    assert devs[2] < 0.01, devs
    assert devs[1] <= 0.5 * devs[0] + 1e-9 and devs[2] <= 0.5 * devs[1] + 1e-9, devs


def test_discrete_equilibrium_is_unique_at_one_insolation():
    # Source: the closed form (Budyko 1969): on its stable branch Q(x_s) is monotone, so one
    # insolation has one partly ice-covered stable equilibrium there. Starts on either side of
    # it settle at the same edge in the discrete model (with the old interpolation rule they
    # settled more than two bands apart).
    p = PARAMS["classic_relaxation"]
    bands, q = 90, 325.0
    edges = [_discrete_edge(p, bands, q, xs0) for xs0 in (0.85, 0.95)]
    assert abs(edges[1] - edges[0]) < 1e-6, edges
