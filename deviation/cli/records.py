"""Record commands of the ``deviation`` CLI: ``record ...`` (with ``record log``, the deviation
log), ``replay``, ``verify``, ``export``, ``import``.

Contract (relied on outside the project): every command takes ``--db URL_OR_PATH``,
``--actor NAME`` (default: the OS user), ``--role ROLE`` where it writes, and ``--json`` to print
one JSON object. Exit codes: 0 done; 1 ``verify`` found a problem, ``replay`` did not reproduce a
record, or a disposition was not confirmed at the prompt; 2 bad input (a disposition not confirmed
with ``--yes`` outside a terminal); 3 store error; 4 role or record state refused the action.

``--actor``/``--role`` are who the user says they are, recorded with every event: an
accountability trail, not authentication. Everything a user typed is printed as text, never as
markup, with control and direction characters made visible.
"""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path
from typing import Callable

from deviation.cli.common import (
    ID,
    REASON,
    acting,
    add_rules_option,
    after_write,
    caution_text,
    esc,
    make_console,
    command,
    command_group,
    plain,
    print_caution,
    print_json,
    store_of,
)
from deviation.cli.options import add_reading_options
from deviation.errors import DeviationError

_ENTRY_KEY_MAX = 36

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


def _evaluate_into(store, record_id: str, snapshot: dict, snapshot_seq: int, args, actor: str, role: str,
                   event_id: str | None = None):
    from deviation.records.replay import evaluate_into

    return evaluate_into(store, record_id, snapshot, snapshot_seq, conservative=args.conservative,
                         rule_paths=args.rules, actor=actor, role=role, event_id=event_id)


def _summary(ev):
    from deviation.records.replay import evaluation_summary

    return evaluation_summary(ev)


def _entry_key(args) -> str | None:
    key = getattr(args, "entry_key", None)
    if key is None:
        return None
    if not key.strip() or len(key) > _ENTRY_KEY_MAX or any(c.isspace() for c in key):
        raise DeviationError(f"an entry key is 1 to {_ENTRY_KEY_MAX} characters with no spaces, found {key!r}",
                             source="--entry-key")
    return key


def _cmd_new(args) -> int:

    actor, role = acting(args, "enter")
    key = _entry_key(args)
    store = store_of(args)
    loaded, snapshot, ref = _load(args, store)
    dev, proc = loaded.case.deviation, loaded.case.process
    version = args.process_version or (str(ref.process_version) if ref else None)
    rid = store.create_record(snapshot, actor=actor, role=role, lot=dev.lot,
                              retort_id=dev.retort_id, process_id=ref.process_id if ref else proc.id,
                              process_version=version, event_id=key)
    try:
        ev = _evaluate_into(store, rid, snapshot, 1, args, actor, role,
                            event_id=f"{key}.evaluated" if key else None)
    except DeviationError as caught:
        # The deviation is on record even when the engine cannot evaluate it.
        exc = caught  # kept past the except block, for the closure below

        def show_unevaluated() -> int:
            if args.json:
                print_json({"id": rid, "state": "entered", "evaluated": False, "error": str(exc),
                            "caution": caution_text()})
            else:
                c = make_console()
                c.print(f"[bold]Record {rid}[/bold] entered (lot {esc(dev.lot)}, retort {esc(dev.retort_id)}) "
                        f"but [bold red]not evaluated[/bold red]: {esc(exc)}")
                print_caution(c)
            return exc.exit_code

        return after_write(f"record {rid}", show_unevaluated)

    show = _show_evaluated(
        args, store, rid, ev, {"lot": dev.lot, "retort_id": dev.retort_id, "process_id": proc.id, "evaluated": True},
        lambda view: ([f"[bold]Record {rid}[/bold] entered and evaluated: lot {esc(dev.lot)}, retort "
                       f"{esc(dev.retort_id)}, process {esc(proc.id)}"],
                      [f"state: {view.state}. A supervisor holds it: deviation record hold {rid} --reason ..."]))
    return after_write(f"record {rid}", show)


def _cmd_amend(args) -> int:

    actor, role = acting(args, "amend")
    store = store_of(args)
    _, snapshot, _ = _load(args, store)
    event = store.amend(args.id, snapshot, reason=args.reason, actor=actor, role=role)
    ev = _evaluate_into(store, args.id, snapshot, event.seq, args, actor, role)

    show = _show_evaluated(
        args, store, args.id, ev, {"amended_seq": event.seq},
        lambda view: ([f"[bold]Record {args.id}[/bold] amended (event {event.seq}: {esc(args.reason)}) and "
                       "re-evaluated"], []))
    return after_write(f"the amendment of record {args.id}", show)


