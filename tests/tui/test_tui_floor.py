"""Floor entry driven end to end with textual's Pilot: a drop entered as it happens changes the
guidance, every typed value is checked in place in plain words, nothing entered is lost (draft,
save, snapshot, replay), the screen moves with the clock, and a scanner's burst lands field by
field. Each test of a defect of issue 13 names it; each was seen failing before the fix."""

import asyncio
import functools
from datetime import datetime, timedelta
from pathlib import Path

import pytest
from textual._xterm_parser import XTermParser
from textual.widgets import Input, Select

from deviation.errors import CaseError
from deviation.inputs.case import LoadedCase, load_toml
from deviation.records.replay import replay_item
from deviation.records.store import open_store
from deviation.tui.app import build_app
from deviation.tui.entry import FloorEntry, Reading, build_case, low_intervals
from deviation.tui.screens.floor import FloorScreen
from deviation.tui.widgets.guidance import GuidancePanel
from deviation.tui.widgets.plots import CyclePlots
from deviation.tui.widgets.results import ResultsPanel

REPO = Path(__file__).resolve().parents[2]
CHILI = load_toml(REPO / "demo_cases" / "processes" / "OH-CHL-87x115.toml")["process"]
LOG = REPO / "demo_cases" / "logs" / "R3-2026-1104-A.csv"
STEAM_ON = datetime(2026, 11, 20, 8, 0, 0)


def sync(fn):
    """Run an async Pilot test with asyncio (no async plugin needed)."""

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        return asyncio.run(fn(*args, **kwargs))

    return wrapper


class Clock:
    """An injectable "now": tests move it forward by hand."""

    def __init__(self, minutes: float, start: datetime = STEAM_ON) -> None:
        self.now = start + timedelta(minutes=minutes)

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
               process="OH-CHL-87x115", plant="", shift="") -> None:
    screen = pilot.app.screen
    key = next(k for k, p in screen.processes.items() if p.id == process)
    screen.query_one("#process", Select).value = key
    await pilot.pause()
    for name, value in (("lot", lot), ("retort", retort), ("lot_size", lot_size),
                        ("initial_temperature", initial), ("cycle_start", start), ("plant", plant),
                        ("shift", shift)):
        screen.query_one(f"#{name}", Input).value = value
    await settle(pilot)


async def enter(pilot, reading: str, key: str = "ctrl+l", at: str | None = None) -> None:
    s = pilot.app.screen
    s.query_one("#reading", Input).value = reading
    if at is not None:
        s.query_one("#at", Input).value = at
    await pilot.press(key)
    await settle(pilot)


def results_text(app) -> str:
    return app.screen.query_one(ResultsPanel).plain_text(100)


def guidance_text(app) -> str:
    return app.screen.query_one(GuidancePanel).plain_text(100)


def shown(app, widget_id: str) -> str:
    return str(app.screen.query_one(widget_id).render())


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
        app.screen.query_one("#reading", Input).focus()
        await pilot.press(*"110.0", "enter")  # Enter in the reading box: temperature low now
        await settle(pilot)
        clock.advance(25.0)
        await pilot.press("ctrl+b")  # back at process temperature now (minute 60)
        await settle(pilot)
        after = results_text(app)
        assert "HOLD" in after and "NO DEVIATION" not in after
        ev = app.screen.query_one(ResultsPanel).figures.evaluation
        # 25 min at 110 °C instead of 121.1 °C: the panel shows the engine's own numbers.
        if ev.extension_to_target_min:
            assert f"+{ev.extension_to_target_min:.1f} min" in after
        assert "temperature-low" in guidance_text(app)
        await pilot.press("ctrl+s")
        await pilot.pause()
        rid = app.screen.saved_record_id
    store = open_store(db)
    view = store.record(rid)
    assert view.state == "evaluated" and [e.kind for e in view.events] == ["entered", "evaluated"]
    events = view.snapshot["case"]["deviation"]["events"]
    assert len(events) == 1 and events[0]["kind"] == "temperature-low"
    assert events[0]["start_min"] == pytest.approx(35.0) and events[0]["end_min"] == pytest.approx(60.0)
    assert events[0]["temperature_C"] == 110.0
    assert view.evaluation["guidance"]["disposition"] == ev.guidance["disposition"]
    assert store.load_draft("tui.floor.olga") is None  # saved: the draft is gone


