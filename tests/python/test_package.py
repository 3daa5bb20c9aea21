"""The Python package `icefold` (python/, installed into .venv by `make pyenv`) against the
command line: every job returns the Dataset of the file the command writes (read with xarray's
h5netcdf engine from PyPI, the reference reader), errors carry the command's messages and exit
statuses, the GIL is released while a job computes, and the model's heating and Jacobian agree
with the equilibrium file and with finite differences (numpy from PyPI).

Needs the icefold binary (fixture `icefold_bin`) and the installed package.
"""

from __future__ import annotations

import _thread
import threading
import time
import tomllib
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

import icefold

REPO = Path(__file__).resolve().parents[2]
CONFIGS = REPO / "configs"

# Attributes that say when and by which call a file was made: they differ by construction.
VOLATILE = {"history", "creation_time", "command_line"}

# job name -> (config, set overrides, keyword arguments of the Python call, extra CLI arguments).
JOBS = {
    "run": ("classic-step-albedo.toml", {"time.years": 20}, {}, []),
    "equilibrium": ("classic-step-albedo.toml", {}, {"start": "cold"}, ["--start", "cold"]),
    "sweep": ("sweep-solar.toml", {"sweep.steps": 31}, {}, []),
    "branches": ("branches-solar.toml", {"branches.max_step": 0.02}, {}, []),
    "regimes": (
        "regimes-classic.toml",
        {"regimes.columns": 29, "regimes.rows": 3, "grid.bands": 30},
        {"threads": 2},
        ["--threads", "2"],
    ),
    "ensemble": (
        "ensemble-lhs.toml",
        {"ensemble.members": 6, "time.years": 20},
        {"threads": 2},
        ["--threads", "2"],
    ),
}


def _cli_set_args(sets: dict) -> list[str]:
    return [a for k, v in sets.items() for a in ("--set", f"{k}={v}")]


def _without_volatile(ds: xr.Dataset) -> xr.Dataset:
    ds = ds.copy()
    ds.attrs = {k: v for k, v in ds.attrs.items() if k not in VOLATILE}
    return ds


@pytest.fixture(scope="module")
def cli_files(run_icefold_module):
    """Every job's file written by the command line: {job: path}."""
    out = {}
    for job, (config, sets, _, extra) in JOBS.items():
        path = run_icefold_module.cwd / f"{job}.nc"
        run_icefold_module(job, CONFIGS / config, "-o", path.name, *_cli_set_args(sets), *extra)
        out[job] = path
    return out


@pytest.mark.parametrize("job", list(JOBS))
def test_job_returns_the_dataset_of_the_cli_file(job, cli_files):
    config, sets, kwargs, _ = JOBS[job]
    ds = getattr(icefold, job)(CONFIGS / config, set=sets, **kwargs)
    with xr.open_dataset(cli_files[job], engine="h5netcdf") as cli:
        cli = cli.load()
    # Same names in the same order, same dimensions, coordinates and attributes.
    assert list(ds.variables) == list(cli.variables)
    assert list(ds.coords) == list(cli.coords)
    assert dict(ds.sizes) == dict(cli.sizes)
    assert set(ds.attrs) == set(cli.attrs)
    assert ds.attrs["icefold_kind"] == job and int(ds.attrs["complete"]) == 1
    # Same values, bit for bit: the same library code on the same machine and inputs (the jobs
    # are deterministic, also with threads: tests/determinism.rs).
    xr.testing.assert_identical(_without_volatile(ds), _without_volatile(cli))
    assert ds.attrs["command_line"].startswith(f"python: icefold.{job}(")


def test_config_as_path_text_and_dict_give_the_same_file():
    path = CONFIGS / "classic-step-albedo.toml"
    text = path.read_text()
    tree = tomllib.loads(text)
    sets = {"time.years": 5, "grid.bands": 24}
    results = [
        icefold.run(path, set=sets),
        icefold.run(str(path), set=sets),
        icefold.run(text, set=sets),
        icefold.run(tree, set=sets),
    ]
    for ds in results[1:]:
        xr.testing.assert_identical(_without_volatile(ds), _without_volatile(results[0]))
    assert results[0].sizes["lat"] == 24 and results[0].sizes["time"] == 6
    assert 'years = 5' in results[0].attrs["config_toml"]


