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
    decay_rate_brick_s,
    decay_rate_cylinder_s,
    diffusivity_from_fh_brick,
    diffusivity_from_fh_cylinder,
    fh_from_diffusivity_brick,
    fh_from_diffusivity_cylinder,
    first_coefficient_cylinder,
    first_coefficient_slab,
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
        lambda: cylinder_centre_unaccomplished(1.0, ALPHA_M2_S, RADIUS_M, HEIGHT_M,
                                               h_over_k_per_m=0.0),
        lambda: brick_centre_unaccomplished(1.0, ALPHA_M2_S, 0.1, 0.08, 0.03,
                                            h_over_k_per_m=-1000.0),
        lambda: slab_centre_unaccomplished(1.0, ALPHA_M2_S, 0.03, h_over_k_per_m=float("nan")),
        lambda: diffusivity_from_fh_cylinder(40.0, RADIUS_M, HEIGHT_M, h_over_k_per_m=-1.0),
        lambda: theoretical_centre_jh_cylinder(h_over_k_per_m=1000.0),  # Bi needs the size
        lambda: theoretical_centre_jh_brick(0.1, None, 0.03, h_over_k_per_m=1000.0),
        lambda: first_coefficient_slab(0.0),
    ],
)
def test_bad_parameters_raise_model_error(call):
    with pytest.raises(ModelInputError) as info:
        call()
    assert isinstance(info.value, ModelError) and isinstance(info.value, ValueError)
    assert "expected" in str(info.value)


# --- finite surface heat transfer coefficient (Biot boundary) ----------------------------------

K_W_MK = 0.5  # thermal conductivity of a moist food, order of magnitude (common practice)
TRAY_M = (0.165, 0.115, 0.032)


def _h_over_k(htc_W_m2K):
    return htc_W_m2K / K_W_MK


@pytest.mark.parametrize("htc_W_m2K", [5.0, 100.0, 1000.0])
def test_biot_zero_and_negative_time_give_exactly_one(htc_W_m2K):
    hk = _h_over_k(htc_W_m2K)
    t = [-5.0, 0.0, 1e-9]
    assert cylinder_centre_unaccomplished(t, ALPHA_M2_S, RADIUS_M, HEIGHT_M,
                                          h_over_k_per_m=hk).tolist() == [1.0, 1.0, 1.0]
    assert brick_centre_unaccomplished(t, ALPHA_M2_S, *TRAY_M,
                                       h_over_k_per_m=hk).tolist() == [1.0, 1.0, 1.0]
    assert slab_centre_unaccomplished(t, ALPHA_M2_S, 0.03,
                                      h_over_k_per_m=hk).tolist() == [1.0, 1.0, 1.0]


@pytest.mark.parametrize("htc_W_m2K", [20.0, 500.0, 1e5])
def test_biot_no_oscillation_and_monotone(htc_W_m2K):
    # 0 to 120 min at 0.1 s, through the switch from S = 1 to the series at every axis
    t = np.linspace(0.0, 120.0, 72001)
    hk = _h_over_k(htc_W_m2K)
    for s in (cylinder_centre_unaccomplished(t, ALPHA_M2_S, RADIUS_M, HEIGHT_M, h_over_k_per_m=hk),
              brick_centre_unaccomplished(t, ALPHA_M2_S, *TRAY_M, h_over_k_per_m=hk)):
        assert np.all((s >= 0.0) & (s <= 1.0))
        assert np.all(np.diff(s) <= 5e-15)  # rounding of sums near 1, as for the Dirichlet series
        assert s[-1] < s[0]


@pytest.mark.parametrize("n_terms", [40, 100, 400])
def test_biot_series_independent_of_truncation_at_small_fourier(n_terms):
    # 1000 terms are complete from Fo ~ 4e-6; below where n_terms are complete S is set to 1,
    # so the two must agree to rounding everywhere (the short-time handling adds no error)
    fourier = np.array([1e-6, 1e-5, 1e-4, 1e-3, 3e-3, 1e-2, 3e-2, 0.1, 0.3, 1.0])
    t_min = fourier * RADIUS_M**2 / ALPHA_M2_S / 60.0
    hk = _h_over_k(300.0)
    kw = {"h_over_k_per_m": hk}
    got = cylinder_centre_unaccomplished(t_min, ALPHA_M2_S, RADIUS_M, HEIGHT_M, n_terms, **kw)
    ref = cylinder_centre_unaccomplished(t_min, ALPHA_M2_S, RADIUS_M, HEIGHT_M, 1000, **kw)
    np.testing.assert_allclose(got, ref, rtol=0, atol=1e-13)
    got = brick_centre_unaccomplished(t_min, ALPHA_M2_S, *TRAY_M, n_terms, **kw)
    ref = brick_centre_unaccomplished(t_min, ALPHA_M2_S, *TRAY_M, 1000, **kw)
    np.testing.assert_allclose(got, ref, rtol=0, atol=1e-13)


