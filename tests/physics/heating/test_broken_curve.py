"""Unit tests for the broken heating curve in deviation.physics.heating.heating_curve.

Ball's broken heating curve (Ball 1923; Stumbo 1973): fh to the break x_bh (from the corrected
zero), fh2 after it. The figures here are derived from the definitions, not from a published
example; the comparison with an exact product is in
``tests/reference/test_reference_broken_curve.py``.
"""

from __future__ import annotations

import functools
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from deviation.physics.heating.conduction import ModelInputError
from deviation.physics.heating.heating_curve import (
    THICKENED_LAG_FACTOR,
    _lower_resample,
    bounding_kernels,
    break_temperature,
    broken_curve_cold_spot,
    falling_unaccomplished,
    rising_unaccomplished,
    rising_unaccomplished_broken,
)
from deviation.physics.heating.superposition import superpose

FH, JH, FH2, XBH = 21.3, 1.70, 60.2, 19.9
TR_C, IT_C = 121.1, 40.0


def _line(t, j, f):
    return j * 10.0 ** (-np.asarray(t) / f)


def _capped_line(t, j, f):
    """Ball's straight line as a step response, capped at 1 (jumps at 0 when j < 1)."""
    t = np.asarray(t, dtype=float)
    return np.where(t > 0.0, np.minimum(1.0, _line(np.maximum(t, 0.0), j, f)), 1.0)


# --------------------------------------------------------------------------------------------
# the step response


def test_broken_response_is_the_two_lines():
    t = np.array([0.0, 2.0, 10.0, XBH, 30.0, 80.0, 200.0])
    s = rising_unaccomplished_broken(t, FH, JH, FH2, XBH)
    lag = FH * math.log10(JH)
    first = t <= XBH
    np.testing.assert_allclose(s[first], np.minimum(1.0, _line(t[first], JH, FH)), rtol=1e-14)
    at_break = JH * 10.0 ** (-XBH / FH)
    np.testing.assert_allclose(s[~first], at_break * 10.0 ** (-(t[~first] - XBH) / FH2),
                               rtol=1e-13)
    assert s[0] == 1.0 and s[1] == 1.0 and 2.0 < lag
    # one log cycle per fh before the break and per fh2 after it (the definitions)
    a, b = rising_unaccomplished_broken(np.array([8.0, 8.0 + 10.0]), FH, JH, FH2, XBH)
    assert math.log10(a / b) == pytest.approx(10.0 / FH, rel=1e-12)
    a, b = rising_unaccomplished_broken(np.array([50.0, 50.0 + FH2]), FH, JH, FH2, XBH)
    assert math.log10(a / b) == pytest.approx(1.0, rel=1e-12)


def test_broken_response_is_continuous_at_the_break():
    eps = 1e-9
    s = rising_unaccomplished_broken(np.array([XBH - eps, XBH, XBH + eps]), FH, JH, FH2, XBH)
    assert np.ptp(s) < 1e-10


@settings(max_examples=80, deadline=None)
@given(fh=st.floats(2.0, 100.0), ratio=st.floats(1.0, 6.0), j=st.floats(1.0, 2.5),
       xbh=st.floats(0.0, 80.0), times=st.lists(st.floats(-5.0, 600.0), min_size=2, max_size=40))
def test_never_faster_than_either_line(fh, ratio, j, xbh, times):
    # fh2 >= fh: the response is the upper envelope of the first line continued and the
    # second line extended back to the step (intercept j 10^(-x_bh (1/fh - 1/fh2))), capped
    t = np.sort(np.asarray(times))
    fh2 = fh * ratio
    s = rising_unaccomplished_broken(t, fh, j, fh2, xbh)
    after = np.maximum(t, 0.0)
    first = np.minimum(1.0, _line(after, j, fh))
    j2 = j * 10.0 ** (-xbh * (1.0 / fh - 1.0 / fh2))
    second = np.minimum(1.0, _line(after, j2, fh2))
    assert np.all(s >= first * (1 - 1e-12)) and np.all(s >= second * (1 - 1e-12))
    np.testing.assert_allclose(s, np.maximum(first, second), rtol=1e-12)
    assert np.all((s >= 0.0) & (s <= 1.0))
    assert np.all(np.diff(s) <= 1e-15)


