"""Continuous retort systems: every entry's F against an independent brute force.

What is modelled (21 CFR 113.40(d), continuous rotary / reel-and-spiral retorts; 113.40(f),
hydrostatic retorts): containers enter the shell (the steam dome) one after another and move with
the reel or the conveyor, whose speed sets the process time (a critical factor); a temperature
drop, a reel or conveyor stop or a slow reel touches only the containers inside at the time.

The brute force is written here, apart from :mod:`deviation.physics.continuous`, the way one
would check a single container by hand: find its exit by walking the conveyor's speed segments
one by one from its entry, read its own retort history off the shell record (``np.interp`` at
its entry time plus each time since entry), step it to the cooling water at the exit (the last
grid step that ends at or before the exit carries the ramp, the module's stated convention),
superpose the step response over it with ``superpose`` and integrate with ``general_method``.
Nothing is shared with the engine but those two library functions and the step response.

Tolerances:

- a row of the engine in point mode (``bound_slots=False``) is the same container as the brute
  force's, on the same grid: they agree to 1e-9 relative (double-precision FFT rounding is about
  1e-14 of F here; 1e-9 leaves room for other machines, far below any disposition's concern);
- a row in slot mode (the default) must never exceed the brute force of any container entering in
  its slot (ends included, and random times inside) beyond 1e-12 relative (rounding): that is the
  unsafe side;
- the price of the bound, the lowest brute force found in a slot over the slot's row, stays under
  1 %: the slot's window is one
  record step wide plus rounding outward, so each change of the shell temperature is answered at
  most a step or two early or late and the exit at most one slot early (a few seconds out of a
  passage of 20 to 45 min; 0.3 % is the largest seen in these scenarios);
- a 4× finer grid of time since entry (the record is piecewise linear, so it is the same record)
  gives an F no lower than the engine's beyond 1e-6 relative (trapezoidal error of the General
  Method) and within 0.5 %: the exit convention credits up to one grid step less in the shell, the
  safe side, and costs little.
"""

from __future__ import annotations

import math
from functools import partial

import numpy as np
import pytest

from deviation.physics.continuous import (
    UNAFFECTED,
    continuous_entries,
    group_entries,
    threshold_category,
)
from deviation.physics.heating import (
    cylinder_centre_unaccomplished,
    diffusivity_from_fh_cylinder,
    superpose,
)
from deviation.physics.lethality import general_method

TREF_C, Z_C = 121.1, 10.0


def conduction(fh_min, radius_m, height_m):
    alpha = diffusivity_from_fh_cylinder(fh_min, radius_m, height_m)
    return partial(cylinder_centre_unaccomplished, diffusivity_m2_s=alpha, radius_m=radius_m,
                   height_m=height_m)


def reel_and_spiral():
    """113.40(d): a reel-and-spiral cooker on a 1-s record. 303 x 406 can (81 x 111 mm),
    agitated heating represented by a conduction response of fh = 10 min; 20 min at 125 °C.
    Events: a slow reel (0.8) 100-120 min; a reel stop 200-208 min with the shell falling to
    118 °C during it (203-206 min); a shell drop to 119.5 °C with the reel running (300-305 min,
    1-min ramps), then a dip of 0.3 °C below 125 °C for 20 s at 400 min."""
    dt = 1.0 / 60.0
    time_min = np.arange(round(560.0 / dt) + 1) * dt
    knots = [0, 203, 203.5, 205.5, 206, 299, 300, 304, 305, 400, 400.1, 400.3, 400.4, 560]
    temps = [125, 125, 118, 118, 125, 125, 119.5, 119.5, 125, 125, 124.7, 124.7, 125, 125]
    shell = np.interp(time_min, knots, temps)
    case = {
        "residence_min": 20.0, "containers_per_min": 60.0,
        "entry_start_min": 20.0, "entry_end_min": 500.0,
        "unaccomplished": conduction(10.0, 0.0405, 0.111), "initial_C": 70.0, "cooling_C": 30.0,
        "cooling_min": 10.0, "process_temperature_C": 125.0,
        "speed_change_min": [0.0, 100.0, 120.0, 200.0, 208.0],
        "speed_fraction": [1.0, 0.8, 1.0, 0.0, 1.0],
    }
    return time_min, shell, case


