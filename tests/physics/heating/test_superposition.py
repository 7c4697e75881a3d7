"""Unit tests for deviation.physics.heating.superposition (Duhamel superposition of step responses)."""

import math
import subprocess
import sys
from functools import partial

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import quad

from deviation.physics.heating import superposition
from deviation.physics.heating.conduction import (
    ModelInputError,
    cylinder_centre_unaccomplished,
    diffusivity_from_fh_cylinder,
)
from deviation.physics.heating.heating_curve import (
    bounding_kernels,
    step_unaccomplished,
)
from deviation.physics.heating.superposition import superpose

RADIUS_M, HEIGHT_M = 0.0405, 0.111
ALPHA_M2_S = diffusivity_from_fh_cylinder(40.0, RADIUS_M, HEIGHT_M)
CONDUCTION = partial(
    cylinder_centre_unaccomplished,
    diffusivity_m2_s=ALPHA_M2_S, radius_m=RADIUS_M, height_m=HEIGHT_M,
)
HEATING_CURVE = partial(step_unaccomplished, fh_min=30.0, jh=1.8)
KERNELS = {"conduction": CONDUCTION, "heating_curve": HEATING_CURVE}


def scalar(kernel, t):
    return float(kernel(np.array([t]))[0])


@pytest.mark.parametrize("name", KERNELS)
def test_step_profile_reproduces_step_response_exactly(name):
    kernel = KERNELS[name]
    t = np.arange(0, 6001) * 0.02
    cold = superpose(t, np.full_like(t, 121.1), 40.0, kernel)
    expected = 40.0 + (121.1 - 40.0) * (1.0 - kernel(t))
    np.testing.assert_array_equal(cold, expected)  # no increments: nothing but the step term


def test_ramp_matches_direct_duhamel_integral_conduction():
    # T(t) = T0 + ∫ T_R'(τ) U(t - τ) dτ for a linear come-up then a hold; quad to 1e-12
    dt, t_ramp, t0, t_hold = 1.0 / 60.0, 10.0, 40.0, 121.1
    t = np.arange(0, 60 * 60 + 1) * dt
    retort = np.minimum(t0 + (t_hold - t0) * t / t_ramp, t_hold)
    cold = superpose(t, retort, t0, CONDUCTION)
    slope = (t_hold - t0) / t_ramp
    for time in (3.0, 10.0, 17.5, 30.0, 60.0):
        integral, _ = quad(
            lambda tau: 1.0 - scalar(CONDUCTION, time - tau), 0.0, min(time, t_ramp),
            epsabs=1e-12, epsrel=1e-12, limit=200,
        )
        n = round(time / dt)
        # tolerance: Gauss-Legendre kernel means vs adaptive quadrature, both far below 1e-8 °C
        assert cold[n] == pytest.approx(t0 + slope * integral, abs=1e-8)


def test_ramp_matches_kernel_derivative_integral_heating_curve():
    # integrated by parts: T(t) = T0 + ∫ (T_R(τ) - T0) U'(t - τ) dτ, U' = jh ln10/fh 10^(-t/fh)
    # after the lag, 0 during it (jh >= 1 so U(0) = 0)
    fh, jh = 30.0, 1.8
    lag = fh * np.log10(jh)

    def du(u):
        return jh * np.log(10) / fh * 10.0 ** (-u / fh) if u > lag else 0.0

    dt, t_ramp, t0, t_hold = 0.05, 12.0, 30.0, 118.0
    t = np.arange(0, 1601) * dt
    retort = np.minimum(t0 + (t_hold - t0) * t / t_ramp, t_hold)
    cold = superpose(t, retort, t0, HEATING_CURVE)
    for time in (5.0, 12.0, 20.0, 45.0, 80.0):
        excess = lambda tau: min((t_hold - t0) * tau / t_ramp, t_hold - t0)
        integral, _ = quad(
            lambda tau: excess(tau) * du(time - tau), 0.0, time,
            points=[max(time - lag, 0.0), min(t_ramp, time)], epsabs=1e-11, limit=200,
        )
        n = round(time / dt)
        # tolerance: the lag's slope break (a jump of ln10/fh in U') falls inside one interval,
        # where the 6-node Gauss-Legendre mean errs by ~ (ln10/fh) dt / 36 ~ 1e-4; times the
        # retort increment per interval (0.37 °C) that is a few 1e-5 °C at most
        assert cold[n] == pytest.approx(t0 + integral, abs=3e-5)


