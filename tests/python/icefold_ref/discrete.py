"""Plain numpy/scipy implementation of icefold's discrete model (docs/discrete-model.md).

The same TOML config drives icefold and this module, so that icefold's trajectories and
equilibria can be checked against an outside integrator (scipy's `solve_ivp`).

Units: state T in K; fluxes in W m-2; heat capacity in J m-2 K-1; the solver's time variable is
in years (1 year = 365.25 * 86400 s), so tendencies are returned in K per year.

Supported (everything docs/discrete-model.md pins down except the seasonal insolation, the OLR
table and land fractions, which raise `ConfigError`; forcing histories are in `forcing.py`):
grid (hemisphere/globe, equal_area/equal_angle), insolation (legendre, annual_mean), albedo
(step with the sub-band ice fraction rule, the edge-balance rule under relaxation transport,
smooth, ramp), longwave (linear, gray_body,
emission_level), greenhouse CO2 term, transport (diffusive with d2, relaxation), heat capacity.
"""

from __future__ import annotations

import copy
import math
import tomllib
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from scipy.integrate import solve_ivp
from scipy.optimize import root
from scipy.sparse import diags

#: Seconds per year (docs/discrete-model.md: 1 year = 365.25 * 86400 s).
SECONDS_PER_YEAR = 365.25 * 86400.0
#: Stefan-Boltzmann constant, W m-2 K-4 (CODATA 2018).
SIGMA = 5.670374419e-8
#: Kelvin at 0 degrees C.
KELVIN = 273.15
#: Default CO2 forcing coefficient k in k ln(C/C0), W m-2 (Myhre et al. 1998).
CO2_K_DEFAULT = 5.35
#: Sea-water density (kg m-3) and specific heat (J kg-1 K-1), common practice.
RHO_SEAWATER = 1025.0
CP_SEAWATER = 3985.0


class ConfigError(ValueError):
    """A config value this reference cannot use (names the key and the value)."""


# ----------------------------------------------------------------------------------------------
# Config: TOML plus dotted overrides (the same `--set KEY=VALUE` syntax icefold takes).
# ----------------------------------------------------------------------------------------------


def parse_set_value(text: str):
    """Parse the VALUE of `--set KEY=VALUE` as a TOML value; a bare word stays a string."""
    try:
        return tomllib.loads(f"v = {text}")["v"]
    except tomllib.TOMLDecodeError:
        return text


def apply_overrides(cfg: dict, overrides: dict | None) -> dict:
    """Return a deep copy of `cfg` with dotted keys (`transport.diffusivity`) set to values."""
    out = copy.deepcopy(cfg)
    for key, value in (overrides or {}).items():
        parts = key.split(".")
        node = out
        for p in parts[:-1]:
            node = node.setdefault(p, {})
        node[parts[-1]] = parse_set_value(value) if isinstance(value, str) else value
    return out


def load_config(path: str | Path, overrides: dict | None = None) -> dict:
    """Read a TOML config and apply dotted overrides."""
    with open(path, "rb") as fh:
        cfg = tomllib.load(fh)
    return apply_overrides(cfg, overrides)


def _get(cfg: dict, dotted: str, default=None, required: bool = False):
    node = cfg
    for p in dotted.split("."):
        if not isinstance(node, dict) or p not in node:
            if required:
                raise ConfigError(f"missing config key `{dotted}`")
            return default
        node = node[p]
    return node


# ----------------------------------------------------------------------------------------------
# Grid
# ----------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Grid:
    """Latitude bands in x = sin(latitude).

    x_f: faces (n+1); x_c: centres (n); dx: band widths; w: area weights (sum 1);
    lat_deg: centre latitudes (degrees_north); lat_bnds_deg: (n, 2) face latitudes.
    """

    x_f: np.ndarray
    x_c: np.ndarray
    dx: np.ndarray
    w: np.ndarray
    lat_deg: np.ndarray
    lat_bnds_deg: np.ndarray
    domain: str

    @property
    def n(self) -> int:
        return self.x_c.size


