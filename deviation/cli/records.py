"""Record commands of the ``deviation`` CLI: ``record ...``, ``replay``, ``verify``, ``export``,
``import``; and the replay machinery (also used by the TUI).

Contract (relied on outside the project): every command takes ``--db URL_OR_PATH``,
``--actor NAME`` (default: the OS user), ``--role ROLE`` where it writes, and ``--json`` to print
one JSON object. Exit codes: 0 done; 1 ``verify`` found a broken chain or ``replay`` did not
reproduce a record; 2 bad input; 3 store error; 4 role or record state refused the action.

``--actor``/``--role`` are who the user says they are, recorded with every event: an
accountability trail, not authentication.
"""

from __future__ import annotations

import argparse
import getpass
import json
import math
import multiprocessing as mp
import os
import sys
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


def _caution() -> str:
    try:
        from deviation.evaluate import CAUTION
    except Exception:  # noqa: BLE001 - the engine may not import; the caution must still show
        return ("This is guidance, not a release. The process authority decides, in writing, what "
                "becomes of the lot; local regulations govern.")
    return CAUTION


# ---------------------------------------------------------------------------------------------
# Output helpers


def _print_json(obj: Any) -> None:
    sys.stdout.write(json.dumps(obj, separators=(",", ":"), ensure_ascii=False, allow_nan=False) + "\n")


def _console():
    from rich.console import Console

    return Console()


def _end(console) -> None:
    console.print(f"[dim]{_caution()}[/dim]")


def _actor(args) -> str:
    if args.actor:
        return args.actor
    try:
        return getpass.getuser()
    except Exception:  # noqa: BLE001
        raise DeviationError("no OS user name found; give --actor NAME", source="--actor") from None


def _role(args) -> str | None:
    return args.role or os.environ.get("DEVIATION_ROLE") or None


def _store(args):
    from deviation.records.store import open_store

    return open_store(args.db)


def _rule_set(paths: Sequence[str] | None):
    from deviation.guidance.rules import load_rule_set

    return load_rule_set([Path(p) for p in (paths or [])])


def _evaluate(snapshot: dict, *, conservative: bool, rule_set) -> dict:
    from deviation.evaluate import evaluate_snapshot

    return evaluate_snapshot(snapshot, conservative=conservative, rule_set=rule_set).model_dump(mode="json")


def _eval_summary(ev: dict | None) -> dict | None:
    if ev is None:
        return None
    g = ev.get("guidance") or {}
    return {"delivered_F_min": ev.get("delivered_F_min"), "target_F_min": ev.get("target_F_min"),
            "disposition": g.get("disposition"), "flags": [f.get("code") for f in ev.get("flags", [])],
            "engine_version": ev.get("engine_version"), "rule_set_sha256": g.get("rule_set_sha256")}


# ---------------------------------------------------------------------------------------------
# record new / amend / evaluate


def _load(args, store):
    from deviation.inputs.case import load_case
    from deviation.evaluate import check_record

    from deviation.records import processes as library

    resolve = library.resolver(store)
    loaded = load_case(args.case, process_resolver=resolve)
    check_record(loaded)
    snapshot = loaded.snapshot()
    if resolve.last is not None:  # keep the (id, version) of the filed process it came from
        snapshot["process_ref"] = resolve.last.to_dict()
    return loaded, snapshot, resolve.last


def _evaluate_into(store, record_id: str, snapshot: dict, snapshot_seq: int, args, actor: str, role: str):
    ev = _evaluate(snapshot, conservative=args.conservative, rule_set=_rule_set(args.rules))
    store.add_evaluation(record_id, ev, actor=actor, role=role, snapshot_seq=snapshot_seq,
                         options={"conservative": bool(args.conservative), "what_if": True})
    return ev