# -- issue 13: wrong values refused in place, with the reason and the likely value ------------


@sync
async def test_fahrenheit_reading_is_refused_with_the_value_in_celsius(db):
    # Defect: "245" (a °F value) gave "▼ low 32.4 min 245.0 °C" and ✓ NO DEVIATION.
    app = build_app(db=db, actor="olga", role="operator", clock=Clock(32.4))
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot)
        await enter(pilot, "245")
        s = app.screen
        assert s.last_error == "Reading °C: 245 looks like °F (= 118.3 °C); enter °C"
        assert "245 looks like °F (= 118.3 °C); enter °C" in shown(app, "#entry-error")
        assert s.entry.readings == [] and "NO DEVIATION" not in results_text(app)
        assert s.query_one("#reading", Input).value == "245"  # kept to correct, not lost


@pytest.mark.parametrize("typed, words", [
    ("nan", "'nan' is not a number"), ("inf", "'inf' is not a number"),
    ("1e9", "1e+09 °C is above 150 °C, which no retort reaches"),
    ("-5", "-5 °C is not a retort reading"), ("0", "0 °C is not a retort reading"),
    ("118,5", "'118,5': use a point for decimals (118.5)"),
])
@sync
async def test_impossible_readings_are_refused(db, typed, words):
    # Defect: nan, inf, 1e9, -5 and 0 were accepted; a nan reading vanished from the saved record.
    app = build_app(db=db, actor="olga", role="operator", clock=Clock(30))
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot)
        for key in ("ctrl+l", "ctrl+t"):
            await enter(pilot, typed, key, at="20")
            assert app.screen.last_error.startswith("Reading °C: ") and words in app.screen.last_error
            assert app.screen.entry.readings == []


@sync
async def test_initial_temperature_in_fahrenheit_or_above_boiling_is_refused(db):
    # Defect: 104 (°F) in the °C field gave ✓ NO DEVIATION, projected F0 31.34.
    app = build_app(db=db, actor="olga", role="operator", clock=Clock(30))
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot, initial="104")
        await enter(pilot, "118")
        assert shown(app, "#initial_temperature-error") == "✗ Initial °C: 104 looks like °F (= 40.0 °C); enter °C"
        assert app.screen.query_one("#initial_temperature", Input).has_class("-invalid")
        text = results_text(app)
        assert "NOT EVALUATED" in text and "NO DEVIATION" not in text and "F0" not in text
        app.screen.query_one("#initial_temperature", Input).value = "121.5"
        await settle(pilot)
        assert "at or above the process temperature 121.1 °C" in shown(app, "#initial_temperature-error")
        app.screen.query_one("#initial_temperature", Input).value = "45"
        await settle(pilot)
        assert shown(app, "#initial_temperature-error") == "" and "F0" in results_text(app)


@sync
async def test_typed_times_in_the_future_or_before_steam_on_are_refused(db):
    # Defects: "60" at 32.2 min accepted (future); "09:00" with steam on 09:24 stored as 0.0 min;
    # "500" gave an internal message naming deviation.events[0].
    clock = Clock(32.2, start=datetime(2026, 11, 20, 9, 24))
    app = build_app(db=db, actor="olga", role="operator", clock=clock)
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot, start="09:24")
        for at, message in (("60", "At: 60 min from steam on is in the future (now 32.2 min)"),
                            ("500", "At: 500 min from steam on is in the future (now 32.2 min)"),
                            ("09:00", "At: 09:00 is before steam on (09:24)"),
                            ("10:30", "At: 10:30 is in the future (now 09:56)")):
            await enter(pilot, "117", "ctrl+t", at=at)
            assert app.screen.last_error == message
            assert app.screen.entry.readings == []
        await enter(pilot, "117", "ctrl+t", at="09:40")
        assert app.screen.entry.readings == [Reading(16.0, 117.0, "typed")]
        for text in (results_text(app), guidance_text(app), shown(app, "#entry-error")):
            assert "deviation.events" not in text and "deviation." not in text