def make_grid(domain: str, bands: int, spacing: str) -> Grid:
    """Build the grid of docs/discrete-model.md ("Grid")."""
    if domain not in ("hemisphere", "globe"):
        raise ConfigError(f"grid.domain = {domain!r}: expected 'hemisphere' or 'globe'")
    if not isinstance(bands, int) or bands < 1:
        raise ConfigError(f"grid.bands = {bands!r}: expected an integer >= 1")
    lo = 0.0 if domain == "hemisphere" else -1.0
    if spacing == "equal_area":
        x_f = np.linspace(lo, 1.0, bands + 1)
        x_c = 0.5 * (x_f[:-1] + x_f[1:])
    elif spacing == "equal_angle":
        phi_f = np.linspace(np.arcsin(lo), 0.5 * np.pi, bands + 1)
        x_f = np.sin(phi_f)
        x_f[0], x_f[-1] = lo, 1.0  # exact ends (sin(pi/2) is 1 in floating point anyway)
        x_c = np.sin(0.5 * (phi_f[:-1] + phi_f[1:]))
    else:
        raise ConfigError(f"grid.spacing = {spacing!r}: expected 'equal_area' or 'equal_angle'")
    dx = np.diff(x_f)
    w = dx / (x_f[-1] - x_f[0])
    lat = np.degrees(np.arcsin(x_c))
    bnds = np.degrees(np.arcsin(np.clip(x_f, -1.0, 1.0)))
    return Grid(x_f, x_c, dx, w, lat, np.stack([bnds[:-1], bnds[1:]], axis=1), domain)


def p2(x):
    """Legendre polynomial P2(x) = (3x^2 - 1)/2."""
    x = np.asarray(x, dtype=float)
    return 0.5 * (3.0 * x * x - 1.0)


def band_mean_p2(a, b):
    """Average of P2 over [a, b]: (a^2 + a b + b^2 - 1)/2."""
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    return 0.5 * (a * a + a * b + b * b - 1.0)


# ----------------------------------------------------------------------------------------------
# Insolation
# ----------------------------------------------------------------------------------------------


def legendre_insolation(grid: Grid, s0: float, s2: float) -> np.ndarray:
    """Band-mean insolation S0/4 (1 + s2 Pbar2_i), W m-2."""
    return 0.25 * s0 * (1.0 + s2 * band_mean_p2(grid.x_f[:-1], grid.x_f[1:]))


def s2_from_obliquity(obliquity_deg: float) -> float:
    """s2 = -(5/8) P2(cos obliquity) (Nadeau and McGehee 2017, Icarus)."""
    return float(-(5.0 / 8.0) * p2(np.cos(np.radians(obliquity_deg))))


def daily_mean_circular(x, sin_dec):
    """Daily-mean TOA insolation for a circular orbit, in units of S0, at x = sin(lat).

    Q/S0 = (h0 sin(lat) sin(dec) + cos(lat) cos(dec) sin(h0)) / pi with
    cos(h0) = -tan(lat) tan(dec) clipped to [-1, 1] (Berger 1978, J. Atmos. Sci. 35).
    """
    x = np.asarray(x, dtype=float)
    sd = np.asarray(sin_dec, dtype=float)
    cphi = np.sqrt(np.clip(1.0 - x * x, 0.0, None))
    cd = np.sqrt(np.clip(1.0 - sd * sd, 0.0, None))
    num = -x * sd
    den = cphi * cd
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(den > 0.0, num / np.where(den > 0.0, den, 1.0), np.sign(num) * 2.0)
    h0 = np.arccos(np.clip(ratio, -1.0, 1.0))
    return (h0 * x * sd + cphi * cd * np.sin(h0)) / np.pi


# Gauss-Legendre nodes on [-1, 1] mapped by g(t) = t (3 - t^2) / 2, which clusters nodes at both
# ends so that the square-root and 3/2-power end singularities of the daily-mean insolation at
# polar-day/night boundaries become smooth (1 - g ~ (1 - t)^2).
def _mapped_rule(n: int):
    t, wt = np.polynomial.legendre.leggauss(n)
    g = 0.5 * t * (3.0 - t * t)
    dg = 1.5 * (1.0 - t * t)
    return g, wt * dg


def _mapped_integral(f, a: float, b: float, rule) -> np.ndarray:
    """Integral of f over [a, b] with the end-clustered rule; f maps an array of nodes."""
    g, wg = rule
    half = 0.5 * (b - a)
    nodes = 0.5 * (a + b) + half * g
    return half * np.tensordot(wg, f(nodes), axes=(0, 0))


def _split(a: float, b: float, points) -> list[float]:
    pts = sorted({a, b, *[p for p in points if a < p < b]})
    return pts


