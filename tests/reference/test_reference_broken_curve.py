"""Reference: broken heating curves (issue 15) never credit more F0 than the product received.

No published worked example of a broken heating curve is used here: the figures are **derived**
from an exact solution, built as follows, and are marked as such.

The product (derived reference): the centre of a finite cylinder 87 mm × 115 mm, surface at the
retort temperature, whose thermal diffusivity falls at once, everywhere, from the value of
fh 20 min to that of fh 60 min when its centre first reaches 105 °C (a product that thickens,
idealised). For a perfect surface the eigenfunctions of the Dirichlet problem do not depend on
the diffusivity, so a uniform change of diffusivity rescales time in every mode alike: the
product is the thin can on a clock that runs fh1/fh2 as fast after the break, and its centre
is Duhamel's integral of the exact Bessel × cosine series (Carslaw & Jaeger, *Conduction of
Heat in Solids*, 2nd ed., 1959; ``cylinder_centre_unaccomplished``) on that clock. Checked
against an independent mode-by-mode integration (100 × 100 modes, ``w' = -α(t) μ w + T_R'``
exact over each step of the piecewise-linear record) to 1e-3 °C and 3e-4 of F0. fh from the
diffusivity by ``fh = ln10 / (α μ1)`` (Olson & Jackson 1942).

Its heat penetration test: the filed cycle (IT 40 °C; 10-min come-up ramp to 121.1 °C; 45-min
hold; cooling water 20 °C), readings every minute rounded to 0.1 °C (a logger's resolution),
read by ``semilog_broken_fit`` and ``semilog_cooling_fit`` as a process authority reads the
semi-log plot (Ball 1923; Stumbo 1973). Measured::

    fh 21.01 min, jh 1.753, fh2 60.47 min, x_bh 19.97 min (from the corrected zero, 5.8 min),
    break temperature 105.17 °C (the product's: 105), fc 60.69 min, jc 2.023

The models (F0 by the General Method, trapezoidal, Tref 121.1 °C, z 10 °C, grid 0.1 min):

- "record": ``broken_curve_cold_spot`` with those parameters, the break temperature
  ``break_temperature(fh, jh, x_bh, 40, 121.1)``;
- "pair": ``bounding_kernels(..., fh2_min, break_min)`` superposed over the whole record, the
  time-invariant reading of the break.

Table (recompute with ``python tests/reference/test_reference_broken_curve.py``)::

    scenario                          exact F0   record F0  record/exact   pair/exact
    filed cycle (45-min hold)           8.542      5.075       0.594         0.557
    hold 4 min short                    6.804      3.831       0.563         0.520
    hold 8 min short                    5.288      2.795       0.529         0.479
    hold 12 min short                   3.995      1.963       0.491         0.434
    drop 6 °C × 10 min after break      7.152      3.847       0.538         0.407
    drop 20 °C × 5 min after break      6.645      3.049       0.459         0.337
    drop 6 °C × 10 min before break     7.137      3.543       0.496         0.579
    IT 20 °C                            7.659      3.858       0.504         0.410
    IT 70 °C                           10.367      7.151       0.690         0.898
    come-up stalled 40 min at 100 °C   12.046      6.493       0.539         1.095
    come-up stalled 20 min at 105 °C   12.391      6.236       0.503         0.839
    come-up stalled 30 min at 110 °C   11.682      6.168       0.528         1.263
    come-up stalled 15 min at 115 °C   14.010      8.695       0.621         0.772
    steam off 5 min after the break     1.376      0.496       0.361         0.256

What the figures say:

- the time-invariant pair is **not** safe alone: a rise of the retort after the product has
  thickened (the end of a stalled come-up) is answered as by the thin product, and the pair
  credits up to 1.26 × the exact F0; it also runs ahead in the filed cycle's heating phase
  (4.18 against 4.03 exact, +3.6 %: the second half of the come-up ramp breaks 19.97 min after
  each increment, later than the product);
- the record model stays below the exact F0 everywhere (largest ratio 0.69 here, 0.80 over
  the seven products of ``PRODUCTS``, fh 15 to 30 min, fh2/fh 2 to 4, break temperatures 80 to
  112 °C, where the pair alone reached 1.18; and over random holds, drops, stalls and initial
  temperatures);
- most of what it does not credit is cooling (filed cycle: heating phase 3.44 against 4.03
  exact, cooling 1.63 against 4.51): the fast two-stage fall response starts to cool the cold
  spot at once where the centre of a conduction can keeps its temperature for minutes, the
  same choice as the single-line model (``test_reference_heating_curve_bound.py``).

Ball's formula (``ball_formula`` with ``fh2_min``, ``break_time_min``) is checked against the
General Method on the model's own cold spot for a step retort (derived: both integrate the
same two straight lines, the formula in closed form with the exponential integral).
"""

