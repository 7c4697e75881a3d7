"""``deviation tui``: the terminal UI (floor entry, holds board, audit)."""

from __future__ import annotations

import argparse


def _run(args: argparse.Namespace) -> int:
    from deviation.tui import build_app, save_screens

    if args.screenshots:
        import asyncio

        for path in asyncio.run(save_screens(args.screenshots, cases_dir=args.cases)):
            print(path)
        return 0

    app = build_app(db=args.db, demo=args.demo, actor=args.actor, role=args.role, cases_dir=args.cases)
    if args.demo:
        import sys

        print(f"demo store: {app.ctx.store.name}", file=sys.stderr)
    app.run()
    return int(app.return_code or 0)


def register(subparsers) -> None:
    """Add ``tui`` to the ``deviation`` sub-parsers."""
    p = subparsers.add_parser(
        "tui", help="the terminal UI: enter a deviation at the retort, hold and decide, replay and verify")
    p.add_argument("--db", metavar="URL_OR_PATH", default=None,
                   help="record store (default: DEVIATION_DB, else deviation.db in the user data directory)")
    p.add_argument("--demo", action="store_true",
                   help="open a fresh demo store seeded from demo_cases/ (unless --db names one)")
    p.add_argument("--actor", metavar="NAME", default=None, help="who is at the terminal (default: the OS user)")
    p.add_argument("--role", metavar="ROLE", default=None,
                   help="operator, supervisor, process-authority or auditor (default: DEVIATION_ROLE, else "
                        "operator)")
    p.add_argument("--cases", metavar="DIR", default=None,
                   help="folder of filed processes (processes/*.toml) and case files (default: demo_cases/)")
    p.add_argument("--screenshots", metavar="DIR", default=None, help=argparse.SUPPRESS)
    p.set_defaults(handler=_run)


__all__ = ["register"]
