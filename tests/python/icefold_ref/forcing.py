"""Forcing histories and time-varying parameters for the numpy/scipy reference.

Implements the [forcing] section as docs/discrete-model.md ("Forcing histories") states it,
independently of icefold's code:

- a CSV (`year` plus named columns, `#` comments, linear or step interpolation between rows,
  `outside = "error"` or `"hold"`; the end values are held outside the rows either way);
- analytic pieces on a channel: `step` (adds `size` on [start, end)), `ramp` (adds
  `rate (min(t, end) - start)` after start), `exponential` (multiplies by
  `(1 + rate)^(min(t, end) - start)` after start), `sinusoid` (adds
  `amplitude sin(2 pi (t - start) / period + phase)` on [start, end));
- a channel's value: (its CSV column, else its configured value) + the sum of its additive
  pieces, times the product of its exponential pieces;
- how channels enter the equation: `co2_ppm` is `greenhouse.co2_ppm`; the insolation multiplier
  is `forcing.solar_scale * solar_scale * solar_constant(t) / solar_constant`; the additive
  forcing is `forcing.constant_wm2 + forcing_wm2`; `longwave.a`/`longwave.b` shift the linear
  OLR by their change; `longwave.emissivity` scales the gray-body OLR; the transport is scaled
  by `diffusivity(t) / diffusivity` (or the relaxation rate's ratio).

Units: years for time, W m-2 for fluxes, ppm for CO2.
"""

from __future__ import annotations

import copy
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from scipy.integrate import solve_ivp

from . import discrete as d

#: Channels that may come from the CSV or carry pieces (the two short names and dotted keys).
CHANNELS = (
    "co2_ppm", "solar_scale", "forcing_wm2",
    "greenhouse.co2_ppm", "greenhouse.reference_co2_ppm", "greenhouse.log_coefficient_wm2",
    "forcing.constant_wm2", "forcing.solar_scale", "insolation.solar_constant",
    "longwave.a", "longwave.b", "longwave.emissivity",
    "transport.diffusivity", "transport.relaxation_rate",
)


def _canonical(name: str) -> str:
    return "greenhouse.co2_ppm" if name == "co2_ppm" else name


@dataclass
class Series:
    """A CSV history: years (strictly increasing) and columns by canonical name."""

    years: np.ndarray
    columns: dict
    step: bool

    def value(self, name: str, t: float) -> float:
        v = self.columns[name]
        y = self.years
        if t <= y[0]:
            return float(v[0])
        if t >= y[-1]:
            return float(v[-1])
        if self.step:
            return float(v[np.searchsorted(y, t, side="right") - 1])
        return float(np.interp(t, y, v))


def read_series(path: Path, interpolation: str) -> Series:
    """Read a forcing CSV (numpy's loadtxt after the header line)."""
    lines = [ln.strip() for ln in Path(path).read_text().splitlines()]
    lines = [ln for ln in lines if ln and not ln.startswith("#")]
    header = [h.strip() for h in lines[0].split(",")]
    if header[0] != "year":
        raise d.ConfigError(f"{path}: first column must be `year`")
    data = np.loadtxt(lines[1:], delimiter=",", ndmin=2)
    cols = {_canonical(h): data[:, k] for k, h in enumerate(header) if k > 0}
    return Series(data[:, 0], cols, interpolation == "step")


@dataclass
class PieceRef:
    """One analytic piece on a channel (years, target units)."""

    target: str
    kind: str
    start: float
    end: float
    params: dict

    def additive(self, t: float) -> float:
        p = self.params
        if self.kind == "step":
            return p["size"] if self.start <= t < self.end else 0.0
        if self.kind == "ramp":
            return p["rate_per_year"] * max(min(t, self.end) - self.start, 0.0)
        if self.kind == "sinusoid":
            if not self.start <= t < self.end:
                return 0.0
            phase = math.radians(p.get("phase_deg", 0.0))
            return p["amplitude"] * math.sin(2 * math.pi * (t - self.start) / p["period_years"]
                                             + phase)
        return 0.0

    def factor(self, t: float) -> float:
        if self.kind == "exponential":
            return (1.0 + self.params["rate_per_year"]) ** max(min(t, self.end) - self.start, 0.0)
        return 1.0


@dataclass
class History:
    """The [forcing] section: configured bases, an optional CSV series and pieces."""

    bases: dict
    series: Series | None
    pieces: list = field(default_factory=list)

    def names(self) -> set:
        out = {_canonical(p.target) for p in self.pieces}
        if self.series is not None:
            out |= set(self.series.columns)
        return out

    def value(self, name: str, t: float) -> float:
        """A channel's value at t (years)."""
        name = _canonical(name)
        if self.series is not None and name in self.series.columns:
            v = self.series.value(name, t)
        else:
            v = self.bases[name]
        f = 1.0
        for p in self.pieces:
            if _canonical(p.target) == name:
                v += p.additive(t)
                f *= p.factor(t)
        return v * f

    def breakpoints(self, years: float) -> np.ndarray:
        """Times in (0, years) where the forcing or its slope jumps (piece ends, CSV rows)."""
        pts = [p.start for p in self.pieces] + [p.end for p in self.pieces]
        if self.series is not None:
            pts += list(self.series.years)
        return np.unique([t for t in pts if 0.0 < t < years and math.isfinite(t)])


