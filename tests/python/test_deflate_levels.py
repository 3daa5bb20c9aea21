"""`output.deflate_level`: files written at level 0 (no filters) read the same as the default
(level 1) through h5py, netCDF4 and xarray, and stay appendable along `time` by netCDF-C.

Needs the icefold binary (fixture `icefold_bin`). Sources: h5py and netCDF4-python (reference
libraries, run here) for the filters each dataset carries and for appending a record.
"""

from __future__ import annotations

import h5py
import netCDF4
import numpy as np
import pytest
import xarray as xr

from refcases import classic, to_toml

YEARS = 30


@pytest.fixture(scope="module")
def files(run_icefold_module):
    """A run file at the default level and at levels 0 and 9: {level: path}."""
    cwd = run_icefold_module.cwd
    cfg = classic(grid={"domain": "hemisphere", "bands": 18, "spacing": "equal_area"},
                  time={"years": YEARS, "output_every_years": 1})
    (cwd / "c.toml").write_text(to_toml(cfg))
    out = {}
    for level in (None, 0, 9):
        name = f"level{level}.nc"
        args = ["run", "c.toml", "-o", name]
        if level is not None:
            args += ["--set", f"output.deflate_level={level}"]
        run_icefold_module(*args)
        out[1 if level is None else level] = cwd / name
    return out


def _datasets(path):
    with h5py.File(path, "r") as f:
        out = {}
        f.visititems(lambda k, v: out.__setitem__(k, (v.chunks, v.compression,
                                                      v.compression_opts, v.shuffle))
                     if isinstance(v, h5py.Dataset) else None)
        return out


def test_filters_follow_the_level(files):
    for level, path in files.items():
        with h5py.File(path, "r") as f:
            assert int(f.attrs["deflate_level"]) == level
        sets = _datasets(path)
        st = sets["surface_temperature"]
        # Record variables are chunked at every level (HDF5 needs chunks to resize).
        assert st[0] is not None
        for name, (chunks, comp, opts, shuffle) in sets.items():
            if level == 0:
                assert comp is None and not shuffle, (name, comp, shuffle)
            elif chunks is not None:
                assert (comp, opts, shuffle) == ("gzip", level, True), name
    with netCDF4.Dataset(files[0]) as ds:
        f = ds["surface_temperature"].filters()
        assert not f["zlib"] and not f["shuffle"], f
    with netCDF4.Dataset(files[9]) as ds:
        f = ds["surface_temperature"].filters()
        assert f["zlib"] and f["shuffle"] and f["complevel"] == 9, f


def test_level_0_reads_the_same_values_everywhere(files):
    with xr.open_dataset(files[1], engine="h5netcdf", decode_times=False) as a, \
            xr.open_dataset(files[0], engine="h5netcdf", decode_times=False) as b:
        assert set(a.data_vars) == set(b.data_vars)
        for v in a.data_vars:
            # Lossless compression of the same bits: exact equality (NaN where NaN).
            np.testing.assert_array_equal(a[v].values, b[v].values, err_msg=v)
    with netCDF4.Dataset(files[0]) as ds:
        with h5py.File(files[1], "r") as h:
            np.testing.assert_array_equal(ds["surface_temperature"][:], h["surface_temperature"][:])


def test_level_0_file_is_appendable_along_time(files):
    path = files[0]
    with netCDF4.Dataset(path, "a") as ds:
        n = ds.dimensions["time"].size
        assert ds.dimensions["time"].isunlimited()
        ds["time"][n] = YEARS + 1.0
        ds["surface_temperature"][n, :] = np.full(ds.dimensions["lat"].size, 250.0)
    with h5py.File(path, "r") as f:
        assert f["time"].shape == (n + 1,)
        assert f["surface_temperature"].shape[0] == n + 1
        np.testing.assert_array_equal(f["surface_temperature"][n], 250.0)
