"""Tests for deviation.inputs.logs: reading logs, filed cycle, events, resampling, cycle analysis."""

from __future__ import annotations

import hashlib
import time
from pathlib import Path

import numpy as np
import pytest

from deviation.errors import RecordError
from deviation.inputs.cycle import (
    analyse_cycle,
    apply_temperature_low,
    filed_cycle,
    longest_run_at_or_above,
    resample_uniform,
)
from deviation.inputs.logs import RetortProfile, parse_log_text, read_log

BAD_LOGS = Path(__file__).parents[1] / "data" / "bad_logs"
PT_C = 121.1  # a common process temperature (250 °F)


# --------------------------------------------------------------------------------------------
# Bad logs: one fixture per way a log can be wrong, the exact message
# --------------------------------------------------------------------------------------------

EXPECTED_MESSAGES = {
    "non_monotonic_time.csv":
        "line 6, column time_min: time 2.5 min is earlier than 3.0 min at line 5; expected times "
        "increasing strictly",
    "duplicate_time.csv":
        "duplicate time 12.0 min at line 14 (also at line 13); expected each time once",
    "duplicate_timestamp.csv":
        "duplicate time 2024-05-01T10:01:00 at line 4 (also at line 3); expected each time once",
    "nan_value.csv":
        "line 4, column temperature_C: 'NaN' is not a finite number; expected a temperature [°C]",
    "inf_value.csv":
        "line 3, column temperature_C: 'inf' is not a finite number; expected a temperature [°C]",
    "text_in_number.csv":
        "line 5, column temperature_C: '12l.1' is not a number; expected a temperature [°C]",
    "empty_value.csv":
        "line 3, column temperature_C: empty value; expected a temperature [°C]",
    "missing_column.csv":
        "line 1: no temperature column in the header (found 'time_min', 'pressure_kPa'); "
        "expected temperature_C or temperature_F in a retort log",
    "missing_time_column.csv":
        "line 1: no time column in the header (found 'minutes', 'temperature_C'); expected "
        "time_min (minutes) or time (ISO-8601 timestamps) in a retort log",
    "semicolon_delimited.csv":
        "line 1: no time column in the header (found 'time_min;temperature_C'; fields must be "
        "separated by commas); expected time_min (minutes) or time (ISO-8601 timestamps) in a "
        "retort log",
    "duplicate_column.csv":
        "line 1: column temperature_C appears twice in the header; expected each column once",
    "fahrenheit_in_celsius_column.csv":
        "column temperature_C: values look like °F (highest 250 at line 5, above the 150 °C no "
        "retort reaches; a retort at process temperature reads about 240-265 °F); if the retort "
        "log is in Fahrenheit use the header temperature_F",
    "celsius_in_fahrenheit_column.csv":
        "column temperature_F: values look like °C (all below 150 °F, highest 121.1 at line 4; a "
        "retort at process temperature reads about 240-265 °F); if the retort log is in Celsius "
        "use the header temperature_C",
    "impossible_temperature.csv":
        "line 5, column temperature_C: temperature 999 °C is impossible; expected -50 to 160 °C "
        "in a retort log",
    "impossible_fahrenheit.csv":
        "line 4, column temperature_F: temperature -80 °F (-62.2 °C) is impossible; expected -50 "
        "to 160 °C in a retort log",
    "empty.csv":
        "the retort log is empty; expected a header line naming time_min and temperature_C (or "
        "temperature_F), then at least 2 rows of readings",
    "comments_only.csv":
        "the retort log is empty; expected a header line naming time_min and temperature_C (or "
        "temperature_F), then at least 2 rows of readings",
    "header_only.csv":
        "the retort log has a header (line 1) but no readings; expected at least 2 rows",
    "single_row.csv":
        "the retort log has only 1 reading (line 3); expected at least 2 rows",
    "bad_timestamp.csv":
        "line 5, column time: '2024-05-01T10:63:00' is not an ISO-8601 timestamp; expected e.g. "
        "2024-05-01T10:00:00 or 2024-05-01T10:00:00+02:00 (for minutes use the header time_min)",
    "mixed_timezones.csv":
        "line 4, column time: timestamp 2024-05-01T10:02:00+02:00 has a UTC offset but the first "
        "one (line 2) has none; expected all timestamps timezone-aware or all naive, not mixed",
    "mixed_units_both_columns.csv":
        "line 1: both temperature_C and temperature_F columns in the header; expected exactly one "
        "temperature column",
    "both_time_columns.csv":
        "line 1: both time_min and time columns in the header; expected one time column (time_min "
        "in minutes, or time as ISO-8601 timestamps)",
    "negative_time.csv":
        "line 2, column time_min: time -1.0 min is negative; expected minutes from steam on (0 or "
        "more)",
    "short_row.csv":
        "line 3: 1 field(s) found; expected at least 2 (columns time_min and temperature_C as in "
        "the header)",
    # Issue 13: decimal commas and extra fields, a glitched row bounded before any array is made,
    # a file that is no log never echoed, readings a retort cannot give (rules/limits.toml).
    "decimal_commas.csv":
        "line 3: 3 fields, the header has 2 - decimal commas? write decimals with a point (28.00, not "
        "28,00); expected one value per column",
    "extra_field.csv": "line 4: 3 fields, the header has 2; expected one value per column",
    "glitched_last_row.csv":
        "line 6, column time_min: time 99999999.00 min is 1e+08 min after the first reading, 1e+08 min "
        "after the reading before it (line 5); a record spans at most 2880 min (a glitched row?)",
    "password_file.csv":
        "line 1: no time column in the header (found one field with no comma: not a CSV header); "
        "expected time_min (minutes) or time (ISO-8601 timestamps) in a retort log",
    "reading_below_zero.csv":
        "line 4, column temperature_C: reading -5 °C is outside 0 to 150 °C, where a retort reads",
}


