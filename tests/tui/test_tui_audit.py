"""Audit screen driven with Pilot: replay a saved record (stored against recomputed), see a
changed result marked, verify the chains (and catch an edited row), export the report."""

import asyncio
import functools
import sqlite3
from datetime import datetime

import pytest
from textual.widgets import DataTable, Input, Select

from deviation.records.store import open_store
from deviation.tui.app import build_app
from deviation.tui.screens.audit import AuditScreen
from deviation.tui.widgets.comparison import ComparisonTable
from deviation.tui.widgets.results import plain


def sync(fn):
    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        return asyncio.run(fn(*args, **kwargs))

    return wrapper


def clock():
    return datetime(2026, 11, 20, 8, 45, 0)


def text_of(widget) -> str:
    return plain(widget.content, 160)


async def settle(pilot) -> None:
    await pilot.pause()
    await pilot.app.workers.wait_for_complete()
    await pilot.pause(0.1)  # the guidance and curves follow the figures by a frame


async def save_entry(pilot) -> str:
    s = pilot.app.screen
    s.query_one("#process", Select).value = next(k for k, p in s.processes.items() if p.id == "OH-PEA-74x113")
    for name, value in (("lot", "PEA-AUDIT-1"), ("retort", "R2"), ("lot_size", "2400"),
                        ("initial_temperature", "60"), ("cycle_start", "08:00")):
        s.query_one(f"#{name}", Input).value = value
    s.query_one("#reading", Input).value = "119"
    await pilot.press("ctrl+l")  # still low at "now" (minute 45): counted until now
    await settle(pilot)
    await pilot.press("ctrl+s")
    await pilot.pause()
    return s.saved_record_id


def comparison_marks(screen) -> dict[str, str]:
    t = screen.query_one(ComparisonTable)
    return {str(t.get_row_at(i)[1]): str(t.get_row_at(i)[0]) for i in range(t.row_count)}


@pytest.fixture
def db(tmp_path, monkeypatch):
    monkeypatch.delenv("DEVIATION_DB", raising=False)
    monkeypatch.delenv("DEVIATION_ROLE", raising=False)
    return tmp_path / "audit.db"


@sync
async def test_replay_saved_entry_verify_and_export(db, tmp_path):
    app = build_app(db=db, actor="olga", role="operator", clock=clock)
    async with app.run_test(size=(120, 36)) as pilot:
        rid = await save_entry(pilot)
        app.set_identity("ada", "auditor")
        await pilot.press("f4")
        await pilot.pause()
        audit = app.screen
        assert isinstance(audit, AuditScreen)
        assert text_of(audit.query_one("#verify-line")).startswith(
            "✓ every hash chain holds: 2 events in 1 records")
        await pilot.press("enter")  # replay the record under the cursor (the newest)
        await pilot.pause()
        verdict = text_of(audit.query_one("#replay-verdict"))
        assert verdict.startswith(f"✓ REPRODUCED {rid}")
        marks = comparison_marks(audit)
        assert marks["delivered F0 [min]"] == "✓" and "✗" not in marks.values()
        assert audit.query_one("#audit-timeline", DataTable).row_count == 2
        report = tmp_path / "report.html"
        await pilot.press("x")
        await pilot.pause()
        app.screen.query_one("#field-path", Input).value = str(report)
        await pilot.press("enter")
        await pilot.pause()
    html = report.read_text()
    assert "PEA-AUDIT-1" in html and rid in html


@sync
async def test_changed_result_is_marked_and_an_edited_row_breaks_the_chain(db):
    app = build_app(db=db, actor="olga", role="operator", clock=clock)
    async with app.run_test(size=(120, 36)) as pilot:
        rid = await save_entry(pilot)
    store = open_store(db)
    # A later evaluation that the current engine does not reproduce (delivered F0 changed).
    ev = dict(store.record(rid).evaluation)
    stored_F = ev["delivered_F_min"]
    ev["delivered_F_min"] = stored_F + 0.5
    store.add_evaluation(rid, ev, actor="olga", role="operator", snapshot_seq=1)
    store.close()
    app = build_app(db=db, actor="ada", role="auditor", clock=clock)
    async with app.run_test(size=(120, 36)) as pilot:
        await pilot.press("f4", "enter")
        await pilot.pause()
        audit = app.screen
        assert text_of(audit.query_one("#replay-verdict")).startswith(f"✗ CHANGED {rid}")
        marks = comparison_marks(audit)
        assert marks["delivered F0 [min]"] == "✗" and marks["target F0 [min]"] == "✓"
        row = audit.query_one(ComparisonTable).get_row_at(0)
        assert str(row[2]) == f"{stored_F + 0.5:.5g}" and str(row[3]) == f"{stored_F:.5g}"
    # Someone edits an event row behind the tool's back: verify names it.
    with sqlite3.connect(db) as conn:
        conn.execute("UPDATE events SET actor = 'mallory' WHERE record_id = ? AND seq = 2", (rid,))
    app = build_app(db=db, actor="ada", role="auditor", clock=clock)
    async with app.run_test(size=(120, 36)) as pilot:
        await pilot.press("f4")
        await pilot.pause()
        line = text_of(app.screen.query_one("#verify-line"))
        assert line.startswith(f"✗ BROKEN: record {rid} event 2 (evaluated")
        assert "event content does not match its hash (changed after writing" in line
