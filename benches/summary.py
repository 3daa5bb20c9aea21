"""Print one table of the `cargo bench` results with each figure's arithmetic lower bound.

Reads criterion's medians (target/criterion/**/new/estimates.json) and the step counts the
benches write (target/criterion/icefold-counts*.json). The bound is (floating-point operations
the scheme must do) / (the measured rate of independent multiply-adds, `peak/independent_mul_add`);
the operation counts per band-step are derived in DEVELOPERS.md ("Where the time goes").
Standard library only, so `make bench` needs no Python packages.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1] / "target" / "criterion"

# Floating-point operations per band (DEVELOPERS.md): heating G; G with its Jacobian; the
# ROS2 step arithmetic besides them (stage right-hand sides, two tridiagonal solves, update,
# scaling); the adaptive error norm; one tendency dT/dt = G yr / C; Runge-Kutta stage sums and
# error estimate per step for Dopri5 (21 stage terms + 7 error terms) and Dop853 (66 + 20).
HEAT, HEAT_JAC, ROS2_STEP, ERR_NORM = 19, 30, 22, 2
TENDENCY = HEAT + 2
ROS2 = HEAT + HEAT_JAC + ROS2_STEP
DOPRI5_COMBINE, DOP853_COMBINE = 2 * 21 + 2 * 7 + 2, 2 * 66 + 2 * 20 + 2
NEWTON_ITER = HEAT_JAC + 10 + HEAT  # G and J, factor + solve, one trial G
LINEARISATION = HEAT + HEAT_JAC + HEAT + 10 + 10  # G, J, G_p, factor, two solves


def median_ns(*parts: str) -> float | None:
    f = ROOT.joinpath(*parts, "new", "estimates.json")
    if not f.exists():
        return None
    return json.loads(f.read_text())["median"]["point_estimate"]


def counts() -> dict:
    out = {}
    for name in ("icefold-counts.json", "icefold-counts-ensemble.json"):
        f = ROOT / name
        if f.exists():
            out.update(json.loads(f.read_text()))
    return out


def main() -> int:
    c = counts()
    ind = median_ns("peak", "independent_mul_add")
    dep = median_ns("peak", "dependent_mul_add")
    if ind is None:
        print("no criterion results: run `cargo bench` first", file=sys.stderr)
        return 1
    rate = 8192.0 / ind  # flops per ns
    print(f"peak (measured): independent multiply-adds {rate:.2f} Gflop/s, "
          f"one dependent chain {8192.0 / dep:.2f} Gflop/s")
    print(f"\n{'figure':<44} {'measured':>12} {'bound':>12} {'ratio':>7}")

    def row(label, ns, flops, unit="ns", scale=1.0):
        if ns is None:
            return
        m = ns / scale
        if flops is None:
            print(f"{label:<44} {m:>9.3f} {unit:<2} {'-':>12} {'-':>7}")
            return
        b = flops / rate / scale
        print(f"{label:<44} {m:>9.3f} {unit:<2} {b:>9.3f} {unit:<2} {m / b:>6.1f}x")

    print("-- ns per band-step")
    for bands in (45, 90, 180, 360):
        steps = 1000 * bands
        for name, label in (("implicit_fixed_ice_free", "ROS2 fixed 1 d, ice free"),
                            ("implicit_fixed_ice_edge", "ROS2 fixed 1 d, ice edge")):
            ns = median_ns("band_step", name, str(bands))
            row(f"{label}, {bands} bands", ns and ns / steps, ROS2)
        k = c.get(f"adaptive_steps_{bands}")
        ns = median_ns("band_step", "implicit_adaptive_200yr", str(bands))
        if k:
            row(f"ROS2 adaptive 0.01 K, {bands} bands", ns and ns / (k * bands), ROS2 + ERR_NORM)
        for name, extra in (("dopri5", DOPRI5_COMBINE), ("dop853", DOP853_COMBINE)):
            k, ev = c.get(f"{name}_steps_{bands}"), c.get(f"{name}_evals_{bands}")
            ns = median_ns("band_step", name, str(bands))
            if k:
                flops = ev / k * TENDENCY + extra
                row(f"{name.capitalize()}, {bands} bands", ns and ns / (k * bands), flops)
    print("-- whole workloads")
    k = c.get("run_1000yr_steps")
    row("1000-year run, 90 bands", median_ns("workload", "run_1000yr_90bands"),
        k and k * 90 * (ROS2 + ERR_NORM), "ms", 1e6)
    k = c.get("newton_iterations")
    row("Newton equilibrium, 90 bands", median_ns("workload", "newton_90bands"),
        k and k * 90 * NEWTON_ITER, "us", 1e3)
    row("two-way sweep 121 x 2, settled, 90 bands", median_ns("workload", "sweep_121x2_90bands"),
        None, "ms", 1e6)
    k = c.get("continuation_linearisations")
    row("continuation curve, 90 bands", median_ns("workload", "continuation_90bands"),
        k and k * 90 * LINEARISATION, "ms", 1e6)
    k = c.get("member_steps")
    for threads in (1, 2):
        ns = median_ns("ensemble_1000x200_45bands", "members", str(threads))
        row(f"ensemble 1000 x 200 yr, 45 bands, {threads} thread(s)", ns,
            k and 1000 * k * 45 * (ROS2 + ERR_NORM) / threads, "ms", 1e6)
    print("\nbound = counted flops / measured independent multiply-add rate "
          "(DEVELOPERS.md, 'Where the time goes'); sweep: mixed work, no single count.")
    if c.get("continuation_points"):
        print(f"continuation: {int(c['continuation_points'])} points, "
              f"{int(c['continuation_linearisations'])} linearisations")
    return 0


if __name__ == "__main__":
    sys.exit(main())
