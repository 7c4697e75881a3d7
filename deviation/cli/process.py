"""Process-library commands of the ``deviation`` CLI: ``process add | list | show | retire``.

Same conventions as the record commands: ``--db URL_OR_PATH``, ``--actor NAME`` (default: the
OS user), ``--role ROLE`` where a command writes (filing and retiring need process-authority),
``--json`` prints one JSON object. Exit codes: 0 done; 2 bad input; 3 store error; 4 role refused.
"""

from __future__ import annotations

from deviation.cli.common import (
    ID,
    REASON,
    actor_of,
    command,
    command_group,
    caution_text,
    esc,
    make_console,
    plain,
    print_caution,
    print_json,
    role_of,
    store_of,
)


def _cmd_add(args) -> int:
    from deviation.records import processes as library

    store = store_of(args)
    filed = library.add_process(store, args.file, actor=actor_of(args), role=role_of(args), reason=args.reason)
    entry = library.get_process(store, filed.process_id, filed.version)
    if args.json:
        print_json({"id": filed.process_id, "version": filed.version, "ref": entry.ref,
                     "new_version": filed.new_version, "scheduled_F_min": filed.scheduled_F_min,
                     "target_F_min": entry.target_F_min, "warning": filed.warning,
                     "sha256": entry.sha256, "caution": caution_text()})
        return 0
    c = make_console()
    what = "filed" if filed.new_version else "already filed"
    c.print(f"[bold]{esc(entry.process_id)}[/bold] version [bold]{entry.version}[/bold] {what}: "
            f"{esc(entry.product)}")
    c.print(f"  scheduled-process F0 (the process's own model, filed cycle) "
            f"{filed.scheduled_F_min:.2f} min; filed target {entry.target_F_min:.2f} min")
    if filed.warning:
        c.print(f"  [bold yellow]⚠ warning[/bold yellow]: {esc(filed.warning)}")
    if entry.reason:
        c.print(f"  reason: {esc(entry.reason)}")
    c.print(f"  cases name it as process_ref = \"{esc(entry.process_id)}\" (latest) or \"{esc(entry.ref)}\"")
    print_caution(c)
    return 0


def _cmd_list(args) -> int:
    from deviation.records import processes as library

    rows = library.list_processes(store_of(args), include_retired=args.all, all_versions=args.versions)
    if args.json:
        print_json({"processes": [r.to_dict(with_process=False) for r in rows]})
        return 0
    from rich.table import Table

    c = make_console()
    if not rows:
        c.print("no filed processes" + ("" if args.all else " (active; --all shows retired ones)")
                + ": a process authority files one with 'deviation process add FILE'")
        return 0
    t = Table(title="Filed scheduled processes")
    for col in ("id", "version", "product", "process", "F0 sched./target [min]", "filed", "state"):
        t.add_column(col)
    for r in rows:
        p = r.process
        temp = p.get("process_temperature_C")
        temp_txt = f"{temp:g} °C" if isinstance(temp, (int, float)) else \
            f"{p.get('process_temperature_F', '?')} °F"
        F_txt = f"{r.scheduled_F_min:.2f} / {r.target_F_min:.2f}"
        if r.scheduled_F_min < r.target_F_min:
            F_txt = f"[yellow]{F_txt} ⚠[/yellow]"
        state = "active" if r.active else f"retired ({r.retired.reason})"
        t.add_row(plain(r.process_id), str(r.version), plain(r.product),
                  plain(f"{p.get('process_time_min', '?')} min at {temp_txt}"),
                  F_txt, plain(f"{r.filed_utc[:10]} by {r.actor}"), plain(state))
    c.print(t)
    return 0