def _cli_message(run, *args) -> tuple[int, str]:
    proc = run(*args, check=False)
    lines = proc.stderr.strip().splitlines()
    assert lines and lines[-1].startswith("icefold: "), proc.stderr
    return proc.returncode, lines[-1].removeprefix("icefold: ")


@pytest.mark.parametrize(
    "config, sets",
    [
        (CONFIGS / "classic-step-albedo.toml", {"grid.bands": -1}),
        (CONFIGS / "classic-step-albedo.toml", {"albedo.kind": "purple"}),
        (CONFIGS / "classic-step-albedo.toml", {"time.no_such_key": 1}),
        (REPO / "no-such-config.toml", {}),
    ],
)
def test_bad_input_raises_config_error_with_the_cli_message(config, sets, run_icefold):
    code, message = _cli_message(run_icefold, "run", config, "-o", "x.nc", *_cli_set_args(sets))
    assert code == 2
    with pytest.raises(icefold.ConfigError) as err:
        icefold.run(config, set=sets)
    assert str(err.value) == message
    assert err.value.exit_code == 2
    assert isinstance(err.value, ValueError)


def test_numerical_failure_raises_with_the_message_and_the_partial_file(tmp_path, run_icefold):
    # A table OLR that decreases with temperature is a runaway (as tests/cli_errors.rs): the
    # command exits 3 naming model year and latitude and keeps a file marked incomplete.
    (tmp_path / "olr.csv").write_text("temperature_k,olr_wm2\n150,400\n350,100\n")
    cfg = tmp_path / "c.toml"
    cfg.write_text('[grid]\nbands = 6\n[longwave]\nkind = "table"\ntable = "olr.csv"\n[time]\nyears = 200\n')
    code, message = _cli_message(run_icefold, "run", cfg, "-o", "b.nc")
    assert code == 3 and "model year" in message and "latitude" in message
    with pytest.raises(icefold.NumericalError) as err:
        icefold.run(cfg)
    assert str(err.value) == message and err.value.exit_code == 3
    partial = err.value.dataset
    assert int(partial.attrs["complete"]) == 0
    with xr.open_dataset(tmp_path / "b.nc", engine="h5netcdf") as cli:
        xr.testing.assert_identical(_without_volatile(partial), _without_volatile(cli.load()))


def test_ctrl_c_stops_a_job_and_keeps_the_partial_file():
    # interrupt_main delivers what Ctrl-C delivers (a SIGINT as KeyboardInterrupt in the main
    # thread); the job stops at a step boundary as the command does on SIGINT.
    timer = threading.Timer(0.3, _thread.interrupt_main)
    timer.start()
    start = time.perf_counter()
    with pytest.raises(icefold.Interrupted) as err:
        icefold.run(CONFIGS / "classic-step-albedo.toml", set={"time.years": 1e7})
    timer.join()
    assert isinstance(err.value, KeyboardInterrupt) and err.value.exit_code == 130
    assert "SIGINT" in str(err.value) and "(in memory" in str(err.value)
    partial = err.value.dataset
    assert int(partial.attrs["complete"]) == 0 and partial.attrs["interrupted_by"] == "SIGINT"
    assert 0 < partial.sizes["time"] and float(partial.time[-1]) < 1e7
    # 1e7 model years take minutes; stopped, the call returns within seconds.
    assert time.perf_counter() - start < 60
    # The stop request is forgotten: the next job runs to the end.
    assert int(icefold.run(CONFIGS / "classic-step-albedo.toml", set={"time.years": 3}).attrs["complete"]) == 1


def test_gil_is_released_while_a_job_computes():
    # A Python thread ticks every millisecond; it can only run during the call if the call
    # released the GIL. The call is the native one (no Python work inside the timed window).
    cfg = icefold.load_config(CONFIGS / "classic-step-albedo.toml", set={"time.years": 4000})
    ticks: list[float] = []
    stop = threading.Event()

    def ticker():
        while not stop.is_set():
            ticks.append(time.perf_counter())
            time.sleep(0.001)

    thread = threading.Thread(target=ticker)
    thread.start()
    time.sleep(0.02)
    t0 = time.perf_counter()
    cfg.compute("run", "gil test")
    t1 = time.perf_counter()
    stop.set()
    thread.join()
    margin = 0.1 * (t1 - t0)
    inside = [t for t in ticks if t0 + margin < t < t1 - margin]
    assert t1 - t0 > 0.05, "the run should take long enough to see ticks"
    # Holding the GIL allows none; a free interpreter at least a few even on a busy machine.
    assert len(inside) >= 3, f"{len(inside)} ticks in {t1 - t0:.3f} s"


