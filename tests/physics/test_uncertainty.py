"""Monte Carlo uncertainty: the batch path agrees with the deterministic pipeline sample by sample."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from deviation.inputs.case import load_case, parse_case
from deviation.evaluate import evaluate_case
from deviation.physics.uncertainty import lognormal_factors

DEMO = Path(__file__).resolve().parents[2] / "demo_cases"


def _with_uncertainty(name, **spreads):
    loaded = load_case(DEMO / f"{name}.toml")
    data = loaded.case.model_dump()
    data["deviation"]["uncertainty"] = {"samples": 200, "seed": 7, **spreads}
    return replace(loaded, case=parse_case(data))


@pytest.mark.parametrize("name", ["chili_temperature_drop", "peas_steam_loss"])
def test_zero_spread_reproduces_the_deterministic_F(name):
    loaded = _with_uncertainty(name, fh_relative_sd=0, jh_relative_sd=0, fc_relative_sd=0, jc_relative_sd=0,
                               initial_temperature_sd_C=0, spores_log10_sd=0)
    ev = evaluate_case(loaded, rule_set=False)
    mc = ev.uncertainty
    # Two-point Gauss kernel means vs six-point: agreement to 1e-4 relative (quadrature order).
    for key in ("F_p05_min", "F_p50_min", "F_p95_min"):
        assert mc[key] == pytest.approx(ev.delivered_F_min, rel=1e-4)
    assert mc["probability_F_below_target"] == (1.0 if ev.delivered_F_min < ev.target_F_min else 0.0)
    assert mc["probability_below_target"] == mc["probability_F_below_target"]


# The conduction batch runs on the evaluation's own grid (two-point against six-point Gauss
# kernel means: 2e-4); the bounding heating-curve samples run at 400 sampled ages and are scaled
# by the nominal F's ratio to the full resolution, which holds a ratio of F values to 5e-3.
@pytest.mark.parametrize("name,factor,rel", [("chili_temperature_drop", 1.15, 2e-4),
                                             ("peas_steam_loss", 0.9, 5e-3)])
def test_a_shifted_fh_sample_matches_a_deterministic_run(name, factor, rel, monkeypatch):
    """Force every sample to fh x factor: the batch F equals evaluate_case with that fh."""
    import deviation.evaluate.whatif as E

    monkeypatch.setattr(E, "lognormal_factors", lambda rng, sd, n: np.full(n, factor if sd == 0.1 else 1.0))
    loaded = _with_uncertainty(name, fh_relative_sd=0.1, jh_relative_sd=0.2, fc_relative_sd=0.2,
                               jc_relative_sd=0.2, initial_temperature_sd_C=0, spores_log10_sd=0)
    nominal = evaluate_case(loaded, rule_set=False)
    mc = nominal.uncertainty
    data = loaded.case.model_dump()
    data["process"]["heat_penetration"]["fh_min"] *= factor
    data["deviation"].pop("uncertainty")
    direct = evaluate_case(replace(loaded, case=parse_case(data)), rule_set=False, what_if=False)
    # Every sample keeps the nominal filing's relative correction (its own scheduled F is not
    # recomputed per sample): the model's F with that fh, times the nominal scale.
    scale = min(1.0, nominal.target_F_min / nominal.scheduled_F_min)
    assert mc["F_p50_min"] == pytest.approx(direct.model_F_min * scale, rel=rel)


def test_deterministic_with_a_seed_and_sensible_spread():
    loaded = _with_uncertainty("chili_temperature_drop")
    a = evaluate_case(loaded, rule_set=False).uncertainty
    b = evaluate_case(loaded, rule_set=False).uncertainty
    assert a == b
    assert a["F_p05_min"] < a["F_p50_min"] < a["F_p95_min"]
    assert 0.0 <= a["probability_F_below_target"] <= 1.0


def test_lognormal_factors_have_mean_one_and_the_asked_spread():
    rng = np.random.default_rng(1)
    f = lognormal_factors(rng, 0.1, 200_000)
    assert f.mean() == pytest.approx(1.0, abs=2e-3)
    assert f.std() == pytest.approx(0.1, rel=2e-2)
    assert (f > 0).all()


def test_measured_cold_spot_has_no_heat_penetration_spread():
    loaded = _with_uncertainty("tray_measured_cold_spot")
    ev = evaluate_case(loaded, rule_set=False)
    assert ev.uncertainty["F_p05_min"] == pytest.approx(ev.delivered_F_min)
    assert "measured" in ev.uncertainty["reason"]


def test_reprocess_adds_the_filed_cycle_F():
    loaded = load_case(DEMO / "tray_steam_failure.toml")
    ev = evaluate_case(loaded, rule_set=False)
    # From the filed minimum initial temperature, a full reprocess as filed gives the scheduled F
    # (on the headline's footing: the relative F where the model over-predicts the filed process).
    assert ev.reprocess["reprocess_from"] == "the filed minimum initial temperature"
    scale = min(1.0, ev.target_F_min / ev.scheduled_F_min)
    assert ev.reprocess_F_min == pytest.approx(ev.scheduled_F_min * scale, rel=1e-9)
    assert ev.total_F_with_reprocess_min == pytest.approx(ev.delivered_F_min + ev.reprocess_F_min)
    data = loaded.case.model_dump()
    data["deviation"]["reprocess_from_temperature_C"] = 70.0
    warm = evaluate_case(replace(loaded, case=parse_case(data)), rule_set=False)
    assert warm.reprocess_F_min > ev.reprocess_F_min
