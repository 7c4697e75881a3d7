"""Unit tests for deviation.physics.ball_formula (Ball's formula method)."""

import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy.special import exp1

from deviation.errors import ModelError
from deviation.physics.ball_formula import (
    BALL_COOLING_LAG,
    COME_UP_EFFECTIVENESS,
    M_PLUS_G_STEAM_C,
    M_PLUS_G_WATER_C,
    BallFormulaInputError,
    BallFormulaResult,
    ball_formula,
    ball_formula_process_time,
    ball_process_time,
    fh_over_u,
    g_end_of_heating,
    g_from_fh_over_u,
)

LN10 = math.log(10.0)
REPO_ROOT = Path(__file__).resolve().parents[2]

# a conduction-heated 87 x 115 mm can: fh 52 min, jh 2.0, IT 40 °C, RT 121.1 °C, CUT 10 min
BASE = {
    "fh_min": 52.0, "jh": 2.0, "initial_temperature_C": 40.0, "retort_temperature_C": 121.1,
    "process_time_min": 72.0, "come_up_time_min": 10.0,
}


def F(**changes):
    return ball_formula(**{**BASE, **changes}).F_min


# --- constants and the simple pieces --------------------------------------------------------


def test_constants_are_balls():
    assert BALL_COOLING_LAG == 1.41
    assert COME_UP_EFFECTIVENESS == 0.42
    assert M_PLUS_G_STEAM_C == pytest.approx(100.0)  # 180 °F as a difference
    assert M_PLUS_G_WATER_C == pytest.approx(130.0 * 5.0 / 9.0)  # 130 °F


def test_ball_process_time_counts_42_percent_of_come_up():
    assert ball_process_time(72.0, 10.0) == pytest.approx(76.2)
    assert ball_process_time(30.0) == 30.0
    assert ball_process_time(0.0, 0.0) == 0.0


def test_g_end_of_heating_is_the_straight_line():
    g = g_end_of_heating(52.0, 2.0, 40.0, 121.1, 76.2)
    assert g == pytest.approx(2.0 * 81.1 * 10.0 ** (-76.2 / 52.0), rel=1e-14)
    assert g_end_of_heating(30.0, 1.0, 20.0, 120.0, 0.0) == pytest.approx(100.0)
    # one log cycle per fh
    assert g_end_of_heating(30.0, 1.4, 20.0, 120.0, 30.0) == pytest.approx(14.0)


def test_result_fields_are_consistent():
    r = ball_formula(**BASE)
    assert isinstance(r, BallFormulaResult)
    assert r.ball_process_time_min == pytest.approx(76.2)
    assert r.g_C == pytest.approx(g_end_of_heating(52.0, 2.0, 40.0, 121.1, 76.2), rel=1e-14)
    assert r.fh_over_U == pytest.approx(fh_over_u(r.g_C), rel=1e-12)
    assert r.U_min == pytest.approx(52.0 / r.fh_over_U, rel=1e-12)
    assert r.U_min == pytest.approx(r.U_heating_min + r.U_cooling_min, rel=1e-14)
    assert r.U_heating_min > 0.0 and r.U_cooling_min > 0.0
    assert r.F_min == pytest.approx(r.U_min, rel=1e-14)  # RT = Tref
    assert r.g_break_C is None
    assert (r.z_C, r.reference_temperature_C, r.m_plus_g_C) == (10.0, 121.1, 100.0)
    for value in (r.F_min, r.U_min, r.g_C, r.fh_over_U):
        assert type(value) is float


def test_F_at_reference_temperature_converts_by_the_lethal_rate():
    at_115 = ball_formula(**{**BASE, "retort_temperature_C": 115.0})
    assert at_115.F_min == pytest.approx(at_115.U_min * 10.0 ** ((115.0 - 121.1) / 10.0))
    # F at another Tref and z: the same U, another conversion
    other = ball_formula(**BASE, z_C=8.0, reference_temperature_C=115.0)
    assert other.F_min == pytest.approx(other.U_min * 10.0 ** ((121.1 - 115.0) / 8.0))