from __future__ import annotations

import functools
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.special import j1, jn_zeros

from deviation.physics.ball_formula import ball_formula
from deviation.physics.calibration.semilog import semilog_broken_fit, semilog_cooling_fit
from deviation.physics.heating.conduction import (
    cylinder_centre_unaccomplished,
    diffusivity_from_fh_cylinder,
)
from deviation.physics.heating.heating_curve import (
    bounding_kernels,
    break_temperature,
    broken_curve_cold_spot,
    rising_unaccomplished_broken,
)
from deviation.physics.heating.superposition import superpose
from deviation.physics.lethality import general_method

RADIUS_M, HEIGHT_M = 0.087 / 2.0, 0.115
TR_C, TW_C, IT_C = 121.1, 20.0, 40.0
COME_UP_MIN, HOLD_MIN, COOLING_MIN = 10.0, 45.0, 100.0
FH1_MIN, FH2_MIN, GEL_C = 20.0, 60.0, 105.0
DT_MIN = 0.1
TREF_C, Z_C = 121.1, 10.0
TOLERANCE = 1.02  # allowed excess of a model over the exact F0 (issue 12)


# --------------------------------------------------------------------------------------------
# the exact product


def thickening_can(t, retort, initial_C, fh1=FH1_MIN, fh2=FH2_MIN, gel_C=GEL_C):
    """Exact centre temperature [°C] of the can whose diffusivity falls from fh1's to fh2's
    when its centre first reaches ``gel_C`` (on the grid); and the time of the break [min].

    A uniform change of diffusivity rescales time in every mode alike, so the product is the
    thin can's linear system on the clock ``θ = t`` before the break and
    ``θ = t_b + (t - t_b)·fh1/fh2`` after it: Duhamel's theorem with the thin can's exact series
    (``cylinder_centre_unaccomplished``, Carslaw & Jaeger) on a uniform θ grid of step
    ``Δt·fh1/fh2`` (``fh2/fh1`` an integer: the record's samples fall on it, the piecewise-linear
    record is kept exactly).
    """
    ratio = round(fh2 / fh1)
    assert abs(fh2 / fh1 - ratio) < 1e-12, "fh2/fh1 must be an integer here"
    kernel = functools.partial(cylinder_centre_unaccomplished,
                               diffusivity_m2_s=diffusivity_from_fh_cylinder(fh1, RADIUS_M, HEIGHT_M),
                               radius_m=RADIUS_M, height_m=HEIGHT_M)
    thin = superpose(t, retort, initial_C, kernel)
    above = np.flatnonzero(thin >= gel_C)
    if above.size == 0:
        return thin, None
    t_b = float(t[above[0]])
    theta_of_t = np.where(t <= t_b, t, t_b + (t - t_b) / ratio)
    step = (t[1] - t[0]) / ratio
    theta = np.arange(round(theta_of_t[-1] / step) + 1) * step
    cold = superpose(theta, np.interp(theta, theta_of_t, retort), initial_C, kernel)
    return cold[np.rint(theta_of_t / step).astype(int)], t_b


def _modes(n_radial, n_axial):
    beta = jn_zeros(0, n_radial)
    k = np.arange(1, n_axial + 1)
    gamma = (2 * k - 1) * math.pi
    coefficient = ((2.0 / (beta * j1(beta)))[:, None]
                   * (4.0 * (-1.0) ** (k + 1) / gamma)[None, :]).ravel()
    rate = (((beta / RADIUS_M) ** 2)[:, None] + ((gamma / HEIGHT_M) ** 2)[None, :]).ravel()
    return coefficient, rate  # rate × diffusivity = decay rate [1/s]


