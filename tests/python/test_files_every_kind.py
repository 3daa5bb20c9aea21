"""Every output kind opens with xarray (h5netcdf engine) and h5py with the fixed names of
DESIGN.md section 4 (source: the interface contract; xarray and h5py from PyPI as readers)."""

import pathlib

import h5py
import pytest
import xarray as xr

REPO = pathlib.Path(__file__).resolve().parents[2]
CONFIGS = REPO / "configs"

KINDS = {
    "equilibrium": (["equilibrium", CONFIGS / "classic-step-albedo.toml"], {"lat"},
                    ["surface_temperature", "global_mean_temperature", "ice_edge_latitude_north"]),
    "sweep": (["sweep", CONFIGS / "sweep-solar.toml", "--set", "sweep.steps=31"], {"step", "tipping", "lat"},
              ["control", "direction", "global_mean_temperature", "ice_edge_latitude_north",
               "tipping_control", "tipping_direction"]),
    "branches": (["branches", CONFIGS / "branches-solar.toml"], {"point", "fold", "lat"},
                 ["control", "global_mean_temperature", "ice_edge_latitude_north", "stable",
                  "leading_eigenvalue", "branch", "fold_control", "fold_ice_edge_latitude_north"]),
    "ensemble": (["ensemble", CONFIGS / "ensemble-lhs.toml", "--set", "ensemble.members=8",
                  "--set", "time.years=20"], {"member", "time"},
                 ["global_mean_temperature", "ice_edge_latitude_north"]),
}


@pytest.mark.parametrize("kind", list(KINDS))
def test_kind_opens_with_fixed_names(kind, run_icefold_module):
    args, dims, names = KINDS[kind]
    out = f"{kind}.nc"
    run_icefold_module(*args, "-o", out, "--overwrite")
    path = run_icefold_module.cwd / out
    with xr.open_dataset(path, engine="h5netcdf") as ds:
        assert dims <= set(ds.sizes), f"{kind}: dims {dict(ds.sizes)}"
        for n in names:
            assert n in ds.variables, f"{kind}: missing {n}"
        assert ds.attrs["icefold_kind"] == kind
        assert int(ds.attrs["complete"]) == 1
        if kind in ("sweep", "branches"):
            assert ds.attrs["control_key"] == "insolation.solar_constant"
        if "ice_edge_latitude_north" in ds.variables:
            assert ds["ice_edge_latitude_north"].attrs["units"].startswith("degree")
    with h5py.File(path, "r") as f:
        assert "config_toml" in f.attrs and "icefold_version" in f.attrs
