"""Tests for semilog_broken_fit: Ball's semi-log method on a broken heating curve.

Synthetic data with known parameters (derived values, not a published example): Ball's broken
heating curve (Ball 1923; Stumbo 1973) after a come-up, zero at the corrected zero (58 % of the
come-up), ``T = T_R - (T_R - IT) S(t - t0)`` with ``S`` the broken curve with its lag capped at
1 (``rising_unaccomplished_broken``): the first line (fh, jh) to the break ``x_bh`` counted from
the corrected zero, the second (fh2) after it.
"""

from __future__ import annotations

import functools
import json

import numpy as np
import pytest

from deviation.errors import ModelError
from deviation.physics.calibration.results import BrokenHeatingCurveFit, HeatingCurveFit
from deviation.physics.calibration.semilog import semilog_broken_fit, semilog_fit
from deviation.physics.heating.conduction import (
    cylinder_centre_unaccomplished,
    diffusivity_from_fh_cylinder,
)
from deviation.physics.heating.heating_curve import (
    break_temperature,
    rising_unaccomplished_broken,
)
from deviation.physics.heating.superposition import superpose

TR_C = 121.1


def broken_curve(t, fh, jh, fh2, xbh, come_up, IT, TR=TR_C):
    """Exact broken heating curve; the initial temperature during the come-up."""
    t0 = 0.58 * come_up
    T = TR - (TR - IT) * rising_unaccomplished_broken(t - t0, fh, jh, fh2, xbh)
    return np.where(t >= come_up, T, IT)


CASES = [
    # fh, jh, fh2, xbh, come-up, IT, reading interval [min]
    (20.0, 1.6, 60.0, 25.0, 8.0, 60.0, 1.0),
    (12.0, 1.2, 30.0, 10.0, 5.0, 70.0, 0.5),
    (30.0, 2.0, 45.0, 40.0, 10.0, 40.0, 1.0),
    (8.0, 1.0, 40.0, 6.0, 4.0, 50.0, 0.25),
]


@pytest.mark.parametrize("fh, jh, fh2, xbh, come_up, IT, step", CASES)
def test_detects_and_recovers_an_exact_broken_curve(fh, jh, fh2, xbh, come_up, IT, step):
    t = np.arange(0.0, 3.0 * fh2 + step / 2, step)
    T = broken_curve(t, fh, jh, fh2, xbh, come_up, IT)
    fit = semilog_broken_fit(t, T, TR_C, come_up_min=come_up, initial_C=IT)
    assert fit.broken and not fit.break_given
    assert fit.fh_min == pytest.approx(fh, rel=1e-9)
    assert fit.jh == pytest.approx(jh, rel=1e-9)
    assert fit.fh2_min == pytest.approx(fh2, rel=1e-9)
    assert fit.break_min == pytest.approx(xbh, abs=1e-7)
    assert fit.break_time_min == pytest.approx(0.58 * come_up + xbh, abs=1e-7)
    assert fit.corrected_zero_min == pytest.approx(0.58 * come_up)
    # the break temperature is the one the physics layer computes from the same parameters
    assert fit.break_temperature_C == pytest.approx(break_temperature(fh, jh, xbh, IT, TR_C),
                                                    abs=1e-7)
    # the windows: the first line ends before the break, the second starts at or after it
    assert fit.window_end_min <= fit.break_time_min <= fit.window2_start_min
    assert fit.n_points >= 5 and fit.n_points2 >= 5
    assert fit.note == ""


@pytest.mark.parametrize("fh, jh, fh2, xbh, come_up, IT, step", CASES)
def test_given_break_gives_the_same_exact_figures(fh, jh, fh2, xbh, come_up, IT, step):
    t = np.arange(0.0, 3.0 * fh2 + step / 2, step)
    T = broken_curve(t, fh, jh, fh2, xbh, come_up, IT)
    fit = semilog_broken_fit(t, T, TR_C, come_up_min=come_up, initial_C=IT, break_min=xbh)
    assert fit.break_given and fit.break_min == xbh
    assert (fit.fh_min, fit.jh, fit.fh2_min) == pytest.approx((fh, jh, fh2), rel=1e-9)


