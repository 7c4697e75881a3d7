"""``deviation review SCHEDULE``: the daily record review of every cycle of a day.

Each cycle of the production schedule (CSV or TOML; see :func:`deviation.live.review.read_manifest`)
is screened against its filed process: reviewed clean, deviation found (flags and guidance; a
deviation record is opened in the store at once, never twice), or could not be reviewed and why.
``--sheet FILE.html|.pdf`` writes the review sheet for the reviewer's signature; ``--json`` prints
one JSON object. Exit codes: 0 every cycle reviewed clean; 1 a deviation was found or a cycle
could not be reviewed; 2 bad input; 3 the record store failed (a record not opened); 4 role refused.
"""

from __future__ import annotations

from deviation.cli.common import actor_of, add_common_options, add_rules_option, print_json, role_of
from deviation.cli.options import add_reading_options


def _progress(console, total: int):
    """A rich progress bar on the terminal (nothing when the output is not a terminal)."""
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    return Progress(TextColumn("reviewing cycles"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(),
                    TextColumn("{task.fields[last]}"), console=console, transient=True,
                    disable=not console.is_terminal)


def _found(c: dict) -> str:
    """What the review found, in one short cell."""
    codes = ", ".join(f["code"] for f in c.get("flags") or [])
    if c["status"] == "deviation":
        return f"{codes or 'see guidance'}\nguidance: {str(c.get('disposition')).upper()}"
    if c["status"] == "not-reviewed":
        return "\n".join(c["why"])
    return "no deviation in the record" + (f" (notes: {codes})" if codes else "")


def _print_human(review: dict, console) -> None:
    from rich.table import Table
    from rich.text import Text

    look = {"clean": ("✓ clean", "green"), "deviation": ("⚑ DEVIATION", "bold red"),
            "not-reviewed": ("✗ NOT REVIEWED", "bold yellow")}
    t = Table(title=Text(f"Daily record review · {review['plant'] or 'plant not named'} · "
                         f"{review['date'] or 'date not given'}"))
    for name in ("#", "status", "lot", "retort", "process", "F0 / target [min]", "found", "record"):
        t.add_column(name, overflow="fold")
    for i, c in enumerate(review["cycles"], 1):
        word, style = look[c["status"]]
        figures = ("—" if c.get("delivered_F_min") is None
                   else f"{c['delivered_F_min']:.2f} / {c['target_F_min']:.2f}")
        record = c.get("record_id") or ""
        if c.get("record") and c.get("record") != "opened":
            record = f"{record} ({c['record']})".strip()
        # Every cell is plain Text: what the schedule or a file says is never read as markup.
        t.add_row(str(i), Text(word, style=style), Text(c["lot"] or ""), Text(c["retort"] or ""),
                  Text(c.get("process_id") or c.get("process") or ""), Text(figures), Text(_found(c)),
                  Text(record))
    console.print(t)
    for i, c in enumerate(review["cycles"], 1):
        if c["status"] != "deviation":
            continue
        console.print(Text(f"#{i} lot {c['lot']}, retort {c['retort']}: guidance "
                           f"{str(c.get('disposition')).upper()}", style="bold"))
        for f in c["flags"]:
            console.print(Text(f"  ⚑ {f['code']}: {f['message']}"))
        for k, action in enumerate((c.get("guidance") or {}).get("actions", []), 1):
            console.print(Text(f"  {k}. {action}"))
        if c.get("record_error"):
            console.print(Text(f"  record not opened: {c['record_error']}", style="bold red"))
    n = review["counts"]
    summary = (f"{review['count']} cycles: {n['clean']} reviewed clean, {n['deviation']} with a deviation, "
               f"{n['not_reviewed']} not reviewed")
    if review["recorded"]:
        summary += (f"; deviation records: {n['records_opened']} opened, {n['records_already_open']} already "
                    f"open" + (f", {n['records_not_opened']} NOT opened" if n["records_not_opened"] else ""))
    else:
        summary += "; no record store (--no-record): no deviation record opened"
    console.print(Text(summary, style="bold"))
    if n["not_reviewed"]:
        console.print(Text("A cycle not reviewed is not clean: find its record and review it, or hold the lot.",
                           style="yellow"))
    console.print(Text(review["caution"], style="bold magenta"))


def run_review(args) -> int:
    """Handler of ``deviation review``."""
    from deviation.live.review import read_manifest, review_day

    if args.sheet:  # a sheet name that cannot be written is refused before the day is reviewed
        from deviation.report.review_sheet import sheet_format

        sheet_format(args.sheet)
    manifest = read_manifest(args.schedule, plant=args.plant or "", date=args.date or "")
    store = None
    if not args.no_record:
        from deviation.records.store import open_store

        store = open_store(args.db)
    console = None
    if not args.json:
        from rich.console import Console

        console = Console(stderr=True)
    kwargs = {"store": store, "actor": actor_of(args), "role": role_of(args) or "operator",
              "rule_paths": args.rules or [], "conservative": args.conservative, "jobs": args.jobs,
              "steam_on_tolerance_min": args.steam_on_tolerance_min}
    if console is None:
        review = review_day(manifest, **kwargs)
    else:
        with _progress(console, len(manifest.entries)) as bar:
            task = bar.add_task("review", total=len(manifest.entries), last="")

            def progress(done: int, total: int, line: dict) -> None:
                bar.update(task, completed=done, last=f"{line['retort']} {line['lot']}")

            review = review_day(manifest, progress=progress, **kwargs)
    if args.sheet:
        from deviation.report.review_sheet import write_review_sheet

        write_review_sheet(args.sheet, review)
        review["sheet"] = args.sheet
    if args.json:
        print_json(review)
    else:
        from rich.console import Console

        out = Console()
        _print_human(review, out)
        if args.sheet:
            out.print(f"review sheet for signature: {args.sheet}", markup=False)
    n = review["counts"]
    if n["records_not_opened"]:
        return 3
    return 0 if n["deviation"] == 0 and n["not_reviewed"] == 0 else 1


def register(subparsers) -> None:
    """Add ``review`` to the ``deviation`` sub-parsers."""
    p = subparsers.add_parser(
        "review", help="review every cycle of a day's production schedule; open a record for each deviation",
        description="Screen every retort cycle of a day's production schedule (CSV or TOML: lot, retort, "
                    "process, recorder_file, steam_on, initial_temperature_C, lot_size) against its filed "
                    "process. Each cycle is reviewed clean, found with a deviation (a deviation record is "
                    "opened in the store, never twice for the same row and file), or not reviewed and why. "
                    "Exit 0: every cycle clean; 1: a deviation or a cycle not reviewed. Guidance only: the "
                    "process authority decides; local regulations govern.")
    p.add_argument("schedule", metavar="SCHEDULE", help="the day's production schedule (.csv or .toml)")
    p.add_argument("--sheet", metavar="FILE", default=None,
                   help="write the review sheet for the reviewer's signature (.html or .pdf)")
    p.add_argument("--no-record", action="store_true",
                   help="screen only: open no deviation record (filed processes must then be TOML files)")
    p.add_argument("--plant", default=None, help="plant name for a schedule that does not give one")
    p.add_argument("--date", default=None, metavar="YYYY-MM-DD",
                   help="the production day, for steam_on times written as HH:MM")
    p.add_argument("--jobs", type=int, default=None, metavar="N",
                   help="worker processes (default: the machine's cores)")
    p.add_argument("--steam-on-tolerance-min", type=float, default=10.0, metavar="MIN",
                   help="largest gap between the schedule's steam-on and a recorder file's first clock "
                        "time before the file is taken for another cycle's (default 10)")
    add_reading_options(p)
    add_rules_option(p)
    add_common_options(p, acts=True)
    p.set_defaults(handler=run_review)


__all__ = ["register", "run_review"]