def thickening_can_modes(t, retort, initial_C, fh1=FH1_MIN, fh2=FH2_MIN, gel_C=GEL_C, n=100):
    """The same product integrated mode by mode (independent of the package's series): the
    amplitudes ``w`` of ``T_R - T`` obey ``w' = -α(t) μ w + T_R'``, exact over each linear step;
    ``n × n`` Bessel × cosine modes (Carslaw & Jaeger); α from fh by ``fh = ln10/(α μ1)``."""
    coefficient, rate_per_alpha = _modes(n, n)

    def rate(fh):
        return math.log(10.0) / (fh * rate_per_alpha.min()) * rate_per_alpha  # per minute

    w = np.full(coefficient.size, retort[0] - initial_C)
    out = np.empty(t.size)
    out[0] = retort[0] - coefficient @ w
    k, broke = rate(fh1), None
    for i in range(1, t.size):
        h = t[i] - t[i - 1]
        slope = (retort[i] - retort[i - 1]) / h
        w = w * np.exp(-k * h) - slope * np.expm1(-k * h) / k
        out[i] = retort[i] - coefficient @ w
        if broke is None and out[i] >= gel_C:
            broke, k = float(t[i]), rate(fh2)
    return out, broke


def retort_cycle(hold_min=HOLD_MIN, *, initial_C=IT_C, stall=None, drop=None,
                 steam_off_min=None):
    """Come-up ramp from IT, hold, a step to the cooling water at steam off.

    ``stall``: (temperature [°C], length [min]): the ramp ends there, holds, then rises to the
    process temperature in 2 min; ``drop``: (start [min], depth [°C], length [min]).
    """
    top, length = stall if stall else (TR_C, 0.0)
    ramp2 = 2.0 if stall else 0.0
    off = COME_UP_MIN + length + ramp2 + hold_min if steam_off_min is None else steam_off_min
    t = np.arange(round((off + COOLING_MIN) / DT_MIN) + 1) * DT_MIN
    r = np.where(t <= COME_UP_MIN, initial_C + (top - initial_C) * t / COME_UP_MIN, top)
    if stall:
        r = np.where(t > COME_UP_MIN + length,
                     np.minimum(TR_C, top + (TR_C - top) * (t - COME_UP_MIN - length) / ramp2), r)
    if drop:
        start, depth, span = drop
        r = np.where((t > start + 1e-9) & (t <= start + span + 1e-9), np.minimum(r, TR_C - depth), r)
    return t, np.where(t > off + 1e-9, TW_C, r), off


def f0(t, cold):
    return general_method(t, cold, TREF_C, Z_C)[0]


def measured_parameters(fh1=FH1_MIN, fh2=FH2_MIN, gel_C=GEL_C, hold_min=HOLD_MIN):
    """Ball's parameters read from the product's heat penetration test (module docstring)."""
    t, r, _ = retort_cycle(hold_min)
    cold, _ = thickening_can(t, r, IT_C, fh1, fh2, gel_C)
    every = round(1.0 / DT_MIN)
    tr, cr, rr = t[::every], np.round(cold[::every], 1), r[::every]
    heating = semilog_broken_fit(tr, cr, rr, come_up_min=COME_UP_MIN, initial_C=IT_C)
    cooling = semilog_cooling_fit(tr, cr, rr)
    return heating, cooling


HEATING, COOLING = measured_parameters()
PARAMS = {"fh_min": HEATING.fh_min, "jh": HEATING.jh, "fh2_min": HEATING.fh2_min,
          "break_min": HEATING.break_min, "fc_min": COOLING.fc_min, "jc": COOLING.jc}
BREAK_C = break_temperature(HEATING.fh_min, HEATING.jh, HEATING.break_min, IT_C, TR_C)

