"""Unit tests for deviation.physics.continuous (continuous retorts, container by container)."""

from __future__ import annotations

import itertools
import math
import subprocess
import sys
from functools import partial

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from deviation.physics.continuous import (
    UNAFFECTED,
    continuous_entries,
    conveyor_position_min,
    group_entries,
    threshold_category,
)
from deviation.physics.heating.conduction import (
    ModelInputError,
    cylinder_centre_unaccomplished,
    diffusivity_from_fh_cylinder,
)
from deviation.physics.heating.heating_curve import step_unaccomplished
from deviation.physics.heating.superposition import superpose
from deviation.physics.lethality import general_method

RADIUS_M, HEIGHT_M = 0.0405, 0.111
CONDUCTION = partial(
    cylinder_centre_unaccomplished,
    diffusivity_m2_s=diffusivity_from_fh_cylinder(8.0, RADIUS_M, HEIGHT_M),
    radius_m=RADIUS_M, height_m=HEIGHT_M,
)
DT_MIN = 0.05  # 3-s record: small and quick


def record(end_min=120.0, level_C=124.0, drops=()):
    """Shell record on a 3-s grid; ``drops`` = (start, end, temperature) square dips."""
    time_min = np.arange(round(end_min / DT_MIN) + 1) * DT_MIN
    shell = np.full(time_min.size, level_C)
    for a, b, temp in drops:
        shell[(time_min >= a - 1e-9) & (time_min <= b + 1e-9)] = temp
    return time_min, shell


def case(**changes):
    base = {
        "residence_min": 12.0, "containers_per_min": 20.0,
        "entry_start_min": 5.0, "entry_end_min": 60.0,
        "unaccomplished": CONDUCTION, "initial_C": 60.0, "cooling_C": 25.0, "cooling_min": 6.0,
        "process_temperature_C": 124.0,
    }
    base.update(changes)
    return base


def one_container_F(entry_min, exit_min, time_min, shell, c):
    """F of one container, its history built by hand (the module's grid conventions)."""
    dt = time_min[1] - time_min[0]
    in_shell = math.floor((exit_min - entry_min) / dt + 1e-9)
    cooling = math.ceil(c["cooling_min"] / dt - 1e-9)
    tau = np.arange(in_shell + cooling + 1) * dt
    history = np.interp(entry_min + tau, time_min, shell)
    history[in_shell:] = c["cooling_C"]
    cold = superpose(tau, history, c["initial_C"], c["unaccomplished"])
    return general_method(tau, cold, 121.1, 10.0, conservative=c.get("conservative", False))[0]


# ----------------------------------------------------------------------------- conveyor


def test_conveyor_position_through_a_stop_and_a_slow_reel():
    p = conveyor_position_min([0.0, 10.0, 15.0, 20.0, 30.0], [0.0, 10.0, 20.0], [1.0, 0.0, 0.5])
    np.testing.assert_allclose(p, [0.0, 10.0, 10.0, 10.0, 15.0])


def test_conveyor_default_is_filed_speed():
    np.testing.assert_allclose(conveyor_position_min([0.0, 7.5]), [0.0, 7.5])


# ----------------------------------------------------------------------------- nominal


def test_flat_shell_at_filed_speed_is_one_unaffected_interval():
    time_min, shell = record()
    c = case()
    r = continuous_entries(time_min, shell, **c)
    assert r.rows_computed == 0 and not r.off_filed_speed.any()
    np.testing.assert_array_equal(r.F_min, r.nominal_F_min)
    np.testing.assert_allclose(r.residence_min, 12.0, atol=1e-9)
    # the nominal F is the F of a filed passage built by hand
    assert r.nominal_F_min == pytest.approx(
        one_container_F(0.0, 12.0, time_min, shell, c), rel=1e-10)
    groups = group_entries(r, threshold_category([3.0], ["low", "high"]))
    assert len(groups) == 1
    g = groups[0]
    assert g["category"] == UNAFFECTED and not g["affected"]
    assert (g["entry_start_min"], g["entry_end_min"]) == (5.0, 60.0)
    assert g["containers"] == 55 * 20 + 1  # both ends of the window included


def test_a_hotter_shell_earns_nothing_above_the_nominal_F():
    time_min, shell = record(level_C=124.6)
    r = continuous_entries(time_min, shell, **case())
    assert r.rows_computed == 0
    time_min, flat = record(level_C=124.0)
    assert r.nominal_F_min == continuous_entries(time_min, flat, **case()).nominal_F_min