def _cmd_evaluate(args) -> int:

    actor, role = acting(args, "evaluate")
    store = store_of(args)
    view = store.record(args.id)
    before = _summary(view.stored_evaluation)
    ev = _evaluate_into(store, args.id, view.snapshot, view.snapshot_seq, args, actor, role)

    def lines(after) -> tuple[list[str], list[str]]:
        head = [f"[bold]Record {args.id}[/bold] re-evaluated (event {after.events[-1].seq})"]
        if before and isinstance(before.get("delivered_F_min"), (int, float)):
            head.append(f"  before: F0 {before['delivered_F_min']:.3f} min, guidance {esc(before['disposition'])}")
        return head, []

    show = _show_evaluated(args, store, args.id, ev, {"previous": before}, lines)
    return after_write(f"the evaluation of record {args.id}", show)


def _show_evaluated(args, store, rid: str, ev: dict, fields: dict,
                    lines: Callable[[object], tuple[list[str], list[str]]]) -> Callable[[], int]:
    """What a write that evaluated shows once it is stored: JSON ``{id, state, **fields,
    evaluation, head_hash, caution}``; text: ``lines(view)``'s first lines, the evaluation's
    line, its last lines, the caution."""
    def show() -> int:
        view = store.record(rid)
        if args.json:
            print_json({"id": rid, "state": view.state, **fields, "evaluation": _summary(ev),
                        "head_hash": view.head_hash, "caution": caution_text()})
            return 0
        head, tail = lines(view)
        c = make_console()
        for line in head:
            c.print(line)
        _print_eval_line(c, ev)
        for line in tail:
            c.print(line)
        print_caution(c)
        return 0

    return show


def _F(x) -> str:
    return f"{x:.3f}" if isinstance(x, (int, float)) and not isinstance(x, bool) else "?"


def _print_eval_line(c, ev: dict) -> None:
    s = _summary(ev) or {}
    flags = ", ".join(esc(f) for f in s.get("flags") or []) or "none"
    c.print(f"  delivered F0 {_F(s.get('delivered_F_min'))} min (target {_F(s.get('target_F_min'))} min); "
            f"guidance [bold]{esc(s.get('disposition'))}[/bold]; flags: {flags}")


# ---------------------------------------------------------------------------------------------
# hold / release / decide / note


def _show_event(args, store, event, actor: str, role: str) -> Callable[[], int]:
    def show() -> int:
        view = store.record(args.id)
        if args.json:
            from deviation.records.events import event_summary

            print_json({"id": args.id, "state": view.state, "event": event_summary(event),
                        "head_hash": view.head_hash, "caution": caution_text()})
            return 0
        from deviation.records.events import describe_event

        c = make_console()
        c.print(f"[bold]Record {esc(args.id)}[/bold]: {event.kind} (event {event.seq}) by {esc(actor)} "
                f"({esc(role)}): {esc(describe_event(event))}")
        held = "; the lot is on hold" if view.hold and view.hold.get("held") else ""
        c.print(f"state: {view.state}{held}")
        print_caution(c)
        return 0

    return show


def _simple(action: str, write: Callable) -> Callable[[argparse.Namespace], int]:
    def handler(args) -> int:

        actor, role = acting(args, action)
        store = store_of(args)
        event = write(store, args, actor, role)
        return after_write(f"{event.kind} (event {event.seq}) of record {args.id}",
                           _show_event(args, store, event, actor, role))

    return handler


_cmd_hold = _simple("place-hold", lambda s, a, actor, role: s.place_hold(a.id, reason=a.reason, actor=actor, role=role))
_cmd_release = _simple("release-hold", lambda s, a, actor, role: s.release_hold(
    a.id, reason=a.reason, decision_seq=a.decision_seq, actor=actor, role=role))
_cmd_note = _simple("note", lambda s, a, actor, role: s.note(a.id, a.text, actor=actor, role=role))


