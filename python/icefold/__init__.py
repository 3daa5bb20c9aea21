"""icefold from Python: the jobs of the command line as xarray Datasets, the model as a function.

Every job takes ``config`` (a path to a TOML file, TOML text, or a nested dict) and ``set`` (a
dict of dotted keys, like ``--set KEY=VALUE``), computes in memory (no file is written) with the
GIL released, and returns an ``xarray.Dataset`` with the variables, coordinates and attributes of
the file the command writes::

    import icefold
    ds = icefold.run("configs/classic-step-albedo.toml", set={"time.years": 50})
    ds.global_mean_temperature.plot()

Errors raise ``ConfigError`` (bad input, the command's exit status 2), ``NumericalError`` (exit
3; ``.dataset`` holds the partial file the command keeps, marked ``complete = 0``) or
``IcefoldError`` (others), with the command's messages; Ctrl-C stops a job at its next step
boundary and raises ``Interrupted`` (a ``KeyboardInterrupt``) with the partial file.
"""

from __future__ import annotations

import io
import os
import threading
import warnings
from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np
import xarray as xr

from . import _native

__all__ = [
    "run",
    "equilibrium",
    "sweep",
    "branches",
    "regimes",
    "ensemble",
    "Model",
    "Grid",
    "load_config",
    "open_bytes",
    "IcefoldError",
    "ConfigError",
    "NumericalError",
    "Interrupted",
    "IcefoldWarning",
    "__version__",
]

__version__: str = _native.version


class IcefoldError(Exception):
    """An icefold failure; ``exit_code`` is the command line's exit status for it."""

    exit_code = 1

    def __init__(self, message: str, exit_code: int | None = None):
        super().__init__(message)
        if exit_code is not None:
            self.exit_code = exit_code


class ConfigError(IcefoldError, ValueError):
    """Bad input: a config key, value, ``set`` entry or file (exit status 2)."""

    exit_code = 2


class NumericalError(IcefoldError, ArithmeticError):
    """A numerical failure naming time, latitude and value (exit status 3).

    ``dataset`` is the partial file the command keeps (``complete = 0``, with ``failure``), or
    None when the job keeps none.
    """

    exit_code = 3
    dataset: xr.Dataset | None = None


class Interrupted(IcefoldError, KeyboardInterrupt):
    """A job stopped by Ctrl-C (KeyboardInterrupt) at a step boundary; ``dataset`` holds the
    partial file the command keeps when stopped (``complete = 0``), or None."""

    exit_code = 130
    dataset: xr.Dataset | None = None


class IcefoldWarning(UserWarning):
    """A likely mistake in valid input (the command line prints it as a warning)."""


def _raise(failure: _native.Failure) -> None:
    code, message, image = failure.args
    if code == 2:
        raise ConfigError(message, code) from None
    if code in (3, 130):
        err = (NumericalError if code == 3 else Interrupted)(message, code)
        err.dataset = open_bytes(image) if image is not None else None
        raise err from None
    raise IcefoldError(message, code) from None


def open_bytes(image: bytes) -> xr.Dataset:
    """An icefold file held in memory (netCDF-4/HDF5 bytes) as a loaded ``xarray.Dataset``."""
    with xr.open_dataset(io.BytesIO(image), engine="h5netcdf") as ds:
        return ds.load()


def _config_kind(config: Any) -> str:
    if isinstance(config, Mapping):
        return "dict"
    if isinstance(config, os.PathLike):
        return "path"
    if isinstance(config, str):
        # A name of an existing file, or anything that cannot be TOML text, is a path (a
        # missing file then fails as on the command line: "cannot read config file ...").
        if "\n" in config or ("=" in config and not os.path.isfile(config)):
            return "text"
        return "path"
    raise TypeError(
        f"config: give a path, TOML text or a dict, not {type(config).__name__}"
    )


def load_config(config: Any, set: Mapping[str, Any] | None = None) -> _native.Config:
    """Load and validate a config (path, TOML text or dict) with ``set`` overrides.

    Warnings about likely mistakes are issued as ``IcefoldWarning``. The result's
    ``resolved_toml`` is the configuration with every default filled in.
    """
    if isinstance(config, _native.Config):
        if set:
            raise TypeError("set: give the overrides when loading the config")
        return config
    kind = _config_kind(config)
    if kind == "dict":
        config = dict(config)
    elif kind == "path":
        config = os.fspath(config)
    try:
        cfg = _native.load(kind, config, dict(set) if set else None)
    except _native.Failure as f:
        _raise(f)
    for w in cfg.warnings:
        warnings.warn(w, IcefoldWarning, stacklevel=3)
    return cfg


def _describe(command: str, config: Any, set: Mapping[str, Any] | None, extra: dict) -> str:
    """The call as text for the file's provenance (``command_line``, ``history``)."""
    if isinstance(config, Mapping):
        what = "<dict>"
    elif isinstance(config, (str, os.PathLike)) and _config_kind(config) == "path":
        what = repr(os.fspath(config))
    else:
        what = "<TOML text>"
    args = [what]
    if set:
        args.append(f"set={dict(set)!r}")
    args += [f"{k}={v!r}" for k, v in extra.items() if v is not None]
    return f"python: icefold.{command}({', '.join(args)})"