def test_every_bad_log_fixture_has_an_expected_message():
    assert sorted(p.name for p in BAD_LOGS.glob("*.csv")) == sorted(EXPECTED_MESSAGES)


@pytest.mark.parametrize("name", sorted(EXPECTED_MESSAGES))
def test_bad_log_gives_its_exact_message(name):
    path = BAD_LOGS / name
    with pytest.raises(RecordError) as caught:
        read_log(path)
    assert caught.value.message == EXPECTED_MESSAGES[name]
    assert caught.value.source == str(path)
    assert str(caught.value) == f"{path}: {EXPECTED_MESSAGES[name]}"


def test_cold_spot_kind_changes_only_the_wording():
    with pytest.raises(RecordError) as caught:
        read_log(BAD_LOGS / "impossible_temperature.csv", kind="cold-spot")
    assert caught.value.message == (
        "line 5, column temperature_C: temperature 999 °C is impossible; expected -50 to 160 °C "
        "in a cold-spot log"
    )


def test_unknown_kind_is_a_programming_error():
    with pytest.raises(ValueError, match="kind must be 'retort' or 'cold-spot'"):
        parse_log_text("time_min,temperature_C\n0,20\n1,30\n", source="x.csv", kind="can")


def test_missing_file_is_a_record_error(tmp_path):
    path = tmp_path / "nowhere.csv"
    with pytest.raises(RecordError) as caught:
        read_log(path)
    assert caught.value.source == str(path)
    assert caught.value.message == f"the retort log file not found: {path}"


def test_non_utf8_file_is_a_record_error(tmp_path):
    path = tmp_path / "latin1.csv"
    path.write_bytes("time_min,temperature_C\n0,20\n1,30 \xb0C\n".encode("latin-1"))
    with pytest.raises(RecordError) as caught:
        read_log(path)
    assert caught.value.message == (
        "the retort log is not UTF-8 text (byte 0xb0 at offset 33); expected a CSV file saved "
        "as UTF-8"
    )


def test_nul_byte_is_a_record_error():
    with pytest.raises(RecordError) as caught:
        parse_log_text("time_min,temperature_C\n0,20\n1,3\x000\n", source="x.csv")
    assert caught.value.message == (
        "line 3, column temperature_C: '3\\x000' is not a number; expected a temperature [°C]"
    )


