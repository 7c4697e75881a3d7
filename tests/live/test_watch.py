"""The live watch: a writer thread appends a retort log row by row while the watch follows it."""

import json
import math
import os
import threading
import time
from pathlib import Path

import pytest

from deviation.records import processes as library
from deviation.inputs.case import Process, load_toml
from deviation.cli import main
from deviation.records.replay import replay
from deviation.errors import RecordError
from deviation.records.store import open_store
from deviation.live.watch import LogFollower, LogRotated, LogTruncated, Watch

REPO = Path(__file__).resolve().parents[2]
PEAS = REPO / "demo_cases" / "processes" / "OH-PEA-74x113.toml"  # 20 min at 118.3 °C, come-up 9 min
PT_C = 118.3
DROP_C = {13.0: 117.0, 13.5: 116.2}  # a drop during the hold: two readings below
GAP_MIN = (18.0, 21.0)  # no readings in between: 3 min, over the 2 min limit
PARTIAL_AT_MIN = 24.0  # this row is written in two pieces


def rows() -> list[tuple[float, float]]:
    """An invented peas cycle, a reading every 0.5 min: come-up 8 min, hold to 28.5 min, cooling."""
    out = []
    for i in range(0, 111):
        t = 0.5 * i
        if GAP_MIN[0] < t < GAP_MIN[1]:
            continue
        if t < 8.0:
            T = 30.0 + (118.6 - 30.0) * t / 8.0
        elif t <= 28.5:
            T = DROP_C.get(t, 118.6)
        else:
            T = 25.0 + (118.6 - 25.0) * math.exp(-(t - 28.5) / 1.0)
        out.append((t, T))
    return out


HEADER = ["# invented test record (not real data)", "time_min,temperature_C"]


def lines() -> list[str]:
    return HEADER + [f"{t:.2f},{T:.2f}" for t, T in rows()]


class Writer(threading.Thread):
    """Appends the log a row at a time, as a recorder does; one row arrives in two pieces."""

    def __init__(self, path: Path, interval_s: float = 0.04) -> None:
        super().__init__(daemon=True)
        self.path, self.interval_s = path, interval_s
        self.rows_written = 0
        self.written_at: dict[int, float] = {}  # data row number (1-based) -> monotonic time

    def run(self) -> None:
        with open(self.path, "a", encoding="utf-8") as fh:
            for i, line in enumerate(lines()):
                row = i - len(HEADER) + 1
                if line.startswith(f"{PARTIAL_AT_MIN:.2f},"):
                    fh.write(line[:8])  # "24.00,11": a reading cut short
                    fh.flush()
                    time.sleep(0.2)  # several polls see the partial line
                fh.write(line[8:] if line.startswith(f"{PARTIAL_AT_MIN:.2f},") else line)
                fh.write("\n")
                fh.flush()
                if row >= 1:
                    self.rows_written = row
                    self.written_at[row] = time.monotonic()
                time.sleep(self.interval_s if row >= 1 else 0.0)


@pytest.fixture
def peas():
    return Process.model_validate(load_toml(PEAS)["process"])


@pytest.fixture
def store(tmp_path, monkeypatch):
    monkeypatch.delenv("DEVIATION_DB", raising=False)
    s = open_store(tmp_path / "watch.db")
    library.add_process(s, PEAS, actor="pat", role="process-authority")
    yield s
    s.close()


def expected_rows() -> dict[str, int]:
    """The reading that shows each deviation, found from the rows themselves."""
    r = rows()
    hold_start = next(i for i, (t, T) in enumerate(r) if T >= PT_C)
    drop = next(i for i, (t, T) in enumerate(r) if i > hold_start and T < PT_C) + 1
    gap = next(i for i in range(1, len(r)) if r[i][0] - r[i - 1][0] > 2.0) + 1
    return {"temperature-low": drop, "record-gap": gap}