# --- monotone behaviour ---------------------------------------------------------------------


def test_F_grows_with_process_time():
    values = [F(process_time_min=pt) for pt in np.arange(0.0, 181.0, 5.0)]
    assert np.all(np.diff(values) > 0.0)


def test_F_grows_with_come_up_time_through_the_42_percent_rule():
    values = [F(come_up_time_min=cut) for cut in (0.0, 5.0, 10.0, 20.0)]
    assert np.all(np.diff(values) > 0.0)


def test_F_grows_with_retort_temperature():
    values = [F(retort_temperature_C=rt) for rt in np.arange(110.0, 130.1, 0.5)]
    assert np.all(np.diff(values) > 0.0)


def test_F_falls_with_fh():
    values = [F(fh_min=fh) for fh in np.arange(10.0, 120.1, 2.0)]
    assert np.all(np.diff(values) < 0.0)


def test_F_falls_with_jh():
    values = [F(jh=jh) for jh in np.arange(0.6, 2.51, 0.1)]
    assert np.all(np.diff(values) < 0.0)


def test_F_falls_as_initial_temperature_falls():
    # a lower initial temperature (a common deviation) leaves a larger I = RT - IT and less F
    values = [F(initial_temperature_C=it) for it in np.arange(90.0, 4.9, -5.0)]
    assert np.all(np.diff(values) < 0.0)


@pytest.mark.parametrize("z_C, m_plus_g_C", [(10.0, 100.0), (10.0, 72.2), (5.0, 100.0),
                                             (1.0, 100.0), (25.0, 100.0)])
def test_fh_over_u_increases_with_g(z_C, m_plus_g_C):
    g = np.geomspace(1e-4, 3.0 * m_plus_g_C, 200)
    values = fh_over_u(g, z_C, m_plus_g_C)
    assert np.all(np.isfinite(values))
    assert np.all(np.diff(values) > 0.0)


def test_fh_over_u_is_never_above_the_heating_alone_bound():
    # cooling only adds lethality: fh/U <= ln10 / E1(ln10 g/z), equal where m <= 0
    g = np.geomspace(1e-3, 99.0, 60)
    bound = LN10 / exp1(LN10 * g / 10.0)
    assert np.all(fh_over_u(g) < bound)
    assert fh_over_u(150.0) == pytest.approx(LN10 / exp1(LN10 * 15.0), rel=1e-12)


def test_colder_cooling_water_cools_faster_and_credits_less():
    # same g, larger m + g: the cold spot starts further above the water and falls faster
    assert fh_over_u(5.0, 10.0, 110.0) > fh_over_u(5.0, 10.0, 100.0)
    assert fh_over_u(5.0, 10.0, M_PLUS_G_WATER_C) < fh_over_u(5.0, 10.0, 100.0)


def test_fh_over_u_depends_on_g_over_z_and_m_plus_g_over_z_only():
    # °F and °C give one relation: g = 18 °F with z = 18 °F is g = 10 °C with z = 10 °C
    assert fh_over_u(18.0, 18.0, 180.0) == pytest.approx(fh_over_u(10.0, 10.0, 100.0), rel=1e-12)


def test_fh_over_u_vectorised_equals_scalar():
    g = np.array([[0.01, 0.5], [3.0, 20.0]])
    out = fh_over_u(g)
    assert out.shape == g.shape
    for index, value in np.ndenumerate(g):
        assert out[index] == fh_over_u(float(value))
    assert isinstance(fh_over_u(3.0), float)


# --- inverses -------------------------------------------------------------------------------


@pytest.mark.parametrize("g_C", [1e-9, 1e-4, 0.03, 0.5, 2.0, 5.5, 12.0, 40.0, 99.0, 150.0])
def test_g_from_fh_over_u_round_trip_from_g(g_C):
    assert g_from_fh_over_u(fh_over_u(g_C)) == pytest.approx(g_C, rel=1e-10)


