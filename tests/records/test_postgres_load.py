"""Load on PostgreSQL: 8 processes each entering, evaluating, holding and deciding N records at once.

Every process loads the good case, evaluates each record with the real engine and writes it
through the store (``entered`` → ``evaluated`` → ``hold-placed`` → ``disposition``: four appends
per record, each its own transaction under the store's write lock). Afterwards: no event lost
or doubled (every event a worker saw committed is stored once, by its event id), every record is
decided with its four events in order, and both hash chains verify.

N per process is ``DEVIATION_TEST_LOAD_N`` (default 30 here, to keep CI short; the issue's 500
is what ``tests/benchmarks/bench_postgres_load.py`` runs). Loopback server only.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
CASE = REPO / "tests" / "data" / "good_case.toml"
PROCESSES = 8

WORKER = r"""
import json, os, sys, time
from deviation.inputs.case import load_case
from deviation.evaluate import evaluate_snapshot
from deviation.guidance import load_rule_set
from deviation.records.store import open_store

url, worker, n, case, go, out = sys.argv[1], int(sys.argv[2]), int(sys.argv[3]), sys.argv[4], sys.argv[5], sys.argv[6]
store = open_store(url)
loaded = load_case(case)
snapshot = loaded.snapshot()
rules = load_rule_set([])
dev, proc = loaded.case.deviation, loaded.case.process
print("ready", flush=True)
deadline = time.monotonic() + 120
while not os.path.exists(go):
    if time.monotonic() > deadline:
        sys.exit("no go signal")
    time.sleep(0.002)
latencies, events, records = [], [], []
t_start = time.time()
for i in range(n):
    t = time.perf_counter()
    rid = store.create_record(snapshot, actor=f"op{worker}", role="operator", lot=f"W{worker}-{i}",
                              retort_id=dev.retort_id, process_id=proc.id)
    latencies.append(time.perf_counter() - t)
    records.append(rid)
    ev = evaluate_snapshot(snapshot, conservative=False, rule_set=rules).model_dump(mode="json")
    steps = (
        lambda: store.add_evaluation(rid, ev, actor=f"op{worker}", role="operator", snapshot_seq=1),
        lambda: store.place_hold(rid, reason="temperature drop", actor=f"sup{worker}", role="supervisor"),
        lambda: store.decide(rid, decision="reprocess", reason="F0 short", actor=f"pa{worker}",
                             role="process-authority"),
    )
    for step in steps:
        t = time.perf_counter()
        e = step()
        latencies.append(time.perf_counter() - t)
        events.append([e.record_id, e.seq, e.event_id])
t_end = time.time()
with open(out, "w", encoding="utf-8") as fh:
    json.dump({"worker": worker, "records": records, "events": events, "latencies_s": latencies,
               "t_start": t_start, "t_end": t_end}, fh)
"""


def run_load(url: str, n_per_process: int, processes: int = PROCESSES, timeout_s: float = 1800.0) -> dict:
    """Run the workers against ``url`` (an empty store) and return their results and figures."""
    env = dict(os.environ, PYTHONPATH=str(REPO) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    with tempfile.TemporaryDirectory(prefix="deviation-load.") as tmp:
        go = Path(tmp) / "go"
        outs = [Path(tmp) / f"w{w}.json" for w in range(processes)]
        procs = [subprocess.Popen([sys.executable, "-c", WORKER, url, str(w), str(n_per_process), str(CASE),
                                   str(go), str(outs[w])], env=env, cwd=REPO, text=True,
                                  stdout=subprocess.PIPE, stderr=subprocess.PIPE)
                 for w in range(processes)]
        try:
            for p in procs:  # every worker has opened the store before any starts writing
                line = p.stdout.readline()
                assert line.strip() == "ready", p.stderr.read()
            go.write_text("go")
            deadline = time.monotonic() + timeout_s
            for p in procs:
                _, err = p.communicate(timeout=max(1.0, deadline - time.monotonic()))
                assert p.returncode == 0, err
                assert "Traceback" not in err, err
        finally:
            for p in procs:
                if p.poll() is None:
                    p.kill()
                    p.wait(timeout=30)
        results = [json.loads(o.read_text(encoding="utf-8")) for o in outs]
    lat = sorted(x for r in results for x in r["latencies_s"])
    wall = max(r["t_end"] for r in results) - min(r["t_start"] for r in results)
    n_records = sum(len(r["records"]) for r in results)
    n_events = n_records + sum(len(r["events"]) for r in results)

    def pct(q: float) -> float:
        return lat[min(len(lat) - 1, int(round(q * (len(lat) - 1))))]

    return {"results": results, "processes": processes, "records": n_records, "events": n_events,
            "wall_s": wall, "records_per_s": n_records / wall, "events_per_s": n_events / wall,
            "p50_latency_ms": 1e3 * pct(0.50), "p95_latency_ms": 1e3 * pct(0.95),
            "max_latency_ms": 1e3 * lat[-1]}


def check_load(store, figures: dict) -> None:
    """No event lost or doubled; every record decided with its four events in order; chains hold."""
    results = figures["results"]
    n_records, n_events = figures["records"], figures["events"]
    assert store.count_records() == n_records
    assert store.count_events() == n_events
    ids = [rid for r in results for rid in r["records"]]
    assert len(set(ids)) == n_records
    summaries = {s.id: s for s in store.list_records()}
    assert set(summaries) == set(ids)
    assert all(s.state == "decided" and s.events == 4 for s in summaries.values())
    # Who wrote what, read without the (large) payloads; verify() below reads those.
    import sqlalchemy as sa

    from deviation.records.schema import events_t

    with store.engine.connect() as conn:
        rows = conn.execute(sa.select(events_t.c.record_id, events_t.c.seq, events_t.c.kind,
                                      events_t.c.event_id).order_by(events_t.c.global_seq)).all()
    stored = {r.event_id: (r.record_id, r.seq, r.kind) for r in rows}
    assert len(stored) == n_events  # every event id once
    kinds: dict[str, list[str]] = {}
    for r in sorted(rows, key=lambda r: (r.record_id, r.seq)):
        kinds.setdefault(r.record_id, []).append(r.kind)
    for r in results:
        for rid, seq, eid in r["events"]:
            assert stored[eid][:2] == (rid, seq)  # what the worker saw committed is there
        for rid in r["records"]:
            assert kinds[rid] == ["entered", "evaluated", "hold-placed", "disposition"]
    res = store.verify()
    assert res.ok, res.first_broken
    assert res.checked_events == n_events and res.head["global_seq"] == n_events


@pytest.mark.timeout(900)
def test_eight_processes_enter_evaluate_and_decide_at_once(pg_backend):
    n = int(os.environ.get("DEVIATION_TEST_LOAD_N", "30"))
    target = pg_backend.target("load")
    from deviation.records.store import open_store

    open_store(target).close()  # the schema exists before the workers race for it
    figures = run_load(target, n)
    store = open_store(target)
    try:
        check_load(store, figures)
    finally:
        store.close()
    print(f"\nload: {figures['processes']} processes x {n} records: {figures['records_per_s']:.1f} records/s, "
          f"{figures['events_per_s']:.1f} events/s, p95 {figures['p95_latency_ms']:.1f} ms")
