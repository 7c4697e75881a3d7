"""Holds board and record screen driven with Pilot: find a saved entry, hold it as supervisor,
see the timeline, decide it as process authority (from the fixed list, after a confirmation);
the board shows the decision; refusals read as in the CLI; text with markup is shown as typed.

The store is seeded here with the demo plant's records in the regulation's workflow (a lot is
released only by the process authority's disposition)."""

import asyncio
import functools
from datetime import datetime
from pathlib import Path

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
    return [str(t.get_row_at(i)[3]) for i in range(t.row_count)]


DEMO = Path(__file__).resolve().parents[2] / "demo_cases"
# (case, what becomes of it): the demo plant's records, each in its state.
SEEDS = (("chili_temperature_drop.toml", "held"), ("peas_short_hold.toml", "evaluated"),
         ("tray_steam_failure.toml", "reprocess"), ("chili_no_deviation.toml", "evaluated"),
         ("peas_steam_loss.toml", "release-after-evaluation"))


def seed(db) -> None:
    """The demo library and records, written through the store as the roles would."""
    from deviation.evaluate import evaluate_case
    from deviation.inputs.case import load_case
    from deviation.records import processes as library

    store = open_store(db)
    for path in sorted((DEMO / "processes").glob("*.toml")):
        library.add_process(store, path, actor="pat", role="process-authority", reason="demo library")
    for name, fate in SEEDS:
        loaded = load_case(DEMO / name)
        dev = loaded.case.deviation
        rid = store.create_record(loaded.snapshot(), actor="olga", role="operator", lot=dev.lot,
                                  retort_id=dev.retort_id, process_id=loaded.case.process.id)
        store.add_evaluation(rid, evaluate_case(loaded, conservative=False).model_dump(mode="json"), actor="olga",
                             role="operator", snapshot_seq=1, options={"conservative": False, "what_if": True})
        if fate != "evaluated":
            store.place_hold(rid, reason="deviation found at the retort; set aside for evaluation", actor="sam",
                             role="supervisor")
        if fate not in ("evaluated", "held"):
            store.decide(rid, decision=fate, reason="process authority's evaluation", actor="pat",
                         role="process-authority")
    store.close()


def notes(app) -> list[str]:
    return [n.message for n in app._notifications]


@pytest.fixture
def db(tmp_path, monkeypatch):
    monkeypatch.delenv("DEVIATION_DB", raising=False)
    monkeypatch.delenv("DEVIATION_ROLE", raising=False)
    monkeypatch.setenv("DEVIATION_KEY_DIR", str(tmp_path / "keys"))
    path = tmp_path / "holds.db"
    seed(path)
    return path


@sync
async def test_saved_entry_is_held_by_a_supervisor(db):
    app = build_app(db=db, actor="olga", role="operator", clock=clock)
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
    app = build_app(db=db, actor="pat", role="process-authority", clock=clock)
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
        dialog.query_one("#field-decision", Select).value = "other"
        dialog.query_one("#field-reason", Input).value = "delivered F0 above the filed target"
        await pilot.press("ctrl+s")  # "other" without its words: refused in place
        await pilot.pause()
        assert "needs the decision in words" in text_of(app.screen.query_one("#dialog-error"))
        dialog.query_one("#field-decision", Select).value = "release-after-evaluation"
        dialog.query_one("#field-result", Input).value = "incubation 10 days, no swells"
        await pilot.press("ctrl+s")
        await pilot.pause()
        summary = text_of(app.screen.query_one("#confirm-summary"))  # the summary before it is written
        assert "decision:  release after evaluation" in summary and "the hold is lifted" in summary
        await pilot.press("escape")  # back: nothing written
        await pilot.pause()
        assert rec.query_one(Timeline).row_count == len(events)
        await pilot.press("d")
        await pilot.pause()
        app.screen.query_one("#field-decision", Select).value = "reprocess"
        app.screen.query_one("#field-reason", Input).value = "delivered F0 short of the filed target"
        await pilot.press("ctrl+s")
        await pilot.pause()
        await pilot.press("y")  # confirmed
        await pilot.pause()
        assert rec.query_one(Timeline).row_count == len(events) + 1
        header = text_of(rec.query_one("#record-header"))
        assert "⚖ disposition by pat: reprocess" in header and "may now: supersede, note" in header
        await pilot.press("escape")
        await pilot.pause()
        assert "CHL-261104-A" not in board_lots(board)  # decided: no longer open
        await pilot.press("a")  # all records
        await pilot.pause()
        assert "CHL-261104-A" in board_lots(board)
        t = board.query_one("#board", DataTable)
        row = next(t.get_row_at(i) for i in range(t.row_count) if str(t.get_row_at(i)[3]) == "CHL-261104-A")
        assert "⚖ reprocess" in str(row[2]) and "⏸" in str(row[0])  # the decision shown; still on hold


