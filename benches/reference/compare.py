"""`make bench-compare`: icefold against a plain numpy/scipy implementation (numpy_model.py, and
the reference models of tests/python/icefold_ref for the forced and seasonal runs) on the same
workloads, printed as one table of wall times and ratios.

icefold is timed as a whole process (`icefold run/sweep/ensemble`, file writing included, best of
three); the numpy/scipy side is timed in-process, computation only (imports excluded, best of
three), which favours it.

Equal accuracy for the 1000-year transient: both tools are compared with one tight-tolerance
reference solution of the same discrete model (scipy Radau, rtol = atol = 1e-12); the error of a
run is the largest |T - T_ref| over every yearly output and band. Each tool runs at the loosest
tolerance of a common ladder whose error is within the target (1e-3 K), and that run is timed.

The workloads that take minutes in numpy/scipy (the 201 x 201 regime map, 100,000 members) are
timed on a part and scaled up: the numpy side runs one row of the map (a two-way sweep of its 201
values, settled at each, what a script would do to draw a map) and 200 ensemble members, times
the rows or members of the whole job (each row and member is independent work of the same
kind); icefold runs the whole job. The table says which figures are scaled.

Usage: python benches/reference/compare.py --icefold target/release/icefold [--only NAME ...]
"""

from __future__ import annotations

import argparse
import multiprocessing
import os
import re
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import h5py
import numpy as np
from scipy.stats import qmc

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parents[2] / "tests" / "python"))
import numpy_model as nm  # noqa: E402
from icefold_ref import discrete as dref  # noqa: E402
from icefold_ref import forcing as fref  # noqa: E402
from icefold_ref import seasonal as sref  # noqa: E402
from scipy.integrate import solve_ivp  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
CLASSIC = ROOT / "configs" / "classic-step-albedo.toml"
SWEEP = ROOT / "configs" / "sweep-solar.toml"
ENSEMBLE = ROOT / "configs" / "ensemble-lhs.toml"
FORCED = ROOT / "configs" / "forcing-orvane.toml"
SEASONAL = ROOT / "configs" / "seasonal-globe.toml"
REGIMES = ROOT / "configs" / "regimes-classic.toml"
TARGET_K = 1e-3
LADDER = [1e-1, 3e-2, 1e-2, 3e-3, 1e-3, 3e-4, 1e-4, 3e-5, 1e-5, 3e-6, 1e-6, 1e-7, 1e-8]


def best_of(fn, repeats=3):
    best = float("inf")
    out = None
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def icefold(binary, args):
    """Run icefold; returns its summary line (stderr)."""
    r = subprocess.run([binary, *args], check=True, stdout=subprocess.DEVNULL,
                       stderr=subprocess.PIPE, text=True)
    return r.stderr


def stepping_seconds(summary):
    """The stepping time an `icefold run` summary reports ("... X ms stepping of Y ms in all")."""
    m = re.search(r"([0-9.]+) ms stepping of", summary)
    if not m:
        raise RuntimeError(f"no stepping time in the run summary: {summary!r}")
    return float(m.group(1)) / 1e3


def transient(binary, tmp):
    model = nm.Model(n=90)
    t0 = np.full(90, nm.KELVIN + 15.0)
    _, ref, _ = nm.transient(model, t0, 1000.0, rtol=1e-12, atol=1e-12, method="Radau")
    out = os.path.join(tmp, "run.nc")

    def run_icefold(tol, *extra):
        return icefold(binary, ["run", str(CLASSIC), "-o", out, "--overwrite",
                         "--set", "initial.temperature_c=15", "--set", "initial.temperature_p2_k=0",
                         "--set", "time.years=1000", "--set", f"time.tolerance={tol}", *extra])

    def icefold_error(tol):
        run_icefold(tol)
        with h5py.File(out, "r") as f:
            return float(np.max(np.abs(f["surface_temperature"][...] - ref)))

    def scipy_error(tol):
        _, y, _ = nm.transient(model, t0, 1000.0, rtol=tol, atol=tol)
        return float(np.max(np.abs(y - ref)))

    rows = {}
    for name, err in (("icefold", icefold_error), ("numpy/scipy BDF", scipy_error)):
        for tol in LADDER:
            e = err(tol)
            if e <= TARGET_K:
                rows[name] = (tol, e)
                break
        else:
            raise RuntimeError(f"{name} never reached {TARGET_K} K")
    summaries = []
    t_ice, _ = best_of(lambda: summaries.append(run_icefold(rows["icefold"][0])))
    stepping = min(stepping_seconds(x) for x in summaries)
    # The same run writing its file without compression (output.deflate_level = 0).
    t_plain, _ = best_of(lambda: run_icefold(rows["icefold"][0], "--set", "output.deflate_level=0"))
    tol_py = rows["numpy/scipy BDF"][0]
    t_py, _ = best_of(lambda: nm.transient(model, t0, 1000.0, rtol=tol_py, atol=tol_py))
    detail = (f"icefold tolerance {rows['icefold'][0]:g} K (max error {rows['icefold'][1]:.1e} K), "
              f"BDF rtol=atol={tol_py:g} (max error {rows['numpy/scipy BDF'][1]:.1e} K); "
              f"icefold's stepping alone (from its run summary) {1e3 * stepping:.2f} ms, "
              f"{t_py / stepping:.0f}x the numpy/scipy computation; with an uncompressed file "
              f"(output.deflate_level = 0) the whole process takes {t_plain:.4f} s, "
              f"{t_py / t_plain:.1f}x")
    return t_py, t_ice, detail