def test_watch_follows_a_growing_log(tmp_path, peas, store, capsys):
    log = tmp_path / "R2.csv"
    log.write_text("")
    received = []  # (event, monotonic time, rows the writer had written)
    writer = Writer(log)

    def on_event(e):
        received.append((e, time.monotonic(), writer.rows_written))

    entry = library.lookup(store, "OH-PEA-74x113")
    ref = library.ResolvedRef("OH-PEA-74x113", entry.process_id, entry.version, entry.sha256)
    watch = Watch(peas, lot="PEA-261201", retort_id="R2", initial_temperature_C=55.0, lot_size_containers=3000,
                  store=store, actor="olga", role="operator", process_ref=ref, source=str(log),
                  on_event=on_event)
    with LogFollower(log) as follower:
        writer.start()
        final = watch.run(follower, poll_s=0.01, until_end=True, idle_s=0.6)
    writer.join()

    flags = [(e, at, written) for e, at, written in received if e["type"] == "flag"]
    assert [e["code"] for e, _, _ in flags] == ["temperature-low", "record-gap"]
    want = expected_rows()
    latencies = []
    for e, at, written in flags:
        row = want[e["code"]]
        # Raised with the reading that shows it (same row), and before the writer was two rows on.
        assert e["row"] == row and e["time_min"] == rows()[row - 1][0]
        assert written <= row + 1, (e["code"], written, row)
        latencies.append(at - writer.written_at[row])
    with capsys.disabled():
        print(f"\nlatency row written -> flag emitted [ms]: {[round(1000 * x, 1) for x in latencies]}")
    assert max(latencies) < 0.5  # poll 10 ms; an evaluation takes tens of ms

    # The partial line was waited for: no reading of 11 °C was ever seen, every row arrived.
    assert not any(e.get("reading_C") == 11.0 for e, _, _ in received)
    assert final["rows"] == len(rows()) and final["reason"] == "end of file"

    # The final evaluation is what `deviation evaluate` gives on the finished file.
    case = tmp_path / "case.toml"
    case.write_text(PEAS.read_text(encoding="utf-8") + f"""
[deviation]
lot = "PEA-261201"
retort_id = "R2"
lot_size_containers = 3000
initial_temperature_C = 55.0
retort_log = "{log.name}"
""", encoding="utf-8")
    capsys.readouterr()
    assert main(["evaluate", str(case), "--json"]) == 0
    batch = json.loads(capsys.readouterr().out)
    assert final["delivered_F_min"] == pytest.approx(batch["delivered_F_min"], rel=1e-12)  # same text, same engine
    assert [(f["code"], f["message"]) for f in final["flags"]] == \
        [(f["code"], f["message"]) for f in batch["flags"]]
    assert final["projected_F_min"] == pytest.approx(batch["projected_F_min"], rel=1e-12)
    assert final["guidance"]["disposition"] == batch["guidance"]["disposition"]

    # The record was started at the drop, names the filed version, and replays.
    rid = final["record_id"]
    assert rid and [e for e, _, _ in received if e["type"] == "record"][0]["time_min"] == 13.0
    view = store.record(rid)
    assert (view.process_id, view.process_version) == ("OH-PEA-74x113", "1")
    assert view.snapshot["process_ref"]["process_version"] == 1
    assert [e.kind for e in view.events] == ["entered", "evaluated", "amended", "evaluated", "amended",
                                            "evaluated"]
    assert view.snapshot["retort_log_text"] == log.read_text(encoding="utf-8")
    assert view.evaluation_current and store.verify().ok
    out = replay(store, [rid])
    assert [r["reproduced"] for r in out["records"]] == [True]


def test_stops_when_cooling_is_done(tmp_path, peas):
    log = tmp_path / "done.csv"
    log.write_text("\n".join(lines()) + "\n")
    watch = Watch(peas, lot="L", retort_id="R", initial_temperature_C=55.0, source=str(log))
    with LogFollower(log) as follower:
        final = watch.run(follower, poll_s=0.01)
    assert final["reason"] == "cooling done"
    assert final["cycle"]["hold_end_min"] == 28.5 and final["cold_spot"]["temperature_C"][-1] < 100.0
    updates = [e for e in watch.events if e["type"] == "update"]
    assert updates[-1]["phase"] == "cooling"


