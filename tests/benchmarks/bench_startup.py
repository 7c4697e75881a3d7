"""Benchmark: start-up of ``deviation evaluate`` on a demo case against the bare scientific stack.

Issue 16 asks that ``deviation evaluate`` on a demo case stay within 2x the start-up of
``python -c "import numpy, scipy.fft, pydantic"``. Each command is run N times in a fresh
interpreter (wall clock, median of N after one untimed warm-up run; the commands are interleaved
so a change in the machine's load touches them alike), then ``python -X importtime`` of the
evaluate command lists the imports that cost most (cumulative, in a fresh interpreter).

Run: ``python tests/benchmarks/bench_startup.py [--runs 5] [--case demo_cases/...toml]``, or
``python -m pytest tests/benchmarks/bench_startup.py -m benchmark -s``.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import statistics
import subprocess
import sys
import time
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
CASE = REPO / "demo_cases" / "chili_temperature_drop.toml"
TARGET_RATIO = 2.0


def _deviation_cmd() -> list[str]:
    """The installed console script beside this interpreter (not a pyenv shim), else ``-m``."""
    script = Path(sys.executable).parent / "deviation"
    return [str(script)] if script.is_file() else [sys.executable, "-m", "deviation.cli"]


def commands(case: Path) -> dict[str, list[str]]:
    dev = _deviation_cmd()
    return {
        "python -c 'import numpy, scipy.fft, pydantic'": [sys.executable, "-c", "import numpy, scipy.fft, pydantic"],
        "deviation --version": [*dev, "--version"],
        "deviation evaluate CASE": [*dev, "evaluate", str(case)],
        "deviation evaluate CASE --json": [*dev, "evaluate", str(case), "--json"],
    }


def _env() -> dict:
    env = dict(os.environ)
    env.pop("PYTHONPROFILEIMPORTTIME", None)
    env["COLUMNS"] = "100"
    return env


def _run(cmd: list[str]) -> tuple[float, float]:
    """(wall clock, CPU time user + system) of one run [s]."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    subprocess.run(cmd, check=True, capture_output=True, env=_env(), cwd=REPO)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return wall, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def time_commands(cmds: dict[str, list[str]], runs: int) -> dict[str, dict[str, list[float]]]:
    """Wall-clock and CPU seconds of each command, ``runs`` times each, interleaved."""
    times: dict[str, dict[str, list[float]]] = {name: {"wall": [], "cpu": []} for name in cmds}
    for cmd in cmds.values():  # warm-up: file cache, .pyc files
        _run(cmd)
    for _ in range(runs):
        for name, cmd in cmds.items():
            wall, cpu = _run(cmd)
            times[name]["wall"].append(wall)
            times[name]["cpu"].append(cpu)
    return times


def import_profile(case: Path, top: int = 15) -> list[tuple[float, float, str]]:
    """(cumulative ms, self ms, module) of the costliest imports of ``deviation evaluate``."""
    code = ("import sys; from deviation.cli import main; "
            f"sys.exit(main(['evaluate', {str(case)!r}, '--json']))")
    proc = subprocess.run([sys.executable, "-X", "importtime", "-c", code], capture_output=True, text=True,
                          env=_env(), cwd=REPO)
    rows = []
    for line in proc.stderr.splitlines():  # "import time: self [us] | cumulative | module"
        fields = line.removeprefix("import time:").split("|")
        if not line.startswith("import time:") or len(fields) != 3:
            continue
        try:
            self_us, cum_us = float(fields[0]), float(fields[1])
        except ValueError:  # the header line
            continue
        rows.append((cum_us / 1e3, self_us / 1e3, fields[2].rstrip()))
    rows.sort(reverse=True)
    return rows[:top]


def report(runs: int = 5, case: Path = CASE) -> dict:
    cmds = commands(case)
    times = time_commands(cmds, runs)
    base_name = next(iter(cmds))
    med = {name: {k: statistics.median(v) for k, v in t.items()} for name, t in times.items()}
    base = med[base_name]
    print(f"start-up, median of {runs} runs after one warm-up run, case {case.name}; wall clock (CPU "
          "time user+system, less sensitive to the machine's load):")
    for name, m in med.items():
        print(f"  {name:<48} {m['wall']:6.3f} s ({m['cpu']:5.3f} s CPU)  "
              f"{m['wall'] / base['wall']:5.2f}x ({m['cpu'] / base['cpu']:4.2f}x CPU) the bare stack")
    ratio = med["deviation evaluate CASE"]["wall"] / base["wall"]
    ratio_cpu = med["deviation evaluate CASE"]["cpu"] / base["cpu"]
    verdict = "within" if ratio <= TARGET_RATIO else "ABOVE"
    print(f"ratio deviation evaluate / bare stack: {ratio:.2f} wall, {ratio_cpu:.2f} CPU "
          f"({verdict} the {TARGET_RATIO:g}x target)")
    print("costliest imports of `deviation evaluate --json` (python -X importtime, cumulative / self):")
    for cum, self_ms, name in import_profile(case):
        print(f"  {cum:8.1f} ms {self_ms:8.1f} ms  {name}")
    return {"medians_s": med, "ratio": ratio, "ratio_cpu": ratio_cpu}


# What `deviation evaluate --json` must not load: other commands' modules and the libraries only
# they need (checked in the default test run, not only as a benchmark).
NOT_FOR_EVALUATE = ("deviation.cli.fit", "deviation.cli.records", "deviation.cli.watch", "deviation.cli.report",
                    "deviation.cli.tui", "deviation.cli.process", "deviation.cli.review", "deviation.records",
                    "deviation.tui", "deviation.report", "deviation.live", "deviation.physics.calibration",
                    "textual", "sqlalchemy", "matplotlib", "weasyprint", "jinja2", "rich", "multiprocessing")


def test_evaluate_loads_only_what_it_needs():
    code = ("import contextlib, io, json, sys; from deviation.cli import main\n"
            "with contextlib.redirect_stdout(io.StringIO()):\n"
            f"    code = main(['evaluate', {str(CASE)!r}, '--json'])\n"
            "print(json.dumps([code, sorted(sys.modules)]))")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=_env(), cwd=REPO,
                          check=True)
    code, modules = json.loads(proc.stdout)
    assert code == 0
    loaded = [m for m in NOT_FOR_EVALUATE if any(x == m or x.startswith(m + ".") for x in modules)]
    assert not loaded, f"deviation evaluate --json loads {loaded}"


@pytest.mark.benchmark
def test_startup_ratio(capsys):
    with capsys.disabled():
        out = report(runs=5)
    assert out["ratio"] > 0


if __name__ == "__main__":
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=5)
    ap.add_argument("--case", type=Path, default=CASE)
    a = ap.parse_args()
    report(a.runs, a.case)
