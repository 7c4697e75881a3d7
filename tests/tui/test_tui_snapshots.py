"""Snapshot tests of the main screens (pytest-textual-snapshot), at 80x24 and one larger.

Record ids and event times are made deterministic (patched in the store), and the clock is
fixed, so a snapshot changes only when the screen does. Update with ``--snapshot-update``.
"""

from datetime import datetime
from itertools import count

import pytest
from textual.widgets import Input, Select

from deviation.tui.app import build_app

NOW = datetime(2026, 11, 20, 8, 50, 0)


@pytest.fixture
def app_factory(tmp_path, monkeypatch):
    monkeypatch.delenv("DEVIATION_DB", raising=False)
    monkeypatch.delenv("DEVIATION_ROLE", raising=False)
    # the store's chain key (a random one per store otherwise): the audit screen's head is stable
    monkeypatch.setenv("DEVIATION_KEY", "5e" * 32)
    ids, ticks = count(1), count(0)
    monkeypatch.setattr("deviation.records.store.new_record_id", lambda: f"DR-SNAP{next(ids):05d}")
    def fixed_utc():
        return f"2026-11-20T08:{next(ticks) % 60:02d}:00.000000Z"

    # Every module of the store that stamps times (schema, records, the process library).
    for module in ("backends", "schema", "store", "processes", "bundles"):
        monkeypatch.setattr(f"deviation.records.{module}.utc_now", fixed_utc)

    def make(role="operator", actor="olga"):
        return build_app(db=tmp_path / "demo.db", demo=True, actor=actor, role=role, clock=lambda: NOW)

    return make


async def enter_drop(pilot) -> None:
    """A chili lot, steam on 08:00; low 116 °C at 08:30 (typed), back at 08:42 (typed)."""
    s = pilot.app.screen
    s.query_one("#process", Select).value = next(k for k, p in s.processes.items() if p.id == "OH-CHL-87x115")
    for name, value in (("lot", "CHL-261120-S"), ("retort", "R3"), ("lot_size", "4800"),
                        ("initial_temperature", "48"), ("cycle_start", "08:00")):
        s.query_one(f"#{name}", Input).value = value
    for at, reading in (("08:30", "116"), ("08:42", "121.1")):
        s.query_one("#reading", Input).value = reading
        s.query_one("#at", Input).value = at
        await pilot.press("ctrl+t")
    await pilot.pause()
    await pilot.app.workers.wait_for_complete()
    await pilot.pause(0.1)  # the guidance and curves follow the figures by a frame
    s.query_one("#lot", Input).focus()
    await pilot.pause()


async def choose_chili(pilot) -> None:
    s = pilot.app.screen
    s.query_one("#process", Select).value = next(k for k, p in s.processes.items() if p.id == "OH-CHL-87x115")
    for name, value in (("lot", "CHL-261120-S"), ("retort", "R3"), ("lot_size", "4800"),
                        ("initial_temperature", "48"), ("cycle_start", "08:00"), ("plant", "Osterby Hollow"),
                        ("shift", "B")):
        s.query_one(f"#{name}", Input).value = value
    await pilot.pause()
    await pilot.app.workers.wait_for_complete()
    await pilot.pause(0.1)


def test_floor_nothing_entered_80x24(snap_compare, app_factory):
    # Before the first reading: "nothing entered yet", never "no deviation".
    assert snap_compare(app_factory(), terminal_size=(80, 24), run_before=choose_chili)


def test_floor_running_refused_reading_80x24(snap_compare, app_factory):
    async def setup(pilot):
        await choose_chili(pilot)
        s = pilot.app.screen
        s.query_one("#reading", Input).value = "116"
        await pilot.press("ctrl+l")  # low now (50 min): the cycle still runs, figures projected
        await pilot.pause()
        await pilot.app.workers.wait_for_complete()
        await pilot.pause(0.1)
        s.query_one("#reading", Input).value = "245"
        await pilot.press("ctrl+l")  # a °F reading: refused in place with the value in °C
        await pilot.pause()

    assert snap_compare(app_factory(), terminal_size=(80, 24), run_before=setup)


def test_floor_entry_80x24(snap_compare, app_factory):
    # The drop entered: guidance shows the hold, the results the extra minutes.
    assert snap_compare(app_factory(), terminal_size=(80, 24), run_before=enter_drop)


def test_floor_entry_curves_80x24(snap_compare, app_factory):
    async def setup(pilot):
        await enter_drop(pilot)
        await pilot.press("ctrl+g")  # curves instead of guidance on a narrow terminal
        await pilot.pause(0.1)

    assert snap_compare(app_factory(), terminal_size=(80, 24), run_before=setup)


def test_floor_entry_wide_160x48(snap_compare, app_factory):
    # Wide: guidance and curves side by side.
    assert snap_compare(app_factory(), terminal_size=(160, 48), run_before=enter_drop)


def test_holds_board_80x24(snap_compare, app_factory):
    assert snap_compare(app_factory("supervisor", "sam"), terminal_size=(80, 24), press=["f3"])


def test_record_timeline_80x24(snap_compare, app_factory):
    # Holds board, sorted by disposition; Enter opens the most severe record.
    assert snap_compare(app_factory("supervisor", "sam"), terminal_size=(80, 24), press=["f3", "enter"])


def test_audit_replay_80x24(snap_compare, app_factory):
    # Audit: verify runs on entry; Enter replays the newest record.
    assert snap_compare(app_factory("auditor", "ada"), terminal_size=(80, 24), press=["f4", "enter"])


def test_help_80x24(snap_compare, app_factory):
    assert snap_compare(app_factory(), terminal_size=(80, 24), press=["f1"])


def test_floor_entry_curves_wide_160x48(snap_compare, app_factory):
    # Wide, after Ctrl+G: the curves in full (shaded drop, legend above each plot).
    async def setup(pilot):
        await enter_drop(pilot)
        await pilot.press("ctrl+g")
        await pilot.pause(0.1)

    assert snap_compare(app_factory(), terminal_size=(160, 48), run_before=setup)