def test_csv_module_error_is_a_record_error():
    huge = "x" * 200_000  # longer than the csv module's field size limit
    with pytest.raises(RecordError) as caught:
        parse_log_text(f"time_min,temperature_C\n0,20\n1,\"{huge}\"\n", source="x.csv")
    assert caught.value.message.startswith("line 3: cannot be read as CSV (field larger than")


# --------------------------------------------------------------------------------------------
# Good logs
# --------------------------------------------------------------------------------------------

def test_read_log_keeps_source_digest_and_values(tmp_path):
    text = "# retort 3\ntime_min,temperature_C\n0.0,20.5\n0.5,60.25\n\n2.0,121.1\n"
    path = tmp_path / "retort.csv"
    path.write_bytes(text.encode())
    profile = read_log(path)
    assert profile.source == str(path)
    assert profile.sha256 == hashlib.sha256(text.encode()).hexdigest()
    np.testing.assert_array_equal(profile.time_min, [0.0, 0.5, 2.0])  # non-uniform steps allowed
    np.testing.assert_array_equal(profile.temperature_C, [20.5, 60.25, 121.1])


def test_header_is_case_insensitive_and_extra_columns_are_ignored():
    text = (
        "\ufeff Operator , Time_Min ,TEMPERATURE_C , pressure_kPa\r\n"
        "AB,0,20,101\r\nAB,1,30,150\r\n"
    )
    profile = parse_log_text(text, source="x.csv")
    np.testing.assert_array_equal(profile.time_min, [0.0, 1.0])
    np.testing.assert_array_equal(profile.temperature_C, [20.0, 30.0])
    assert profile.sha256 is None


def test_rows_of_empty_fields_are_skipped_like_blank_lines():
    text = "time_min,temperature_C\n0,20\n,\n1,30\n , \n"
    profile = parse_log_text(text, source="x.csv")
    np.testing.assert_array_equal(profile.time_min, [0.0, 1.0])


def test_time_min_is_shifted_so_the_first_row_is_zero():
    profile = parse_log_text("time_min,temperature_C\n5,20\n6.5,30\n", source="x.csv")
    np.testing.assert_array_equal(profile.time_min, [0.0, 1.5])


def test_fahrenheit_log_equals_the_celsius_log_converted(tmp_path):
    times = np.array([0.0, 1.0, 2.5, 4.0, 10.0, 70.0, 72.0])
    temperature_F = np.array([70.0, 150.0, 212.0, 240.0, 250.0, 250.0, 100.0])
    temperature_C = (temperature_F - 32.0) / 1.8  # independent of deviation.inputs.units
    body_F = "".join(f"{float(t)!r},{float(T)!r}\n" for t, T in zip(times, temperature_F))
    body_C = "".join(f"{float(t)!r},{float(T)!r}\n" for t, T in zip(times, temperature_C))
    from_F = parse_log_text("time_min,temperature_F\n" + body_F, source="f.csv")
    from_C = parse_log_text("time_min,temperature_C\n" + body_C, source="c.csv")
    np.testing.assert_array_equal(from_F.time_min, from_C.time_min)
    # repr() round-trips exactly; only the conversion's last bit may differ
    np.testing.assert_allclose(from_F.temperature_C, from_C.temperature_C, rtol=0, atol=1e-12)
    assert from_F.temperature_C[4] == pytest.approx(121.1111111111, abs=1e-9)  # 250 °F


def test_iso_timestamps_become_minutes_from_the_first_row():
    text = (
        "time,temperature_C\n"
        "2024-05-01T10:00:00,20\n"
        "2024-05-01T10:00:30,40\n"
        "2024-05-01 10:02,90\n"          # space separator and no seconds are ISO-8601 too
        "2024-05-01T10:05:15.500,121.1\n"
    )
    profile = parse_log_text(text, source="x.csv")
    np.testing.assert_allclose(profile.time_min, [0.0, 0.5, 2.0, 5.0 + 15.5 / 60.0],
                               rtol=0, atol=1e-12)