def _job(command: str, config: Any, set: Mapping[str, Any] | None, **extra) -> xr.Dataset:
    cfg = load_config(config, set)
    line = _describe(command, config, set, extra)
    kwargs = {k: v for k, v in extra.items() if v is not None}
    # The job runs in a worker thread (it releases the GIL) so that Ctrl-C reaches this one:
    # then every running job is asked to stop at its next step boundary, as the command does
    # on SIGINT, and this raises Interrupted with the partial file.
    # (An Event, not Thread.join: a join interrupted by Ctrl-C can return early in Python 3.11.)
    result: dict = {}
    done = threading.Event()

    def work():
        try:
            result["image"] = cfg.compute(command, line, **kwargs)
        except BaseException as e:  # handed to the calling thread
            result["error"] = e
        finally:
            done.set()

    threading.Thread(target=work, name=f"icefold.{command}", daemon=True).start()
    try:
        while not done.wait(0.1):
            pass
    except KeyboardInterrupt:
        _native.request_stop(True)
        done.wait()
        _native.request_stop(False)
        if "image" in result:  # finished before it saw the request
            raise
    error = result.get("error")
    if isinstance(error, _native.Failure):
        _raise(error)
    if error is not None:
        raise error
    return open_bytes(result["image"])


def run(config: Any, set: Mapping[str, Any] | None = None) -> xr.Dataset:
    """Integrate through time (``icefold run``): the trajectory file as a Dataset."""
    return _job("run", config, set)


def equilibrium(config: Any, set: Mapping[str, Any] | None = None, start: str = "config") -> xr.Dataset:
    """Solve for a steady state and its stability (``icefold equilibrium --start START``);
    ``start``: config, warm, cold, ice-free, snowball, north-cap or south-cap."""
    return _job("equilibrium", config, set, start=start)


def sweep(config: Any, set: Mapping[str, Any] | None = None) -> xr.Dataset:
    """Two-way quasi-static sweep of the ``[sweep]`` control (``icefold sweep``)."""
    return _job("sweep", config, set)


def branches(config: Any, set: Mapping[str, Any] | None = None) -> xr.Dataset:
    """Continuation of equilibrium branches through folds (``icefold branches``)."""
    return _job("branches", config, set)


def regimes(config: Any, set: Mapping[str, Any] | None = None, threads: int | None = None) -> xr.Dataset:
    """Regime map over two controls (``icefold regimes``); ``threads`` workers (None: all cores)."""
    return _job("regimes", config, set, threads=threads)


def ensemble(
    config: Any,
    set: Mapping[str, Any] | None = None,
    threads: int | None = None,
    shard: str | None = None,
) -> xr.Dataset:
    """Ensemble of runs over sampled parameters (``icefold ensemble``); ``shard`` "K/N" runs one
    of N shards."""
    return _job("ensemble", config, set, threads=threads, shard=shard)


@dataclass(frozen=True)
class Grid:
    """The latitude grid: band centres ``lat`` and bounds ``lat_bnds`` (degrees north, as in the
    files), ``area_weight`` (fraction of the domain's area per band), ``x`` (sine of the centre
    latitudes) and ``domain`` ("hemisphere" or "globe")."""

    lat: np.ndarray
    lat_bnds: np.ndarray
    area_weight: np.ndarray
    x: np.ndarray
    domain: str

    def __len__(self) -> int:
        return len(self.lat)


class Model:
    """The model of a config as a function of the band temperatures ``T`` (K).

    ``heating(T, t=0)`` is the net heating G (W m-2) per band, ``jacobian(T, t=0)`` its
    derivative dG_i/dT_j (W m-2 K-1, dense n x n), at model time ``t`` (years); ``grid`` is the
    latitude grid, ``initial_state()`` the config's starting temperatures.
    """

    def __init__(self, config: Any, set: Mapping[str, Any] | None = None):
        cfg = load_config(config, set)
        try:
            self._model = _native.Model(cfg)
        except _native.Failure as f:
            _raise(f)
        self.config = cfg
        g = self._model.grid
        self.grid = Grid(g["lat"], g["lat_bnds"], g["area_weight"], g["x"], g["domain"])

    def __len__(self) -> int:
        return len(self._model)

    def heating(self, T, t: float = 0.0) -> np.ndarray:
        """Net heating G(t, T), W m-2, one value per band."""
        return self._model.heating(np.ascontiguousarray(T, dtype=np.float64), t)

    def jacobian(self, T, t: float = 0.0) -> np.ndarray:
        """dG_i/dT_j, W m-2 K-1, as a dense n x n array."""
        return self._model.jacobian(np.ascontiguousarray(T, dtype=np.float64), t)

    def initial_state(self) -> np.ndarray:
        """The config's initial temperatures, K."""
        return self._model.initial_state()

    def global_mean(self, T) -> float:
        """Area-weighted mean of T, K."""
        return self._model.global_mean(np.ascontiguousarray(T, dtype=np.float64))

    def ice_edges(self, T, t: float = 0.0) -> tuple[float, float | None]:
        """Ice-edge latitudes (north, south) in degrees north; south is None on a hemisphere."""
        return self._model.ice_edges(np.ascontiguousarray(T, dtype=np.float64), t)