@sync
async def test_steam_on_later_than_now_is_not_silently_read_as_yesterday(db):
    # Defect: steam on "23:59" at 09:42 was read as yesterday (584 min), no warning.
    clock = Clock(0, start=datetime(2026, 11, 20, 9, 42))
    app = build_app(db=db, actor="olga", role="operator", clock=clock)
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot, start="23:59")
        error = shown(app, "#cycle_start-error")
        assert error.startswith("✗ Steam on: 23:59 is later than now (09:42); read as yesterday it would be "
                                "9 h 43 min ago, longer than a cycle runs")
        assert "now: set Steam on" in shown(app, "#now-line")
        # A night shift: steam on 23:30, now 00:10, is yesterday, and the screen says so.
        clock.now = datetime(2026, 11, 21, 0, 10)
        app.screen.query_one("#cycle_start", Input).value = "23:30"
        await settle(pilot)
        assert shown(app, "#cycle_start-error") == ""
        assert "now 40.0 min from steam on 23:30 yesterday" in shown(app, "#now-line")


@sync
async def test_messages_are_in_the_words_of_the_trade(db):
    # Defect: "deviation.lot: required key is missing", "Input should be greater than or equal to
    # 1 (found '-500')", "F0 so far 0.0002 min to min 35.7".
    app = build_app(db=db, actor="olga", role="operator", clock=Clock(3.0))
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot, lot="", lot_size="-500")
        await enter(pilot, "118")
        assert shown(app, "#lot_size-error") == ("✗ Lot size: '-500' is not a number of containers (a whole "
                                                 "number, 1 to 10,000,000)")
        text = results_text(app)
        assert "Lot: not entered" in text and "Lot size: '-500'" in text
        for bad in ("required key is missing", "Input should", "deviation.", "(found"):
            assert bad not in text
        app.screen.query_one("#lot", Input).value = "L-1"
        app.screen.query_one("#lot_size", Input).value = "100"
        await settle(pilot)
        text = results_text(app)
        # Three minutes into come-up the cold spot has next to no F0: said so, not 0.0002.
        assert "F0 so far    < 0.01 min at 3.0 min" in text and "to min" not in text


def test_entry_case_errors_name_the_field_in_plain_words():
    entry = FloorEntry(lot="L", retort="R", lot_size="0", initial_temperature="45")
    with pytest.raises(CaseError) as caught:
        build_case(CHILI, entry, None)
    assert caught.value.message == "Lot size: 0 containers; a lot has 1 to 10,000,000"


# -- nothing entered is lost --------------------------------------------------------------------


