"""`icefold export FILE --csv` against the same file read by netCDF4 (Unidata's netCDF-C
library, an independent reader), for every file kind: each column value for value (the CSV
holds the shortest text that reads back to the same double), a field as a long table in C
order (last dimension fastest) with its coordinates."""

from __future__ import annotations

import csv
import io
import math

import netCDF4
import numpy as np
import pytest

from conftest import REPO

CONFIGS = REPO / "configs"

# kind -> (config, extra arguments, the dimensions of the default table)
KINDS = {
    "run": ("classic-step-albedo.toml", [], ("time",)),
    "equilibrium": ("classic-step-albedo.toml", [], ("lat",)),
    "sweep": ("sweep-solar.toml", [], ("step",)),
    "branches": ("branches-solar.toml", [], ("point",)),
    "ensemble": (
        "ensemble-lhs.toml",
        ["--set", "ensemble.members=6", "--set", "time.years=20"],
        ("member",),
    ),
    "regimes": (
        "regimes-classic.toml",
        ["--set", "regimes.rows=3", "--set", "regimes.columns=11"],
        ("p2", "p1"),
    ),
}


def read_csv(text: str) -> tuple[list[str], list[list[float]]]:
    rows = list(csv.reader(io.StringIO(text)))
    return rows[0], [[float(v) for v in r] for r in rows[1:]]


def same(a, b) -> bool:
    """Equal doubles, NaN equal to NaN."""
    a = np.asarray(a, dtype=float).ravel()
    b = np.asarray(b, dtype=float).ravel()
    return a.shape == b.shape and all(x == y or (math.isnan(x) and math.isnan(y)) for x, y in zip(a, b))


@pytest.fixture(scope="module")
def files(run_icefold_module):
    made = {}
    for kind, (cfg, extra, _) in KINDS.items():
        run_icefold_module(kind, CONFIGS / cfg, "-o", f"{kind}.nc", "--quiet", *extra)
        made[kind] = run_icefold_module.cwd / f"{kind}.nc"
    return made


@pytest.mark.parametrize("kind", list(KINDS))
def test_default_table_matches_netcdf4(kind, files, run_icefold_module):
    dims = KINDS[kind][2]
    out = run_icefold_module("export", files[kind], "--csv").stdout
    names, rows = read_csv(out)
    with netCDF4.Dataset(files[kind]) as ds:
        ds.set_auto_mask(False)
        expected = [n for n, v in ds.variables.items() if v.dimensions == dims and n not in dims]
        assert names == list(dims) + expected
        n = int(np.prod([len(ds.dimensions[d]) for d in dims]))
        assert len(rows) == n
        cols = list(zip(*rows))
        for k, name in enumerate(expected, start=len(dims)):
            assert same(cols[k], ds.variables[name][...]), name
        if len(dims) == 1:
            d = dims[0]
            want = ds.variables[d][...] if d in ds.variables else np.arange(n)
            assert same(cols[0], want)
        else:
            # A long table over two axes: both coordinates repeated in C order.
            a, b = (ds.variables[d][...] for d in dims)
            grid_a, grid_b = np.meshgrid(a, b, indexing="ij")
            assert same(cols[0], grid_a) and same(cols[1], grid_b)


def test_a_field_is_a_long_table_in_c_order(files, run_icefold_module):
    out = run_icefold_module("export", files["run"], "--var", "surface_temperature").stdout
    names, rows = read_csv(out)
    assert names == ["time", "lat", "surface_temperature"]
    with netCDF4.Dataset(files["run"]) as ds:
        t = ds.variables["time"][...]
        lat = ds.variables["lat"][...]
        field = ds.variables["surface_temperature"][...]
    assert field.shape == (len(t), len(lat))
    cols = list(zip(*rows))
    tt, ll = np.meshgrid(t, lat, indexing="ij")
    assert same(cols[0], tt) and same(cols[1], ll) and same(cols[2], field)
