"""Unit tests for deviation.physics.spoilage (survivors, non-sterile probability, log reductions)."""

import math
import warnings

import numpy as np
import pytest

from deviation.errors import CaseError
from deviation.physics.spoilage import (
    F_for_log_reductions,
    SpoilageInputError,
    expected_nonsterile_containers,
    log_reductions,
    nonsterile_probability,
    survivors_per_container,
)


def test_survivors_first_order():
    assert survivors_per_container(6.0, 1.0, 1e4) == pytest.approx(1e-2, rel=1e-13)
    out = survivors_per_container(np.array([0.0, 3.0]), 1.5, 100.0)
    assert isinstance(out, np.ndarray)
    np.testing.assert_allclose(out, [100.0, 1.0], rtol=1e-13)
    assert survivors_per_container(5.0, 1.0, 0.0) == 0.0


def test_tiny_N_probability_equals_N():
    # 1 - exp(-N) = N - N²/2 + ...: for N <= 1e-8 the relative difference from N is below 1e-8,
    # and -expm1 keeps full precision (1 - exp(-N) in floats would lose it all)
    for n in (1e-30, 1e-15, 1e-9):
        p = nonsterile_probability(12.0, 1.0, n * 1e12)
        assert p == pytest.approx(n * (1.0 - n / 2.0), rel=1e-12)


def test_probability_scalar_vs_array_and_bounds():
    assert isinstance(nonsterile_probability(3.0, 1.0, 10.0), float)
    p = nonsterile_probability(np.linspace(0.0, 30.0, 31), 1.0, 1e6)
    assert isinstance(p, np.ndarray) and np.all((p >= 0.0) & (p <= 1.0))
    assert np.all(np.diff(p) <= 0.0)


def test_no_overflow_or_warning_for_large_loads():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        with np.errstate(all="raise"):
            assert nonsterile_probability(0.0, 0.21, 1e12) == 1.0
            assert nonsterile_probability(-500.0, 0.21, 1e12) == 1.0  # N would overflow
            assert nonsterile_probability(5.0, 1.0, 0.0) == 0.0
        with np.errstate(over="raise"):
            assert survivors_per_container(-500.0, 0.21, 1e12) == math.inf


def test_expected_containers_and_log_reductions():
    assert expected_nonsterile_containers(1e-6, 50_000) == pytest.approx(0.05)
    assert log_reductions(6.0, 1.5) == pytest.approx(4.0)
    assert F_for_log_reductions(5.0, 1.2) == pytest.approx(6.0)


@pytest.mark.parametrize(
    "call, field",
    [
        (lambda: survivors_per_container(3.0, 0.0, 10.0), "D_min"),
        (lambda: nonsterile_probability(3.0, 1.0, -1.0), "spores_per_container"),
        (lambda: nonsterile_probability(float("nan"), 1.0, 1.0), "F_min"),
        (lambda: expected_nonsterile_containers(1.5, 100), "probability"),
        (lambda: expected_nonsterile_containers(0.5, -1), "lot_size_containers"),
        (lambda: log_reductions(3.0, -0.2), "D_min"),
        (lambda: F_for_log_reductions(12.0, np.array([0.21, 0.0])), "D_min"),
    ],
)
def test_bad_values(call, field):
    with pytest.raises(SpoilageInputError, match=field) as info:
        call()
    assert isinstance(info.value, CaseError) and isinstance(info.value, ValueError)