def _cmd_decide(args) -> int:
    from deviation.records import roles

    actor, role = acting(args, "decide")
    code = roles.decision_code(args.decision)
    if code is None:
        raise DeviationError(f"'{args.decision}' is not a disposition; choose one of: release-after-evaluation "
                             "(or release), reprocess, destroy, other (with --decision-text)", source="--decision")
    if code == "other" and not (args.decision_text or "").strip():
        raise DeviationError("a disposition 'other' needs the decision in words (--decision-text TEXT)",
                             source="--decision-text")
    from deviation.records.events import disposition_summary

    store = store_of(args)
    view = store.record(args.id)
    lines = disposition_summary(view, decision=code, decision_text=args.decision_text, reason=args.reason,
                             result=args.result, supersedes=args.supersedes, actor=actor, role=role)
    if not args.yes:
        if args.json or not sys.stdin.isatty():
            print("\n".join(lines), file=sys.stderr)
            raise DeviationError("the disposition was not written: read the summary above and confirm it "
                                 "with --yes", source="--yes")
        print("\n".join(lines))
        answer = input("Write this disposition? [y/N] ").strip().lower()
        if answer not in ("y", "yes"):
            print("not written")
            return 1
    event = store.decide(args.id, decision=code, decision_text=args.decision_text, reason=args.reason,
                         result=args.result, supersedes=args.supersedes, actor=actor, role=role)
    return after_write(f"the disposition (event {event.seq}) of record {args.id}",
                       _show_event(args, store, event, actor, role))


# ---------------------------------------------------------------------------------------------
# list / show / log


def _hold_text(s) -> str:
    if s.held:
        return "on hold"
    return "released" if s.state in ("released", "decided") and s.events else "-"


def _cmd_list(args) -> int:
    store = store_of(args)
    filters = dict(state=args.state, lot=args.lot, retort=args.retort, since=args.since, until=args.until,
                   plant=args.plant)
    if args.json:
        rows = store.list_rows(**filters)
        print_json({"records": rows, "count": len(rows)})
        return 0
    rows = store.list_records(**filters)
    from rich.table import Table

    c = make_console()
    t = Table(title=f"{len(rows)} deviation record(s) in {esc(store.name)}")
    for col in ("id", "lot", "retort", "process", "state", "guidance", "decision", "hold", "created (UTC)",
                "last event (UTC)"):
        t.add_column(col)
    for r in rows:
        decision = r.decision_words or "-"
        if r.superseded:
            decision += f" (supersedes {r.superseded})"
        t.add_row(r.id + (" ⇩" if r.imported else ""), plain(r.lot), plain(r.retort_id), plain(r.process_id),
                  r.state, plain(r.guidance or "-"), plain(decision), "⏸ on hold" if r.held else "-",
                  r.created_utc[:19], r.last_utc[:19])
    c.print(t)
    if any(r.imported for r in rows):
        c.print("⇩ holds events imported from another store (deviation record show ID says from where)")
    print_caution(c)
    return 0


def _cmd_show(args) -> int:
    store = store_of(args)
    view = store.record(args.id)
    if args.json:
        d = view.to_dict(arrays=args.arrays)
        d["caution"] = caution_text()
        print_json(d)
        return 0
    from rich.panel import Panel
    from rich.table import Table

    from deviation.records.events import describe_event, origin_text

    c = make_console()
    head = (f"lot [bold]{esc(view.lot)}[/bold]  retort [bold]{esc(view.retort_id)}[/bold]  process "
            f"{esc(view.process_id)}{'  version ' + esc(view.process_version) if view.process_version else ''}\n"
            f"created {view.created_utc}   state [bold]{view.state}[/bold]")
    if view.hold:
        h = view.hold
        head += f"\nhold: placed by {esc(h.get('placed_by'))} at {h.get('placed_utc')}: {esc(h.get('reason'))}"
        if not h.get("held"):
            head += f"; released by {esc(h.get('released_by'))}: {esc(h.get('release_reason'))}"
    if view.disposition:
        d = view.disposition
        head += (f"\ndisposition by {esc(d['by'])} at {d['utc']}: [bold]{esc(d.get('words'))}[/bold]: "
                 f"{esc(d.get('reason'))}")
        if d.get("result"):
            head += f" (result: {esc(d['result'])})"
        for old in reversed(view.superseded):
            head += (f"\n  superseded: {esc(old.get('words'))} by {esc(old.get('by'))} at {old.get('utc')} "
                     f"({esc(old.get('reason'))})")
    for o in view.origins:
        head += f"\n[yellow]⇩ {esc(origin_text(o))}[/yellow]"
    c.print(Panel(head, title=f"Deviation record {esc(view.id)}"))
    if view.stored_evaluation:
        _print_eval_line(c, view.stored_evaluation)
        if not view.evaluation_current:
            c.print("  [yellow]the latest evaluation is of an earlier snapshot: evaluate again[/yellow]")
        if args.arrays:
            view.evaluation  # recompute the arrays and check them against the stored digest
            chk = view.arrays_check or {}
            c.print(f"  arrays: {esc(chk.get('status'))}: {esc(chk.get('detail'))}")
    t = Table(title="Events (append-only; each hash chains to the one before)")
    for col in ("seq", "UTC", "kind", "actor", "role", "what", "origin", "hash"):
        t.add_column(col)
    for e in view.events:
        t.add_row(str(e.seq), e.utc[:19], plain(e.kind), plain(e.actor), plain(e.role), plain(describe_event(e)),
                  plain("⇩ imported" if e.origin else "here", style="yellow" if e.origin else ""),
                  e.hash[:12] + "…")
    c.print(t)
    print_caution(c)
    return 0


