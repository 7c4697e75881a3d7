"""The ``deviation`` command line.

Every command maps the project's own errors to a one- or two-line message and an exit code
(2: bad input, 3: store, 4: role refused); no traceback reaches the user.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from deviation import __version__
from deviation.cli.common import print_json
from deviation.cli.options import add_reading_options
from deviation.errors import DeviationError

COMMANDS = {}


def command(name: str):
    def deco(fn):
        COMMANDS[name] = fn
        return fn
    return deco


def _print_json(obj) -> None:
    print_json(obj, ensure_ascii=True)


def _load_rules(args):
    from deviation.guidance import load_rule_set

    return load_rule_set([Path(p) for p in (args.rules or [])])


def _add_rules_option(p: argparse.ArgumentParser) -> None:
    p.add_argument("--rules", action="append", metavar="FILE_OR_DIR",
                   help="a plant rule file or folder laid over the default rules (repeatable)")


def build_parser(command: str | None = None) -> argparse.ArgumentParser:
    """The ``deviation`` parser; with ``command``, only that command's module is loaded."""
    parser = argparse.ArgumentParser(
        prog="deviation",
        description="Evaluate a thermal-process deviation of a low-acid canned food. "
                    "Guidance only: the process authority decides; local regulations govern.",
    )
    parser.add_argument("--version", action="version", version=f"deviation {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    p = sub.add_parser("evaluate", help="evaluate a deviation case file")
    p.add_argument("case", help="case file (TOML)")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    add_reading_options(p)
    p.add_argument("--uncertainty", action="store_true",
                   help="Monte Carlo over fh, jh, initial temperature and spores (spreads from "
                        "[deviation.uncertainty] or the documented defaults)")
    p.add_argument("--db", help="record store (for process_ref)", default=None)
    _add_rules_option(p)

    p = sub.add_parser("schema", help="print the JSON schema of the case file")

    p = sub.add_parser("rules", help="check or explain guidance rules")
    rsub = p.add_subparsers(dest="rules_command", metavar="SUBCOMMAND")
    rc = rsub.add_parser("check", help="validate a rule file (default: the shipped rules)")
    rc.add_argument("file", nargs="?")
    rc.add_argument("--json", action="store_true")
    re_ = rsub.add_parser("explain", help="show each rule for a case: fired or not, and why")
    re_.add_argument("case")
    re_.add_argument("--json", action="store_true")
    add_reading_options(re_)
    _add_rules_option(re_)

    for register in _extensions(command):
        register(sub)
    return parser


_CORE_COMMANDS = ("evaluate", "schema", "rules")
# Command groups that live in their own modules (each with ``register(subparsers)``) and the
# commands each adds, so that a command imports only its own module: `deviation evaluate` does
# not pay for the store, the TUI or the fitting code. A command not listed here (help, a typo, a
# command added to a module later) loads them all.
_EXTENSION_COMMANDS = {
    "records": ("record", "replay", "verify", "export", "import"),
    "fit": ("fit",),
    "report": ("report",),
    "process": ("process",),
    "watch": ("watch",),
    "tui": ("tui",),
    "review": ("review",),
}


def _extensions(command: str | None = None):
    """``register`` of the command-group modules ``command`` needs (all of them by default)."""
    import importlib

    if command in _CORE_COMMANDS or command == "--version":
        return []
    wanted = [m for m, names in _EXTENSION_COMMANDS.items() if command in names] or list(_EXTENSION_COMMANDS)
    return [importlib.import_module(f"deviation.cli.{m}").register for m in wanted]


def _command_in(argv: list[str]) -> str | None:
    """The command word of ``argv`` (its first argument; ``--version`` as itself), or None."""
    return argv[0] if argv and (not argv[0].startswith("-") or argv[0] == "--version") else None


@command("schema")
def _schema(args) -> int:
    from deviation.inputs.case import case_json_schema

    _print_json(case_json_schema())
    return 0


def _resolver(args):
    if not getattr(args, "db", None):
        return None
    from deviation.records import processes as library
    from deviation.records.store import open_store

    return library.resolver(open_store(args.db))


@command("evaluate")
def _evaluate(args) -> int:
    from deviation.evaluate import evaluate_case
    from deviation.inputs.case import load_case

    loaded = load_case(args.case, process_resolver=_resolver(args))
    ev = evaluate_case(loaded, conservative=args.conservative, rule_set=_load_rules(args),
                       uncertainty=True if args.uncertainty else None)
    if args.json:
        _print_json(ev.model_dump(mode="json"))
    else:
        from deviation.cli.render import print_evaluation

        print_evaluation(ev)
    return 0


@command("rules")
def _rules(args) -> int:
    from rich.console import Console
    from rich.table import Table

    from deviation import guidance as R

    if args.rules_command == "check":
        rs = R.check_rule_file(Path(args.file)) if args.file else R.load_rule_set([])
        if args.json:
            _print_json({"ok": True, "rules": len(rs.rules), "sha256": rs.sha256,
                         "sources": [str(s) for s in rs.sources]})
        else:
            Console().print(f"✓ {len(rs.rules)} rules valid ({', '.join(str(s) for s in rs.sources)}); "
                            f"rule-set sha256 {rs.sha256[:16]}…")
        return 0
    if args.rules_command == "explain":
        from deviation.evaluate import evaluate_case
        from deviation.inputs.case import load_case

        rs = _load_rules(args)
        ev = evaluate_case(load_case(args.case), conservative=args.conservative, rule_set=rs, what_if=False)
        rows = R.explain(rs, ev.facts, [f.code for f in ev.flags])
        if args.json:
            _print_json({"disposition": ev.guidance["disposition"],
                         "rules": [r.model_dump(mode="json") for r in rows]})
            return 0
        t = Table(title=f"Rules for lot {ev.lot}: disposition {ev.guidance['disposition']}")
        t.add_column("rule")
        t.add_column("disposition")
        t.add_column("fired")
        t.add_column("why")
        for r in rows:
            t.add_row(r.rule_id, r.disposition, "✓ yes" if r.fired else "· no", "\n".join(r.trace))
        console = Console()
        console.print(t)
        from deviation.evaluate import CAUTION

        console.print(CAUTION)
        return 0
    print("usage: deviation rules {check,explain} ...", file=sys.stderr)
    return 2


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else list(argv)
    parser = build_parser(_command_in(argv))
    args = parser.parse_args(argv)
    if not args.command:
        parser.print_help()
        return 2
    handler = COMMANDS.get(args.command) or getattr(args, "handler", None)
    try:
        return int(handler(args) or 0)
    except DeviationError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
