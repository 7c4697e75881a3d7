"""Reference: the bounding heating-curve model never credits more F0 than the product received.

Issue 12, item 1. The heating-curve model (Ball's fh, jh, fc, jc, Ball 1923) is checked against
the exact conduction solution of a product it describes: the centre of a finite cylinder,
87 mm diameter × 115 mm height, surface at the retort temperature, diffusivity from fh = 52 min
(Olson & Jackson 1942 relation, ``diffusivity_from_fh_cylinder``), step response from the
Bessel × cosine product series (Carslaw & Jaeger, *Conduction of Heat in Solids*, 2nd ed.,
1959), superposed over each retort record by Duhamel's theorem (``superpose`` with that single
kernel: exact for linear conduction). F0 by the General Method (trapezoidal, Tref 121.1 °C,
z 10 °C; ``general_method``), on a 3-s grid.

Ball's parameters measured from the exact series as a process authority reads a heat penetration
test (Ball 1923; the semi-log method): the filed cycle (IT 40 °C, the filed minimum; 10-min
come-up ramp from IT to 121.1 °C; 70-min hold; cooling water 20 °C) read every minute;
fh and jh from a straight line through log10(121.1 - T) of the readings of the last 30 min of
the hold (50-80 min), jh at the corrected zero 0.58 × 10 min = 5.8 min (Ball's 42 % rule);
fc and jc from a straight line through log10(T - 20) of the readings 40 to 100 min after steam
off (120-180 min), jc with the zero at steam off (common practice). Measured here:

    fh 52.53 min, jh 1.921, fc 52.35 min, jc 2.053

(the series' own first term: f 52.00 min, j 2.040; issue 12 quoted jh 1.96, fc 52.3, jc 2.00
for its reading of the same can; both sets are tested).

The model: ``bounding_kernels(fh, jh, fc, jc)``: rises answered by Ball's lag form
min(1, jh · 10^(-t/fh)), falls by the two-stage response with f = min(fh, fc), j = min(jh, jc);
``superpose(..., falling_unaccomplished=fall)`` takes the lowest cold spot any response between
the two allows.

Table (measured parameters; exact and model F0 [min], grid 3 s; recompute with
``python tests/reference/test_reference_heating_curve_bound.py``)::

    scenario (IT 40 °C unless said)      exact F0   model F0   model/exact   relative/exact
    filed cycle (70-min hold)              6.094      4.287        0.703          1.000
    hold 4 min short                       4.577      3.084        0.674          0.958
    hold 8 min short                       3.318      2.127        0.641          0.911
    hold 12 min short                      2.307      1.395        0.605          0.860
    drop 6 °C for 10 min mid-hold          4.700      2.857        0.608          0.864
    steam off mid-hold (35-min hold)       0.0868     0.0294       0.339          0.482
    filed cycle at IT 20 °C                4.236      2.815        0.665          0.945
    hold 150 min                          70.26      65.31         0.930          1.321

"relative" is the relative evaluation of issue 12 item 3: model F0 × filed F0 / model F0 of
the filed cycle (the filed F0 taken as the exact 6.094). The model's own shortfall mostly
cancels and it stays below the exact figure for every cycle that delivers less than the filed
one, but not for one that delivers more (1.32 × on the 150-min hold): it is safe only as the
lower of the two figures. With the issue's parameters (fh 52, jh 1.96, fc 52.3, jc 2.00) the
model/exact ratios are 0.72 / 0.69 / 0.65 / 0.62 / 0.62 / 0.34 / 0.68 / 0.94.

What the figures say:

- the bound holds everywhere (model/exact <= 1.02 is the requirement of issue 12): over the
  table, over parameter readings jh 1.85-2.04, fh and fc 52-53 min, jc 1.95-2.15 (largest
  ratio 0.78), over cylinders of height/diameter 0.1 to 5 with their own measured parameters
  (largest 0.98, the flattest can on a 150-min hold) and over random hold profiles;
- it is conservative: about 30 % of a conduction can's filed F0 is not credited, most of it in
  cooling, because the two-stage fall response (the fastest smooth start a line of intercept
  j allows) starts to cool the cold spot at once, where the centre of the can keeps its
  temperature for several minutes: 10 min after a step the exact series has done 3.3 % of the
  change, the fall response 13.1 %. A 12-min short hold is credited 60 % of its exact F0;
- for the heating phase alone the model is slightly ahead of the exact centre (+5.3 % of the
  heating-phase F0 of the filed cycle): jh read at Ball's corrected zero from a 10-min ramp is
  below the series' own j (1.92 against 2.04), so the rise response runs up to 0.69 % of the
  change ahead of the series (at 42 min). The falls more than pay for it in every case tested:
  the model bounds F0, not the temperature at every instant of heating;
- the two-phase model it replaces (Ball's lag form with fc, jc after steam off: a dead time)
  gave 1.61 × the exact F0 on the filed cycle and 1.95 × on the 12-min short hold with these
  parameters.

Sign-split superposition (every rise with the slow response, every fall with the fast one) is
also a lower bound, but each rise-fall pair of recorder noise subtracts: on the filed cycle
with 0.1 °C white noise on a 3-s record it credited 0.24 × the exact F0 (0.03 × at 0.3 °C),
where the envelope used here credits 0.67 × (0.62 ×); figures from a scratch comparison, not
tested here.
"""

