"""Exact step-albedo equilibria of the continuous hemispheric model with constant diffusivity.

Reference: North (1975), "Analytical solution to a simple climate model with diffusive heat
transport", J. Atmos. Sci. 32, 1301-1307; small ice caps: North (1984), "The small ice cap
instability in diffusive climate models", J. Atmos. Sci. 41, 3390-3395.

The model (T in degrees C, x = sin(latitude), 0 <= x <= 1, Q = S0/4 in W m-2):

    -d/dx[D (1 - x^2) dT/dx] + B T = Q S(x) c(x) - A_eff,   S = 1 + s2 P2(x),
    c(x) = 1 - a0 - a2 P2(x) for x < x_s (ice free),  c = 1 - a_ice for x > x_s (ice),
    A_eff = A - k ln(co2/co2_ref),  T(x_s) = T_f,  T'(0) = 0,  T bounded at x = 1.

In each region T = Q U(x) - A_eff/B + c H(x): the particular part U is the P0, P2, P4 parts of
S c, each divided by B + n(n+1) D (P_n is an eigenfunction of the transport operator with
eigenvalue -n(n+1) D), and H is a Legendre function of degree nu with nu(nu+1) = -B/D: in the ice
region P_nu(x) (regular at x = 1), in the ice-free region P_nu(x) + P_nu(-x) (even about x = 0).
Continuity of T and dT/dx at x_s plus T(x_s) = T_f is a 3 x 3 linear system in (Q, c_free,
c_ice). nu is complex (-1/2 + i tau) when B/D > 1/4 (then P_nu is a real conical function) and
real otherwise. P_nu(x) = 2F1(-nu, nu+1; 1; (1-x)/2), evaluated with mpmath.hyp2f1.
"""

from __future__ import annotations

from dataclasses import dataclass

import mpmath as mp

#: Working precision (decimal digits) for the mpmath evaluations.
DPS = 30


@dataclass(frozen=True)
class Params:
    """Continuous-model parameters (W m-2, W m-2 K-1, degrees C).

    a, b: linear OLR A + B T; d: diffusivity D; s2: insolation P2 coefficient; a0, a2: ice-free
    albedo a0 + a2 P2(x); a_ice: ice albedo; tf_c: freezing temperature; co2_term:
    k ln(co2/co2_ref) (W m-2), subtracted from A.
    """

    a: float
    b: float
    d: float
    s2: float
    a0: float
    a2: float
    a_ice: float
    tf_c: float
    co2_term: float = 0.0

    @classmethod
    def from_config(cls, cfg: dict) -> "Params":
        """Take the parameters from an icefold config (legendre insolation, step albedo,
        linear OLR, diffusive transport with constant D)."""
        from . import discrete

        model = discrete.model_from_config(cfg)
        if model.olr_kind != "linear" or model.transport_kind != "diffusive":
            raise discrete.ConfigError("North (1975) needs linear OLR and diffusive transport")
        if float(cfg["transport"].get("diffusivity_p2", 0.0)) != 0.0:
            raise discrete.ConfigError("North (1975) needs a constant diffusivity (d2 = 0)")
        ins = cfg["insolation"]
        if ins.get("kind", "legendre") != "legendre":
            raise discrete.ConfigError("North (1975) needs legendre insolation")
        s2 = ins.get("s2")
        if s2 is None:
            s2 = discrete.s2_from_obliquity(float(ins["obliquity_deg"]))
        alb = cfg["albedo"]
        return cls(
            a=float(cfg["longwave"]["a"]),
            b=float(cfg["longwave"]["b"]),
            d=float(cfg["transport"]["diffusivity"]),
            s2=float(s2),
            a0=float(alb["ice_free"]),
            a2=float(alb.get("ice_free_p2", 0.0)),
            a_ice=float(alb["ice"]),
            tf_c=float(alb.get("freeze_temperature_c", -10.0)),
            co2_term=float(model.co2_term),
        )

    @property
    def a_eff(self) -> float:
        """A - k ln(co2/co2_ref), W m-2."""
        return self.a - self.co2_term


def _p2(x):
    return (3 * x * x - 1) / 2


def _p4(x):
    return (35 * x**4 - 30 * x * x + 3) / 8


def _dp2(x):
    return 3 * x


def _dp4(x):
    return (140 * x**3 - 60 * x) / 8


