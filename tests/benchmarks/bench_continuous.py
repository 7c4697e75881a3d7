"""Benchmark: a shift of a continuous retort, every entry's F, against a per-entry brute force.

A reel-and-spiral cooker (21 CFR 113.40(d)) and a hydrostatic tower (113.40(f)), each with 8 h of
production, one container position per second of entry (60 containers/min) and a 1-s shell
record. Events on the reel: a slow reel (0.8) for 20 min, a 10-min reel stop with the shell
falling to 117 °C during it, a 6-min drop to 119.5 °C with the reel running. On the tower: a
6-min conveyor stop and a 5-min dome drop to 119 °C. ``continuous_entries`` (one kernel spectrum
for every entry, the nominal passages sharing one F) is timed against the brute force a
container at a time (walk the conveyor to its exit, build its own retort history, ``superpose``,
``general_method``), timed on evenly spread entries and extrapolated to all of them. Also timed:
the worst case where every entry needs its own history (the shell 0.1 °C under the filed
temperature all shift long).

Run: ``python tests/benchmarks/bench_continuous.py`` or
``python -m pytest tests/benchmarks/bench_continuous.py -m benchmark -s``.
"""

from __future__ import annotations

import math
import os
import statistics
import sys
import time
from functools import partial

import numpy as np
import pytest

from deviation.physics.continuous import continuous_entries
from deviation.physics.heating import (
    cylinder_centre_unaccomplished,
    diffusivity_from_fh_cylinder,
    superpose,
)
from deviation.physics.lethality import general_method

DT_MIN = 1.0 / 60.0  # 1-s record
SHIFT_MIN = 480.0
RUNS = 5
BRUTE_SAMPLES = 120


def kernel(fh_min, radius_m, height_m):
    alpha = diffusivity_from_fh_cylinder(fh_min, radius_m, height_m)
    return partial(cylinder_centre_unaccomplished, diffusivity_m2_s=alpha, radius_m=radius_m,
                   height_m=height_m)


def reel_and_spiral(offset_C=0.0):
    """20 min at 125 °C; 303 x 406 can, agitated heating as a conduction fh of 10 min."""
    end = 20.0 + SHIFT_MIN + 20.0 / 0.8 + 10.0 + 15.0
    time_min = np.arange(round(end / DT_MIN) + 1) * DT_MIN
    shell = np.interp(time_min, [0, 204, 205, 208, 209, 320, 321, 326, 327, end],
                      [125, 125, 117, 117, 125, 125, 119.5, 119.5, 125, 125]) + offset_C
    case = {
        "residence_min": 20.0, "containers_per_min": 60.0, "entry_start_min": 20.0,
        "entry_end_min": 20.0 + SHIFT_MIN, "unaccomplished": kernel(10.0, 0.0405, 0.111),
        "initial_C": 70.0, "cooling_C": 30.0, "cooling_min": 10.0, "process_temperature_C": 125.0,
        "speed_change_min": [0.0, 100.0, 120.0, 200.0, 210.0],
        "speed_fraction": [1.0, 0.8, 1.0, 0.0, 1.0],
    }
    return "reel-and-spiral, 20 min at 125 °C", time_min, shell, case


def hydrostatic(offset_C=0.0):
    """50 min in the dome at 121.5 °C; 307 x 409 can, conduction, fh = 30 min."""
    end = 50.0 + SHIFT_MIN + 50.0 + 6.0 + 25.0
    time_min = np.arange(round(end / DT_MIN) + 1) * DT_MIN
    shell = np.interp(time_min, [0, 250, 251, 255, 256, end],
                      [121.5, 121.5, 119, 119, 121.5, 121.5]) + offset_C
    case = {
        "residence_min": 50.0, "containers_per_min": 60.0, "entry_start_min": 50.0,
        "entry_end_min": 50.0 + SHIFT_MIN, "unaccomplished": kernel(30.0, 0.0435, 0.116),
        "initial_C": 60.0, "cooling_C": 25.0, "cooling_min": 20.0, "process_temperature_C": 121.5,
        "speed_change_min": [0.0, 150.0, 156.0], "speed_fraction": [1.0, 0.0, 1.0],
    }
    return "hydrostatic, 50 min at 121.5 °C", time_min, shell, case


