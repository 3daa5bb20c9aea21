"""icefold's `run` trajectories against the numpy/scipy reference on the same config.

Needs the icefold binary (fixture `icefold_bin`: env ICEFOLD_BIN or target/release/icefold).
Contract (DESIGN.md section 4): `icefold run CONFIG -o out.nc --set KEY=VALUE ...` writes
netCDF-4/HDF5 with dims `time` (years) and `lat`, variables `surface_temperature` (time, lat; K),
`global_mean_temperature` (time), `ice_edge_latitude_north` (time) and, on a globe,
`ice_edge_latitude_south`.

Source of the reference: scipy's solve_ivp (Radau, rtol 1e-11, tridiagonal Jacobian sparsity) on
the equations of docs/discrete-model.md (icefold_ref.discrete), ~1e-8 K from the true trajectory.

Tolerance: icefold runs with `time.tolerance = 1e-6` K of local error per step. The dynamics
contract (every mode decays; the slowest e-folds in C/B ~ 6 years), so global errors do not
grow without bound: they are at most about the local error times the number of steps taken in
one slowest e-folding time (some hundreds for an adaptive implicit scheme at this tolerance),
~1e-4 K. The step albedo's kinks lower the order locally. Allow 1e-3 K for temperatures; the
ice-edge tolerance is that 1e-3 K turned into degrees by the reference's own sensitivity of the
edge to a uniform shift of T (times 3 for a non-uniform error across the two edge bands).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import xarray as xr

from icefold_ref import discrete as d
from refcases import classic, to_toml

#: Absolute tolerance on temperatures, K (see the module doc).
T_TOL = 1e-3


def _annual_mean(cfg: dict) -> dict:
    cfg["insolation"].pop("s2", None)
    return cfg


def _no_diffusivity(cfg: dict) -> dict:
    cfg["transport"].pop("diffusivity", None)
    return cfg


# name -> (config dict or None for the repository's classic config, overrides)
CASES = {
    # (a) the classic step-albedo config at 45 bands, 50 years from 15 C (settles ice free).
    "a_classic_step": (None, {"grid.bands": 45, "time.years": 50,
                              "time.output_every_years": 1, "initial.temperature_c": 15.0}),
    # (a') the same with a dimmer sun: an ice cap grows during the run, so the edge moves.
    "a_classic_step_cap_grows": (None, {"grid.bands": 45, "time.years": 50,
                                        "time.output_every_years": 1,
                                        "initial.temperature_c": 15.0,
                                        "insolation.solar_constant": 1320.0}),
    # (b) smooth albedo, globe, equal_angle bands, relaxation transport, annual-mean insolation.
    "b_globe_smooth_relaxation": (_annual_mean(classic(
        grid={"domain": "globe", "bands": 36, "spacing": "equal_angle"},
        insolation={"kind": "annual_mean", "solar_constant": 1300.0, "obliquity_deg": 23.44,
                    "eccentricity": 0.0167},
        albedo={"kind": "smooth", "width_k": 6.0},
        transport={"kind": "relaxation", "relaxation_rate": 3.8},
        time={"years": 50, "output_every_years": 1})), {}),
    # (b') smooth albedo, globe, equal_angle, P2 diffusivity, s2 from obliquity, CO2 400 ppm.
    "b_globe_smooth_p2_diffusivity": (_annual_mean(classic(
        grid={"domain": "globe", "bands": 36, "spacing": "equal_angle"},
        insolation={"obliquity_deg": 23.44},
        albedo={"kind": "smooth", "width_k": 6.0},
        transport={"diffusivity": 0.44, "diffusivity_p2": -0.4},
        greenhouse={"co2_ppm": 400.0, "reference_co2_ppm": 280.0},
        time={"years": 50, "output_every_years": 1})), {}),
    # (b'') step albedo with relaxation transport (the edge-balance rule), Budyko-type values
    # (from memory): from 15 C an ice cap grows, so edge bands pass through their ramps.
    "b_budyko_step_relaxation": (_no_diffusivity(classic(
        grid={"bands": 45},
        insolation={"solar_constant": 1330.0},
        albedo={"ice_free": 0.32, "ice_free_p2": 0.0},
        longwave={"a": 202.0, "b": 1.9},
        transport={"kind": "relaxation", "relaxation_rate": 3.04},
        time={"years": 50, "output_every_years": 1})), {}),
    # (c) one-band globe (the zero-dimensional model), gray-body OLR, smooth albedo, 2xCO2.
    "c_one_band_gray_body": (classic(
        grid={"domain": "globe", "bands": 1, "spacing": "equal_area"},
        insolation={"solar_constant": 1361.0, "s2": 0.0},
        albedo={"kind": "smooth", "width_k": 10.0, "ice_free": 0.3, "ice_free_p2": 0.0},
        longwave={"kind": "gray_body", "emissivity": 0.61},
        greenhouse={"co2_ppm": 560.0, "reference_co2_ppm": 280.0},
        initial={"temperature_c": 5.0},
        time={"years": 50, "output_every_years": 1}), {}),
}


def _config_path(repo_root: Path, tmp: Path, name: str) -> tuple[Path, dict]:
    """Write (or find) the case's config; return its path and the overrides to pass."""
    base, overrides = CASES[name]
    if base is None:
        path = repo_root / "configs" / "classic-step-albedo.toml"
        if not path.is_file():
            pytest.fail(f"the classic config {path} is missing", pytrace=False)
        return path, overrides
    path = tmp / f"{name}.toml"
    path.write_text(to_toml(base))
    return path, overrides