SCENARIOS = {
    "filed cycle": {},
    "hold 4 min short": {"hold_min": HOLD_MIN - 4.0},
    "hold 8 min short": {"hold_min": HOLD_MIN - 8.0},
    "hold 12 min short": {"hold_min": HOLD_MIN - 12.0},
    "drop 6 C x 10 min after break": {"drop": (35.0, 6.0, 10.0)},
    "drop 20 C x 5 min after break": {"drop": (40.0, 20.0, 5.0)},
    "drop 6 C x 10 min before break": {"drop": (12.0, 6.0, 10.0)},
    "IT 20 C": {"initial_C": 20.0},
    "IT 70 C": {"initial_C": 70.0},
    "stall 40 min at 100 C": {"stall": (100.0, 40.0)},
    "stall 20 min at 105 C": {"stall": (105.0, 20.0)},
    "stall 30 min at 110 C": {"stall": (110.0, 30.0)},
    "stall 15 min at 115 C": {"stall": (115.0, 15.0)},
    "steam off 5 min after break": {"steam_off_min": 31.0},
}
# exact F0 [min] and the lowest record/exact ratio accepted (the measured ratio rounded down by
# 0.03: the model must not become far more conservative unnoticed)
TABLE = {
    "filed cycle": (8.542, 0.56),
    "hold 4 min short": (6.804, 0.53),
    "hold 8 min short": (5.288, 0.49),
    "hold 12 min short": (3.995, 0.46),
    "drop 6 C x 10 min after break": (7.152, 0.50),
    "drop 20 C x 5 min after break": (6.645, 0.42),
    "drop 6 C x 10 min before break": (7.137, 0.46),
    "IT 20 C": (7.659, 0.47),
    "IT 70 C": (10.367, 0.66),
    "stall 40 min at 100 C": (12.046, 0.50),
    "stall 20 min at 105 C": (12.391, 0.47),
    "stall 30 min at 110 C": (11.682, 0.49),
    "stall 15 min at 115 C": (14.010, 0.59),
    "steam off 5 min after break": (1.376, 0.33),
}


def _run(scenario, params=None, break_C=None, product=(FH1_MIN, FH2_MIN, GEL_C)):
    params = PARAMS if params is None else params
    break_C = BREAK_C if break_C is None else break_C
    kw = dict(SCENARIOS[scenario]) if isinstance(scenario, str) else dict(scenario)
    initial = kw.get("initial_C", IT_C)
    t, r, _ = retort_cycle(**kw)
    exact, _ = thickening_can(t, r, initial, *product)
    record = broken_curve_cold_spot(t, r, initial, break_temperature_C=break_C, **params)
    rise, fall = bounding_kernels(params["fh_min"], params["jh"], params["fc_min"],
                                  params["jc"], fh2_min=params["fh2_min"],
                                  break_min=params["break_min"])
    pair = superpose(t, r, initial, rise, falling_unaccomplished=fall)
    return t, r, exact, record, pair


# --------------------------------------------------------------------------------------------
# the reference itself


def test_exact_product_two_ways():
    # the time-warped series against the mode-by-mode integration (100 × 100 modes), away from
    # the first minute after each change of the retort (where 10 000 modes still ring)
    for scenario in ("filed cycle", "stall 30 min at 110 C", "drop 20 C x 5 min after break"):
        t, r, _ = retort_cycle(**SCENARIOS[scenario])
        warped, broke = thickening_can(t, r, IT_C)
        modes, broke_modes = thickening_can_modes(t, r, IT_C)
        assert broke == broke_modes
        settled = np.ones(t.size, dtype=bool)
        for i in np.flatnonzero(np.abs(np.diff(r)) > 1e-9):
            settled[(t > t[i]) & (t <= t[i] + 1.0)] = False
        np.testing.assert_allclose(warped[settled], modes[settled], atol=1e-3)
        assert f0(t, warped) == pytest.approx(f0(t, modes), rel=3e-4)


def test_measured_parameters_of_the_reference_product():
    assert HEATING.broken and not HEATING.break_given
    assert HEATING.fh_min == pytest.approx(21.01, abs=0.01)
    assert HEATING.jh == pytest.approx(1.753, abs=0.001)
    assert HEATING.fh2_min == pytest.approx(60.47, abs=0.01)
    assert HEATING.break_min == pytest.approx(19.97, abs=0.01)
    assert (COOLING.fc_min, COOLING.jc) == pytest.approx((60.69, 2.023), abs=0.01)
    # the product's own figures: fh2 is the thick product's fh; the break at its gel temperature
    assert HEATING.fh2_min == pytest.approx(FH2_MIN, rel=0.01)
    assert BREAK_C == pytest.approx(GEL_C, abs=0.3)
    assert BREAK_C == pytest.approx(HEATING.break_temperature_C, abs=1e-9)
    t, r, _ = retort_cycle()
    _, broke = thickening_can(t, r, IT_C)
    assert HEATING.break_time_min == pytest.approx(broke, abs=0.15)


# --------------------------------------------------------------------------------------------
# the bound