def _cmd_new(args) -> int:
    from deviation.records import roles

    actor, role = _actor(args), _role(args)
    role = roles.check_role(actor, role, "enter")
    store = _store(args)
    loaded, snapshot, ref = _load(args, store)
    dev, proc = loaded.case.deviation, loaded.case.process
    version = args.process_version or (str(ref.process_version) if ref else None)
    rid = store.create_record(snapshot, actor=actor, role=role, lot=dev.lot,
                              retort_id=dev.retort_id, process_id=ref.process_id if ref else proc.id,
                              process_version=version)
    try:
        ev = _evaluate_into(store, rid, snapshot, 1, args, actor, role)
    except DeviationError as exc:
        # The deviation is on record even when the engine cannot evaluate it.
        if args.json:
            _print_json({"id": rid, "state": "entered", "evaluated": False, "error": str(exc),
                         "caution": _caution()})
        else:
            c = _console()
            c.print(f"[bold]Record {rid}[/bold] entered (lot {dev.lot}, retort {dev.retort_id}) "
                    f"but [bold red]not evaluated[/bold red]: {exc}")
            _end(c)
        return exc.exit_code
    view = store.record(rid)
    if args.json:
        _print_json({"id": rid, "state": view.state, "lot": dev.lot, "retort_id": dev.retort_id,
                     "process_id": proc.id, "evaluated": True, "evaluation": _eval_summary(ev),
                     "head_hash": view.head_hash, "caution": _caution()})
        return 0
    c = _console()
    c.print(f"[bold]Record {rid}[/bold] entered and evaluated: lot {dev.lot}, retort {dev.retort_id}, "
            f"process {proc.id}")
    _print_eval_line(c, ev)
    c.print(f"state: {view.state}. A supervisor holds it: deviation record hold {rid} --reason ...")
    _end(c)
    return 0


def _cmd_amend(args) -> int:
    from deviation.records import roles

    actor = _actor(args)
    role = roles.check_role(actor, _role(args), "amend")
    store = _store(args)
    _, snapshot, _ = _load(args, store)
    event = store.amend(args.id, snapshot, reason=args.reason, actor=actor, role=role)
    ev = _evaluate_into(store, args.id, snapshot, event.seq, args, actor, role)
    view = store.record(args.id)
    if args.json:
        _print_json({"id": args.id, "state": view.state, "amended_seq": event.seq,
                     "evaluation": _eval_summary(ev), "head_hash": view.head_hash, "caution": _caution()})
        return 0
    c = _console()
    c.print(f"[bold]Record {args.id}[/bold] amended (event {event.seq}: {args.reason}) and re-evaluated")
    _print_eval_line(c, ev)
    _end(c)
    return 0


def _cmd_evaluate(args) -> int:
    from deviation.records import roles

    actor = _actor(args)
    role = roles.check_role(actor, _role(args), "evaluate")
    store = _store(args)
    view = store.record(args.id)
    before = _eval_summary(view.evaluation)
    ev = _evaluate_into(store, args.id, view.snapshot, view.snapshot_seq, args, actor, role)
    after = store.record(args.id)
    if args.json:
        _print_json({"id": args.id, "state": after.state, "previous": before, "evaluation": _eval_summary(ev),
                     "head_hash": after.head_hash, "caution": _caution()})
        return 0
    c = _console()
    c.print(f"[bold]Record {args.id}[/bold] re-evaluated (event {after.events[-1].seq})")
    if before:
        c.print(f"  before: F0 {before['delivered_F_min']:.3f} min, guidance {before['disposition']}")
    _print_eval_line(c, ev)
    _end(c)
    return 0


def _print_eval_line(c, ev: dict) -> None:
    s = _eval_summary(ev)
    flags = ", ".join(s["flags"]) or "none"
    c.print(f"  delivered F0 {s['delivered_F_min']:.3f} min (target {s['target_F_min']:.3f} min); "
            f"guidance [bold]{s['disposition']}[/bold]; flags: {flags}")


# ---------------------------------------------------------------------------------------------
# hold / release / decide / note


def _simple(action: str, write: Callable) -> Callable[[argparse.Namespace], int]:
    def handler(args) -> int:
        from deviation.records import roles

        actor = _actor(args)
        role = roles.check_role(actor, _role(args), action)
        store = _store(args)
        event = write(store, args, actor, role)
        view = store.record(args.id)
        if args.json:
            from deviation.records.store import event_summary

            _print_json({"id": args.id, "state": view.state, "event": event_summary(event),
                         "head_hash": view.head_hash, "caution": _caution()})
            return 0
        c = _console()
        from deviation.records.store import describe_event

        c.print(f"[bold]Record {args.id}[/bold]: {event.kind} (event {event.seq}) by {actor} ({role}): "
                f"{describe_event(event)}")
        c.print(f"state: {view.state}")
        _end(c)
        return 0

    return handler


_cmd_hold = _simple("place-hold", lambda s, a, actor, role: s.place_hold(a.id, reason=a.reason, actor=actor, role=role))
_cmd_release = _simple("release-hold",
                       lambda s, a, actor, role: s.release_hold(a.id, reason=a.reason, actor=actor, role=role))
_cmd_decide = _simple("decide", lambda s, a, actor, role: s.decide(a.id, decision=a.decision, reason=a.reason,
                                                                   result=a.result, actor=actor, role=role))
_cmd_note = _simple("note", lambda s, a, actor, role: s.note(a.id, a.text, actor=actor, role=role))