def annual_mean_insolation_bands(
    grid: Grid, s0: float, obliquity_deg: float, eccentricity: float, nodes: int = 40
) -> np.ndarray:
    """Band averages (over x) of the annual mean of daily-mean insolation, W m-2.

    The annual mean over time of S0 (a/r)^2 q(lat, dec) is, by Kepler's second law,
    S0 / (2 pi sqrt(1 - e^2)) times the integral of q over true longitude lambda
    (sin dec = sin(obliquity) sin(lambda)); it does not depend on the perihelion (from memory,
    standard). The double integral over lambda and x is done with end-clustered Gauss-Legendre
    rules on pieces split at every polar-day/night boundary, so it converges fast (see the
    self-check against scipy quad).
    """
    if not 0.0 <= eccentricity < 1.0:
        raise ConfigError(f"insolation.eccentricity = {eccentricity}: expected 0 <= e < 1")
    eps = np.radians(obliquity_deg)
    se = np.sin(eps)
    rule = _mapped_rule(nodes)
    out = np.empty(grid.n)
    # lambda in [-pi/2, pi/2] covers every declination once; the other half year repeats it.
    for i in range(grid.n):
        xa, xb = float(grid.x_f[i]), float(grid.x_f[i + 1])
        lam_breaks = []
        for xf in (xa, xb):
            dstar = np.arccos(min(abs(xf), 1.0))  # dec at which the polar boundary is at xf
            if se > 0.0 and dstar <= eps:
                ls = float(np.arcsin(min(np.sin(dstar) / se, 1.0)))
                lam_breaks += [ls, -ls]
        lam_pts = _split(-0.5 * np.pi, 0.5 * np.pi, lam_breaks)

        def inner(lams, xa=xa, xb=xb):
            # For each lambda: the band split at the polar-day/night boundaries x = +-cos(dec)
            # into three pieces (some of zero length), each integrated with the mapped rule.
            sd = se * np.sin(lams)
            cd = np.sqrt(1.0 - sd * sd)
            cuts = np.sort(np.stack([np.full_like(cd, xa), np.clip(-cd, xa, xb),
                                     np.clip(cd, xa, xb), np.full_like(cd, xb)]), axis=0)
            g, wg = rule
            total = np.zeros_like(lams)
            for k in range(3):
                lo, hi = cuts[k], cuts[k + 1]
                half = 0.5 * (hi - lo)
                nodes = (0.5 * (lo + hi))[:, None] + half[:, None] * g[None, :]
                total += half * (daily_mean_circular(nodes, sd[:, None]) @ wg)
            return total

        total = sum(
            _mapped_integral(inner, p, q, rule) for p, q in zip(lam_pts[:-1], lam_pts[1:])
        )
        out[i] = total / np.pi / (xb - xa)
    return s0 * out / np.sqrt(1.0 - eccentricity**2)


def annual_mean_insolation_at(x: float, s0: float, obliquity_deg: float, eccentricity: float):
    """Annual-mean insolation at one x = sin(lat), W m-2, by adaptive quadrature (scipy quad)."""
    from scipy.integrate import quad

    eps = np.radians(obliquity_deg)
    se = np.sin(eps)
    pts = []
    dstar = np.arccos(min(abs(x), 1.0))
    if se > 0.0 and dstar < eps:
        ls = float(np.arcsin(np.sin(dstar) / se))
        pts = [-ls, ls]
    cphi = math.sqrt(max(1.0 - x * x, 0.0))

    def q_of_lambda(lam):  # daily_mean_circular for one point, in plain floats (fast in quad)
        sd = se * math.sin(lam)
        cd = math.sqrt(1.0 - sd * sd)
        num, den = -x * sd, cphi * cd
        h0 = math.acos(max(-1.0, min(1.0, num / den))) if den > 0 else (math.pi if num < 0 else 0.0)
        return (h0 * x * sd + cphi * cd * math.sin(h0)) / math.pi

    val, _ = quad(
        q_of_lambda,
        -0.5 * np.pi,
        0.5 * np.pi,
        points=pts or None,
        epsabs=1e-14,
        epsrel=1e-13,
        limit=200,
    )
    return s0 * val / np.pi / np.sqrt(1.0 - eccentricity**2)


# ----------------------------------------------------------------------------------------------
# Ice fraction (sub-band rule) and the ice measure
# ----------------------------------------------------------------------------------------------