def test_tolerance_lowers_the_floor_and_the_shared_F_with_it():
    time_min, shell = record(level_C=123.9)  # 0.1 °C under the filed temperature throughout
    strict = continuous_entries(time_min, shell, **case())
    assert strict.rows_computed == strict.rows
    lenient = continuous_entries(time_min, shell, tolerance_C=0.2, **case())
    assert lenient.rows_computed == 0 and lenient.floor_C == pytest.approx(123.8)
    # the shared F is that of the floor: below every row's own F
    assert lenient.nominal_F_min < strict.F_min.min()


# ----------------------------------------------------------------------------- conveyor events


def test_a_stop_keeps_the_containers_inside_and_lets_none_in():
    time_min, shell = record()
    c = case(speed_change_min=[0.0, 30.0, 38.0], speed_fraction=[1.0, 0.0, 1.0])
    r = continuous_entries(time_min, shell, bound_slots=False, **c)
    # nobody enters during the stop
    assert not np.any((r.entry_min > 30.0 + 1e-9) & (r.entry_min < 38.0 - 1e-9))
    inside = (r.entry_min > 18.0 + 1e-9) & (r.entry_min < 30.0 - 1e-9)
    np.testing.assert_allclose(r.residence_min[inside], 20.0, atol=1e-9)  # 12 + the 8-min stop
    assert r.off_filed_speed[inside].all() and r.affected[inside].all()
    # longer at temperature: more lethality, but never the unaffected category
    assert (r.F_min[inside] > r.nominal_F_min).all()
    categories = {g["category"] for g in group_entries(r, lambda F: "affected")
                  if g["entry_start_min"] < 30.0 and g["entry_end_min"] > 18.0}
    assert categories == {"affected"}


def test_a_shell_at_or_above_the_floor_is_credited_the_floor_for_each_residence():
    # slot rows touched only by the stop read no sample under the floor: one F per residence,
    # from a shell held at the floor, below the exact F of any of their containers
    c = case(speed_change_min=[0.0, 30.0, 38.0], speed_fraction=[1.0, 0.0, 1.0])
    time_min, shell = record()
    exact = continuous_entries(time_min, shell, bound_slots=False, **c)
    slot = continuous_entries(time_min, shell, **c)
    stop_rows = slot.affected & slot.off_filed_speed
    assert stop_rows.any() and not slot.own_history[stop_rows].any()
    # the record is at the floor: the floor's F is the slot's first container's exactly, but
    # for the residence (the slot's shortest)
    same = stop_rows & (np.abs(slot.residence_min - exact.residence_min) < 1e-12)
    np.testing.assert_allclose(slot.F_min[same], exact.F_min[same], rtol=1e-10)
    _, warmer = record(level_C=124.5)
    slot_warm = continuous_entries(time_min, warmer, **c)
    exact_warm = continuous_entries(time_min, warmer, bound_slots=False, **c)
    np.testing.assert_allclose(slot_warm.F_min[same], slot.F_min[same], rtol=1e-12)
    assert (slot_warm.F_min[same] < exact_warm.F_min[same]).all()


def test_the_container_at_a_stop_position_belongs_to_the_slot_before_the_stop():
    # 20 containers/min from 5 min: the one at 30 min is a container position; it reached the
    # in-feed as the reel stopped, so it entered before the stop
    time_min, shell = record()
    c = case(speed_change_min=[0.0, 30.0, 38.0], speed_fraction=[1.0, 0.0, 1.0])
    r = continuous_entries(time_min, shell, **c)
    before = int(np.flatnonzero(np.isclose(r.entry_end_min, 30.0))[0])
    after = before + 1
    assert r.entry_min[after] == pytest.approx(38.0)
    assert r.containers[before] == 2 and r.containers[after] == 0  # 29.95 and 30.0; none at 38
    assert int(r.containers.sum()) == (60 - 5 - 8) * 20 + 1


