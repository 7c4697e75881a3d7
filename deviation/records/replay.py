"""Replay: recompute stored evaluations with the current engine and rules and say what changed.

Used by ``deviation replay``, ``record evaluate`` and the TUI's record and audit screens, so every
face compares and re-evaluates the same way.
"""

from __future__ import annotations

import json
import math
import multiprocessing as mp
import time
from pathlib import Path
from typing import Any, Callable, Sequence

from deviation.errors import DeviationError

# Replay tolerances: F values (and other minute-valued results) agree within
# rel 1e-6 + abs 1e-9 min; probabilities, counts and log reductions within rel 1e-6 + abs 1e-12
# (their magnitudes go far below 1e-9, where an absolute 1e-9 would hide any change).
F_RTOL, F_ATOL = 1e-6, 1e-9
P_RTOL, P_ATOL = 1e-6, 1e-12
_F_FIELDS = ("delivered_F_min", "scheduled_F_min", "target_F_min", "F_margin_min", "projected_F_min",
             "extension_to_target_min")
_P_FIELDS = ("spoilage_probability", "target_spoilage_probability", "scheduled_spoilage_probability",
             "expected_nonsterile_containers", "botulinum_log_reductions",
             "botulinum_log_reductions_required")
_BOOL_FIELDS = ("lethality_established", "lethality_fully_established", "covered_by_alternate")
TOLERANCES = {"F_rtol": F_RTOL, "F_atol_min": F_ATOL, "other_rtol": P_RTOL, "other_atol": P_ATOL}


def rule_set_from(paths: Sequence[str | Path] | None):
    """The default rules layered with the plant's rule files (``--rules``)."""
    from deviation.guidance import load_rule_set

    return load_rule_set([Path(p) for p in (paths or [])])


def evaluate_into(store, record_id: str, snapshot: dict, snapshot_seq: int, *, conservative: bool,
                  rule_paths: Sequence[str] | None, actor: str, role: str, event_id: str | None = None) -> dict:
    """Evaluate a record's snapshot and append the ``evaluated`` event (stored compact); returns
    the full evaluation JSON. ``event_id``: the append's idempotency key."""
    from deviation.evaluate import evaluate_snapshot

    ev = evaluate_snapshot(snapshot, conservative=conservative,
                           rule_set=rule_set_from(rule_paths)).model_dump(mode="json")
    store.add_evaluation(record_id, ev, actor=actor, role=role, snapshot_seq=snapshot_seq,
                         options={"conservative": bool(conservative), "what_if": True}, event_id=event_id)
    return ev


def evaluation_summary(ev: dict | None) -> dict | None:
    if ev is None:
        return None
    g = ev.get("guidance") or {}
    return {"delivered_F_min": ev.get("delivered_F_min"), "target_F_min": ev.get("target_F_min"),
            "disposition": g.get("disposition"), "flags": [f.get("code") for f in ev.get("flags", [])],
            "engine_version": ev.get("engine_version"), "rule_set_sha256": g.get("rule_set_sha256")}


def _close(a: Any, b: Any, rtol: float, atol: float) -> bool:
    if a is None or b is None:
        return a is None and b is None
    if isinstance(a, bool) or isinstance(b, bool):
        return a == b
    if not isinstance(a, (int, float)) or not isinstance(b, (int, float)):
        return a == b
    if math.isinf(a) or math.isinf(b):
        return a == b
    return abs(a - b) <= atol + rtol * abs(a)


def compare_evaluations(stored: dict, now: dict) -> list[dict]:
    """What differs between a stored and a recomputed evaluation beyond the tolerances."""
    out = []
    for name in _F_FIELDS:
        if not _close(stored.get(name), now.get(name), F_RTOL, F_ATOL):
            out.append({"field": name, "stored": stored.get(name), "now": now.get(name),
                        "tolerance": f"rel {F_RTOL:g} + abs {F_ATOL:g} min"})
    for name in _P_FIELDS:
        if not _close(stored.get(name), now.get(name), P_RTOL, P_ATOL):
            out.append({"field": name, "stored": stored.get(name), "now": now.get(name),
                        "tolerance": f"rel {P_RTOL:g} + abs {P_ATOL:g}"})
    for name in _BOOL_FIELDS:
        if stored.get(name) != now.get(name):
            out.append({"field": name, "stored": stored.get(name), "now": now.get(name)})
    d0 = (stored.get("guidance") or {}).get("disposition")
    d1 = (now.get("guidance") or {}).get("disposition")
    if d0 != d1:
        out.append({"field": "guidance.disposition", "stored": d0, "now": d1})
    f0 = sorted(f.get("code") for f in stored.get("flags", []))
    f1 = sorted(f.get("code") for f in now.get("flags", []))
    if f0 != f1:
        out.append({"field": "flags", "stored": f0, "now": f1})
    return out


