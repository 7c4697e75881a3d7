"""Holds board and record screen driven with Pilot: find a saved entry, hold it as supervisor,
see the timeline, decide it as process authority; refusals read as in the CLI."""

import asyncio
import functools
from datetime import datetime

import pytest
from textual.widgets import DataTable, Input, Select

from deviation.records.store import open_store
from deviation.tui.app import build_app
from deviation.tui.screens.holds import HoldsScreen
from deviation.tui.screens.record import RecordScreen
from deviation.tui.widgets.results import plain
from deviation.tui.widgets.timeline import Timeline


def sync(fn):
    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        return asyncio.run(fn(*args, **kwargs))

    return wrapper


def clock():
    return datetime(2026, 11, 20, 8, 50, 0)


async def settle(pilot) -> None:
    await pilot.pause()
    await pilot.app.workers.wait_for_complete()
    await pilot.pause(0.1)  # the guidance and curves follow the figures by a frame


async def enter_drop(pilot, lot: str) -> str:
    """Operator: a chili lot with a 10-minute drop to 116 °C, saved; returns the record id."""
    s = pilot.app.screen
    s.query_one("#process", Select).value = next(k for k, p in s.processes.items() if p.id == "OH-CHL-87x115")
    for name, value in (("lot", lot), ("retort", "R4"), ("lot_size", "3000"),
                        ("initial_temperature", "50"), ("cycle_start", "08:00")):
        s.query_one(f"#{name}", Input).value = value
    s.query_one("#reading", Input).value = "116"
    s.query_one("#at", Input).value = "30"
    await pilot.press("ctrl+t")
    s.query_one("#reading", Input).value = "121.1"
    s.query_one("#at", Input).value = "40"
    await pilot.press("ctrl+t")
    await settle(pilot)
    await pilot.press("ctrl+s")
    await pilot.pause()
    return s.saved_record_id


def text_of(widget) -> str:
    return plain(widget.content, 120)


def board_lots(screen) -> list[str]:
    t = screen.query_one("#board", DataTable)
    return [str(t.get_row_at(i)[2]) for i in range(t.row_count)]


def notes(app) -> list[str]:
    return [n.message for n in app._notifications]


@pytest.fixture
def db(tmp_path, monkeypatch):
    monkeypatch.delenv("DEVIATION_DB", raising=False)
    monkeypatch.delenv("DEVIATION_ROLE", raising=False)
    return tmp_path / "holds.db"


@sync
async def test_saved_entry_is_held_by_a_supervisor(db):
    app = build_app(db=db, demo=True, actor="olga", role="operator", clock=clock)
    async with app.run_test(size=(100, 30)) as pilot:
        rid = await enter_drop(pilot, "CHL-HOLD-1")
        await pilot.press("f3")
        await pilot.pause()
        board = app.screen
        assert isinstance(board, HoldsScreen) and "CHL-HOLD-1" in board_lots(board)
        # Filter to the lot (typed into the filter box), then back to the table.
        await pilot.press("slash", *"HOLD-1", "enter")
        await pilot.pause()
        assert board_lots(board) == ["CHL-HOLD-1"]
        # The operator may not hold: the CLI's words.
        await pilot.press("h")
        await pilot.pause()
        assert "actor 'olga' (role operator) may not place-hold: that is for role supervisor" in notes(app)
        app.set_identity("sam", "supervisor")
        await pilot.press("h")
        await pilot.pause()
        await pilot.press(*"drop to 116 C for 10 min", "enter")
        await pilot.pause()
        assert "⏸ held" in str(board.query_one("#board", DataTable).get_row_at(0)[0])
        # Holding again is refused in place by the record-state rule.
        await pilot.press("h")
        await pilot.pause()
        await pilot.press(*"again", "enter")
        await pilot.pause()
        assert "it is already held" in text_of(app.screen.query_one("#dialog-error"))
        await pilot.press("escape")
        await pilot.pause()
    view = open_store(db).record(rid)
    assert view.state == "held"
    hold = view.events[-1]
    assert (hold.kind, hold.actor, hold.role, hold.payload) == (
        "hold-placed", "sam", "supervisor", {"reason": "drop to 116 C for 10 min"})


@sync
async def test_record_timeline_and_disposition(db):
    app = build_app(db=db, demo=True, actor="pat", role="process-authority", clock=clock)
    async with app.run_test(size=(100, 30)) as pilot:
        await pilot.press("f3")
        await pilot.pause()
        board = app.screen
        await pilot.press("slash", *"CHL-261104-A", "enter")  # the demo lot already held
        await pilot.pause()
        await pilot.press("enter")
        await pilot.pause()
        rec = app.screen
        assert isinstance(rec, RecordScreen)
        events = open_store(db).events(rec.record_id)
        assert rec.query_one(Timeline).row_count == len(events)
        assert "may now: evaluate, decide, note" in text_of(rec.query_one("#record-header"))
        await pilot.press("d")
        await pilot.pause()
        dialog = app.screen
        dialog.query_one("#field-decision", Input).value = "release"
        dialog.query_one("#field-reason", Input).value = "delivered F0 above the filed target"
        dialog.query_one("#field-result", Input).value = "incubation 10 days, no swells"
        await pilot.press("ctrl+s")
        await pilot.pause()
        assert rec.query_one(Timeline).row_count == len(events) + 1
        assert "⚖ disposition by pat: release" in text_of(rec.query_one("#record-header"))
        await pilot.press("escape")
        await pilot.pause()
        assert "CHL-261104-A" not in board_lots(board)  # decided: no longer open
        await pilot.press("a")  # all records
        await pilot.pause()
        assert "CHL-261104-A" in board_lots(board)


@sync
async def test_board_sorts_and_counts(db):
    app = build_app(db=db, demo=True, actor="sam", role="supervisor", clock=clock)
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("f3")
        await pilot.pause()
        board = app.screen
        assert board.sort_key == "disposition"
        first = str(board.query_one("#board", DataTable).get_row_at(0)[1])
        assert "reprocess" in first  # most severe first
        await pilot.press("s", "s")  # disposition -> state -> lot
        await pilot.pause()
        assert board.sort_key == "lot"
        lots = board_lots(board)
        assert lots == sorted(lots)
        summary = text_of(board.query_one("#board-summary"))
        assert summary.startswith(f"{len(lots)} of {len(lots)} open records · sorted by lot")
