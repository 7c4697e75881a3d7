"""Benchmark: whole evaluations of a 2-hour record sampled every second, and Monte Carlo.

Run: ``python tests/benchmarks/bench_evaluate.py`` (or ``python -m pytest
tests/benchmarks/bench_evaluate.py -m benchmark -s``). Prints measured medians; the numerical-core
comparison against scipy's solve_ivp is in ``bench_core.py``.
"""

from __future__ import annotations

import statistics
import sys
import time
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from deviation.inputs.case import load_case  # noqa: E402
from deviation.evaluate import evaluate_case  # noqa: E402


def two_hour_case():
    """The chili demo process with a synthetic 2-h, 1-s record (7,201 rows) and an 6-min drop."""
    loaded = load_case(ROOT / "demo_cases" / "chili_temperature_drop.toml")
    t = np.arange(0.0, 120.0 + 1e-9, 1.0 / 60.0)
    T = np.interp(t, [0, 10, 40, 41, 46, 47, 82, 83, 120], [28, 121.5, 121.5, 117, 117, 121.5, 121.5, 40, 25])
    text = "time_min,temperature_C\n" + "\n".join(f"{a:.5f},{b:.3f}" for a, b in zip(t, T))
    return replace(loaded, retort_log_text=text, retort_log_source="two-hour.csv")


def median_ms(fn, runs):
    times = []
    for _ in range(runs):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return 1000 * statistics.median(times)


def measure() -> dict[str, float]:
    loaded = two_hour_case()
    evaluate_case(loaded)  # parse and cache the record, warm the caches
    out = {
        "evaluate, what-if off [ms]": median_ms(lambda: evaluate_case(loaded, what_if=False), 21),
        "evaluate, with what-if and reprocess [ms]": median_ms(lambda: evaluate_case(loaded), 21),
        "Monte Carlo, 1,000 samples [ms]": median_ms(lambda: evaluate_case(loaded, what_if=False,
                                                                           uncertainty=True), 5),
    }
    from deviation.evaluate import pipeline as E
    E._parse_cached.cache_clear()
    out["first evaluation incl. CSV parse [ms]"] = median_ms(
        lambda: (E._parse_cached.cache_clear(), evaluate_case(loaded, what_if=False)), 5)
    return out


@pytest.mark.benchmark
def test_benchmark_evaluation():
    figures = measure()
    for k, v in figures.items():
        print(f"{k:45s} {v:8.1f}")
    assert figures["evaluate, what-if off [ms]"] < 20.0 * 3  # generous: shared CI machine
    assert figures["Monte Carlo, 1,000 samples [ms]"] < 2000.0


if __name__ == "__main__":
    for key, value in measure().items():
        print(f"{key:45s} {value:8.1f}")