def _half_bands(grid: Grid, t: np.ndarray):
    """The 2n half-band segments [p, q] with the interpolant's end values (a at p, b at q).

    Order: for band i, left half [x_f[i], x_c[i]] then right half [x_c[i], x_f[i+1]].
    """
    xf, xc = grid.x_f, grid.x_c
    n = grid.n
    left_face = t.copy()
    right_face = t.copy()
    if n > 1:
        slope = np.diff(t) / np.diff(xc)  # between centres i and i+1
        right_face[:-1] = t[:-1] + slope * (xf[1:-1] - xc[:-1])
        left_face[1:] = t[1:] + slope * (xf[1:-1] - xc[1:])
        # Outer half bands extend the line through the two nearest centres
        # (docs/discrete-model.md).
        left_face[0] = t[0] + slope[0] * (xf[0] - xc[0])
        right_face[-1] = t[-1] + slope[-1] * (xf[-1] - xc[-1])
        # On a globe with a face at the equator the two half bands next to it do the same
        # with their own hemisphere's two nearest centres (docs/discrete-model.md).
        s = n // 2
        if grid.domain == "globe" and n % 2 == 0 and abs(xf[s]) < 1e-12:
            if s >= 2:
                left_face[s] = t[s] + slope[s] * (xf[s] - xc[s])
                right_face[s - 1] = t[s - 1] + slope[s - 2] * (xf[s] - xc[s - 1])
            else:
                left_face[s] = t[s]
                right_face[s - 1] = t[s - 1]
    p = np.empty(2 * n)
    q = np.empty(2 * n)
    a = np.empty(2 * n)
    b = np.empty(2 * n)
    p[0::2], q[0::2], a[0::2], b[0::2] = xf[:-1], xc, left_face, t
    p[1::2], q[1::2], a[1::2], b[1::2] = xc, xf[1:], t, right_face
    return p, q, a, b


def _below_measure(p, q, a, b, tf):
    """Measure of {x in [p, q] : linear interpolant from (p, a) to (q, b) < tf} (strict)."""
    length = q - p
    da = a - tf
    db = b - tf
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.where(da != db, da / (da - db), 0.0)
    s = np.clip(s, 0.0, 1.0)
    m = np.where(
        (da < 0) & (db < 0),
        length,
        np.where(da < 0, s * length, np.where(db < 0, (1.0 - s) * length, 0.0)),
    )
    return m


def ice_fraction(grid: Grid, t: np.ndarray, tf: float) -> np.ndarray:
    """Ice fraction f_i of each band: the fraction of the band where the piecewise-linear
    interpolant of T through the band centres is below tf (docs/discrete-model.md, `step`)."""
    p, q, a, b = _half_bands(grid, np.asarray(t, dtype=float))
    m = _below_measure(p, q, a, b, tf)
    return (m[0::2] + m[1::2]) / grid.dx


def ice_measure(grid: Grid, t: np.ndarray, tf: float, lo: float, hi: float) -> float:
    """Measure (in x) of the ice within [lo, hi], by the same sub-band rule."""
    p, q, a, b = _half_bands(grid, np.asarray(t, dtype=float))
    pc = np.clip(p, lo, hi)
    qc = np.clip(q, lo, hi)
    keep = qc > pc
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = np.where(q > p, (b - a) / (q - p), 0.0)
    ac = a + slope * (pc - p)
    bc = a + slope * (qc - p)
    return float(np.sum(_below_measure(pc, qc, ac, bc, tf)[keep]))


def _line_at(xa, va, xb, vb, x):
    """Value at x of the line through (xa, va) and (xb, vb)."""
    return va + (vb - va) * (x - xa) / (xb - xa)