@pytest.mark.parametrize("fh_over_U", [0.01, 0.2, 0.5, 1.0, 4.27, 10.0, 100.0, 1000.0, 1e6])
@pytest.mark.parametrize("z_C, m_plus_g_C", [(10.0, 100.0), (10.0, 72.2), (7.0, 100.0)])
def test_g_from_fh_over_u_round_trip_from_fh_over_u(fh_over_U, z_C, m_plus_g_C):
    g = g_from_fh_over_u(fh_over_U, z_C, m_plus_g_C)
    assert fh_over_u(g, z_C, m_plus_g_C) == pytest.approx(fh_over_U, rel=1e-10)


@pytest.mark.parametrize("target", [2.5, 3.0, 6.0, 12.0])
@pytest.mark.parametrize("rt", [115.0, 121.1, 125.0])
def test_process_time_for_target_round_trips(target, rt):
    common = {"fh_min": 52.0, "jh": 2.0, "initial_temperature_C": 40.0,
              "retort_temperature_C": rt, "come_up_time_min": 10.0}
    pt = ball_formula_process_time(target, **common)
    assert pt > 0.0
    assert ball_formula(process_time_min=pt, **common).F_min == pytest.approx(target, rel=1e-9)


def test_process_time_is_zero_when_the_come_up_alone_suffices():
    assert ball_formula_process_time(1e-6, 5.0, 1.0, 100.0, 121.1, come_up_time_min=30.0) == 0.0


# --- broken heating curve -------------------------------------------------------------------


def test_broken_curve_with_equal_slopes_is_the_simple_curve():
    simple = ball_formula(**BASE)
    broken = ball_formula(**BASE, fh2_min=52.0, break_time_min=30.0)
    assert broken.F_min == pytest.approx(simple.F_min, rel=1e-12)
    assert broken.g_C == pytest.approx(simple.g_C, rel=1e-12)
    assert broken.g_break_C == pytest.approx(2.0 * 81.1 * 10.0 ** (-30.0 / 52.0))


def test_break_after_the_end_of_heating_is_the_simple_curve():
    simple = ball_formula(**BASE)
    late = ball_formula(**BASE, fh2_min=90.0, break_time_min=200.0)
    assert late.F_min == simple.F_min and late.g_break_C is None


def test_broken_curve_slower_after_the_break_gives_less_F():
    # a product that thickens (fh2 > fh1) heats more slowly after the break
    simple = ball_formula(**{**BASE, "fh_min": 30.0})
    broken = ball_formula(**{**BASE, "fh_min": 30.0}, fh2_min=60.0, break_time_min=25.0)
    assert broken.F_min < simple.F_min
    assert broken.g_C == pytest.approx(
        2.0 * 81.1 * 10.0 ** (-25.0 / 30.0) * 10.0 ** (-(76.2 - 25.0) / 60.0), rel=1e-13
    )
    assert broken.fh_over_U == pytest.approx(60.0 / broken.U_min, rel=1e-13)
    assert broken.U_min == pytest.approx(broken.U_heating_min + broken.U_cooling_min)


def test_broken_curve_F_falls_as_the_break_comes_earlier():
    values = [ball_formula(**{**BASE, "fh_min": 30.0}, fh2_min=60.0, break_time_min=x).F_min
              for x in (70.0, 50.0, 30.0, 10.0, 0.0)]
    assert np.all(np.diff(values) < 0.0)


# --- input validation: ValueError naming the parameter and its unit --------------------------