def test_large_h_reproduces_the_perfect_surface_series():
    t = np.linspace(0.0, 150.0, 1501)
    # h/k = 1e8 /m: Bi = 4e6 on the radius; S differs from the Dirichlet series by ~1.2/Bi
    # (measured 2.8e-7 for the cylinder, 5.9e-7 for the tray)
    hk = 1e8
    np.testing.assert_allclose(
        cylinder_centre_unaccomplished(t, ALPHA_M2_S, RADIUS_M, HEIGHT_M, h_over_k_per_m=hk),
        cylinder_centre_unaccomplished(t, ALPHA_M2_S, RADIUS_M, HEIGHT_M), rtol=0, atol=1e-6)
    np.testing.assert_allclose(
        brick_centre_unaccomplished(t, ALPHA_M2_S, *TRAY_M, h_over_k_per_m=hk),
        brick_centre_unaccomplished(t, ALPHA_M2_S, *TRAY_M), rtol=0, atol=1e-6)
    np.testing.assert_allclose(
        slab_centre_unaccomplished(t, ALPHA_M2_S, 0.03, h_over_k_per_m=hk),
        slab_centre_unaccomplished(t, ALPHA_M2_S, 0.03), rtol=0, atol=1e-6)
    # h/k = inf is the surface at the retort temperature, the same code path
    np.testing.assert_array_equal(
        cylinder_centre_unaccomplished(t, ALPHA_M2_S, RADIUS_M, HEIGHT_M, h_over_k_per_m=math.inf),
        cylinder_centre_unaccomplished(t, ALPHA_M2_S, RADIUS_M, HEIGHT_M))


def test_smaller_h_heats_slower():
    t = np.linspace(0.0, 150.0, 301)
    previous = cylinder_centre_unaccomplished(t, ALPHA_M2_S, RADIUS_M, HEIGHT_M)
    previous_b = brick_centre_unaccomplished(t, ALPHA_M2_S, *TRAY_M)
    for htc in (5000.0, 1000.0, 500.0, 100.0, 10.0):
        s = cylinder_centre_unaccomplished(t, ALPHA_M2_S, RADIUS_M, HEIGHT_M,
                                           h_over_k_per_m=_h_over_k(htc))
        b = brick_centre_unaccomplished(t, ALPHA_M2_S, *TRAY_M, h_over_k_per_m=_h_over_k(htc))
        # never ahead of a better surface (comparison principle; 5e-15: rounding of sums near 1),
        # clearly behind mid-heating
        assert np.all(s >= previous - 5e-15) and np.all(b >= previous_b - 5e-15)
        assert np.max(s - previous) > 1e-3 and np.max(b - previous_b) > 1e-3
        previous, previous_b = s, b


def test_finite_cylinder_with_biot_is_product_of_its_axes():
    t = np.array([0.5, 5.0, 20.0, 60.0])
    hk = _h_over_k(400.0)
    finite = cylinder_centre_unaccomplished(t, ALPHA_M2_S, RADIUS_M, HEIGHT_M, h_over_k_per_m=hk)
    infinite = cylinder_centre_unaccomplished(t, ALPHA_M2_S, RADIUS_M, 1e6, h_over_k_per_m=hk)
    slab = slab_centre_unaccomplished(t, ALPHA_M2_S, HEIGHT_M, h_over_k_per_m=hk)
    np.testing.assert_allclose(finite, infinite * slab, rtol=1e-14)
    cube = brick_centre_unaccomplished(t, ALPHA_M2_S, 0.03, 0.03, 0.03, h_over_k_per_m=hk)
    np.testing.assert_allclose(
        cube, slab_centre_unaccomplished(t, ALPHA_M2_S, 0.03, h_over_k_per_m=hk) ** 3, rtol=1e-14)