def edge_balance(grid: Grid, sun: np.ndarray, af: np.ndarray, ai: float, r: np.ndarray,
                 t: np.ndarray, tf: float):
    """Ice fractions of the `step` albedo's edge-balance rule (relaxation transport), and for
    each band whether its ice lies toward the upper face.

    Written from docs/discrete-model.md ("step albedo with relaxation transport"): `sun` is
    m S_i (solar scale applied), `r` is R(T_i) = OLR(T_i) - OLR(Tf) + gamma (T_i - Tf) in
    W m-2. Band i solves r_i = P_i(f) with P_i piecewise linear in f through (0, A/2 - d_ice),
    (fc, A (1/2 - fc)), (1, -A/2 - d_warm); q_j = m S_j (1 - (af_j + ai)/2) linear between
    centres (the line through the two nearest centres on an outer half band).
    """
    n = grid.n
    xf, xc = grid.x_f, grid.x_c
    q = sun * (1.0 - 0.5 * (af + ai))
    jump = sun * (ai - af)
    f = np.where(t < tf, 1.0, 0.0)
    upper = np.ones(n, dtype=bool)
    for i in range(n):
        if n == 1:
            ql = qh = q[0]
            q_lo_face = q_hi_face = q[0]
        else:
            ql = q[i - 1] if i > 0 else 2.0 * q[0] - q[1]
            qh = q[i + 1] if i < n - 1 else 2.0 * q[i] - q[i - 1]
            a, b = (i - 1, i) if i > 0 else (0, 1)
            q_lo_face = _line_at(xc[a], q[a], xc[b], q[b], xf[i])
            a, b = (i, i + 1) if i < n - 1 else (n - 2, n - 1)
            q_hi_face = _line_at(xc[a], q[a], xc[b], q[b], xf[i + 1])
        up = bool(xc[i] >= 0.0) if qh == ql else bool(qh < ql)
        upper[i] = up
        big_a = jump[i]
        if not big_a > 0.0:
            continue
        dx = xf[i + 1] - xf[i]
        if up:
            d_ice, d_warm, fc = q_hi_face - q[i], q_lo_face - q[i], (xf[i + 1] - xc[i]) / dx
        else:
            d_ice, d_warm, fc = q_lo_face - q[i], q_hi_face - q[i], (xc[i] - xf[i]) / dx
        d_ice = min(d_ice, 0.5 * big_a * fc)
        d_warm = max(d_warm, -0.5 * big_a * (1.0 - fc))
        p0, pc, p1 = 0.5 * big_a - d_ice, big_a * (0.5 - fc), -0.5 * big_a - d_warm
        ri = r[i]
        if ri >= p0:
            f[i] = 0.0
        elif ri >= pc:
            f[i] = fc * (p0 - ri) / (p0 - pc)
        elif ri > p1:
            f[i] = fc + (1.0 - fc) * (pc - ri) / (pc - p1)
        else:
            f[i] = 1.0
    return f, upper


# ----------------------------------------------------------------------------------------------
# The model
# ----------------------------------------------------------------------------------------------