def _cmd_show(args) -> int:
    from deviation.records import processes as library

    store = store_of(args)
    entry = library.get_process(store, args.id, args.version)
    hist = library.history(store, args.id)
    if args.json:
        d = entry.to_dict()
        d["history"] = hist
        print_json(d)
        return 0
    from rich.panel import Panel

    c = make_console()
    state = "[green]active[/green]" if entry.active else (
        f"[yellow]retired[/yellow] on {entry.retired.retired_utc[:10]} by {esc(entry.retired.actor)}: "
        f"{esc(entry.retired.reason)}")
    head = (f"{esc(entry.product)}\nversion [bold]{entry.version}[/bold] of {entry.latest_version}, "
            f"filed {entry.filed_utc} by {esc(entry.actor)} ({esc(entry.role)}); {state}\n"
            f"scheduled-process F0 {entry.scheduled_F_min:.2f} min, target {entry.target_F_min:.2f} min"
            + (f"\nreason: {esc(entry.reason)}" if entry.reason else "")
            + f"\nsha256 {entry.sha256} (rechecked against the store's chain on this read)")
    c.print(Panel(head, title=f"Filed process {esc(entry.process_id)}"))
    for line in _toml_lines(entry.process):
        c.print(line, markup=False, highlight=False)
    c.print("versions: " + ", ".join(
        f"{v['version']} ({v['filed_utc'][:10]}{', retired' if not v['active'] else ''})"
        for v in hist["versions"]))
    return 0


def _toml_lines(table: dict, prefix: str = "process") -> list[str]:
    """The table as TOML-like lines (scalars first, then sub-tables and arrays of tables)."""
    import json

    out = [f"[{prefix}]"]
    subs = []
    for k, v in table.items():
        if isinstance(v, dict):
            subs.append((k, [v], False))
        elif isinstance(v, list) and v and all(isinstance(x, dict) for x in v):
            subs.append((k, v, True))
        else:
            out.append(f"{k} = {json.dumps(v, ensure_ascii=False)}")
    for k, items, array in subs:
        for item in items:
            name = f"{prefix}.{k}"
            lines = _toml_lines(item, name)
            lines[0] = f"[[{name}]]" if array else f"[{name}]"
            out += lines
    return out


def _cmd_retire(args) -> int:
    from deviation.records import processes as library

    store = store_of(args)
    r = library.retire_process(store, args.id, reason=args.reason, actor=actor_of(args), role=role_of(args))
    if args.json:
        print_json({"id": args.id, "retired": r.to_dict()})
        return 0
    c = make_console()
    c.print(f"[bold]{esc(args.id)}[/bold] retired (every version up to {r.up_to_version}): {esc(r.reason)}")
    c.print(f"  '{esc(args.id)}' no longer resolves; '{esc(args.id)}@N' still reads version N for old cases")
    return 0


def register(subparsers) -> None:
    """Add the ``process`` commands to the ``deviation`` sub-parsers."""
    sub = command_group(subparsers, "process", help="the library of filed scheduled processes",
                        dest="process_command")

    command(sub, "add", _cmd_add, acts=True, arguments=(
        (("file",), {"help": "process file (TOML)"}),
        (("--reason",), {"default": None, "help": "why it is filed; required when the model's scheduled-process "
                                                  "F0 is below the target"}),
    ), help="file a scheduled process, or a new version of one (process authority)",
        description="File a process file (the [process] table of the case contract with its sub-tables, as "
                    "in demo_cases/processes/). Filing an id again adds the next version; nothing is "
                    "overwritten.")
    command(sub, "list", _cmd_list, acts=False, arguments=(
        (("--all",), {"action": "store_true", "help": "include retired processes"}),
        (("--versions",), {"action": "store_true", "help": "every version, not only the latest"}),
    ), help="filed processes (latest version of each active id)")
    command(sub, "show", _cmd_show, acts=False, arguments=(
        ID, (("--version",), {"type": int, "default": None, "metavar": "N", "help": "version (default: the latest)"}),
    ), help="one filed process, with its versions")
    command(sub, "retire", _cmd_retire, acts=True, arguments=(ID, REASON),
            help="retire a process id (process authority); history is kept")

__all__ = ["register"]