def test_timezone_aware_timestamps_across_a_clock_change():
    # Clocks go back at 03:00 CEST (+02:00) -> 02:00 CET (+01:00): 02:59+02:00 then 02:00+01:00
    # is one minute later, not 59 minutes earlier.
    text = (
        "time,temperature_C\n"
        "2024-10-27T02:58:00+02:00,120\n"
        "2024-10-27T02:59:00+02:00,121\n"
        "2024-10-27T02:00:00+01:00,121.5\n"
        "2024-10-27T01:01:00Z,121.5\n"
    )
    profile = parse_log_text(text, source="x.csv")
    np.testing.assert_allclose(profile.time_min, [0.0, 1.0, 2.0, 3.0], rtol=0, atol=1e-12)


def test_numbers_in_time_column_are_not_timestamps():
    with pytest.raises(RecordError) as caught:
        parse_log_text("time,temperature_C\n0,20\n1,30\n", source="x.csv")
    assert caught.value.message.startswith("line 2, column time: '0' is not an ISO-8601 timestamp")


def test_profile_arrays_are_read_only_copies():
    times = np.array([0.0, 1.0])
    profile = RetortProfile(times, np.array([20.0, 30.0]), source="hand")
    times[0] = 5.0
    assert profile.time_min[0] == 0.0
    with pytest.raises(ValueError):
        profile.temperature_C[0] = 1.0
    assert profile == RetortProfile([0.0, 1.0], [20.0, 30.0], source="hand")


def test_profile_rejects_times_not_increasing():
    with pytest.raises(ValueError, match="increase strictly"):
        RetortProfile([0.0, 0.0], [20.0, 30.0], source="hand")


# --------------------------------------------------------------------------------------------
# Filed cycle
# --------------------------------------------------------------------------------------------

FILED = dict(
    process_temperature_C=PT_C, come_up_time_min=10.0, process_time_min=60.0,
    start_temperature_C=20.0, cooling_water_temperature_C=25.0, cooling_time_min=20.0,
)


def test_filed_cycle_shape():
    profile = filed_cycle(**FILED)
    t, T = profile.time_min, profile.temperature_C
    assert profile.source == "filed cycle" and profile.sha256 is None
    np.testing.assert_allclose(np.diff(t), 1 / 60, rtol=0, atol=1e-12)  # uniform 1 s grid
    assert t[0] == 0.0 and t[-1] == pytest.approx(90.0, abs=1e-9)
    assert t.size == 90 * 60 + 1
    ramp = t < 10.0 - 1e-9
    # straight come-up line from 20 °C at 0 to 121.1 °C at 10 min
    np.testing.assert_allclose(T[ramp], 20.0 + (PT_C - 20.0) * t[ramp] / 10.0, rtol=0, atol=1e-9)
    assert T[np.argmin(np.abs(t - 5.0))] == pytest.approx((20.0 + PT_C) / 2, abs=1e-9)
    hold = (t >= 10.0 - 1e-9) & (t <= 70.0 + 1e-9)
    assert np.all(T[hold] == PT_C) and hold.sum() == 60 * 60 + 1
    assert np.all(T[t > 70.0 + 1e-9] == 25.0)


def test_filed_cycle_meets_its_own_scheduled_process():
    analysis = analyse_cycle(filed_cycle(**FILED), process_temperature_C=PT_C,
                             process_time_min=60.0, come_up_time_min=10.0)
    assert analysis.flags == []
    assert analysis.hold_start_min == pytest.approx(10.0, abs=1e-9)
    assert analysis.hold_duration_min == pytest.approx(60.0, abs=1e-9)
    assert not analysis.ends_before_cooling


def test_filed_cycle_without_come_up_starts_at_process_temperature():
    profile = filed_cycle(**{**FILED, "come_up_time_min": 0.0}, step_min=0.5)
    assert profile.temperature_C[0] == PT_C
    np.testing.assert_allclose(np.diff(profile.time_min), 0.5)


def test_filed_cycle_rejects_nonsense():
    with pytest.raises(ValueError, match="process_time_min must be positive"):
        filed_cycle(**{**FILED, "process_time_min": 0.0})


# --------------------------------------------------------------------------------------------
# Events
# --------------------------------------------------------------------------------------------