def test_faster_second_line_is_not_credited():
    # fh2 < fh: the first line continues (the product's faster heating after the break is
    # not credited to rises)
    t = np.linspace(-1.0, 300.0, 602)
    np.testing.assert_allclose(rising_unaccomplished_broken(t, 40.0, 1.5, 20.0, 10.0),
                               rising_unaccomplished(t, 40.0, 1.5), rtol=1e-14)


@pytest.mark.parametrize("jh", [0.6, 1.0])
def test_no_jump_at_the_step_for_small_jh(jh):
    s = rising_unaccomplished_broken(np.array([0.0, 1e-9, 5.0]), FH, jh, FH2, XBH)
    assert s[0] == 1.0 and s[1] == pytest.approx(1.0, abs=1e-9)
    assert s[2] == pytest.approx(10.0 ** (-5.0 / FH), rel=1e-12)


def test_break_at_zero_is_the_second_line_from_the_start():
    t = np.linspace(0.0, 200.0, 201)
    np.testing.assert_allclose(rising_unaccomplished_broken(t, FH, JH, FH2, 0.0),
                               rising_unaccomplished(t, FH2, JH), rtol=1e-13)


@pytest.mark.parametrize("args", [(0.0, 1.5, 60.0, 10.0), (20.0, 0.0, 60.0, 10.0),
                                  (20.0, 1.5, -1.0, 10.0), (20.0, 1.5, 60.0, -0.1),
                                  (20.0, 1.5, 60.0, float("nan")), (20.0, 1.5, float("inf"), 1.0)])
def test_bad_parameters(args):
    with pytest.raises(ModelInputError):
        rising_unaccomplished_broken([1.0], *args)


# --------------------------------------------------------------------------------------------
# the pair


def test_bounding_kernels_broken_pair():
    t = np.linspace(0.0, 300.0, 301)
    rise, fall = bounding_kernels(FH, JH, 63.0, 2.0, fh2_min=FH2, break_min=XBH)
    np.testing.assert_array_equal(rise(t), rising_unaccomplished_broken(t, FH, JH, FH2, XBH))
    # falls: the fastest line, the smaller lag factor
    np.testing.assert_array_equal(fall(t), falling_unaccomplished(t, FH, JH))
    _, fall = bounding_kernels(50.0, 1.5, 70.0, 1.2, fh2_min=30.0, break_min=5.0)
    np.testing.assert_array_equal(fall(t), falling_unaccomplished(t, 30.0, 1.2))
    _, fall = bounding_kernels(50.0, 1.5, fh2_min=30.0, break_min=5.0)
    np.testing.assert_array_equal(fall(t), falling_unaccomplished(t, 30.0, 1.0))
    # without the broken-curve arguments: unchanged
    rise, fall = bounding_kernels(FH, JH, 63.0, 2.0)
    np.testing.assert_array_equal(rise(t), rising_unaccomplished(t, FH, JH))


@pytest.mark.parametrize("kw", [{"fh2_min": 60.0}, {"break_min": 10.0},
                                {"fh2_min": 0.0, "break_min": 10.0},
                                {"fh2_min": 60.0, "break_min": -1.0}])
def test_bounding_kernels_broken_arguments(kw):
    with pytest.raises(ModelInputError):
        bounding_kernels(FH, JH, **kw)