@pytest.mark.parametrize(
    "changes, name, unit",
    [
        ({"fh_min": 0.0}, "fh_min", "[min]"),
        ({"fh_min": -3.0}, "fh_min", "[min]"),
        ({"fh_min": math.nan}, "fh_min", "[min]"),
        ({"jh": 0.0}, "jh", "[-]"),
        ({"jh": math.inf}, "jh", "[-]"),
        ({"initial_temperature_C": math.nan}, "initial_temperature_C", "[°C]"),
        ({"retort_temperature_C": "hot"}, "retort_temperature_C", "[°C]"),
        ({"retort_temperature_C": 40.0}, "retort_temperature_C", "[°C]"),
        ({"initial_temperature_C": 130.0}, "initial_temperature_C", "[°C]"),
        ({"process_time_min": -1.0}, "process_time_min", "[min]"),
        ({"come_up_time_min": -0.5}, "come_up_time_min", "[min]"),
        ({"come_up_time_min": None}, "come_up_time_min", "[min]"),
        ({"z_C": 0.0}, "z_C", "[°C]"),
        ({"reference_temperature_C": math.inf}, "reference_temperature_C", "[°C]"),
        ({"m_plus_g_C": -100.0}, "m_plus_g_C", "[°C]"),
        ({"fh2_min": 0.0, "break_time_min": 10.0}, "fh2_min", "[min]"),
        ({"fh2_min": 60.0, "break_time_min": -1.0}, "break_time_min", "[min]"),
        ({"fh2_min": 60.0}, "break_time_min", "[min]"),
        ({"break_time_min": 20.0}, "fh2_min", "[min]"),
    ],
)
def test_ball_formula_rejects_bad_input(changes, name, unit):
    with pytest.raises(ValueError) as info:
        ball_formula(**{**BASE, **changes})
    message = str(info.value)
    assert name in message and unit in message
    assert isinstance(info.value, BallFormulaInputError)
    assert isinstance(info.value, ModelError)


@pytest.mark.parametrize(
    "call, name, unit",
    [
        (lambda: fh_over_u(0.0), "g_C", "[°C]"),
        (lambda: fh_over_u(-1.0), "g_C", "[°C]"),
        (lambda: fh_over_u([1.0, -2.0]), "g_C", "[°C]"),
        (lambda: fh_over_u([1.0, math.nan]), "g_C", "[°C]"),
        (lambda: fh_over_u(1.0, z_C=-10.0), "z_C", "[°C]"),
        (lambda: fh_over_u(1.0, m_plus_g_C=0.0), "m_plus_g_C", "[°C]"),
        (lambda: g_from_fh_over_u(0.0), "fh_over_U", "[-]"),
        (lambda: g_from_fh_over_u(math.inf), "fh_over_U", "[-]"),
        (lambda: g_from_fh_over_u(1e-4), "fh_over_U", "[-]"),
        (lambda: g_from_fh_over_u(5.0, z_C=0.0), "z_C", "[°C]"),
        (lambda: ball_process_time(-1.0), "process_time_min", "[min]"),
        (lambda: g_end_of_heating(52.0, 2.0, 40.0, 121.1, -1.0), "ball_process_time_min",
         "[min]"),
        (lambda: ball_formula_process_time(0.0, 52.0, 2.0, 40.0, 121.1), "target_F_min",
         "[min]"),
        (lambda: ball_formula_process_time(6.0, 52.0, -2.0, 40.0, 121.1), "jh", "[-]"),
    ],
)
def test_other_functions_reject_bad_input(call, name, unit):
    with pytest.raises(ValueError) as info:
        call()
    assert name in str(info.value) and unit in str(info.value)


# --- the pure core ---------------------------------------------------------------------------


def test_module_loads_no_ui_validation_or_database_library():
    code = (
        "import sys, deviation.physics.ball_formula; "
        "print(','.join(m for m in ['pydantic', 'rich', 'textual', 'sqlalchemy'] "
        "if m in sys.modules))"
    )
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                            timeout=120, check=False, cwd=REPO_ROOT)
    assert result.returncode == 0, result.stderr
    assert result.stdout.strip() == ""