def test_live_findings_while_the_cycle_runs(peas):
    """A drop is raised at its first reading; a hold that ends early becomes short-hold in cooling."""
    w = Watch(peas, lot="L", retort_id="R", initial_temperature_C=45.0)
    ramp = [(0.5 * i, 30.0 + 4.5 * i) for i in range(20)]  # 117.0 °C at 9.5 min
    hold = [(10.0 + 0.5 * i, 118.5) for i in range(5)] + [(12.5, 117.5)]
    body = ["time_min,temperature_C"] + [f"{t:.1f},{T:.1f}" for t, T in ramp + hold]
    flags = [e for e in w.feed(body) if e["type"] == "flag"]
    # 45 °C initial temperature (filed minimum 50); still below 118.3 °C at 9.5 min (filed come-up
    # 9 min); then the first reading below process temperature in the hold.
    assert [(e["code"], e["time_min"], e["source"]) for e in flags] == [
        ("low-initial-temperature", 0.5, "analysis"), ("long-come-up", 9.5, "live"),
        ("temperature-low", 12.5, "live")]
    codes = [e["code"] for e in w.feed(["13.0,110.0", "13.5,60.0"]) if e["type"] == "flag"]
    assert codes == ["short-hold"]  # fell into cooling 2 min into a 20 min hold


def test_truncated_or_rotated_log_is_a_clear_error(tmp_path):
    log = tmp_path / "R1.csv"
    log.write_text("time_min,temperature_C\n0,30\n0.5,35\n1.0,4")
    f = LogFollower(log)
    assert f.read_new() == ["time_min,temperature_C", "0,30", "0.5,35"]  # "1.0,4" waits
    log.write_text("time_min,temperature_C\n0,30\n")
    with pytest.raises(LogTruncated) as err:
        f.read_new()
    read, left = len(b"time_min,temperature_C\n0,30\n0.5,35\n"), len(b"time_min,temperature_C\n0,30\n")
    assert (read, left) == (35, 28)
    assert str(err.value) == (f"{log}: the retort log shrank from {read} to {left} bytes while being watched "
                              "(truncated); the watch stopped after line 3 of the file; a retort record "
                              "only grows: keep the recorder's file whole")
    assert isinstance(err.value, RecordError)
    f.close()

    f = LogFollower(log)
    f.read_new()
    other = tmp_path / "R1.new"
    other.write_text("time_min,temperature_C\n0,30\n0.5,35\n")
    os.replace(other, log)
    with pytest.raises(LogRotated) as err:
        f.read_new()
    assert str(err.value) == (f"{log}: the retort log was replaced by another file (rotated or rewritten "
                              "under the same name) while being watched; the watch stopped after line 2 of "
                              "the file; start a new watch on the new file")
    f.close()

    f = LogFollower(log)
    f.read_new()
    log.unlink()
    with pytest.raises(LogRotated, match="moved or deleted while being watched"):
        f.read_new()
    f.close()


def test_rewritten_in_place_is_caught(tmp_path):
    log = tmp_path / "R1.csv"
    log.write_text("time_min,temperature_C\n0,30\n0.5,35\n")
    with LogFollower(log) as f:
        f.read_new()
        with open(log, "r+b") as fh:  # same inode, same size, one reading changed, then growth
            fh.seek(len("time_min,temperature_C\n0,30\n0.5,"))
            fh.write(b"95\n1.0,40\n")
        with pytest.raises(LogTruncated, match="already read were changed"):
            f.read_new()


def test_watch_stops_with_the_message_when_the_log_is_truncated(tmp_path, peas, store):
    log = tmp_path / "R3.csv"
    log.write_text("\n".join(lines()[:40]) + "\n")

    def truncate_later():
        time.sleep(0.3)
        log.write_text("\n".join(lines()[:5]) + "\n")

    events = []
    watch = Watch(peas, lot="L", retort_id="R3", initial_temperature_C=55.0, store=store, actor="olga",
                  source=str(log), on_event=events.append)
    threading.Thread(target=truncate_later, daemon=True).start()
    with LogFollower(log) as follower, pytest.raises(LogTruncated, match="shrank from"):
        watch.run(follower, poll_s=0.01, until_end=True, idle_s=5.0)
    assert events[-1]["type"] == "error" and "shrank" in events[-1]["message"]
    # The record the drop started carries a note saying why the watch stopped.
    assert "watch stopped" in store.record(watch.record_id).notes[-1]["text"]