from __future__ import annotations

from functools import partial

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from deviation.physics.heating.conduction import (
    cylinder_centre_unaccomplished,
    diffusivity_from_fh_cylinder,
    theoretical_centre_jh_cylinder,
)
from deviation.physics.heating.heating_curve import (
    bounding_kernels,
    falling_unaccomplished,
    rising_unaccomplished,
    step_unaccomplished,
)
from deviation.physics.heating.superposition import superpose
from deviation.physics.lethality import general_method

RADIUS_M, HEIGHT_M, FH_MIN = 0.087 / 2.0, 0.115, 52.0
TR_C, TW_C, IT_C = 121.1, 20.0, 40.0
COME_UP_MIN, HOLD_MIN = 10.0, 70.0
COOLING_MIN = 100.0  # after steam off: the cold spot is below 70 °C long before
DT_MIN = 0.05
TREF_C, Z_C = 121.1, 10.0
# allowed excess of the model over the exact F0 (issue 12)
TOLERANCE = 1.02


def _exact_kernel(radius_m=RADIUS_M, height_m=HEIGHT_M, fh_min=FH_MIN):
    alpha = diffusivity_from_fh_cylinder(fh_min, radius_m, height_m)
    return partial(cylinder_centre_unaccomplished, diffusivity_m2_s=alpha, radius_m=radius_m,
                   height_m=height_m)


EXACT = _exact_kernel()


def retort_cycle(hold_min=HOLD_MIN, *, initial_C=IT_C, steam_off_min=None, drop=None,
                 dt_min=DT_MIN):
    """Come-up ramp from IT, hold at TR, a step to the cooling water at steam off.

    ``drop``: (start [min], depth [°C], length [min]) of a retort temperature drop.
    """
    off = COME_UP_MIN + hold_min if steam_off_min is None else steam_off_min
    t = np.arange(round((off + COOLING_MIN) / dt_min) + 1) * dt_min
    retort = np.where(t <= COME_UP_MIN, initial_C + (TR_C - initial_C) * t / COME_UP_MIN, TR_C)
    if drop is not None:
        start, depth, length = drop
        retort = np.where((t > start + 1e-9) & (t <= start + length + 1e-9), TR_C - depth, retort)
    retort = np.where(t > off + 1e-9, TW_C, retort)
    return t, retort, off


def f0(t, cold):
    return general_method(t, cold, TREF_C, Z_C)[0]


def _line(x, y):
    slope, intercept = np.polyfit(x, y, 1)
    return slope, intercept


def ball_parameters(kernel=EXACT):
    """fh, jh, fc, jc read from the exact heat penetration test (module docstring)."""
    t, retort, off = retort_cycle()
    cold = superpose(t, retort, IT_C, kernel)
    every = round(1.0 / DT_MIN)
    tr, cr = t[::every], cold[::every]
    heat = (tr >= 50.0 - 1e-9) & (tr <= off + 1e-9)
    slope, icpt = _line(tr[heat], np.log10(TR_C - cr[heat]))
    fh = -1.0 / slope
    jh = 10.0 ** (icpt + slope * 0.58 * COME_UP_MIN) / (TR_C - IT_C)
    cool = (tr >= off + 40.0 - 1e-9) & (tr <= off + 100.0 + 1e-9)
    slope, icpt = _line(tr[cool], np.log10(cr[cool] - TW_C))
    fc = -1.0 / slope
    start_C = float(np.interp(off, tr, cr))
    jc = 10.0 ** (icpt + slope * off) / (start_C - TW_C)
    return fh, jh, fc, jc


MEASURED = ball_parameters()
ISSUE_12 = (52.0, 1.96, 52.3, 2.00)  # fh from the filing, jh, fc, jc as quoted in issue 12

