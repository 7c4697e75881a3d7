"""``deviation report (ID | CASE) --format html|pdf|md -o FILE``: the written evaluation report.

A path to an existing ``.toml`` file is a case (no timeline: not a stored record); anything else
is a record id looked up in the record store, whose latest case snapshot is evaluated again
with the rules given and whose events make the timeline.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from deviation.cli.options import add_reading_options
from deviation.errors import DeviationError

_SUFFIX_FORMAT = {".html": "html", ".htm": "html", ".pdf": "pdf", ".md": "md", ".markdown": "md"}


def register(subparsers) -> None:
    """Add the ``report`` command to the ``deviation`` command line."""
    p = subparsers.add_parser(
        "report",
        help="write the evaluation report (HTML, PDF or Markdown) for a record or a case file",
        description="Write the evaluation report of a stored record (by id) or of a case file (.toml). "
                    "Guidance only: the process authority decides; local regulations govern.",
    )
    p.add_argument("targets", metavar="ID|CASE", nargs="+",
                   help="record id in the store, or a case file ending in .toml; with several, -o is a "
                        "folder and each report is written there as <name>.<format>")
    p.add_argument("--format", "-f", choices=("html", "pdf", "md"), default=None,
                   help="output format (default: from the -o suffix)")
    p.add_argument("-o", "--output", required=True, metavar="FILE",
                   help="file to write ('-' writes HTML or Markdown to standard output); a folder with "
                        "several targets")
    p.add_argument("--db", default=None, help="record store: SQLite path or SQLAlchemy URL")
    p.add_argument("--rules", action="append", metavar="FILE_OR_DIR",
                   help="a plant rule file or folder laid over the default rules (repeatable)")
    add_reading_options(p)
    p.add_argument("--uncertainty", action="store_true",
                   help="run the Monte Carlo uncertainty estimate (default: when the case asks for it)")
    p.set_defaults(handler=run_report)


def _format(args) -> str:
    if args.format:
        return args.format
    fmt = _SUFFIX_FORMAT.get(Path(args.output).suffix.lower())
    if fmt is None:
        raise DeviationError(f"cannot tell the report format from {args.output!r}: give --format html, pdf or md")
    return fmt


def _is_case_file(target: str) -> bool:
    path = Path(target)
    return path.suffix.lower() == ".toml" and path.is_file()


def _open_store(db):
    try:
        from deviation.records.store import open_store
    except ImportError:
        raise DeviationError("the record store is not available in this installation; give a case file "
                             "(.toml) instead of a record id") from None
    return open_store(db)


def _from_record(args, rule_set):
    from deviation.errors import StoreError
    from deviation.evaluate import evaluate_case
    from deviation.inputs.case import LoadedCase

    store = _open_store(args.db)
    try:
        try:
            view = store.record(args.target)
        except StoreError as exc:
            hint = (" (a case file must be an existing file ending in .toml)"
                    if args.target.lower().endswith(".toml") or "/" in args.target else "")
            raise DeviationError(f"no record {args.target!r} in the store {getattr(store, 'name', args.db)}: "
                                 f"{exc.message}{hint}") from None
        loaded = LoadedCase.from_snapshot(view.snapshot)
        events = [e.to_dict() if hasattr(e, "to_dict") else dict(e) for e in view.events]
        record_hash = view.head_hash
    finally:
        close = getattr(store, "close", None)
        if close is not None:
            close()
    # The report shows the evaluation the record holds (what was signed off), when it is of the
    # latest snapshot and no other options were asked for; otherwise it evaluates again.
    options = _evaluate_options(args)
    stored = (view.evaluation_event or {}).get("options", {}).get("conservative", False)
    if view.evaluation is not None and view.evaluation_current and options == {"conservative": stored}:
        from deviation.evaluate import Evaluation

        ev = Evaluation.model_validate(view.evaluation)
    else:
        ev = evaluate_case(loaded, **options, rule_set=rule_set)
    return loaded, ev, events, view.id, record_hash


def _evaluate_options(args) -> dict:
    options = {"conservative": args.conservative}
    if getattr(args, "uncertainty", False):
        options["uncertainty"] = True
    return options


def run_report(args) -> int:
    """Handler of ``deviation report``: one report, or one per target into a folder."""
    if len(args.targets) == 1 and not Path(args.output).is_dir():
        args.target = args.targets[0]
        return _run_one(args)
    if not args.format:
        raise DeviationError("with several targets or an output folder, give --format html, pdf or md")
    folder = Path(args.output)
    folder.mkdir(parents=True, exist_ok=True)
    for target in args.targets:
        one = argparse.Namespace(**{**vars(args), "target": target,
                                    "output": str(folder / f"{Path(target).stem}.{args.format}")})
        _run_one(one)
        print(f"wrote {one.output}")
    return 0


def _run_one(args) -> int:
    """One report: returns the exit code (errors raise DeviationError)."""
    from deviation import report
    from deviation.evaluate import evaluate_case
    from deviation.guidance import load_rule_set
    from deviation.inputs.case import load_case

    fmt = _format(args)
    if fmt == "pdf" and args.output == "-":
        raise DeviationError("a PDF is not written to the terminal: give -o FILE.pdf")
    rule_set = load_rule_set([Path(p) for p in (args.rules or [])])
    if _is_case_file(args.target):
        resolver = None
        if args.db:
            from deviation.records import processes as library

            resolver = library.resolver(_open_store(args.db))
        loaded = load_case(args.target, process_resolver=resolver)
        ev = evaluate_case(loaded, **_evaluate_options(args), rule_set=rule_set)
        events = record_id = record_hash = None
    else:
        if args.target.lower().endswith(".toml"):
            raise DeviationError(f"case file not found: {args.target}")
        loaded, ev, events, record_id, record_hash = _from_record(args, rule_set)
    ctx = report.build_report_context(loaded, ev, rule_set=rule_set, events=events, record_id=record_id,
                                      record_hash=record_hash, with_plots=fmt != "md")
    report.write_report(args.output, fmt, ctx)
    return 0


def main(argv=None) -> int:  # pragma: no cover - convenience until cli.py registers the command
    """Run ``deviation report`` alone (the lead registers it in ``deviation.cli``)."""
    import sys

    parser = argparse.ArgumentParser(prog="deviation")
    sub = parser.add_subparsers(dest="command")
    register(sub)
    args = parser.parse_args(["report", *(sys.argv[1:] if argv is None else argv)])
    try:
        return run_report(args)
    except DeviationError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return exc.exit_code


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