def test_noisy_broken_curve_within_tolerance():
    # 0.1 °C thermocouple noise, readings every minute (30 seeds measured: fh and jh within
    # 1 %, fh2 within 3.7 %, x_bh within 1.0 min)
    fh, jh, fh2, xbh, come_up, IT = 20.0, 1.6, 60.0, 25.0, 8.0, 60.0
    t = np.arange(0.0, 180.0, 1.0)
    T = broken_curve(t, fh, jh, fh2, xbh, come_up, IT)
    for seed in range(10):
        noisy = T + np.random.default_rng(seed).normal(0.0, 0.1, T.size)
        fit = semilog_broken_fit(t, noisy, TR_C, come_up_min=come_up, initial_C=IT)
        assert fit.broken
        assert fit.fh_min == pytest.approx(fh, rel=0.02)
        assert fit.jh == pytest.approx(jh, rel=0.02)
        assert fit.fh2_min == pytest.approx(fh2, rel=0.06)
        assert fit.break_min == pytest.approx(xbh, abs=2.0)
        assert 0.05 < fit.noise_estimate_C < 0.2


def test_a_straight_curve_has_no_break_and_matches_semilog_fit():
    # Ball's single straight line (Ball 1923): the result is semilog_fit's, with no second line
    t = np.arange(0.0, 150.0, 1.0)
    fh, jh, come_up, IT = 30.0, 1.7, 10.0, 40.0
    T = np.where(t >= come_up, TR_C - jh * (TR_C - IT) * 10.0 ** (-(t - 5.8) / fh), np.nan)
    T = np.where(t >= come_up, np.minimum(T, TR_C), IT)
    fit = semilog_broken_fit(t, T, TR_C, come_up_min=come_up, initial_C=IT)
    single = semilog_fit(t, T, TR_C, come_up_min=come_up, initial_C=IT)
    assert not fit.broken
    assert fit.fh2_min is None and fit.break_min is None and fit.break_temperature_C is None
    assert fit.fh_min == pytest.approx(single.fh_min, rel=1e-12)
    assert fit.jh == pytest.approx(single.jh, rel=1e-12)
    assert fit.window_start_min == single.window_start_min
    assert fit.note.startswith("no break")


@pytest.mark.parametrize("fh", [20.0, 52.0])
@pytest.mark.parametrize("noise_C", [0.0, 0.05, 0.2, 0.5])
def test_no_false_break_on_a_conduction_curve(fh, noise_C):
    # the centre of a conduction can (Carslaw & Jaeger series) after a 10-min come-up ramp:
    # a lag, then one line. With noise the lag's end can look like a flatter first line; a
    # faster second line is therefore never reported without break_min.
    radius, height = 0.0435, 0.115
    kernel = functools.partial(cylinder_centre_unaccomplished,
                               diffusivity_m2_s=diffusivity_from_fh_cylinder(fh, radius, height),
                               radius_m=radius, height_m=height)
    t = np.arange(0.0, 3.0 * fh + 10.0, 1.0)
    retort = np.where(t < 10.0, 40.0 + 81.1 * t / 10.0, TR_C)
    centre = superpose(t, retort, 40.0, kernel)
    for seed in range(5):
        noisy = centre + np.random.default_rng(seed).normal(0.0, noise_C, t.size)
        fit = semilog_broken_fit(t, noisy, TR_C, come_up_min=10.0, initial_C=40.0)
        assert not fit.broken, fit.note


def test_hold_ending_before_the_break_has_no_break():
    fh, jh, fh2, xbh, come_up, IT = 20.0, 1.6, 60.0, 60.0, 8.0, 60.0
    t = np.arange(0.0, 50.0, 1.0)
    fit = semilog_broken_fit(t, broken_curve(t, fh, jh, fh2, xbh, come_up, IT), TR_C,
                             come_up_min=come_up, initial_C=IT)
    assert not fit.broken
    assert fit.fh_min == pytest.approx(fh, rel=1e-9)


def test_a_faster_second_line_only_with_the_break_given():
    # fh2 < fh: on the semi-log plot it looks like a lag; found only when the break is given
    fh, jh, fh2, xbh, come_up, IT = 40.0, 1.0, 20.0, 30.0, 5.0, 50.0
    t = np.arange(0.0, 120.0, 1.0)
    t0 = 0.58 * come_up
    log10_s = -np.minimum(t - t0, xbh) / fh - np.maximum(t - t0 - xbh, 0.0) / fh2
    T = np.where(t >= come_up, TR_C - (TR_C - IT) * 10.0 ** np.minimum(log10_s, 0.0), IT)
    assert not semilog_broken_fit(t, T, TR_C, come_up_min=come_up, initial_C=IT).broken
    fit = semilog_broken_fit(t, T, TR_C, come_up_min=come_up, initial_C=IT, break_min=xbh)
    assert (fit.fh_min, fit.jh, fit.fh2_min) == pytest.approx((fh, jh, fh2), rel=1e-9)


