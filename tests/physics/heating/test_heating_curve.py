"""Unit tests for deviation.physics.heating.heating_curve (Ball's heating-curve step responses)."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from deviation.physics.heating.conduction import ModelInputError
from deviation.physics.heating.heating_curve import (
    bounding_kernels,
    falling_unaccomplished,
    rising_unaccomplished,
    step_unaccomplished,
)


def test_before_step_and_during_lag_the_cold_spot_stays_at_initial_temperature():
    fh, jh = 40.0, 2.0
    lag_end = fh * math.log10(jh)  # jh * 10^(-t/fh) = 1 here
    t = np.array([-100.0, -1.0, 0.0, 0.5 * lag_end, lag_end * (1 - 1e-12)])
    assert step_unaccomplished(t, fh, jh).tolist() == [1.0] * 5


def test_straight_line_after_lag():
    fh, jh = 40.0, 1.6
    t = np.array([10.0, 40.0, 80.0, 200.0])
    np.testing.assert_allclose(step_unaccomplished(t, fh, jh), jh * 10.0 ** (-t / fh), rtol=1e-14)
    # one log cycle per fh on log(S): the definition of fh (Ball 1923)
    s = step_unaccomplished(np.array([50.0, 90.0]), fh, jh)
    assert math.log10(s[0] / s[1]) == pytest.approx(1.0, rel=1e-13)


def test_step_unaccomplished_is_the_rise_response():
    t = np.linspace(-5.0, 300.0, 611)
    for jh in (0.6, 1.0, 1.9):
        np.testing.assert_array_equal(step_unaccomplished(t, 45.0, jh),
                                      rising_unaccomplished(t, 45.0, jh))


@pytest.mark.parametrize("jh", [0.5, 0.7, 0.99, 1.0, 1.5, 2.0, 2.6])
def test_rise_response_continuous_at_zero(jh):
    # no jump: S(0+) = 1 whatever jh (issue 12: a jh < 1 jump credited overshoots at once)
    s = rising_unaccomplished(np.array([0.0, 1e-9, 1e-6]), 52.0, jh)
    np.testing.assert_allclose(s, 1.0, atol=1e-7)


def test_rise_response_below_one_jh_is_the_exponential():
    # for jh < 1 Ball's line would start below 1; the exponential through 1 is used instead
    t = np.array([0.0, 10.0, 52.0, 104.0])
    np.testing.assert_allclose(rising_unaccomplished(t, 52.0, 0.7), 10.0 ** (-t / 52.0),
                               rtol=1e-14)


@pytest.mark.parametrize("jc", [1.2, 2.0, 2.6])
def test_fall_response_two_stage_form(jc):
    fc = 50.0
    tau1 = fc / math.log(10.0)
    tau2 = tau1 * (1.0 - 1.0 / jc)
    t = np.array([0.5, 5.0, 20.0, 60.0])
    expected = (tau1 * np.exp(-t / tau1) - tau2 * np.exp(-t / tau2)) / (tau1 - tau2)
    np.testing.assert_allclose(falling_unaccomplished(t, fc, jc), expected, rtol=1e-12)
    # continuous at 0 with a horizontal tangent (two first-order stages in series)
    s = falling_unaccomplished(np.array([0.0, 1e-4]), fc, jc)
    assert s[0] == 1.0 and 1.0 - s[1] < 1e-8
    # asymptote: Ball's straight line jc 10^(-t/fc) (Ball 1923)
    late = np.array([400.0, 500.0])
    np.testing.assert_allclose(falling_unaccomplished(late, fc, jc), jc * 10.0 ** (-late / fc),
                               rtol=1e-4)


def test_fall_response_without_lag_is_immediate():
    t = np.array([-1.0, 0.0, 1e-9, 10.0, 50.0])
    np.testing.assert_allclose(falling_unaccomplished(t, 50.0, 1.0),
                               [1.0, 1.0, 1.0, 10 ** (-0.2), 0.1], rtol=1e-8)
    # jc < 1: part of a fall reaches the cold spot at once (conservative for a fall)
    np.testing.assert_allclose(falling_unaccomplished(np.array([1e-9]), 50.0, 0.8), [0.8],
                               rtol=1e-8)


@settings(max_examples=60, deadline=None)
@given(f=st.floats(1.0, 200.0), j=st.floats(0.3, 3.0),
       times=st.lists(st.floats(-10.0, 2000.0), min_size=2, max_size=50))
def test_responses_monotone_bounded_and_ordered(f, j, times):
    t = np.sort(np.asarray(times))
    rise = rising_unaccomplished(t, f, j)
    fall = falling_unaccomplished(t, f, j)
    for s in (rise, fall):
        assert np.all((s >= 0.0) & (s <= 1.0))
        assert np.all(np.diff(s) <= 1e-15)  # non-increasing: the cold spot never turns back
    assert np.all(fall <= rise + 1e-15)  # fast side below the slow side


def test_far_times_no_warning_and_bounded():
    with np.errstate(over="raise", invalid="raise", divide="raise"):
        s = step_unaccomplished(np.array([-1e6, 1e6]), 1.0, 2.0)
        f = falling_unaccomplished(np.array([-1e6, 1e6]), 1.0, 2.0)
    assert s.tolist() == [1.0, 0.0]
    assert f.tolist() == [1.0, 0.0]


def test_bounding_kernels_parameters():
    t = np.linspace(0.0, 300.0, 301)
    rise, fall = bounding_kernels(52.0, 1.9, 53.0, 2.1)
    np.testing.assert_array_equal(rise(t), rising_unaccomplished(t, 52.0, 1.9))
    # faster rate index, smaller lag factor of the two curves
    np.testing.assert_array_equal(fall(t), falling_unaccomplished(t, 52.0, 1.9))
    _, fall = bounding_kernels(52.0, 1.9, 48.0, 1.4)
    np.testing.assert_array_equal(fall(t), falling_unaccomplished(t, 48.0, 1.4))
    # no cooling curve: fh and an immediate response (the least cooling lethality)
    _, fall = bounding_kernels(52.0, 1.9)
    np.testing.assert_array_equal(fall(t), falling_unaccomplished(t, 52.0, 1.0))
    _, fall = bounding_kernels(52.0, 0.8)
    np.testing.assert_array_equal(fall(t), falling_unaccomplished(t, 52.0, 0.8))


@pytest.mark.parametrize("fh, jh", [(0.0, 1.0), (-3.0, 1.0), (10.0, 0.0), (10.0, float("nan")),
                                    (float("inf"), 1.0)])
def test_bad_parameters(fh, jh):
    with pytest.raises(ModelInputError):
        step_unaccomplished([1.0], fh, jh)
    with pytest.raises(ModelInputError):
        falling_unaccomplished([1.0], fh, jh)
    with pytest.raises(ModelInputError):
        bounding_kernels(fh, jh)


@pytest.mark.parametrize("fc, jc", [(0.0, 1.0), (10.0, -1.0), (float("nan"), 1.0)])
def test_bad_cooling_parameters(fc, jc):
    with pytest.raises(ModelInputError):
        bounding_kernels(50.0, 1.5, fc, jc)


def test_non_finite_time():
    for fn in (rising_unaccomplished, falling_unaccomplished):
        with pytest.raises(ModelInputError, match="non-finite"):
            fn([0.0, float("nan")], 10.0, 1.5)
