"""Seasonal (daily-mean) insolation for the numpy/scipy reference, and a seasonal model.

The daily-mean top-of-atmosphere insolation (Berger 1978, J. Atmos. Sci. 35, 2362-2367):

    Q = S0/pi (a/r)^2 (h0 sin(phi) sin(delta) + cos(phi) cos(delta) sin(h0)),
    cos(h0) = -tan(phi) tan(delta)  (h0 = 0 in polar night, pi in polar day),

with the orbit of docs/discrete-model.md: time 0 and every whole year at the northern spring
equinox, mean anomaly uniform in time, Kepler's equation `M = E - e sin E` solved with scipy's
brentq, true longitude `lambda = v + perihelion`, `sin(delta) = sin(obliquity) sin(lambda)`,
`(a/r)^2 = 1 / (1 - e cos E)^2`.

Band means over x = sin(latitude) are taken two independent ways: scipy's adaptive `quad`
(`band_means_quad`, for point checks) and fixed 48-point Gauss-Legendre in latitude per piece,
split at the polar circles (`band_means_gl`, fast enough for a right-hand side). Neither uses
icefold's closed-form antiderivative.
"""

from __future__ import annotations

import copy
import math

import numpy as np
from scipy.integrate import quad
from scipy.optimize import brentq

from . import discrete as d

_GL_X, _GL_W = np.polynomial.legendre.leggauss(48)


def orbit(t_years: float, obliquity_deg: float, ecc: float, perihelion_deg: float):
    """(sin(delta), (a/r)^2) at model time t (years)."""
    peri = math.radians(perihelion_deg)
    v0 = -peri  # true anomaly at the spring equinox (lambda = 0)
    e0 = 2.0 * math.atan(math.sqrt((1.0 - ecc) / (1.0 + ecc)) * math.tan(0.5 * v0))
    m = (e0 - ecc * math.sin(e0)) + 2.0 * math.pi * (t_years % 1.0)
    m = (m + math.pi) % (2.0 * math.pi) - math.pi
    e = brentq(lambda x: x - ecc * math.sin(x) - m, -math.pi - 1.0, math.pi + 1.0, xtol=1e-15)
    v = 2.0 * math.atan(math.sqrt((1.0 + ecc) / (1.0 - ecc)) * math.tan(0.5 * e))
    lam = v + peri
    return math.sin(math.radians(obliquity_deg)) * math.sin(lam), 1.0 / (1.0 - ecc * math.cos(e)) ** 2


def daily_mean(x: np.ndarray, sin_delta: float, s0: float, dist: float) -> np.ndarray:
    """Daily-mean insolation (W m-2) at x = sin(latitude)."""
    x = np.asarray(x, dtype=float)
    cphi = np.sqrt(np.clip(1.0 - x * x, 0.0, None))
    cdel = math.sqrt(1.0 - sin_delta * sin_delta)
    with np.errstate(divide="ignore", invalid="ignore"):
        c = np.where(cphi * cdel > 0.0, -(x * sin_delta) / (cphi * cdel), -np.sign(x * sin_delta))
    h0 = np.arccos(np.clip(c, -1.0, 1.0))
    return s0 / math.pi * dist * (h0 * x * sin_delta + cphi * cdel * np.sin(h0))


def _polar_circles(sin_delta: float) -> list:
    cd = math.sqrt(1.0 - sin_delta * sin_delta)
    return [-cd, cd]


def band_means_quad(x_f: np.ndarray, sin_delta: float, s0: float, dist: float) -> np.ndarray:
    """Band means by scipy's quad, with the polar circles as break points."""
    out = np.empty(x_f.size - 1)
    for i, (a, b) in enumerate(zip(x_f[:-1], x_f[1:])):
        pts = [p for p in _polar_circles(sin_delta) if a < p < b]
        val, _ = quad(lambda x: float(daily_mean(np.array([x]), sin_delta, s0, dist)[0]), a, b,
                      points=pts or None, epsabs=1e-12, epsrel=1e-13, limit=200)
        out[i] = val / (b - a)
    return out


def band_means_gl(x_f: np.ndarray, sin_delta: float, s0: float, dist: float) -> np.ndarray:
    """Band means by 48-point Gauss-Legendre in latitude (dx = cos(phi) dphi, which removes the
    square-root behaviour of Q at the poles) on each piece between faces and polar circles."""
    out = np.empty(x_f.size - 1)
    circles = _polar_circles(sin_delta)
    for i, (a, b) in enumerate(zip(x_f[:-1], x_f[1:])):
        cuts = np.arcsin(np.clip([a] + [p for p in circles if a < p < b] + [b], -1.0, 1.0))
        total = 0.0
        for lo, hi in zip(cuts[:-1], cuts[1:]):
            phi = 0.5 * (hi - lo) * _GL_X + 0.5 * (hi + lo)
            total += 0.5 * (hi - lo) * np.dot(_GL_W, daily_mean(np.sin(phi), sin_delta, s0, dist)
                                              * np.cos(phi))
        out[i] = total / (b - a)
    return out


class SeasonalModel:
    """The discrete model with insolation.kind = "seasonal" (everything else as `discrete`)."""

    def __init__(self, cfg: dict):
        ins = cfg["insolation"]
        self.s0 = float(ins["solar_constant"])
        self.obliquity = float(ins["obliquity_deg"])
        self.ecc = float(ins.get("eccentricity", 0.0))
        self.perihelion = float(ins.get("perihelion_deg", 0.0))
        plain = copy.deepcopy(cfg)
        plain["insolation"] = {"kind": "legendre", "solar_constant": self.s0, "s2": 0.0}
        self.model = d.model_from_config(plain)

    def insolation(self, t: float) -> np.ndarray:
        sd, dist = orbit(t, self.obliquity, self.ecc, self.perihelion)
        return band_means_gl(self.model.grid.x_f, sd, self.s0, dist)

    def tendency(self, t: float, temp: np.ndarray) -> np.ndarray:
        m = self.model
        flux = (self.insolation(t) * (1.0 - m.albedo(temp)) - (m.olr(temp) - m.co2_term)
                + m.transport(temp) + m.forcing)
        return flux / m.heat_capacity * d.SECONDS_PER_YEAR