def test_single_step_reproduces_the_broken_line_exactly():
    # a retort that is one step at the corrected zero: the model is the filed broken curve
    t = np.arange(0.0, 240.0 + 1e-9, 0.1)
    retort = np.full(t.size, TR_C)
    rise, fall = bounding_kernels(FH, JH, 60.0, 2.0, fh2_min=FH2, break_min=XBH)
    cold = superpose(t, retort, IT_C, rise, falling_unaccomplished=fall)
    exact = TR_C - (TR_C - IT_C) * rising_unaccomplished_broken(t, FH, JH, FH2, XBH)
    np.testing.assert_allclose(cold, exact, rtol=0.0, atol=1e-10)


def _hold_profile(t, hold, drop_start=None, drop_C=0.0, drop_len=0.0, come_up=10.0):
    r = np.where(t < come_up, IT_C + (TR_C - IT_C) * t / come_up, TR_C)
    if drop_start is not None:
        r = np.where((t > drop_start) & (t <= drop_start + drop_len), TR_C - drop_C, r)
    return np.where(t > come_up + hold, 20.0, r)


@settings(max_examples=25, deadline=None)
@given(hold=st.floats(10.0, 90.0), drop_start=st.floats(12.0, 90.0), drop_C=st.floats(0.0, 20.0),
       drop_len=st.floats(0.0, 20.0))
def test_below_the_straight_line_continuations(hold, drop_start, drop_C, drop_len):
    # short holds and drops: with the same fall response the broken model's cold spot is never
    # above the model with the first line continued, nor the one with the second line
    # extended back to the step (the envelope is monotone in the slow side of the bracket; the
    # second line, which jumps at the step when its intercept is below 1, is taken no faster
    # than the fall response, so that both models share the fast side)
    t = np.arange(0.0, 200.0 + 1e-9, 0.2)
    r = _hold_profile(t, hold, drop_start, drop_C, drop_len)
    rise, fall = bounding_kernels(FH, JH, 60.0, 2.0, fh2_min=FH2, break_min=XBH)
    broken = superpose(t, r, IT_C, rise, falling_unaccomplished=fall)
    first = superpose(t, r, IT_C, functools.partial(rising_unaccomplished, fh_min=FH, jh=JH),
                      falling_unaccomplished=fall)
    j2 = JH * 10.0 ** (-XBH * (1.0 / FH - 1.0 / FH2))  # 0.42 here: the line itself, capped
    second = superpose(t, r, IT_C, lambda u: np.maximum(_capped_line(u, j2, FH2), fall(u)),
                       falling_unaccomplished=fall)
    assert np.all(broken <= first + 1e-9)
    assert np.all(broken <= second + 1e-9)
    # the record model: never above the pair until the retort falls after the product has
    # surely broken (from then on it cools at the thickened product's rate, fh2 or fc)
    record = broken_curve_cold_spot(t, r, IT_C, fh_min=FH, jh=JH, fh2_min=FH2, break_min=XBH,
                                    break_temperature_C=break_temperature(FH, JH, XBH, IT_C, TR_C),
                                    fc_min=60.0, jc=2.0)
    until = t.size
    if record.latest_break_min is not None:
        falls = np.flatnonzero((np.diff(r) < 0.0) & (t[1:] > record.latest_break_min))
        until = falls[0] + 1 if falls.size else t.size
    assert np.all(record.cold_spot_C[:until] <= broken[:until] + 1e-12)


# --------------------------------------------------------------------------------------------
# the break temperature


def test_break_temperature():
    g_bh = JH * (TR_C - IT_C) * 10.0 ** (-XBH / FH)
    assert break_temperature(FH, JH, XBH, IT_C, TR_C) == pytest.approx(TR_C - g_bh, rel=1e-14)
    # a break during the lag: at the initial temperature
    assert break_temperature(FH, 2.0, 1.0, IT_C, TR_C) == IT_C
    with pytest.raises(ModelInputError):
        break_temperature(FH, JH, XBH, 121.1, 121.1)
    with pytest.raises(ModelInputError):
        break_temperature(FH, JH, -1.0, IT_C, TR_C)


# --------------------------------------------------------------------------------------------
# the record model


