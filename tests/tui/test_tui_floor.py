"""Floor entry driven end to end with textual's Pilot: a drop entered as it happens changes the
guidance, the messages match the CLI's, the draft survives a restart, and Save makes a record."""

from datetime import datetime, timedelta
from pathlib import Path

import asyncio
import functools

import pytest
from textual.widgets import Input, Select

from deviation.inputs.case import load_toml, parse_case
from deviation.cli import main
from deviation.errors import CaseError
from deviation.tui.app import build_app
from deviation.tui.entry import FloorEntry, Reading, build_case, low_intervals
from deviation.tui.widgets.guidance import GuidancePanel
from deviation.tui.widgets.results import ResultsPanel

REPO = Path(__file__).resolve().parents[2]
CHILI = load_toml(REPO / "demo_cases" / "processes" / "OH-CHL-87x115.toml")["process"]
STEAM_ON = datetime(2026, 11, 20, 8, 0, 0)


def sync(fn):
    """Run an async Pilot test with asyncio (no async plugin needed)."""

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        return asyncio.run(fn(*args, **kwargs))

    return wrapper


class Clock:
    """An injectable "now": tests move it forward by hand."""

    def __init__(self, minutes: float) -> None:
        self.now = STEAM_ON + timedelta(minutes=minutes)

    def __call__(self) -> datetime:
        return self.now

    def advance(self, minutes: float) -> None:
        self.now += timedelta(minutes=minutes)


async def settle(pilot) -> None:
    """Let the evaluation worker finish and its results reach the widgets."""
    await pilot.pause()
    await pilot.app.workers.wait_for_complete()
    await pilot.pause(0.1)  # the guidance and curves follow the figures by a frame


async def fill(pilot, *, lot="CHL-TEST-1", retort="R3", lot_size="4800", initial="45", start="08:00",
               process="OH-CHL-87x115") -> None:
    screen = pilot.app.screen
    key = next(k for k, p in screen.processes.items() if p.id == process)
    screen.query_one("#process", Select).value = key
    await pilot.pause()
    for name, value in (("lot", lot), ("retort", retort), ("lot_size", lot_size),
                        ("initial_temperature", initial), ("cycle_start", start)):
        screen.query_one(f"#{name}", Input).value = value
    await settle(pilot)


def results_text(app) -> str:
    return app.screen.query_one(ResultsPanel).plain_text(100)


@pytest.fixture
def db(tmp_path, monkeypatch):
    monkeypatch.delenv("DEVIATION_DB", raising=False)
    monkeypatch.delenv("DEVIATION_ROLE", raising=False)
    return tmp_path / "floor.db"


@sync
async def test_drop_entered_now_changes_guidance_and_save_makes_a_record(db):
    clock = Clock(35.0)
    app = build_app(db=db, actor="olga", role="operator", clock=clock)
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot)
        before = results_text(app)
        assert "✓ NO DEVIATION" in before and "F0 projected" in before
        app.screen.query_one("#reading", Input).focus()
        await pilot.press(*"110.0", "enter")  # Enter in the reading box: temperature low now
        await settle(pilot)
        clock.advance(25.0)
        await pilot.press("ctrl+b")  # back at process temperature now (minute 60)
        await settle(pilot)
        after = results_text(app)
        assert "HOLD" in after and "NO DEVIATION" not in after
        ev = app.screen.query_one(ResultsPanel).figures.evaluation
        # 25 min at 110 °C instead of 121.1 °C: the engine asks for extra hold time, and the
        # panel shows the engine's own numbers.
        assert ev.extension_to_target_min > 0
        assert f"+{ev.extension_to_target_min:.1f} min" in after
        assert "temperature-low" in app.screen.query_one(GuidancePanel).plain_text(100)
        await pilot.press("ctrl+s")
        await pilot.pause()
        rid = app.screen.saved_record_id
    from deviation.records.store import open_store

    store = open_store(db)
    view = store.record(rid)
    assert view.state == "evaluated" and [e.kind for e in view.events] == ["entered", "evaluated"]
    assert view.process_version == "1" or view.process_version is None
    events = view.snapshot["case"]["deviation"]["events"]
    assert len(events) == 1 and events[0]["kind"] == "temperature-low"
    assert events[0]["start_min"] == pytest.approx(35.0) and events[0]["end_min"] == pytest.approx(60.0)
    assert events[0]["temperature_C"] == 110.0
    assert view.evaluation["guidance"]["disposition"] == ev.guidance["disposition"]
    assert store.load_draft("tui.floor.olga") is None  # saved: the draft is gone


