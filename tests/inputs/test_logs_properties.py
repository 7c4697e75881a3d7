"""Property tests (hypothesis) for deviation.inputs.logs."""

from __future__ import annotations

from datetime import datetime, timedelta

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from deviation.errors import RecordError
from deviation.inputs.cycle import analyse_cycle, apply_temperature_low, resample_uniform
from deviation.inputs.logs import RetortProfile, parse_log_text

CODES = {"temperature-low", "short-hold", "long-come-up", "low-initial-temperature", "record-gap",
         "process-temperature-not-reached", "record-ends-before-cooling"}
# Crossings interpolate in floating point; 1e-9 min is far below anything a record can show.
TOL_MIN = 1e-9

any_float = st.floats(allow_nan=True, allow_infinity=True)
cell = st.one_of(
    any_float.map(repr),
    any_float.map(lambda x: f"{x:g}"),
    st.integers(-10**6, 10**6).map(str),
    st.sampled_from(["", " ", "abc", "1,5", "1.2.3", "--1", "1e", "NaN", "-inf", "12l.1", "\"7\""]),
)
header = st.sampled_from([
    "time_min,temperature_C", "time_min,temperature_F", " Time_Min , TEMPERATURE_c ",
    "time_min,temperature_C,temperature_F", "time_min", "temperature_C,time_min,extra",
    "time,temperature_C",
])


@settings(max_examples=300, deadline=None)
@given(header=header, rows=st.lists(st.tuples(cell, cell), max_size=12))
def test_any_rows_give_a_profile_or_a_record_error(header, rows):
    text = header + "\n" + "".join(f"{t},{T}\n" for t, T in rows)
    try:
        profile = parse_log_text(text, source="prop.csv")
    except RecordError as error:
        assert error.source == "prop.csv" and error.message
        return
    assert profile.time_min[0] == 0.0
    assert np.all(np.diff(profile.time_min) > 0)
    assert np.all((profile.temperature_C >= -50.0) & (profile.temperature_C <= 160.0))


@settings(max_examples=300, deadline=None)
@given(rows=st.lists(st.tuples(st.floats(-1e6, 1e6), st.floats(-100.0, 400.0)), max_size=15))
def test_numeric_rows_give_a_profile_or_a_record_error(rows):
    text = "time_min,temperature_C\n" + "".join(f"{t!r},{T!r}\n" for t, T in rows)
    try:
        parse_log_text(text, source="prop.csv")
    except RecordError:
        pass


LOG_CHARACTERS = list("0123456789.,-+e#\n\r \"'\t;:TZtime_nrpaCFx\x00\u00b0")


@settings(max_examples=300, deadline=None)
@given(text=st.text(alphabet=st.sampled_from(LOG_CHARACTERS), max_size=200))
def test_any_text_gives_a_profile_or_a_record_error(text):
    for prefix in ("", "time_min,temperature_C\n", "time,temperature_C\n"):
        try:
            parse_log_text(prefix + text, source="prop.csv")
        except RecordError:
            pass


# --------------------------------------------------------------------------------------------
# Valid profiles
# --------------------------------------------------------------------------------------------

@st.composite
def profiles(draw, min_size=2, max_size=40):
    n = draw(st.integers(min_size, max_size))
    steps = draw(st.lists(st.floats(0.05, 10.0), min_size=n - 1, max_size=n - 1))
    # temperatures near a 121.1 °C process temperature most of the time, to exercise crossings
    temps = draw(st.lists(st.one_of(st.floats(115.0, 125.0), st.floats(-50.0, 150.0)),
                          min_size=n, max_size=n))
    time_min = np.concatenate([[0.0], np.cumsum(steps)])
    return RetortProfile(time_min, np.array(temps), source="hypothesis")


scheduled = dict(process_temperature_C=121.1, process_time_min=30.0, come_up_time_min=10.0)


@settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(profile=profiles(), tolerance_C=st.sampled_from([0.0, 0.5]),
       initial=st.one_of(st.none(), st.floats(0.0, 80.0)))