def _record_model(t, r, initial=IT_C, **kw):
    args = {"fh_min": FH, "jh": JH, "fh2_min": FH2, "break_min": XBH,
            "break_temperature_C": break_temperature(FH, JH, XBH, IT_C, TR_C),
            "fc_min": 60.0, "jc": 2.0}
    args.update(kw)
    return broken_curve_cold_spot(t, r, initial, **args)


@pytest.mark.parametrize("jh", [1.0, 1.3, JH, 2.0])
def test_record_model_on_a_single_step(jh):
    # first line exactly up to the earliest break; then the broken line with its break moved
    # to that time (never above the filed curve, never below it by more than the shift)
    dt = 0.1
    # 150 min: with the second line's clock (36 min longer) still within superpose's 2500
    # ages, so the age windows are not widened
    t = np.arange(0.0, 150.0 + 1e-9, dt)
    r = np.full(t.size, TR_C)
    level = break_temperature(FH, jh, XBH, IT_C, TR_C)
    res = _record_model(t, r, jh=jh, break_temperature_C=level)
    exact = TR_C - (TR_C - IT_C) * rising_unaccomplished_broken(t, FH, jh, FH2, XBH)
    t_e = res.earliest_break_min
    assert res.latest_break_min == pytest.approx(XBH, abs=1e-6)
    assert XBH - 1.0 < t_e <= XBH + 1e-9
    # strictly before: t_e can fall on a grid time within rounding (19.8 or 19.799999999999986
    # min by the order of a sum), and from the grid time at t_e on the model answers as broken
    before = t < t_e - 1e-9
    np.testing.assert_allclose(res.cold_spot_C[before], exact[before], rtol=0.0, atol=1e-9)
    assert np.all(res.cold_spot_C <= exact + 1e-9)
    moved = TR_C - (TR_C - IT_C) * rising_unaccomplished_broken(t, FH, jh, FH2, t_e)
    # read between grid points on the second line's clock: at most one step behind
    behind = np.concatenate(([moved[0]], moved[:-1]))
    assert np.all(res.cold_spot_C >= behind - 1e-9)
    if jh == 1.0:  # the two sides of the bracket agree for a rise: the break moves only by
        # the envelope's own rounding of the age windows (outwards, within one grid step)
        assert t_e == pytest.approx(XBH, abs=dt + 1e-9)


def test_record_model_is_the_pair_when_the_product_cannot_break():
    t = np.arange(0.0, 200.0 + 1e-9, 0.1)
    r = np.where(t < 10.0, IT_C + (100.0 - IT_C) * t / 10.0, 100.0)  # stays below 105 °C
    res = _record_model(t, r)
    rise, fall = bounding_kernels(FH, JH, 60.0, 2.0, fh2_min=FH2, break_min=XBH)
    np.testing.assert_array_equal(res.cold_spot_C,
                                  superpose(t, r, IT_C, rise, falling_unaccomplished=fall))
    assert res.earliest_break_min is None and res.latest_break_min is None
    assert res.thickened_lag_factor == pytest.approx(THICKENED_LAG_FACTOR)


def test_record_model_after_a_stalled_come_up_answers_the_rise_as_the_thick_product():
    # come-up stalled 30 min at 110 °C, above the break temperature: the product breaks during
    # the stall, and the rise to 121.1 °C after it is answered with the thickened response
    t = np.arange(0.0, 200.0 + 1e-9, 0.1)
    r = np.where(t < 10.0, IT_C + (110.0 - IT_C) * t / 10.0,
                 np.where(t < 40.0, 110.0, np.minimum(TR_C, 110.0 + (t - 40.0) * 5.55)))
    res = _record_model(t, r)
    rise, fall = bounding_kernels(FH, JH, 60.0, 2.0, fh2_min=FH2, break_min=XBH)
    pair = superpose(t, r, IT_C, rise, falling_unaccomplished=fall)
    assert res.earliest_break_min < 40.0
    assert np.all(res.cold_spot_C <= pair + 1e-12)
    # 30 min after the rise the time-invariant pair is well ahead (it breaks 19.9 min after
    # every rise); the record model follows the thickened product
    i = round(70.0 / 0.1)
    assert pair[i] - res.cold_spot_C[i] > 1.0
    thick = superpose(t[400:] - t[400], r[400:], 110.0,
                      functools.partial(rising_unaccomplished, fh_min=FH2, jh=THICKENED_LAG_FACTOR),
                      falling_unaccomplished=fall)
    # after the stall the cold spot rises no faster than the thickened response from 110 °C
    gain = res.cold_spot_C[400:] - res.cold_spot_C[400]
    assert np.all(gain <= thick - 110.0 + (110.0 - res.cold_spot_C[400]) + 1e-6)


