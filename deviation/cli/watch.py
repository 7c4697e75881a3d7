"""``deviation watch LOG.csv``: follow a retort record while the recorder writes it.

Human output: one line per flag (highlighted), a live line with F so far, projected F and the
extra minutes at process temperature to reach the target, and the caution. ``--json``: one JSON
object per line (``flag``, ``update``, ``notice``, ``record``, ``error``, and a last ``final``).
Exit codes: 0 the cycle ended and was evaluated; 2 bad input (including a truncated or rotated
log); 3 the record store failed; 4 role refused; 130 interrupted (a final line is written first).
"""

from __future__ import annotations

import sys
from pathlib import Path

from deviation.cli.common import actor_of, add_common_options, role_of
from deviation.cli.options import add_reading_options
from deviation.errors import DeviationError


def _process(args, store):
    """The filed Process and its (id, version): a library id (``ID`` or ``ID@N``) or a TOML path."""
    from deviation.records import processes as library

    ref = args.process
    path = Path(ref)
    if ref.endswith(".toml") or path.is_file():
        table = library.read_process_file(path)
        return library.validate_process(table, source=str(path)), None
    if store is None:
        raise DeviationError(f"'{ref}' names a filed process, which needs the record store "
                             "(drop --no-record, or give a process TOML file)", source="--process")
    entry = library.lookup(store, ref)
    resolved = library.ResolvedRef(ref, entry.process_id, entry.version, entry.sha256)
    return library.validate_process(entry.process, source=f"process {entry.ref}"), resolved


class _Human:
    """Rich output: flag lines printed as they come, a live status line, the summary at the end."""

    SYMBOL = {"flag": "⚠", "notice": "•", "record": "✎", "error": "✗", "skipped": "⚠"}

    def __init__(self, process, args) -> None:
        from rich.console import Console

        self.console = Console()
        self.process = process
        self.live = None
        self.last_printed_min = None
        self.interactive = self.console.is_terminal

    def start(self) -> None:
        from deviation.evaluate import CAUTION

        p = self.process
        self.console.print(f"[bold]Watching[/bold] the retort record for [bold]{p.id}[/bold] ({p.product}): "
                           f"{p.process_time_min:g} min at {p.process_temperature_C:.1f} °C, come-up "
                           f"{p.come_up_time_min:g} min, target F0 {p.target_F_min:g} min")
        self.console.print(f"[dim]{CAUTION}[/dim]")
        if self.interactive:
            from rich.live import Live

            self.live = Live("waiting for readings…", console=self.console, refresh_per_second=8,
                             transient=True)
            self.live.start()

    def stop(self) -> None:
        if self.live is not None:
            self.live.stop()
            self.live = None

    def _status(self, e: dict) -> str:
        ext = e.get("extension_to_target_min")
        ext_txt = (f"extra at {self.process.process_temperature_C:.1f} °C: [bold]{ext:.1f} min[/bold]"
                   if isinstance(ext, (int, float)) else f"extra: {e.get('extension_reason') or 'n/a'}")
        proj = e.get("projected_F_min")
        proj_txt = f"{proj:.2f}" if isinstance(proj, (int, float)) else "n/a"
        return (f"{e['time_min']:7.2f} min  {e['retort_C']:6.1f} °C  {e['phase']:<26}"
                f"F0 so far [bold]{e['delivered_F_min']:.2f}[/bold]  projected {proj_txt} "
                f"(target {e['target_F_min']:g})  {ext_txt}")

    def __call__(self, e: dict) -> None:
        from rich.markup import escape
        from rich.text import Text

        kind = e["type"]
        c = self.console
        if kind == "update":
            line = self._status(e)
            if self.live is not None:
                self.live.update(line)
            elif self.last_printed_min is None or e["time_min"] - self.last_printed_min >= 5.0:
                # Not a terminal: an update line every 5 record minutes, not one per reading.
                self.last_printed_min = e["time_min"]
                c.print(line)
        elif kind == "flag":
            deviation = e["code"] not in ("alternate-process-met",)
            word = "DEVIATION" if deviation else "NOTE"
            style = "bold red" if deviation else "bold green"
            c.print(f"[{style}]{self.SYMBOL['flag']} {word}[/{style}] {e['time_min']:7.2f} min  "
                    f"[bold]{escape(str(e['code']))}[/bold]: {escape(str(e['message']))}")
        elif kind in ("notice", "record", "error", "skipped"):
            style = {"notice": "yellow", "record": "cyan", "error": "bold red", "skipped": "bold yellow"}[kind]
            word = "BAD ROW " if kind == "skipped" else ""
            c.print(Text.assemble((f"{self.SYMBOL[kind]} {word}", style), (str(e["message"]), style)))
        elif kind == "final":
            self.stop()
            self.final(e)

    def final(self, e: dict) -> None:
        from rich.markup import escape

        from deviation.evaluate import CAUTION

        c = self.console
        c.print(f"[bold]Cycle {escape(str(e['reason']))}[/bold] after {e['rows']} readings.")
        if e.get("skipped"):
            c.print(f"[bold yellow]⚠ {len(e['skipped'])} bad row(s) skipped[/bold yellow] (lines "
                    + ", ".join(str(s["line"]) for s in e["skipped"]) + ")")
        if "delivered_F_min" not in e:
            c.print(e.get("error", "nothing evaluated"))
        else:
            g = e.get("guidance") or {}
            if (e.get("cycle") or {}).get("running"):
                proj = e.get("projected_F_min")
                c.print("  the record stops before the cycle ended: no figure is delivered yet; "
                        + (f"projected F0 {proj:.2f} min if the rest ran as filed" if isinstance(proj, (int, float))
                           else "no projection"))
            label = "F0 so far" if (e.get("cycle") or {}).get("running") else "delivered F0"
            c.print(f"  {label} [bold]{e['delivered_F_min']:.2f} min[/bold] (target {e['target_F_min']:g} min, "
                    f"scheduled {e['scheduled_F_min']:.2f} min); botulinum log reductions "
                    f"{e['botulinum_log_reductions']:.1f} (required {e['botulinum_log_reductions_required']:g})")
            codes = [f["code"] for f in e.get("flags", [])]
            c.print(f"  flags: {', '.join(codes) if codes else 'none'}")
            if g.get("disposition"):
                c.print(f"  guidance: [bold]{str(g['disposition']).upper()}[/bold]")
        if e.get("record_id"):
            c.print(f"  deviation record [bold]{e['record_id']}[/bold]: a supervisor holds it with "
                    f"'deviation record hold {e['record_id']} --reason ...'")
        c.print(f"[bold]{CAUTION}[/bold]")