def test_a_window_opening_as_the_reel_stops_keeps_its_first_container():
    time_min, shell = record(drops=[(8.0, 9.0, 115.0)])
    c = case(entry_start_min=5.0, speed_change_min=[0.0, 5.0, 10.0], speed_fraction=[1.0, 0.0, 1.0])
    r = continuous_entries(time_min, shell, **c)
    # the first container entered at 5 min and waited through the stop (and the drop) inside
    assert (r.entry_min[0], r.entry_end_min[0], r.containers[0]) == (5.0, 5.0, 1)
    assert r.residence_min[0] == pytest.approx(17.0) and r.lowest_shell_C[0] == 115.0
    assert r.entry_min[1] == 10.0 and r.affected[0]
    assert int(r.containers.sum()) == (60 - 10) * 20 + 1
    exact = one_container_F(5.0, 22.0, time_min, shell, c)
    assert r.F_min[0] == pytest.approx(exact, rel=1e-9)


def test_a_slow_reel_stretches_the_residence_and_thins_the_entries():
    time_min, shell = record(end_min=200.0)
    c = case(speed_change_min=[0.0], speed_fraction=[0.8], entry_start_min=0.0,
             entry_end_min=100.0)
    r = continuous_entries(time_min, shell, bound_slots=False, **c)
    np.testing.assert_allclose(r.residence_min, 12.0 / 0.8, rtol=1e-12)
    assert int(r.containers.sum()) == round(0.8 * 20 * 100) + 1
    assert r.off_filed_speed.all()


def test_a_fast_conveyor_shortens_the_process_and_lowers_F():
    time_min, shell = record()
    c = case(speed_change_min=[0.0, 20.0, 40.0], speed_fraction=[1.0, 1.25, 1.0])
    r = continuous_entries(time_min, shell, **c)
    within = (r.entry_min >= 20.0) & (r.entry_end_min <= 28.0)
    assert within.any()
    np.testing.assert_allclose(r.residence_min[within], 12.0 / 1.25, atol=DT_MIN)
    assert (r.F_min[within] < 0.9 * r.nominal_F_min).all()


def test_entry_times_off_the_record_grid():
    # 7 containers/min: entries 8.57 s apart on a 3-s record
    time_min, shell = record(drops=[(30.0, 31.0, 119.0)])
    c = case(containers_per_min=7.0)
    point = continuous_entries(time_min, shell, bound_slots=False, **c)
    for i in np.flatnonzero(point.own_history)[::9]:
        e = point.entry_min[i]
        assert point.F_min[i] == pytest.approx(
            one_container_F(e, e + 12.0, time_min, shell, c), rel=1e-9)


# ----------------------------------------------------------------------------- the drop


def test_a_drop_touches_exactly_the_containers_inside():
    time_min, shell = record(drops=[(30.0, 32.0, 118.0)])
    r = continuous_entries(time_min, shell, bound_slots=False, **case())
    inside = (r.exit_min >= 30.0 - 1e-9) & (r.entry_min <= 32.0 + 1e-9)
    np.testing.assert_array_equal(r.affected, inside)
    assert (r.lowest_shell_C[inside] == 118.0).all() and (r.lowest_shell_C[~inside] == 124.0).all()
    # one leaving as the drop starts (the exit's ramp) keeps the nominal F; the others lose
    assert (r.F_min[inside] <= r.nominal_F_min * (1.0 + 1e-12)).all()
    assert (r.F_min[inside & (r.exit_min > 30.0 + DT_MIN)] < r.nominal_F_min).all()


def test_a_deeper_drop_never_raises_any_F():
    time_min, shallow = record(drops=[(30.0, 33.0, 120.0)])
    _, deep = record(drops=[(30.0, 33.0, 116.0)])
    a = continuous_entries(time_min, shallow, **case())
    b = continuous_entries(time_min, deep, **case())
    assert (b.F_min <= a.F_min * (1.0 + 1e-12)).all()


def test_slot_rows_bound_the_first_container_of_their_slot():
    time_min, shell = record(drops=[(30.0, 31.5, 119.0)])
    c = case(containers_per_min=7.0, speed_change_min=[0.0, 40.0, 43.0],
             speed_fraction=[1.0, 0.0, 0.9])
    slot = continuous_entries(time_min, shell, **c)
    point = continuous_entries(time_min, shell, bound_slots=False, **c)
    np.testing.assert_array_equal(slot.entry_min, point.entry_min)
    assert (slot.F_min <= point.F_min * (1.0 + 1e-12)).all()
    assert (slot.residence_min <= point.residence_min + 1e-12).all()


