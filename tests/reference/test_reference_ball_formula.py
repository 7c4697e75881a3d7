"""Ball's formula method against published tables and exact independent integrals.

Sources, named beside each check:

- C. O. Ball, "Thermal process time for canned food", Bull. Natl. Res. Counc. 7(37), 1923: the
  method, the fh/U : log g table for z = 18 °F, m + g = 180 °F, jc = 1.41, fc = fh.
- C. R. Stumbo, Thermobacteriology in Food Processing, 2nd ed., Academic Press, 1973: the
  fh/U : g tables for z = 18 °F with the cooling lag jc as a column.
- Both tables as reprinted in B. K. Simpson (ed.), Food Biochemistry and Food Processing,
  2nd ed., Wiley-Blackwell, 2012, ch. 38 "Thermal Processing Principles": Table 38.6 (Ball,
  "fh/U versus log g values for the Ball method", p. 737) and Table 38.9 (Stumbo 1973,
  "fh/U versus g relationships when z = 18 °F", p. 739). The values below were read from
  those reprints (a selection of rows), not recalled. Table 38.6 does not print z and m + g;
  Ball's tables are for z = 18 °F and m + g = 180 °F, and the agreement below (0.05 in log g at
  worst) would be impossible with another z.
- Exact integrals: the lethality of an exponential heating curve is an exponential integral
  (E1); scipy.integrate.quad and this project's General Method (trapezoid, Bigelow et al.
  1920) integrate the same curves independently of the formula's code.
- Conduction: the exact finite-cylinder series (Carslaw & Jaeger, Conduction of Heat in Solids,
  1959) with Duhamel superposition, this project's own modules, for the chili demo.

Measured (this module's relation, z = 18 °F, m + g = 180 °F):

- against Ball's printed table: log g higher by +0.007 to +0.047 (g 1.6 % to 11.3 % higher);
  at Ball's printed g, fh/U 0.8 % to 8.1 % lower: this relation credits up to 8.8 % more U;
- against Stumbo's table interpolated to jc = 1.41: g 4.9 % to 7.4 % lower; at Stumbo's g,
  fh/U 0.6 % to 23.6 % higher: Stumbo's table credits up to 19 % more U;
- Ball's and Stumbo's printed tables differ from each other by 8.5 % to 15 % in g (Ball's
  lower) over fh/U 0.4 to 60: more than "a few percent", at small fh/U as at large.
"""

import functools
import math
import tomllib
from pathlib import Path

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.special import exp1

from deviation.physics.ball_formula import (
    BALL_COOLING_LAG,
    BALL_CURVILINEAR_DROP_FRACTION,
    BALL_HYPERBOLA_FRACTION,
    ball_formula,
    fh_over_u,
    g_from_fh_over_u,
)
from deviation.physics.heating import conduction
from deviation.physics.heating.superposition import superpose
from deviation.physics.lethality import general_method

LN10 = math.log(10.0)
REPO_ROOT = Path(__file__).resolve().parents[2]
Z_F, M_PLUS_G_F = 18.0, 180.0  # the tables' z and m + g [°F]

# Ball (1923), fh/U : log g, z = 18 °F, m + g = 180 °F; reprint Table 38.6 (Simpson 2012).
BALL_TABLE_LOG_G = {
    0.4: -1.79, 0.5: -1.29, 0.7: -0.736, 1.0: -0.273, 1.5: 0.097, 2.0: 0.298, 3.0: 0.525,
    5.0: 0.742, 10.0: 0.955, 20.0: 1.112, 40.0: 1.235, 60.0: 1.296, 100.0: 1.365,
    200.0: 1.447,
}

# Stumbo (1973), fh/U : g [°F], z = 18 °F, columns jc = 0.40, 1.40, 1.60; reprint Table 38.9.
STUMBO_TABLE_G = {  # fh/U: (jc 0.40, jc 1.40, jc 1.60)
    0.3: (2.01e-3, 2.66e-3, 2.79e-3),
    0.5: (4.11e-2, 5.70e-2, 6.02e-2),
    1.0: (0.408, 0.600, 0.638),
    2.0: (1.53, 2.21, 2.34),
    5.0: (4.44, 6.03, 6.35),
    10.0: (7.17, 9.86, 10.39),
    20.0: (9.83, 14.11, 14.97),
    30.0: (11.5, 16.8, 17.8),
    50.0: (13.8, 20.3, 21.6),
    60.0: (14.8, 21.6, 22.9),
}