_LOG_SUFFIX = {".csv": "csv", ".html": "html", ".htm": "html", ".pdf": "pdf", ".md": "md", ".markdown": "md"}


def _cmd_log(args) -> int:
    store = store_of(args)
    rows = store.deviation_log(since=args.since, until=args.until, plant=args.plant)
    head = store.head()
    meta = {"since": args.since, "until": args.until, "plant": args.plant, "store": store.name,
            "store_head": head}
    if args.json:
        from deviation.report import log_rows

        print_json({**meta, "count": len(rows), "records": log_rows(rows), "caution": caution_text()})
        return 0
    fmt = args.format
    if fmt is None and args.output != "-":
        fmt = _LOG_SUFFIX.get(Path(args.output).suffix.lower())
    fmt = fmt or "csv"
    from deviation import report

    report.write_log(args.output, fmt, report.build_log_context(rows, **meta))
    if args.output != "-":
        print(f"deviation log: {len(rows)} record(s) written to {args.output}", file=sys.stderr)
    return 0


# ---------------------------------------------------------------------------------------------
# verify / export / import


def _cmd_verify(args) -> int:
    store = store_of(args)
    res = store.verify(anchors=args.anchors, expect_head=args.expect_head, rebuild_summaries=not args.no_rebuild)
    if args.json:
        print_json(res.to_dict())
        return 0 if res.ok else 1
    c = make_console()
    head = res.head or {}
    sig = res.signatures or {}
    if res.ok:
        c.print(f"[green]✓ every hash chain holds[/green]: {res.checked_events} events in {res.records} records "
                f"({esc(store.name)})")
    else:
        b = res.first_broken or {}
        where = (f"record {esc(b.get('record_id'))} event {b.get('seq')} ({esc(b.get('kind'))}, store position "
                 f"{b.get('global_seq')}): " if b.get("seq") is not None else
                 (f"record {esc(b.get('record_id'))}: " if b.get("record_id") else ""))
        c.print(f"[bold red]✗ BROKEN[/bold red]: {where}{esc(b.get('reason'))}")
        for p in res.problems[1:10]:
            at = f"record {esc(p['record_id'])} event {p['seq']}: " if p.get("seq") is not None else ""
            c.print(f"  ✗ {at}{esc(p['reason'])}")
        c.print(f"{res.broken_count} problem(s) in {res.checked_events} events checked. Keep the store as "
                "found and compare it with a backup or an exported bundle.")
    c.print(f"store head {head.get('global_seq')} {head.get('global_hash')}  (write it down: a later verify "
            "with --expect-head checks the store still holds it)")
    if sig.get("checked"):
        c.print(f"  signatures: HMAC-SHA-256 under key {sig.get('key_id')} (from store position "
                f"{sig.get('keyed_from_global_seq')}; earlier events SHA-256, sealed under the key)")
    else:
        c.print(f"  [bold red]signatures not checked[/bold red]: {esc(sig.get('problem'))}")
    a = res.anchors or {}
    if a.get("file"):
        c.print(f"  anchors: {a.get('checked')} noted head(s) checked in {esc(a['file'])}"
                + (f", {a['unreadable_lines']} unreadable line(s) skipped" if a.get("unreadable_lines") else ""))
    else:
        c.print(f"  anchors: {esc(a.get('note', 'none'))}")
    if res.expected_head:
        e = res.expected_head
        c.print(f"  expected head {e['global_hash'][:16]}…: " + ("[green]found[/green]" if e["found"] else
                                                                 "[bold red]NOT in the chain[/bold red]"))
    lib = res.library or {}
    c.print("  process library: " + ("every filed process matches its chain event" if lib.get("ok") else
                                     f"{len(lib.get('problems', []))} problem(s)"))
    s = res.summaries or {}
    c.print(f"  summaries (holds board, record list, log): {s.get('checked')} checked"
            + (f", {s.get('rebuilt')} rebuilt from the events" if s.get("rebuilt") else "")
            + (f" [yellow](could not rebuild: {esc(s['rebuild_error'])})[/yellow]" if s.get("rebuild_error") else ""))
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
                    "sha256": bundle["sha256"], "store_head": bundle["head"]})
        return 0
    c = make_console()
    c.print(f"exported {len(bundle['records'])} record(s), {n_ev} events to {esc(args.output)} "
            f"(bundle sha256 {bundle['sha256']}; store head {bundle['head']['global_seq']} "
            f"{bundle['head']['global_hash']})")
    return 0


