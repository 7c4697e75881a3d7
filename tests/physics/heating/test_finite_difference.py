"""Finite-difference conduction solver: against the analytical series, convergence, properties.

The independent reference for a surface held at the retort temperature is the analytical series
solution (Carslaw & Jaeger, *Conduction of Heat in Solids*, 1959: infinite-cylinder Bessel series
times infinite-slab cosine series; brick: three slab series), superposed over the record by
Duhamel's theorem (``deviation.physics.heating.conduction`` + ``superpose``; exact for a piecewise-linear
record). Checks against the published Biot-number solutions are in
``tests/reference/test_reference_finite_difference.py``.
"""

from __future__ import annotations

from functools import partial

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from deviation.errors import ModelError
from deviation.physics.heating import conduction, superpose
from deviation.physics.heating.finite_difference import FDResult, brick_fd, cylinder_fd
from deviation.physics.lethality import general_method

RADIUS_M, HEIGHT_M = 0.081 / 2.0, 0.111  # 81 x 111 mm can (common practice size)
ALPHA_CYL = conduction.diffusivity_from_fh_cylinder(40.0, RADIUS_M, HEIGHT_M)
BRICK_M = (0.12, 0.08, 0.035)  # a tray: 120 x 80 x 35 mm
ALPHA_BRICK = conduction.diffusivity_from_fh_brick(30.0, *BRICK_M)
TREF_C, Z_C = 121.1, 10.0


def cycle(step_s=1.0):
    """2-h record: come-up 10 min, hold 121.1 °C with a drop to 115 °C at 40-50 min, cooling."""
    time_min = np.arange(0.0, 120.0 + 1e-9, step_s / 60.0)
    knots_min = [0.0, 10.0, 40.0, 41.0, 49.0, 50.0, 85.0, 88.0, 120.0]
    knots_C = [40.0, 121.1, 121.1, 115.0, 115.0, 121.1, 121.1, 20.0, 20.0]
    return time_min, np.interp(time_min, knots_min, knots_C)


def F0(time_min, temperature_C):
    return general_method(time_min, temperature_C, TREF_C, Z_C)[0]


@pytest.fixture(scope="module")
def record():
    return cycle(step_s=6.0)  # evaluate.py resamples records to 1-6 s steps


def test_cylinder_dirichlet_F_within_half_percent_of_series(record):
    t, retort = record
    series_C = superpose(t, retort, 40.0, partial(
        conduction.cylinder_centre_unaccomplished,
        diffusivity_m2_s=ALPHA_CYL, radius_m=RADIUS_M, height_m=HEIGHT_M))
    res = cylinder_fd(t, retort, initial_C=40.0, diffusivity_m2_s=ALPHA_CYL,
                      radius_m=RADIUS_M, height_m=HEIGHT_M)
    assert isinstance(res, FDResult)
    F_series, F_fd = F0(t, series_C), F0(t, res.cold_spot_C)
    # issue's accuracy target for the default grid (measured: -0.36 %)
    assert abs(F_fd / F_series - 1.0) < 5e-3
    # second-order grid, 26 x 33 nodes: the centre lags the series by under 0.15 °C (measured
    # 0.10 °C, in the steep cooling)
    assert np.max(np.abs(res.cold_spot_C - series_C)) < 0.15
    assert res.cold_spot_C[0] == 40.0
    assert res.final_field_C.shape == (26, 33)
    assert res.grid["r_m"][-1] == pytest.approx(RADIUS_M)
    assert res.grid["z_m"][-1] == pytest.approx(HEIGHT_M / 2.0)
    np.testing.assert_allclose(res.final_field_C[-1, :], retort[-1])  # Dirichlet surface


def test_brick_dirichlet_F_within_half_percent_of_series(record):
    t, retort = record
    series_C = superpose(t, retort, 40.0, partial(
        conduction.brick_centre_unaccomplished, diffusivity_m2_s=ALPHA_BRICK,
        length_m=BRICK_M[0], width_m=BRICK_M[1], thickness_m=BRICK_M[2]))
    res = brick_fd(t, retort, initial_C=40.0, diffusivity_m2_s=ALPHA_BRICK,
                   length_m=BRICK_M[0], width_m=BRICK_M[1], thickness_m=BRICK_M[2])
    F_series, F_fd = F0(t, series_C), F0(t, res.cold_spot_C)
    assert abs(F_fd / F_series - 1.0) < 5e-3  # measured -0.21 % at the default 13 nodes
    assert np.max(np.abs(res.cold_spot_C - series_C)) < 0.25  # measured 0.16 °C
    assert res.final_field_C.shape == (13, 13, 13)