def hydrostatic():
    """113.40(f): a hydrostatic tower on a 2-s record, 45 min in the dome at 121.5 °C, carriers
    giving 25 containers/min (entries 2.4 s apart: off the record's grid), a 307 x 409 can
    (87 x 116 mm, conduction, fh = 30 min). Events: a conveyor stop 60-66 min; the dome falling
    to 119.5 °C over 1 min at 90 min, back at 96 min; the conveyor at 1.1 × filed speed
    130-140 min (a short process)."""
    dt = 2.0 / 60.0
    time_min = np.arange(round(240.0 / dt) + 1) * dt
    knots = [0, 90, 91, 95, 96, 240]
    temps = [121.5, 121.5, 119.5, 119.5, 121.5, 121.5]
    shell = np.interp(time_min, knots, temps)
    case = {
        "residence_min": 45.0, "containers_per_min": 25.0,
        "entry_start_min": 5.0, "entry_end_min": 170.0,
        "unaccomplished": conduction(30.0, 0.0435, 0.116), "initial_C": 60.0, "cooling_C": 25.0,
        "cooling_min": 15.0, "process_temperature_C": 121.5,
        "speed_change_min": [0.0, 60.0, 66.0, 130.0, 140.0],
        "speed_fraction": [1.0, 0.0, 1.0, 1.1, 1.0],
    }
    return time_min, shell, case


SCENARIOS = {"reel-and-spiral 113.40(d)": reel_and_spiral, "hydrostatic 113.40(f)": hydrostatic}


# ----------------------------------------------------------------------- the brute force


def exit_by_walking(entry_min, residence_min, change_min, fraction):
    """Exit time: walk the speed segments from the entry until the travel reaches the residence."""
    left = residence_min
    now = entry_min
    seg = max(i for i, c in enumerate(change_min) if c <= entry_min)
    while True:
        seg_end = change_min[seg + 1] if seg + 1 < len(change_min) else math.inf
        speed = fraction[seg]
        if speed > 0.0 and left <= speed * (seg_end - now):
            return now + left / speed
        left -= speed * (seg_end - now)
        now = seg_end
        seg += 1


def brute_force_F(entry_min, time_min, shell_C, case, *, refine=1):
    """One container, built explicitly: its own history, superpose, general_method."""
    dt = (time_min[1] - time_min[0]) / refine
    exit_min = exit_by_walking(entry_min, case["residence_min"], case["speed_change_min"],
                               case["speed_fraction"])
    in_shell = math.floor((exit_min - entry_min) / dt + 1e-9)
    cooling = math.ceil(case["cooling_min"] / dt - 1e-9)
    tau = np.arange(in_shell + cooling + 1) * dt
    history = np.interp(entry_min + tau, time_min, shell_C)
    history[in_shell:] = case["cooling_C"]
    cold = superpose(tau, history, case["initial_C"], case["unaccomplished"])
    return general_method(tau, cold, TREF_C, Z_C)[0], exit_min


def sampled_rows(result, rng, n_random=40):
    """Rows to check: every 25th computed row, rows at the edges of each group, random rows."""
    own = np.flatnonzero(result.affected)
    edges = np.flatnonzero(np.diff(result.affected.astype(int)) != 0)
    random = rng.choice(result.rows, n_random, replace=False)
    rows = np.concatenate((own[::25], edges, edges + 1, random))
    return np.unique(rows)


@pytest.fixture(scope="module", params=list(SCENARIOS))
def scenario(request):
    time_min, shell, case = SCENARIOS[request.param]()
    return {
        "name": request.param, "time_min": time_min, "shell": shell, "case": case,
        "point": continuous_entries(time_min, shell, bound_slots=False, **case),
        "slot": continuous_entries(time_min, shell, **case),
    }


def test_scenarios_cover_stop_slow_fast_and_drop(scenario):
    # the checks below mean something only if the sampled rows include every kind of event
    r = scenario["slot"]
    assert r.off_filed_speed.any() and r.affected.any() and (~r.affected).any()
    assert (r.residence_min > scenario["case"]["residence_min"] + 1.0).any()  # inside a stop
    assert (r.lowest_shell_C < scenario["case"]["process_temperature_C"] - 1.0).any()  # a drop


def test_point_rows_equal_the_brute_force(scenario):
    rng = np.random.default_rng(15)
    r = scenario["point"]
    rows = sampled_rows(r, rng)
    for i in rows:
        F, exit_min = brute_force_F(r.entry_min[i], scenario["time_min"], scenario["shell"],
                                    scenario["case"])
        assert r.F_min[i] == pytest.approx(F, rel=1e-9), (scenario["name"], r.entry_min[i])
        assert r.residence_min[i] == pytest.approx(exit_min - r.entry_min[i], abs=1e-9)