def test_analyse_cycle_never_crashes_and_is_consistent(profile, tolerance_C, initial):
    analysis = analyse_cycle(profile, **scheduled, tolerance_C=tolerance_C,
                             initial_temperature_C=initial, minimum_initial_temperature_C=20.0)
    t, T = profile.time_min, profile.temperature_C
    threshold = 121.1 - tolerance_C
    assert set(analysis.codes) <= CODES
    assert all(flag.message for flag in analysis.flags)
    assert analysis.max_gap_min == np.max(np.diff(t))
    if analysis.hold_start_min is None:
        assert analysis.codes.count("process-temperature-not-reached") == 1
        assert np.all(T < threshold)
        return
    assert analysis.hold_start_min <= analysis.hold_end_min
    assert analysis.hold_duration_min == analysis.hold_end_min - analysis.hold_start_min
    assert not ("short-hold" in analysis.codes and "record-ends-before-cooling" in analysis.codes)
    previous_end = analysis.hold_start_min
    for interval in analysis.low_intervals:
        assert previous_end - TOL_MIN <= interval.start_min < interval.end_min
        assert interval.end_min <= analysis.hold_end_min + TOL_MIN
        assert interval.lowest_C < threshold
        assert interval.degree_minutes_below > 0.0
        # degree-minutes cannot exceed depth x width
        assert interval.degree_minutes_below <= (threshold - interval.lowest_C) * (
            interval.end_min - interval.start_min) * (1 + 1e-9) + 1e-12
        previous_end = interval.end_min
    # every reading below process temperature inside the hold lies in one of the intervals
    hold = (t >= analysis.hold_start_min) & (t <= analysis.hold_end_min)
    for time_below in t[hold & (T < threshold)]:
        assert any(i.start_min - TOL_MIN <= time_below <= i.end_min + TOL_MIN
                   for i in analysis.low_intervals)
    assert analysis.codes.count("temperature-low") == len(analysis.low_intervals)


def _time_at_temperature_in_hold(analysis) -> float:
    if analysis.hold_start_min is None:
        return 0.0
    return analysis.hold_duration_min - sum(i.end_min - i.start_min for i in analysis.low_intervals)