def stumbo_g_at_ball_jc(fh_over_U: float) -> float:
    """Stumbo's g [°F] at Ball's jc = 1.41, linear between the jc 1.40 and 1.60 columns."""
    _, g140, g160 = STUMBO_TABLE_G[fh_over_U]
    return g140 + (BALL_COOLING_LAG - 1.40) / 0.20 * (g160 - g140)


def g_F(fh_over_U: float) -> float:
    """This module's g [°F] for fh/U, z = 18 °F, m + g = 180 °F (computed in °C)."""
    return g_from_fh_over_u(fh_over_U, Z_F * 5.0 / 9.0, M_PLUS_G_F * 5.0 / 9.0) * 9.0 / 5.0


# --- Ball's and Stumbo's published tables -----------------------------------------------------


@pytest.mark.parametrize("fh_over_U, log_g", sorted(BALL_TABLE_LOG_G.items()))
def test_against_ball_1923_table(fh_over_U, log_g):
    # Ball 1923, fh/U : log g (z = 18 °F, m + g = 180 °F), reprint Table 38.6 (Simpson 2012).
    # Tolerance: 0 to +0.05 in log g (measured +0.007 to +0.047). Reason: Ball computed his
    # table in 1923 by hand (series and graphical integration) and printed log g to 2-3
    # decimals; this relation integrates the same curves to 1e-10. The sign is checked too:
    # this relation lies on the side of more lethality than Ball's printed table, never less,
    # and by at most 9 % in U (second assertion).
    mine = math.log10(g_F(fh_over_U))
    assert 0.0 <= mine - log_g <= 0.05
    at_ball_g = fh_over_u(10.0**log_g * 5.0 / 9.0, 10.0, 100.0)
    assert -0.09 <= at_ball_g / fh_over_U - 1.0 <= 0.0


@pytest.mark.parametrize("fh_over_U", sorted(STUMBO_TABLE_G))
def test_against_stumbo_1973_table_at_jc_1_41(fh_over_U):
    # Stumbo 1973, fh/U : g (z = 18 °F), reprint Table 38.9 (Simpson 2012), interpolated
    # linearly to Ball's jc = 1.41 between its 1.40 and 1.60 columns. Tolerance: g within
    # 4 % to 9 % below Stumbo's (measured 4.9 % to 7.4 %). Reason: Stumbo's tables are not
    # built on Ball's hyperbolic cooling curve (nor on Ball's heating-curve lethality alone, see
    # the next test), so they differ from Ball's relation systematically: Stumbo credits more
    # lethality at the same g, up to 19 % more U at fh/U = 60.
    ratio = g_F(fh_over_U) / stumbo_g_at_ball_jc(fh_over_U)
    assert 0.91 <= ratio <= 0.96


def test_stumbo_low_jc_columns_rest_on_another_heating_basis():
    # Stumbo 1973 (reprint Table 38.9), jc = 0.40 column: at fh/U >= 0.5 its g lies below the
    # g at which the heating part of Ball's straight-line curve alone, E1(ln10 g/z)/ln10 per fh,
    # already gives that fh/U; no cooling curve can credit negative lethality, so Stumbo's
    # relation is not Ball's heating lethality plus a cooling term. Only the column at Ball's
    # own jc is therefore compared above, with a tolerance that admits the difference.
    for fh_over_U, (g040, _, _) in STUMBO_TABLE_G.items():
        heating_alone = LN10 / exp1(LN10 * g040 / Z_F)
        if fh_over_U >= 0.5:
            assert heating_alone < fh_over_U


def test_ball_and_stumbo_tables_differ_by_8_to_15_percent_in_g():
    # Ball 1923 (Table 38.6) against Stumbo 1973 at jc = 1.41 (Table 38.9), both reprinted in
    # Simpson 2012: the two published tables disagree by more than this relation disagrees with
    # either, and this relation lies between them on every shared row.
    for fh_over_U in sorted(set(BALL_TABLE_LOG_G) & set(STUMBO_TABLE_G)):
        ball = 10.0 ** BALL_TABLE_LOG_G[fh_over_U]
        stumbo = stumbo_g_at_ball_jc(fh_over_U)
        assert 0.84 <= ball / stumbo <= 0.92
        assert ball <= g_F(fh_over_U) <= stumbo