def test_slot_rows_never_above_any_container_of_the_slot(scenario):
    rng = np.random.default_rng(113)
    r = scenario["slot"]
    worst_gap = 0.0
    for i in sampled_rows(r, rng):
        a, b = r.entry_min[i], r.entry_end_min[i]
        lowest = np.inf
        for e in (a, rng.uniform(a, b), b):
            F, _ = brute_force_F(e, scenario["time_min"], scenario["shell"], scenario["case"])
            assert r.F_min[i] <= F * (1.0 + 1e-12), (scenario["name"], e, r.F_min[i], F)
            lowest = min(lowest, F)
        # the price of the bound: against the worst container found in the slot (F jumps
        # within a slot where a container leaves just as the reel stops, so not every one)
        worst_gap = max(worst_gap, 1.0 - r.F_min[i] / lowest)
    assert worst_gap < 0.01, worst_gap


def test_unaffected_rows_get_the_brute_force_of_a_nominal_passage(scenario):
    # the shell is flat at the process temperature outside the events: a nominal row's F is the
    # brute force's exactly (same grid), and every container of its slot is at least that
    rng = np.random.default_rng(40)
    r = scenario["slot"]
    nominal = np.flatnonzero(~r.affected)
    for i in rng.choice(nominal, 10, replace=False):
        F, _ = brute_force_F(r.entry_min[i], scenario["time_min"], scenario["shell"],
                             scenario["case"])
        assert r.F_min[i] == pytest.approx(F, rel=1e-9)
        assert r.F_min[i] == r.nominal_F_min


def test_containers_inside_during_a_drop_or_a_speed_change_are_never_unaffected(scenario):
    # independent of the engine: walk each row's last container out, read the record between
    # the row's first entry and that exit; below the process temperature, or any speed other
    # than the filed one there, and the row must carry its own F and a category of its own
    time_min, shell, case = scenario["time_min"], scenario["shell"], scenario["case"]
    r = scenario["slot"]
    change = np.asarray(case["speed_change_min"])
    fraction = np.asarray(case["speed_fraction"])
    groups = group_entries(r, threshold_category([3.0], ["below 3", "at least 3"]))
    category = np.empty(r.rows, dtype=object)
    for g in groups:
        inside = (r.entry_min >= g["entry_start_min"]) & (r.entry_end_min <= g["entry_end_min"])
        category[inside] = g["category"]
    touched = 0
    for i in range(0, r.rows, 7):
        a = r.entry_min[i]
        last_exit = exit_by_walking(r.entry_end_min[i], case["residence_min"], change, fraction)
        inner = shell[(time_min > a) & (time_min < last_exit)]
        ends = np.interp([a, last_exit], time_min, shell)
        low = min(inner.min(initial=np.inf), ends.min()) < case["process_temperature_C"]
        segs = [k for k in range(change.size)
                if change[k] < last_exit and (k + 1 == change.size or change[k + 1] > a)]
        off = any(fraction[k] != 1.0 for k in segs)
        if low or off:
            touched += 1
            assert r.affected[i] and category[i] != UNAFFECTED, (scenario["name"], a)
    assert touched > 20


def test_finer_grid_of_time_since_entry_gives_no_lower_F(scenario):
    # the grid conventions (exit ramp ending at or before the exit) are on the safe side
    r = scenario["point"]
    rows = np.flatnonzero(r.affected)
    for i in rows[:: max(1, rows.size // 6)]:
        fine, _ = brute_force_F(r.entry_min[i], scenario["time_min"], scenario["shell"],
                                scenario["case"], refine=4)
        assert r.F_min[i] <= fine * (1.0 + 1e-6)
        assert r.F_min[i] >= fine * (1.0 - 5e-3)


def test_every_container_counted_once_and_none_enters_during_a_stop(scenario):
    case = scenario["case"]
    r = scenario["slot"]
    groups = group_entries(r, threshold_category([3.0], ["below 3", "at least 3"]))
    # containers: positions 1/containers_per_min apart in conveyor travel, both ends included
    change = np.asarray(case["speed_change_min"])
    fraction = np.asarray(case["speed_fraction"])

    def travel(t):
        total = 0.0
        for k in range(change.size):
            end = change[k + 1] if k + 1 < change.size else math.inf
            if t <= change[k]:
                break
            total += fraction[k] * (min(t, end) - change[k])
        return total

    expected = math.floor((travel(case["entry_end_min"]) - travel(case["entry_start_min"]))
                          * case["containers_per_min"] + 1e-9) + 1
    assert sum(g["containers"] for g in groups) == expected == int(r.containers.sum())
    stops = [(change[k], change[k + 1]) for k in range(change.size - 1) if fraction[k] == 0.0]
    for a, b in zip(r.entry_min, r.entry_end_min):
        for s0, s1 in stops:
            assert b <= s0 + 1e-9 or a >= s1 - 1e-9