@dataclass
class Model:
    """The discrete model's pieces, resolved from a config. Temperatures in K."""

    grid: Grid
    insolation: np.ndarray  # S_i, W m-2
    albedo_kind: str
    af: np.ndarray  # ice-free albedo per band
    ai: float  # ice albedo
    tf: float  # freezing temperature, K
    width: float  # albedo width, K (smooth/ramp)
    olr_kind: str
    olr_params: dict
    co2_term: float  # k ln(co2/co2_ref), W m-2 (subtracted from OLR)
    transport_kind: str
    k_faces: np.ndarray | None  # K_k (n+1), W m-2 K-1 (diffusive)
    gamma: float  # relaxation rate, W m-2 K-1
    heat_capacity: np.ndarray  # C_i, J m-2 K-1
    t0: float  # initial temperature, K
    forcing: float = 0.0  # F, W m-2 (forcing.constant_wm2; histories: icefold_ref.forcing)
    t0_p2: float = 0.0  # initial P2(x) part, K (initial.temperature_p2_k, at band centres)

    # -- pieces --------------------------------------------------------------------------
    @property
    def edge_balance(self) -> bool:
        """Whether the step albedo uses the edge-balance rule (relaxation transport)."""
        return self.albedo_kind == "step" and self.transport_kind == "relaxation"

    def _edge_balance(self, t: np.ndarray):
        """Edge-balance ice fractions and ice sides (constant drivers)."""
        t = np.asarray(t, dtype=float)
        tf = np.array([self.tf])
        r = self.olr(t) - self.olr(tf)[0] + self.gamma * (t - self.tf)
        return edge_balance(self.grid, self.insolation, self.af, self.ai, r, t, self.tf)

    def ice_fraction(self, t: np.ndarray) -> np.ndarray:
        """Ice fraction of each band by the step albedo's sub-band rule."""
        if self.edge_balance:
            return self._edge_balance(t)[0]
        return ice_fraction(self.grid, t, self.tf)

    def ice_measure(self, t: np.ndarray, lo: float, hi: float) -> float:
        """Ice measure (in x) within [lo, hi] (docs/discrete-model.md, "Diagnostics")."""
        if not self.edge_balance:
            return ice_measure(self.grid, t, self.tf, lo, hi)
        f, upper = self._edge_balance(t)
        a, b = self.grid.x_f[:-1], self.grid.x_f[1:]
        p = np.where(upper, b - f * (b - a), a)
        q = np.where(upper, b, a + f * (b - a))
        return float(np.sum(np.clip(np.minimum(q, hi) - np.maximum(p, lo), 0.0, None)))

    def albedo(self, t: np.ndarray) -> np.ndarray:
        """Band albedo alpha_i(T)."""
        if self.albedo_kind == "step":
            f = self.ice_fraction(t)
            return f * self.ai + (1.0 - f) * self.af
        if self.albedo_kind == "smooth":
            return self.ai + (self.af - self.ai) * 0.5 * (1.0 + np.tanh((t - self.tf) / self.width))
        if self.albedo_kind == "ramp":
            r = np.clip((t - (self.tf - 0.5 * self.width)) / self.width, 0.0, 1.0)
            return self.ai + (self.af - self.ai) * r
        raise ConfigError(f"albedo.kind = {self.albedo_kind!r}")

    def olr(self, t: np.ndarray) -> np.ndarray:
        """Outgoing longwave radiation, W m-2 (before the CO2 term)."""
        p = self.olr_params
        if self.olr_kind == "linear":
            return p["a"] + p["b"] * (t - KELVIN)
        if self.olr_kind == "gray_body":
            return p["emissivity"] * SIGMA * t**4
        if self.olr_kind == "emission_level":
            return SIGMA * (t - p["lapse_rate_k_per_km"] * p["emission_height_km"]) ** 4
        raise ConfigError(f"longwave.kind = {self.olr_kind!r}")

    def transport(self, t: np.ndarray) -> np.ndarray:
        """Transport convergence L_i, W m-2."""
        g = self.grid
        if self.transport_kind == "diffusive":
            flux = np.zeros(g.n + 1)
            flux[1:-1] = self.k_faces[1:-1] * np.diff(t)
            return np.diff(flux) / g.dx
        return self.gamma * (np.dot(g.w, t) - t)

    def net_flux(self, t: np.ndarray) -> np.ndarray:
        """Right-hand side C_i dT_i/dt, W m-2."""
        t = np.asarray(t, dtype=float)
        return (
            self.insolation * (1.0 - self.albedo(t))
            - (self.olr(t) - self.co2_term)
            + self.transport(t)
            + self.forcing
        )

    def tendency(self, time_years: float, t: np.ndarray) -> np.ndarray:
        """dT/dt in K per year (solve_ivp right-hand side)."""
        return self.net_flux(t) / self.heat_capacity * SECONDS_PER_YEAR

    def jac_sparsity(self):
        """Sparsity of d tendency / dT: tridiagonal, or None (dense) for relaxation transport."""
        n = self.grid.n
        if self.transport_kind == "relaxation" or n < 3:
            return None
        return diags([np.ones(n - 1), np.ones(n), np.ones(n - 1)], [-1, 0, 1], format="csc")

    # -- diagnostics ---------------------------------------------------------------------
    def global_mean(self, t: np.ndarray) -> float:
        """Area-weighted mean temperature, K."""
        return float(np.dot(self.grid.w, t))

    def ice_edge_north(self, t: np.ndarray) -> float:
        """asin(1 - ice measure in [0, 1]) in degrees (90 ice free, 0 ice covered)."""
        m = self.ice_measure(t, 0.0, 1.0)
        return float(np.degrees(np.arcsin(np.clip(1.0 - m, -1.0, 1.0))))

    def ice_edge_south(self, t: np.ndarray) -> float:
        """-asin(1 - ice measure in [-1, 0]) in degrees_north (globe only)."""
        if self.grid.domain != "globe":
            raise ValueError("ice_edge_south is defined on a globe only")
        m = self.ice_measure(t, -1.0, 0.0)
        return float(-np.degrees(np.arcsin(np.clip(1.0 - m, -1.0, 1.0))))