@pytest.mark.parametrize("name", KERNELS)
def test_linearity_doubling_retort_excess_doubles_response_excess(name):
    rng = np.random.default_rng(7)
    t = np.arange(0, 2001) * 0.05
    excess = np.cumsum(rng.normal(0.0, 0.5, t.size)) + 60.0
    t0 = 25.0
    one = superpose(t, t0 + excess, t0, KERNELS[name]) - t0
    two = superpose(t, t0 + 2.0 * excess, t0, KERNELS[name]) - t0
    np.testing.assert_allclose(two, 2.0 * one, rtol=1e-12, atol=1e-10)


@settings(max_examples=60, deadline=None)
@given(
    name=st.sampled_from(sorted(KERNELS)),
    dt=st.floats(0.01, 2.0),
    fractions=st.lists(st.floats(0.0, 1.0), min_size=2, max_size=300),
    t0=st.floats(0.0, 90.0),
    span=st.floats(0.0, 60.0),
)
def test_cold_spot_stays_between_initial_and_highest_retort(name, dt, fractions, t0, span):
    # for a monotone step response the cold spot is a weighted mean of past retort excesses
    t = np.arange(len(fractions)) * dt
    t_max = t0 + span
    retort = t0 + span * np.asarray(fractions)
    cold = superpose(t, retort, t0, KERNELS[name])
    tol = 1e-9 * max(1.0, t_max)  # rounding of the FFT convolution
    assert np.all(cold >= t0 - tol) and np.all(cold <= t_max + tol)


@pytest.mark.parametrize("name", KERNELS)
def test_two_phase_with_equal_kernels_equals_one_phase(name):
    t = np.arange(0, 3601) * (1.0 / 30.0)
    retort = np.interp(t, [0, 10, 40, 41, 50, 80, 85, 120], [50, 121, 121, 114, 121, 121, 20, 20])
    one = superpose(t, retort, 50.0, KERNELS[name])
    two = superpose(
        t, retort, 50.0, KERNELS[name], cooling_unaccomplished=KERNELS[name], cooling_start_min=80.0
    )
    np.testing.assert_allclose(two, one, rtol=0, atol=1e-10)


def test_two_phase_cooling_changes_use_cooling_kernel():
    heat = partial(step_unaccomplished, fh_min=30.0, jh=1.5)
    cool = partial(step_unaccomplished, fh_min=20.0, jh=1.2)
    dt, t_cool, t0 = 0.01, 60.0, 40.0
    t = np.arange(0, 12001) * dt
    retort = np.where(t <= t_cool, 121.0, 20.0)  # the drop is a ramp over [60, 60.01]
    cold = superpose(t, retort, t0, heat, cooling_unaccomplished=cool, cooling_start_min=t_cool)
    for time in (30.0, 60.0, 61.0, 70.0, 100.0):
        mean_u, _ = quad(lambda tau: 1.0 - scalar(cool, time - tau), t_cool, t_cool + dt)
        expected = t0 + (121.0 - t0) * (1.0 - scalar(heat, time)) - 101.0 * mean_u / dt
        n = round(time / dt)
        assert cold[n] == pytest.approx(expected, abs=1e-7)
    # documented behaviour: the heating-phase change keeps acting after steam-off
    n_cool = round(t_cool / dt)
    assert cold[n_cool + 100] > cold[n_cool]


def test_single_sample():
    out = superpose([0.0], [100.0], 20.0, HEATING_CURVE)
    assert out.tolist() == [20.0]


@pytest.mark.parametrize(
    "time, retort, match",
    [
        ([0.0, 1.0, 2.5, 3.0], [1.0] * 4, "not a uniform grid"),
        ([1.0, 2.0, 3.0], [1.0] * 3, "starting at 0"),
        ([0.0, 1.0, 2.0], [1.0] * 2, "shape"),
        ([0.0, 0.0, 0.0], [1.0] * 3, "does not increase"),
        ([0.0, 1.0, 2.0], [1.0, np.nan, 1.0], "non-finite"),
        ([[0.0, 1.0]], [[1.0, 1.0]], "1-D"),
    ],
)
def test_bad_grids(time, retort, match):
    with pytest.raises(ModelInputError, match=match):
        superpose(time, retort, 20.0, HEATING_CURVE)