@pytest.mark.parametrize("htc_W_m2K", [None, 50.0, 500.0, 1000.0])
def test_fh_diffusivity_round_trip_and_decay_rate_with_biot(htc_W_m2K):
    hk = None if htc_W_m2K is None else _h_over_k(htc_W_m2K)
    alpha = diffusivity_from_fh_cylinder(40.0, RADIUS_M, HEIGHT_M, h_over_k_per_m=hk)
    assert fh_from_diffusivity_cylinder(alpha, RADIUS_M, HEIGHT_M,
                                        h_over_k_per_m=hk) == pytest.approx(40.0, rel=1e-14)
    rate = decay_rate_cylinder_s(alpha, RADIUS_M, HEIGHT_M, hk)
    assert math.log(10.0) / rate / 60.0 == pytest.approx(40.0, rel=1e-14)
    alpha_b = diffusivity_from_fh_brick(25.0, *TRAY_M, h_over_k_per_m=hk)
    assert fh_from_diffusivity_brick(alpha_b, *TRAY_M,
                                     h_over_k_per_m=hk) == pytest.approx(25.0, rel=1e-14)
    rate_b = decay_rate_brick_s(alpha_b, *TRAY_M, hk)
    assert math.log(10.0) / rate_b / 60.0 == pytest.approx(25.0, rel=1e-14)


def test_finite_h_lengthens_fh_and_lowers_jh():
    fh = [fh_from_diffusivity_cylinder(ALPHA_M2_S, RADIUS_M, HEIGHT_M,
                                       h_over_k_per_m=None if h is None else _h_over_k(h))
          for h in (None, 1000.0, 500.0, 50.0)]
    assert fh == sorted(fh)  # a poorer surface heats slower
    jh = [theoretical_centre_jh_cylinder(RADIUS_M, HEIGHT_M,
                                         h_over_k_per_m=None if h is None else _h_over_k(h))
          for h in (None, 1000.0, 500.0, 50.0, 1.0)]
    assert jh == sorted(jh, reverse=True)
    assert jh[0] == theoretical_centre_jh_cylinder()
    # Bi -> 0: the product is nearly uniform in temperature, first coefficient -> 1 (lumped)
    assert first_coefficient_slab(1e-8) == pytest.approx(1.0, abs=1e-8)
    assert first_coefficient_cylinder(1e-8) == pytest.approx(1.0, abs=1e-8)


def test_theoretical_jh_with_biot_tends_to_the_perfect_surface_value():
    # Bi -> inf must reproduce 1.602 x 1.273 = 2.04 (cylinder) and (4/pi)^3 (brick)
    jh_cyl = theoretical_centre_jh_cylinder(RADIUS_M, HEIGHT_M, h_over_k_per_m=1e10)
    assert jh_cyl == pytest.approx(theoretical_centre_jh_cylinder(), rel=1e-8)
    assert theoretical_centre_jh_cylinder(RADIUS_M, HEIGHT_M) == theoretical_centre_jh_cylinder()
    jh_brick = theoretical_centre_jh_brick(*TRAY_M, h_over_k_per_m=1e10)
    assert jh_brick == pytest.approx(theoretical_centre_jh_brick(), rel=1e-8)
    # the product of the axes' first coefficients at each axis's own Bi
    hk = _h_over_k(500.0)
    assert theoretical_centre_jh_cylinder(RADIUS_M, HEIGHT_M, h_over_k_per_m=hk) == pytest.approx(
        first_coefficient_cylinder(hk * RADIUS_M) * first_coefficient_slab(hk * HEIGHT_M / 2),
        rel=1e-15)


@pytest.mark.parametrize("htc_W_m2K", [30.0, 500.0])
def test_biot_late_time_line_has_theoretical_fh_and_jh(htc_W_m2K):
    # Ball (1923): the straight line of log10 S has slope -1/fh and intercept log10 jh at t = 0
    hk = _h_over_k(htc_W_m2K)
    fh = fh_from_diffusivity_cylinder(ALPHA_M2_S, RADIUS_M, HEIGHT_M, h_over_k_per_m=hk)
    t = np.array([4.0 * fh, 5.0 * fh])
    s = cylinder_centre_unaccomplished(t, ALPHA_M2_S, RADIUS_M, HEIGHT_M, h_over_k_per_m=hk)
    slope = (np.log10(s[1]) - np.log10(s[0])) / (t[1] - t[0])
    intercept = 10.0 ** (np.log10(s[0]) - slope * t[0])
    assert -1.0 / slope == pytest.approx(fh, rel=1e-6)
    assert intercept == pytest.approx(
        theoretical_centre_jh_cylinder(RADIUS_M, HEIGHT_M, h_over_k_per_m=hk), rel=1e-5)