def test_coarser_rows_bound_the_finer_rows_they_contain():
    time_min, shell = record(drops=[(30.0, 31.5, 119.0)])
    c = case(speed_change_min=[0.0, 40.0, 43.0], speed_fraction=[1.0, 0.0, 0.9])
    fine = continuous_entries(time_min, shell, **c)
    coarse = continuous_entries(time_min, shell, entry_step_min=0.5, **c)
    assert coarse.rows < fine.rows
    assert int(coarse.containers.sum()) == int(fine.containers.sum())
    for a, b, F in zip(coarse.entry_min, coarse.entry_end_min, coarse.F_min):
        within = (fine.entry_min >= a - 1e-9) & (fine.entry_end_min <= b + 1e-9)
        assert within.any()
        assert F <= fine.F_min[within].min() * (1.0 + 1e-12)


def test_chunking_changes_nothing():
    time_min, shell = record(drops=[(30.0, 31.5, 119.0)])
    c = case(speed_change_min=[0.0, 40.0, 43.0], speed_fraction=[1.0, 0.0, 1.0])
    whole = continuous_entries(time_min, shell, **c)
    pieces = continuous_entries(time_min, shell, max_cells=2000, **c)
    np.testing.assert_allclose(pieces.F_min, whole.F_min, rtol=1e-12)


def test_conservative_reading_never_credits_more():
    time_min, shell = record(drops=[(30.0, 31.5, 119.0)])
    c = case()
    plain = continuous_entries(time_min, shell, **c)
    low = continuous_entries(time_min, shell, conservative=True, **c)
    assert (low.F_min <= plain.F_min).all() and low.nominal_F_min < plain.nominal_F_min
    i = int(np.argmin(low.F_min))
    e = low.entry_min[i]
    point = continuous_entries(time_min, shell, conservative=True, bound_slots=False, **c)
    assert point.F_min[i] == pytest.approx(
        one_container_F(e, e + 12.0, time_min, shell, {**c, "conservative": True}), rel=1e-9)


@settings(max_examples=25, deadline=None)
@given(
    stop_at=st.floats(10.0, 50.0), stop_min=st.floats(0.0, 6.0),
    slow=st.floats(0.3, 1.3), drop_at=st.floats(10.0, 60.0), drop_C=st.floats(100.0, 124.0),
    per_min=st.floats(3.0, 40.0), pick=st.floats(0.0, 1.0), where=st.floats(0.0, 1.0),
)
def test_no_container_of_a_slot_gets_more_than_its_row(stop_at, stop_min, slow, drop_at,
                                                       drop_C, per_min, pick, where):
    # any container, at any entry time in a slot, has at least the row's F
    time_min, shell = record(end_min=140.0, drops=[(drop_at, drop_at + 2.0, drop_C)])
    kernel = partial(step_unaccomplished, fh_min=6.0, jh=1.4)
    changes = [0.0, stop_at, stop_at + stop_min + 0.5, stop_at + stop_min + 5.0]
    fractions = [1.0, 0.0, slow, 1.0]
    c = case(containers_per_min=per_min, unaccomplished=kernel, speed_change_min=changes,
             speed_fraction=fractions, cooling_min=3.0)
    r = continuous_entries(time_min, shell, **c)
    i = min(int(pick * r.rows), r.rows - 1)
    e = r.entry_min[i] + where * (r.entry_end_min[i] - r.entry_min[i])
    # the container's exit, walked by hand
    left, now, k = 12.0, e, max(j for j, t in enumerate(changes) if t <= e)
    while True:
        end = changes[k + 1] if k + 1 < len(changes) else math.inf
        if fractions[k] > 0 and left <= fractions[k] * (end - now):
            exit_min = now + left / fractions[k]
            break
        left -= fractions[k] * (end - now)
        now, k = end, k + 1
    assert r.F_min[i] <= one_container_F(e, exit_min, time_min, shell, c) * (1.0 + 1e-12)


# ----------------------------------------------------------------------------- grouping