def _cmd_watch(args) -> int:
    from deviation.live.watch import LogFollower, Watch, event_json
    from deviation.records.replay import rule_set_from
    from deviation.records.store import open_store

    actor, role = actor_of(args), (role_of(args) or "operator")
    store = None if args.no_record else open_store(args.db)
    process, resolved = _process(args, store)
    if args.json:
        def out(e: dict) -> None:
            sys.stdout.write(event_json(e) + "\n")
            sys.stdout.flush()
        human = None
    else:
        human = out = _Human(process, args)
    with LogFollower(Path(args.log)) as follower:
        watch = Watch(process, lot=args.lot, retort_id=args.retort, initial_temperature_C=args.initial_temperature_C,
                      lot_size_containers=args.lot_size, store=store, actor=actor, role=role,
                      process_ref=resolved, source=str(args.log), record_gap_limit_min=args.record_gap_limit_min,
                      conservative=args.conservative, rule_set=rule_set_from(args.rules) if args.rules else None,
                      on_event=out)
        if human is not None:
            human.start()
        try:
            final = watch.run(follower, poll_s=args.poll_s, until_end=args.until_end, idle_s=args.idle_s)
        finally:
            if human is not None:
                human.stop()
    return 3 if final.get("store_error") else 0


def register(subparsers) -> None:
    """Add ``watch`` to the ``deviation`` sub-parsers."""
    p = subparsers.add_parser(
        "watch", help="follow a retort log as the recorder writes it; raise each deviation as it happens",
        description="Follow a retort log (CSV: time_min or time, temperature_C or temperature_F) that a "
                    "recorder is still writing. Each deviation is raised with the reading that shows it; "
                    "the deviation record is started in the store at the first one. Guidance only: the "
                    "process authority decides.")
    p.add_argument("log", metavar="LOG.csv", help="the retort log being written")
    p.add_argument("--process", required=True, metavar="ID",
                   help="the filed process: an id in the library ('ID' latest active, 'ID@N' version N), "
                        "or a path to a process TOML file (handy for a demo; the record then names no "
                        "library version)")
    p.add_argument("--lot", required=True, help="plant lot code")
    p.add_argument("--retort", required=True, help="retort id")
    p.add_argument("--initial-temperature-C", dest="initial_temperature_C", type=float, default=None,
                   metavar="X", help="measured initial temperature [°C] (default: the filed minimum, said so)")
    p.add_argument("--lot-size", type=int, default=1, metavar="N", help="containers in the lot (default 1)")
    p.add_argument("--record-gap-limit-min", type=float, default=2.0, metavar="MIN",
                   help="longest gap between readings accepted [min] (default 2)")
    p.add_argument("--until-end", action="store_true",
                   help="stop at the end of the file once it has not grown for --idle-s seconds "
                        "(default: stop when cooling is done)")
    p.add_argument("--idle-s", type=float, default=3.0, metavar="S", help="with --until-end (default 3)")
    p.add_argument("--poll-s", type=float, default=0.25, metavar="S", help="how often the file is read (default 0.25)")
    add_reading_options(p)
    p.add_argument("--rules", action="append", metavar="FILE_OR_DIR",
                   help="a plant rule file or folder laid over the default rules (repeatable)")
    p.add_argument("--no-record", action="store_true", help="do not start a deviation record (no store)")
    add_common_options(p, acts=True)
    p.set_defaults(handler=_cmd_watch)


__all__ = ["register"]