SCENARIOS = {
    "filed cycle": {},
    "hold 4 min short": {"hold_min": HOLD_MIN - 4.0},
    "hold 8 min short": {"hold_min": HOLD_MIN - 8.0},
    "hold 12 min short": {"hold_min": HOLD_MIN - 12.0},
    "drop 6 C for 10 min mid-hold": {"drop": (COME_UP_MIN + HOLD_MIN / 2.0, 6.0, 10.0)},
    "steam off mid-hold": {"steam_off_min": COME_UP_MIN + HOLD_MIN / 2.0},
    "filed cycle at IT 20 C": {"initial_C": 20.0},
    "hold 150 min": {"hold_min": 150.0},
}
# exact F0 [min] (Carslaw & Jaeger series + Duhamel + General Method), and the lowest
# model/exact ratio accepted (the measured ratio of the module table, rounded down by 0.02):
# the model must not become far more conservative unnoticed
TABLE = {
    "filed cycle": (6.094, 0.68),
    "hold 4 min short": (4.577, 0.65),
    "hold 8 min short": (3.318, 0.61),
    "hold 12 min short": (2.307, 0.58),
    "drop 6 C for 10 min mid-hold": (4.700, 0.58),
    "steam off mid-hold": (0.0868, 0.32),
    "filed cycle at IT 20 C": (4.236, 0.64),
    "hold 150 min": (70.26, 0.91),
}


def _f0_pair(params, scenario, kernel=EXACT):
    kw = dict(SCENARIOS[scenario])
    initial_C = kw.get("initial_C", IT_C)
    t, retort, _ = retort_cycle(**kw)
    exact = f0(t, superpose(t, retort, initial_C, kernel))
    rise, fall = bounding_kernels(*params)
    model = f0(t, superpose(t, retort, initial_C, rise, falling_unaccomplished=fall))
    return exact, model


def test_measured_ball_parameters():
    # Ball 1923 semi-log readings of the exact series; the series' own first term has
    # f = 52.0 min and j = 2.040 (Carslaw & Jaeger: 1.602 × 1.273)
    fh, jh, fc, jc = MEASURED
    assert (fh, jh, fc, jc) == pytest.approx((52.53, 1.921, 52.35, 2.053), abs=0.01)
    assert theoretical_centre_jh_cylinder() == pytest.approx(2.040, abs=1e-3)


@pytest.mark.parametrize("scenario", list(SCENARIOS))
def test_model_f0_never_above_exact_series_measured_parameters(scenario):
    exact, model = _f0_pair(MEASURED, scenario)
    exact_ref, floor = TABLE[scenario]
    assert exact == pytest.approx(exact_ref, rel=2e-3)  # Carslaw & Jaeger series, General Method
    assert model <= TOLERANCE * exact
    assert model >= floor * exact


@pytest.mark.parametrize("scenario", list(SCENARIOS))
def test_model_f0_never_above_exact_series_issue_parameters(scenario):
    exact, model = _f0_pair(ISSUE_12, scenario)
    assert model <= TOLERANCE * exact
    assert model >= (TABLE[scenario][1] - 0.05) * exact


def test_relative_evaluation_stays_below_exact_for_cycles_short_of_the_filed_one():
    # model F × filed F / model's filed F (issue 12 item 3), filed F = the exact filed F0. Only
    # for cycles that deliver less than the filed one: on a 150-min hold it gives 1.32 × the
    # exact F0 (the model's shortfall is smaller there than on the filed cycle)
    exact_filed, model_filed = _f0_pair(MEASURED, "filed cycle")
    for scenario in SCENARIOS:
        exact, model = _f0_pair(MEASURED, scenario)
        relative = model * exact_filed / model_filed
        if exact <= exact_filed:
            assert relative <= TOLERANCE * exact, scenario
        else:
            assert relative > exact, scenario  # documented: not a bound there


def test_old_two_phase_model_over_credits():
    # the formulation this model replaces: Ball's lag form for heating, and for changes after
    # steam off the lag form with fc, jc (a dead time)
    fh, jh, fc, jc = MEASURED
    t, retort, off = retort_cycle()
    exact = f0(t, superpose(t, retort, IT_C, EXACT))
    old = f0(t, superpose(t, retort, IT_C, partial(step_unaccomplished, fh_min=fh, jh=jh),
                          cooling_unaccomplished=partial(step_unaccomplished, fh_min=fc, jh=jc),
                          cooling_start_min=off))
    assert old > 1.15 * exact


# readings of Ball's parameters a process authority could make of the same can (other line
# windows, other tests): jh 1.85-2.04, fh 52-53 min, fc 52-53 min, jc 1.95-2.15
@pytest.mark.parametrize("fh", [52.0, 53.0])
@pytest.mark.parametrize("jh", [1.85, 1.92, 2.04])
@pytest.mark.parametrize("fc, jc", [(52.0, 2.15), (53.0, 1.95)])
def test_bound_holds_over_parameter_readings(fh, jh, fc, jc):
    for scenario in ("filed cycle", "hold 12 min short", "drop 6 C for 10 min mid-hold",
                     "steam off mid-hold"):
        exact, model = _f0_pair((fh, jh, fc, jc), scenario)
        assert model <= TOLERANCE * exact, scenario


