"""Unit tests for deviation.physics.lethality (lethal rate, General Method)."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import trapezoid

from deviation.errors import RecordError
from deviation.physics.lethality import LethalityInputError, general_method, lethal_rate


def test_lethal_rate_shape_and_defaults():
    t = np.array([[121.1, 111.1], [131.1, 101.1]])
    np.testing.assert_allclose(lethal_rate(t), [[1.0, 0.1], [10.0, 0.01]], rtol=1e-13)
    assert lethal_rate(115.0, 115.0, 7.0) == pytest.approx(1.0)


def test_trapezoid_equals_scipy_on_non_uniform_times():
    rng = np.random.default_rng(3)
    t = np.cumsum(rng.uniform(0.0, 2.0, 400))
    temperature = 90.0 + 30.0 * np.sin(t / 50.0)
    F, cumulative = general_method(t, temperature, 121.1, 10.0)
    assert F == pytest.approx(trapezoid(lethal_rate(temperature), t), rel=1e-13)
    assert cumulative[0] == 0.0 and cumulative.shape == t.shape
    assert cumulative[-1] == F
    assert np.all(np.diff(cumulative) >= 0.0)


def test_conservative_credits_lower_reading():
    t = np.array([0.0, 1.0, 3.0])
    temperature = np.array([111.1, 121.1, 101.1])  # L = 0.1, 1, 0.01
    F, cumulative = general_method(t, temperature, 121.1, 10.0, conservative=True)
    np.testing.assert_allclose(cumulative, [0.0, 0.1, 0.1 + 2 * 0.01], rtol=1e-13)
    F_trap, _ = general_method(t, temperature, 121.1, 10.0)
    assert F_trap == pytest.approx(0.55 + 1.01, rel=1e-13)


def test_single_sample_and_repeated_times():
    F, cumulative = general_method([5.0], [121.1], 121.1, 10.0)
    assert F == 0.0 and cumulative.tolist() == [0.0]
    F, _ = general_method([0.0, 1.0, 1.0, 2.0], [121.1] * 4, 121.1, 10.0)
    assert F == pytest.approx(2.0)


@settings(max_examples=200, deadline=None)
@given(
    steps=st.lists(st.floats(0.0, 5.0), min_size=1, max_size=200),
    temps=st.data(),
    conservative_z=st.floats(5.0, 20.0),
)
def test_conservative_never_exceeds_trapezoid(steps, temps, conservative_z):
    t = np.concatenate([[0.0], np.cumsum(steps)])
    readings = st.lists(st.floats(20.0, 140.0), min_size=t.size, max_size=t.size)
    temperature = np.array(temps.draw(readings))
    F_c, cum_c = general_method(t, temperature, 121.1, conservative_z, conservative=True)
    F_t, cum_t = general_method(t, temperature, 121.1, conservative_z)
    # 1e-300: subnormal steps (hypothesis tries 5e-324 min) round differently in the two forms.
    assert F_c <= F_t * (1 + 1e-12) + 1e-300
    assert np.all(cum_c <= cum_t * (1 + 1e-12) + 1e-300)


@pytest.mark.parametrize(
    "time, temperature, match",
    [
        ([0.0, 2.0, 1.0], [100.0] * 3, "decreases at sample 2"),
        ([0.0, 1.0], [100.0] * 3, "shape"),
        ([], [], "non-empty"),
        ([0.0, 1.0], [100.0, np.nan], r"temperature_C\[1\]"),
        ([0.0, np.inf], [100.0, 100.0], "non-finite"),
    ],
)
def test_bad_records(time, temperature, match):
    with pytest.raises(LethalityInputError, match=match) as info:
        general_method(time, temperature, 121.1, 10.0)
    assert isinstance(info.value, RecordError) and isinstance(info.value, ValueError)


def test_bad_z_and_reference():
    with pytest.raises(LethalityInputError, match="z_C"):
        lethal_rate(100.0, 121.1, 0.0)
    with pytest.raises(LethalityInputError, match="reference_temperature_C"):
        general_method([0.0, 1.0], [100.0, 100.0], float("nan"), 10.0)
