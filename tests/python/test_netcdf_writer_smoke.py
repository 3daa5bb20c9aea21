"""Smoke check of icefold's netCDF-4/HDF5 writer against general-purpose readers.

Writes a sample file with the Rust test `output::writer::smoke::write_smoke_sample`, then opens
it with xarray (h5netcdf and netcdf4 engines), h5py and netCDF4-python.

Needs: cargo, and a Python with xarray, h5netcdf, h5py, netCDF4.
Run:   python tests/python/test_netcdf_writer_smoke.py   (or pytest on this file)
"""

import os
import pathlib
import subprocess
import tempfile

import h5py
import netCDF4
import numpy as np
import xarray as xr

REPO = pathlib.Path(__file__).resolve().parents[2]


def write_sample(directory):
    path = pathlib.Path(directory) / "smoke.nc"
    env = dict(os.environ, ICEFOLD_NC_SMOKE=str(path))
    subprocess.run(
        ["cargo", "test", "--release", "--lib", "--quiet", "write_smoke_sample", "--",
         "--ignored", "--exact", "output::writer::smoke::write_smoke_sample"],
        cwd=REPO, env=env, check=True,
    )
    assert path.exists()
    return path


def check_xarray(path, engine):
    # Reference: xarray.open_dataset documentation (named dims from dimension scales).
    with xr.open_dataset(path, engine=engine) as ds:
        assert dict(ds.sizes) == {"lat": 4, "bnds": 2, "time": 100, "tipping": 0}, ds.sizes
        assert set(ds.coords) == {"lat", "time"}, list(ds.coords)
        assert ds["surface_temperature"].dims == ("time", "lat")
        assert ds["lat_bnds"].dims == ("lat", "bnds")
        assert ds["tipping_control"].shape == (0,)
        assert "bnds" not in ds.variables
        assert ds.attrs["Conventions"] == "CF-1.8"
        assert isinstance(ds.attrs["config"], str) and len(ds.attrs["config"]) > 200_000
        assert "smoke °C" in ds.attrs["config"]
        assert float(ds.attrs["solar_constant"]) == 1361.0
        assert int(ds.attrs["seed"]) == 7
        assert ds["lat"].attrs["units"] == "degrees_north"
        assert ds["surface_temperature"].attrs["standard_name"] == "surface_temperature"
        np.testing.assert_array_equal(ds["time"].values, np.arange(100.0))
        st = ds["surface_temperature"].values
        assert st[99, 0] == 288.0 - 0.5 * 67.5 + 99.0
        np.testing.assert_array_equal(ds["stable"].values, np.arange(100) % 2)
        enc = ds["surface_temperature"].encoding
        print(f"{engine}: sizes={dict(ds.sizes)} encoding="
              f"{ {k: enc.get(k) for k in ('chunksizes', 'zlib', 'compression', 'shuffle')} }")
    with xr.open_dataset(path, engine=engine, group="sweep") as g:
        assert g["profile"].dims == ("step", "lat")
        assert g.attrs["control_key"] == "solar.scale"
        np.testing.assert_array_equal(g["control"].values, [0.9, 1.0, 1.1])


def check_h5py(path):
    # Reference: h5py dimension-scale API (Dataset.dims, h5py.h5ds).
    with h5py.File(path, "r") as f:
        st = f["surface_temperature"]
        assert "DIMENSION_LIST" in st.attrs
        assert [d.label for d in st.dims] == ["", ""]
        assert [d[0].name for d in st.dims] == ["/time", "/lat"]
        assert f["lat"].is_scale and f["time"].is_scale and f["bnds"].is_scale
        assert st.maxshape == (None, 4) and st.compression == "gzip" and st.shuffle
        assert f["bnds"].attrs["NAME"].startswith(
            b"This is a netCDF dimension but not a netCDF variable.")
        print("h5py: chunks", st.chunks, "DIMENSION_LIST ok")


def check_netcdf4(path):
    # netCDF-C refuses to open a group for writing unless it tracks creation order.
    with netCDF4.Dataset(path, "r") as nc:
        assert nc.dimensions["time"].isunlimited()
        assert len(nc.dimensions["bnds"]) == 2
        assert nc.variables["surface_temperature"].dimensions == ("time", "lat")
        assert list(nc.variables)[:3] == ["lat", "lat_bnds", "time"]
    with netCDF4.Dataset(path, "a") as nc:
        nc.setncattr("touched", "yes")
    print("netCDF4: read and append-mode open ok")


def check_killed(path):
    # Copy of the temporary file taken right after flush() at 50 records: what a SIGKILL leaves.
    killed = path.with_suffix(".killed.nc")
    for engine in ("h5netcdf", "netcdf4"):
        with xr.open_dataset(killed, engine=engine) as ds:
            assert ds.sizes["time"] == 50, ds.sizes
            np.testing.assert_array_equal(ds["time"].values, np.arange(50.0))
            assert ds["surface_temperature"].values[49, 1] == 288.0 - 0.5 * 22.5 + 49.0
    print("flushed partial file: both engines read 50 records")


def test_smoke():
    with tempfile.TemporaryDirectory() as d:
        path = write_sample(d)
        check_xarray(path, "h5netcdf")
        check_xarray(path, "netcdf4")
        check_h5py(path)
        check_netcdf4(path)
        check_killed(path)


if __name__ == "__main__":
    test_smoke()
    print("ok")
