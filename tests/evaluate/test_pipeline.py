"""The evaluation pipeline: JSON contract, what-if answers, properties over retort logs."""

from __future__ import annotations

import json
import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from deviation.inputs.case import LoadedCase, load_case
from deviation.errors import DeviationError
from deviation.evaluate import evaluate_case
from deviation.physics.lethality import general_method, lethal_rate

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "demo_cases"
DATA = Path(__file__).parents[1] / "data"

CONTRACT_KEYS = {
    "delivered_F_min", "scheduled_F_min", "target_F_min", "spoilage_probability",
    "target_spoilage_probability", "expected_nonsterile_containers", "botulinum_log_reductions",
    "flags", "cold_spot", "guidance", "projected_F_min", "extension_to_target_min",
    # issue 12: the headline's parts, F0, Ball's formula, log10 twins, the lot's probability
    "F_basis", "model_F_min", "relative_F_min", "interpolated_F_min", "F0_min", "ball_formula_F_min",
    "log10_spoilage_probability", "log10_target_spoilage_probability",
    "log10_scheduled_spoilage_probability", "log10_expected_nonsterile_containers",
    "lot_nonsterile_probability", "log10_lot_nonsterile_probability",
}


@pytest.fixture(scope="module")
def drop_case() -> LoadedCase:
    return load_case(DEMO / "chili_temperature_drop.toml")


def with_log(loaded: LoadedCase, t, T) -> LoadedCase:
    text = "time_min,temperature_C\n" + "\n".join(f"{a:.4f},{b:.4f}" for a, b in zip(t, T))
    return replace(loaded, retort_log_text=text, retort_log_source="generated.csv")


def test_json_contract(drop_case):
    ev = evaluate_case(drop_case)
    data = json.loads(ev.model_dump_json())
    assert CONTRACT_KEYS <= set(data)
    assert set(data["cold_spot"]) >= {"time_min", "temperature_C", "cumulative_F_min"}
    n = len(data["cold_spot"]["time_min"])
    assert n == len(data["cold_spot"]["temperature_C"]) == len(data["cold_spot"]["cumulative_F_min"])
    assert data["cold_spot"]["cumulative_F_min"][-1] == pytest.approx(data["delivered_F_min"])
    assert all({"code", "message"} <= set(f) for f in data["flags"])
    from deviation.guidance import INFORMATION_FLAG_CODES

    assert [f["code"] for f in data["flags"] if f["code"] not in INFORMATION_FLAG_CODES] == ["temperature-low"]
    assert data["guidance"]["disposition"] == "evaluate"
    assert "process authority" in data["caution"]


def test_delivered_F_is_the_general_method_of_the_cold_spot(drop_case):
    ev = evaluate_case(drop_case, rule_set=False, conservative=False)
    cs = ev.cold_spot
    # Recompute independently from the returned cold-spot curve (trapezoidal General Method).
    L = 10.0 ** ((np.array(cs.temperature_C) - 121.1) / 10.0)
    assert np.trapezoid(L, cs.time_min) == pytest.approx(ev.model_F_min, rel=1e-9)
    # The headline is the relative F of a model that over-predicts the filed process.
    assert ev.scheduled_F_min > ev.target_F_min
    assert ev.delivered_F_min == pytest.approx(ev.model_F_min * ev.target_F_min / ev.scheduled_F_min, rel=1e-12)
    assert cs.cumulative_F_min[-1] == pytest.approx(ev.delivered_F_min, rel=1e-12)


def test_spoilage_figures_follow_from_F(drop_case):
    ev = evaluate_case(drop_case, rule_set=False)
    m = drop_case.case.process.microbiology
    N = m.spores_per_container * 10.0 ** (-ev.delivered_F_min / m.spoilage_D_min)
    assert ev.spoilage_probability == pytest.approx(-math.expm1(-N), rel=1e-12)
    assert ev.target_spoilage_probability == pytest.approx(
        -math.expm1(-m.spores_per_container * 10 ** (-ev.target_F_min / m.spoilage_D_min)))
    assert ev.log10_spoilage_probability == pytest.approx(math.log10(ev.spoilage_probability), rel=1e-12)
    assert ev.expected_nonsterile_containers == pytest.approx(ev.spoilage_probability * 4800)
    assert ev.botulinum_log_reductions == pytest.approx(ev.delivered_F_min / 0.21)


def test_drop_costs_lethality():
    normal = evaluate_case(load_case(DEMO / "chili_no_deviation.toml"), rule_set=False)
    drop = evaluate_case(load_case(DEMO / "chili_temperature_drop.toml"), rule_set=False)
    assert drop.delivered_F_min < normal.delivered_F_min