def test_apply_temperature_low_inserts_exact_breakpoints():
    base = RetortProfile([0.0, 10.0, 20.0, 30.0, 40.0], [20.0, PT_C, PT_C, PT_C, 30.0],
                         source="log.csv", sha256="ab" * 32)
    low = apply_temperature_low(base, 12.5, 17.25, 118.0)
    np.testing.assert_array_equal(low.time_min, [0.0, 10.0, 12.5, 17.25, 20.0, 30.0, 40.0])
    np.testing.assert_array_equal(low.temperature_C, [20.0, PT_C, 118.0, 118.0, PT_C, PT_C, 30.0])
    assert low.source == "log.csv + events" and low.sha256 == base.sha256
    # a second event neither doubles the suffix nor a breakpoint already present
    again = apply_temperature_low(low, 12.5, 20.0, 119.0)
    assert again.source == "log.csv + events"
    np.testing.assert_array_equal(again.time_min, low.time_min)
    np.testing.assert_array_equal(again.temperature_C,
                                  [20.0, PT_C, 118.0, 118.0, 119.0, PT_C, 30.0])


def test_apply_temperature_low_keeps_lower_readings_and_interpolates_breakpoints():
    base = RetortProfile([0.0, 10.0, 20.0], [100.0, 110.0, 130.0], source="hand")
    low = apply_temperature_low(base, 5.0, 15.0, 112.0)
    # 105 °C at 5 min (interpolated) is already below 112 °C and stays; 110 stays; 120 -> 112
    np.testing.assert_array_equal(low.time_min, [0.0, 5.0, 10.0, 15.0, 20.0])
    np.testing.assert_array_equal(low.temperature_C, [100.0, 105.0, 110.0, 112.0, 130.0])


def test_apply_temperature_low_on_the_filed_cycle():
    low = apply_temperature_low(filed_cycle(**FILED), 30.5, 33.25, 118.0)
    inside = (low.time_min >= 30.5) & (low.time_min <= 33.25)
    assert np.all(low.temperature_C[inside] == 118.0)
    assert np.any(low.time_min == 30.5) and np.any(low.time_min == 33.25)
    assert low.source == "filed cycle + events"


@pytest.mark.parametrize("start, end, expected", [
    (50.0, 60.0, "lies outside the record (0 to 40 min)"),
    (20.0, 10.0, "ends (10 min) before it starts (20 min)"),
])
def test_apply_temperature_low_rejects_bad_intervals(start, end, expected):
    base = RetortProfile([0.0, 40.0], [20.0, PT_C], source="log.csv")
    with pytest.raises(RecordError, match=expected.replace("(", r"\(").replace(")", r"\)")):
        apply_temperature_low(base, start, end, 110.0)


# --------------------------------------------------------------------------------------------
# Resampling
# --------------------------------------------------------------------------------------------

def test_resample_linear_matches_numpy_interp():
    profile = RetortProfile([0.0, 0.7, 2.0, 3.3], [20.0, 60.0, 100.0, 121.0], source="hand")
    grid, T = resample_uniform(profile, 0.5)
    np.testing.assert_allclose(grid, [0.0, 0.5, 1.0, 1.5, 2.0, 2.5, 3.0])  # final 0.3 min dropped
    np.testing.assert_allclose(T, np.interp(grid, profile.time_min, profile.temperature_C))


def test_resample_conservative_holds_the_lower_of_two_readings_on_a_fine_grid():
    profile = RetortProfile([0.0, 1.0, 2.0], [121.0, 119.0, 121.0], source="hand")
    grid, T = resample_uniform(profile, 0.25, conservative=True)
    # between 0 and 2 min the lower of each pair of readings is 119 °C
    np.testing.assert_array_equal(T, np.full(9, 119.0))
    rising = RetortProfile([0.0, 1.0, 2.0], [100.0, 110.0, 120.0], source="hand")
    grid, T = resample_uniform(rising, 0.25, conservative=True)
    # lower of the two readings: 100 on (0, 1), 110 on (1, 2); the grid point before each step
    # change takes the lower side so the straight lines never rise above the step function
    np.testing.assert_array_equal(T, [100, 100, 100, 100, 100, 110, 110, 110, 110])


