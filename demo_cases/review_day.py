"""Write a day of production at Osterby Hollow Cannery (an invented plant) for ``deviation review``.

Invented data for the demo only. Six retorts (R1-R6) run the plant's three filed processes one
after another; each cycle gets a recorder file (ISO ``time`` column, as a recorder writes it)
and a line in the day's production schedule (``schedule.csv``). One retort (R4, its second
cycle) lost steam for several minutes in the hold and nobody entered it: ``deviation review``
must find it. Run from the project root (deterministic: the same files every time)::

    python demo_cases/review_day.py                       # demo_cases/review_day/, 0.5-min readings
    python demo_cases/review_day.py OUT --cycles 1000 --step-s 1   # a large day for the benchmark

``write_day`` is also what the tests and ``tests/benchmarks/bench_review.py`` call.
"""

from __future__ import annotations

import argparse
import importlib.util
import tomllib
from datetime import datetime, timedelta
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
PLANT = "Osterby Hollow Cannery"
RETORTS = ("R1", "R2", "R3", "R4", "R5", "R6")
# (process file, lot prefix, lot size, initial temperature [°C], start of the come-up [°C])
PRODUCTS = (
    ("OH-CHL-87x115", "CHL", 4800, 50.0, 28.0),
    ("OH-PEA-74x113", "PEA", 9600, 60.0, 28.0),
    ("OH-STW-TRAY", "STW", 2400, 52.0, 30.0),
)
# The steam loss nobody entered: on R4's second cycle, 4 min into the hold, 6 min long, the retort
# 3.5 °C below the process temperature at its lowest.
UNENTERED_DROP = {"retort": "R4", "cycle": 1, "into_hold_min": 4.0, "minutes": 6.0, "below_C": 3.5}


def _generate_module():
    spec = importlib.util.spec_from_file_location("_demo_generate", HERE / "generate.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _process(pid: str) -> dict:
    return tomllib.loads((HERE / "processes" / f"{pid}.toml").read_text(encoding="utf-8"))["process"]


def write_day(out: str | Path, *, cycles: int = 18, step_s: float = 30.0, date: str = "2026-12-01",
              processes_ref: str | None = None, drop: dict | None = UNENTERED_DROP,
              products: tuple[str, ...] | None = None, seed: int = 2026) -> Path:
    """Write ``cycles`` recorder files and ``schedule.csv`` into ``out``; returns the schedule's path.

    Parameters
    ----------
    out : folder to write (created)
    cycles : number of retort cycles in the day, spread over the six retorts
    step_s : recorder interval [s]
    date : the production day (ISO date)
    processes_ref : how the schedule names the filed process: ``None`` writes a path to the
        process TOML file in ``demo_cases/processes/`` (relative to ``out`` when it can be),
        ``"library"`` writes the library id (``OH-CHL-87x115``) for a store where they are filed
    drop : the unentered steam loss (retort, its cycle number on that retort from 0, its start
        [min into the hold], length [min], how far below the process temperature [°C]); ``None``
        for a day with no deviation
    products : the filed processes the retorts run, in turn (default: all three; a day of
        ``("OH-CHL-87x115",)`` is one of cycles of about 2 h)
    seed : random seed of the recorder noise
    """
    gen = _generate_module()
    out = Path(out)
    (out / "recorders").mkdir(parents=True, exist_ok=True)
    day0 = datetime.fromisoformat(date).replace(hour=5, minute=30)
    menu = [row for row in PRODUCTS if products is None or row[0] in products]
    if not menu:
        raise ValueError(f"no demo process among {products!r}; known: {[row[0] for row in PRODUCTS]}")
    tables = {pid: _process(pid) for pid, *_ in menu}
    rows = ["# Production schedule, Osterby Hollow Cannery (invented demo data)",
            "lot,retort,process,recorder_file,steam_on,initial_temperature_C,lot_size,plant,product"]
    next_start = {r: day0 + timedelta(minutes=7 * i) for i, r in enumerate(RETORTS)}
    for k in range(cycles):
        retort = RETORTS[k % len(RETORTS)]
        n_on_retort = k // len(RETORTS)
        pid, prefix, size, it, start_C = menu[(k + n_on_retort) % len(menu)]
        p = tables[pid]
        drops = ()
        if drop and retort == drop["retort"] and n_on_retort == drop["cycle"]:
            start = p["come_up_time_min"] + drop["into_hold_min"]
            drops = ((start, start + drop["minutes"], p["process_temperature_C"] - drop["below_C"]),)
        t, T = gen.retort_trace(p, step_min=step_s / 60.0, start_C=start_C, drops=drops,
                                seed=seed + k)
        steam_on = next_start[retort]
        stamp = steam_on.strftime("%y%m%d")
        lot = f"{prefix}-{stamp}-{retort}{n_on_retort + 1:03d}"
        name = f"{retort}-{steam_on:%Y%m%d-%H%M}.csv"
        times = [steam_on + timedelta(seconds=float(s)) for s in np.round(t * 60.0, 3)]
        lines = [f"# Invented demo record ({PLANT}), retort {retort}", "time,temperature_C"]
        lines += [f"{when.isoformat(timespec='seconds')},{temp:.2f}" for when, temp in zip(times, T)]
        (out / "recorders" / name).write_text("\n".join(lines) + "\n", encoding="utf-8")
        if processes_ref == "library":
            ref = pid
        else:
            target = HERE / "processes" / f"{pid}.toml"
            try:
                ref = Path(_relpath(target, out)).as_posix()
            except ValueError:
                ref = str(target)
        product = p["product"].replace(",", "")
        rows.append(f"{lot},{retort},{ref},recorders/{name},{steam_on:%Y-%m-%dT%H:%M},{it + (k % 3):.1f},"
                    f"{size},{PLANT},{product}")
        next_start[retort] = steam_on + timedelta(minutes=float(t[-1]) + 15.0)
    schedule = out / "schedule.csv"
    schedule.write_text("\n".join(rows) + "\n", encoding="utf-8")
    return schedule


def _relpath(target: Path, start: Path) -> str:
    import os

    return os.path.relpath(target.resolve(), start.resolve())


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("out", nargs="?", default=str(HERE / "review_day"))
    ap.add_argument("--cycles", type=int, default=18)
    ap.add_argument("--step-s", type=float, default=30.0)
    ap.add_argument("--library", action="store_true", help="name filed processes by library id")
    ap.add_argument("--product", action="append", default=None, metavar="PROCESS_ID",
                    help="run only this filed process (repeatable; default: all three)")
    args = ap.parse_args()
    print(write_day(args.out, cycles=args.cycles, step_s=args.step_s,
                    processes_ref="library" if args.library else None,
                    products=tuple(args.product) if args.product else None))


if __name__ == "__main__":
    main()
