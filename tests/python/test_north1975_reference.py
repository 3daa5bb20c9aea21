"""Checks of the exact step-albedo reference (icefold_ref.north1975) against independent numerics.

Source of the reference: North (1975, J. Atmos. Sci. 32, 1301-1307); small caps: North (1984,
J. Atmos. Sci. 41). Independent checks: scipy's solve_bvp on the continuous ODE, mpmath's legenp,
the ice-free exact solution. Units: W m-2, degrees C.
"""

from __future__ import annotations

import mpmath as mp
import numpy as np
import pytest
from scipy.integrate import solve_bvp

from icefold_ref import north1975 as n75
from refcases import classic

PARAMS = {
    # The classic set of configs/classic-step-albedo.toml (D calibrated to 0.52).
    "classic": n75.Params.from_config(classic()),
    # North, Cahalan and Coakley (1981)'s D = 0.649 (from memory), with doubled CO2
    # (5.35 ln 2 W m-2, Myhre et al. 1998) to exercise the greenhouse term.
    "large_d_2xco2": n75.Params.from_config(
        classic(transport={"diffusivity": 0.649},
                greenhouse={"co2_ppm": 560.0, "reference_co2_ppm": 280.0})),
    # An invented strongly diffusive set with B/D < 1/4, so that the degree nu is real.
    "real_degree": n75.Params(a=210.0, b=1.5, d=7.0, s2=-0.482, a0=0.303, a2=0.0779,
                              a_ice=0.62, tf_c=-10.0),
}


def bvp_solution(xs: float, p: n75.Params, tol: float = 1e-9):
    """Solve the continuous model with scipy's solve_bvp, Q as an unknown parameter.

    Colatitude theta (x = cos theta): D (T'' + cot(theta) T') = B T + A_eff - Q S c. Ice region
    theta in [0, theta_s] mapped to t in [0, 1] (pole at t = 0, handled by solve_bvp's singular
    term -v/t), ice-free region [theta_s, pi/2] mapped to t in [0, 1]. Conditions: T'(pole) = 0,
    T = T_f on both sides of the edge, dT/dtheta continuous there, T'(equator) = 0.
    """
    ths = float(np.arccos(xs))
    span = 0.5 * np.pi - ths

    def source(x, ice):
        s = 1.0 + p.s2 * 0.5 * (3.0 * x * x - 1.0)
        c = (1.0 - p.a_ice) if ice else 1.0 - p.a0 - p.a2 * 0.5 * (3.0 * x * x - 1.0)
        return s * c

    def cot_minus_inv(th):  # cot(th) - 1/th, by its series where th is small
        out = np.empty_like(th)
        small = th < 1e-3
        out[small] = -th[small] / 3.0 - th[small] ** 3 / 45.0
        out[~small] = 1.0 / np.tan(th[~small]) - 1.0 / th[~small]
        return out

    def rhs(t, y, par):
        q = par[0]
        u1, v1, u2, v2 = y
        th1, th2 = ths * t, ths + span * t
        g1 = (p.b * u1 + p.a_eff - q * source(np.cos(th1), True)) / p.d
        g2 = (p.b * u2 + p.a_eff - q * source(np.cos(th2), False)) / p.d
        dv1 = ths**2 * g1 - ths * cot_minus_inv(th1) * v1  # plus the singular term -v1/t
        dv2 = span**2 * g2 - span * np.cos(th2) / np.sin(th2) * v2
        return np.vstack([v1, dv1, v2, dv2])

    def bc(ya, yb, par):
        return np.array([ya[1], yb[0] - p.tf_c, ya[2] - p.tf_c, yb[1] / ths - ya[3] / span,
                         yb[3]])

    sing = np.zeros((4, 4))
    sing[1, 1] = -1.0
    t = np.linspace(0.0, 1.0, 50)
    y0 = np.zeros((4, t.size))
    y0[0] = y0[2] = p.tf_c
    sol = solve_bvp(rhs, bc, t, y0, p=[330.0], S=sing, tol=tol, max_nodes=100000, bc_tol=1e-12)
    assert sol.status == 0, sol.message
    return sol


