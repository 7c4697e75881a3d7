"""Benchmark: what keyed chains cost. HMAC-SHA-256 against plain SHA-256 of the same canonical
event text (both chains of one append: the event and its store-wide link), for a note, an
entered case snapshot and a compact evaluated event, beside the wall time of a whole append on
an SQLite store (one transaction, ``synchronous=FULL``) and of ``verify`` per event.

Run: ``python tests/benchmarks/bench_hmac.py`` or
``python -m pytest tests/benchmarks/bench_hmac.py -m benchmark -s``.
"""

from __future__ import annotations

import json
import statistics
import sys
import tempfile
import time
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(REPO))

from deviation.records.chains import canonical_json, event_hash, global_hash  # noqa: E402


def _per_call_us(fn, n: int) -> float:
    best = []
    for _ in range(5):
        t0 = time.perf_counter()
        for _ in range(n):
            fn()
        best.append((time.perf_counter() - t0) / n * 1e6)
    return min(best)


def payloads() -> dict[str, str]:
    from deviation.evaluate import evaluate_case
    from deviation.inputs.case import load_case
    from deviation.records.arrays import compact_evaluation

    loaded = load_case(REPO / "demo_cases" / "chili_temperature_drop.toml")
    ev = evaluate_case(loaded, conservative=False).model_dump(mode="json")
    compact, digest = compact_evaluation(ev)
    return {"note": canonical_json({"text": "retort R3 steam valve checked"}),
            "entered snapshot": canonical_json({"record": {"id": "DR-X"}, "snapshot": loaded.snapshot()}),
            "evaluated (compact)": canonical_json({"engine_version": "1", "evaluation": compact, "arrays": digest})}


def hash_costs(n: int = 2000) -> dict:
    key = bytes(range(32))
    out = {}
    for name, text in payloads().items():
        def both(k):
            h = event_hash("DR-ABCDEFGHIJKL", 7, "note", "2026-01-01T00:00:00.000000Z", "olga", "operator",
                           text, "0" * 64, k)
            global_hash(1234, "DR-ABCDEFGHIJKL", 7, h, None, "0" * 64, k)
        sha = _per_call_us(lambda: both(None), n)
        mac = _per_call_us(lambda: both(key), n)
        out[name] = {"bytes": len(text.encode()), "sha256_us": round(sha, 2), "hmac_us": round(mac, 2),
                     "extra_us": round(mac - sha, 2)}
    return out


def append_costs(n: int = 200) -> dict:
    from deviation.records.store import open_store

    with tempfile.TemporaryDirectory() as tmp:
        s = open_store(Path(tmp) / "b.db")
        rid = s.create_record({"case": {}}, lot="L", retort_id="R", process_id="P", actor="olga", role="operator")
        times = []
        for i in range(n):
            t0 = time.perf_counter()
            s.note(rid, f"note {i}", actor="olga", role="operator")
            times.append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        res = s.verify()
        verify_s = time.perf_counter() - t0
        s.close()
    return {"note_append_ms_median": round(statistics.median(times) * 1e3, 2),
            "verify_us_per_event": round(verify_s / res.checked_events * 1e6, 1)}


def bench() -> dict:
    h = hash_costs()
    a = append_costs()
    worst = max(v["extra_us"] for v in h.values())
    return {"hashes": h, **a,
            "hmac_share_of_an_append_percent": round(100 * worst / 1e3 / a["note_append_ms_median"], 3)}


@pytest.mark.benchmark
def test_hmac_cost(capsys):
    r = bench()
    with capsys.disabled():
        print("\n" + json.dumps(r, indent=1))
    assert r["hmac_share_of_an_append_percent"] < 10


if __name__ == "__main__":
    print(json.dumps(bench(), indent=1))