def free_coefficients(p: Params):
    """Legendre coefficients (P0, P2, P4) of S(x) c_free(x), with c_free = 1 - a0 - a2 P2.

    Uses P2^2 = 1/5 + (2/7) P2 + (18/35) P4.
    """
    c0 = 1 - mp.mpf(p.a0)
    s2 = mp.mpf(p.s2)
    a2 = mp.mpf(p.a2)
    return (
        c0 - s2 * a2 / 5,
        c0 * s2 - a2 - mp.mpf(2) / 7 * s2 * a2,
        -mp.mpf(18) / 35 * s2 * a2,
    )


def ice_coefficients(p: Params):
    """Legendre coefficients (P0, P2, P4) of S(x) c_ice, c_ice = 1 - a_ice."""
    ci = 1 - mp.mpf(p.a_ice)
    return (ci, ci * mp.mpf(p.s2), mp.mpf(0))


def _particular(coef, p: Params, x):
    """U(x) = sum_n coef_n P_n(x) / (B + n(n+1) D) and its derivative (per unit Q)."""
    b, d = mp.mpf(p.b), mp.mpf(p.d)
    g0, g2, g4 = coef[0] / b, coef[1] / (b + 6 * d), coef[2] / (b + 20 * d)
    return g0 + g2 * _p2(x) + g4 * _p4(x), g2 * _dp2(x) + g4 * _dp4(x)


def ice_free_temperature(x: float, q: float, p: Params) -> float:
    """The ice-free exact solution T(x) = Q U_free(x) - A_eff/B, degrees C (North 1975)."""
    with mp.workdps(DPS):
        u, _ = _particular(free_coefficients(p), p, mp.mpf(x))
        return float(q * u - mp.mpf(p.a_eff) / p.b)


def degree(p: Params):
    """nu with nu(nu+1) = -B/D, the root with real part -1/2 (complex when B/D > 1/4)."""
    disc = mp.mpf(1) / 4 - mp.mpf(p.b) / mp.mpf(p.d)
    return -mp.mpf(1) / 2 + mp.sqrt(mp.mpc(disc)) if disc < 0 else -mp.mpf(1) / 2 + mp.sqrt(disc)


def legendre_p(nu, x):
    """P_nu(x) = 2F1(-nu, nu+1; 1; (1-x)/2) and dP_nu/dx, real parts (mpmath.hyp2f1)."""
    z = (1 - x) / 2
    val = mp.hyp2f1(-nu, nu + 1, 1, z)
    der = nu * (nu + 1) / 2 * mp.hyp2f1(1 - nu, nu + 2, 2, z)
    return mp.re(val), mp.re(der)


@dataclass(frozen=True)
class Solution:
    """An exact equilibrium: Q (W m-2), the edge x_s and the homogeneous amplitudes."""

    xs: float
    q: float
    c_free: object
    c_ice: object
    params: Params

    def temperature(self, x: float) -> float:
        """T(x) in degrees C."""
        with mp.workdps(DPS):
            p = self.params
            x = mp.mpf(x)
            nu = degree(p)
            if x < self.xs:
                u, _ = _particular(free_coefficients(p), p, x)
                h = legendre_p(nu, x)[0] + legendre_p(nu, -x)[0]
                c = self.c_free
            else:
                u, _ = _particular(ice_coefficients(p), p, x)
                h = legendre_p(nu, x)[0]
                c = self.c_ice
            return float(self.q * u - mp.mpf(p.a_eff) / p.b + c * h)


def _system(xs, p: Params):
    """Solve for (Q, c_free, c_ice) at mpmath precision (caller sets the precision)."""
    x = mp.mpf(xs)
    nu = degree(p)
    uf, duf = _particular(free_coefficients(p), p, x)
    ui, dui = _particular(ice_coefficients(p), p, x)
    pp, dpp = legendre_p(nu, x)
    pm, dpm = legendre_p(nu, -x)
    hf, dhf = pp + pm, dpp - dpm  # d/dx P_nu(-x) = -P_nu'(-x)
    hi, dhi = pp, dpp
    rhs_t = mp.mpf(p.tf_c) + mp.mpf(p.a_eff) / p.b
    # Unknowns (Q, c_free, c_ice):
    #   Q uf + c_free hf            = Tf + A/B     (T(x_s-) = Tf)
    #   Q ui            + c_ice hi  = Tf + A/B     (T(x_s+) = Tf)
    #   Q (duf - dui) + c_free dhf - c_ice dhi = 0 (dT/dx continuous)
    m = mp.matrix([[uf, hf, 0], [ui, 0, hi], [duf - dui, dhf, -dhi]])
    return mp.lu_solve(m, mp.matrix([rhs_t, rhs_t, 0]))