def test_extension_reaches_the_target_and_no_less():
    loaded = load_case(DEMO / "peas_short_hold.toml")
    ev = evaluate_case(loaded, rule_set=False)
    assert ev.delivered_F_min < ev.target_F_min
    ext = ev.extension_to_target_min
    assert ext is not None and ext > 0
    # Re-enter the case with the hold lengthened by the answer: the target is met; 0.2 min less is not.
    def F_with_hold(minutes):
        data = loaded.case.model_dump()
        data["deviation"]["events"][0]["process_time_min"] = 14 + minutes
        from deviation.inputs.case import parse_case
        return evaluate_case(replace(loaded, case=parse_case(data)), rule_set=False, what_if=False).delivered_F_min
    assert F_with_hold(ext) >= ev.target_F_min - 1e-6
    assert F_with_hold(ext - 0.2) < ev.target_F_min


def test_running_cycle_projects_the_rest_as_filed():
    ev = evaluate_case(load_case(DEMO / "chili_cycle_running.toml"), rule_set=False)
    assert ev.cycle.running
    assert ev.projected_F_min > ev.delivered_F_min
    codes = [f.code for f in ev.flags]
    assert "record-ends-before-cooling" in codes and "short-hold" not in codes


def test_measured_cold_spot_is_integrated_as_is():
    loaded = load_case(DEMO / "tray_measured_cold_spot.toml")
    ev = evaluate_case(loaded, rule_set=False)
    rows = [line.split(",") for line in loaded.cold_spot_log_text.splitlines()
            if line and not line.startswith("#") and not line.startswith("time")]
    t = np.array([float(r[0]) for r in rows])
    T = np.array([float(r[1]) for r in rows])
    F, _ = general_method(t, T, 121.1, 10.0)
    F_low, _ = general_method(t, T, 121.1, 10.0, conservative=True)
    assert ev.model == "measured"
    # The headline reads the measured log at the lower reading between samples; the
    # interpolated (trapezoid) figure stands beside it.
    assert ev.delivered_F_min == pytest.approx(F_low)
    assert ev.interpolated_F_min == pytest.approx(F)
    assert ev.delivered_F_min < ev.interpolated_F_min
    assert ev.extension_to_target_min is None and "measured" in ev.extension_reason


def test_events_without_log_match_an_equivalent_log(drop_case):
    """A temperature-low event on the filed cycle equals a log that drops the same way."""
    data = drop_case.case.model_dump()
    data["deviation"]["retort_log"] = None
    data["deviation"]["events"] = [{"kind": "temperature-low", "start_min": 30.0, "end_min": 40.0,
                                    "temperature_C": 115.0}]
    from deviation.inputs.case import parse_case
    event_case = replace(drop_case, case=parse_case(data), retort_log_text=None)
    ev_events = evaluate_case(event_case, rule_set=False)
    cs = ev_events.cold_spot
    t = np.array(cs.time_min)
    T = np.array(cs.retort_C)
    # The built profile is exact between its points; the same points as a recorded log, read
    # with straight lines, give the same F (read at the lower reading they give less).
    ev_log = evaluate_case(with_log(event_case, t, T), rule_set=False, conservative=False)
    assert ev_events.delivered_F_min == pytest.approx(ev_log.delivered_F_min, rel=2e-3)
    assert evaluate_case(with_log(event_case, t, T), rule_set=False).delivered_F_min <= ev_log.delivered_F_min
    from deviation.guidance import INFORMATION_FLAG_CODES

    assert [f.code for f in ev_events.flags if f.code not in INFORMATION_FLAG_CODES] == ["temperature-low"]


def test_conservative_is_never_above_default(drop_case):
    a = evaluate_case(drop_case, rule_set=False)
    b = evaluate_case(drop_case, rule_set=False, conservative=True)
    assert b.delivered_F_min <= a.delivered_F_min
    assert b.scheduled_F_min <= a.scheduled_F_min


def test_alternate_process_is_recognised():
    ev = evaluate_case(load_case(DEMO / "chili_alternate_process.toml"))
    assert ev.covered_by_alternate
    assert ev.guidance["disposition"] == "covered-by-alternate"


def test_gap_reading_lethality_not_fully_established():
    ev = evaluate_case(load_case(DEMO / "chili_record_gap.toml"))
    assert "record-gap" in [f.code for f in ev.flags]
    assert not ev.lethality_fully_established
    # The headline takes no heat at all across the 4.5-min gap (the worst case); the botulinum
    # 12D reduction holds even so, so lethality is established for safety, though not fully.
    worst = ev.facts["gap_worst_case_F_min"]
    assert worst is not None and worst == ev.F0_min
    assert ev.delivered_F_min < ev.interpolated_F_min
    assert worst / 0.21 >= 12.0
    assert ev.lethality_established


# --- Properties over retort logs ---------------------------------------------------------------

_base = load_case(DATA / "good_case.toml")


def _cycle(hold_C, drop_C, drop_at, drop_len):
    t = np.arange(0.0, 90.0, 0.5)
    T = np.interp(t, [0, 8, 53, 54, 90], [30, hold_C, hold_C, 25, 25])
    T = np.where((t >= drop_at) & (t <= drop_at + drop_len), np.minimum(T, drop_C), T)
    return t, T


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(hold=st.floats(110, 125), drop=st.floats(90, 125), at=st.floats(10, 50), length=st.floats(0, 20),
       lower=st.floats(0.01, 5))
