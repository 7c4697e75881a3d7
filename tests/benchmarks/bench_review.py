"""Benchmark: ``deviation review`` of a whole day, N retort cycles of about 2 h recorded every second.

The day is made by ``demo_cases/review_day.py``: the demo plant's six retorts running the chili
process (come-up 10 min, hold 72 min, 45 min of cooling: 127 min, 7,621 readings a cycle;
``--mixed`` runs all three filed processes in turn, 74 to 127 min), recorder files with clock
times, one steam loss nobody entered. The timed part is
the real command, ``python -m deviation.cli review SCHEDULE --db STORE --json`` (a process pool
over all cores, the deviation's record opened in a fresh SQLite store), wall clock including the
interpreter's start-up; the review's own elapsed time is read from its JSON. Issue 16's target:
1,000 cycles in 20 s or less on the project's 2-core machine.

Run: ``python tests/benchmarks/bench_review.py [N] [--step-s 1] [--jobs J] [--dir FOLDER]`` (N
defaults to 1,000; ``--dir`` keeps the generated day for another run), or
``python -m pytest tests/benchmarks/bench_review.py -m benchmark -s`` (N = 100).
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import runpy
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
TARGET_S_PER_1000 = 20.0


# The demo plant's day generator (a script in demo_cases/, not a module of the package).
write_day = runpy.run_path(str(REPO / "demo_cases" / "review_day.py"))["write_day"]


def make_day(folder: Path, n: int, step_s: float, mixed: bool = False) -> Path:
    schedule = folder / "schedule.csv"
    stamp = folder / f".made-{n}-{step_s:g}{'-mixed' if mixed else ''}"
    if not stamp.exists():
        t0 = time.perf_counter()
        write_day(folder, cycles=n, step_s=step_s, products=None if mixed else ("OH-CHL-87x115",))
        stamp.write_text("")
        print(f"generated {n} recorder files at {step_s:g} s in {time.perf_counter() - t0:.1f} s")
    return schedule


def run(n: int = 1000, step_s: float = 1.0, jobs: int | None = None, folder: Path | None = None,
        mixed: bool = False) -> dict:
    with tempfile.TemporaryDirectory(prefix="deviation-review-bench-") as tmp:
        folder = Path(folder or tmp)
        folder.mkdir(parents=True, exist_ok=True)
        schedule = make_day(folder, n, step_s, mixed)
        files = len(list((folder / "recorders").glob("*.csv")))
        db = Path(tmp) / "review.db"
        cmd = [sys.executable, "-m", "deviation.cli", "review", str(schedule), "--db", str(db), "--json",
               "--actor", "bench"]
        if jobs:
            cmd += ["--jobs", str(jobs)]
        load = os.getloadavg()
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        t0 = time.perf_counter()
        proc = subprocess.run(cmd, capture_output=True, text=True, cwd=REPO, check=False,
                              env={**os.environ, "DEVIATION_ROLE": "operator"})
        wall = time.perf_counter() - t0
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
        if proc.returncode not in (0, 1):
            raise SystemExit(f"review failed ({proc.returncode}): {proc.stderr[-2000:]}")
        out = json.loads(proc.stdout)
    counts = out["counts"]
    per_1000 = wall * 1000.0 / n
    print(f"deviation review: {n} cycles ({files} recorder files, one reading every {step_s:g} s), "
          f"{out['jobs']} worker processes on {os.cpu_count()} cores")
    print(f"  wall clock, whole command: {wall:.2f} s ({n / wall:.1f} cycles/s; {per_1000:.1f} s per 1,000 "
          f"cycles, target {TARGET_S_PER_1000:g} s)")
    print(f"  the review itself: {out['elapsed_s']:.2f} s ({out['cycles_per_s']:.1f} cycles/s); CPU time of "
          f"all processes {cpu:.1f} s ({1000 * cpu / n:.1f} ms a cycle); load average before "
          f"{load[0]:.2f}")
    print(f"  found: {counts['clean']} clean, {counts['deviation']} deviation, {counts['not_reviewed']} not "
          f"reviewed; records opened {counts['records_opened']}")
    return {"wall_s": wall, "per_1000_s": per_1000, "review_s": out["elapsed_s"], "cpu_s": cpu, "counts": counts}


@pytest.mark.benchmark
def test_review_throughput(capsys):
    with capsys.disabled():
        out = run(n=100)
    assert out["counts"]["deviation"] >= 1


if __name__ == "__main__":
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("n", nargs="?", type=int, default=1000)
    ap.add_argument("--step-s", type=float, default=1.0)
    ap.add_argument("--jobs", type=int, default=None)
    ap.add_argument("--dir", type=Path, default=None)
    ap.add_argument("--mixed", action="store_true", help="all three filed processes in turn")
    a = ap.parse_args()
    run(a.n, a.step_s, a.jobs, a.dir, a.mixed)