def test_reads_plateau_and_steam_off_from_a_retort_record():
    fh, jh, fh2, xbh, come_up, IT = 20.0, 1.6, 60.0, 25.0, 8.0, 60.0
    t = np.arange(0.0, 200.0, 1.0)
    T = broken_curve(t, fh, jh, fh2, xbh, come_up, IT)
    off = 150.0
    retort = np.where(t < come_up, IT + (TR_C - IT) * t / come_up, TR_C)
    retort = np.where(t > off, 20.0, retort)
    T = np.where(t > off, 30.0, T)  # cooling readings: left out
    fit = semilog_broken_fit(t, T, retort, come_up_min=come_up, initial_C=IT)
    assert fit.retort_C == pytest.approx(TR_C)
    assert (fit.fh_min, fit.fh2_min, fit.break_min) == pytest.approx((fh, fh2, xbh), rel=1e-9)


def test_given_break_errors():
    fh, jh, fh2, xbh, come_up, IT = 20.0, 1.6, 60.0, 25.0, 8.0, 60.0
    t = np.arange(0.0, 150.0, 1.0)
    T = broken_curve(t, fh, jh, fh2, xbh, come_up, IT)
    with pytest.raises(ModelError, match="break_min"):
        semilog_broken_fit(t, T, TR_C, come_up_min=come_up, break_min=-1.0)
    with pytest.raises(ModelError, match="readings before it"):
        semilog_broken_fit(t, T, TR_C, come_up_min=come_up, break_min=0.5)
    with pytest.raises(ModelError, match="no straight first line"):
        # the lag alone (flat, then the start of the line) before a break 1 min after it
        flat = np.where(t < 40.0, IT, T)
        semilog_broken_fit(t, flat, TR_C, come_up_min=come_up, initial_C=IT, break_min=33.0)


def test_result_is_json_able_and_keeps_the_single_line_names():
    fh, jh, fh2, xbh, come_up, IT = 20.0, 1.6, 60.0, 25.0, 8.0, 60.0
    t = np.arange(0.0, 150.0, 1.0)
    fit = semilog_broken_fit(t, broken_curve(t, fh, jh, fh2, xbh, come_up, IT), TR_C,
                             come_up_min=come_up, initial_C=IT)
    assert isinstance(fit, BrokenHeatingCurveFit)
    d = fit.to_dict()
    json.dumps(d)
    # every field of the single-line result, same meaning, plus the second line's
    single = set(HeatingCurveFit.__dataclass_fields__)
    assert single <= set(d)
    assert {"fh2_min", "break_min", "break_time_min", "break_temperature_C", "break_given",
            "r_squared2", "rms_residual2_C", "window2_start_min", "window2_end_min",
            "n_points2"} <= set(d)
    assert HeatingCurveFit.__dataclass_fields__.keys() == {
        "fh_min", "jh", "retort_C", "initial_C", "come_up_min", "corrected_zero_min",
        "pseudo_initial_C", "r_squared", "rms_residual_C", "window_start_min",
        "window_end_min", "n_points", "noise_estimate_C", "note"}


# --------------------------------------------------------------------------------------------
# the whole test: fit_all finds the break, paste_table files it (with its break temperature)


def test_fit_all_and_paste_table_file_a_broken_curve():
    import tomllib

    from deviation.cli.fit import paste_table
    from deviation.inputs.case import HeatPenetration
    from deviation.inputs.heat_penetration import read_heat_penetration_csv
    from deviation.physics.calibration import fit_all

    fh, jh, fh2, xbh, come_up, IT = 24.0, 1.2, 75.0, 12.0, 10.0, 60.0
    t = np.arange(0.0, 200.0, 0.5)
    retort = np.where(t < come_up, IT + (TR_C - IT) * t / come_up, TR_C)
    rows = ["time_min,retort_C,tc1_C,tc2_C"]
    slow = broken_curve(t, fh, jh, fh2, xbh, come_up, IT)
    fast = broken_curve(t, 0.8 * fh, jh, 0.8 * fh2, xbh, come_up, IT)  # not the slowest
    rows += [f"{a:g},{r:.4f},{b:.4f},{c:.4f}" for a, r, b, c in zip(t, retort, slow, fast)]
    report = fit_all(read_heat_penetration_csv("\n".join(rows) + "\n", source="broken.csv"))
    assert report.chosen == "tc1"
    tc = report.chosen_fit()
    assert tc.broken is not None and tc.broken.fh2_min == pytest.approx(fh2, rel=1e-3)
    table = tomllib.loads(paste_table(report))["process"]["heat_penetration"]
    hp = HeatPenetration.model_validate(table)  # accepted as filed: the break temperature with it
    assert (hp.fh_min, hp.jh, hp.fh2_min, hp.break_min) == pytest.approx((fh, jh, fh2, xbh), rel=1e-3)
    assert hp.break_temperature_C == pytest.approx(break_temperature(fh, jh, xbh, IT, TR_C), abs=0.05)
