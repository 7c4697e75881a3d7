"""Helpers every command group shares: JSON and rich output, who is acting, the store, options,
and user text shown as data (never as markup)."""

from __future__ import annotations

import argparse
import getpass
import json
import os
import sys
from typing import Any, Callable

from deviation.errors import DeviationError


def caution_text() -> str:
    try:
        from deviation.evaluate import CAUTION
    except Exception:  # noqa: BLE001 - the engine may not import; the caution must still show
        return ("This is guidance, not a release. The process authority decides, in writing, what "
                "becomes of the lot; local regulations govern.")
    return CAUTION


def print_json(obj: Any, *, ensure_ascii: bool = False) -> None:
    """One JSON object on one line of stdout (NaN refused)."""
    sys.stdout.write(json.dumps(obj, separators=(",", ":"), ensure_ascii=ensure_ascii, allow_nan=False) + "\n")


def make_console():
    """A rich console for the commands' output; ``:name:`` in user text stays as typed."""
    from rich.console import Console

    return Console(emoji=False)


def esc(value: Any, *, one_line: bool = True) -> str:
    """User text for a rich markup string: control and direction characters made visible
    (:func:`deviation.records.text.visible`), then every ``[`` escaped, so it prints literally."""
    from rich.markup import escape

    from deviation.records.text import visible

    return escape(visible(value, one_line=one_line))


def plain(value: Any, *, one_line: bool = True, style: str = ""):
    """User text as a rich ``Text`` (a table cell, a panel line): never read as markup."""
    from rich.text import Text

    from deviation.records.text import visible

    return Text(visible(value, one_line=one_line), style=style)


def print_caution(console) -> None:
    console.print(f"[dim]{esc(caution_text())}[/dim]")


def actor_of(args) -> str:
    if args.actor is not None:
        name = args.actor.strip()
        if not name or any(not ch.isprintable() for ch in name):
            raise DeviationError(f"--actor {args.actor!r}: expected a person's name (printable, not blank); "
                                 "the record says who did what", source="--actor")
        return name
    try:
        return getpass.getuser()
    except Exception:  # noqa: BLE001
        raise DeviationError("no OS user name found; give --actor NAME", source="--actor") from None


def role_of(args) -> str | None:
    return args.role or os.environ.get("DEVIATION_ROLE") or None


def acting(args, action: str) -> tuple[str, str]:
    """Who acts and in which role, checked for ``action`` before anything is read or written."""
    from deviation.records import roles

    actor = actor_of(args)
    return actor, roles.check_role(actor, role_of(args), action)


def store_of(args):
    from deviation.records.store import open_store

    return open_store(args.db)


def add_common_options(p: argparse.ArgumentParser, *, acts: bool) -> None:
    p.add_argument("--db", metavar="URL_OR_PATH", default=None,
                   help="record store: an SQLite file or a database URL (default: DEVIATION_DB, "
                        "else deviation.db in the user data directory)")
    p.add_argument("--actor", metavar="NAME", default=None, help="who acts (default: the OS user)")
    if acts:
        p.add_argument("--role", metavar="ROLE", default=None,
                       help="operator, supervisor, process-authority or auditor (default: DEVIATION_ROLE)")
    p.add_argument("--json", action="store_true", help="print one JSON object")


def add_rules_option(p: argparse.ArgumentParser) -> None:
    p.add_argument("--rules", action="append", metavar="FILE_OR_DIR",
                   help="a plant rule file or folder laid over the default rules (repeatable)")


#: Arguments of :func:`command`: a record or process id, and the reason every change of state gives.
ID = (("id",), {})
REASON = (("--reason",), {"required": True})


def command(sub, name: str, handler: Callable[[argparse.Namespace], int], *, acts: bool,
            arguments=(), **parser_options) -> argparse.ArgumentParser:
    """A sub-command: its parser (``parser_options``: help, description), then ``arguments`` in
    order (``(names, options)`` pairs for ``add_argument``, or a function that adds a group,
    e.g. ``add_rules_option``), the common options and the handler."""
    p = sub.add_parser(name, **parser_options)
    for argument in arguments:
        if callable(argument):
            argument(p)
        else:
            names, options = argument
            p.add_argument(*names, **options)
    add_common_options(p, acts=acts)
    p.set_defaults(handler=handler)
    return p


def command_group(subparsers, name: str, *, help: str, dest: str):
    """A command with sub-commands (``deviation record …``): alone it prints its usage; returns
    the sub-parsers to add the sub-commands to."""
    top = subparsers.add_parser(name, help=help)
    top.set_defaults(handler=usage_handler(top))
    return top.add_subparsers(dest=dest, metavar="SUBCOMMAND")


def usage_handler(parser: argparse.ArgumentParser) -> Callable[[argparse.Namespace], int]:
    def handler(args) -> int:
        parser.print_help(sys.stderr)
        return 2

    return handler


def after_write(what: str, show: Callable[[], int]) -> int:
    """Show what a write did; the write has committed, so a failure to *show* it (a lost
    connection, a broken terminal) is reported in one line and is not an error of the write."""
    try:
        return show()
    except BrokenPipeError:
        return 0
    except Exception as exc:  # noqa: BLE001 - never a traceback after a write that succeeded
        msg = exc.message if isinstance(exc, DeviationError) else f"{type(exc).__name__}: {exc}"
        print(f"{what} was written; it could not be shown ({msg}). Check it with: deviation record show",
              file=sys.stderr)
        return 0
