"""Unit tests for deviation.physics.heating.conduction (series solutions at the container centre)."""

import math

import numpy as np
import pytest
from scipy.special import j1, jn_zeros

from deviation.errors import ModelError
from deviation.physics.heating.conduction import (
    ModelInputError,
    brick_centre_unaccomplished,
    cylinder_centre_unaccomplished,
    diffusivity_from_fh_brick,
    diffusivity_from_fh_cylinder,
    fh_from_diffusivity_brick,
    fh_from_diffusivity_cylinder,
    slab_centre_unaccomplished,
    theoretical_centre_jh_brick,
    theoretical_centre_jh_cylinder,
)

RADIUS_M = 0.0405  # 81 mm diameter can
HEIGHT_M = 0.111
ALPHA_M2_S = 1.6e-7  # typical of conduction-heating foods (common practice)


def long_cylinder_series(fourier, n_terms=4000):
    """Axis of an infinite cylinder, plain truncated Bessel series with many terms."""
    beta = jn_zeros(0, n_terms)
    c = 2.0 / (beta * j1(beta))
    return np.exp(-np.outer(np.atleast_1d(fourier), beta**2)) @ c


def long_slab_series(fourier_half, n_terms=4000):
    """Mid-plane of a slab, plain cosine series, Fo on the half-thickness."""
    k = np.arange(n_terms)
    c = 4.0 * (-1.0) ** k / ((2 * k + 1) * np.pi)
    rate = (2 * k + 1) ** 2 * np.pi**2 / 4.0
    return np.exp(-np.outer(np.atleast_1d(fourier_half), rate)) @ c


def test_zero_and_negative_time_give_exactly_one():
    s = cylinder_centre_unaccomplished([-5.0, 0.0], ALPHA_M2_S, RADIUS_M, HEIGHT_M)
    assert s.tolist() == [1.0, 1.0]
    b = brick_centre_unaccomplished([-1.0, 0.0], ALPHA_M2_S, 0.1, 0.08, 0.03)
    assert b.tolist() == [1.0, 1.0]


def test_no_oscillation_at_small_times_and_monotone():
    # 0 to 120 min at 0.1 s: the truncated series would oscillate just after t = 0
    t = np.linspace(0.0, 120.0, 72001)
    s = cylinder_centre_unaccomplished(t, ALPHA_M2_S, RADIUS_M, HEIGHT_M)
    assert np.all((s >= 0.0) & (s <= 1.0))
    # a step response of the heat equation never reverses (5e-15: rounding of sums near 1)
    assert np.all(np.diff(s) <= 5e-15)
    assert s[-1] < 0.05


@pytest.mark.parametrize("n_terms", [40, 100, 400])
def test_infinite_cylinder_matches_long_series_at_small_fourier(n_terms):
    # 4000 terms are complete (first omitted term < 1e-17) for Fo >= 40/beta_4001^2 ~ 2.5e-7
    fourier = np.array([1e-6, 1e-5, 1e-4, 1e-3, 3e-3, 1e-2, 3e-2, 0.1, 0.3, 1.0])
    radius = 1.0
    t_min = fourier * radius**2 / ALPHA_M2_S / 60.0
    got = cylinder_centre_unaccomplished(t_min, ALPHA_M2_S, radius, 1e6, n_terms=n_terms)
    np.testing.assert_allclose(got, long_cylinder_series(fourier), rtol=0, atol=1e-13)


def test_slab_matches_long_series_both_sides_of_short_time_switch():
    fourier_half = np.array([1e-5, 1e-3, 0.01, 0.0499999, 0.05, 0.0500001, 0.2, 1.0, 3.0])
    half = 0.02
    t_min = fourier_half * half**2 / ALPHA_M2_S / 60.0
    got = slab_centre_unaccomplished(t_min, ALPHA_M2_S, 2 * half)
    np.testing.assert_allclose(got, long_slab_series(fourier_half), rtol=0, atol=1e-14)


def test_finite_cylinder_is_product_of_cylinder_and_slab():
    t = np.array([0.5, 5.0, 20.0, 60.0])
    finite = cylinder_centre_unaccomplished(t, ALPHA_M2_S, RADIUS_M, HEIGHT_M)
    infinite = cylinder_centre_unaccomplished(t, ALPHA_M2_S, RADIUS_M, 1e6)
    slab = slab_centre_unaccomplished(t, ALPHA_M2_S, HEIGHT_M)
    np.testing.assert_allclose(finite, infinite * slab, rtol=1e-14)