@sync
async def test_every_entry_kind_is_in_the_saved_snapshot_and_replays_the_same(db):
    # Defect: a saved record with a nan reading had "events": [], and a reading at process
    # temperature that closes no interval left no trace in the record.
    clock = Clock(30.0)
    app = build_app(db=db, actor="olga", role="operator", clock=clock)
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot, plant="Osterby Hollow", shift="B")
        await enter(pilot, "121.3", "ctrl+t", at="20")  # typed, at process temperature
        await enter(pilot, "118.5")  # low now (30 min)
        clock.advance(6)
        await enter(pilot, "116", "ctrl+t", at="08:33")  # typed, lower, inside the interval
        await pilot.press("ctrl+b")  # back now (36 min)
        await settle(pilot)
        clock.advance(4)
        await enter(pilot, "119.0")  # low again now (40 min): still open when saved
        entered = sorted(app.screen.entry.readings, key=lambda r: r.time_min)
        assert [r.kind for r in entered] == ["typed", "low", "typed", "back", "low"]
        await pilot.press("ctrl+s")
        await pilot.pause()
        rid = app.screen.saved_record_id
        assert rid
    store = open_store(db)
    view = store.record(rid)
    snap = view.snapshot
    kept = [Reading(r["time_min"], r["temperature_C"], r["kind"]) for r in snap["floor_entry"]["readings"]]
    assert kept == entered
    events, _ = low_intervals(kept, 121.1, now_min=40.0)
    case = LoadedCase.from_snapshot(snap).case
    assert [e.model_dump(exclude_none=True) for e in case.deviation.events] == \
        [{k: v for k, v in e.items()} for e in events]
    assert [(e.start_min, e.end_min, e.temperature_C) for e in case.deviation.events] == \
        [(30.0, 36.0, 116.0), (40.0, pytest.approx(40.0 + 1 / 60, abs=1e-4), 119.0)]
    assert "116 °C at 33 min (typed)" in case.deviation.events[0].note
    # Plant, shift and the date of steam on go into the case.
    assert case.deviation.plant == "Osterby Hollow" and "shift B" in case.deviation.description
    assert case.deviation.date == "2026-11-20"
    assert snap["floor_entry"]["shift"] == "B"
    # Replay: the stored snapshot gives the stored evaluation.
    item = next(store.iter_replay_items([rid]))
    result = replay_item(item, None)
    assert result["status"] == "reproduced", result


@sync
async def test_nothing_saved_without_a_reading_or_a_log(db):
    app = build_app(db=db, actor="olga", role="operator", clock=Clock(10))
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot)
        await pilot.press("ctrl+s")
        await pilot.pause()
        assert app.screen.saved_record_id is None
        assert ("Record: nothing entered yet: enter the readings (or import the retort log) before saving"
                in [n.message for n in app._notifications])


@sync
async def test_draft_keeps_typed_text_and_says_it_was_restored(db):
    # Defects: a typed but unentered reading was lost with the draft; a restored draft was not
    # announced.
    clock = Clock(40.0)
    app = build_app(db=db, actor="olga", role="operator", clock=clock)
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot, lot="CHL-DRAFT", plant="Osterby Hollow", shift="C")
        await enter(pilot, "118.2")
        app.screen.query_one("#reading", Input).focus()
        await pilot.press(*"117.9")  # typed, not entered
        app.screen.query_one("#at", Input).value = "08:3"
        await settle(pilot)
    # Closed without saving; start again on the same store.
    app2 = build_app(db=db, actor="olga", role="operator", clock=clock)
    async with app2.run_test(size=(100, 32)) as pilot:
        await settle(pilot)
        screen = app2.screen
        assert screen.query_one("#lot", Input).value == "CHL-DRAFT"
        assert screen.query_one("#cycle_start", Input).value == "08:00"
        assert screen.query_one("#reading", Input).value == "117.9"
        assert screen.query_one("#at", Input).value == "08:3"
        assert screen.query_one("#plant", Input).value == "Osterby Hollow"
        assert screen.query_one("#shift", Input).value == "C"
        assert screen.entry.readings == [Reading(40.0, 118.2, "low")]
        assert "HOLD" in results_text(app2)
        notice = shown(app2, "#notice")
        assert notice.startswith("↺ Draft restored from the store: lot CHL-DRAFT, 1 reading")
        assert "reading 117.9 typed, not entered yet" in notice
        assert screen.query_one("#notice").display
        assert app2.focused is screen.query_one("#reading", Input)  # the cursor where typing goes on


# -- results before the first reading, and while the cycle runs ---------------------------------


@sync
async def test_before_the_first_reading_nothing_is_said_to_be_fine(db):
    # Defect: with nothing entered the results said ✓ NO DEVIATION.
    app = build_app(db=db, actor="olga", role="operator", clock=Clock(20))
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot)
        text = results_text(app) + guidance_text(app)
        assert "NOTHING ENTERED YET" in text and "✓" not in text
        assert "NO DEVIATION" not in text and "no deviation found" not in text