def _cmd_import(args) -> int:
    from deviation.records import keys
    from deviation.records.bundles import read_bundle

    actor, role = acting(args, "import")
    bundle = read_bundle(args.file)
    source_key = keys.read_key_file(args.source_key) if args.source_key else None
    store = store_of(args)
    res = store.import_bundle(bundle, actor=actor, role=role, source_key=source_key)
    if args.json:
        print_json(dict(res.to_dict(), ok=True))
        return 0
    c = make_console()
    c.print(f"imported {res.records_added} new record(s), {res.events_added} event(s); "
            f"{res.records_unchanged} already here unchanged. Every chain was verified and every event "
            "checked against the rules of its kind first; imported events are marked with their origin"
            + ("" if source_key else " (signatures not verified: give --source-key to check them)") + ".")
    return 0


# ---------------------------------------------------------------------------------------------
# replay


def _cmd_replay(args) -> int:
    from deviation.records.replay import F_ATOL, F_RTOL, P_ATOL, P_RTOL, replay

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
    t = Table(title=f"Replay with engine {esc(out['engine_version'])}, rule set {out['rule_set_sha256'][:12]}…")
    for col in ("record", "result", "why / what changed"):
        t.add_column(col)
    shown = [r for r in out["records"] if r["status"] != "reproduced"] if args.all else out["records"]
    for r in shown[:200]:
        look = {"reproduced": "[green]✓ reproduced[/green]", "changed": "[bold red]✗ changed[/bold red]",
                "not-evaluated": "· not evaluated", "error": "[bold red]✗ error[/bold red]"}[r["status"]]
        lines = list(r.get("why", []))
        lines += [f"{d['field']}: {d['stored']} -> {d['now']}" for d in r.get("differences", [])]
        t.add_row(r["id"], look, plain("\n".join(lines), one_line=False))
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


def _add_period(p: argparse.ArgumentParser) -> None:
    p.add_argument("--since", metavar="DATE", help="created on or after (YYYY-MM-DD or ISO time, UTC)")
    p.add_argument("--until", metavar="DATE", help="created on or before (YYYY-MM-DD: the whole day)")
    p.add_argument("--plant", help="only records of this plant (the case's deviation.plant)")