def _set_args(overrides: dict) -> list[str]:
    args = []
    for key, value in overrides.items():
        args += ["--set", f"{key}={value!r}" if isinstance(value, str) else f"{key}={value}"]
    return args


def _edge_tolerance(model: d.Model, temps: np.ndarray, which: str) -> np.ndarray:
    """T_TOL in degrees of ice-edge latitude, from the reference's sensitivity (see module)."""
    f = model.ice_edge_north if which == "north" else model.ice_edge_south
    sens = np.array([abs(f(t + T_TOL) - f(t - T_TOL)) / 2.0 for t in temps])
    return 3.0 * sens + 1e-9


@pytest.mark.parametrize("name", list(CASES))
def test_run_matches_solve_ivp(name, run_icefold, repo_root, tmp_path):
    path, overrides = _config_path(repo_root, tmp_path, name)
    overrides = {**overrides, "time.tolerance": 1e-6}
    run_icefold("run", path, "-o", "out.nc", *_set_args(overrides))
    cfg = d.load_config(path, overrides)
    model = d.model_from_config(cfg)

    with xr.open_dataset(tmp_path / "out.nc", engine="h5netcdf", decode_times=False) as ds:
        time = ds["time"].values.astype(float)
        temps = ds["surface_temperature"].transpose("time", "lat").values
        gm = ds["global_mean_temperature"].values
        edge_n = ds["ice_edge_latitude_north"].values
        edge_s = ds["ice_edge_latitude_south"].values if model.grid.domain == "globe" else None
        lat = ds["lat"].values

    # Output times: the configured cadence up to time.years (DESIGN.md section 3).
    expected_times = d.output_times(cfg)
    assert time[-1] == pytest.approx(expected_times[-1], abs=1e-9)
    assert np.all(np.isin(np.round(time, 9), np.round(expected_times, 9)))
    assert time.size >= expected_times.size - 1  # at most the initial state left out

    # Same grid (docs/discrete-model.md: lat = asin(x_c) in degrees).
    np.testing.assert_allclose(lat, model.grid.lat_deg, rtol=0, atol=1e-10)

    ref = d.integrate(cfg, np.concatenate([[0.0], time]) if time[0] > 0 else time)
    sl = slice(1, None) if time[0] > 0 else slice(None)
    ref_t, ref_gm, ref_n = ref.temperature[sl], ref.global_mean[sl], ref.ice_edge_north[sl]

    err = np.max(np.abs(temps - ref_t))
    assert err < T_TOL, f"max |T_icefold - T_scipy| = {err:.3e} K"
    assert np.max(np.abs(gm - ref_gm)) < T_TOL
    tol_n = _edge_tolerance(model, ref_t, "north")
    assert np.all(np.abs(edge_n - ref_n) <= tol_n), np.max(np.abs(edge_n - ref_n) - tol_n)
    if edge_s is not None:
        tol_s = _edge_tolerance(model, ref_t, "south")
        assert np.all(np.abs(edge_s - ref.ice_edge_south[sl]) <= tol_s)
    # The trajectory is not trivial: it moves by more than the tolerance.
    assert np.ptp(gm) > 100 * T_TOL


@pytest.mark.parametrize("method", ["implicit", "dopri5", "dop853"])
def test_zero_dimensional_run_every_method(method, run_icefold, repo_root, tmp_path):
    # Source: as above (solve_ivp on the same equations). One band is not stiff, so every
    # scheme of DESIGN.md section 3 runs it; each must meet the same tolerance.
    path, overrides = _config_path(repo_root, tmp_path, "c_one_band_gray_body")
    overrides = {"time.method": method, "time.tolerance": 1e-6}
    run_icefold("run", path, "-o", "out.nc", *_set_args(overrides))
    cfg = d.load_config(path, overrides)
    with xr.open_dataset(tmp_path / "out.nc", engine="h5netcdf", decode_times=False) as ds:
        time = ds["time"].values.astype(float)
        temps = ds["surface_temperature"].values.reshape(time.size, -1)
    ref = d.integrate(cfg, np.concatenate([[0.0], time]) if time[0] > 0 else time)
    ref_t = ref.temperature[1:] if time[0] > 0 else ref.temperature
    assert np.max(np.abs(temps - ref_t)) < T_TOL
