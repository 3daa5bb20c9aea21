"""icefold's seasonal insolation and seasonal runs against the numpy/scipy reference.

Source of the reference: icefold_ref.seasonal — Berger's (1978) daily-mean insolation on the
orbit of docs/discrete-model.md (Kepler's equation by scipy's brentq), band means by scipy's
quad (insolation check) or 48-point Gauss-Legendre split at the polar circles (trajectory),
integrated by scipy's solve_ivp (Radau). None of it shares icefold's antiderivative or table.
"""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

from icefold_ref import discrete as d
from icefold_ref import seasonal as se
from refcases import classic, to_toml

#: Constant albedo used to read the insolation back from `absorbed_sunlight`.
FLAT_ALBEDO = 0.3


def _seasonal_cfg(grid: dict, orbit: dict, **sections) -> dict:
    cfg = classic(grid=grid, insolation={"kind": "seasonal", "solar_constant": 1361.0, **orbit},
                  heat_capacity={"value": 1.2e8}, **sections)
    cfg["insolation"].pop("s2")
    return cfg


ORBITS = {
    # Earth-like orbit (invented planet, rounded values).
    "earthlike": {"obliquity_deg": 23.44, "eccentricity": 0.0167, "perihelion_deg": 282.9},
    # A strongly tilted, eccentric orbit: polar circles at 30 degrees, (a/r)^2 from 0.69 to 1.5.
    "tilted_eccentric": {"obliquity_deg": 60.0, "eccentricity": 0.1, "perihelion_deg": 100.0},
}


@pytest.mark.parametrize("orbit", list(ORBITS))
@pytest.mark.parametrize("grid", [{"domain": "globe", "bands": 18, "spacing": "equal_angle"},
                                  {"domain": "globe", "bands": 45, "spacing": "equal_area"}])
def test_band_mean_daily_insolation_matches_quad(orbit, grid, run_icefold, tmp_path):
    # With ice and ice-free albedo equal the albedo is a constant, so absorbed_sunlight /
    # (1 - albedo) is the insolation icefold applied at each record.
    cfg = _seasonal_cfg(grid, ORBITS[orbit],
                        albedo={"kind": "smooth", "ice_free": FLAT_ALBEDO, "ice_free_p2": 0.0,
                                "ice": FLAT_ALBEDO, "width_k": 3.0},
                        time={"years": 1, "output_every_years": 1.0 / 24.0, "tolerance": 1e-3})
    (tmp_path / "s.toml").write_text(to_toml(cfg))
    run_icefold("run", "s.toml", "-o", "out.nc")
    with xr.open_dataset(tmp_path / "out.nc", engine="h5netcdf", decode_times=False) as ds:
        time = ds["time"].values.astype(float)
        sun = ds["absorbed_sunlight"].transpose("time", "lat").values / (1.0 - FLAT_ALBEDO)
    grid_ref = d.model_from_config(_plain(cfg)).grid
    o = ORBITS[orbit]
    worst = 0.0
    for k, t in enumerate(time):
        sd, dist = se.orbit(t, o["obliquity_deg"], o["eccentricity"], o["perihelion_deg"])
        ref = se.band_means_quad(grid_ref.x_f, sd, 1361.0, dist)
        worst = max(worst, float(np.max(np.abs(sun[k] - ref))))
    # Tolerance: icefold documents its tabulated band means within 1e-7 S0 of the exact ones
    # (docs/discrete-model.md); quad's own error is ~1e-12 relative.
    assert worst < 1e-7 * 1361.0, f"max |Q_icefold - Q_quad| = {worst:.3e} W m-2"
    # The check has teeth: the insolation changes through the year by far more than that.
    assert np.ptp(sun) > 100.0


def _plain(cfg: dict) -> dict:
    out = {k: (dict(v) if isinstance(v, dict) else v) for k, v in cfg.items()}
    out["insolation"] = {"kind": "legendre", "solar_constant": 1361.0, "s2": 0.0}
    return out


def test_gauss_legendre_band_means_match_quad():
    # The fast quadrature the trajectory check uses agrees with quad (both outside references).
    g = d.make_grid("globe", 24, "equal_area")
    for t in (0.0, 0.13, 0.25, 0.61, 0.9):
        sd, dist = se.orbit(t, 60.0, 0.1, 100.0)
        a = se.band_means_gl(g.x_f, sd, 1361.0, dist)
        b = se.band_means_quad(g.x_f, sd, 1361.0, dist)
        assert np.max(np.abs(a - b)) < 1e-9 * 1361.0


def test_seasonal_run_matches_solve_ivp(run_icefold, tmp_path):
    # A 24-band globe with a smooth ice-albedo feedback and a 30 m-like mixed layer, 3 years
    # from a cold start, monthly records. Tolerance as test_run_matches_scipy.py: icefold at
    # time.tolerance = 1e-6 K; contracting dynamics (slowest e-folding C/B ~ 1.8 years) keep the
    # global error near the local error times the steps per e-folding, ~1e-4 K; allow 1e-3 K.
    cfg = _seasonal_cfg({"domain": "globe", "bands": 24, "spacing": "equal_area"},
                        ORBITS["earthlike"],
                        albedo={"kind": "smooth", "width_k": 3.0},
                        initial={"temperature_c": 8.0, "temperature_p2_k": -25.0},
                        time={"years": 3, "output_every_years": 1.0 / 12.0, "tolerance": 1e-6})
    (tmp_path / "s.toml").write_text(to_toml(cfg))
    run_icefold("run", "s.toml", "-o", "out.nc")
    with xr.open_dataset(tmp_path / "out.nc", engine="h5netcdf", decode_times=False) as ds:
        time = ds["time"].values.astype(float)
        temps = ds["surface_temperature"].transpose("time", "lat").values
    sm = se.SeasonalModel(cfg)
    m = sm.model
    x = m.grid.x_c
    y0 = m.t0 + m.t0_p2 * 0.5 * (3.0 * x * x - 1.0)
    from scipy.integrate import solve_ivp

    sol = solve_ivp(sm.tendency, (0.0, time[-1]), y0, method="Radau", t_eval=time, rtol=1e-10,
                    atol=1e-9, jac_sparsity=m.jac_sparsity())
    assert sol.success, sol.message
    err = np.max(np.abs(temps - sol.y.T))
    assert err < 1e-3, f"max |T_icefold - T_scipy| = {err:.3e} K"
    # Not trivial: a seasonal cycle of kelvins at high latitudes.
    assert np.ptp(temps[:, -1]) > 5.0