@sync
async def test_the_screen_moves_with_the_clock_without_a_key(db, monkeypatch):
    # Defect: while the retort was low the screen stayed at "now: 35.7 min" and "still low" until
    # the next key.
    monkeypatch.setattr(FloorScreen, "CLOCK_REFRESH_S", 0.1)
    clock = Clock(35.0)
    app = build_app(db=db, actor="olga", role="operator", clock=clock)
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot)
        await enter(pilot, "117")
        panel = app.screen.query_one(ResultsPanel)
        generation = panel.generation
        clock.advance(2.0)
        for _ in range(60):  # no key pressed: only the timer
            await pilot.pause(0.05)
            if panel.generation > generation and "37.0 min" in shown(app, "#now-line"):
                break
        await settle(pilot)
        assert "now 37.0 min from steam on 08:00" in shown(app, "#now-line")
        assert "F0 so far" in results_text(app) and "at 37.0 min" in results_text(app)
        low = panel.figures.evaluation.cycle.low_intervals
        assert low and low[0].end_min == pytest.approx(37.0, abs=0.05)  # the record's resolution
        assert "local" in shown(app, "#status") and "UTC" in shown(app, "#status")
        # A fixed clock: the timer does not evaluate again (it stays cheap).
        generation = panel.generation
        await pilot.pause(0.4)
        assert panel.generation == generation


@sync
async def test_running_cycle_guidance_is_projected_never_delivered(db):
    # Defect: "Delivered F0 6.94" for a running cycle (it is projected).
    app = build_app(db=db, actor="olga", role="operator", clock=Clock(35))
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot)
        await enter(pilot, "117")
        text, guidance = results_text(app), guidance_text(app)
        assert text.startswith("◔ RUNNING · projected: ")
        assert "F0 projected" in text and "delivered" not in (text + guidance).lower()


@sync
async def test_a_partial_log_in_a_dip_is_not_judged_by_its_worst_case(db, tmp_path):
    # Defect: one row into a dip the live guidance jumped to ✗ HOLD - REPROCESS OR DESTROY and
    # "52.50 min short" while the cycle was still running.
    lines = LOG.read_text().splitlines(keepends=True)
    head = [ln for ln in lines if ln.startswith("#") or ln.startswith("time_min")]
    rows = lines[len(head):]
    part = tmp_path / "R3-part.csv"
    part.write_text("".join(head + rows[:83]))  # one row into the dip at 40.5 min
    app = build_app(db=db, actor="olga", role="operator", clock=Clock(41))
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot, start="")
        await pilot.press("ctrl+o")
        await pilot.pause()
        app.screen.query_one("#field-path", Input).value = str(part)
        await pilot.press("enter")
        await settle(pilot)
        text, guidance = results_text(app), guidance_text(app)
        assert text.startswith("◔ RUNNING · guidance when the cycle ends; so far: ⚑")
        for worst in ("REPROCESS OR DESTROY", "short-hold", "min short", "F0 delivered"):
            assert worst not in text and worst not in guidance
        # What is known: the retort is low now; the projection waits until it is back.
        assert "F0 projected          — when back at process temp." in text
        assert "⚑ temperature-low: retort reads 117.3 °C at 41.00 min (the last row)" in guidance


# -- the curves ---------------------------------------------------------------------------------


@pytest.mark.parametrize("size, compact", [((80, 24), True), ((160, 48), False)])
@sync
async def test_curves_show_the_drop(db, size, compact):
    # Defect: the legend covered the first quarter of the axis, the retort line hid under the
    # process line, a 6-min dip to 117 °C was invisible; at 80x24 nothing useful showed.
    app = build_app(db=db, actor="olga", role="operator", clock=Clock(60))
    async with app.run_test(size=size) as pilot:
        await fill(pilot)
        await enter(pilot, "117", "ctrl+t", at="30")
        await enter(pilot, "121.1", "ctrl+t", at="36")
        await pilot.press("ctrl+g")
        await settle(pilot)
        plots = app.screen.query_one(CyclePlots)
        assert plots.has_class("-compact") is compact
        legend = plots.border_title if compact else str(plots.query_one("#plot-legend").render())
        assert "retort" in legend and "121.1" in legend and "░" in legend and "low" in legend
        drawn = plots.query_one("#temperature-plot").plt.build()
        assert "░" in drawn  # the low interval shaded
        assert "retort" not in drawn and "process" not in drawn  # no legend over the curves
        # The retort is drawn last, over the process line: where it runs at process temperature
        # its dots, not the line, show on the process line's row.
        import re

        plain_rows = [re.sub(r"\x1b\[[0-9;]*m", "", row) for row in drawn.splitlines()]
        process_row = next(row for row in plain_rows if row.startswith("121.1"))
        assert any("\u2800" <= ch <= "\u28ff" for ch in process_row)


