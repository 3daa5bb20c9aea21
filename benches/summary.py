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

# Floating-point operations per row of each counted kernel (src/tally.rs; DEVELOPERS.md).
KERNEL_FLOPS = {
    "heating": HEAT,
    "heating_jacobian": HEAT_JAC,
    "jacobian": 14,
    "factor_row": 10,
    "solve_row": 5,
    "ros2_row": ROS2_STEP - 2 * 5,
    "sturm_row": 3,
    "ratio_row": 9,
}
# Each solve row is two fused multiply-adds on a dependency chain (one per sweep); the twisted
# solve runs two chains side by side, so a row costs at least one chain link's latency.
SOLVE_LINKS_PER_ROW = 1.0


def median_ns(*parts: str) -> float | None:
    f = ROOT.joinpath(*parts, "new", "estimates.json")
    if not f.exists():
        return None
    return json.loads(f.read_text())["median"]["point_estimate"]


def counts() -> dict:
    out = {}
    for name in ("icefold-counts.json", "icefold-counts-ensemble.json",
                 "icefold-counts-workloads.json"):
        f = ROOT / name
        if f.exists():
            out.update(json.loads(f.read_text()))
    return out


def tallied(c: dict, key: str):
    """Counted flops and solve rows of a workload (None when not counted)."""
    rows = {k.split(".", 1)[1]: v for k, v in c.items() if k.startswith(key + ".")}
    if not rows:
        return None
    flops = sum(KERNEL_FLOPS[k] * v for k, v in rows.items())
    return flops, rows.get("solve_row", 0.0)