@pytest.mark.parametrize("name", list(PARAMS))
@pytest.mark.parametrize("xs", [0.3, 0.6, 0.9, 0.97, 0.995])
def test_q_of_xs_matches_solve_bvp(name, xs):
    # Source: scipy's solve_bvp (4th-order collocation, tol 1e-9) on the continuous ODE; it
    # reproduces Q to ~1e-13 relative here, so 1e-8 relative leaves a wide margin.
    p = PARAMS[name]
    sol = bvp_solution(xs, p)
    exact = n75.solve(xs, p)
    assert abs(sol.p[0] / exact.q - 1.0) < 1e-8
    # Temperatures at the pole (ice region, t = 0) and the equator (ice-free region, t = 1):
    # the collocation solution is accurate to ~ tol x |T| there.
    assert abs(sol.y[0, 0] - exact.temperature(1.0)) < 1e-6
    assert abs(sol.y[2, -1] - exact.temperature(0.0)) < 1e-6


@pytest.mark.parametrize("name", list(PARAMS))
def test_legendre_function_against_mpmath_legenp(name):
    # Source: mpmath.legenp (Ferrers function of the first kind, degree nu, order 0) and
    # mpmath.diff: the hypergeometric form used by the reference must agree to ~1e-25.
    p = PARAMS[name]
    with mp.workdps(n75.DPS):
        nu = n75.degree(p)
        assert abs(nu * (nu + 1) + mp.mpf(p.b) / p.d) < mp.mpf(10) ** -25
        assert (mp.im(nu) != 0) == (p.b / p.d > 0.25)
        for x in (mp.mpf("-0.9"), mp.mpf("0.1"), mp.mpf("0.75"), mp.mpf("0.999")):
            val, der = n75.legendre_p(nu, x)
            assert abs(val - mp.re(mp.legenp(nu, 0, x))) < mp.mpf(10) ** -25
            num = mp.diff(lambda y: mp.re(mp.legenp(nu, 0, y)), x)
            assert abs(der - num) < mp.mpf(10) ** -20


@pytest.mark.parametrize("name", list(PARAMS))
def test_solution_is_continuous_and_solves_the_ode(name):
    # Source: the definition (T = T_f at the edge from both sides, T' continuous) and the ODE
    # -(D (1 - x^2) T')' + B T = Q S c - A_eff, checked by nested central differences.
    p = PARAMS[name]
    xs = 0.8
    sol = n75.solve(xs, p)
    for x in (xs - 1e-12, xs + 1e-12):
        assert abs(sol.temperature(x) - p.tf_c) < 1e-9
    # One-sided slopes by differences (temperature() returns floats): round-off ~1e-16/1e-6.
    h = 1e-6
    slope_l = (sol.temperature(xs - h) - sol.temperature(xs - 2 * h)) / h
    slope_r = (sol.temperature(xs + 2 * h) - sol.temperature(xs + h)) / h
    assert abs(slope_l - slope_r) < 1e-3 * abs(slope_l)
    assert slope_l < 0.0  # colder toward the pole
    for x, ice in ((0.4, False), (0.9, True)):
        def flux(y):
            dt = (sol.temperature(y + 1e-5) - sol.temperature(y - 1e-5)) / 2e-5
            return p.d * (1.0 - y * y) * dt
        div = -(flux(x + 1e-3) - flux(x - 1e-3)) / 2e-3
        s = 1.0 + p.s2 * 0.5 * (3 * x * x - 1)
        c = (1.0 - p.a_ice) if ice else 1.0 - p.a0 - p.a2 * 0.5 * (3 * x * x - 1)
        resid = div + p.b * sol.temperature(x) - (sol.q * s * c - p.a_eff)
        assert abs(resid) < 1e-4 * sol.q  # finite-difference error O(1e-6 * T''')


@pytest.mark.parametrize("name", list(PARAMS))
def test_ice_free_limit(name):
    # Source: North (1975) ice-free exact solution: Q(x_s) -> Q1 as x_s -> 1, with Q1 such that
    # the ice-free solution has T(1) = T_f. The approach is like (1-x_s) ln(1-x_s) (North 1984).
    p = PARAMS[name]
    q1 = n75.q_ice_free_limit(p)
    assert abs(n75.ice_free_temperature(1.0, q1, p) - p.tf_c) < 1e-10
    gaps = [abs(n75.q_of_xs(1.0 - eps, p) - q1) for eps in (1e-4, 1e-6, 1e-8, 1e-10)]
    assert np.all(np.diff(gaps) < 0)
    assert gaps[-1] < 1e-6 * q1


