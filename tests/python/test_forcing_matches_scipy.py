"""icefold's runs under forcing histories against the numpy/scipy reference (icefold_ref.forcing).

Source of the reference: scipy's solve_ivp (Radau, rtol 1e-11, restarted at every breakpoint of
the forcing) on the equations of docs/discrete-model.md, with the forcing rules of its "Forcing
histories" section implemented independently in Python.

Checks, per case:
- the applied driver series icefold writes (`solar_scale`, `greenhouse_forcing`,
  `additive_forcing`, `applied_*`) equal the reference's to round-off (1e-12 relative: the same
  closed-form expressions in double precision, a few operations each);
- temperatures agree within 1e-3 K (icefold at `time.tolerance = 1e-6` K; the argument of
  test_run_matches_scipy.py: contracting dynamics keep the global error near the local error
  times the steps per slowest e-folding time, ~1e-4 K; the forcing's kinks lower the order
  locally).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

from icefold_ref import discrete as d
from icefold_ref import forcing as fr
from refcases import classic, to_toml

#: Temperature tolerance, K (module doc).
T_TOL = 1e-3
#: Relative tolerance of the driver series (round-off, module doc).
DRIVER_RTOL = 1e-12


def _pieces_toml(pieces: list[dict]) -> str:
    out = []
    for p in pieces:
        out.append("\n[[forcing.pieces]]")
        out += [f"{k} = {v!r}" if not isinstance(v, str) else f'{k} = "{v}"' for k, v in p.items()]
    return "\n".join(out) + "\n"


def _inline_case(tmp: Path) -> Path:
    """Classic hemisphere; a CSV (step interpolation, held outside its rows) of the additive
    forcing and longwave.a, plus pieces on longwave.b, the solar constant and the constant
    forcing. Invented values."""
    (tmp / "hist.csv").write_text(
        "# invented test history\nyear,forcing_wm2,longwave.a\n"
        "10,1.5,203.3\n20,-2.0,204.0\n30,0.5,202.5\n40,0.0,203.3\n")
    cfg = classic(grid={"bands": 45}, initial={"temperature_c": 12.0},
                  time={"years": 60, "output_every_years": 0.5, "tolerance": 1e-6},
                  forcing={"file": "hist.csv", "interpolation": "step", "outside": "hold"})
    text = to_toml(cfg) + _pieces_toml([
        {"target": "longwave.b", "kind": "step", "start_year": 20.0, "end_year": 30.0,
         "size": 0.1},
        {"target": "insolation.solar_constant", "kind": "ramp", "start_year": 5.0,
         "end_year": 45.0, "rate_per_year": -0.5},
        {"target": "forcing.constant_wm2", "kind": "sinusoid", "amplitude": 1.0,
         "period_years": 7.0, "phase_deg": 30.0},
    ])
    path = tmp / "inline.toml"
    path.write_text(text)
    return path


def _gray_relaxation_case(tmp: Path) -> Path:
    """A globe with gray-body OLR and relaxation transport: an exponential decline of the
    emissivity, a ramp of the relaxation rate and a CO2 cycle. Invented values."""
    cfg = classic(grid={"domain": "globe", "bands": 24, "spacing": "equal_angle"},
                  albedo={"kind": "smooth", "width_k": 6.0},
                  longwave={"kind": "gray_body", "emissivity": 0.61},
                  transport={"kind": "relaxation", "relaxation_rate": 3.8},
                  greenhouse={"co2_ppm": 350.0, "reference_co2_ppm": 280.0},
                  initial={"temperature_c": 14.0},
                  time={"years": 50, "output_every_years": 1, "tolerance": 1e-6})
    for key in ("a", "b"):
        cfg["longwave"].pop(key, None)
    cfg["transport"].pop("diffusivity", None)
    text = to_toml(cfg) + _pieces_toml([
        {"target": "longwave.emissivity", "kind": "exponential", "start_year": 10.0,
         "end_year": 40.0, "rate_per_year": -0.002},
        {"target": "transport.relaxation_rate", "kind": "ramp", "start_year": 0.0,
         "rate_per_year": 0.02},
        {"target": "co2_ppm", "kind": "sinusoid", "amplitude": 40.0, "period_years": 13.0,
         "start_year": 3.0, "end_year": 47.0},
    ])
    path = tmp / "gray.toml"
    path.write_text(text)
    return path


CASES = {
    # The repository's Orvane example (CSV of CO2 and solar scale, step, sinusoid, exponential
    # and diffusivity ramp), at 45 bands to keep the reference fast.
    "orvane": (lambda repo, tmp: repo / "configs" / "forcing-orvane.toml",
               {"grid.bands": 45, "time.tolerance": 1e-6}),
    "inline_step_csv_hold": (lambda repo, tmp: _inline_case(tmp), {}),
    "gray_body_relaxation": (lambda repo, tmp: _gray_relaxation_case(tmp), {}),
}


@pytest.mark.parametrize("name", list(CASES))
def test_forced_run_matches_solve_ivp(name, run_icefold, repo_root, tmp_path):
    make, overrides = CASES[name]
    path = make(repo_root, tmp_path)
    sets = [a for k, v in overrides.items() for a in ("--set", f"{k}={v}")]
    run_icefold("run", path, "-o", "out.nc", *sets)
    cfg = d.load_config(path, overrides)
    fm = fr.ForcedModel(cfg, path.parent)

    with xr.open_dataset(tmp_path / "out.nc", engine="h5netcdf", decode_times=False) as ds:
        time = ds["time"].values.astype(float)
        temps = ds["surface_temperature"].transpose("time", "lat").values
        series = {v: ds[v].values for v in ("solar_scale", "greenhouse_forcing",
                                             "additive_forcing")}
        applied = {ds[v].attrs["config_key"]: ds[v].values
                   for v in ds.data_vars if v.startswith("applied_")}

    # The drivers icefold applied, record by record.
    want = [fm.drivers(t) for t in time]
    for var, got in series.items():
        ref = np.array([w[var] for w in want])
        np.testing.assert_allclose(got, ref, rtol=DRIVER_RTOL, atol=1e-12, err_msg=var)
    assert applied, "a forcing with time-varying parameters writes applied_* series"
    for key, got in applied.items():
        ref = np.array([fm.history.value(key, t) for t in time])
        np.testing.assert_allclose(got, ref, rtol=DRIVER_RTOL, atol=0, err_msg=key)

    # The trajectory.
    ref_t = fr.integrate(cfg, path.parent, time)
    err = np.max(np.abs(temps - ref_t))
    assert err < T_TOL, f"max |T_icefold - T_scipy| = {err:.3e} K"
    # Not trivial: the forcing moves the climate by far more than the tolerance.
    assert np.ptp(temps @ fm.model.grid.w) > 100 * T_TOL


def test_reference_history_rules():
    # The piece rules of docs/discrete-model.md, spot-checked by hand (closed forms).
    h = fr.History({"forcing_wm2": 0.0, "greenhouse.co2_ppm": 280.0}, None, [
        fr.PieceRef("forcing_wm2", "step", 2.0, 4.0, {"size": -3.0}),
        fr.PieceRef("forcing_wm2", "ramp", 1.0, 3.0, {"rate_per_year": 0.5}),
        fr.PieceRef("co2_ppm", "exponential", 10.0, 20.0, {"rate_per_year": 0.01}),
        fr.PieceRef("forcing_wm2", "sinusoid", 0.0, math.inf,
                    {"amplitude": 2.0, "period_years": 8.0, "phase_deg": 90.0}),
    ])
    assert h.value("forcing_wm2", 0.0) == pytest.approx(2.0)  # sin(90 deg) * 2
    assert h.value("forcing_wm2", 2.0) == pytest.approx(-3.0 + 0.5 + 2.0 * math.cos(math.pi / 2))
    assert h.value("forcing_wm2", 5.0) == pytest.approx(1.0 + 2.0 * math.cos(2 * math.pi * 5 / 8))
    assert h.value("co2_ppm", 15.0) == pytest.approx(280.0 * 1.01**5)
    assert h.value("co2_ppm", 30.0) == pytest.approx(280.0 * 1.01**10)