# -- keys ---------------------------------------------------------------------------------------


async def burst(pilot, text: str) -> None:
    """Send ``text`` as one burst of keys, as a barcode scanner does (all queued before any is
    handled), through textual's own terminal parser."""
    for event in XTermParser().feed(text):
        pilot.app.post_message(event)
    await pilot.pause(0.3)
    await settle(pilot)


@sync
async def test_a_scanner_burst_lands_field_by_field(db):
    # Defect: CHL-1202-A, Tab, R3, Tab, 4800... sent at once all landed in the Lot field
    # ("CHL-1202-AR348004509:36").
    app = build_app(db=db, actor="olga", role="operator", clock=Clock(30, start=datetime(2026, 11, 20, 9, 0)))
    async with app.run_test(size=(100, 32)) as pilot:
        s = app.screen
        s.query_one("#process", Select).value = next(k for k, p in s.processes.items() if p.id == "OH-CHL-87x115")
        s.query_one("#lot", Input).focus()
        await pilot.pause()
        await burst(pilot, "CHL-1202-A\tR3\t4800\t45\t09:00\r")  # Tab between fields, Enter after the last
        await burst(pilot, "Osterby\tB\t117.5\r")  # plant, shift, then a reading with Enter: low now
        values = {n: s.query_one(f"#{n}", Input).value for n in
                  ("lot", "retort", "lot_size", "initial_temperature", "cycle_start", "plant", "shift")}
        assert values == {"lot": "CHL-1202-A", "retort": "R3", "lot_size": "4800", "initial_temperature": "45",
                          "cycle_start": "09:00", "plant": "Osterby", "shift": "B"}
        assert s.entry.readings == [Reading(30.0, 117.5, "low")]
        # Enter in a form field moves on at once too.
        s.query_one("#lot", Input).value = ""
        s.query_one("#retort", Input).value = ""
        s.query_one("#lot", Input).focus()
        await burst(pilot, "CHL-9\rR4\r")
        assert s.query_one("#lot", Input).value == "CHL-9" and s.query_one("#retort", Input).value == "R4"


@sync
async def test_one_backspace_after_tab_deletes_one_character(db):
    # Defect: Tab selected the whole field, so one Backspace cleared it.
    app = build_app(db=db, actor="olga", role="operator", clock=Clock(10))
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot, lot="CHL-1202-A")
        app.screen.query_one("#retort", Input).focus()
        await pilot.press("shift+tab", "backspace")
        assert app.screen.query_one("#lot", Input).value == "CHL-1202-"


@sync
async def test_save_and_new_clear_the_previous_lot_and_put_the_cursor_in_lot(db):
    # Defect: the previous lot's flags and curves stayed on screen after Ctrl+S / Ctrl+N, and the
    # cursor landed in the wrong field.
    for key in ("ctrl+s", "ctrl+n"):
        app = build_app(db=db, actor="olga", role="operator", clock=Clock(40))
        async with app.run_test(size=(160, 48)) as pilot:
            await fill(pilot)
            await enter(pilot, "117")
            assert "temperature-low" in guidance_text(app)
            await pilot.press(key)
            await settle(pilot)
            s = app.screen
            assert "temperature-low" not in guidance_text(app) and "HOLD" not in guidance_text(app)
            assert "no curves yet" in str(s.query_one("#plot-legend").render())
            assert "NOTHING ENTERED YET" in results_text(app)
            assert s.entry.readings == [] and s.query_one("#lot", Input).value == ""
            assert s.entry.process_key is not None  # the filed process is kept for the next lot
            assert app.focused is s.query_one("#lot", Input)