def brute_force_F(entry_min, time_min, shell, case):
    """One container: walk to its exit, its own history, superpose, general_method."""
    change, fraction = case["speed_change_min"], case["speed_fraction"]
    left, now = case["residence_min"], entry_min
    seg = max(i for i, c in enumerate(change) if c <= entry_min)
    while True:
        end = change[seg + 1] if seg + 1 < len(change) else math.inf
        if fraction[seg] > 0.0 and left <= fraction[seg] * (end - now):
            exit_min = now + left / fraction[seg]
            break
        left -= fraction[seg] * (end - now)
        now, seg = end, seg + 1
    in_shell = math.floor((exit_min - entry_min) / DT_MIN + 1e-9)
    tau = np.arange(in_shell + math.ceil(case["cooling_min"] / DT_MIN - 1e-9) + 1) * DT_MIN
    history = np.interp(entry_min + tau, time_min, shell)
    history[in_shell:] = case["cooling_C"]
    cold = superpose(tau, history, case["initial_C"], case["unaccomplished"])
    return general_method(tau, cold, 121.1, 10.0)[0]


def run_one(build, runs=RUNS, brute_samples=BRUTE_SAMPLES):
    name, time_min, shell, case = build()
    start = time.perf_counter()
    result = continuous_entries(time_min, shell, **case)
    first_s = time.perf_counter() - start
    times = []
    for _ in range(runs):
        start = time.perf_counter()
        continuous_entries(time_min, shell, **case)
        times.append(time.perf_counter() - start)
    engine_s = statistics.median(times)
    rows = np.unique(np.linspace(0, result.rows - 1, brute_samples).astype(int))
    start = time.perf_counter()
    brute = np.array([brute_force_F(result.entry_min[i], time_min, shell, case) for i in rows])
    per_entry_s = (time.perf_counter() - start) / rows.size
    over = float(np.max(result.F_min[rows] / brute - 1.0))
    gap = float(np.max(1.0 - result.F_min[rows] / brute))
    # worst case: every entry on its own history
    _, time_w, shell_w, case_w = build(offset_C=-0.1)
    start = time.perf_counter()
    worst = continuous_entries(time_w, shell_w, **case_w)
    worst_s = time.perf_counter() - start
    return {
        "name": name, "rows": result.rows, "computed": result.rows_computed,
        "containers": int(result.containers.sum()), "record_samples": time_min.size,
        "first_s": first_s, "engine_s": engine_s, "entries_per_s": result.rows / engine_s,
        "brute_per_entry_ms": 1e3 * per_entry_s,
        "brute_estimate_s": per_entry_s * result.rows,
        "ratio": per_entry_s * result.rows / engine_s,
        "brute_checked": rows.size, "max_over_brute": over, "max_under_brute": gap,
        "worst_rows": worst.rows_computed, "worst_s": worst_s,
        "min_F_min": float(result.F_min.min()), "nominal_F_min": result.nominal_F_min,
    }


def run():
    return [run_one(reel_and_spiral), run_one(hydrostatic)]


def print_table(results):
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"{os.cpu_count()} CPUs, load average {load:.1f} while measuring")
    for r in results:
        print(f"{r['name']}: {r['rows']} entries over 8 h (one position per second, "
              f"{r['containers']} containers), {r['record_samples']} record samples at 1 s")
        print(f"  engine: median {r['engine_s']:.3f} s ({r['entries_per_s']:,.0f} entries/s; "
              f"first call {r['first_s']:.3f} s); {r['computed']} entries on their own "
              f"history, the rest on a shell at the floor (one F0 per residence; nominal "
              f"{r['nominal_F_min']:.3f} min); lowest F0 {r['min_F_min']:.3f} min")
        print(f"  brute force, one entry at a time: {r['brute_per_entry_ms']:.2f} ms/entry "
              f"({r['brute_checked']} timed), about {r['brute_estimate_s']:.0f} s for the shift: "
              f"ratio {r['ratio']:.0f}x")
        print(f"  against the brute force: engine at most {r['max_over_brute']:+.1e} above "
              f"(rounding), at most {100 * r['max_under_brute']:.3f} % below (its slot bound)")
        print(f"  worst case, every entry on its own history ({r['worst_rows']}): "
              f"{r['worst_s']:.3f} s")


@pytest.mark.benchmark
def test_benchmark_continuous_shift():
    results = run()
    print_table(results)
    for r in results:
        assert r["engine_s"] <= 2.0
        assert r["max_over_brute"] <= 1e-12
        assert r["max_under_brute"] < 0.01
        assert r["ratio"] >= 20.0


if __name__ == "__main__":
    print_table(run())
    sys.exit(0)