def model_from_config(cfg: dict) -> Model:
    """Resolve a parsed config (dict from TOML) into a `Model`."""
    grid = make_grid(
        _get(cfg, "grid.domain", "hemisphere"),
        _get(cfg, "grid.bands", required=True),
        _get(cfg, "grid.spacing", "equal_area"),
    )

    # Insolation.
    kind = _get(cfg, "insolation.kind", "legendre")
    s0 = float(_get(cfg, "insolation.solar_constant", required=True))
    obliquity = _get(cfg, "insolation.obliquity_deg")
    if kind == "legendre":
        s2 = _get(cfg, "insolation.s2")
        if s2 is None:
            if obliquity is None:
                raise ConfigError("insolation.kind = 'legendre' needs insolation.s2 or obliquity_deg")
            s2 = s2_from_obliquity(float(obliquity))
        sol = legendre_insolation(grid, s0, float(s2))
    elif kind == "annual_mean":
        if obliquity is None:
            raise ConfigError("insolation.kind = 'annual_mean' needs insolation.obliquity_deg")
        sol = annual_mean_insolation_bands(
            grid, s0, float(obliquity), float(_get(cfg, "insolation.eccentricity", 0.0))
        )
    else:
        raise ConfigError(f"insolation.kind = {kind!r}: the reference supports legendre, annual_mean")

    # Albedo.
    akind = _get(cfg, "albedo.kind", "step")
    if akind not in ("step", "smooth", "ramp"):
        raise ConfigError(f"albedo.kind = {akind!r}: expected step, smooth or ramp")
    af = float(_get(cfg, "albedo.ice_free", required=True)) + float(
        _get(cfg, "albedo.ice_free_p2", 0.0)
    ) * band_mean_p2(grid.x_f[:-1], grid.x_f[1:])
    ai = float(_get(cfg, "albedo.ice", required=True))
    tf = float(_get(cfg, "albedo.freeze_temperature_c", -10.0)) + KELVIN
    width = float(_get(cfg, "albedo.width_k", 0.0))
    if akind in ("smooth", "ramp") and not width > 0.0:
        raise ConfigError(f"albedo.width_k = {width}: must be > 0 for albedo.kind = {akind!r}")

    # Longwave.
    lkind = _get(cfg, "longwave.kind", "linear")
    if lkind == "linear":
        lp = {"a": float(_get(cfg, "longwave.a", required=True)),
              "b": float(_get(cfg, "longwave.b", required=True))}
    elif lkind == "gray_body":
        lp = {"emissivity": float(_get(cfg, "longwave.emissivity", required=True))}
    elif lkind == "emission_level":
        lp = {
            "lapse_rate_k_per_km": float(_get(cfg, "longwave.lapse_rate_k_per_km", required=True)),
            "emission_height_km": float(_get(cfg, "longwave.emission_height_km", required=True)),
        }
    else:
        raise ConfigError(f"longwave.kind = {lkind!r}: the reference supports linear, gray_body, "
                          "emission_level")

    # Greenhouse (CO2 term k ln(C/C0), Myhre et al. 1998).
    co2 = _get(cfg, "greenhouse.co2_ppm")
    co2_term = 0.0
    if co2 is not None:
        ref = float(_get(cfg, "greenhouse.reference_co2_ppm", required=True))
        k = float(_get(cfg, "greenhouse.log_coefficient_wm2", CO2_K_DEFAULT))
        if not (co2 > 0 and ref > 0):
            raise ConfigError(f"greenhouse.co2_ppm = {co2}, reference_co2_ppm = {ref}: must be > 0")
        co2_term = k * np.log(float(co2) / ref)

    # Transport.
    tkind = _get(cfg, "transport.kind", "diffusive")
    k_faces = None
    gamma = 0.0
    if tkind == "diffusive":
        d0 = float(_get(cfg, "transport.diffusivity", required=True))
        d2 = float(_get(cfg, "transport.diffusivity_p2", 0.0))
        xf = grid.x_f
        k_faces = np.zeros(grid.n + 1)
        if grid.n > 1:
            dk = d0 * (1.0 + d2 * p2(xf[1:-1]))
            k_faces[1:-1] = dk * (1.0 - xf[1:-1] ** 2) / np.diff(grid.x_c)
    elif tkind == "relaxation":
        gamma = float(_get(cfg, "transport.relaxation_rate", required=True))
    else:
        raise ConfigError(f"transport.kind = {tkind!r}: expected diffusive or relaxation")

    # Heat capacity.
    hc = _get(cfg, "heat_capacity.value")
    if hc is None:
        depth = _get(cfg, "heat_capacity.mixed_layer_depth_m")
        if depth is None:
            raise ConfigError("heat_capacity needs `value` (J m-2 K-1) or a mixed-layer depth")
        hc = RHO_SEAWATER * CP_SEAWATER * float(depth)
    if _get(cfg, "heat_capacity.land_fraction") is not None:
        raise ConfigError("heat_capacity.land_fraction is not modelled by the reference")
    heat_capacity = np.full(grid.n, float(hc))

    # [forcing]: constant parts here; histories (file, pieces) in icefold_ref.forcing.
    if _get(cfg, "forcing.file") is not None or _get(cfg, "forcing.pieces"):
        raise ConfigError("a forcing history (forcing.file or forcing.pieces) needs "
                          "icefold_ref.forcing.ForcedModel")
    constant_forcing = float(_get(cfg, "forcing.constant_wm2", 0.0))
    sol = sol * float(_get(cfg, "forcing.solar_scale", 1.0))

    t0 = float(_get(cfg, "initial.temperature_c", required=True)) + KELVIN
    t0_p2 = float(_get(cfg, "initial.temperature_p2_k", 0.0))
    return Model(grid, sol, akind, af, ai, tf, width, lkind, lp, co2_term, tkind, k_faces,
                 gamma, heat_capacity, t0, forcing=constant_forcing, t0_p2=t0_p2)


