"""Floor entry following a retort log that a writer thread is still appending to (Pilot), and the
record screen's re-evaluate key.

The log is the demo record R3-2026-1104-A.csv (chili, 121.1 °C): the retort first reads below
the process temperature at 40.50 min (119.35 °C, file row 82) and is back at 48.0 min. Waits are
bounded loops on the app's state, not fixed sleeps.
"""

import asyncio
import functools
import threading
import time
from pathlib import Path

import pytest
from textual.widgets import Input, Select

from deviation.cli import main
from deviation.records.store import open_store
from deviation.tui.app import build_app
from deviation.tui.screens.record import RecordScreen
from deviation.tui.widgets.guidance import GuidancePanel
from deviation.tui.widgets.results import ResultsPanel

REPO = Path(__file__).resolve().parents[2]
LOG = REPO / "demo_cases" / "logs" / "R3-2026-1104-A.csv"
LINES = LOG.read_text().splitlines(keepends=True)
HEAD = [ln for ln in LINES if ln.startswith("#") or ln.startswith("time_min")]
ROWS = LINES[len(HEAD):]
FIRST_LOW = next(i for i, ln in enumerate(ROWS) if i > 40 and float(ln.split(",")[1]) < 121.1)


def sync(fn):
    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        return asyncio.run(fn(*args, **kwargs))

    return wrapper


async def wait_for(pilot, condition, timeout_s: float = 20.0, what: str = "") -> None:
    """Let the app run until ``condition()`` holds (bounded)."""
    deadline = time.monotonic() + timeout_s
    while not condition():
        assert time.monotonic() < deadline, f"timed out waiting for {what}"
        await pilot.pause(0.05)


def notes(app) -> list[str]:
    return [n.message for n in app._notifications]


def status(app) -> str:
    return str(app.screen.query_one("#follow-status").render())


@pytest.fixture
def db(tmp_path, monkeypatch):
    monkeypatch.delenv("DEVIATION_DB", raising=False)
    monkeypatch.delenv("DEVIATION_ROLE", raising=False)
    return tmp_path / "follow.db"


def test_drop_row_index_is_the_one_the_module_docstring_names():
    assert FIRST_LOW == 81 and ROWS[FIRST_LOW].startswith("40.50,")