@pytest.mark.parametrize("name", ["classic", "large_d_2xco2"])
def test_fold_is_the_minimum(name):
    # Source: North (1975): the large-ice-cap fold is the minimum of Q(x_s). Checked against a
    # scan of 61 points: the scan cannot go below it, and lies above it by at most
    # Q''/2 (spacing/2)^2 (x1.5 for the variation of Q''); and dQ/dx_s = 0 there.
    p = PARAMS[name]
    f = n75.fold(p)
    xs = np.linspace(0.05, 0.95, 61)
    qs = np.array([n75.q_of_xs(x, p) for x in xs])
    h = 1e-4
    curv = (n75.q_of_xs(f.xs + h, p) - 2.0 * f.q + n75.q_of_xs(f.xs - h, p)) / h**2
    assert curv > 0.0
    assert f.q <= qs.min() + 1e-12
    assert qs.min() - f.q <= 0.5 * curv * (0.5 * (xs[1] - xs[0])) ** 2 * 1.5
    dq = (n75.q_of_xs(f.xs + 1e-5, p) - n75.q_of_xs(f.xs - 1e-5, p)) / 2e-5
    assert abs(dq) < 1e-4  # central difference: error ~ Q''' 1e-10 plus round-off 1e-16/1e-5


def test_no_interior_fold_with_strong_diffusion():
    # Source: North (1975): with strong diffusion (here B/D = 0.21) every partial cap is unstable
    # (dQ/dx_s < 0 throughout), so there is no interior minimum; fold() must say so.
    p = PARAMS["real_degree"]
    qs = [n75.q_of_xs(x, p) for x in np.linspace(0.05, 0.95, 10)]
    assert np.all(np.diff(qs) < 0.0)
    with pytest.raises(ValueError, match="no interior minimum"):
        n75.fold(p)


def test_classic_fold_and_edge_values():
    # Source: the calibration stated in configs/classic-step-albedo.toml: at Q = 334.4 the
    # stable partial-cap edge is near x_s = 0.95 (about 72 degrees). The fold (from this
    # reference) lies near 31 degrees at Q ~ 303 W m-2: about 9 % below 334.4 (North 1975's
    # figure shows a fold several per cent below the present Q, from memory).
    p = PARAMS["classic"]
    assert 334.0 < n75.q_of_xs(0.95, p) < 334.4 < n75.q_of_xs(0.955, p)
    f = n75.fold(p)
    assert 25.0 < f.latitude_deg < 40.0
    assert 0.85 < f.q / 334.4 < 0.95


@pytest.mark.parametrize("name", ["classic", "large_d_2xco2"])
def test_small_ice_cap_branch(name):
    # Source: North (1984, J. Atmos. Sci. 41): caps smaller than the diffusive length are
    # unstable: Q(x_s) has a local maximum near the pole and dQ/dx_s < 0 beyond it.
    p = PARAMS[name]
    q1 = n75.q_ice_free_limit(p)
    f = n75.small_cap_fold(p)
    main = n75.fold(p)
    assert main.xs < f.xs < 1.0 and f.q > q1
    xs = np.linspace(f.xs + 1e-3 * (1.0 - f.xs), 1.0 - 1e-9, 25)
    qs = np.array([n75.q_of_xs(x, p) for x in xs])
    assert np.all(np.diff(qs) < 0.0)  # the unstable small-cap branch
    # The cap's angular radius at the small-cap fold is of the order of the diffusive length
    # sqrt(D/B) radians (North 1984).
    radius = np.arccos(f.xs)
    length = np.sqrt(p.d / p.b)
    assert 0.2 * length < radius < 2.0 * length


# Not "real_degree": the planar limit needs the diffusive length sqrt(D/B) well below the
# sphere's radius (0.50 and 0.56 rad for these two sets, 2.2 rad for the strongly diffusive one).
@pytest.mark.parametrize("name", ["classic", "large_d_2xco2"])
def test_small_cap_asymptote(name):
    # Source: North (1984), planar limit: a disc of radius r of reduced absorption lowers the
    # edge temperature by (Q S Delta / B) kappa r I1(kappa r) K0(kappa r). Its leading term
    # ~ r^2 ln r is exact; the next, O(r^2), is only approximate (the sphere's Green's function
    # differs from the plane's by a constant), so the relative error of Q - Q1 falls like
    # 1/ln(1/(1-x_s)): bound it by 0.5/ln(1/(1-x_s)) and require it to fall.
    p = PARAMS[name]
    q1 = n75.q_ice_free_limit(p)
    errs = []
    for eps in (1e-3, 1e-4, 1e-5, 1e-6):
        xs = 1.0 - eps
        exact = n75.q_of_xs(xs, p) - q1
        approx = n75.small_cap_asymptote(xs, p) - q1
        rel = abs(approx / exact - 1.0)
        assert rel < 0.5 / np.log(1.0 / eps), (eps, rel)
        errs.append(rel)
    assert np.all(np.diff(errs) < 0)