def test_cli_watch_json_lines(tmp_path, store, capsys):
    log = tmp_path / "R2.csv"
    log.write_text("\n".join(lines()))  # the last line has no line end: read at the end of the file
    db = store.url.replace("sqlite:///", "")
    code = main(["watch", str(log), "--process", "OH-PEA-74x113", "--lot", "PEA-9", "--retort", "R2",
                 "--initial-temperature-C", "55", "--until-end", "--idle-s", "0.1", "--poll-s", "0.01",
                 "--db", db, "--actor", "olga", "--json"])
    out = capsys.readouterr().out.splitlines()
    assert code == 0
    events = [json.loads(line) for line in out]
    assert events[-1]["type"] == "final" and events[-1]["rows"] == len(rows())
    assert events[-1]["process_ref"]["process_version"] == 1
    assert [e["code"] for e in events if e["type"] == "flag"] == ["temperature-low", "record-gap"]
    assert {"time_min", "delivered_F_min", "projected_F_min", "extension_to_target_min"} <= \
        set(next(e for e in events if e["type"] == "update"))

    code = main(["watch", str(log), "--process", "OH-PEA-74x113@4", "--lot", "PEA-9", "--retort", "R2",
                 "--db", db, "--json"])
    err = capsys.readouterr().err
    assert code == 2 and err.strip() == ("error: process_ref 'OH-PEA-74x113@4': process 'OH-PEA-74x113' has "
                                         "no version 4 (filed versions: 1)")
    code = main(["watch", str(log), "--process", "OH-PEA-74x113", "--lot", "PEA-9", "--retort", "R2",
                 "--db", db, "--role", "supervisor"])
    assert code == 4


def test_cli_watch_human_output_has_flags_and_caution(tmp_path, capsys):
    log = tmp_path / "R2.csv"
    log.write_text("\n".join(lines()) + "\n")
    code = main(["watch", str(log), "--process", str(PEAS), "--lot", "PEA-9", "--retort", "R2",
                 "--initial-temperature-C", "55", "--poll-s", "0.01", "--no-record"])
    out = capsys.readouterr().out
    assert code == 0
    assert "⚠ DEVIATION" in out and "temperature-low" in out and "record-gap" in out
    assert "F0 so far" in out and "projected" in out
    assert "process authority decides" in out.lower()


# -- issue 13: a bad row is reported and skipped; a rewrite anywhere before is caught ----------


def test_a_bad_row_is_reported_and_skipped_and_the_watch_goes_on(peas):
    # Defect: one bad recorder row (40.00,abc) stopped following for good.
    events = []
    watch = Watch(peas, lot="L", retort_id="R2", initial_temperature_C=55.0, source="R2.csv",
                  on_event=events.append)
    good = lines()
    bad_at = len(HEADER) + 20  # file line of the bad row (1-based): after 19 readings
    feed = good[:bad_at - 1] + ["9.50,abc"] + good[bad_at - 1:]
    for line in feed:
        watch.feed([line])
    skipped = [e for e in events if e["type"] == "skipped"]
    assert [e["line"] for e in skipped] == [bad_at]
    assert skipped[0]["message"].startswith(f"line {bad_at} ('9.50,abc') skipped: ")
    assert "'abc' is not a number" in skipped[0]["message"]
    final = watch.finish("end of file")
    assert final["rows"] == len(rows()) and final["skipped"] == [{"line": bad_at, "why": skipped[0]["message"]
                                                                    .split("skipped: ", 1)[1]}]
    assert "delivered_F_min" in final  # evaluated, the good rows all in
    assert watch.snapshot()["watch"]["skipped"][0]["text"] == "9.50,abc"


def test_a_skipped_row_that_leaves_a_gap_is_flagged_as_a_gap(peas):
    events = []
    watch = Watch(peas, lot="L", retort_id="R2", initial_temperature_C=55.0, source="R2.csv",
                  on_event=events.append)
    good = [ln for ln in lines() if not ln.startswith("#")]
    # Rows 11.0 to 14.0 min come garbled: the record has a 3.5-min hole over the 2-min limit.
    garbled = [ln if not 11.0 <= float(ln.split(",")[0] if ln[0].isdigit() else -1) <= 14.0
               else ln.replace(",", ",x") for ln in good]
    watch.feed(garbled)
    assert len([e for e in events if e["type"] == "skipped"]) == 7
    assert any(e["type"] == "flag" and e["code"] == "record-gap" and e["time_min"] == 14.5 for e in events)