@sync
async def test_following_a_growing_log_shows_results_then_the_drop_then_truncation(db, tmp_path):
    log = tmp_path / "R3-live.csv"
    log.write_text("".join(HEAD + ROWS[:60]))  # steam on to 29.5 min: in the hold, no deviation
    app = build_app(db=db, actor="olga", role="operator")
    async with app.run_test(size=(100, 32)) as pilot:
        screen = app.screen
        screen.query_one("#process", Select).value = next(k for k, p in screen.processes.items()
                                                          if p.id == "OH-CHL-87x115")
        for name, value in (("lot", "CHL-LIVE"), ("retort", "R3"), ("lot_size", "4800"),
                            ("initial_temperature", "45")):
            screen.query_one(f"#{name}", Input).value = value
        await pilot.pause()
        screen.follow_poll_s = 0.05

        # The dialog checks the file in place: missing, then a bad header, then the live log.
        bad = tmp_path / "bad.csv"
        bad.write_text("time;temperature\n0;20\n")
        await pilot.press("ctrl+f")
        await pilot.pause()
        dialog = app.screen
        for path, message in ((tmp_path / "none.csv", "retort log not found"),
                              (bad, "no time column in the header")):
            dialog.query_one("#field-path", Input).value = str(path)
            await pilot.press("enter")
            await pilot.pause()
            assert app.screen is dialog and message in str(dialog.query_one("#dialog-error").render())
        dialog.query_one("#field-path", Input).value = str(log)
        await pilot.press("enter")
        await wait_for(pilot, lambda: screen.follow is not None and screen.follow.rows == 60
                       and "retort log" in screen.query_one(ResultsPanel).plain_text(100),
                       what="the first 60 rows evaluated")
        assert screen.following and f"following {log.name}: 60 rows, last at 29.5 min" in status(app)
        assert screen.entry.retort_log_source == str(log)
        assert not screen.follow.flags and not any("FLAG" in m for m in notes(app))

        # A writer appends the rest of the drop and the return, in bursts, one with a partial line.
        def writer() -> None:
            with log.open("a") as f:
                for i in range(60, 110, 5):
                    burst = "".join(ROWS[i:i + 5])
                    f.write(burst[:-7])  # a partial last line: waited for, not parsed
                    f.flush()
                    time.sleep(0.06)
                    f.write(burst[-7:])
                    f.flush()
                    time.sleep(0.03)

        thread = threading.Thread(target=writer)
        thread.start()
        await wait_for(pilot, lambda: any("FLAG temperature-low" in m for m in notes(app)),
                       what="the temperature-low toast")
        flag = next(f for f in screen.follow.flags if f["code"] == "temperature-low")
        # Raised with the first reading below the process temperature, not before.
        assert flag["row"] == FIRST_LOW + 1 and flag["time_min"] == pytest.approx(40.5)
        assert flag["reading_C"] == pytest.approx(float(ROWS[FIRST_LOW].split(",")[1]))
        await asyncio.get_running_loop().run_in_executor(None, thread.join)
        await wait_for(pilot, lambda: screen.follow.rows == 110
                       and "temperature-low" in screen.query_one(GuidancePanel).plain_text(100),
                       what="all 110 rows evaluated with the drop in the guidance")
        assert screen.entry.retort_log_text.count("\n") == len(HEAD) + 110
        assert "⚑ 1 flag: temperature-low" in status(app)
        # Still running: what is known so far, not a judgement of the unfinished hold.
        assert "◔ RUNNING · guidance when the cycle ends; so far: ⚑ 1 deviation flag" in \
            screen.query_one(ResultsPanel).plain_text(100)

        # The recorder's file is cut short: the message in place, and following stops.
        log.write_text("".join(HEAD + ROWS[:10]))
        await wait_for(pilot, lambda: not screen.following, what="following to stop")
        # Which of the two truncation checks fires first depends on when the poll meets the
        # rewrite (size below the offset, or the bytes already read changed); both stop it.
        shown = status(app)
        assert (shown.startswith(f"✗ {log}: the retort log shrank") and "(truncated)" in shown) or \
            shown.startswith(f"✗ {log}: bytes of the retort log already read were changed (rewritten in place)")
        assert screen.query_one("#follow-status").has_class("-error")
        assert screen.check_action("follow_log", ()) and not screen.check_action("stop_follow", ())
        # The rows read before stay in the entry: Ctrl+S saves them as for any entry.
        assert screen.entry.retort_log_text.count("\n") == len(HEAD) + 110


@sync
async def test_stop_key_ends_following(db, tmp_path):
    log = tmp_path / "R3-stop.csv"
    log.write_text("".join(HEAD + ROWS[:30]))
    app = build_app(db=db, actor="olga", role="operator")
    async with app.run_test(size=(100, 32)) as pilot:
        screen = app.screen
        await pilot.press("ctrl+f")  # no process chosen yet: said, no dialog
        await pilot.pause()
        assert app.screen is screen and screen.last_error == "choose the filed process first"
        screen.query_one("#process", Select).value = next(k for k, p in screen.processes.items()
                                                          if p.id == "OH-CHL-87x115")
        await pilot.pause()
        screen.follow_poll_s = 0.05
        await pilot.press("ctrl+f")
        await pilot.pause()
        app.screen.query_one("#field-path", Input).value = str(log)
        await pilot.press("enter")
        await wait_for(pilot, lambda: screen.follow is not None and screen.follow.rows == 30, what="30 rows")
        await pilot.press("ctrl+f")  # the same key stops
        await pilot.pause()
        assert not screen.following and "■ stopped following R3-stop.csv" in status(app)
        # A record already in cooling when followed: evaluated once, and following ends by itself.
        done = tmp_path / "R3-done.csv"
        done.write_text("".join(HEAD + ROWS))
        await pilot.press("ctrl+f")
        await pilot.pause()
        app.screen.query_one("#field-path", Input).value = str(done)
        await pilot.press("enter")
        await wait_for(pilot, lambda: screen.follow.path == done and not screen.following, what="cycle done")
        assert f"■ stopped following R3-done.csv (cycle done: cooling): {len(ROWS)} rows" in status(app)
        assert screen.entry.retort_log_text.count("\n") == len(HEAD) + len(ROWS)


async def start_follow(pilot, log) -> None:
    app = pilot.app
    screen = app.screen
    screen.query_one("#process", Select).value = next(k for k, p in screen.processes.items()
                                                      if p.id == "OH-CHL-87x115")
    for name, value in (("lot", "CHL-LIVE"), ("retort", "R3"), ("lot_size", "4800"),
                        ("initial_temperature", "45")):
        screen.query_one(f"#{name}", Input).value = value
    await pilot.pause()
    screen.follow_poll_s = 0.05
    await pilot.press("ctrl+f")
    await pilot.pause()
    app.screen.query_one("#field-path", Input).value = str(log)
    await pilot.press("enter")