def register(subparsers) -> None:
    """Add the record commands to the ``deviation`` sub-parsers."""
    rsub = command_group(subparsers, "record", help="deviation records: enter, hold, decide, show, list, log",
                         dest="record_command")

    command(rsub, "new", _cmd_new, acts=True, arguments=(
        (("case",), {"help": "case file (TOML)"}),
        add_reading_options,
        (("--process-version",), {"default": None, "help": "version of the filed scheduled process"}),
        (("--entry-key",), {"metavar": "KEY", "default": None,
                            "help": "a key of this entry (e.g. terminal and sequence number): repeating the command "
                                    "with the same key after a failure returns the record already made, never a "
                                    "second one"}),
        add_rules_option,
    ), help="enter a deviation from a case file and evaluate it (operator)")
    command(rsub, "list", _cmd_list, acts=False, arguments=(
        (("--state",), {"help": "entered, evaluated, held, released or decided"}),
        (("--lot",), {}),
        (("--retort",), {}),
        _add_period,
    ), help="list records (state, guidance, decision, hold)")
    command(rsub, "show", _cmd_show, acts=False, arguments=(
        ID, (("--arrays",), {"action": "store_true", "help": "recompute the cold-spot arrays from the snapshot and "
                                                            "check them against the stored digest"}),
    ), help="show a record and its events")
    command(rsub, "log", _cmd_log, acts=False, arguments=(
        _add_period,
        (("--format", "-f"), {"choices": ("csv", "html", "pdf", "md"), "default": None,
                              "help": "output format (default: from the -o suffix, else csv)"}),
        (("-o", "--output"), {"default": "-", "metavar": "FILE",
                              "help": "file to write (default '-': standard output; a PDF needs a file)"}),
    ), help="the deviation log of a period (21 CFR 113.89): CSV, HTML, PDF or Markdown",
        description="Every deviation entered in the period with its lot, retort, process, what happened, the "
                    "guidance, the hold and the process authority's disposition (who, when, decision, reason); "
                    "open items first.")
    command(rsub, "amend", _cmd_amend, acts=True, arguments=(
        ID, (("case",), {"help": "case file (TOML)"}), REASON, add_reading_options, add_rules_option,
    ), help="amend a record with a new case snapshot, before a hold decision (operator)")
    command(rsub, "hold", _cmd_hold, acts=True, arguments=(ID, REASON),
            help="place the lot on hold (supervisor)")
    command(rsub, "release", _cmd_release, acts=True, arguments=(
        ID, REASON,
        (("--decision-seq",), {"type": int, "default": None, "metavar": "N",
                               "help": "the disposition event cited (default: the disposition in force)"}),
    ), help="lift the hold, citing the process authority's disposition (supervisor)",
        description="A held lot is released only by the process authority's disposition (release after "
                    "evaluation lifts the hold itself), or by a supervisor citing the disposition the record "
                    "holds, e.g. once a reprocess is done.")
    command(rsub, "decide", _cmd_decide, acts=True, arguments=(
        ID,
        (("--decision",), {"required": True, "metavar": "DECISION",
                           "help": "release-after-evaluation (or release), reprocess, destroy, or other with "
                                   "--decision-text"}),
        (("--decision-text",), {"default": None, "metavar": "TEXT", "help": "the decision in words, for 'other'"}),
        REASON,
        (("--result",), {"default": None, "help": "reprocess or incubation result"}),
        (("--supersedes",), {"type": int, "default": None, "metavar": "N",
                             "help": "correct the disposition in force (its event number), keeping both on record"}),
        (("--yes",), {"action": "store_true", "help": "confirm the summary without the prompt"}),
    ), help="record the disposition (process authority)",
        description="The decision is one of the fixed list; a summary is shown and must be confirmed (at the "
                    "prompt, or with --yes). A disposition in force is corrected only by a superseding one "
                    "(--supersedes N, with a reason).")
    command(rsub, "note", _cmd_note, acts=True, arguments=(ID, (("--text",), {"required": True})),
            help="add a note")
    command(rsub, "evaluate", _cmd_evaluate, acts=True, arguments=(ID, add_reading_options, add_rules_option),
            help="re-evaluate with the current engine and rules (appends 'evaluated')")

    command(subparsers, "replay", _cmd_replay, acts=False, arguments=(
        (("id",), {"nargs": "?", "help": "record id"}),
        (("--all",), {"action": "store_true", "help": "every record (a process pool, a progress bar)"}),
        (("--jobs",), {"type": int, "default": None, "help": "worker processes (default: all cores with --all)"}),
        add_rules_option,
    ), help="recompute records with the current engine and rules")
    command(subparsers, "verify", _cmd_verify, acts=False, arguments=(
        (("--anchors",), {"metavar": "FILE", "default": None,
                          "help": "an anchor file of noted heads (default: the store's own anchor file, when it "
                                  "exists)"}),
        (("--expect-head",), {"metavar": "HASH", "default": None,
                              "help": "a store head noted earlier (64 hex digits, or SEQ:HASH): the chain must "
                                      "still hold it"}),
        (("--no-rebuild",), {"action": "store_true",
                             "help": "report a differing summary table, do not rebuild it"}),
    ), help="check every hash chain, the library and the anchors of the store",
        description="Check every event's keyed hash and both chains, the filed-process library, the summary "
                    "table (rebuilt if it differs) and the store head against the anchor file and "
                    "--expect-head. Exit 0 only if all hold.")
    command(subparsers, "export", _cmd_export, acts=False, arguments=(
        (("ids",), {"nargs": "*", "metavar": "ID"}),
        (("--all",), {"action": "store_true"}),
        (("-o", "--output"), {"required": True, "metavar": "FILE"}),
    ), help="export records to a JSON bundle")
    command(subparsers, "import", _cmd_import, acts=True, arguments=(
        (("file",), {}),
        (("--source-key",), {"metavar": "FILE", "default": None,
                             "help": "the source store's key file: check the signatures of its events"}),
    ), help="import a JSON bundle (every chain and every event checked first)")

__all__ = ["register"]
