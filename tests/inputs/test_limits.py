"""Issue 13: one validation layer for every value that enters (rules/limits.toml), resource
limits, no record without a record, and the measured cold-spot log checked against the retort."""

from __future__ import annotations

import os
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from deviation.errors import CaseError, DeviationError, RecordError
from deviation.evaluate import evaluate_case
from deviation.inputs import limits
from deviation.inputs.case import load_case, parse_case
from deviation.inputs.cycle import check_cold_spot_log
from deviation.inputs.logs import RetortProfile, parse_log_text, read_log

REPO = Path(__file__).resolve().parents[2]
DEMO = REPO / "demo_cases"
GOOD = REPO / "tests" / "data" / "good_case.toml"


@pytest.fixture
def own_limits(tmp_path, monkeypatch):
    """A plant's own limits file (DEVIATION_LIMITS), read afresh."""

    def write(text: str) -> None:
        path = tmp_path / "limits.toml"
        path.write_text(text)
        monkeypatch.setenv("DEVIATION_LIMITS", str(path))
        limits._cached.cache_clear()

    yield write
    monkeypatch.delenv("DEVIATION_LIMITS", raising=False)
    limits._cached.cache_clear()


def test_the_shipped_limits_file_is_the_one_read():
    shipped = limits.shipped_limits_path()
    assert shipped.is_file()
    assert limits.current().retort_reading_max_C == 150.0
    assert limits.current().record_rows_max == 2_000_000


def test_a_plant_may_narrow_a_bound_in_its_own_file(own_limits):
    own_limits("initial_temperature_max_C = 80.0\n")
    data = load_case(GOOD).case.model_dump()
    data["deviation"]["initial_temperature_C"] = 85.0
    with pytest.raises(CaseError, match=r"deviation.initial_temperature_C: 85 °C is outside -50 to 80 °C"):
        parse_case(data)


def test_a_bad_limits_file_is_a_clear_error(own_limits):
    own_limits("retort_reading_max_C = true\n")
    with pytest.raises(CaseError, match="retort_reading_max_C: expected a finite number, found True"):
        limits.current()


def test_row_count_is_bounded_before_any_array(own_limits):
    own_limits("record_rows_max = 5\n")
    text = "time_min,temperature_C\n" + "\n".join(f"{i},{100 + i}" for i in range(6))
    with pytest.raises(RecordError, match="the retort log has 6 readings, over the 5 one record may have"):
        parse_log_text(text, source="rows.csv")


def test_a_fifo_or_a_device_is_refused_without_reading(tmp_path):
    fifo = tmp_path / "log.csv"
    os.mkfifo(fifo)
    with pytest.raises(RecordError, match="is not a regular file"):
        read_log(fifo)  # would block for ever if it were opened
    with pytest.raises(RecordError, match="is not a regular file"):
        read_log("/dev/zero")


def test_a_file_over_the_size_limit_is_refused(tmp_path, own_limits):
    own_limits("file_size_max_bytes = 100\n")
    big = tmp_path / "big.csv"
    big.write_text("time_min,temperature_C\n" + "0,20\n" * 50)
    with pytest.raises(RecordError, match="over the 100 bytes a file may have"):
        read_log(big)


def test_a_nul_byte_in_a_log_path_is_a_case_error(tmp_path):
    case = tmp_path / "case.toml"
    case.write_text(GOOD.read_text() + 'retort_log = "a\\u0000b.csv"\n')
    with pytest.raises(CaseError, match="cannot be opened: not a usable path"):
        load_case(case)


def test_an_unrelated_file_named_as_the_log_is_never_echoed(tmp_path):
    secret = "SECRET_TOKEN=hunter2-do-not-print"
    log = tmp_path / "env.csv"
    log.write_text(f"{secret}\nPATH=/usr/bin\n")
    with pytest.raises(RecordError) as caught:
        read_log(log)
    assert "hunter2" not in str(caught.value)


# --------------------------------------------------------------------------------------------
# Readings entered without a log
# --------------------------------------------------------------------------------------------


def _with_events(events):
    loaded = load_case(GOOD)
    data = loaded.case.model_dump()
    data["deviation"]["events"] = events
    return replace(loaded, case=parse_case(data))