@sync
async def test_floor_shows_the_filed_process(db):
    app = build_app(db=db, actor="olga", role="operator", clock=Clock(10))
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot)
        product = shown(app, "#product")
        p = CHILI
        assert (f"filed {p['process_temperature_C']:g} °C for {p['process_time_min']:g} min, come-up "
                f"{p['come_up_time_min']:g} min") in product.replace("\n", " ")


@sync
async def test_save_outside_the_operator_role_is_refused_with_the_cli_message(db):
    app = build_app(db=db, actor="sam", role="supervisor", clock=Clock(10))
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot)
        await enter(pilot, "118")
        await pilot.press("ctrl+s")
        await pilot.pause()
        messages = [n.message for n in app._notifications]
        assert "actor 'sam' (role supervisor) may not enter: that is for role operator" in messages


@sync
async def test_import_retort_log_csv(db):
    app = build_app(db=db, actor="olga", role="operator", clock=Clock(10))
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot, start="")
        await pilot.press("ctrl+o")
        await pilot.pause()
        app.screen.query_one("#field-path", Input).value = str(LOG)
        await pilot.press("enter")
        await settle(pilot)
        text = results_text(app)
        assert "retort log" in text and "HOLD" in text and "F0 delivered" in text
        await pilot.press("ctrl+o")
        await pilot.pause()
        app.screen.query_one("#field-path", Input).value = "/nonexistent/log.csv"
        await pilot.press("enter")
        await pilot.pause()
        assert "file not found" in str(app.screen.query_one("#dialog-error").render())


@sync
async def test_reading_without_cycle_start_says_what_to_do(db):
    app = build_app(db=db, actor="olga", role="operator", clock=Clock(10))
    async with app.run_test(size=(100, 32)) as pilot:
        await fill(pilot, start="")
        await enter(pilot, "118")
        assert "set Steam on" in app.screen.last_error
        await enter(pilot, "warm")
        assert app.screen.last_error == "Reading °C: 'warm' is not a number (e.g. 118.5)"


def test_open_low_interval_counts_until_now():
    readings = [Reading(30.0, 119.0, "low"), Reading(32.0, 117.0, "typed")]
    events, running = low_intervals(readings, 121.1, now_min=41.5)
    assert running and events == [{"kind": "temperature-low", "start_min": 30.0, "end_min": 41.5,
                                   "temperature_C": 117.0,
                                   "note": "from floor entry: 119 °C at 30 min (low); 117 °C at 32 min "
                                           "(typed); still low, counted until now"}]
    closed, running = low_intervals(readings + [Reading(36.0, 121.1, "back")], 121.1, now_min=41.5)
    assert not running and closed[0]["end_min"] == 36.0


def test_results_name_a_continuous_systems_affected_entries():
    # issue 15: the containers a deviation touched, by entry time, worst first
    from rich.console import Group

    from deviation.evaluate import evaluate_case
    from deviation.inputs.case import load_case
    from deviation.tui.widgets.results import affected_lines, plain

    ev = evaluate_case(load_case(REPO / "demo_cases" / "soup_reel_stop.toml"))
    text = plain(Group(*affected_lines(ev)), 100)
    held = [a for a in ev.affected_containers if a["disposition"] != "unaffected"]
    assert f"affected entries ({sum(a['containers'] for a in held):,} containers)" in text
    worst = min(held, key=lambda a: a["min_F_min"])
    first = text.splitlines()[1]
    assert worst["entry_start"].replace("T", " ") in first and f"{worst['containers']:,}" in first
    assert "unaffected" not in text
    # a batch retort has none
    assert affected_lines(evaluate_case(load_case(REPO / "demo_cases" / "chili_temperature_drop.toml"),
                                        what_if=False)) == []