def test_resample_conservative_keeps_a_dip_between_grid_points():
    profile = RetortProfile([0.0, 1.4, 1.5, 1.6, 3.0], [121.0, 121.0, 115.0, 121.0, 121.0],
                            source="hand")
    _, linear = resample_uniform(profile, 1.0)
    _, low = resample_uniform(profile, 1.0, conservative=True)
    np.testing.assert_array_equal(linear, [121.0, 121.0, 121.0, 121.0])  # the dip is lost
    np.testing.assert_array_equal(low, [121.0, 115.0, 115.0, 121.0])
    assert np.all(low <= linear)


# --------------------------------------------------------------------------------------------
# Cycle analysis on hand-built profiles
# --------------------------------------------------------------------------------------------

def _profile(points):
    t, T = zip(*points)
    return RetortProfile(np.array(t, float), np.array(T, float), source="hand")


def _analyse(profile, **kwargs):
    # hand-built profiles have few readings: gaps are tested on their own
    args = dict(process_temperature_C=PT_C, process_time_min=60.0, come_up_time_min=10.0,
                gap_limit_min=100.0)
    args.update(kwargs)
    return analyse_cycle(profile, **args)


def test_drop_during_the_hold_against_a_hand_computation():
    profile = _profile([(0, 20), (10, 121.1), (20, 122.1), (22, 120.1), (24, 118.1), (26, 122.1),
                        (80, 121.1), (85, 40)])
    analysis = _analyse(profile)
    assert analysis.hold_start_min == 10.0 and analysis.hold_end_min == 80.0
    assert analysis.hold_duration_min == 70.0 and analysis.come_up_min == 10.0
    [low] = analysis.low_intervals
    # crossings: 122.1 -> 120.1 over 20-22 min crosses 121.1 at 21; 118.1 -> 122.1 over 24-26
    # crosses at 24 + 2 * 3/4 = 25.5
    assert low.start_min == pytest.approx(21.0, abs=1e-12)
    assert low.end_min == pytest.approx(25.5, abs=1e-12)
    assert low.lowest_C == 118.1
    # degree-minutes by hand: triangle 21-22 (0.5*1*1) + trapezoid 22-24 ((1+3)/2*2)
    # + triangle 24-25.5 (0.5*1.5*3) = 0.5 + 4 + 2.25
    assert low.degree_minutes_below == pytest.approx(6.75, abs=1e-9)
    # and by brute force on a fine grid (trapezoid error ~ dt^2 at the two kinks)
    fine = np.linspace(20.0, 26.0, 600_001)
    deficit = np.clip(PT_C - np.interp(fine, profile.time_min, profile.temperature_C), 0.0, None)
    assert low.degree_minutes_below == pytest.approx(np.trapezoid(deficit, fine), abs=1e-6)
    assert analysis.lowest_during_hold_C == 118.1
    assert analysis.codes == ["temperature-low"]
    flag = analysis.flags[0]
    assert (flag.start_min, flag.end_min, flag.value) == (low.start_min, low.end_min, 118.1)
    assert flag.message == (
        "retort below the process temperature 121.1 °C from 21.00 to 25.50 min (4.50 min) during "
        "the hold; lowest reading 118.1 °C at 24.00 min; 6.75 °C·min below"
    )


def test_two_drops_give_two_flags_in_time_order():
    profile = _profile([(0, 20), (10, 121.5), (20, 120.5), (30, 121.5), (40, 119.5), (50, 121.5),
                        (75, 121.5), (80, 40)])
    analysis = _analyse(profile)
    # 121.5 -> 120.5 over 10-20 min crosses 121.1 at 14, back up at 26; 121.5 -> 119.5 over
    # 30-40 crosses at 32, back up (119.5 -> 121.5 over 40-50) at 48
    assert [round(i.start_min, 9) for i in analysis.low_intervals] == [14.0, 32.0]
    assert [round(i.end_min, 9) for i in analysis.low_intervals] == [26.0, 48.0]
    assert [i.lowest_C for i in analysis.low_intervals] == [120.5, 119.5]
    # triangles: 0.6 °C deep x 12 min and 1.6 °C deep x 16 min, area = depth * width / 2
    assert analysis.low_intervals[0].degree_minutes_below == pytest.approx(0.6 * 12 / 2, abs=1e-9)
    assert analysis.low_intervals[1].degree_minutes_below == pytest.approx(1.6 * 16 / 2, abs=1e-9)