def test_tuna_can_also_meets_half_percent():
    """A flat can (87 x 30 mm, fh 12 min: from memory, typical of a 307x113 can)."""
    t, retort = cycle(step_s=6.0)
    radius, height = 0.0435, 0.030
    alpha = conduction.diffusivity_from_fh_cylinder(12.0, radius, height)
    series_C = superpose(t, retort, 40.0, partial(
        conduction.cylinder_centre_unaccomplished, diffusivity_m2_s=alpha, radius_m=radius,
        height_m=height))
    res = cylinder_fd(t, retort, initial_C=40.0, diffusivity_m2_s=alpha, radius_m=radius,
                      height_m=height)
    assert abs(F0(t, res.cold_spot_C) / F0(t, series_C) - 1.0) < 5e-3


def test_time_step_does_not_matter_at_the_default_step(record):
    """Merged steps (default) against a step at every record sample: F0 agrees to 0.05 %."""
    t, retort = record
    kw = dict(initial_C=40.0, diffusivity_m2_s=ALPHA_CYL, radius_m=RADIUS_M, height_m=HEIGHT_M)
    F_auto = F0(t, cylinder_fd(t, retort, **kw).cold_spot_C)
    F_fine = F0(t, cylinder_fd(t, retort, max_step_min=0.1, **kw).cold_spot_C)
    assert abs(F_auto / F_fine - 1.0) < 5e-4


def test_grid_refinement_observed_order_two():
    """Halving node spacing and time step together: the centre error falls 4-fold.

    Step in surface temperature 40 -> 121.1 °C at t = 0; error = max |FD - series| over
    5-60 min. Expected order 2 (finite volumes and Crank–Nicolson weights are both second
    order); asserted between 1.6 and 2.4.
    """
    t = np.arange(0.0, 61.0, 1.0)
    retort = np.full_like(t, 121.1)
    exact = 121.1 - 81.1 * conduction.cylinder_centre_unaccomplished(
        t, ALPHA_CYL, RADIUS_M, HEIGHT_M)
    rows = []
    for k, (nr, nz) in enumerate([(6, 8), (11, 15), (21, 29), (41, 57)]):
        step = 2.0 / 2**k
        res = cylinder_fd(t, retort, initial_C=40.0, diffusivity_m2_s=ALPHA_CYL,
                          radius_m=RADIUS_M, height_m=HEIGHT_M, nr=nr, nz=nz,
                          max_step_min=step)
        rows.append((nr, nz, step, float(np.max(np.abs(res.cold_spot_C - exact)[5:]))))
    orders = [np.log2(a[3] / b[3]) for a, b in zip(rows, rows[1:])]
    print("\n  nr  nz  step[min]  max|error| [°C]  observed order")
    for row, order in zip(rows, [None, *orders]):
        print(f"{row[0]:>4}{row[1]:>4}{row[2]:>11.3f}{row[3]:>17.5f}"
              + (f"{order:>16.2f}" if order is not None else ""))
    # measured 1.82, 1.95, 1.99; the coarsest pair is outside the asymptotic range
    assert all(1.6 < p < 2.4 for p in orders[1:])
    assert rows[-1][3] < 0.05


def test_restart_from_final_field_equals_one_run(record):
    """A run continued from its own final field reproduces the single long run.

    The two runs take different steps near the restart (start-up half steps), so they agree
    to the time-discretisation error, not bit for bit.
    """
    t, retort = record
    kw = dict(diffusivity_m2_s=ALPHA_CYL, radius_m=RADIUS_M, height_m=HEIGHT_M)
    whole = cylinder_fd(t, retort, initial_C=40.0, **kw)
    cut = int(np.searchsorted(t, 45.0))  # inside the drop
    first = cylinder_fd(t[: cut + 1], retort[: cut + 1], initial_C=40.0, **kw)
    second = cylinder_fd(t[cut:], retort[cut:], initial_C=first.final_field_C, **kw)
    joined = np.concatenate([first.cold_spot_C, second.cold_spot_C[1:]])
    assert np.max(np.abs(joined - whole.cold_spot_C)) < 2e-3
    assert np.max(np.abs(second.final_field_C - whole.final_field_C)) < 2e-3