def history_from_config(cfg: dict, config_dir: Path) -> History:
    """The forcing of a parsed config (relative CSV paths resolved from `config_dir`)."""
    g = lambda key, default=None: d._get(cfg, key, default)  # noqa: E731
    bases = {
        "greenhouse.co2_ppm": float(g("greenhouse.co2_ppm", 280.0)),
        "greenhouse.reference_co2_ppm": float(g("greenhouse.reference_co2_ppm", 280.0)),
        "greenhouse.log_coefficient_wm2": float(g("greenhouse.log_coefficient_wm2",
                                                  d.CO2_K_DEFAULT)),
        "forcing.constant_wm2": float(g("forcing.constant_wm2", 0.0)),
        "forcing.solar_scale": float(g("forcing.solar_scale", 1.0)),
        "insolation.solar_constant": float(g("insolation.solar_constant")),
        "solar_scale": 1.0,
        "forcing_wm2": 0.0,
    }
    for key in ("longwave.a", "longwave.b", "longwave.emissivity", "transport.diffusivity",
                "transport.relaxation_rate"):
        if g(key) is not None:
            bases[key] = float(g(key))
    series = None
    if g("forcing.file") is not None:
        series = read_series(config_dir / g("forcing.file"), g("forcing.interpolation", "linear"))
    pieces = []
    for raw in g("forcing.pieces", []) or []:
        params = {k: v for k, v in raw.items() if k not in ("target", "kind", "start_year",
                                                           "end_year")}
        pieces.append(PieceRef(raw["target"], raw["kind"], float(raw.get("start_year", 0.0)),
                               float(raw.get("end_year", math.inf)), params))
    return History(bases, series, pieces)


class ForcedModel:
    """The discrete model with its drivers taken from a `History` at every time."""

    def __init__(self, cfg: dict, config_dir: Path):
        plain = copy.deepcopy(cfg)
        plain.pop("forcing", None)
        self.model = d.model_from_config(plain)
        self.history = history_from_config(cfg, config_dir)
        m, h = self.model, self.history
        if m.olr_kind not in ("linear", "gray_body") and (
                {"longwave.a", "longwave.b", "longwave.emissivity"} & h.names()):
            raise d.ConfigError("a time-varying OLR key needs linear or gray-body OLR")
        if m.edge_balance:
            raise d.ConfigError("the step albedo's edge-balance rule (relaxation transport) "
                                "under a forcing history is not modelled by the reference")

    def drivers(self, t: float) -> dict:
        """Insolation multiplier, greenhouse forcing, additive forcing (W m-2), OLR change and
        transport multiplier at t (years)."""
        h, b = self.history, self.history.bases
        names = h.names()
        solar = (h.value("forcing.solar_scale", t) * h.value("solar_scale", t)
                 * h.value("insolation.solar_constant", t) / b["insolation.solar_constant"])
        greenhouse = self.model.co2_term
        if names & {"greenhouse.co2_ppm", "greenhouse.reference_co2_ppm",
                    "greenhouse.log_coefficient_wm2"}:
            greenhouse = h.value("greenhouse.log_coefficient_wm2", t) * math.log(
                h.value("greenhouse.co2_ppm", t) / h.value("greenhouse.reference_co2_ppm", t))
        out = {
            "solar_scale": solar,
            "greenhouse_forcing": greenhouse,
            "additive_forcing": h.value("forcing.constant_wm2", t) + h.value("forcing_wm2", t),
            "olr_scale": 1.0, "olr_offset": 0.0, "olr_slope": 0.0, "transport_scale": 1.0,
        }
        if "longwave.a" in names:
            out["olr_offset"] = h.value("longwave.a", t) - b["longwave.a"]
        if "longwave.b" in names:
            out["olr_slope"] = h.value("longwave.b", t) - b["longwave.b"]
        if "longwave.emissivity" in names:
            out["olr_scale"] = h.value("longwave.emissivity", t) / b["longwave.emissivity"]
        for key in ("transport.diffusivity", "transport.relaxation_rate"):
            if key in names:
                out["transport_scale"] = h.value(key, t) / b[key]
        return out

    def net_flux(self, t: float, temp: np.ndarray) -> np.ndarray:
        """C dT/dt, W m-2, at time t (years)."""
        m, dr = self.model, self.drivers(t)
        olr = (dr["olr_scale"] * m.olr(temp) + dr["olr_offset"]
               + dr["olr_slope"] * (temp - d.KELVIN))
        return (dr["solar_scale"] * m.insolation * (1.0 - m.albedo(temp))
                - (olr - dr["greenhouse_forcing"])
                + dr["transport_scale"] * m.transport(temp)
                + dr["additive_forcing"])

    def tendency(self, t: float, temp: np.ndarray) -> np.ndarray:
        return self.net_flux(t, temp) / self.model.heat_capacity * d.SECONDS_PER_YEAR


def integrate(cfg: dict, config_dir: Path, times: np.ndarray, rtol: float = 1e-11,
              atol: float = 1e-9) -> np.ndarray:
    """T (time, band) in K at `times` (years), by Radau restarted at every breakpoint of the
    forcing so that no step straddles a jump of the forcing or of its slope."""
    fm = ForcedModel(cfg, config_dir)
    m = fm.model
    x = m.grid.x_c
    y = m.t0 + m.t0_p2 * 0.5 * (3.0 * x * x - 1.0)
    times = np.asarray(times, dtype=float)
    edges = np.concatenate([[times[0]], fm.history.breakpoints(times[-1]), [times[-1]]])
    out = np.empty((times.size, m.grid.n))
    for a, b in zip(edges[:-1], edges[1:]):
        if b <= a:
            continue
        inside = (times >= a) & (times <= b)
        t_eval = np.union1d(times[inside], [b])  # b last: the state carried to the next piece
        sol = solve_ivp(fm.tendency, (a, b), y, method="Radau", rtol=rtol, atol=atol,
                        t_eval=t_eval, jac_sparsity=m.jac_sparsity())
        if not sol.success:
            raise RuntimeError(f"solve_ivp failed on [{a}, {b}]: {sol.message}")
        out[inside] = sol.y.T[np.isin(t_eval, times[inside])]
        y = sol.y[:, -1]
    return out