@pytest.mark.parametrize("row, words", [
    ("30.5,245", "values look like °F (highest 245 at line 59"),
    ("30.5,155", "highest 155 at line 59"),
    ("30.5,-10", "reading -10 °C is outside 0 to 150 °C"),
    ("30.5,0", "0 °C is not a retort reading"),
    ("99999999.00,20.00", "past the longest record the watch follows (1440 min from the first row)"),
    ("30.5", "1 field(s) found"),
    ("29.0,118", "earlier than"),
])
def test_rows_no_retort_gives_are_skipped(peas, row, words):
    events = []
    watch = Watch(peas, lot="L", retort_id="R2", initial_temperature_C=55.0, source="R2.csv",
                  on_event=events.append)
    good = [ln for ln in lines() if ln[:1].isdigit() and float(ln.split(",")[0]) <= 30.0]
    watch.feed(HEADER + good)
    watch.feed([row, "31.00,118.60"])
    skipped = [e for e in events if e["type"] == "skipped"]
    assert len(skipped) == 1 and words in skipped[0]["message"], skipped
    assert watch.profile.time_min[-1] == pytest.approx(31.0)


def test_cli_watch_evaluates_the_good_rows_around_a_bad_one(tmp_path, capsys):
    # Defect: `deviation watch` on a file with one bad row exited 2 without evaluating the rest.
    log = tmp_path / "R2.csv"
    good = lines()
    log.write_text("\n".join(good[:30] + ["14.20,abc"] + good[30:]) + "\n")
    code = main(["watch", str(log), "--process", str(PEAS), "--lot", "PEA-9", "--retort", "R2",
                 "--initial-temperature-C", "55", "--until-end", "--idle-s", "0.1", "--poll-s", "0.01",
                 "--no-record", "--json"])
    events = [json.loads(line) for line in capsys.readouterr().out.splitlines()]
    assert code == 0
    assert [e["line"] for e in events if e["type"] == "skipped"] == [31]
    assert events[-1]["type"] == "final" and events[-1]["rows"] == len(rows())
    code = main(["watch", str(log), "--process", str(PEAS), "--lot", "PEA-9", "--retort", "R2",
                 "--initial-temperature-C", "55", "--until-end", "--idle-s", "0.1", "--poll-s", "0.01",
                 "--no-record"])
    out = capsys.readouterr().out
    assert code == 0 and "⚠ BAD ROW line 31 ('14.20,abc') skipped" in out and "1 bad row(s) skipped" in out


def test_a_row_rewritten_far_back_is_caught(tmp_path):
    # Defect: only the last 64 bytes before the offset were compared.
    log = tmp_path / "R1.csv"
    log.write_text("\n".join(lines()) + "\n")
    with LogFollower(log) as f:
        f.read_new()
        text = log.read_bytes()
        at = text.index(b"\n5.00,") + 1  # a reading near the top, thousands of bytes back
        with open(log, "r+b") as fh:  # same inode and size: one digit changed in place
            fh.seek(at + len("5.00,"))
            fh.write(b"9")
        with pytest.raises(LogTruncated, match=r"rewritten in place\), at or after line 13,"):
            f.read_new()


def test_a_rewrite_is_caught_past_the_whole_block_check(tmp_path, monkeypatch):
    monkeypatch.setattr(LogFollower, "BLOCK_BYTES", 64)
    monkeypatch.setattr(LogFollower, "FULL_CHECK_BYTES", 256)
    log = tmp_path / "R1.csv"
    log.write_text("\n".join(lines()) + "\n")
    with LogFollower(log) as f:
        f.read_new()
        with open(log, "r+b") as fh:
            fh.seek(100)
            fh.write(b"#")
        with pytest.raises(LogTruncated):  # caught within one pass over the blocks
            for _ in range(len(f._blocks) + 1):
                f.read_new()