@sync
async def test_following_survives_a_bad_row(db, tmp_path):
    # Defect: one bad recorder row (40.00,abc) stopped following for good.
    log = tmp_path / "R3-bad.csv"
    log.write_text("".join(HEAD + ROWS[:50]) + "25.10,abc\n")  # a bad row, after 50 good ones
    app = build_app(db=db, actor="olga", role="operator")
    async with app.run_test(size=(100, 32)) as pilot:
        screen = app.screen
        await start_follow(pilot, log)
        await wait_for(pilot, lambda: screen.follow is not None and screen.follow.skipped, what="the skip")
        bad_line = len(HEAD) + 51
        assert any(m.startswith(f"line {bad_line} ('25.10,abc') skipped: ") for m in notes(app))
        assert screen.following
        with log.open("a") as f:
            f.write("".join(ROWS[50:70]))
        await wait_for(pilot, lambda: screen.follow.rows == 70, what="the rows after the bad one")
        assert screen.following and "⚠ 1 bad row skipped" in status(app)
        assert "abc" not in screen.entry.retort_log_text  # the good rows only, evaluated
        assert "retort log" in screen.query_one(ResultsPanel).plain_text(100)


@sync
async def test_following_is_resumed_and_said_so_after_a_restart(db, tmp_path):
    # Defect: a restored draft did not follow the log again.
    log = tmp_path / "R3-resume.csv"
    log.write_text("".join(HEAD + ROWS[:40]))
    app = build_app(db=db, actor="olga", role="operator")
    async with app.run_test(size=(100, 32)) as pilot:
        await start_follow(pilot, log)
        await wait_for(pilot, lambda: app.screen.follow is not None and app.screen.follow.rows == 40,
                       what="40 rows")
    with log.open("a") as f:
        f.write("".join(ROWS[40:55]))  # the recorder went on while the terminal was closed
    app2 = build_app(db=db, actor="olga", role="operator")
    async with app2.run_test(size=(100, 32)) as pilot:
        screen = app2.screen
        await wait_for(pilot, lambda: screen.follow is not None and screen.follow.rows == 55, what="resumed")
        assert screen.following
        assert str(screen.query_one("#notice").render()).endswith(
            f"◉ Following {log.name} resumed after the restart (55 rows so far).")
        assert any("following R3-resume.csv resumed" in m for m in notes(app2))
        await pilot.press("ctrl+f")  # stopped by the operator: not resumed next time
        await pilot.pause()
    app3 = build_app(db=db, actor="olga", role="operator")
    async with app3.run_test(size=(100, 32)) as pilot:
        await pilot.pause(0.3)
        assert app3.screen.follow is None


def _record(db) -> str:
    case = REPO / "demo_cases" / "chili_temperature_drop.toml"
    assert main(["record", "new", str(case), "--db", str(db), "--actor", "olga", "--role", "operator",
                 "--json"]) == 0
    return open_store(db).list_records()[0].id


@sync
async def test_record_screen_re_evaluates_and_refuses_an_auditor(db, capsys):
    rid = _record(db)
    capsys.readouterr()
    for actor, role in (("sam", "supervisor"), ("ada", "auditor")):
        app = build_app(db=db, actor=actor, role=role)
        async with app.run_test(size=(100, 30)) as pilot:
            await app.push_screen(RecordScreen(rid))
            await pilot.pause()
            await pilot.press("e")
            await pilot.pause()
            messages = notes(app)
        events = open_store(db).record(rid).events
        if role == "supervisor":
            assert [e.kind for e in events] == ["entered", "evaluated", "evaluated"]
            assert events[-1].actor == "sam" and events[-1].role == "supervisor"
            assert any(m.startswith(f"Record {rid} re-evaluated by sam (supervisor)") for m in messages)
        else:
            assert len(events) == 3  # nothing written
            # The CLI's refusal, word for word.
            code = main(["record", "evaluate", rid, "--db", str(db), "--actor", "ada", "--role", "auditor"])
            cli = capsys.readouterr().err
            assert code == 4
            refusal = ("actor 'ada' (role auditor) may not evaluate: that is for roles operator, "
                       "supervisor, process-authority")
            assert refusal in messages and refusal in cli
