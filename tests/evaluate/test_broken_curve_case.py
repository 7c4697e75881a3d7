"""A broken heating curve filed with the process (Ball 1923; Stumbo 1973, ch. 10): the schema,
the evaluation, and the unsafe side against the straight-line readings of the same curve.

The physics of the record model is checked in ``tests/physics/heating/test_broken_curve.py``
and against a thickening finite-difference slab in
``tests/reference/test_reference_broken_curve.py``; here: what an evaluation does with it.
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from deviation.evaluate import evaluate_case
from deviation.evaluate.cold_spot import cold_spot_model, deliver, model_grid, scheduled_profile
from deviation.evaluate.whatif import insert_hold
from deviation.errors import CaseError
from deviation.inputs.case import load_case, parse_case
from deviation.inputs.logs import parse_log_text
from deviation.physics.ball_formula import ball_formula
from deviation.physics.heating.superposition import superpose
from deviation.physics.lethality import general_method

DEMO = Path(__file__).resolve().parents[2] / "demo_cases"
BROKEN = {"model": "heating-curve", "fh_min": 24.0, "jh": 1.2, "fh2_min": 75.0, "break_min": 12.0,
          "break_temperature_C": 97.5, "fc_min": 75.0, "jc": 1.6}


def _pudding(heat_penetration=None, **deviation):
    loaded = load_case(DEMO / "pudding_steam_drop.toml")
    data = loaded.case.model_dump()
    if heat_penetration is not None:
        data["process"]["heat_penetration"] = heat_penetration
    data["deviation"].update(deviation)
    return replace(loaded, case=parse_case(data))


def _case_data(**hp):
    data = load_case(DEMO / "pudding_steam_drop.toml").case.model_dump()
    data["process"]["heat_penetration"] = {**BROKEN, **hp}
    return data


# --- the schema ---------------------------------------------------------------------------------


@pytest.mark.parametrize("hp, words", [
    ({"break_min": None}, "needs fh2_min and break_min; missing break_min"),
    ({"fh2_min": None}, "needs fh2_min and break_min; missing fh2_min"),
    # never guessed: the F moves either way with it (test_the_break_temperature_matters_both_ways)
    ({"break_temperature_C": None}, "needs break_temperature_C"),
    ({"fh2_min": None, "break_min": None, "break_temperature_C": 100.0},
     "break_temperature_C is given without a broken heating curve"),
    ({"model": "conduction", "jh": None, "fc_min": None, "jc": None, "break_temperature_C": None},
     "need model 'heating-curve'"),
    ({"break_temperature_C": 121.1}, "at or above the process temperature"),
    ({"break_min": -1.0}, "break_min"),
    ({"fh2_min": 0.0}, "fh2_min"),
])
def test_a_broken_curve_is_filed_whole_or_refused(hp, words):
    data = _case_data(**hp)
    data["process"]["heat_penetration"] = {k: v for k, v in data["process"]["heat_penetration"].items()
                                           if v is not None}
    with pytest.raises(CaseError) as err:
        parse_case(data)
    assert words in str(err.value)


# --- the evaluation -----------------------------------------------------------------------------


def test_the_evaluation_says_where_the_product_broke():
    ev = evaluate_case(_pudding(), uncertainty=True)
    b = ev.broken_curve
    assert b is not None and b["fh2_min"] == 75.0 and b["break_min"] == 12.0
    assert b["break_temperature_C"] == 97.5
    assert b["earliest_break_min"] is not None and b["latest_break_min"] is not None
    assert b["earliest_break_min"] <= b["latest_break_min"]
    # the record model's cold spot is below the highest the curve allows: it reaches the break
    # temperature no earlier than the earliest break
    crossing = float(np.interp(97.5, ev.cold_spot.temperature_C[:600], ev.cold_spot.time_min[:600]))
    assert crossing >= b["earliest_break_min"] - 0.1
    assert "broken heating curve" in ev.F_basis and "97.5 °C" in ev.F_basis
    # Ball's broken-curve formula for the filed cycle stands beside it (Ball 1923; Stumbo 1973)
    broken_ball = ball_formula(24.0, 1.2, 65.0, 121.1, 65.0, 10.0, m_plus_g_C=121.1 - 22.0,
                               fh2_min=75.0, break_time_min=12.0).F_min
    straight_ball = ball_formula(24.0, 1.2, 65.0, 121.1, 65.0, 10.0, m_plus_g_C=121.1 - 22.0).F_min
    assert ev.ball_formula_F_min == pytest.approx(broken_ball, rel=1e-12)
    assert ev.ball_formula_F_min < straight_ball
    # the Monte Carlo does not apply, and says why
    assert "broken heating curve" in ev.uncertainty["reason"]
    assert "F_p05_min" not in ev.uncertainty


def test_the_extension_reaches_the_target_on_the_broken_model():
    loaded = _pudding()
    ev = evaluate_case(loaded)
    assert ev.extension_to_target_min is not None and ev.extension_to_target_min > 0.0
    process = loaded.case.process
    model = cold_spot_model(process)
    profile = parse_log_text(loaded.retort_log_text, source="pudding")
    hold_end = ev.cycle.hold_end_min
    extended = insert_hold(profile, hold_end, ev.extension_to_target_min, process.process_temperature_C)
    F = deliver(extended, loaded.case.deviation.initial_temperature_C, process, model,
                conservative=True).F_min
    assert F * ev.target_F_min / ev.scheduled_F_min >= ev.target_F_min * (1.0 - 1e-3)


# --- the unsafe side ----------------------------------------------------------------------------


def test_never_more_than_the_first_line_continued():
    # the product never thickening (the first line continued) credits at least as much, on the
    # record and on the filed cycle
    straight = {k: v for k, v in BROKEN.items() if k not in ("fh2_min", "break_min", "break_temperature_C")}
    first_line = evaluate_case(_pudding(straight), what_if=False)
    for level in (60.0, 80.0, 97.5, 110.0, 120.0):
        ev = evaluate_case(_pudding({**BROKEN, "break_temperature_C": level}), what_if=False)
        assert ev.model_F_min <= first_line.model_F_min, level
        assert ev.scheduled_F_min <= first_line.scheduled_F_min, level


def _pair_F(grid, retort, initial_C, model, conservative):
    pair = superpose(grid, retort, initial_C, model.heating, falling_unaccomplished=model.falling,
                     max_ages=1200)
    return pair, general_method(grid, pair, 121.1, 10.0, conservative=conservative)[0]


def test_below_the_time_invariant_pair_until_the_product_has_surely_broken():
    # the pair answers every rise with the broken curve from its own start (the break read as a
    # property of the response): until the product has surely thickened the record model's cold
    # spot is never above it (after, falls are the thick product's own, at fc; see the physics)
    loaded = _pudding()
    process, initial = loaded.case.process, loaded.case.deviation.initial_temperature_C
    ev = evaluate_case(loaded, what_if=False)
    model = cold_spot_model(process)
    profile = parse_log_text(loaded.retort_log_text, source="pudding")
    _, grid, retort = model_grid(profile, True, model)
    pair, _ = _pair_F(grid, retort, initial, model, True)
    record = deliver(profile, initial, process, model, conservative=True)
    until = grid <= ev.broken_curve["latest_break_min"]
    assert np.all(record.cold_spot_C[until] <= pair[until] + 1e-9)
    assert record.F_min == pytest.approx(ev.model_F_min, rel=1e-12)
    # the filed cycle (the relative F's denominator is the broken model's own figure): the pair,
    # with no fall before cooling, credits at least as much
    filed = scheduled_profile(process, model)
    _, grid, retort = model_grid(filed, False, model)
    _, F_pair = _pair_F(grid, retort, process.minimum_initial_temperature_C, model, False)
    assert ev.scheduled_F_min <= F_pair * (1.0 + 1e-9)


def test_the_break_temperature_matters_both_ways():
    # why it is required, not guessed: a product that thickens early heats slowly sooner; one
    # still thin when the retort falls cools faster than the thick product (fc) would. Measured
    # on the demo record (model F0 [min]): break at 80 °C 1.99, at 97.5 °C 3.71, at 110 °C 2.81.
    F = {level: evaluate_case(_pudding({**BROKEN, "break_temperature_C": level}), what_if=False).model_F_min
         for level in (80.0, 97.5, 110.0)}
    assert F[80.0] < F[97.5] and F[110.0] < F[97.5]


def test_a_product_broken_from_the_start_heats_no_faster_than_the_second_line():
    # break temperature below the initial temperature: thick from steam on
    ev = evaluate_case(_pudding({**BROKEN, "break_temperature_C": 40.0}), what_if=False)
    assert ev.broken_curve["earliest_break_min"] == pytest.approx(0.0, abs=1e-9)
    slow = {"model": "heating-curve", "fh_min": 75.0, "jh": 1.2, "fc_min": 75.0, "jc": 1.6}
    second = evaluate_case(_pudding(slow), what_if=False)
    # rises after the break on the thickened lag factor (>= jh): never above
    assert ev.model_F_min <= second.model_F_min * (1.0 + 1e-6)


@pytest.mark.parametrize("name", ["xbh", "xbh_min"])
def test_the_trades_name_for_the_break_time_is_accepted(name):
    data = _case_data(break_min=None)
    hp = {k: v for k, v in data["process"]["heat_penetration"].items() if v is not None}
    data["process"]["heat_penetration"] = {**hp, name: 12.0}
    assert parse_case(data).process.heat_penetration.break_min == 12.0
