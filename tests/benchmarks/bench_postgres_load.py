"""Benchmark: 8 processes each entering, evaluating, holding and deciding N records at once on
PostgreSQL (issue 8: N = 500); prints throughput [records/s, events/s] and latency [ms] of one
store write (p50, p95, max), then checks that no event was lost and every chain verifies.

Needs a server on the loopback interface, given as ``DEVIATION_TEST_PG_URL`` or ``--url``
(``.ci/postgres.sh start DIR PORT`` makes a throw-away one). The store is a fresh schema of its
own in that database, dropped afterwards.

Run: ``python tests/benchmarks/bench_postgres_load.py [N] [--processes P] [--url URL]``, or
``python -m pytest tests/benchmarks/bench_postgres_load.py -m benchmark -s`` (N = 100).
"""

from __future__ import annotations

import argparse
import importlib.util
import os
import sys
import uuid
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(REPO))


def _load_module():
    spec = importlib.util.spec_from_file_location("deviation_load_test",
                                                  REPO / "tests" / "records" / "test_postgres_load.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def bench(url: str, n: int, processes: int = 8) -> dict:
    import sqlalchemy as sa

    from deviation.records.store import open_store

    load = _load_module()
    admin = sa.create_engine(url, isolation_level="AUTOCOMMIT")
    schema = f"bench_{uuid.uuid4().hex[:12]}"
    with admin.connect() as conn:
        conn.exec_driver_sql(f'CREATE SCHEMA "{schema}"')
    target = admin.url.update_query_dict({"options": f"-csearch_path={schema}"}).render_as_string(
        hide_password=False)
    try:
        open_store(target).close()
        figures = load.run_load(target, n, processes=processes, timeout_s=7200)
        store = open_store(target)
        try:
            load.check_load(store, figures)
        finally:
            store.close()
    finally:
        with admin.connect() as conn:
            conn.exec_driver_sql(f'DROP SCHEMA "{schema}" CASCADE')
        admin.dispose()
    figures.pop("results")
    return figures


def report(fig: dict, n: int) -> str:
    return (f"{fig['processes']} processes x {n} records (enter, evaluate, hold, decide): "
            f"{fig['records']} records, {fig['events']} events in {fig['wall_s']:.1f} s = "
            f"{fig['records_per_s']:.1f} records/s, {fig['events_per_s']:.1f} events/s; "
            f"store write latency p50 {fig['p50_latency_ms']:.1f} ms, p95 {fig['p95_latency_ms']:.1f} ms, "
            f"max {fig['max_latency_ms']:.1f} ms; no event lost, every chain verifies")


@pytest.mark.benchmark
def test_bench_postgres_load():
    url = os.environ.get("DEVIATION_TEST_PG_URL")
    if not url:
        pytest.skip("DEVIATION_TEST_PG_URL is not set")
    print("\n" + report(bench(url, 100), 100))


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("n", nargs="?", type=int, default=500, help="records per process (default 500)")
    ap.add_argument("--processes", type=int, default=8)
    ap.add_argument("--url", default=os.environ.get("DEVIATION_TEST_PG_URL"))
    args = ap.parse_args()
    if not args.url:
        ap.error("give --url or set DEVIATION_TEST_PG_URL")
    print(report(bench(args.url, args.n, args.processes), args.n))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