def test_brick_with_two_huge_sides_is_a_slab_and_cube_is_slab_cubed():
    t = np.array([1.0, 10.0, 30.0])
    slab = slab_centre_unaccomplished(t, ALPHA_M2_S, 0.03)
    np.testing.assert_allclose(brick_centre_unaccomplished(t, ALPHA_M2_S, 1e4, 1e4, 0.03), slab)
    np.testing.assert_allclose(
        brick_centre_unaccomplished(t, ALPHA_M2_S, 0.03, 0.03, 0.03), slab**3, rtol=1e-14
    )


def test_shape_kept_and_unsorted_input_equals_sorted():
    rng = np.random.default_rng(1)
    t = rng.uniform(0.0, 90.0, size=(7, 11))
    s = cylinder_centre_unaccomplished(t, ALPHA_M2_S, RADIUS_M, HEIGHT_M)
    assert s.shape == t.shape
    flat = np.sort(t.ravel())
    s_sorted = cylinder_centre_unaccomplished(flat, ALPHA_M2_S, RADIUS_M, HEIGHT_M)
    np.testing.assert_array_equal(np.sort(s.ravel())[::-1], s_sorted)
    assert cylinder_centre_unaccomplished(10.0, ALPHA_M2_S, RADIUS_M, HEIGHT_M).shape == ()


def test_fh_diffusivity_round_trip_and_units():
    alpha = diffusivity_from_fh_cylinder(40.0, RADIUS_M, HEIGHT_M)
    assert fh_from_diffusivity_cylinder(alpha, RADIUS_M, HEIGHT_M) == pytest.approx(40.0, rel=1e-14)
    # hand form: fh [s] = ln10 / (alpha (beta1^2/R^2 + pi^2/H^2))
    beta1 = 2.404825557695773
    rate = alpha * (beta1**2 / RADIUS_M**2 + math.pi**2 / HEIGHT_M**2)
    assert math.log(10) / rate / 60.0 == pytest.approx(40.0, rel=1e-12)
    alpha_b = diffusivity_from_fh_brick(25.0, 0.1, 0.08, 0.03)
    shape = math.pi**2 * (1 / 0.1**2 + 1 / 0.08**2 + 1 / 0.03**2)
    assert alpha_b == pytest.approx(math.log(10) / (25.0 * 60.0 * shape), rel=1e-14)
    assert fh_from_diffusivity_brick(alpha_b, 0.1, 0.08, 0.03) == pytest.approx(25.0, rel=1e-14)


def test_theoretical_jh_values():
    assert theoretical_centre_jh_cylinder() == pytest.approx(1.60197 * 1.27324, rel=1e-5)
    assert theoretical_centre_jh_brick() == pytest.approx((4 / math.pi) ** 3, rel=1e-15)


@pytest.mark.parametrize(
    "call",
    [
        lambda: cylinder_centre_unaccomplished(1.0, -1e-7, RADIUS_M, HEIGHT_M),
        lambda: cylinder_centre_unaccomplished(1.0, ALPHA_M2_S, 0.0, HEIGHT_M),
        lambda: cylinder_centre_unaccomplished(1.0, ALPHA_M2_S, RADIUS_M, float("nan")),
        lambda: cylinder_centre_unaccomplished([1.0, np.inf], ALPHA_M2_S, RADIUS_M, HEIGHT_M),
        lambda: cylinder_centre_unaccomplished(1.0, ALPHA_M2_S, RADIUS_M, HEIGHT_M, n_terms=5),
        lambda: brick_centre_unaccomplished(1.0, ALPHA_M2_S, 0.1, -0.08, 0.03),
        lambda: diffusivity_from_fh_cylinder(0.0, RADIUS_M, HEIGHT_M),
        lambda: fh_from_diffusivity_brick(ALPHA_M2_S, 0.1, 0.08, 0.0),
    ],
)
def test_bad_parameters_raise_model_error(call):
    with pytest.raises(ModelInputError) as info:
        call()
    assert isinstance(info.value, ModelError) and isinstance(info.value, ValueError)
    assert "expected" in str(info.value)
