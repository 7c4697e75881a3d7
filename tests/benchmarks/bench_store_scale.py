"""Benchmark: a store of years. N evaluated records (10,000 by default): bytes per evaluated
event, store size, the holds board and ``record list`` over every record, and (optionally)
``replay --all`` throughput.

The store is filled as ``bench_replay.py`` fills it (each demo case evaluated once, N records
cycling through them, written as one bundle and imported), every record then held by a
supervisor, so the holds board shows all N as open. Timed:

- ``holds``: the rows of the TUI holds board (:func:`deviation.tui.screens.holds.board_rows`,
  open records), in this process, median of 3;
- ``list``: ``deviation record list --json`` as a command (wall time, includes start-up), and
  ``Store.list_records()`` in this process, median of 3;
- ``replay``: ``deviation replay --all --json`` (with ``--replay``).

Run: ``python tests/benchmarks/bench_store_scale.py [N] [--replay] [--jobs J]``, or
``python -m pytest tests/benchmarks/bench_store_scale.py -m benchmark -s`` (N = 500).
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(REPO))
sys.path.insert(0, str(Path(__file__).resolve().parent))

import bench_replay  # noqa: E402


def _median_s(fn, repeat: int = 3) -> float:
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def hold_all(db: Path) -> float:
    """Place every record on hold (a supervisor), one transaction per record as the CLI does."""
    from deviation.records.store import open_store

    store = open_store(db)
    t0 = time.perf_counter()
    for rid in store.record_ids():
        store.place_hold(rid, reason="set aside for evaluation", actor="sam", role="supervisor")
    store.close()
    return time.perf_counter() - t0


def event_sizes(db: Path) -> dict:
    import sqlite3

    con = sqlite3.connect(db)
    try:
        rows = con.execute("SELECT kind, count(*), avg(length(payload)), max(length(payload)) "
                           "FROM events GROUP BY kind").fetchall()
    finally:
        con.close()
    return {k: {"count": n, "mean_bytes": round(avg), "max_bytes": mx} for k, n, avg, mx in rows}


def time_faces(db: Path) -> dict:
    from deviation.records.store import open_store
    from deviation.tui.screens.holds import board_rows

    store = open_store(db)
    try:
        n_holds = len(board_rows(store, open_only=True))
        holds_s = _median_s(lambda: board_rows(store, open_only=True))
        n_list = len(store.list_records())
        list_s = _median_s(store.list_records)
    finally:
        store.close()
    env = dict(os.environ, PYTHONPATH=str(REPO))
    argv = [sys.executable, "-m", "deviation.cli", "record", "list", "--json", "--db", str(db)]
    walls = []
    for _ in range(3):
        t0 = time.perf_counter()
        out = subprocess.run(argv, capture_output=True, text=True, env=env, cwd=REPO, check=False)
        walls.append(time.perf_counter() - t0)
        if out.returncode != 0:
            raise RuntimeError(out.stderr[-2000:])
    listed = json.loads(out.stdout)["count"]
    return {"holds_board_rows": n_holds, "holds_board_s": holds_s, "list_records": n_list,
            "list_records_s": list_s, "record_list_command_rows": listed,
            "record_list_command_wall_s": statistics.median(walls)}


def bench(n: int, replay: bool = False, jobs: int | None = None) -> dict:
    with tempfile.TemporaryDirectory() as tmp:
        db = Path(tmp) / "scale.db"
        filled = bench_replay.fill(db, n)
        hold_s = hold_all(db)
        out = {"N": n, **filled, "hold_all_s": hold_s, "db_MB": db.stat().st_size / 1e6,
               "events": event_sizes(db), **time_faces(db)}
        if replay:
            out["replay"] = bench_replay.run_replay(db, jobs)
    return out


@pytest.mark.benchmark
def test_store_scale(capsys):
    r = bench(500)
    with capsys.disabled():
        print("\n" + json.dumps(r, indent=1))
    assert r["holds_board_rows"] == r["list_records"] == 500


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("n", nargs="?", type=int, default=10_000)
    ap.add_argument("--replay", action="store_true", help="also time replay --all")
    ap.add_argument("--jobs", type=int, default=None)
    args = ap.parse_args(argv)
    print(json.dumps(bench(args.n, args.replay, args.jobs), indent=1))


if __name__ == "__main__":
    main()