def sweep(binary, tmp):
    out = os.path.join(tmp, "sweep.nc")
    t_ice, _ = best_of(lambda: icefold(binary, ["sweep", str(SWEEP), "-o", out, "--overwrite"]))
    with h5py.File(out, "r") as f:
        tip = np.asarray(f["tipping_control"][...])
    model = nm.Model(n=90)
    start = nm.KELVIN + 10.0 - 30.0 * 0.5 * (3.0 * model.xc**2 - 1.0)
    s0 = np.linspace(1200.0, 1800.0, 121)
    t_py, (up, down) = best_of(lambda: nm.sweep(model, s0, start), repeats=1)
    jumps_up = s0[1:][np.abs(np.diff(up)) > 5.0]
    jumps_down = s0[:-1][np.abs(np.diff(down)) > 5.0]
    detail = (f"tipping S0: icefold {', '.join(f'{v:.2f}' for v in np.sort(tip))} W m-2 (refined); "
              f"numpy jumps near {', '.join(f'{v:.0f}' for v in np.concatenate((jumps_down, jumps_up)))} W m-2 (5 W m-2 grid)")
    return t_py, t_ice, detail


def ensemble(binary, tmp, members=200, years=200.0):
    out = os.path.join(tmp, "ens.nc")
    args = ["ensemble", str(ENSEMBLE), "-o", out, "--overwrite", "--threads", "2",
            "--set", f"ensemble.members={members}", "--set", "ensemble.sensitivity=false",
            "--set", f"time.years={years:g}"]
    t_ice, _ = best_of(lambda: icefold(binary, args))
    # Latin hypercube in D (uniform 0.40-0.70) and B (normal 2.09 +- 0.15), as the config.
    from scipy.stats import norm
    u = qmc.LatinHypercube(d=2, seed=2024).random(members)
    d = 0.40 + 0.30 * u[:, 0]
    b = norm.ppf(u[:, 1], loc=2.09, scale=0.15)
    jobs = [(float(di), float(bi), years) for di, bi in zip(d, b)]

    def run():
        with multiprocessing.get_context("fork").Pool(2) as pool:
            return pool.map(nm.ensemble_member, jobs, chunksize=10)

    t_py, _ = best_of(run, repeats=1)
    return t_py, t_ice, f"{members} members x {years:g} years, 45 bands, 2 workers each"


def forced(binary, tmp):
    """1000 years of configs/forcing-orvane.toml (CO2 and insolation from its CSV, held after
    the last row, with the config's pieces), yearly records, 90 bands."""
    sets = {"time.years": "1000", "forcing.outside": '"hold"', "equilibrium.sensitivity": "false"}
    out = os.path.join(tmp, "forced.nc")
    args = ["run", str(FORCED), "-o", out, "--overwrite"]
    for k, v in sets.items():
        args += ["--set", f"{k}={v}"]
    t_ice, _ = best_of(lambda: icefold(binary, args))
    with h5py.File(out, "r") as f:
        ice = np.asarray(f["surface_temperature"][...])
        times = np.asarray(f["time"][...])
    cfg = dref.load_config(FORCED, sets)
    # Radau restarted at every breakpoint of the forcing, a usual researcher's tolerance.
    t_py, ref = best_of(lambda: fref.integrate(cfg, FORCED.parent, times, rtol=1e-6, atol=1e-6),
                        repeats=1)
    err = float(np.max(np.abs(ice - ref)))
    return t_py, t_ice, (f"Radau rtol=atol=1e-6 restarted at the forcing's breakpoints; "
                         f"max |T_icefold - T_scipy| {err:.1e} K")