@pytest.mark.parametrize("scenario", list(SCENARIOS))
def test_record_model_bounds_the_exact_f0(scenario):
    t, _, exact, record, _ = _run(scenario)
    exact_F, floor = TABLE[scenario]
    assert f0(t, exact) == pytest.approx(exact_F, abs=5e-4)
    ratio = f0(t, record.cold_spot_C) / f0(t, exact)
    assert ratio <= TOLERANCE, f"{scenario}: record/exact {ratio:.3f}"
    assert ratio >= floor, f"{scenario}: record/exact {ratio:.3f} fell below {floor}"


def test_time_invariant_pair_alone_overcredits_a_stalled_come_up():
    # why the record model exists: the pair answers the rise after the stall as the thin product
    t, _, exact, _, pair = _run("stall 30 min at 110 C")
    assert f0(t, pair) / f0(t, exact) > 1.2
    t, _, exact, _, pair = _run("stall 40 min at 100 C")
    assert f0(t, pair) / f0(t, exact) > 1.05


def test_filed_heating_phase():
    # heating phase of the filed cycle: the pair runs ahead of the product, the record does not
    t, r, exact, record, pair = _run("filed cycle")
    heating = t <= COME_UP_MIN + HOLD_MIN + 1e-9
    ex = f0(t[heating], exact[heating])
    assert ex == pytest.approx(4.032, abs=1e-3)
    assert f0(t[heating], pair[heating]) / ex == pytest.approx(1.036, abs=0.005)
    assert f0(t[heating], record.cold_spot_C[heating]) / ex == pytest.approx(0.854, abs=0.01)
    # the earliest and latest break bracket the product's own
    _, broke = thickening_can(t, r, IT_C)
    assert record.earliest_break_min <= broke <= record.latest_break_min


# products whose heat penetration test shows a first line (an early break, in the lag, shows
# none: semilog_broken_fit then finds one line), with the break found by the fit
PRODUCTS = [(15.0, 45.0, 112.0), (20.0, 40.0, 105.0), (20.0, 80.0, 112.0), (30.0, 60.0, 95.0),
            (30.0, 120.0, 80.0), (30.0, 120.0, 105.0), (30.0, 90.0, 112.0)]
SWEEP = {
    "filed": {}, "short": {"hold_min": HOLD_MIN - 10.0}, "drop": {"drop": (45.0, 10.0, 10.0)},
    "IT 70": {"initial_C": 70.0}, "stall below gel": {"stall": (None, 30.0)},
    "stall above gel": {"stall": (None, 20.0)},
}


@pytest.mark.parametrize("product", PRODUCTS, ids=lambda p: f"fh{p[0]:g}-fh2_{p[1]:g}-gel{p[2]:g}")
def test_record_model_bounds_other_products(product):
    fh1, fh2, gel = product
    heating, cooling = measured_parameters(fh1, fh2, gel, hold_min=40.0 + 0.6 * fh2)
    assert heating.broken, heating.note
    params = {"fh_min": heating.fh_min, "jh": heating.jh, "fh2_min": heating.fh2_min,
              "break_min": heating.break_min, "fc_min": cooling.fc_min, "jc": cooling.jc}
    level = break_temperature(heating.fh_min, heating.jh, heating.break_min, IT_C, TR_C)
    for name, kw in SWEEP.items():
        kw = dict(kw)
        if "stall" in kw:
            kw["stall"] = (min(gel - 5.0, TR_C - 2.0) if name == "stall below gel"
                           else min(gel + 5.0, TR_C - 2.0), kw["stall"][1])
        t, _, exact, record, _ = _run(kw, params, level, product)
        ratio = f0(t, record.cold_spot_C) / f0(t, exact)
        assert ratio <= TOLERANCE, f"{product} {name}: record/exact {ratio:.3f}"


@settings(max_examples=15, deadline=None)
@given(hold=st.floats(20.0, 70.0), initial=st.floats(20.0, 80.0),
       stall_C=st.floats(95.0, 119.0), stall_min=st.floats(0.0, 40.0),
       drop_start=st.floats(12.0, 80.0), drop_C=st.floats(0.0, 25.0), drop_min=st.floats(0.0, 15.0))
def test_record_model_bounds_random_cycles(hold, initial, stall_C, stall_min, drop_start, drop_C,
                                           drop_min):
    kw = {"hold_min": hold, "initial_C": initial, "drop": (drop_start, drop_C, drop_min)}
    if stall_min > 0.5:
        kw["stall"] = (stall_C, stall_min)
    t, _, exact, record, _ = _run(kw)
    exact_F = f0(t, exact)
    assert f0(t, record.cold_spot_C) <= TOLERANCE * exact_F + 1e-6


