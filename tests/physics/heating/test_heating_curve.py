"""Unit tests for deviation.physics.heating.heating_curve (Ball's first-order-with-lag step response)."""

import math

import numpy as np
import pytest

from deviation.physics.heating.conduction import ModelInputError
from deviation.physics.heating.heating_curve import step_unaccomplished


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


def test_jh_below_one_jumps_at_zero():
    s = step_unaccomplished(np.array([-0.1, 0.0, 1e-9]), 10.0, 0.7)
    np.testing.assert_allclose(s, [1.0, 0.7, 0.7], rtol=1e-9)


def test_far_times_no_warning_and_bounded():
    with np.errstate(over="raise", invalid="raise", divide="raise"):
        s = step_unaccomplished(np.array([-1e6, 1e6]), 1.0, 2.0)
    assert s.tolist() == [1.0, 0.0]


@pytest.mark.parametrize("fh, jh", [(0.0, 1.0), (-3.0, 1.0), (10.0, 0.0), (10.0, float("nan"))])
def test_bad_parameters(fh, jh):
    with pytest.raises(ModelInputError):
        step_unaccomplished([1.0], fh, jh)
