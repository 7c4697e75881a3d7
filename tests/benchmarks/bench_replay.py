"""Benchmark: ``deviation replay --all`` throughput [records/s] on N stored records.

The store is filled quickly and honestly: each demo case is loaded and evaluated once, then N
records cycling through those cases are written as a bundle (real hash chains: ``entered`` with
the full snapshot, ``evaluated`` as the store writes it: compact, the figures and a digest of the
arrays, where the store has compact events) and imported in one transaction; the import checks
every event against the rules of its kind and links it under the store's key.
The timed part is the real command, ``python -m deviation.cli replay --all --json`` (a process
pool over all cores), so the figure includes reading every snapshot back from SQLite.

Run: ``python tests/benchmarks/bench_replay.py [N] [--jobs J] [--db PATH]`` (N defaults to
10,000, the scale of issue 5; about 1.2 GB of SQLite), or
``python -m pytest tests/benchmarks/bench_replay.py -m benchmark -s`` (N = 200).
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(REPO))

from deviation.records.bundles import BUNDLE_FORMAT, BUNDLE_VERSION  # noqa: E402
from deviation.records.chains import (  # noqa: E402
    GENESIS_HASH,
    canonical_json,
    event_hash,
    new_record_id,
    utc_now,
)
from deviation.records.store import open_store  # noqa: E402

DEMO = REPO / "demo_cases"


def demo_evaluations() -> list[tuple[dict, dict]]:
    """(snapshot, evaluation JSON) of every demo case that evaluates on its own."""
    from deviation.inputs.case import load_case
    from deviation.errors import DeviationError
    from deviation.evaluate import evaluate_case
    from deviation.guidance import load_rule_set

    rs = load_rule_set([])
    out = []
    for path in sorted(DEMO.glob("*.toml")):
        try:
            loaded = load_case(path)
            ev = evaluate_case(loaded, conservative=False, rule_set=rs)
        except DeviationError:
            continue
        out.append((loaded.snapshot(), ev.model_dump(mode="json")))
    if not out:
        raise SystemExit("no demo case evaluates: nothing to benchmark")
    return out


def fill(db: Path, n: int) -> dict:
    """Write N evaluated records into a new store at ``db``; return timings and sizes."""
    t0 = time.perf_counter()
    cases = demo_evaluations()
    t_eval = time.perf_counter() - t0
    try:
        from deviation.records.arrays import compact_evaluation as compact
    except ImportError:  # a store of the release before compact events
        compact = None
    records = []
    for i in range(n):
        snapshot, evaluation = cases[i % len(cases)]
        rid, utc = new_record_id(), utc_now()
        header = {"id": rid, "lot": f"BENCH-{i:06d}", "retort_id": evaluation["retort_id"],
                  "process_id": evaluation["process_id"], "process_version": None, "created_utc": utc}
        evaluated = {"engine_version": evaluation["engine_version"],
                     "rule_set_sha256": evaluation["guidance"]["rule_set_sha256"],
                     "options": {"conservative": False, "what_if": True}, "snapshot_seq": 1,
                     "evaluation": evaluation}
        if compact is not None:  # as the store writes it (compact evaluated events)
            evaluated["evaluation"], digest = compact(evaluation)
            if digest is not None:
                evaluated["arrays"] = digest
        payloads = [("entered", "olga", "operator", {"record": header, "snapshot": snapshot}),
                    ("evaluated", "olga", "operator", evaluated)]
        prev, events = GENESIS_HASH, []
        for seq, (kind, actor, role, payload) in enumerate(payloads, start=1):
            h = event_hash(rid, seq, kind, utc, actor, role, canonical_json(payload), prev)
            events.append({"seq": seq, "kind": kind, "utc": utc, "actor": actor, "role": role,
                           "payload": payload, "prev_hash": prev, "hash": h})
            prev = h
        records.append({"record": header, "events": events})
    bundle = {"format": BUNDLE_FORMAT, "format_version": BUNDLE_VERSION, "records": records}
    t1 = time.perf_counter()
    store = open_store(db)
    store.import_bundle(bundle, actor="bench", role="auditor")
    store.close()
    t_fill = time.perf_counter() - t1
    return {"cases": len(cases), "evaluate_cases_s": t_eval, "fill_s": t_fill,
            "db_MB": db.stat().st_size / 1e6}


def run_replay(db: Path, jobs: int | None) -> dict:
    """Time ``deviation replay --all --json`` as a subprocess."""
    argv = [sys.executable, "-m", "deviation.cli", "replay", "--all", "--json", "--db", str(db)]
    if jobs:
        argv += ["--jobs", str(jobs)]
    env = dict(os.environ, PYTHONPATH=str(REPO))
    t0 = time.perf_counter()
    out = subprocess.run(argv, capture_output=True, text=True, env=env, cwd=REPO, check=False)
    wall = time.perf_counter() - t0
    if out.returncode != 0:
        raise RuntimeError(f"replay exited {out.returncode}: {out.stderr[-2000:]}")
    doc = json.loads(out.stdout)
    return {"records": doc["count"], "reproduced": doc["reproduced"], "jobs": doc["jobs"],
            "replay_s": doc["elapsed_s"], "throughput_records_per_s": doc["throughput_records_per_s"],
            "command_wall_s": wall}


def bench(n: int, jobs: int | None = None, db: Path | None = None) -> dict:
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(db) if db else Path(tmp) / "bench.db"
        if path.exists():
            raise SystemExit(f"{path} exists: give a new file")
        filled = fill(path, n)
        result = {"N": n, **filled, **run_replay(path, jobs), "cpu_count": os.cpu_count()}
    return result


@pytest.mark.benchmark
def test_replay_all_throughput(capsys):
    r = bench(200)
    with capsys.disabled():
        print(f"\nreplay --all: {r['records']} records, {r['throughput_records_per_s']:.1f} records/s "
              f"on {r['jobs']} processes ({r['db_MB']:.0f} MB store)")
    assert r["reproduced"] == r["records"] == 200
    assert r["throughput_records_per_s"] > 0


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("n", nargs="?", type=int, default=10_000, help="records (default 10,000)")
    ap.add_argument("--jobs", type=int, default=None, help="worker processes (default: all cores)")
    ap.add_argument("--db", type=Path, default=None, help="keep the store at this new path")
    args = ap.parse_args(argv)
    r = bench(args.n, args.jobs, args.db)
    print(json.dumps(r, indent=1))
    print(f"replay --all: {r['records']} records ({r['reproduced']} reproduced) in {r['replay_s']:.1f} s = "
          f"{r['throughput_records_per_s']:.1f} records/s on {r['jobs']} processes; store {r['db_MB']:.0f} MB "
          f"filled in {r['fill_s']:.1f} s")


if __name__ == "__main__":
    main()
