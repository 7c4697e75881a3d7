"""``deviation tui``: the terminal UI (floor entry, holds board, audit)."""

from __future__ import annotations

import argparse


def _run(args: argparse.Namespace) -> int:
    from deviation.tui.app import build_app

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


async def save_screens(out_dir, *, cases_dir=None) -> list[str]:
    """Walk one deviation through the screens of a fresh demo store, saving an SVG of each.

    The README's screenshots (``docs/screens``) are made by this walk, headless, at 100x30.
    """
    from datetime import datetime
    from pathlib import Path

    from textual.widgets import Input, Select

    from deviation.tui.app import build_app

    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    app = build_app(demo=True, actor="olga", role="operator", cases_dir=cases_dir,
                    clock=lambda: datetime(2026, 11, 20, 8, 50))
    saved: list[str] = []

    async def settle(pilot) -> None:
        await pilot.pause()
        await app.workers.wait_for_complete()
        await pilot.pause(0.2)

    def shot(name: str) -> None:
        saved.append(app.save_screenshot(f"{name}.svg", path=str(out)))

    async with app.run_test(size=(100, 30)) as pilot:
        s = app.screen
        s.query_one("#process", Select).value = next(k for k, p in s.processes.items() if p.id == "OH-CHL-87x115")
        for name, value in (("lot", "CHL-261120-S"), ("retort", "R3"), ("lot_size", "4800"),
                            ("initial_temperature", "48"), ("cycle_start", "08:00")):
            s.query_one(f"#{name}", Input).value = value
        await settle(pilot)
        for at, reading in (("08:30", "114.5"), ("08:44", "121.1")):
            s.query_one("#reading", Input).value = reading
            s.query_one("#at", Input).value = at
            await pilot.press("ctrl+t")
        await settle(pilot)
        shot("1-floor-entry")
        await pilot.press("ctrl+g")
        await settle(pilot)
        shot("2-floor-curves")
        await pilot.press("ctrl+s")
        await pilot.pause()
        rid = s.saved_record_id
        app.set_identity("sam", "supervisor")
        await pilot.press("f3")
        await settle(pilot)
        shot("3-holds-board")
        board = app.screen
        await pilot.press("slash", *"CHL-261120-S", "enter", "h")
        await pilot.pause()
        await pilot.press(*"retort 3 fell to 114.5 C for 14 min", "enter")
        await settle(pilot)
        await pilot.press("enter")
        await settle(pilot)
        shot("4-record-timeline")
        await pilot.press("escape")
        board.query_one("#filter", Input).value = ""
        app.set_identity("pat", "process-authority")
        await pilot.pause()
        app.screen.query_one("#board").focus()
        app.push_screen(__import__("deviation.tui.screens.record", fromlist=["RecordScreen"]).RecordScreen(rid))
        await settle(pilot)
        await pilot.press("d")
        await pilot.pause()
        d = app.screen
        d.query_one("#field-decision", Input).value = "reprocess"
        d.query_one("#field-reason", Input).value = "F0 short of the filed target; reprocess as filed"
        await pilot.pause()
        shot("5-disposition-dialog")
        await pilot.press("ctrl+s")
        await settle(pilot)
        app.set_identity("ada", "auditor")
        app.open_audit(rid)
        await settle(pilot)
        shot("6-audit-replay")
        await pilot.press("f1")
        await settle(pilot)
        shot("7-help")
    return saved


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
