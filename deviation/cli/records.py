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
import os
from typing import Callable

from deviation.cli.common import (
    actor_of,
    add_common_options,
    add_rules_option,
    caution_text,
    make_console,
    print_caution,
    print_json,
    role_of,
    store_of,
    usage_handler,
)
from deviation.errors import DeviationError
from deviation.records.replay import (
    F_ATOL,
    F_RTOL,
    P_ATOL,
    P_RTOL,
    evaluate_into,
    evaluation_summary,
    replay,
)

# ---------------------------------------------------------------------------------------------
# record new / amend / evaluate


def _load(args, store):
    from deviation.evaluate import check_record
    from deviation.inputs.case import load_case
    from deviation.records import processes as library

    resolve = library.resolver(store)
    loaded = load_case(args.case, process_resolver=resolve)
    check_record(loaded)
    snapshot = loaded.snapshot()
    if resolve.last is not None:  # keep the (id, version) of the filed process it came from
        snapshot["process_ref"] = resolve.last.to_dict()
    return loaded, snapshot, resolve.last


def _evaluate_into(store, record_id: str, snapshot: dict, snapshot_seq: int, args, actor: str, role: str):
    return evaluate_into(store, record_id, snapshot, snapshot_seq, conservative=args.conservative,
                         rule_paths=args.rules, actor=actor, role=role)


def _cmd_new(args) -> int:
    from deviation.records import roles

    actor, role = actor_of(args), role_of(args)
    role = roles.check_role(actor, role, "enter")
    store = store_of(args)
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
            print_json({"id": rid, "state": "entered", "evaluated": False, "error": str(exc),
                         "caution": caution_text()})
        else:
            c = make_console()
            c.print(f"[bold]Record {rid}[/bold] entered (lot {dev.lot}, retort {dev.retort_id}) "
                    f"but [bold red]not evaluated[/bold red]: {exc}")
            print_caution(c)
        return exc.exit_code
    view = store.record(rid)
    if args.json:
        print_json({"id": rid, "state": view.state, "lot": dev.lot, "retort_id": dev.retort_id,
                     "process_id": proc.id, "evaluated": True, "evaluation": evaluation_summary(ev),
                     "head_hash": view.head_hash, "caution": caution_text()})
        return 0
    c = make_console()
    c.print(f"[bold]Record {rid}[/bold] entered and evaluated: lot {dev.lot}, retort {dev.retort_id}, "
            f"process {proc.id}")
    _print_eval_line(c, ev)
    c.print(f"state: {view.state}. A supervisor holds it: deviation record hold {rid} --reason ...")
    print_caution(c)
    return 0


def _cmd_amend(args) -> int:
    from deviation.records import roles

    actor = actor_of(args)
    role = roles.check_role(actor, role_of(args), "amend")
    store = store_of(args)
    _, snapshot, _ = _load(args, store)
    event = store.amend(args.id, snapshot, reason=args.reason, actor=actor, role=role)
    ev = _evaluate_into(store, args.id, snapshot, event.seq, args, actor, role)
    view = store.record(args.id)
    if args.json:
        print_json({"id": args.id, "state": view.state, "amended_seq": event.seq,
                     "evaluation": evaluation_summary(ev), "head_hash": view.head_hash, "caution": caution_text()})
        return 0
    c = make_console()
    c.print(f"[bold]Record {args.id}[/bold] amended (event {event.seq}: {args.reason}) and re-evaluated")
    _print_eval_line(c, ev)
    print_caution(c)
    return 0


def _cmd_evaluate(args) -> int:
    from deviation.records import roles

    actor = actor_of(args)
    role = roles.check_role(actor, role_of(args), "evaluate")
    store = store_of(args)
    view = store.record(args.id)
    before = evaluation_summary(view.evaluation)
    ev = _evaluate_into(store, args.id, view.snapshot, view.snapshot_seq, args, actor, role)
    after = store.record(args.id)
    if args.json:
        print_json({"id": args.id, "state": after.state, "previous": before, "evaluation": evaluation_summary(ev),
                     "head_hash": after.head_hash, "caution": caution_text()})
        return 0
    c = make_console()
    c.print(f"[bold]Record {args.id}[/bold] re-evaluated (event {after.events[-1].seq})")
    if before:
        c.print(f"  before: F0 {before['delivered_F_min']:.3f} min, guidance {before['disposition']}")
    _print_eval_line(c, ev)
    print_caution(c)
    return 0