def seasonal(binary, tmp):
    """configs/seasonal-globe.toml: 30 years, globe, 90 bands, seasonal insolation, monthly."""
    out = os.path.join(tmp, "seasonal.nc")
    t_ice, _ = best_of(lambda: icefold(binary, ["run", str(SEASONAL), "-o", out, "--overwrite"]))
    with h5py.File(out, "r") as f:
        ice = np.asarray(f["surface_temperature"][...])
        times = np.asarray(f["time"][...])
    cfg = dref.load_config(SEASONAL)
    sm = sref.SeasonalModel(cfg)
    m = sm.model
    x = m.grid.x_c
    y0 = m.t0 + m.t0_p2 * 0.5 * (3.0 * x * x - 1.0)

    def run():
        sol = solve_ivp(sm.tendency, (0.0, times[-1]), y0, method="BDF", t_eval=times,
                        rtol=1e-6, atol=1e-6, jac_sparsity=m.jac_sparsity())
        if not sol.success:
            raise RuntimeError(sol.message)
        return sol.y.T

    t_py, ref = best_of(run, repeats=1)
    err = float(np.max(np.abs(ice - ref)))
    return t_py, t_ice, f"BDF rtol=atol=1e-6; max |T_icefold - T_scipy| {err:.1e} K"


def ensemble_large(binary, tmp, members=100_000, sample=200):
    """100,000 members x 200 years at 45 bands; numpy/scipy timed on `sample` members, scaled."""
    t_py, t_ice, _ = ensemble(binary, tmp, members=sample)
    out = os.path.join(tmp, "ens-large.nc")
    args = ["ensemble", str(ENSEMBLE), "-o", out, "--overwrite", "--threads", "2",
            "--set", f"ensemble.members={members}", "--set", "ensemble.sensitivity=false"]
    t_ice, _ = best_of(lambda: icefold(binary, args), repeats=1)
    return (t_py * members / sample, t_ice,
            f"numpy/scipy SCALED from {sample} members x {members // sample}; icefold whole job, "
            f"2 threads, one run")


def regimes_large(binary, tmp, rows=201, columns=201):
    """The 201 x 201 regime map at 90 bands (S0 1100-1800 W m-2 across, D 0.30-0.80 down);
    numpy/scipy timed on one row (a two-way settled sweep at D = 0.55), scaled by the rows."""
    out = os.path.join(tmp, "regimes.nc")
    args = ["regimes", str(REGIMES), "-o", out, "--overwrite", "--threads", "2",
            "--set", "grid.bands=90", "--set", f"regimes.rows={rows}",
            "--set", f"regimes.columns={columns}"]
    t_ice, _ = best_of(lambda: icefold(binary, args), repeats=1)
    model = nm.Model(n=90, diffusivity=0.55)
    start = nm.KELVIN + 10.0 - 30.0 * 0.5 * (3.0 * model.xc**2 - 1.0)
    s0 = np.linspace(1100.0, 1800.0, columns)
    t_row, _ = best_of(lambda: nm.sweep(model, s0, start), repeats=1)
    return (t_row * rows, t_ice,
            f"numpy/scipy SCALED from one row ({t_row:.1f} s, a two-way sweep of {columns} values) "
            f"x {rows} rows; icefold whole job (continuation along each row), 2 threads, one run")


WORKLOADS = {
    "transient": ("1000-year transient, 90 bands, equal accuracy", transient),
    "sweep": ("two-way sweep, 121 values of S0 each way, settled", sweep),
    "ensemble": ("ensemble, 200 members", ensemble),
    "forced": ("forced 1000-year run from CSV, 90 bands", forced),
    "seasonal": ("seasonal 30-year globe, 90 bands", seasonal),
    "ensemble_large": ("ensemble, 100,000 members x 200 years (scaled)", ensemble_large),
    "regimes_large": ("regime map 201 x 201, 90 bands (scaled)", regimes_large),
}


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--icefold", required=True, help="path to the release binary")
    ap.add_argument("--only", nargs="*", choices=sorted(WORKLOADS),
                    help="run only these workloads (default: all)")
    a = ap.parse_args()
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        # Fixed cost of an icefold process (start, config, file set-up): a 1-year run.
        one = os.path.join(tmp, "one.nc")
        startup, _ = best_of(lambda: icefold(a.icefold, ["run", str(CLASSIC), "-o", one, "--overwrite",
                                                         "--set", "time.years=1"]))
        for key, (name, fn) in WORKLOADS.items():
            if a.only and key not in a.only:
                continue
            print(f"running: {name} ...", file=sys.stderr, flush=True)
            t_py, t_ice, detail = fn(a.icefold, tmp)
            rows.append((name, t_py, t_ice, detail))
    print(f"\n{'workload':<60} {'numpy/scipy':>12} {'icefold':>10} {'ratio':>8}")
    for name, t_py, t_ice, _ in rows:
        print(f"{name:<60} {t_py:>10.4f} s {t_ice:>8.4f} s {t_py / t_ice:>7.1f}x")
    print()
    for name, _, _, detail in rows:
        print(f"{name}: {detail}")
    print("\nicefold: whole process incl. file writing (best of 3); numpy/scipy: computation only.")
    print(f"an icefold process that runs 1 year takes {startup:.4f} s (start-up, config, file set-up).")


if __name__ == "__main__":
    main()