def solve(xs: float, p: Params) -> Solution:
    """The exact equilibrium with its ice edge at x_s (0 < x_s < 1)."""
    if not 0.0 < xs < 1.0:
        raise ValueError(f"x_s = {xs}: expected 0 < x_s < 1")
    with mp.workdps(DPS):
        sol = _system(xs, p)
        return Solution(float(xs), float(sol[0]), sol[1], sol[2], p)


def q_of_xs(xs: float, p: Params) -> float:
    """Q(x_s) = S0/4 (W m-2) of the equilibrium whose ice edge is at x_s (North 1975)."""
    return solve(xs, p).q


def q_ice_free_limit(p: Params) -> float:
    """Q at which the ice-free exact solution has T(1) = T_f: the limit of Q(x_s) as x_s -> 1."""
    with mp.workdps(DPS):
        u1, _ = _particular(free_coefficients(p), p, mp.mpf(1))
        return float((mp.mpf(p.tf_c) + mp.mpf(p.a_eff) / p.b) / u1)


@dataclass(frozen=True)
class Fold:
    """A fold (saddle-node) of the Q(x_s) curve: edge x_s, Q there, and the ice-edge latitude."""

    xs: float
    q: float

    @property
    def latitude_deg(self) -> float:
        return float(mp.degrees(mp.asin(self.xs)))


def _extremum(p: Params, lo: float, hi: float, sign: float) -> Fold:
    """Minimum (sign=+1) or maximum (sign=-1) of Q over [lo, hi]: a bounded scalar optimiser
    (scipy's minimize_scalar, method 'bounded') brackets it, then mpmath.findroot polishes
    dQ/dx_s = 0 so that x_s is accurate to far better than the optimiser's sqrt(eps)."""
    from scipy.optimize import minimize_scalar

    res = minimize_scalar(lambda x: sign * q_of_xs(x, p), bounds=(lo, hi), method="bounded",
                          options={"xatol": 1e-10})
    x0 = float(res.x)
    with mp.workdps(DPS):
        try:
            xr = mp.findroot(lambda x: mp.diff(lambda y: _system(y, p)[0], x), mp.mpf(x0))
            xr = float(xr)
            if not lo <= xr <= hi or abs(xr - x0) > 1e-4:
                xr = x0
        except (ValueError, ZeroDivisionError):
            xr = x0
    span = hi - lo
    if min(xr - lo, hi - xr) < 1e-6 * span:
        kind = "minimum" if sign > 0 else "maximum"
        raise ValueError(f"Q(x_s) has no interior {kind} in [{lo}, {hi}] (found x_s = {xr})")
    return Fold(xr, q_of_xs(xr, p))


def fold(p: Params, lo: float = 0.02, hi: float = 0.98) -> Fold:
    """The main fold: the minimum of Q(x_s) over [lo, hi] (the large-ice-cap / snowball
    tipping point; North 1975)."""
    return _extremum(p, lo, hi, +1.0)


def small_cap_fold(p: Params, lo: float | None = None, hi: float = 1.0 - 1e-9) -> Fold:
    """The small-ice-cap fold: the local maximum of Q(x_s) between the main fold and x_s = 1
    (North 1984: caps smaller than the diffusive length sqrt(D/B) are unstable; there
    dQ/dx_s < 0, and the ice-free state loses its cap through this saddle-node)."""
    if lo is None:
        lo = fold(p).xs
    return _extremum(p, lo, hi, -1.0)


def small_cap_asymptote(xs: float, p: Params) -> float:
    """Leading small-cap approximation of Q(x_s) for x_s -> 1 (North 1984, planar limit):

    Q = (T_f + A/B) / (U_free(x_s) - Sigma), Sigma = S(1) (a_ice - a_free(1)) / B * kappa r
    I1(kappa r) K0(kappa r), with r = acos(x_s) the cap's angular radius and kappa = sqrt(B/D):
    the temperature drop at the edge of a disc of reduced absorption in the planar diffusion
    equation D lap T - B T = source. Its error relative to Q - Q(1) is O(r^2).
    """
    with mp.workdps(DPS):
        x = mp.mpf(xs)
        r = mp.acos(x)
        kappa = mp.sqrt(mp.mpf(p.b) / p.d)
        s1 = 1 + mp.mpf(p.s2)
        dc = mp.mpf(p.a_ice) - (mp.mpf(p.a0) + mp.mpf(p.a2))
        sigma = s1 * dc / p.b * kappa * r * mp.besseli(1, kappa * r) * mp.besselk(0, kappa * r)
        uf, _ = _particular(free_coefficients(p), p, x)
        return float((mp.mpf(p.tf_c) + mp.mpf(p.a_eff) / p.b) / (uf - sigma))
