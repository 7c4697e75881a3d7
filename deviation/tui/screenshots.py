"""Saves the README's screenshots: one deviation walked through the screens of a fresh demo store."""

from __future__ import annotations


async def save_screens(out_dir, *, cases_dir=None) -> list[str]:
    """Walk one deviation through the screens of a fresh demo store, saving an SVG of each.

    The README's screenshots (``docs/screens``) are made by this walk, headless, at 100x30.
    """
    from datetime import datetime
    from pathlib import Path

    from textual.widgets import Input, Select

    from deviation.tui.app import build_app
    from deviation.tui.screens.record import RecordScreen

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
        app.push_screen(RecordScreen(rid))
        await settle(pilot)
        await pilot.press("d")
        await pilot.pause()
        d = app.screen
        d.query_one("#field-decision", Select).value = "reprocess"
        d.query_one("#field-reason", Input).value = "F0 short of the filed target; reprocess as filed"
        await pilot.pause()
        shot("5-disposition-dialog")
        await pilot.press("ctrl+s")  # the summary to confirm before it is written
        await pilot.pause()
        await pilot.press("y")
        await settle(pilot)
        app.set_identity("ada", "auditor")
        app.open_audit(rid)
        await settle(pilot)
        shot("6-audit-replay")
        await pilot.press("f1")
        await settle(pilot)
        shot("7-help")
    return saved