def _print_eval_line(c, ev: dict) -> None:
    s = evaluation_summary(ev)
    flags = ", ".join(s["flags"]) or "none"
    c.print(f"  delivered F0 {s['delivered_F_min']:.3f} min (target {s['target_F_min']:.3f} min); "
            f"guidance [bold]{s['disposition']}[/bold]; flags: {flags}")


# ---------------------------------------------------------------------------------------------
# hold / release / decide / note


def _simple(action: str, write: Callable) -> Callable[[argparse.Namespace], int]:
    def handler(args) -> int:
        from deviation.records import roles

        actor = actor_of(args)
        role = roles.check_role(actor, role_of(args), action)
        store = store_of(args)
        event = write(store, args, actor, role)
        view = store.record(args.id)
        if args.json:
            from deviation.records.events import event_summary

            print_json({"id": args.id, "state": view.state, "event": event_summary(event),
                         "head_hash": view.head_hash, "caution": caution_text()})
            return 0
        c = make_console()
        from deviation.records.events import describe_event

        c.print(f"[bold]Record {args.id}[/bold]: {event.kind} (event {event.seq}) by {actor} ({role}): "
                f"{describe_event(event)}")
        c.print(f"state: {view.state}")
        print_caution(c)
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
    store = store_of(args)
    rows = store.list_records(state=args.state, lot=args.lot, retort=args.retort, since=args.since,
                              until=args.until)
    if args.json:
        print_json({"records": [r.to_dict() for r in rows], "count": len(rows)})
        return 0
    from rich.table import Table

    c = make_console()
    t = Table(title=f"{len(rows)} deviation record(s) in {store.name}")
    for col in ("id", "lot", "retort", "process", "state", "events", "created (UTC)", "last event (UTC)"):
        t.add_column(col)
    for r in rows:
        t.add_row(r.id, r.lot, r.retort_id, r.process_id, r.state, str(r.events), r.created_utc[:19],
                  r.last_utc[:19])
    c.print(t)
    print_caution(c)
    return 0


def _cmd_show(args) -> int:
    store = store_of(args)
    view = store.record(args.id)
    if args.json:
        d = view.to_dict()
        d["caution"] = caution_text()
        print_json(d)
        return 0
    from rich.panel import Panel
    from rich.table import Table

    from deviation.records.events import describe_event

    c = make_console()
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
    print_caution(c)
    return 0


# ---------------------------------------------------------------------------------------------
# verify / export / import


def _cmd_verify(args) -> int:
    store = store_of(args)
    res = store.verify()
    if args.json:
        print_json(res.to_dict())
        return 0 if res.ok else 1
    c = make_console()
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
    print_caution(c)
    return 0 if res.ok else 1


def _cmd_export(args) -> int:
    from deviation.records.bundles import write_bundle

    if bool(args.ids) == bool(args.all):
        raise DeviationError("give record ids or --all (not both)", source="export")
    store = store_of(args)
    bundle = store.export_bundle(None if args.all else args.ids)
    write_bundle(bundle, args.output)
    n_ev = sum(len(r["events"]) for r in bundle["records"])
    if args.json:
        print_json({"file": str(args.output), "records": len(bundle["records"]), "events": n_ev,
                     "sha256": bundle["sha256"]})
        return 0
    c = make_console()
    c.print(f"exported {len(bundle['records'])} record(s), {n_ev} events to {args.output} "
            f"(bundle sha256 {bundle['sha256'][:16]}…)")
    return 0


def _cmd_import(args) -> int:
    from deviation.records import roles
    from deviation.records.bundles import read_bundle

    actor = actor_of(args)
    role = roles.check_role(actor, role_of(args), "import")
    bundle = read_bundle(args.file)
    store = store_of(args)
    res = store.import_bundle(bundle, actor=actor, role=role)
    if args.json:
        print_json(dict(res.to_dict(), ok=True))
        return 0
    c = make_console()
    c.print(f"imported {res.records_added} new record(s), {res.events_added} event(s); "
            f"{res.records_unchanged} already here unchanged. Every chain was verified first.")
    return 0


# ---------------------------------------------------------------------------------------------
# replay


def _cmd_replay(args) -> int:
    if bool(args.id) == bool(args.all):
        raise DeviationError("give a record ID or --all (not both)", source="replay")
    store = store_of(args)
    ids = None if args.all else [args.id]
    jobs = args.jobs or ((os.cpu_count() or 1) if args.all else 1)
    show_bar = args.all and not args.json
    if show_bar:
        from rich.console import Console
        from rich.progress import (
            BarColumn,
            MofNCompleteColumn,
            Progress,
            TextColumn,
            TimeRemainingColumn,
        )

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
        print_json(out)
        return 1 if bad else 0
    from rich.table import Table

    c = make_console()
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
    print_caution(c)
    return 1 if bad else 0


