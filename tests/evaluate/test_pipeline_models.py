"""The three cold-spot models through the whole pipeline agree where physics says they must."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from deviation.inputs.case import load_case, parse_case
from deviation.evaluate import cold_spot_model, evaluate_case

DEMO = Path(__file__).resolve().parents[2] / "demo_cases"


def _with_heat_penetration(name, hp):
    loaded = load_case(DEMO / f"{name}.toml")
    data = loaded.case.model_dump()
    data["process"]["heat_penetration"] = hp
    return replace(loaded, case=parse_case(data))


@pytest.mark.parametrize("name", ["tray_long_come_up", "chili_temperature_drop"])
def test_finite_difference_matches_the_analytical_series(name):
    """Dirichlet surface: the finite-difference F is within 0.5% of the series F (issue 3)."""
    series = evaluate_case(load_case(DEMO / f"{name}.toml"), rule_set=False, what_if=False)
    hp = load_case(DEMO / f"{name}.toml").case.process.heat_penetration.model_dump(exclude_none=True)
    hp["model"] = "finite-difference"
    fd = evaluate_case(_with_heat_penetration(name, hp), rule_set=False, what_if=False)
    assert fd.model == "finite-difference"
    assert fd.delivered_F_min == pytest.approx(series.delivered_F_min, rel=5e-3)
    assert fd.scheduled_F_min == pytest.approx(series.scheduled_F_min, rel=5e-3)


def test_a_finite_surface_coefficient_slows_heating_for_the_same_diffusivity():
    hp = {"model": "finite-difference", "thermal_diffusivity_m2_s": 1.6e-7}
    dirichlet = evaluate_case(_with_heat_penetration("tray_long_come_up", hp), rule_set=False, what_if=False)
    biot = evaluate_case(_with_heat_penetration("tray_long_come_up", {**hp, "surface_htc_W_m2K": 300.0,
                                                                      "thermal_conductivity_W_mK": 0.5}),
                         rule_set=False, what_if=False)
    assert biot.delivered_F_min < dirichlet.delivered_F_min


def test_fh_given_with_a_biot_boundary_is_the_fh_the_solver_shows():
    """With h and k given, fh sets the diffusivity through the Biot eigenvalues: the solver's own
    step response then decays with slope -1/fh on the semi-log plot (Ball 1923 definition of fh)."""
    # A cylinder: its higher modes decay much faster than the first, so the semi-log line is
    # straight from about one fh on (a thin tray's long sides keep slow modes alive far longer).
    fh = 45.0
    loaded = _with_heat_penetration("chili_temperature_drop", {"model": "finite-difference", "fh_min": fh,
                                                          "surface_htc_W_m2K": 200.0,
                                                          "thermal_conductivity_W_mK": 0.55})
    model = cold_spot_model(loaded.case.process)
    t = np.arange(0.0, 4 * fh, 0.05)
    S = 1.0 - model.fd(t, np.ones_like(t), 0.0).cold_spot_C
    late = (t > 1.5 * fh) & (t < 3 * fh)
    slope = np.polyfit(t[late], np.log10(S[late]), 1)[0]
    assert -1.0 / slope == pytest.approx(fh, rel=5e-3)


def test_heating_curve_cooling_parameters_matter():
    """fc/jc change only how the cold spot answers falls of the retort (the product here starts
    hotter than the retort, so from the first step on): a slower cooling (larger fc) never gives
    a cooler cold spot and credits more lethality."""
    base = load_case(DEMO / "peas_steam_loss.toml").case.process.heat_penetration.model_dump(exclude_none=True)
    slow = evaluate_case(_with_heat_penetration("peas_steam_loss", {**base, "fc_min": 20.0}), rule_set=False,
                         what_if=False)
    fast = evaluate_case(_with_heat_penetration("peas_steam_loss", {**base, "fc_min": 5.0}), rule_set=False,
                         what_if=False)
    assert slow.delivered_F_min > fast.delivered_F_min
    assert np.all(np.array(slow.cold_spot.temperature_C) >= np.array(fast.cold_spot.temperature_C) - 1e-9)