def test_a_low_reading_in_the_hold_counts_until_the_next_reading_at_temperature():
    at_temp = evaluate_case(_with_events([{"kind": "reading", "at_min": 20.0, "temperature_C": 121.1}]))
    low = evaluate_case(_with_events([{"kind": "reading", "at_min": 20.0, "temperature_C": 115.0},
                                      {"kind": "reading", "at_min": 30.0, "temperature_C": 121.1}]))
    interval = evaluate_case(_with_events([{"kind": "temperature-low", "start_min": 20.0, "end_min": 30.0,
                                            "temperature_C": 115.0}]))
    assert [i.start_min for i in low.cycle.low_intervals] == [pytest.approx(20.0, abs=0.05)]
    assert low.delivered_F_min == pytest.approx(interval.delivered_F_min, rel=1e-9)
    assert low.delivered_F_min < at_temp.delivered_F_min
    assert low.guidance["disposition"] != "no-deviation"


def test_a_low_reading_with_none_after_it_stays_low_to_the_end():
    open_low = evaluate_case(_with_events([{"kind": "reading", "at_min": 20.0, "temperature_C": 115.0}]))
    closed = evaluate_case(_with_events([{"kind": "reading", "at_min": 20.0, "temperature_C": 115.0},
                                         {"kind": "reading", "at_min": 25.0, "temperature_C": 121.1}]))
    assert open_low.delivered_F_min < closed.delivered_F_min


def test_a_reading_in_the_come_up_is_not_a_drop():
    ev = evaluate_case(_with_events([{"kind": "reading", "at_min": 3.0, "temperature_C": 80.0}]))
    assert ev.cycle.low_intervals == []


# --------------------------------------------------------------------------------------------
# The measured cold-spot log against the retort log
# --------------------------------------------------------------------------------------------


def _profile(t, T, source="x.csv"):
    return RetortProfile(np.asarray(t, float), np.asarray(T, float), source, None)


def test_a_cold_spot_log_identical_to_the_retort_log_is_refused():
    t = np.arange(0.0, 60.0, 1.0)
    T = np.minimum(30 + 10 * t, 121.1)
    with pytest.raises(RecordError, match="holds the same readings as the retort log"):
        check_cold_spot_log(_profile(t, T, "cold.csv"), _profile(t, T), 2.0)


def test_a_cold_spot_hotter_than_the_retort_has_been_is_refused():
    t = np.arange(0.0, 60.0, 1.0)
    retort = np.minimum(30 + 10 * t, 121.1)
    cold = np.minimum(40 + 0.5 * t, 118.0)
    cold[10] = 125.0
    with pytest.raises(RecordError, match="at 10 min the cold spot reads 125.0 °C, above the hottest the retort"):
        check_cold_spot_log(_profile(t, cold, "cold.csv"), _profile(t, retort), 2.0, initial_C=40.0)


def test_a_cold_spot_log_may_start_above_the_retort_and_stay_hot_in_cooling():
    t = np.arange(0.0, 100.0, 1.0)
    retort = np.where(t < 60, np.minimum(30 + 10 * t, 121.1), 25.0)
    # It starts hotter than the retort, follows it up, and stays hotter than it after steam off.
    cold = np.where(t < 60, np.maximum(52.0, np.minimum(30 + 10 * t, 121.1) - 20.0), 100.0 - (t - 60))
    assert check_cold_spot_log(_profile(t, cold, "cold.csv"), _profile(t, retort), 2.0, initial_C=52.0) == []


def test_a_gap_in_the_cold_spot_log_is_flagged_and_not_credited():
    loaded = load_case(DEMO / "tray_measured_cold_spot.toml")
    lines = loaded.cold_spot_log_text.splitlines()
    header = [i for i, line in enumerate(lines) if line.startswith("time")][0]
    rows = lines[header + 1:]
    holed = "\n".join(lines[: header + 1] + rows[:20] + rows[30:])  # a 10-min hole (1-min rows)
    ev = evaluate_case(replace(loaded, cold_spot_log_text=holed))
    gap = [f for f in ev.flags if f.code == "record-gap" and f.message.startswith("cold-spot log")]
    assert gap and gap[0].end_min - gap[0].start_min == pytest.approx(11.0)  # rows 19 and 30 min
    assert ev.delivered_F_min < ev.interpolated_F_min


def test_the_no_record_rule_applies_to_files_not_to_stored_snapshots():
    """A snapshot stored before this rule replays (it is evaluated as the filed cycle)."""
    loaded = load_case(GOOD)
    snap = loaded.snapshot()
    snap["case"]["deviation"]["events"] = []
    from deviation.evaluate import evaluate_snapshot

    assert evaluate_snapshot(snap).delivered_F_min > 0.0


def test_every_refusal_is_a_deviation_error_never_a_traceback(tmp_path):
    for text in ("[process\n", "x = " + "[" * 5000 + "]" * 5000, "\x00\x01", ""):
        path = tmp_path / "c.toml"
        path.write_text(text)
        with pytest.raises(DeviationError):
            load_case(path)