@sync
async def test_field_error_is_the_cli_message(db, tmp_path, capsys):
    app = build_app(db=db, actor="olga", role="operator", clock=Clock(10))
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot, lot_size="abc")
        shown = str(app.screen.query_one("#lot_size-error").render())
        assert app.screen.query_one("#lot_size", Input).has_class("-invalid")
    # The same value in a case file, through the CLI.
    text = (REPO / "demo_cases" / "chili_temperature_drop.toml").read_text()
    text = text.replace("lot_size_containers = 4800", 'lot_size_containers = "abc"')
    text = text.replace('retort_log = "logs/R3-2026-1104-A.csv"\n', "")
    case = tmp_path / "bad.toml"
    case.write_text(text)
    assert main(["evaluate", str(case)]) == 2
    err = capsys.readouterr().err
    line = next(ln for ln in err.splitlines() if "lot_size_containers" in ln)
    message = line.split("deviation.lot_size_containers", 1)[1]
    assert shown.startswith("✗ deviation.lot_size_containers") and shown.endswith(message)


@sync
async def test_draft_is_restored_after_closing_mid_entry(db):
    clock = Clock(40.0)
    app = build_app(db=db, actor="olga", role="operator", clock=clock)
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot, lot="CHL-DRAFT")
        app.screen.query_one("#reading", Input).value = "118.2"
        await pilot.press("ctrl+l")
        await settle(pilot)
    # Closed without saving; start again on the same store.
    app2 = build_app(db=db, actor="olga", role="operator", clock=clock)
    async with app2.run_test(size=(100, 32)) as pilot:
        await settle(pilot)
        screen = app2.screen
        assert screen.query_one("#lot", Input).value == "CHL-DRAFT"
        assert screen.query_one("#cycle_start", Input).value == "08:00"
        assert screen.entry.readings == [Reading(40.0, 118.2, "low")]
        assert "HOLD" in results_text(app2)


@sync
async def test_import_retort_log_csv(db):
    app = build_app(db=db, actor="olga", role="operator", clock=Clock(10))
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot, start="")
        await pilot.press("ctrl+o")
        await pilot.pause()
        dialog = app.screen
        dialog.query_one("#field-path", Input).value = str(REPO / "demo_cases/logs/R3-2026-1104-A.csv")
        await pilot.press("enter")
        await settle(pilot)
        text = results_text(app)
        assert "imported retort log" in text and "HOLD" in text
        # A missing file is refused in place, with the case reader's message.
        await pilot.press("ctrl+o")
        await pilot.pause()
        app.screen.query_one("#field-path", Input).value = "/nonexistent/log.csv"
        await pilot.press("enter")
        await pilot.pause()
        assert "file not found" in str(app.screen.query_one("#dialog-error").render())


@sync
async def test_save_outside_the_operator_role_is_refused_with_the_cli_message(db):
    app = build_app(db=db, actor="sam", role="supervisor", clock=Clock(10))
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot)
        await pilot.press("ctrl+s")
        await pilot.pause()
        messages = [n.message for n in app._notifications]
        assert "actor 'sam' (role supervisor) may not enter: that is for role operator" in messages


@sync
async def test_reading_without_cycle_start_says_what_to_do(db):
    app = build_app(db=db, actor="olga", role="operator", clock=Clock(10))
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot, start="")
        app.screen.query_one("#reading", Input).value = "118"
        await pilot.press("ctrl+l")
        await pilot.pause()
        assert "set Steam on" in app.screen.last_error
        app.screen.query_one("#reading", Input).value = "warm"
        await pilot.press("ctrl+l")
        assert app.screen.last_error == "reading: 'warm' is not a temperature in °C (e.g. 118.5)"


def test_open_low_interval_counts_until_now():
    readings = [Reading(30.0, 119.0, "low"), Reading(32.0, 117.0, "typed")]
    events, running = low_intervals(readings, 121.1, now_min=41.5)
    assert running and events == [{"kind": "temperature-low", "start_min": 30.0, "end_min": 41.5,
                                   "temperature_C": 117.0,
                                   "note": "from floor entry; still low, counted until now"}]
    closed, running = low_intervals(readings + [Reading(36.0, 121.1, "back")], 121.1, now_min=41.5)
    assert not running and closed[0]["end_min"] == 36.0


def test_entry_case_is_validated_by_the_case_contract():
    entry = FloorEntry(lot="L", retort="R", lot_size="0", initial_temperature="45")
    with pytest.raises(CaseError) as caught:
        build_case(CHILI, entry, None)
    with pytest.raises(CaseError) as direct:
        parse_case({"process": CHILI, "deviation": {"lot": "L", "retort_id": "R", "lot_size_containers": "0",
                                                    "initial_temperature_C": "45"}}, source="floor entry")
    assert caught.value.message == direct.value.message