def main() -> int:
    c = counts()
    ind = median_ns("peak", "independent_mul_add")
    dep = median_ns("peak", "dependent_mul_add")
    ind_w = median_ns("peak", "independent_fma_wide")
    dep_w = median_ns("peak", "dependent_fma_wide")
    if ind is None:
        print("no criterion results: run `cargo bench` first", file=sys.stderr)
        return 1
    # The bound uses the best rate the machine reaches (a lower bound on time): the AVX2+FMA
    # kernels where the CPU has them (the implicit step runs that copy), else the baseline.
    rate = 8192.0 / min(ind, ind_w or ind)  # flops per ns
    link = min(dep, dep_w or dep) / 4096.0  # ns per dependent multiply-add
    print(f"peak (measured): independent multiply-adds {8192.0 / ind:.2f} Gflop/s baseline"
          + (f", {8192.0 / ind_w:.2f} Gflop/s AVX2+FMA" if ind_w else "")
          + f"; one dependent chain {link:.3f} ns per link")
    print(f"\n{'figure':<62} {'measured':>12} {'bound':>12} {'ratio':>7}")

    def row(label, ns, flops, unit="ns", scale=1.0, chain_links=0.0):
        if ns is None:
            return
        m = ns / scale
        if flops is None:
            print(f"{label:<62} {m:>9.3f} {unit:<2} {'-':>12} {'-':>7}")
            return
        # The larger of the arithmetic bound and the dependency-chain bound.
        b = max(flops / rate, chain_links * link) / scale
        print(f"{label:<62} {m:>9.3f} {unit:<2} {b:>9.3f} {unit:<2} {m / b:>6.1f}x")

    # Per ROS2 band-step: two solves, SOLVE_LINKS_PER_ROW links each.
    ros2_links = 2 * SOLVE_LINKS_PER_ROW
    print("-- ns per band-step")
    for bands in (45, 90, 180, 360):
        steps = 1000 * bands
        for name, label in (("implicit_fixed_ice_free", "ROS2 fixed 1 d, ice free"),
                            ("implicit_fixed_ice_edge", "ROS2 fixed 1 d, ice edge")):
            ns = median_ns("band_step", name, str(bands))
            row(f"{label}, {bands} bands", ns and ns / steps, ROS2, chain_links=ros2_links)
        k = c.get(f"adaptive_steps_{bands}")
        ns = median_ns("band_step", "implicit_adaptive_200yr", str(bands))
        if k:
            row(f"ROS2 adaptive 0.01 K, {bands} bands", ns and ns / (k * bands), ROS2 + ERR_NORM,
                chain_links=ros2_links)
        for name, extra in (("dopri5", DOPRI5_COMBINE), ("dop853", DOP853_COMBINE)):
            k, ev = c.get(f"{name}_steps_{bands}"), c.get(f"{name}_evals_{bands}")
            ns = median_ns("band_step", name, str(bands))
            if k:
                flops = ev / k * TENDENCY + extra
                row(f"{name.capitalize()}, {bands} bands", ns and ns / (k * bands), flops)
    print("-- whole workloads (bounds from the counted kernel rows, src/tally.rs)")

    def workload(label, bench, key, unit, scale, threads=1):
        t = tallied(c, key)
        flops, links = (t[0] / threads, t[1] * SOLVE_LINKS_PER_ROW / threads) if t else (None, 0.0)
        row(label, median_ns(*bench), flops, unit, scale, links)

    workload("1000-year run, 90 bands", ("workload", "run_1000yr_90bands"), "run_1000yr", "ms", 1e6)
    workload("Newton equilibrium, 90 bands", ("workload", "newton_90bands"), "newton", "us", 1e3)
    workload("two-way sweep 121 x 2, settled, 90 bands", ("workload", "sweep_121x2_90bands"),
             "sweep", "ms", 1e6)
    workload("continuation curve, 90 bands", ("workload", "continuation_90bands"),
             "continuation", "ms", 1e6)
    for threads in (1, 2):
        workload(f"regime map 21 x 141, {threads} thread(s)",
                 ("workload", "regimes_21x141", str(threads)), "regimes", "ms", 1e6, threads)
    for threads in (1, 2):
        workload(f"ensemble 1000 x 200 yr, 45 bands, {threads} thread(s)",
                 ("ensemble_1000x200_45bands", "members", str(threads)), "ensemble", "ms", 1e6,
                 threads)
    # benches/workloads.rs: one run each, as a whole process (file included) and as the job in
    # process; the bound is the job's counted kernel rows over the threads it ran on.
    big = (("regimes_201x201_90", "regime map 201 x 201, 90 bands"),
           ("ensemble_100000x200_45", "ensemble 100,000 x 200 yr, 45 bands"),
           ("seasonal_30yr_globe_90", "seasonal 30-year globe, 90 bands"),
           ("forced_1000yr_csv_90", "forced 1000-year run from CSV, 90 bands"))
    if any(f"{k}_process_s" in c for k, _ in big):
        print("-- the workloads that take minutes (benches/workloads.rs, one run each)")
    for key, label in big:
        if f"{key}_process_s" not in c:
            continue
        threads = c.get(f"{key}_threads", 1)
        if c.get(f"{key}_small"):
            label += " (small scale)"
        t = tallied(c, key)
        flops, links = (t[0] / threads, t[1] * SOLVE_LINKS_PER_ROW / threads) if t else (None, 0.0)
        unit, scale = ("s", 1e9) if c[f"{key}_process_s"] >= 1.0 else ("ms", 1e6)
        row(f"{label}, whole process", c[f"{key}_process_s"] * 1e9, flops, unit, scale, links)
        row(f"{label}, job in process", c[f"{key}_job_s"] * 1e9, flops, unit, scale, links)
    print("\nbound = the larger of (counted flops / best measured multiply-add rate) and (solve "
          "rows x one dependent multiply-add); DEVELOPERS.md, 'Performance'.")
    if c.get("continuation_points"):
        print(f"continuation: {int(c['continuation_points'])} points, "
              f"{int(c['continuation_linearisations'])} linearisations")
    return 0


if __name__ == "__main__":
    sys.exit(main())