# --- Ball's cooling curve: the recalled constants checked against each other -----------------


def test_balls_hyperbola_meets_the_cooling_line_tangentially():
    # Ball 1923 (constants from memory): arc y = m - 0.3 m (sqrt(1 + (t/a)^2) - 1) down to
    # 0.343 m below the start, then the line y = 1.41 m 10^(-t/fc). Value continuity fixes a;
    # the slopes then agree to 0.3 %, which three independently recalled constants would not do
    # by chance; exact tangency would need jc = 1.4128.
    A, drop, jc = BALL_HYPERBOLA_FRACTION, BALL_CURVILINEAR_DROP_FRACTION, BALL_COOLING_LAG
    s_join = math.log10(jc / (1.0 - drop))
    a = s_join / math.sqrt((1.0 + drop / A) ** 2 - 1.0)
    slope_arc = A * (s_join / a**2) / math.sqrt(1.0 + (s_join / a) ** 2)  # per m, per fc
    slope_line = LN10 * (1.0 - drop)
    assert slope_arc == pytest.approx(slope_line, rel=0.005)


# --- exact independent integrals ---------------------------------------------------------------


def _ball_history(fh, g, rt, m_plus_g, dt):
    """Ball's heating curve up to the end of heating, then his cooling curve (constants from the
    module docstring, built here independently of the module's code)."""
    jc, A, drop = 1.41, 0.3, 0.343
    m = m_plus_g - g
    t_heat = np.arange(-8.0 * fh, 0.0, dt)
    s_join = math.log10(jc / (1.0 - drop))
    a = s_join / math.sqrt((1.0 + drop / A) ** 2 - 1.0)
    t_cool = np.arange(0.0, 12.0 * fh + dt / 2.0, dt)
    s = t_cool / fh
    y = np.where(s <= s_join, m - A * m * (np.sqrt(1.0 + (s / a) ** 2) - 1.0),
                 jc * m * 10.0 ** (-s))
    return (np.concatenate([t_heat, t_cool]),
            np.concatenate([rt - g * 10.0 ** (-t_heat / fh), rt - m_plus_g + y]))


@pytest.mark.parametrize("fh, g", [(40.0, 0.3), (40.0, 3.0), (52.0, 5.665), (20.0, 12.0),
                                   (30.0, 30.0)])
def test_formula_equals_general_method_on_balls_curves(fh, g):
    # General Method (Bigelow et al. 1920), this project's trapezoid, on Ball's heating and
    # cooling curves sampled every 0.01 min, against U = fh/(fh/U). The formula leaves out the
    # cooling water's own lethal rate (1e-10 per min here), subtracted from the General Method
    # over its finite cooling window. Tolerance 1e-5: the trapezoid's error at this step
    # (measured 3e-11 to 4e-8 at a 0.002-min step).
    t, temperature = _ball_history(fh, g, 121.1, 100.0, 0.01)
    F_general, _ = general_method(t, temperature, 121.1, 10.0)
    F_general -= 1e-10 * 12.0 * fh
    assert fh / fh_over_u(g) == pytest.approx(F_general, rel=1e-5)


def _first_order_heating_F(fh, I, g, rt, tref, z):
    """General Method on T = RT - I 10^(-t/fh) from 0 to the end of heating (jh = 1), closed
    form: (fh/ln10) [E1(ln10 g/z) - E1(ln10 I/z)] 10^((RT - Tref)/z)."""
    return fh / LN10 * (exp1(LN10 * g / z) - exp1(LN10 * I / z)) * 10.0 ** ((rt - tref) / z)


@pytest.mark.parametrize("fh, it, rt, pt", [(20.0, 70.0, 121.1, 40.0), (45.0, 40.0, 118.0, 90.0),
                                            (8.0, 20.0, 125.0, 25.0), (20.0, 116.0, 121.1, 10.0)])