@pytest.mark.parametrize("height_over_diameter", [0.1, 0.2, 0.5, 1.0, 2.0, 5.0])
def test_bound_holds_for_other_can_shapes(height_over_diameter):
    # same fh (52 min), flat to tall cans; Ball's parameters read as above from each
    kernel = _exact_kernel(height_m=2.0 * RADIUS_M * height_over_diameter)
    params = ball_parameters(kernel)
    for scenario in ("filed cycle", "hold 12 min short", "drop 6 C for 10 min mid-hold",
                     "steam off mid-hold", "hold 150 min"):
        exact, model = _f0_pair(params, scenario, kernel)
        assert model <= TOLERANCE * exact, scenario


def test_fall_response_lies_below_exact_series():
    # the fast side of the bracket (the one the bound rests on, Carslaw & Jaeger series)
    t = np.linspace(0.0, 400.0, 8001)
    s_exact = EXACT(t)
    fh, jh, fc, jc = MEASURED
    _, fall = bounding_kernels(fh, jh, fc, jc)
    early = t <= 150.0
    assert np.all(fall(t[early]) <= s_exact[early])
    # the measured fc (52.35 min) is above the series' f (52.00): past about 200 min, where
    # S < 3e-4, the fall response passes the series by less than 1e-6 (1e-4 °C for a 100 °C fall)
    assert np.max(fall(t) - s_exact) < 1e-6
    # with the series' own first term both sides bracket it
    j = theoretical_centre_jh_cylinder()
    assert np.all(falling_unaccomplished(t, FH_MIN, j) <= s_exact + 1e-9)
    assert np.all(rising_unaccomplished(t, FH_MIN, j) >= s_exact - 1e-9)


def test_rise_response_with_measured_jh_leads_the_series_by_little():
    # jh read at Ball's corrected zero is below the series' j: the rise response is ahead of
    # the exact centre by at most 0.8 % of the change (module docstring); the F0 table holds
    t = np.linspace(0.0, 400.0, 8001)
    fh, jh, _, _ = MEASURED
    lead = EXACT(t) - rising_unaccomplished(t, fh, jh)
    assert 0.0 < lead.max() < 0.008


@settings(max_examples=25, deadline=None)
@given(
    knots=st.lists(st.floats(100.0, 125.0), min_size=3, max_size=8),
    hold_min=st.floats(20.0, 90.0),
)
def test_bound_holds_for_random_hold_profiles(knots, hold_min):
    # any hold profile between 100 and 125 °C after the filed come-up, then cooling: the model
    # F0 never exceeds the exact one (Carslaw & Jaeger series)
    dt = 0.1
    off = COME_UP_MIN + hold_min
    t = np.arange(round((off + 60.0) / dt) + 1) * dt
    hold = np.interp(t, np.linspace(COME_UP_MIN, off, len(knots)), knots)
    retort = np.where(t <= COME_UP_MIN, IT_C + (knots[0] - IT_C) * t / COME_UP_MIN, hold)
    retort = np.where(t > off + 1e-9, TW_C, retort)
    exact = f0(t, superpose(t, retort, IT_C, EXACT))
    rise, fall = bounding_kernels(*MEASURED)
    model = f0(t, superpose(t, retort, IT_C, rise, falling_unaccomplished=fall))
    assert model <= TOLERANCE * exact + 1e-12


def test_recorder_noise_costs_little():
    # 0.1 °C white noise on a 3-s record during the hold: still a bound, still credited
    rng = np.random.default_rng(12)
    t, retort, off = retort_cycle()
    noisy = retort + np.where((t > COME_UP_MIN) & (t <= off), rng.normal(0.0, 0.1, t.size), 0.0)
    exact = f0(t, superpose(t, noisy, IT_C, EXACT))
    rise, fall = bounding_kernels(*MEASURED)
    model = f0(t, superpose(t, noisy, IT_C, rise, falling_unaccomplished=fall))
    assert 0.62 * exact <= model <= TOLERANCE * exact


def table():
    """The module docstring's table, recomputed (``python -m`` this file to print it)."""
    rows = []
    exact_filed, model_filed = _f0_pair(MEASURED, "filed cycle")
    for scenario in SCENARIOS:
        exact, model = _f0_pair(MEASURED, scenario)
        rows.append((scenario, exact, model, model / exact,
                     model * exact_filed / model_filed / exact))
    return rows


if __name__ == "__main__":
    fh, jh, fc, jc = MEASURED
    print(f"measured fh {fh:.3f} jh {jh:.4f} fc {fc:.3f} jc {jc:.4f}")
    for name, exact, model, ratio, relative in table():
        print(f"{name:32s} exact {exact:.4f} model {model:.4f} ratio {ratio:.3f} "
              f"relative {relative:.3f}")
    for scenario in SCENARIOS:
        e, m = _f0_pair(ISSUE_12, scenario)
        print(f"issue parameters {scenario:32s} {m / e:.3f}")
