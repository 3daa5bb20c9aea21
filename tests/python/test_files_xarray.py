"""icefold's run file read by general-purpose readers: xarray (h5netcdf engine), h5py, netCDF4.

Needs the icefold binary (fixture `icefold_bin`). Contract: DESIGN.md section 4 (named dims as
HDF5 dimension scales, CF-1.8 attributes, fixed variable names, global attributes with the
resolved config as TOML text, the icefold version, the creation time and the command line).
The global attributes' names are not fixed by the design, so they are found by content.
"""

from __future__ import annotations

import datetime as dt
import re
import tomllib
from pathlib import Path

import h5py
import netCDF4
import numpy as np
import pytest
import xarray as xr

from refcases import classic, to_toml

BANDS = 12
YEARS = 6


@pytest.fixture(scope="module")
def run_files(run_icefold_module):
    """Run icefold twice (hemisphere and globe) and return {domain: (path, config path)}."""
    cwd = run_icefold_module.cwd
    out = {}
    for domain in ("hemisphere", "globe"):
        cfg = classic(grid={"domain": domain, "bands": 10, "spacing": "equal_area"},
                      time={"years": YEARS, "output_every_years": 1})
        cfg_path = cwd / f"{domain}.toml"
        cfg_path.write_text(to_toml(cfg))
        nc = cwd / f"{domain}.nc"
        # --set changes the band count, so the resolved config must show it.
        run_icefold_module("run", cfg_path.name, "-o", nc.name, "--set", f"grid.bands={BANDS}")
        out[domain] = (nc, cfg_path)
    return out


def _global_attr_strings(path: Path) -> dict[str, str]:
    with h5py.File(path, "r") as f:
        out = {}
        for k, v in f.attrs.items():
            if isinstance(v, bytes):
                v = v.decode("utf-8")
            if isinstance(v, np.ndarray) and v.size == 1:
                v = v.item()
                v = v.decode("utf-8") if isinstance(v, bytes) else v
            if isinstance(v, str):
                out[k] = v
        return out


@pytest.mark.parametrize("domain", ["hemisphere", "globe"])
def test_xarray_h5netcdf_named_dims_and_cf_attributes(run_files, domain):
    # Source: xarray + h5netcdf (general-purpose readers); CF-1.8 conventions (units,
    # standard_name, bounds).
    path, _ = run_files[domain]
    with xr.open_dataset(path, engine="h5netcdf", decode_times=False) as ds:
        assert {"time", "lat"} <= set(ds.dims)
        assert {"time", "lat"} <= set(ds.coords)
        assert ds.sizes["lat"] == BANDS
        assert ds.sizes["time"] >= YEARS
        st = ds["surface_temperature"]
        assert st.dims == ("time", "lat")
        assert st.attrs["units"] == "K"
        assert st.attrs["standard_name"] == "surface_temperature"
        assert "long_name" in st.attrs
        assert ds["lat"].attrs["units"] == "degrees_north"
        assert ds["lat"].attrs.get("standard_name") == "latitude"
        assert "year" in ds["time"].attrs["units"].lower()
        assert ds["global_mean_temperature"].dims == ("time",)
        assert ds["global_mean_temperature"].attrs["units"] == "K"
        names = ["ice_edge_latitude_north"] + (["ice_edge_latitude_south"]
                                               if domain == "globe" else [])
        for name in names:
            assert ds[name].dims == ("time",)
            assert ds[name].attrs["units"].startswith("degree")
        if domain == "hemisphere":
            assert "ice_edge_latitude_south" not in ds
        # Bounds: lat_bnds (lat, 2), referenced from lat (CF "bounds").
        assert ds["lat"].attrs.get("bounds") == "lat_bnds"
        bnds = ds["lat_bnds"]
        assert bnds.dims[0] == "lat" and bnds.shape == (BANDS, 2)
        lat = ds["lat"].values
        b = bnds.values
        assert np.all((b[:, 0] < lat) & (lat < b[:, 1]))
        np.testing.assert_allclose(b[1:, 0], b[:-1, 1], rtol=0, atol=1e-12)
        assert b[-1, 1] == pytest.approx(90.0) and b[0, 0] == pytest.approx(
            0.0 if domain == "hemisphere" else -90.0, abs=1e-12)
        # Values are consistent: the global mean is the area-weighted mean (weights dx).
        w = np.diff(np.sin(np.radians(np.concatenate([b[:, 0], b[-1:, 1]]))))
        w /= w.sum()
        gm = st.transpose("time", "lat").values @ w
        np.testing.assert_allclose(ds["global_mean_temperature"].values, gm, rtol=0, atol=1e-9)
        assert np.all(np.diff(ds["time"].values) > 0)


@pytest.mark.parametrize("domain", ["hemisphere", "globe"])
def test_h5py_dimension_scales(run_files, domain):
    # Source: h5py (HDF5 dimension scales are how netCDF-4 names dimensions).
    path, _ = run_files[domain]
    with h5py.File(path, "r") as f:
        for name in ("time", "lat"):
            assert f[name].is_scale, name
        st = f["surface_temperature"]
        assert st.dims[0][0] == f["time"] and st.dims[1][0] == f["lat"]
        assert f["global_mean_temperature"].dims[0][0] == f["time"]
        assert f["time"].maxshape[0] is None  # unlimited, appended to as the run goes
        # Same numbers through h5py and xarray.
        with xr.open_dataset(path, engine="h5netcdf", decode_times=False) as ds:
            np.testing.assert_array_equal(st[...], ds["surface_temperature"].values)


def test_netcdf4_reads_unlimited_time(run_files):
    # Source: netCDF4-python (the netCDF-C library): the file is netCDF-4, time unlimited.
    path, _ = run_files["globe"]
    with netCDF4.Dataset(path, "r") as nc:
        assert nc.dimensions["time"].isunlimited()
        assert len(nc.dimensions["lat"]) == BANDS
        assert nc.variables["surface_temperature"].dimensions == ("time", "lat")


def test_global_attributes(run_files, repo_root):
    # Source: DESIGN.md section 4 (provenance attributes); tomllib parses the config text.
    path, cfg_path = run_files["hemisphere"]
    attrs = _global_attr_strings(path)
    configs = []
    for v in attrs.values():
        try:
            parsed = tomllib.loads(v)
        except tomllib.TOMLDecodeError:
            continue
        if "grid" in parsed:
            configs.append(parsed)
    assert configs, f"no global attribute holds the config as TOML: {sorted(attrs)}"
    resolved = configs[0]
    assert resolved["grid"]["bands"] == BANDS  # the --set value, resolved
    assert resolved["transport"]["diffusivity"] == pytest.approx(0.52)

    with open(repo_root / "Cargo.toml", "rb") as fh:
        version = tomllib.load(fh)["package"]["version"]
    assert any("version" in k.lower() and version in v for k, v in attrs.items()), attrs.keys()

    def is_timestamp(text: str) -> bool:
        try:
            dt.datetime.fromisoformat(text.strip().replace("Z", "+00:00"))
            return True
        except ValueError:
            return False
    assert any(re.search("creat|date|time", k, re.I) and is_timestamp(v)
               for k, v in attrs.items()), attrs.keys()
    commands = [v for k, v in attrs.items() if re.search("command|history", k, re.I)]
    assert any("run" in v and cfg_path.name in v and f"grid.bands={BANDS}" in v
               for v in commands), commands