# ---------------------------------------------------------------------------------------------
# list / show


def _cmd_list(args) -> int:
    store = _store(args)
    rows = store.list_records(state=args.state, lot=args.lot, retort=args.retort, since=args.since,
                              until=args.until)
    if args.json:
        _print_json({"records": [r.to_dict() for r in rows], "count": len(rows)})
        return 0
    from rich.table import Table

    c = _console()
    t = Table(title=f"{len(rows)} deviation record(s) in {store.name}")
    for col in ("id", "lot", "retort", "process", "state", "events", "created (UTC)", "last event (UTC)"):
        t.add_column(col)
    for r in rows:
        t.add_row(r.id, r.lot, r.retort_id, r.process_id, r.state, str(r.events), r.created_utc[:19],
                  r.last_utc[:19])
    c.print(t)
    _end(c)
    return 0


def _cmd_show(args) -> int:
    store = _store(args)
    view = store.record(args.id)
    if args.json:
        d = view.to_dict()
        d["caution"] = _caution()
        _print_json(d)
        return 0
    from rich.panel import Panel
    from rich.table import Table

    from deviation.records.store import describe_event

    c = _console()
    head = (f"lot [bold]{view.lot}[/bold]  retort [bold]{view.retort_id}[/bold]  process {view.process_id}"
            f"{'  version ' + view.process_version if view.process_version else ''}\n"
            f"created {view.created_utc}   state [bold]{view.state}[/bold]")
    if view.hold:
        h = view.hold
        head += (f"\nhold: placed by {h.get('placed_by')} at {h.get('placed_utc')}: {h.get('reason')}"
                 + (f"; released by {h['released_by']}: {h.get('release_reason')}" if not h.get("held") else ""))
    if view.disposition:
        d = view.disposition
        head += f"\ndisposition by {d['by']} at {d['utc']}: [bold]{d['decision']}[/bold]: {d['reason']}"
        if d.get("result"):
            head += f" (result: {d['result']})"
    c.print(Panel(head, title=f"Deviation record {view.id}"))
    if view.evaluation:
        _print_eval_line(c, view.evaluation)
        if not view.evaluation_current:
            c.print("  [yellow]the latest evaluation is of an earlier snapshot: evaluate again[/yellow]")
    t = Table(title="Events (append-only; each hash chains to the one before)")
    for col in ("seq", "UTC", "kind", "actor", "role", "what", "hash"):
        t.add_column(col)
    for e in view.events:
        t.add_row(str(e.seq), e.utc[:19], e.kind, e.actor, e.role, describe_event(e), e.hash[:12] + "…")
    c.print(t)
    _end(c)
    return 0


# ---------------------------------------------------------------------------------------------
# verify / export / import


def _cmd_verify(args) -> int:
    store = _store(args)
    res = store.verify()
    if args.json:
        _print_json(res.to_dict())
        return 0 if res.ok else 1
    c = _console()
    if res.ok:
        c.print(f"[green]✓ every hash chain holds[/green]: {res.checked_events} events in {res.records} "
                f"records ({store.name}); store head {res.head['global_seq']} "
                f"{res.head['global_hash'][:16]}… (note it: a later verify should extend it)")
    else:
        b = res.first_broken
        c.print(f"[bold red]✗ BROKEN[/bold red]: record {b['record_id']} event {b['seq']} ({b['kind']}, store "
                f"position {b['global_seq']}): {b['reason']}")
        c.print(f"{res.broken_count} problem(s) in {res.checked_events} events checked. Keep the file as "
                "found and compare it with a backup or an exported bundle.")
    _end(c)
    return 0 if res.ok else 1


def _cmd_export(args) -> int:
    from deviation.records.store import write_bundle

    if bool(args.ids) == bool(args.all):
        raise DeviationError("give record ids or --all (not both)", source="export")
    store = _store(args)
    bundle = store.export_bundle(None if args.all else args.ids)
    write_bundle(bundle, args.output)
    n_ev = sum(len(r["events"]) for r in bundle["records"])
    if args.json:
        _print_json({"file": str(args.output), "records": len(bundle["records"]), "events": n_ev,
                     "sha256": bundle["sha256"]})
        return 0
    c = _console()
    c.print(f"exported {len(bundle['records'])} record(s), {n_ev} events to {args.output} "
            f"(bundle sha256 {bundle['sha256'][:16]}…)")
    return 0


