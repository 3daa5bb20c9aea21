"""Closed-form ice-edge equilibria with relaxation transport (Budyko 1969, Tellus 21, 611-619).

Continuous hemispheric model (T in degrees C, x = sin(latitude) in [0, 1], Q = S0/4, W m-2):

    0 = Q S(x) c(x) - (A_eff + B T) + gamma (Tbar - T),   S = 1 + s2 P2(x),
    c = 1 - a0 - a2 P2(x) for x < x_s (ice free), c = 1 - a_ice for x > x_s (ice),

with A_eff = A - k ln(co2/co2_ref). Integrating over x the gamma term drops out:
Tbar = (Q I(x_s) - A_eff) / B with I(x_s) = int_0^1 S c dx in closed form (below), and
T(x) = (Q S(x) c(x) - A_eff + gamma Tbar) / (B + gamma) pointwise. T jumps at x_s, so the edge
condition T(x_s) = T_f needs a convention for the albedo at the edge itself:

- "mean": the mean of the two coalbedos (the usual choice for this model, e.g. Widiasih 2013,
  SIAM J. Appl. Dyn. Syst. 12; from memory),
- "warm": the ice-free side, T(x_s-) = T_f,
- "cold": the ice side, T(x_s+) = T_f.

Each gives Q(x_s) = (B + gamma)(T_f + A_eff/B) / (S(x_s) c_edge(x_s) + gamma I(x_s)/B).

More generally `edge` may be a weight theta in [0, 1]: T_f = T(x_s+) + theta (T(x_s-) - T(x_s+)).

Note on icefold's discrete model (docs/discrete-model.md): with relaxation transport a band's
temperature depends on its own albedo only, T_j = (1 - f_j) W + f_j C (W, C the ice-free and ice
temperatures there). Interpolating T through the neighbours (W on one side, C on the other) to
place the edge would give, on locally uniform bands, only theta = (T_f - C)/(W - C) in
[7/16, 9/16], a window that does not shrink with the band width. icefold's step albedo under
relaxation therefore uses the edge-balance rule, which makes every discrete equilibrium satisfy
this module's "mean" edge condition up to second-order discretisation errors
(test_budyko1969_reference checks it on the reference's own discrete model).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

EDGES = ("mean", "warm", "cold")


@dataclass(frozen=True)
class Params:
    """a, b: linear OLR A + B T (W m-2, W m-2 K-1); gamma: relaxation rate (W m-2 K-1);
    s2: insolation P2 coefficient; a0, a2: ice-free albedo a0 + a2 P2; a_ice; tf_c (degrees C);
    co2_term: k ln(co2/co2_ref) in W m-2, subtracted from A."""

    a: float
    b: float
    gamma: float
    s2: float
    a0: float
    a2: float
    a_ice: float
    tf_c: float
    co2_term: float = 0.0

    @classmethod
    def from_config(cls, cfg: dict) -> "Params":
        """Parameters of an icefold config with relaxation transport and linear OLR."""
        from . import discrete

        model = discrete.model_from_config(cfg)
        if model.olr_kind != "linear" or model.transport_kind != "relaxation":
            raise discrete.ConfigError("Budyko (1969) needs linear OLR and relaxation transport")
        ins = cfg["insolation"]
        if ins.get("kind", "legendre") != "legendre":
            raise discrete.ConfigError("Budyko (1969) here needs legendre insolation")
        s2 = ins.get("s2")
        if s2 is None:
            s2 = discrete.s2_from_obliquity(float(ins["obliquity_deg"]))
        alb = cfg["albedo"]
        return cls(float(cfg["longwave"]["a"]), float(cfg["longwave"]["b"]),
                   float(cfg["transport"]["relaxation_rate"]), float(s2),
                   float(alb["ice_free"]), float(alb.get("ice_free_p2", 0.0)),
                   float(alb["ice"]), float(alb.get("freeze_temperature_c", -10.0)),
                   float(model.co2_term))

    @property
    def a_eff(self) -> float:
        return self.a - self.co2_term


def p2(x):
    return 0.5 * (3.0 * np.asarray(x, dtype=float) ** 2 - 1.0)


def absorbed_integral(xs, p: Params):
    """I(x_s) = int_0^1 S(x) c(x) dx (per unit Q), closed form:

    int_0^xs P2 = (xs^3 - xs)/2, int_0^xs P2^2 = (9 xs^5/5 - 2 xs^3 + xs)/4, int_0^1 P2 = 0.
    """
    xs = np.asarray(xs, dtype=float)
    c0 = 1.0 - p.a0
    ci = 1.0 - p.a_ice
    ip2 = 0.5 * (xs**3 - xs)
    ip22 = 0.25 * (1.8 * xs**5 - 2.0 * xs**3 + xs)
    free = c0 * xs + (p.s2 * c0 - p.a2) * ip2 - p.s2 * p.a2 * ip22
    ice = ci * ((1.0 - xs) - p.s2 * ip2)
    return free + ice


def edge_weight(edge) -> float:
    """The weight theta of the ice-free coalbedo at the edge: 1/2 for "mean", 1 for "warm",
    0 for "cold", or a number in [0, 1]."""
    named = {"mean": 0.5, "warm": 1.0, "cold": 0.0}
    if isinstance(edge, str):
        if edge not in named:
            raise ValueError(f"edge = {edge!r}: expected one of {EDGES} or a number in [0, 1]")
        return named[edge]
    theta = float(edge)
    if not 0.0 <= theta <= 1.0:
        raise ValueError(f"edge weight = {theta}: expected 0 <= theta <= 1")
    return theta


def edge_coalbedo(xs, p: Params, edge="mean"):
    """Coalbedo at the edge: c_ice + theta (c_free(x_s) - c_ice), theta from `edge_weight`.
    Since T is linear in the coalbedo, T_edge = T(x_s+) + theta (T(x_s-) - T(x_s+))."""
    cf = 1.0 - p.a0 - p.a2 * p2(xs)
    ci = 1.0 - p.a_ice
    return ci + edge_weight(edge) * (cf - ci)


def q_of_xs(xs, p: Params, edge="mean"):
    """Q(x_s) (W m-2) of the equilibrium with its ice edge at x_s (closed form)."""
    s = 1.0 + p.s2 * p2(xs)
    num = (p.b + p.gamma) * (p.tf_c + p.a_eff / p.b)
    return num / (s * edge_coalbedo(xs, p, edge) + p.gamma * absorbed_integral(xs, p) / p.b)


def temperature(x, xs, q, p: Params, edge="mean"):
    """T(x) in degrees C of the equilibrium with edge x_s at insolation Q (at x = x_s the
    convention's edge value)."""
    x = np.asarray(x, dtype=float)
    tbar = (q * absorbed_integral(xs, p) - p.a_eff) / p.b
    c = np.where(x < xs, 1.0 - p.a0 - p.a2 * p2(x), 1.0 - p.a_ice)
    c = np.where(x == xs, edge_coalbedo(xs, p, edge), c)
    s = 1.0 + p.s2 * p2(x)
    return (q * s * c - p.a_eff + p.gamma * tbar) / (p.b + p.gamma)


def global_mean(xs, q, p: Params):
    """Tbar = (Q I(x_s) - A_eff)/B, degrees C."""
    return (q * absorbed_integral(xs, p) - p.a_eff) / p.b


def fold(p: Params, edge="mean", lo: float = 1e-6, hi: float = 1.0 - 1e-6):
    """(x_s, Q) at the minimum of Q(x_s) over [lo, hi] (scipy minimize_scalar, bounded)."""
    from scipy.optimize import minimize_scalar

    res = minimize_scalar(lambda x: float(q_of_xs(x, p, edge)), bounds=(lo, hi),
                          method="bounded", options={"xatol": 1e-12})
    return float(res.x), float(res.fun)