def test_F_is_monotone_in_retort_temperature(hold, drop, at, length, lower):
    t, T = _cycle(hold, drop, at, length)
    a = evaluate_case(with_log(_base, t, T), rule_set=False, what_if=False)
    b = evaluate_case(with_log(_base, t, T - lower), rule_set=False, what_if=False)
    assert b.delivered_F_min <= a.delivered_F_min + 1e-9
    c = evaluate_case(with_log(_base, t, T), rule_set=False, what_if=False, conservative=True)
    assert c.delivered_F_min <= a.delivered_F_min + 1e-9


_special = st.sampled_from([float("nan"), float("inf"), -float("inf")])
row = st.tuples(st.floats(min_value=-1e4, max_value=1e4) | _special,
                st.floats(min_value=-300, max_value=400) | st.floats(min_value=20, max_value=130) | _special)


@settings(max_examples=150, deadline=None)
@given(rows=st.lists(row, min_size=0, max_size=60), sort=st.booleans())
def test_any_log_gives_an_evaluation_or_a_clear_error(rows, sort):
    if sort:
        rows = sorted(rows, key=lambda r: (r[0] if r[0] == r[0] else 0.0))
    text = "time_min,temperature_C\n" + "\n".join(f"{a!r},{b!r}" for a, b in rows)
    loaded = replace(_base, retort_log_text=text, retort_log_source="fuzz.csv")
    try:
        ev = evaluate_case(loaded, what_if=True)
    except DeviationError as exc:
        assert str(exc) and "fuzz.csv" in str(exc)
    else:
        assert np.isfinite(ev.delivered_F_min) and ev.delivered_F_min >= 0
        assert ev.guidance["disposition"] in {"no-deviation", "covered-by-alternate", "evaluate",
                                              "reprocess", "reprocess-or-destroy"}


def test_lethal_rate_used_is_the_published_form():
    # Lethal rate 10^((T - Tref)/z): L(111.1) = 0.1 with z = 10 (Stumbo 1973).
    assert lethal_rate(np.array([111.1]), 121.1, 10.0)[0] == pytest.approx(0.1)


def test_event_outside_the_cycle_is_a_case_error():
    from deviation.inputs.case import parse_case
    from deviation.errors import CaseError

    data = _base.case.model_dump()
    data["deviation"]["events"] = [{"kind": "temperature-low", "start_min": 500, "end_min": 510,
                                    "temperature_C": 100}]
    with pytest.raises(CaseError) as info:
        evaluate_case(replace(_base, case=parse_case(data)))
    assert info.value.message == ("deviation.events[0]: temperature-low event from 500 to 510 min lies outside "
                                  "the record (0 to 83 min); expected an interval within the record")


_SEVERITY = {"no-deviation": 0, "covered-by-alternate": 1, "evaluate": 2, "reprocess": 3,
             "reprocess-or-destroy": 4}


@settings(max_examples=40, deadline=None)
@given(hold=st.floats(119, 124), at=st.floats(0, 90), length=st.floats(0.5, 40), lower=st.floats(0.1, 30),
       hold_end=st.floats(20, 60))
def test_lowering_the_retort_never_makes_the_disposition_milder(hold, at, length, lower, hold_end):
    """Issue 4 property: lower the retort anywhere, by any amount: the disposition is never milder."""
    t = np.arange(0.0, 90.0, 0.5)
    T = np.interp(t, [0, 8, hold_end, hold_end + 1, 90], [30, hold, hold, 25, 25])
    # Lowered, but still a reading a retort can give (0 °C and up: rules/limits.toml).
    lowered = np.where((t >= at) & (t <= at + length), np.maximum(T - lower, 0.0), T)
    a = evaluate_case(with_log(_base, t, T), what_if=False)
    b = evaluate_case(with_log(_base, t, lowered), what_if=False)
    assert _SEVERITY[b.guidance["disposition"]] >= _SEVERITY[a.guidance["disposition"]]


_chili = load_case(DEMO / "chili_alternate_process.toml")


@settings(max_examples=30, deadline=None)
@given(setpoint=st.floats(117.5, 122.0), at=st.floats(0, 130), length=st.floats(0.5, 40),
       lower=st.floats(0.1, 30))
def test_lowering_never_milder_with_a_filed_alternate(setpoint, at, length, lower):
    """The same property on a process with a filed alternate (118.3 °C for 96 min)."""
    t = np.arange(0.0, 150.0, 0.5)
    T = np.interp(t, [0, 10, 112, 113, 150], [30, setpoint, setpoint, 25, 25])
    lowered = np.where((t >= at) & (t <= at + length), np.maximum(T - lower, 0.0), T)
    a = evaluate_case(with_log(_chili, t, T), what_if=False)
    b = evaluate_case(with_log(_chili, t, lowered), what_if=False)
    assert _SEVERITY[b.guidance["disposition"]] >= _SEVERITY[a.guidance["disposition"]]