def _cmd_import(args) -> int:
    from deviation.records import roles
    from deviation.records.store import read_bundle

    actor = _actor(args)
    role = roles.check_role(actor, _role(args), "import")
    bundle = read_bundle(args.file)
    store = _store(args)
    res = store.import_bundle(bundle, actor=actor, role=role)
    if args.json:
        _print_json(dict(res.to_dict(), ok=True))
        return 0
    c = _console()
    c.print(f"imported {res.records_added} new record(s), {res.events_added} event(s); "
            f"{res.records_unchanged} already here unchanged. Every chain was verified first.")
    return 0


# ---------------------------------------------------------------------------------------------
# replay


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
    return dict(result, reproduced=not diffs, status="reproduced" if not diffs else "changed",
                differences=diffs, engine_version=eng, rule_set_sha256=rules_sha,
                stale=sseq != max(snapshots), snapshot_seq=sseq, why=why)


_WORKER: dict[str, Any] = {}


def _init_worker(url: str, rule_paths: Sequence[str]) -> None:
    from deviation.records.store import open_store

    _WORKER["store"] = open_store(url)
    _WORKER["rules"] = _rule_set(rule_paths)


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
    rs = _rule_set(rule_paths)
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


def _cmd_replay(args) -> int:
    if bool(args.id) == bool(args.all):
        raise DeviationError("give a record ID or --all (not both)", source="replay")
    store = _store(args)
    ids = None if args.all else [args.id]
    jobs = args.jobs or ((os.cpu_count() or 1) if args.all else 1)
    show_bar = args.all and not args.json
    if show_bar:
        from rich.console import Console
        from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

        total = store.count_records()
        bar = Progress(TextColumn("replaying"), BarColumn(), MofNCompleteColumn(), TimeRemainingColumn(),
                       console=Console(stderr=True), transient=False)
        task = bar.add_task("replay", total=total)

        def tick(done: int, n: int) -> None:
            # Started at the first result, after the worker processes were forked: no refresh
            # thread exists while forking.
            if not bar.live.is_started:
                bar.start()
            bar.update(task, completed=done, total=n)

        try:
            out = replay(store, ids, jobs=jobs, rule_paths=args.rules or [], progress=tick)
        finally:
            if bar.live.is_started:
                bar.stop()
    else:
        out = replay(store, ids, jobs=jobs, rule_paths=args.rules or [])
    bad = out["changed"] + out["error"]
    if args.json:
        _print_json(out)
        return 1 if bad else 0
    from rich.table import Table

    c = _console()
    t = Table(title=f"Replay with engine {out['engine_version']}, rule set {out['rule_set_sha256'][:12]}…")
    for col in ("record", "result", "why / what changed"):
        t.add_column(col)
    shown = [r for r in out["records"] if r["status"] != "reproduced"] if args.all else out["records"]
    for r in shown[:200]:
        look = {"reproduced": "[green]✓ reproduced[/green]", "changed": "[bold red]✗ changed[/bold red]",
                "not-evaluated": "· not evaluated", "error": "[bold red]✗ error[/bold red]"}[r["status"]]
        lines = list(r.get("why", []))
        lines += [f"{d['field']}: {d['stored']} -> {d['now']}" for d in r.get("differences", [])]
        t.add_row(r["id"], look, "\n".join(lines))
    if shown:
        c.print(t)
    tp = out["throughput_records_per_s"]
    c.print(f"{out['count']} record(s): {out['reproduced']} reproduced, {out['changed']} changed, "
            f"{out['not_evaluated']} not evaluated, {out['error']} errors; "
            f"{tp:.1f} records/s on {out['jobs']} process(es)" if tp else f"{out['count']} record(s)")
    c.print(f"[dim]tolerances: F values rel {F_RTOL:g} + abs {F_ATOL:g} min; other numbers rel {P_RTOL:g} "
            f"+ abs {P_ATOL:g}; same disposition and flag codes[/dim]")
    _end(c)
    return 1 if bad else 0


# ---------------------------------------------------------------------------------------------
# Wiring


def _common(p: argparse.ArgumentParser, *, acts: bool) -> None:
    p.add_argument("--db", metavar="URL_OR_PATH", default=None,
                   help="record store: an SQLite file or a database URL (default: DEVIATION_DB, "
                        "else deviation.db in the user data directory)")
    p.add_argument("--actor", metavar="NAME", default=None, help="who acts (default: the OS user)")
    if acts:
        p.add_argument("--role", metavar="ROLE", default=None,
                       help="operator, supervisor, process-authority or auditor (default: DEVIATION_ROLE)")
    p.add_argument("--json", action="store_true", help="print one JSON object")