def test_brick_restart_with_a_finite_surface_coefficient(record):
    t, retort = record
    kw = dict(diffusivity_m2_s=ALPHA_BRICK, length_m=BRICK_M[0], width_m=BRICK_M[1],
              thickness_m=BRICK_M[2], surface_htc_W_m2K=200.0, thermal_conductivity_W_mK=0.5,
              n=9)
    whole = brick_fd(t, retort, initial_C=40.0, **kw)
    cut = int(np.searchsorted(t, 60.0))
    first = brick_fd(t[: cut + 1], retort[: cut + 1], initial_C=40.0, **kw)
    second = brick_fd(t[cut:], retort[cut:], initial_C=first.final_field_C, **kw)
    assert np.max(np.abs(second.cold_spot_C - whole.cold_spot_C[cut:])) < 2e-3


def test_uneven_initial_field_is_used():
    """A lot that cooled unevenly: warm core, cold shell. The centre starts at the field's centre
    value and, with the retort at the core temperature, first falls (the cold shell draws
    heat), which no uniform start can show."""
    nr, nz = 26, 33
    r = np.linspace(0.0, 1.0, nr)[:, None]
    z = np.linspace(0.0, 1.0, nz)[None, :]
    field = 30.0 + 40.0 * (1.0 - r**2) * (1.0 - z**2)  # 70 °C centre, 30 °C surface
    t = np.arange(0.0, 30.0, 0.1)
    res = cylinder_fd(t, np.full_like(t, 70.0), initial_C=field, diffusivity_m2_s=ALPHA_CYL,
                      radius_m=RADIUS_M, height_m=HEIGHT_M)
    assert res.cold_spot_C[0] == 70.0
    assert res.cold_spot_C.min() < 69.0
    assert res.cold_spot_C[-1] > res.cold_spot_C.min()


def test_rannacher_start_up_stops_crank_nicolson_ringing():
    """Surface step 40 -> 121.1 °C with 1-min steps (ατ/Δr² ≈ 5): plain Crank–Nicolson weights
    overshoot the retort temperature by degrees next to the surface; the start-up does not."""
    t = np.array([0.0, 1.0])
    retort = np.full(2, 121.1)
    kw = dict(initial_C=40.0, diffusivity_m2_s=ALPHA_CYL, radius_m=RADIUS_M, height_m=HEIGHT_M,
              max_step_min=1.0)
    plain = cylinder_fd(t, retort, jump_C=None, **kw)
    started = cylinder_fd(t, retort, **kw)
    assert plain.final_field_C.max() > 121.1 + 1.0  # measured +8.1 °C
    assert started.final_field_C.max() <= 121.1 + 1e-9
    assert started.final_field_C.min() >= 40.0 - 1e-9