def output_times(cfg: dict) -> np.ndarray:
    """Output times in years: 0, every, 2 every, ..., years (the last one included)."""
    years = float(_get(cfg, "time.years", required=True))
    every = float(_get(cfg, "time.output_every_years", years))
    k = int(np.floor(years / every + 1e-9))
    times = every * np.arange(k + 1)
    if years - times[-1] > 1e-9 * max(years, 1.0):
        times = np.append(times, years)
    return times


@dataclass
class Trajectory:
    """A reference run: times (years), T (time, band) in K and its diagnostics."""

    time: np.ndarray
    temperature: np.ndarray
    global_mean: np.ndarray
    ice_edge_north: np.ndarray
    ice_edge_south: np.ndarray | None
    nfev: int


def integrate(cfg: dict, t_out_years=None, method: str = "Radau", rtol: float = 1e-11,
              atol: float = 1e-9, t_init: np.ndarray | None = None) -> Trajectory:
    """Integrate the discrete model with scipy's solve_ivp and return T at `t_out_years`.

    Radau (order 5) or BDF with the tridiagonal Jacobian sparsity (dense for relaxation
    transport). The default tolerances (rtol 1e-11 on T ~ 250-300 K, atol 1e-9 K) keep the
    reference's own global error near 1e-8 K, far below the checks it serves.
    """
    model = model_from_config(cfg)
    times = output_times(cfg) if t_out_years is None else np.asarray(t_out_years, dtype=float)
    x = model.grid.x_c
    start = model.t0 + model.t0_p2 * 0.5 * (3.0 * x * x - 1.0)
    y0 = start if t_init is None else np.asarray(t_init, dtype=float)
    if times[-1] > times[0]:
        sol = solve_ivp(model.tendency, (times[0], times[-1]), y0, method=method,
                        t_eval=times, rtol=rtol, atol=atol, jac_sparsity=model.jac_sparsity())
        if not sol.success:
            raise RuntimeError(f"solve_ivp failed: {sol.message}")
        temps = sol.y.T
        nfev = sol.nfev
    else:
        temps = y0[None, :].repeat(times.size, axis=0)
        nfev = 0
    gm = temps @ model.grid.w
    edge_n = np.array([model.ice_edge_north(t) for t in temps])
    edge_s = (np.array([model.ice_edge_south(t) for t in temps])
              if model.grid.domain == "globe" else None)
    return Trajectory(times, temps, gm, edge_n, edge_s, nfev)


def equilibrium(model: Model, t_guess: np.ndarray, settle_years: float = 300.0,
                attempts: int = 3, xtol: float = 1e-13) -> np.ndarray:
    """A steady state reached from `t_guess`: settle with Radau for `settle_years`, then polish
    with a Newton-type root finder (scipy.optimize.root, hybr); if the residual stays above
    1e-8 W m-2, settle again and retry (`attempts` times). Returns T in K."""
    t = np.asarray(t_guess, dtype=float)
    resid = np.inf
    for _ in range(attempts):
        sol = solve_ivp(model.tendency, (0.0, settle_years), t, method="Radau", rtol=1e-10,
                        atol=1e-9, jac_sparsity=model.jac_sparsity())
        if not sol.success:
            raise RuntimeError(f"solve_ivp failed: {sol.message}")
        t = sol.y[:, -1]
        res = root(model.net_flux, t, method="hybr", options={"xtol": xtol})
        resid = np.max(np.abs(model.net_flux(res.x)))
        if resid <= 1e-8:
            return res.x
    raise RuntimeError(f"equilibrium residual {resid:.3e} W m-2 after {attempts} attempts")