def _rules_opt(p: argparse.ArgumentParser) -> None:
    p.add_argument("--rules", action="append", metavar="FILE_OR_DIR",
                   help="a plant rule file or folder laid over the default rules (repeatable)")


def _usage(parser: argparse.ArgumentParser) -> Callable[[argparse.Namespace], int]:
    def handler(args) -> int:
        parser.print_help(sys.stderr)
        return 2

    return handler


def register(subparsers) -> None:
    """Add the record commands to the ``deviation`` sub-parsers."""
    rec = subparsers.add_parser("record", help="deviation records: enter, hold, decide, show, list")
    rec.set_defaults(handler=_usage(rec))
    rsub = rec.add_subparsers(dest="record_command", metavar="SUBCOMMAND")

    p = rsub.add_parser("new", help="enter a deviation from a case file and evaluate it (operator)")
    p.add_argument("case", help="case file (TOML)")
    p.add_argument("--conservative", action="store_true", help="evaluate conservatively")
    p.add_argument("--process-version", default=None, help="version of the filed scheduled process")
    _rules_opt(p)
    _common(p, acts=True)
    p.set_defaults(handler=_cmd_new)

    p = rsub.add_parser("list", help="list records")
    p.add_argument("--state", help="entered, evaluated, held, released or decided")
    p.add_argument("--lot")
    p.add_argument("--retort")
    p.add_argument("--since", metavar="DATE", help="created on or after (YYYY-MM-DD or ISO time, UTC)")
    p.add_argument("--until", metavar="DATE", help="created on or before (YYYY-MM-DD: the whole day)")
    _common(p, acts=False)
    p.set_defaults(handler=_cmd_list)

    p = rsub.add_parser("show", help="show a record and its events")
    p.add_argument("id")
    _common(p, acts=False)
    p.set_defaults(handler=_cmd_show)

    p = rsub.add_parser("amend", help="amend a record with a new case snapshot, before a hold decision (operator)")
    p.add_argument("id")
    p.add_argument("case", help="case file (TOML)")
    p.add_argument("--reason", required=True)
    p.add_argument("--conservative", action="store_true")
    _rules_opt(p)
    _common(p, acts=True)
    p.set_defaults(handler=_cmd_amend)

    for name, fn, what in (("hold", _cmd_hold, "place the lot on hold (supervisor)"),
                           ("release", _cmd_release, "release the hold (supervisor)")):
        p = rsub.add_parser(name, help=what)
        p.add_argument("id")
        p.add_argument("--reason", required=True)
        _common(p, acts=True)
        p.set_defaults(handler=fn)

    p = rsub.add_parser("decide", help="record the disposition (process authority)")
    p.add_argument("id")
    p.add_argument("--decision", required=True, help="e.g. release, reprocess, destroy")
    p.add_argument("--reason", required=True)
    p.add_argument("--result", default=None, help="reprocess or incubation result")
    _common(p, acts=True)
    p.set_defaults(handler=_cmd_decide)

    p = rsub.add_parser("note", help="add a note")
    p.add_argument("id")
    p.add_argument("--text", required=True)
    _common(p, acts=True)
    p.set_defaults(handler=_cmd_note)

    p = rsub.add_parser("evaluate", help="re-evaluate with the current engine and rules (appends 'evaluated')")
    p.add_argument("id")
    p.add_argument("--conservative", action="store_true")
    _rules_opt(p)
    _common(p, acts=True)
    p.set_defaults(handler=_cmd_evaluate)

    p = subparsers.add_parser("replay", help="recompute records with the current engine and rules")
    p.add_argument("id", nargs="?", help="record id")
    p.add_argument("--all", action="store_true", help="every record (a process pool, a progress bar)")
    p.add_argument("--jobs", type=int, default=None, help="worker processes (default: all cores with --all)")
    _rules_opt(p)
    _common(p, acts=False)
    p.set_defaults(handler=_cmd_replay)

    p = subparsers.add_parser("verify", help="check every hash chain of the store")
    _common(p, acts=False)
    p.set_defaults(handler=_cmd_verify)

    p = subparsers.add_parser("export", help="export records to a JSON bundle")
    p.add_argument("ids", nargs="*", metavar="ID")
    p.add_argument("--all", action="store_true")
    p.add_argument("-o", "--output", required=True, metavar="FILE")
    _common(p, acts=False)
    p.set_defaults(handler=_cmd_export)

    p = subparsers.add_parser("import", help="import a JSON bundle (every chain verified first)")
    p.add_argument("file")
    _common(p, acts=True)
    p.set_defaults(handler=_cmd_import)


__all__ = ["register", "replay", "replay_item", "compare_evaluations", "TOLERANCES"]