def test_heating_part_is_the_exact_first_order_heating(fh, it, rt, pt):
    # A first-order product (jh = 1, no come-up: the cold spot starts on Ball's line at IT): its
    # heating lethality by quad and by the E1 closed form, against the formula's heating part.
    # The formula extends the line back before the corrected zero, which adds exactly
    # fh E1(ln10 I/z)/ln10 at RT: 4e-7 of the heating F for I = 51 °C, 6e-10 for 78 °C,
    # 4e-13 for 105 °C, and 22 % for a small I (5.1 °C, the last case).
    z, tref = 10.0, 121.1
    r = ball_formula(fh, 1.0, it, rt, pt, 0.0, z_C=z, reference_temperature_C=tref)
    I = rt - it
    exact = _first_order_heating_F(fh, I, r.g_C, rt, tref, z)
    by_quad, _ = quad(lambda t: 10.0 ** ((rt - I * 10.0 ** (-t / fh) - tref) / z), 0.0, pt,
                      epsabs=0.0, epsrel=1e-12, limit=400)
    assert by_quad == pytest.approx(exact, rel=1e-9)
    before_zero = fh / LN10 * exp1(LN10 * I / z) * 10.0 ** ((rt - tref) / z)
    F_heating = r.U_heating_min * 10.0 ** ((rt - tref) / z)
    assert F_heating == pytest.approx(exact + before_zero, rel=1e-12)
    if I > 50.0:
        assert before_zero < 1e-6 * exact


@pytest.mark.parametrize("fh, it, pt", [(20.0, 70.0, 40.0), (45.0, 40.0, 90.0),
                                        (52.0, 40.0, 76.2)])
def test_total_against_first_order_product_with_instant_and_first_order_cooling(fh, it, pt):
    # Exact first-order product (jh = jc = 1, fc = fh): cooling T = Tw + m 10^(-t/fh), its
    # lethality by quad; instant cooling: heating only (E1 closed form). Ball's cooling curve
    # holds the cold spot longer (level start, jc = 1.41), so the formula credits more than
    # either; and never more than a cold spot held level until it meets Ball's line,
    # y = min(m, 1.41 m 10^(-t/fh)) (the concave arc lies below its tangent, the line).
    # Measured F_ball / F_first-order 1.08, 1.10, 1.19 and F_ball / F_instant 1.11, 1.13, 1.26.
    z, rt, mg = 10.0, 121.1, 100.0
    r = ball_formula(fh, 1.0, it, rt, pt, 0.0)
    g, m = r.g_C, mg - r.g_C
    heating = _first_order_heating_F(fh, rt - it, g, rt, rt, z)

    def cooling(curve):
        value, _ = quad(lambda t: 10.0 ** ((curve(t / fh) - mg) / z) - 1e-10, 0.0, 30.0 * fh,
                        epsabs=0.0, epsrel=1e-11, limit=400,
                        points=[math.log10(BALL_COOLING_LAG) * fh, fh])
        return value

    first_order = heating + cooling(lambda s: m * 10.0 ** (-s))
    upper = heating + cooling(lambda s: min(m, BALL_COOLING_LAG * m * 10.0 ** (-s)))
    assert heating < first_order < r.F_min < upper
    print(f"first-order product fh {fh} IT {it} B {pt}: F instant cooling {heating:.4f}, "
          f"first-order cooling {first_order:.4f}, Ball {r.F_min:.4f}, level-then-line "
          f"{upper:.4f}")


# --- the chili demo ---------------------------------------------------------------------------


def _chili():
    case = tomllib.loads(
        (REPO_ROOT / "demo_cases/processes/OH-CHL-87x115.toml").read_text(encoding="utf-8")
    )["process"]
    return case