def test_tolerance_lowers_the_threshold():
    profile = _profile([(0, 20), (10, 121.1), (20, 120.8), (30, 121.1), (75, 121.1), (80, 40)])
    assert _analyse(profile).codes == ["temperature-low"]
    assert _analyse(profile, tolerance_C=0.5).codes == []


def test_short_hold():
    profile = _profile([(0, 20), (10, 121.1), (55.5, 121.1), (60, 40)])
    analysis = _analyse(profile)
    assert analysis.codes == ["short-hold"]
    flag = analysis.flags[0]
    assert flag.value == pytest.approx(14.5)
    assert flag.message == (
        "hold at/above 121.1 °C from 10.00 to 55.50 min is 45.50 min, 14.50 min short of the "
        "filed process time 60 min"
    )


def test_long_come_up_uses_the_first_reading_at_process_temperature():
    # crossing interpolates to 12.5 min, but the record first shows 121.1 °C at 13 min
    profile = _profile([(0, 20), (12, 111.1), (13, 123.1), (80, 121.1), (85, 40)])
    analysis = _analyse(profile)
    assert analysis.come_up_min == 13.0 and analysis.hold_start_min == 13.0
    assert analysis.codes == ["long-come-up"]
    assert analysis.flags[0].value == pytest.approx(3.0)
    assert analysis.flags[0].message == (
        "come-up took 13.00 min (first reading at/above 121.1 °C at 13.00 min), 3.00 min longer "
        "than the filed come-up time 10 min"
    )


def test_gap_in_the_record():
    profile = _profile([(0, 20), (10, 121.1), (11, 121.1), (14.5, 121.1), (15, 121.1),
                        (72, 121.1), (80, 40)])
    analysis = _analyse(profile, gap_limit_min=15.0)
    assert analysis.codes == ["record-gap"]
    assert analysis.max_gap_min == 57.0
    flag = analysis.flags[0]
    assert (flag.start_min, flag.end_min, flag.value) == (15.0, 72.0, 57.0)
    analysis = _analyse(profile, gap_limit_min=2.0)
    assert [f.value for f in analysis.flags if f.code == "record-gap"] == [10.0, 3.5, 57.0, 8.0]
    assert analysis.flags[1].message == (
        "no reading from 11.00 to 14.50 min: a gap of 3.50 min, longer than the 2 min allowed "
        "between readings"
    )


def test_low_initial_temperature():
    profile = filed_cycle(**FILED)
    analysis = _analyse(profile, initial_temperature_C=15.0, minimum_initial_temperature_C=21.0)
    assert analysis.codes == ["low-initial-temperature"]
    assert analysis.flags[0].value == pytest.approx(6.0)
    assert analysis.flags[0].message == (
        "initial temperature 15.0 °C is 6.0 °C below the minimum initial temperature 21.0 °C of "
        "the scheduled process"
    )
    ok = _analyse(profile, initial_temperature_C=21.0, minimum_initial_temperature_C=21.0)
    assert ok.codes == []


def test_process_temperature_never_reached():
    profile = _profile([(0, 20), (10, 115.0), (60, 119.4), (70, 40)])
    analysis = _analyse(profile)
    assert analysis.hold_start_min is None and analysis.hold_end_min is None
    assert analysis.come_up_min is None and analysis.hold_duration_min is None
    assert analysis.lowest_during_hold_C is None and analysis.low_intervals == []
    assert analysis.codes == ["process-temperature-not-reached"]
    assert analysis.flags[0].value == 119.4
    assert analysis.flags[0].message == (
        "the retort never reached the process temperature 121.1 °C: highest reading 119.4 °C at "
        "60.00 min; no hold at process temperature is on the record"
    )