def replay_item(item: dict, rule_set) -> dict:
    """Recompute one record (from :meth:`Store.iter_replay_items`) and compare with what is stored."""
    rid = item["id"]
    result: dict[str, Any] = {"id": rid}
    if item.get("evaluated") is None:
        return dict(result, reproduced=False, status="not-evaluated", differences=[],
                    why=["the record has no stored evaluation to reproduce"])
    try:
        stored_event = json.loads(item["evaluated"])
        stored = stored_event["evaluation"]
        snapshots = {int(k): v for k, v in item["snapshots"].items()}
        sseq = stored_event.get("snapshot_seq") or max(snapshots)
        snapshot = json.loads(snapshots[sseq])["snapshot"]
        opts = stored_event.get("options") or {}
        from deviation.evaluate import evaluate_snapshot

        now = evaluate_snapshot(snapshot, conservative=bool(opts.get("conservative", stored.get("conservative"))),
                                rule_set=rule_set, what_if=bool(opts.get("what_if", True))).model_dump(mode="json")
    except DeviationError as exc:
        return dict(result, reproduced=False, status="error", differences=[],
                    why=[f"the stored snapshot cannot be evaluated now: {exc}"])
    except Exception as exc:  # noqa: BLE001 - one bad record must not stop a replay of thousands
        return dict(result, reproduced=False, status="error", differences=[],
                    why=[f"replay failed: {type(exc).__name__}: {exc}"])
    diffs = compare_evaluations(stored, now)
    arrays = _arrays_check(stored_event, now)
    eng = {"stored": stored.get("engine_version"), "now": now.get("engine_version")}
    rules_sha = {"stored": (stored.get("guidance") or {}).get("rule_set_sha256"),
                 "now": (now.get("guidance") or {}).get("rule_set_sha256")}
    why = []
    if eng["stored"] != eng["now"]:
        why.append(f"engine version changed: {eng['stored']} -> {eng['now']}")
    if rules_sha["stored"] != rules_sha["now"]:
        why.append(f"rule set changed: sha256 {str(rules_sha['stored'])[:12]}… -> {str(rules_sha['now'])[:12]}…")
    if diffs and not why:
        why.append("same engine version and rule set, yet results differ: the computation is not "
                   "reproducible here (numerical library versions or platform)")
    if not diffs and why:
        why.append("results reproduced within tolerance despite the change")
    if arrays["status"] in ("within-tolerance", "differs"):
        why.append(f"cold-spot arrays: {arrays['detail']}")
    return dict(result, reproduced=not diffs, status="reproduced" if not diffs else "changed",
                differences=diffs, engine_version=eng, rule_set_sha256=rules_sha,
                stale=sseq != max(snapshots), snapshot_seq=sseq, arrays=arrays["status"], why=why)


def _arrays_check(stored_event: dict, now: dict) -> dict:
    """The recomputed arrays against the stored digest (compact events), or ``stored`` for an
    evaluation kept whole."""
    from deviation.records.arrays import check_arrays, split_arrays

    digest = stored_event.get("arrays")
    if not digest:
        return {"status": "stored", "detail": "the arrays are stored with the evaluation"}
    return check_arrays(digest, split_arrays(now)[1])


_WORKER: dict[str, Any] = {}


def _init_worker(url: str, rule_paths: Sequence[str]) -> None:
    from deviation.records.store import open_store

    _WORKER["store"] = open_store(url)
    _WORKER["rules"] = rule_set_from(rule_paths)


def _replay_chunk(ids: list[str]) -> list[dict]:
    store, rs = _WORKER["store"], _WORKER["rules"]
    return [replay_item(item, rs) for item in store.iter_replay_items(ids)]


def replay(store, record_ids: Sequence[str] | None = None, *, jobs: int = 1,
           rule_paths: Sequence[str] = (), progress: Callable[[int, int], None] | None = None) -> dict:
    """Replay records with the current engine and rules; ``jobs`` > 1 runs a process pool.

    ``progress(done, total)`` is called as records finish. Returns the JSON of ``deviation replay``.
    """
    ids = list(record_ids) if record_ids is not None else store.record_ids()
    if record_ids is not None:
        known = set(store.record_ids())
        unknown = [rid for rid in ids if rid not in known]
        if unknown:
            from deviation.errors import StoreError

            raise StoreError(f"no record {', '.join(unknown[:5])}", source=store.name)
    total = len(ids)
    order = {rid: i for i, rid in enumerate(ids)}
    results: list[dict] = []
    rs = rule_set_from(rule_paths)
    import deviation.evaluate  # noqa: F401 - loaded once here, inherited by forked workers
    t0 = time.perf_counter()
    jobs = max(1, min(jobs, total)) if total else 1
    if jobs == 1:
        for item in store.iter_replay_items(None if record_ids is None else ids):
            results.append(replay_item(item, rs))
            if progress:
                progress(len(results), total)
    else:
        chunk = max(1, min(50, total // (jobs * 8) or 1))
        chunks = [ids[i:i + chunk] for i in range(0, total, chunk)]
        ctx = mp.get_context("fork") if "fork" in mp.get_all_start_methods() else mp.get_context("spawn")
        # No database connection may cross a fork (SQLite's rule): close the pooled ones first;
        # each worker opens its own store.
        store.engine.dispose()
        with ctx.Pool(jobs, initializer=_init_worker, initargs=(store.url, list(rule_paths))) as pool:
            for part in pool.imap_unordered(_replay_chunk, chunks):
                results.extend(part)
                if progress:
                    progress(len(results), total)
    elapsed = time.perf_counter() - t0
    found = {r["id"] for r in results}
    for rid in ids:  # a record with no events at all (broken store) still gets a line
        if rid not in found:
            results.append({"id": rid, "reproduced": False, "status": "error", "differences": [],
                            "why": ["the record has no events to replay"]})
    results.sort(key=lambda r: order.get(r["id"], 0))
    counts = {s: sum(1 for r in results if r["status"] == s)
              for s in ("reproduced", "changed", "not-evaluated", "error")}
    from deviation import ENGINE_VERSION

    return {"records": results, "count": total, **{k.replace("-", "_"): v for k, v in counts.items()},
            "engine_version": ENGINE_VERSION, "rule_set_sha256": rs.sha256, "tolerances": TOLERANCES,
            "jobs": jobs, "elapsed_s": elapsed,
            "throughput_records_per_s": (total / elapsed) if elapsed > 0 else None}