def test_chili_demo_ball_formula_figure():
    # demo_cases/processes/OH-CHL-87x115.toml: fh 52 min, IT 40 °C, RT 121.1 °C, CUT 10 min,
    # hold 72 min, cooling water 20 °C, target F0 6.0; no jh filed (conduction model), so the
    # theoretical centre jh of a finite cylinder (Carslaw & Jaeger; 2.040) and the 1.96 measured
    # on the exact series for this can (issue 12) are both used.
    # Reported (not a pass/fail figure for the demo): Ball 1923, m + g = 100 °C:
    #   jh 2.040: B 76.2 min, g 5.67 °C, fh/U 12.05, F0 4.32 (heating 3.04, cooling 1.28);
    #   jh 1.96:  g 5.44 °C, fh/U 11.23, F0 4.63; with m + g = 101.1 °C (20 °C water) 4.31/4.62.
    # The exact conduction series on the filed cycle gives 6.93 (the model's 6.94).
    p = _chili()
    container = p["container"]
    jh_theory = conduction.theoretical_centre_jh_cylinder()
    figures = {}
    for jh in (jh_theory, 1.96):
        for m_plus_g in (100.0, p["process_temperature_C"] - p["cooling_water_temperature_C"]):
            r = ball_formula(p["heat_penetration"]["fh_min"], jh,
                             p["minimum_initial_temperature_C"], p["process_temperature_C"],
                             p["process_time_min"], p["come_up_time_min"],
                             z_C=p["z_C"], reference_temperature_C=p["reference_temperature_C"],
                             m_plus_g_C=m_plus_g)
            figures[(round(jh, 3), round(m_plus_g, 1))] = r
            print(f"chili Ball's formula jh {jh:.3f} m+g {m_plus_g:.1f}: B "
                  f"{r.ball_process_time_min:.1f} g {r.g_C:.3f} fh/U {r.fh_over_U:.3f} "
                  f"F0 {r.F_min:.3f} (heating {r.U_heating_min:.3f}, cooling "
                  f"{r.U_cooling_min:.3f})")
    assert container["shape"] == "cylinder"
    for r in figures.values():
        # issue 12 quotes 3.5-5.7 min for Ball's formula on this process
        assert 3.5 <= r.F_min <= 5.7


def test_chili_demo_ball_formula_is_below_the_exact_conduction_series():
    # The same filed cycle on the exact finite-cylinder series (Carslaw & Jaeger) with the
    # diffusivity from fh (Olson & Jackson), Duhamel superposition, retort ramped linearly
    # from IT to RT over the come-up, a step to the cooling water at steam off. Ball's formula
    # (jc = 1.41) credits far less cooling lethality than the conduction centre receives (the
    # centre of a conduction pack keeps heating after steam off, jc about 2): measured F0 4.32
    # against 6.93, heating parts 3.04 against 3.24. A cross-check between the model and this
    # formula must allow for that gap on conduction packs: Ball's figure is the low side.
    p = _chili()
    radius, height = p["container"]["diameter_mm"] / 2000.0, p["container"]["height_mm"] / 1000.0
    fh = p["heat_penetration"]["fh_min"]
    alpha = conduction.diffusivity_from_fh_cylinder(fh, radius, height)
    step = functools.partial(conduction.cylinder_centre_unaccomplished,
                             diffusivity_m2_s=alpha, radius_m=radius, height_m=height)
    it, rt = p["minimum_initial_temperature_C"], p["process_temperature_C"]
    cut, hold = p["come_up_time_min"], p["process_time_min"]
    dt = 0.02
    t = np.arange(0.0, cut + hold + 60.0 + dt / 2.0, dt)
    retort = np.where(t < cut, it + (rt - it) * t / cut,
                      np.where(t < cut + hold, rt, p["cooling_water_temperature_C"]))
    centre = superpose(t, retort, it, lambda s: step(s))
    F_exact, cumulative = general_method(t, centre, p["reference_temperature_C"], p["z_C"])
    F_exact_heating = cumulative[np.searchsorted(t, cut + hold)]
    r = ball_formula(fh, conduction.theoretical_centre_jh_cylinder(), it, rt, hold, cut,
                     z_C=p["z_C"], reference_temperature_C=p["reference_temperature_C"],
                     m_plus_g_C=rt - p["cooling_water_temperature_C"])
    print(f"chili exact series F0 {F_exact:.3f} (to steam off {F_exact_heating:.3f}); "
          f"Ball's formula {r.F_min:.3f} (heating {r.U_heating_min:.3f})")
    assert r.F_min < 0.7 * F_exact
    assert r.U_heating_min == pytest.approx(F_exact_heating, rel=0.10)