def test_groups_tile_the_window_and_split_on_category_and_speed():
    time_min, shell = record(drops=[(30.0, 31.0, 110.0)])
    c = case(speed_change_min=[0.0, 45.0, 47.0], speed_fraction=[1.0, 0.0, 1.0])
    r = continuous_entries(time_min, shell, **c)
    category = threshold_category([0.8 * r.nominal_F_min, 0.999 * r.nominal_F_min],
                                  ["reprocess", "evaluate", "met"])
    groups = group_entries(r, category)
    assert next(g["category"] for g in groups) == UNAFFECTED
    assert groups[-1]["category"] == UNAFFECTED
    assert sum(g["containers"] for g in groups) == int(r.containers.sum())
    for before, after in itertools.pairwise(groups):
        # contiguous, except across the stop where nobody entered
        gap = after["entry_start_min"] - before["entry_end_min"]
        assert gap == pytest.approx(0.0, abs=1e-9) or gap == pytest.approx(2.0, abs=1e-9)
        assert (before["category"], before["off_filed_speed"]) != (
            after["category"], after["off_filed_speed"])
    for g in groups:
        inside = (r.entry_min >= g["entry_start_min"] - 1e-9) & (
            r.entry_end_min <= g["entry_end_min"] + 1e-9)
        assert g["min_F_min"] == r.F_min[inside].min()
        if g["category"] != UNAFFECTED:
            assert g["affected"]
    assert any(g["category"] == "reprocess" for g in groups)


def test_category_must_be_text():
    time_min, shell = record(drops=[(30.0, 31.0, 110.0)])
    r = continuous_entries(time_min, shell, **case())
    with pytest.raises(ModelInputError, match="expected a str"):
        group_entries(r, lambda F: 3)


def test_threshold_category():
    f = threshold_category([3.0, 6.0], ["a", "b", "c"])
    assert [f(x) for x in (0.0, 2.999, 3.0, 5.9, 6.0, 50.0)] == ["a", "a", "b", "b", "c", "c"]
    with pytest.raises(ModelInputError, match="one more label"):
        threshold_category([3.0], ["a"])
    with pytest.raises(ModelInputError, match="strictly increasing"):
        threshold_category([3.0, 3.0], ["a", "b", "c"])


# ----------------------------------------------------------------------------- errors


@pytest.mark.parametrize(("changes", "message"), [
    ({"speed_change_min": [1.0, 5.0], "speed_fraction": [1.0, 0.0]}, "expected 0"),
    ({"speed_change_min": [0.0, 5.0, 5.0], "speed_fraction": [1.0, 0.0, 1.0]},
     "strictly increasing"),
    ({"speed_change_min": [0.0, 5.0], "speed_fraction": [1.0, -0.5]}, "expected >= 0"),
    ({"speed_change_min": [0.0, 5.0], "speed_fraction": [1.0]}, "same non-zero length"),
    ({"residence_min": 0.0}, "residence_min"),
    ({"containers_per_min": -1.0}, "containers_per_min"),
    ({"entry_start_min": 30.0, "entry_end_min": 20.0}, "entry window"),
    ({"tolerance_C": -0.1}, "tolerance_C"),
    ({"cooling_min": float("nan")}, "cooling_min"),
    ({"entry_end_min": 110.0}, "extend the record"),
    ({"speed_change_min": [0.0, 50.0], "speed_fraction": [1.0, 0.0]}, "never"),
    ({"speed_change_min": [0.0, 2.0, 100.0], "speed_fraction": [1.0, 0.0, 1.0]}, "did not move"),
    ({"unaccomplished": lambda t: np.ones(3)}, "unaccomplished returned"),
    ({"unaccomplished": lambda t: np.cos(np.asarray(t))}, "never goes back"),
])
def test_bad_inputs_are_named(changes, message):
    time_min, shell = record()
    with pytest.raises(ModelInputError, match=message):
        continuous_entries(time_min, shell, **case(**changes))


def test_bad_records_are_named():
    time_min, shell = record()
    with pytest.raises(ModelInputError, match="uniform grid"):
        continuous_entries(np.concatenate((time_min[:5], time_min[6:])), shell[1:], **case())
    with pytest.raises(ModelInputError, match="shape"):
        continuous_entries(time_min, shell[:-1], **case())
    bad = shell.copy()
    bad[7] = np.nan
    with pytest.raises(ModelInputError, match=r"shell_C\[7\]"):
        continuous_entries(time_min, bad, **case())


def test_the_module_loads_numpy_and_scipy_only():
    code = ("import sys, deviation.physics.continuous; "
            "print(','.join(m for m in ('pydantic', 'rich', 'textual', 'sqlalchemy', 'jinja2', "
            "'matplotlib') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""