# ---------------------------------------------------------------------------------------------
# Wiring


def register(subparsers) -> None:
    """Add the record commands to the ``deviation`` sub-parsers."""
    rec = subparsers.add_parser("record", help="deviation records: enter, hold, decide, show, list")
    rec.set_defaults(handler=usage_handler(rec))
    rsub = rec.add_subparsers(dest="record_command", metavar="SUBCOMMAND")

    p = rsub.add_parser("new", help="enter a deviation from a case file and evaluate it (operator)")
    p.add_argument("case", help="case file (TOML)")
    p.add_argument("--conservative", action="store_true", help="evaluate conservatively")
    p.add_argument("--process-version", default=None, help="version of the filed scheduled process")
    add_rules_option(p)
    add_common_options(p, acts=True)
    p.set_defaults(handler=_cmd_new)

    p = rsub.add_parser("list", help="list records")
    p.add_argument("--state", help="entered, evaluated, held, released or decided")
    p.add_argument("--lot")
    p.add_argument("--retort")
    p.add_argument("--since", metavar="DATE", help="created on or after (YYYY-MM-DD or ISO time, UTC)")
    p.add_argument("--until", metavar="DATE", help="created on or before (YYYY-MM-DD: the whole day)")
    add_common_options(p, acts=False)
    p.set_defaults(handler=_cmd_list)

    p = rsub.add_parser("show", help="show a record and its events")
    p.add_argument("id")
    add_common_options(p, acts=False)
    p.set_defaults(handler=_cmd_show)

    p = rsub.add_parser("amend", help="amend a record with a new case snapshot, before a hold decision (operator)")
    p.add_argument("id")
    p.add_argument("case", help="case file (TOML)")
    p.add_argument("--reason", required=True)
    p.add_argument("--conservative", action="store_true")
    add_rules_option(p)
    add_common_options(p, acts=True)
    p.set_defaults(handler=_cmd_amend)

    for name, fn, what in (("hold", _cmd_hold, "place the lot on hold (supervisor)"),
                           ("release", _cmd_release, "release the hold (supervisor)")):
        p = rsub.add_parser(name, help=what)
        p.add_argument("id")
        p.add_argument("--reason", required=True)
        add_common_options(p, acts=True)
        p.set_defaults(handler=fn)

    p = rsub.add_parser("decide", help="record the disposition (process authority)")
    p.add_argument("id")
    p.add_argument("--decision", required=True, help="e.g. release, reprocess, destroy")
    p.add_argument("--reason", required=True)
    p.add_argument("--result", default=None, help="reprocess or incubation result")
    add_common_options(p, acts=True)
    p.set_defaults(handler=_cmd_decide)

    p = rsub.add_parser("note", help="add a note")
    p.add_argument("id")
    p.add_argument("--text", required=True)
    add_common_options(p, acts=True)
    p.set_defaults(handler=_cmd_note)

    p = rsub.add_parser("evaluate", help="re-evaluate with the current engine and rules (appends 'evaluated')")
    p.add_argument("id")
    p.add_argument("--conservative", action="store_true")
    add_rules_option(p)
    add_common_options(p, acts=True)
    p.set_defaults(handler=_cmd_evaluate)

    p = subparsers.add_parser("replay", help="recompute records with the current engine and rules")
    p.add_argument("id", nargs="?", help="record id")
    p.add_argument("--all", action="store_true", help="every record (a process pool, a progress bar)")
    p.add_argument("--jobs", type=int, default=None, help="worker processes (default: all cores with --all)")
    add_rules_option(p)
    add_common_options(p, acts=False)
    p.set_defaults(handler=_cmd_replay)

    p = subparsers.add_parser("verify", help="check every hash chain of the store")
    add_common_options(p, acts=False)
    p.set_defaults(handler=_cmd_verify)

    p = subparsers.add_parser("export", help="export records to a JSON bundle")
    p.add_argument("ids", nargs="*", metavar="ID")
    p.add_argument("--all", action="store_true")
    p.add_argument("-o", "--output", required=True, metavar="FILE")
    add_common_options(p, acts=False)
    p.set_defaults(handler=_cmd_export)

    p = subparsers.add_parser("import", help="import a JSON bundle (every chain verified first)")
    p.add_argument("file")
    add_common_options(p, acts=True)
    p.set_defaults(handler=_cmd_import)


__all__ = ["register"]