def test_record_ends_while_the_cycle_may_still_be_running():
    profile = _profile([(0, 20), (10, 121.1), (50, 121.3)])
    analysis = _analyse(profile)
    assert analysis.ends_before_cooling
    assert analysis.codes == ["record-ends-before-cooling"]  # and no short-hold
    assert analysis.flags[0].value == pytest.approx(20.0)
    assert analysis.flags[0].message == (
        "the record ends at 50.00 min with the retort still at 121.3 °C (at/above 121.1 °C) and "
        "no cooling on the record: the cycle may still be running; hold so far 40.00 min from "
        "10.00 min, 20.00 min of the filed process time 60 min remain"
    )
    done = _analyse(_profile([(0, 20), (10, 121.1), (75, 121.3)]))
    assert done.ends_before_cooling and done.flags[0].value == 0.0
    assert "the filed process time 60 min is already covered" in done.flags[0].message


def test_flags_come_in_a_fixed_order():
    profile = _profile([(0, 20), (15, 121.1), (20, 119.0), (25, 121.1), (40, 121.1), (45, 30)])
    analysis = _analyse(profile, initial_temperature_C=10.0, minimum_initial_temperature_C=20.0,
                        gap_limit_min=14.0)
    assert analysis.codes == ["low-initial-temperature", "long-come-up", "temperature-low",
                              "short-hold", "record-gap", "record-gap"]
    assert [f.start_min for f in analysis.flags if f.code == "record-gap"] == [0.0, 25.0]


def test_analyse_cycle_on_7200_rows_is_fast():
    t = np.arange(7200) / 60.0 * 2.0                       # a reading every 2 s for 4 h
    T = np.where(t < 10, 20 + 10.11 * t, 121.3)
    T = np.where(t > 200, 30.0, T)
    T[(t > 50) & (t < 53)] = 118.0                          # one drop during the hold
    profile = RetortProfile(t, T, source="hand")
    kwargs = dict(process_temperature_C=PT_C, process_time_min=60.0, come_up_time_min=10.0)
    assert analyse_cycle(profile, **kwargs).codes == ["temperature-low"]
    best = min(_time(lambda: analyse_cycle(profile, **kwargs)) for _ in range(20))
    assert best < 5e-3  # the brief's budget; about 0.2 ms measured


def test_noisy_record_gives_one_interval_per_dip():
    t = np.arange(7200) / 60.0 * 2.0
    rng = np.random.default_rng(1)
    T = np.where(t < 10, 20 + 10.11 * t, 121.3 + rng.normal(0.0, 0.2, t.size))
    T = np.where(t > 200, 30.0, T)
    analysis = analyse_cycle(RetortProfile(t, T, source="hand"), process_temperature_C=PT_C,
                             process_time_min=60.0, come_up_time_min=10.0)
    hold = (t >= analysis.hold_start_min) & (t <= analysis.hold_end_min)
    below = hold & (T < PT_C)
    runs = int(np.sum(np.diff(below.astype(int)) == 1))
    assert len(analysis.low_intervals) == runs > 100
    for interval in analysis.low_intervals:  # lowest reading, checked run by run
        inside = (t > interval.start_min) & (t < interval.end_min)
        assert interval.lowest_C == T[inside].min()


def _time(func):
    start = time.perf_counter()
    func()
    return time.perf_counter() - start


def test_analyse_cycle_rejects_nonsense_arguments():
    with pytest.raises(ValueError, match="process_time_min must be positive"):
        _analyse(filed_cycle(**FILED), process_time_min=-1.0)


# --------------------------------------------------------------------------------------------
# Alternate processes
# --------------------------------------------------------------------------------------------

def test_longest_run_at_or_above():
    profile = _profile([(0, 20), (10, 118.5), (20, 119.0), (25, 117.0), (30, 118.5), (50, 118.6),
                        (60, 118.0), (65, 30)])
    assert longest_run_at_or_above(profile, 118.5) == (30.0, 50.0)
    assert longest_run_at_or_above(profile, 119.0) == (20.0, 20.0)
    assert longest_run_at_or_above(profile, 125.0) is None