@settings(max_examples=250, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(profile=profiles(), data=st.data())
def test_lowering_temperatures_never_makes_the_record_look_better(profile, data):
    drops = np.array(data.draw(st.lists(st.one_of(st.just(0.0), st.floats(0.0, 10.0)),
                                        min_size=profile.time_min.size,
                                        max_size=profile.time_min.size)))
    lowered = RetortProfile(profile.time_min, profile.temperature_C - drops, source="lowered")
    before = analyse_cycle(profile, **scheduled)
    after = analyse_cycle(lowered, **scheduled)
    # readings below process temperature: never fewer
    assert np.sum(lowered.temperature_C < 121.1) >= np.sum(profile.temperature_C < 121.1)
    # time at process temperature during the hold (hold less the drops): never more, so the
    # time below process temperature against the filed hold never shrinks
    assert _time_at_temperature_in_hold(after) <= _time_at_temperature_in_hold(before) + 1e-7
    if before.hold_start_min is None:
        assert after.hold_start_min is None
    if after.hold_start_min is not None:
        assert after.hold_start_min >= before.hold_start_min
        assert after.hold_end_min <= before.hold_end_min
        assert after.lowest_during_hold_C is not None
    if after.ends_before_cooling:
        assert before.ends_before_cooling


@settings(max_examples=200, deadline=None)
@given(profile=profiles(), step_min=st.floats(0.05, 5.0))
def test_conservative_resample_is_a_lower_bound(profile, step_min):
    grid, linear = resample_uniform(profile, step_min)
    _, low = resample_uniform(profile, step_min, conservative=True)
    t, T = profile.time_min, profile.temperature_C
    assert grid.shape == low.shape == linear.shape
    np.testing.assert_allclose(np.diff(grid), step_min, rtol=1e-9)
    assert grid[-1] <= t[-1] + 1e-9
    assert np.all(low <= linear + 1e-12)
    assert np.all(low >= T.min())
    # the lines through the conservative grid never rise above the lower of two readings
    inside = t <= grid[-1]
    assert np.all(np.interp(t[inside], grid, low) <= T[inside] + 1e-9)
    mid = 0.5 * (t[:-1] + t[1:])
    ok = mid <= grid[-1]
    assert np.all(np.interp(mid[ok], grid, low) <= np.minimum(T[:-1], T[1:])[ok] + 1e-9)


@settings(max_examples=150, deadline=None)
@given(profile=profiles(), data=st.data())
def test_temperature_low_event_never_raises_a_reading(profile, data):
    t = profile.time_min
    start = data.draw(st.floats(0.0, float(t[-1])))
    end = data.draw(st.floats(start, float(t[-1])))
    low_C = data.draw(st.floats(-50.0, 150.0))
    lowered = apply_temperature_low(profile, start, end, low_C)
    assert np.all(np.diff(lowered.time_min) > 0)
    # never above the original anywhere (on the union of both time grids)
    original = np.interp(lowered.time_min, t, profile.temperature_C)
    assert np.all(lowered.temperature_C <= original + 1e-9)
    inside = (lowered.time_min >= start) & (lowered.time_min <= end)
    assert np.all(lowered.temperature_C[inside] <= low_C)
    assert lowered.source == "hypothesis + events"


# -- the columns read at once give what the rows read one by one give ----------------------------

stamp_text = st.one_of(
    st.datetimes(min_value=datetime(1, 1, 1),
                 max_value=datetime(9999, 12, 31, 23, 59, 59)).map(
        lambda d: d.replace(microsecond=0).isoformat()),
    st.builds(lambda y, mo, d, h, mi, s: f"{y:04d}-{mo:02d}-{d:02d}T{h:02d}:{mi:02d}:{s:02d}",
              st.integers(0, 10000), st.integers(0, 13), st.integers(0, 32), st.integers(0, 25),
              st.integers(0, 61), st.integers(0, 61)),
    st.sampled_from(["2026-12-01T05:30:00+01:00", "2026-12-01 05:30:00", "2026-12-01T05:30",
                     "2026-12-01T05:30:00.5", " 2026-12-01T05:30:00", "20261201T053000", "",
                     "2026-12-01T05:30:00Z", "2026-12-01", "NaT", "today"]),
)


def _both_ways(text, monkeypatch):
    import deviation.inputs.logs as logs

    def read():
        try:
            p = parse_log_text(text, source="fast.csv")
            return ("profile", p.time_min.tolist(), p.temperature_C.tolist())
        except RecordError as error:
            return ("error", error.message)

    fast = read()
    with monkeypatch.context() as m:
        m.setattr(logs, "_fast_columns", lambda *a, **k: None)
        slow = read()
    return fast, slow


@settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(start=st.datetimes(min_value=datetime(1, 1, 2),
                          max_value=datetime(9999, 12, 30)),
       steps=st.lists(st.integers(-5, 400), min_size=1, max_size=30),
       odd=st.lists(st.tuples(st.integers(0, 30), stamp_text), max_size=3),
       temperature=st.floats(20.0, 130.0))
def test_timestamps_read_at_once_as_row_by_row(start, steps, odd, temperature, monkeypatch):
    # The ISO column read at once by numpy (datetime64) against datetime.fromisoformat row by
    # row: the same minutes, or the same message, for well-formed days with a few odd cells.
    start = start.replace(microsecond=0)
    stamps, now = [], start
    for s in steps:
        now = now + timedelta(seconds=s)
        stamps.append(now.isoformat())
    for i, text in odd:
        if i < len(stamps):
            stamps[i] = text
    body = "".join(f"{s},{temperature + 0.01 * k:.2f}\n" for k, s in enumerate(stamps))
    fast, slow = _both_ways("time,temperature_C\n" + body, monkeypatch)
    assert fast == slow


def test_a_recorder_day_is_read_at_once():
    # The form recorders write (and the review's demo day): the fast reading is taken, and its
    # minutes are those of the row-by-row reading.
    import deviation.inputs.logs as logs

    start = datetime(2026, 12, 1, 5, 30)
    cells = [(start + timedelta(seconds=k)).isoformat() for k in range(7621)]
    minutes = logs._fast_timestamps(cells)
    assert minutes is not None
    assert minutes.tolist() == [k / 60.0 for k in range(7621)]
    assert logs._fast_timestamps(cells[:-1] + ["2026-12-01T07:37:00+01:00"]) is None
    assert logs._fast_timestamps(cells[:-1] + ["2026-02-30T07:37:00"]) is None
    # found by the property test above: numpy reads "NaT" (not a time) and writes it back alike
    assert logs._fast_timestamps(cells[:-1] + ["NaT"]) is None