def test_fft_convolution_matches_scipy_signal():
    from scipy.signal import fftconvolve  # the implementation it replaced

    rng = np.random.default_rng(3)
    for m in (1, 2, 7, 64, 1000, 4799):
        a, b = rng.normal(size=m), rng.random(m)
        np.testing.assert_allclose(superposition._causal_convolution(a, b),
                                   fftconvolve(a, b)[:m], rtol=0, atol=1e-9)


def test_importing_superposition_does_not_import_scipy_signal():
    # scipy.signal costs start-up time; scipy.fft does the convolution
    code = ("import sys, deviation.physics.heating.superposition; "
            "print('scipy.signal' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         timeout=120, check=True)
    assert out.stdout.strip() == "False"


# --- bounding superposition (two step responses) ----------------------------------------------

RISE, FALL = bounding_kernels(52.0, 1.92, 52.35, 2.05)


def bounding(t, retort, t0, rise=RISE, fall=FALL):
    return superpose(t, retort, t0, rise, falling_unaccomplished=fall)


def test_bounding_rises_only_is_duhamel_with_the_rise_response():
    # a retort temperature that never falls: the slow side answers every change
    t = np.arange(0, 2401) * 0.05
    retort = np.interp(t, [0, 10, 40, 45, 120], [40, 121.1, 121.1, 123, 123])
    linear = superpose(t, retort, 40.0, RISE)
    bound = bounding(t, retort, 40.0)
    assert np.all(bound <= linear + 1e-9)
    # each window's oldest end rounded back to a sample: on average half a 3-s step of an
    # 8 °C/min ramp, times the share of the response the ramp carries
    assert np.max(linear - bound) < 0.1


def test_bounding_falls_only_is_duhamel_with_the_fall_response():
    t = np.arange(0, 2401) * 0.05
    retort = np.interp(t, [0, 2, 60, 61, 120], [121.1, 121.1, 110, 20, 20])
    linear = superpose(t, retort, 121.1, FALL)
    bound = bounding(t, retort, 121.1)
    assert np.all(bound <= linear + 1e-9)
    assert np.max(linear - bound) < 0.1


@pytest.mark.parametrize("dt", [1.0 / 60.0, 0.05, 0.5, 1.0])
def test_bounding_with_one_response_on_both_sides_is_duhamel_from_below(dt):
    # the same response twice: Duhamel's integral (exact for conduction), less the outward
    # rounding of the windows; largest at the 100 °C fall in one grid step
    t = np.arange(0, round(200 / dt) + 1) * dt
    retort = np.interp(t, [0, 10, 40, 41, 49, 50, 80, 80 + dt, 200],
                       [40, 121.1, 121.1, 115, 115, 121.1, 121.1, 20, 20])
    linear = superpose(t, retort, 40.0, CONDUCTION)
    bound = bounding(t, retort, 40.0, CONDUCTION, CONDUCTION)
    assert np.all(bound <= linear + 1e-9)
    assert np.max(linear - bound) < 0.3


def test_bounding_step_responses():
    # a step up answers with the rise response, a step down from equilibrium with the fall one
    t = np.arange(0, 2001) * 0.05  # ages sampled at every grid step: exact at the samples
    up = bounding(t, np.full_like(t, 121.1), 40.0)
    np.testing.assert_allclose(up, 40.0 + 81.1 * (1.0 - RISE(t)), atol=1e-12)
    # a fall is answered up to one grid step early (the earliest age rounded down): conservative
    down = bounding(t, np.full_like(t, 20.0), 121.1)
    np.testing.assert_allclose(down, 121.1 - 101.1 * (1.0 - FALL(t + 0.05)), atol=1e-12)


@pytest.mark.parametrize("jh", [0.7, 1.0, 1.9])
def test_short_retort_spike_raises_the_cold_spot_by_a_tiny_amount(jh):
    # issue 12: a 6.7 °C spike for 0.1 min raised the cold spot 2.2 °C with jh < 1
    t = np.arange(0, 1201) * 0.05
    retort = np.full_like(t, 115.0)
    spike = (t > 20.0 + 1e-9) & (t <= 20.1 + 1e-9)
    rise, fall = bounding_kernels(52.0, jh, 52.0, jh)
    base = superpose(t, retort, 115.0, rise, falling_unaccomplished=fall)
    spiked = superpose(t, np.where(spike, 121.7, retort), 115.0, rise,
                       falling_unaccomplished=fall)
    assert np.all(spiked >= base - 1e-12)
    # at most the heat a spike of 0.1 min can carry at the fastest initial rate (ln10/fh)
    assert np.max(spiked - base) <= 6.7 * 0.1 * math.log(10.0) / 52.0 + 1e-9
    # a single continuous kernel answers it as little
    linear = superpose(t, np.where(spike, 121.7, retort), 115.0, step_unaccomplished_(jh))
    assert np.max(linear - 115.0) <= 6.7 * 0.1 * math.log(10.0) / 52.0 + 1e-9


def step_unaccomplished_(jh):
    return partial(step_unaccomplished, fh_min=52.0, jh=jh)


def test_bounding_cold_spot_rises_monotonically_under_a_rising_retort():
    t = np.arange(0, 1601) * 0.05
    retort = np.interp(t, [0, 10, 80], [30, 121.1, 121.1])
    cold = bounding(t, retort, 30.0)
    assert np.all(np.diff(cold) >= -1e-12)


def _history(values, t):
    return np.interp(t, np.linspace(0.0, t[-1], len(values)), values)


@settings(max_examples=60, deadline=None)
@given(
    values=st.lists(st.floats(20.0, 125.0), min_size=2, max_size=30),
    lower_by=st.lists(st.floats(0.0, 15.0), min_size=2, max_size=30),
    dt=st.sampled_from([0.05, 0.25, 1.0]),
    t0=st.floats(20.0, 90.0),
)
def test_bounding_retort_lower_everywhere_never_gives_a_hotter_cold_spot(values, lower_by, dt, t0):
    t = np.arange(round(150 / dt) + 1) * dt
    retort = _history(values, t)
    lower = retort - _history(lower_by, t)
    hot = bounding(t, retort, t0)
    cold = bounding(t, lower, t0)
    assert np.all(cold <= hot + 1e-9)
    # and the cold spot stays between the lowest and highest temperatures it has seen
    assert np.all(hot >= min(t0, retort.min()) - 1e-9)
    assert np.all(hot <= max(t0, retort.max()) + 1e-9)


@settings(max_examples=40, deadline=None)
@given(
    values=st.lists(st.floats(20.0, 125.0), min_size=2, max_size=30),
    weight=st.floats(0.0, 1.0),
    dt=st.sampled_from([0.05, 0.5]),
    t0=st.floats(20.0, 90.0),
)
def test_bounding_below_every_response_inside_the_bracket(values, weight, dt, t0):
    # any product whose step response lies between the two (here a mixture of them) is at least
    # as hot as the bound, whatever the retort did
    t = np.arange(round(150 / dt) + 1) * dt
    retort = _history(values, t)

    def inside(x):
        return weight * RISE(x) + (1.0 - weight) * FALL(x)

    assert np.all(bounding(t, retort, t0) <= superpose(t, retort, t0, inside) + 1e-9)


def test_bounding_single_sample_and_errors():
    assert bounding([0.0], [121.1], 40.0).tolist() == [40.0]
    t = np.arange(5) * 1.0
    with pytest.raises(ModelInputError, match="cannot be combined"):
        superpose(t, np.full(5, 100.0), 20.0, RISE, falling_unaccomplished=FALL,
                  cooling_unaccomplished=FALL, cooling_start_min=2.0)
    with pytest.raises(ModelInputError, match="falling_unaccomplished returned"):
        superpose(t, np.full(5, 100.0), 20.0, RISE, falling_unaccomplished=lambda x: np.ones(3))


def test_bad_callable_and_half_given_cooling():
    t = np.arange(5) * 1.0
    with pytest.raises(ModelInputError, match="same shape"):
        superpose(t, np.full(5, 100.0), 20.0, lambda x: np.ones(3))
    with pytest.raises(ModelInputError, match="together"):
        superpose(t, np.full(5, 100.0), 20.0, HEATING_CURVE, cooling_start_min=2.0)