@settings(max_examples=12, deadline=None)
@given(
    st.lists(st.floats(20.0, 121.1), min_size=3, max_size=12),
    st.floats(20.0, 121.1),
    st.sampled_from([None, 30.0, 1000.0]),
    st.floats(0.2, 5.0),
)
def test_maximum_principle(retort_values, initial_C, htc, record_step_min):
    """No temperature leaves the range of the initial and retort temperatures (maximum
    principle of the heat equation); a tolerance of 0.01 °C allows the Crank–Nicolson
    weights' small non-monotone response at large steps."""
    retort = np.asarray(retort_values)
    t = record_step_min * np.arange(retort.size)
    lo, hi = min(retort.min(), initial_C), max(retort.max(), initial_C)
    for end in (retort.size // 2 + 1, retort.size):  # fields part-way and at the end
        res = cylinder_fd(t[:end], retort[:end], initial_C=initial_C,
                          diffusivity_m2_s=ALPHA_CYL, radius_m=RADIUS_M, height_m=HEIGHT_M,
                          surface_htc_W_m2K=htc, thermal_conductivity_W_mK=0.5, nr=11, nz=14)
        for values in (res.final_field_C, res.cold_spot_C):
            assert values.max() <= hi + 0.01
            assert values.min() >= lo - 0.01


def test_brick_maximum_principle_on_a_step():
    t = np.arange(0.0, 20.0, 0.5)
    res = brick_fd(t, np.full_like(t, 121.1), initial_C=40.0, diffusivity_m2_s=ALPHA_BRICK,
                   length_m=BRICK_M[0], width_m=BRICK_M[1], thickness_m=BRICK_M[2], n=9)
    assert res.final_field_C.max() <= 121.1 + 0.01
    assert res.final_field_C.min() >= 40.0 - 0.01
    assert np.all(np.diff(res.cold_spot_C) >= -1e-6)  # the centre only heats


def test_irregular_record_same_as_regular():
    """Readings at irregular times on the same straight lines give the same cold spot."""
    t = np.arange(0.0, 40.0, 0.02)  # fine, so interpolating its result costs < 1e-3 °C
    retort = np.interp(t, [0.0, 10.0, 40.0], [40.0, 121.1, 121.1])
    rng = np.random.default_rng(3)
    t_irr = np.unique(np.concatenate([[0.0, 10.0, 39.9], rng.uniform(0.0, 39.9, 60)]))
    retort_irr = np.interp(t_irr, [0.0, 10.0, 40.0], [40.0, 121.1, 121.1])
    kw = dict(initial_C=40.0, diffusivity_m2_s=ALPHA_CYL, radius_m=RADIUS_M, height_m=HEIGHT_M)
    regular = cylinder_fd(t, retort, **kw)
    irregular = cylinder_fd(t_irr, retort_irr, **kw)
    np.testing.assert_allclose(irregular.cold_spot_C, np.interp(t_irr, t, regular.cold_spot_C),
                               atol=5e-3)


def test_single_sample_returns_the_initial_state():
    res = cylinder_fd([0.0], [121.1], initial_C=40.0, diffusivity_m2_s=ALPHA_CYL,
                      radius_m=RADIUS_M, height_m=HEIGHT_M)
    assert res.cold_spot_C.tolist() == [40.0]


@pytest.mark.parametrize(
    "kwargs, fragment",
    [
        (dict(surface_htc_W_m2K=100.0), "thermal_conductivity_W_mK"),
        (dict(surface_htc_W_m2K=-1.0, thermal_conductivity_W_mK=0.5), "surface_htc_W_m2K"),
        (dict(diffusivity_m2_s=0.0), "diffusivity_m2_s"),
        (dict(nr=2), "nr"),
        (dict(theta=0.3), "theta"),
        (dict(initial_C=np.zeros((3, 3))), "initial_C has shape (3, 3)"),
        (dict(initial_C=float("nan")), "initial_C"),
    ],
)
def test_bad_inputs_name_the_parameter(kwargs, fragment):
    kw = dict(initial_C=40.0, diffusivity_m2_s=ALPHA_CYL, radius_m=RADIUS_M, height_m=HEIGHT_M)
    kw.update(kwargs)
    with pytest.raises(ValueError, match=fragment.replace("(", r"\(").replace(")", r"\)")) as info:
        cylinder_fd([0.0, 1.0], [40.0, 121.1], **kw)
    assert isinstance(info.value, ModelError)


def test_bad_record_is_reported():
    kw = dict(initial_C=40.0, diffusivity_m2_s=ALPHA_CYL, radius_m=RADIUS_M, height_m=HEIGHT_M)
    with pytest.raises(ModelError, match="does not increase"):
        cylinder_fd([0.0, 1.0, 1.0], [40.0, 50.0, 60.0], **kw)
    with pytest.raises(ModelError, match="retort_C has shape"):
        cylinder_fd([0.0, 1.0], [40.0], **kw)
    with pytest.raises(ModelError, match="thermal_conductivity_W_mK"):
        brick_fd([0.0, 1.0], [40.0, 121.1], initial_C=40.0, diffusivity_m2_s=ALPHA_BRICK,
                 length_m=0.1, width_m=0.1, thickness_m=0.03, surface_htc_W_m2K=50.0)