def test_record_model_hot_start_is_thick_from_the_start():
    t = np.arange(0.0, 100.0 + 1e-9, 0.1)
    r = np.full(t.size, TR_C)
    level = break_temperature(FH, JH, XBH, IT_C, TR_C)
    res = _record_model(t, r, initial=level + 1.0)
    assert res.earliest_break_min == 0.0
    _, fall = bounding_kernels(FH, JH, 60.0, 2.0, fh2_min=FH2, break_min=XBH)
    thick = superpose(t, r, level + 1.0,
                      functools.partial(rising_unaccomplished, fh_min=FH2, jh=THICKENED_LAG_FACTOR),
                      falling_unaccomplished=fall)
    np.testing.assert_allclose(res.cold_spot_C, thick, atol=1e-9)


def test_record_model_larger_thick_lag_is_lower():
    t = np.arange(0.0, 200.0 + 1e-9, 0.1)
    r = _hold_profile(t, 80.0, 50.0, 10.0, 10.0)
    a = _record_model(t, r, jh2=1.0).cold_spot_C
    b = _record_model(t, r).cold_spot_C
    c = _record_model(t, r, jh2=3.0).cold_spot_C
    assert np.all(c <= b + 1e-12) and np.all(b <= a + 1e-12)
    assert _record_model(t, r, jh2=1.0).thickened_lag_factor == JH  # never below jh


def test_record_model_bad_arguments():
    t = np.arange(0.0, 10.0, 0.1)
    r = np.full(t.size, TR_C)
    with pytest.raises(ModelInputError):
        _record_model(t, r, break_temperature_C=float("nan"))
    with pytest.raises(ModelInputError):
        _record_model(t, r, jh2=0.0)
    with pytest.raises(ModelInputError):
        _record_model(t, r, break_min=-2.0)
    with pytest.raises(ModelInputError):
        _record_model(t ** 1.5, r)  # not a uniform grid
    one = _record_model(np.array([0.0]), np.array([TR_C]))
    assert one.cold_spot_C.tolist() == [IT_C]


# --------------------------------------------------------------------------------------------
# resampling onto the second line's clock


@settings(max_examples=60, deadline=None)
@given(steps=st.lists(st.floats(0.1, 3.0), min_size=2, max_size=30),
       values=st.lists(st.floats(-50.0, 50.0), min_size=31, max_size=31),
       dt=st.floats(0.05, 1.0))
def test_lower_resample_never_above_the_record(steps, values, dt):
    src_t = np.concatenate(([0.0], np.cumsum(steps)))
    src_v = np.asarray(values[: src_t.size])
    n = math.ceil(src_t[-1] / dt) + 1
    v = _lower_resample(src_t, src_v, n, dt)
    fine = np.linspace(0.0, src_t[-1], 2001)
    interpolant = np.interp(fine, np.arange(n) * dt, v)
    assert np.all(interpolant <= np.interp(fine, src_t, src_v) + 1e-9)


def test_lower_resample_keeps_a_record_on_the_grid():
    src_t = np.arange(0.0, 10.0 + 1e-9, 0.5)
    src_v = np.sin(src_t)
    np.testing.assert_array_equal(_lower_resample(src_t, src_v, src_t.size, 0.5), src_v)