def test_jobs_in_parallel_threads_give_the_sequential_results():
    # Jobs share the process (HDF5 calls serialised by the library's lock, one in-memory target
    # each): run concurrently they must give what they give one after the other.
    jobs = [
        (icefold.run, CONFIGS / "classic-step-albedo.toml", {"time.years": 30}),
        (icefold.equilibrium, CONFIGS / "smooth-albedo.toml", {}),
        (icefold.run, CONFIGS / "smooth-albedo.toml", {"time.years": 30}),
    ]
    sequential = [f(c, set=s) for f, c, s in jobs]
    parallel: list = [None] * len(jobs)

    def work(i):
        f, c, s = jobs[i]
        parallel[i] = f(c, set=s)

    threads = [threading.Thread(target=work, args=(i,)) for i in range(len(jobs))]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    for a, b in zip(parallel, sequential):
        xr.testing.assert_identical(_without_volatile(a), _without_volatile(b))


def test_model_heating_vanishes_at_the_equilibrium_and_its_spectrum_matches_the_file():
    config = CONFIGS / "smooth-albedo.toml"
    ds = icefold.equilibrium(config)
    model = icefold.Model(config)
    T = ds.surface_temperature.values
    np.testing.assert_array_equal(model.grid.lat, ds.lat.values)
    np.testing.assert_array_equal(model.grid.lat_bnds, ds.lat_bnds.values)
    np.testing.assert_array_equal(model.grid.area_weight, ds.area_weight.values)
    assert model.grid.domain == "hemisphere" and len(model) == ds.sizes["lat"]
    # The equilibrium solve stops at residual_wm2 (max |G|, W m-2).
    assert np.abs(model.heating(T)).max() <= float(ds.attrs["residual_wm2"]) * (1 + 1e-9)
    # Leading eigenvalue of C^-1 dG/dT per year by numpy's dense eig against the file's.
    per_year = 365.25 * 86400.0 / ds.heat_capacity.values
    eig = np.linalg.eigvals(per_year[:, None] * model.jacobian(T))
    lead = float(ds.attrs["leading_eigenvalue"])
    # Two eigen-solvers on the same matrix agree to rounding times its conditioning.
    assert abs(eig.real.max() - lead) <= 1e-8 * np.abs(eig).max()
    assert model.global_mean(T) == pytest.approx(float(ds.global_mean_temperature), rel=1e-12)
    assert model.ice_edges(T)[0] == pytest.approx(float(ds.ice_edge_latitude_north), abs=1e-9)


def test_model_jacobian_matches_central_differences_of_heating():
    model = icefold.Model(CONFIGS / "smooth-albedo.toml")
    T = model.initial_state()
    J = model.jacobian(T)
    h = 1e-4  # K: truncation ~h^2 |G'''| and rounding ~1e-13 W m-2 / h stay below 1e-6
    fd = np.empty_like(J)
    for j in range(len(T)):
        e = np.zeros_like(T)
        e[j] = h
        fd[:, j] = (model.heating(T + e) - model.heating(T - e)) / (2 * h)
    np.testing.assert_allclose(J, fd, atol=1e-6 * np.abs(J).max())
    with pytest.raises(ValueError, match="bands"):
        model.heating(T[:-1])


def test_config_warnings_become_python_warnings_with_the_cli_text(run_icefold):
    config, sets = CONFIGS / "classic-step-albedo.toml", {"initial.temperature_c": 288.0}
    proc = run_icefold("check", config, *_cli_set_args(sets), check=False)
    cli = [ln.removeprefix("icefold: warning: ") for ln in proc.stderr.splitlines() if "warning" in ln]
    assert cli, proc.stderr
    with pytest.warns(icefold.IcefoldWarning) as caught:
        icefold.load_config(config, set=sets)
    assert [str(w.message) for w in caught] == cli