# --------------------------------------------------------------------------------------------
# Ball's formula, broken form, against the General Method (derived)


@pytest.mark.parametrize("fh, jh, fh2, xbh, process_min", [
    (21.0, 1.75, 60.5, 20.0, 49.2),   # the reference product's filed process (B = 45 + 4.2)
    (20.0, 1.6, 60.0, 25.0, 70.0),
    (12.0, 1.2, 30.0, 10.0, 40.0),
    (30.0, 2.0, 45.0, 40.0, 90.0),
    (20.0, 1.6, 60.0, 25.0, 20.0),    # heating ends before the break
])
def test_ball_formula_broken_form_is_the_general_method_on_the_broken_curve(fh, jh, fh2, xbh,
                                                                          process_min):
    # a step retort at the corrected zero held B minutes: the heating part of Ball's U is the
    # integral of the lethal rate of the two straight lines (closed form with E1); the General
    # Method on the model's cold spot integrates the same curve numerically. They differ only by
    # the lag cap (cold spot at IT before the first line reaches it: ~1e-8 of F) and the
    # trapezoidal rule (grid 0.01 min). The model's cold spot for one step is its rise response
    # (the pair reproduces it exactly: checked on a 0.1-min grid, where superpose's ages are not
    # thinned)
    coarse = np.arange(0.0, process_min + 0.05, 0.1)
    rise, fall = bounding_kernels(fh, jh, fh2_min=fh2, break_min=xbh)
    np.testing.assert_allclose(
        superpose(coarse, np.full(coarse.size, TR_C), IT_C, rise, falling_unaccomplished=fall),
        TR_C - (TR_C - IT_C) * rise(coarse), atol=1e-9)
    dt = 0.01
    t = np.arange(0.0, process_min + dt / 2, dt)
    cold = TR_C - (TR_C - IT_C) * rising_unaccomplished_broken(t, fh, jh, fh2, xbh)
    ball = ball_formula(fh, jh, IT_C, TR_C, process_min, 0.0, fh2_min=fh2, break_time_min=xbh)
    ball_heating_F = ball.U_heating_min * 10.0 ** ((TR_C - TREF_C) / Z_C)
    assert f0(t, cold) == pytest.approx(ball_heating_F, rel=2e-4)
    if process_min > xbh:
        assert ball.g_break_C == pytest.approx(TR_C - break_temperature(fh, jh, xbh, IT_C, TR_C),
                                               rel=1e-12)


def test_record_model_on_the_filed_step_against_ball():
    # the record model's heating for the same step: its break moves to the earliest possible
    # one (0.4 min earlier here), so it credits a little less than Ball's two lines (derived)
    fh, jh, fh2, xbh, process_min = HEATING.fh_min, HEATING.jh, HEATING.fh2_min, HEATING.break_min, 49.2
    t = np.arange(0.0, process_min + DT_MIN / 2, DT_MIN)
    retort = np.full(t.size, TR_C)
    res = broken_curve_cold_spot(t, retort, IT_C, break_temperature_C=BREAK_C, **PARAMS)
    ball = ball_formula(fh, jh, IT_C, TR_C, process_min, 0.0, fh2_min=fh2, break_time_min=xbh)
    ratio = f0(t, res.cold_spot_C) / (ball.U_heating_min * 10.0 ** ((TR_C - TREF_C) / Z_C))
    assert 0.95 < ratio <= 1.0
    assert xbh - 0.5 < res.earliest_break_min <= xbh


# --------------------------------------------------------------------------------------------


def main() -> None:  # pragma: no cover - prints the module docstring's table
    print(f"measured: fh {HEATING.fh_min:.2f} jh {HEATING.jh:.3f} fh2 {HEATING.fh2_min:.2f} "
          f"x_bh {HEATING.break_min:.2f} break {BREAK_C:.2f} C fc {COOLING.fc_min:.2f} "
          f"jc {COOLING.jc:.3f}")
    for name in SCENARIOS:
        t, _, exact, record, pair = _run(name)
        ex = f0(t, exact)
        rec = f0(t, record.cold_spot_C)
        print(f"{name:34s} {ex:8.3f} {rec:8.3f} {rec / ex:8.3f} {f0(t, pair) / ex:8.3f}")


if __name__ == "__main__":  # pragma: no cover
    main()