@sync
async def test_board_sorts_and_counts(db):
    app = build_app(db=db, actor="sam", role="supervisor", clock=clock)
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


@sync
async def test_a_supervisor_cannot_release_an_undecided_lot_and_markup_is_shown_as_typed(db):
    store = open_store(db)
    rid = next(r.id for r in store.list_records() if r.lot == "CHL-261104-A")
    store.note(rid, "see [/x] and [white on white]hidden[/]", actor="olga", role="operator")
    store.close()
    app = build_app(db=db, actor="sam", role="supervisor", clock=clock)
    async with app.run_test(size=(120, 30)) as pilot:
        await pilot.press("f3")
        await pilot.pause()
        await pilot.press("slash", *"CHL-261104-A", "enter")
        await pilot.pause()
        await pilot.press("r", *"need the cage space", "enter")
        await pilot.pause()
        assert "the process authority has not decided on it" in text_of(app.screen.query_one("#dialog-error"))
        await pilot.press("escape")
        await pilot.pause()
        await pilot.press("enter")  # open the record: the note with markup is shown as typed
        await pilot.pause()
        rec = app.screen
        assert isinstance(rec, RecordScreen)
        t = rec.query_one(Timeline)
        whats = [str(t.get_row_at(i)[4]) for i in range(t.row_count)]
        assert "see [/x] and [white on white]hidden[/]" in whats
    assert open_store(db).record(rid).state == "held"


@sync
async def test_the_board_shows_a_continuous_systems_affected_entries(db):
    # issue 15: the holds board names the entry-time ranges of the row in focus
    from deviation.evaluate import evaluate_case
    from deviation.inputs.case import load_case

    loaded = load_case(DEMO / "soup_reel_stop.toml")
    ev = evaluate_case(loaded)
    store = open_store(db)
    rid = store.create_record(loaded.snapshot(), actor="olga", role="operator", lot=loaded.case.deviation.lot,
                              retort_id="RS1", process_id=loaded.case.process.id)
    store.add_evaluation(rid, ev.model_dump(mode="json"), actor="olga", role="operator", snapshot_seq=1,
                         options={"conservative": True, "what_if": True})
    store.close()
    app = build_app(db=db, actor="sam", role="supervisor", clock=clock)
    async with app.run_test(size=(100, 30)) as pilot:
        await pilot.press("f3")
        await pilot.pause()
        board = app.screen
        await pilot.press("slash", *"SOU-261118", "enter")
        await pilot.pause()
        assert board_lots(board) == ["SOU-261118-Q"]
        detail = text_of(board.query_one("#board-detail"))
        held = [a for a in ev.affected_containers if a["disposition"] != "unaffected"]
        assert f"affected entries ({sum(a['containers'] for a in held):,} containers)" in detail
        assert "2026-11-18 06:47:54" in detail
        # a batch retort's record shows none
        await pilot.press("slash", *["backspace"] * 12, *"CHL-261104", "enter")
        await pilot.pause()
        assert board_lots(board) == ["CHL-261104-A"]
        assert text_of(board.query_one("#board-detail")).strip() == ""
