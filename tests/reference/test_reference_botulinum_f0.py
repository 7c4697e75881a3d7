"""Reference: the botulinum 12D figure is judged on F0, whatever z the process files (issue 12, item 2).

Source: C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., 1973: *C. botulinum*
types A and B, D121.1 = 0.21 min, z = 10 °C; the 12D process is F0 >= 12 x 0.21 = 2.52 min.
Each organism keeps its own D, z and Tref (shared/domain.md, "Safe-side rules a process authority
applies"); the spoilage organism's figures use its own z and Tref when the case gives them.

The cases: the demo plant's chili can (87 x 115 mm, conduction, fh 52 min) filed with the
process's z_C = 12 or 14 °C (a spoilage-organism target), and a retort held at 115 °C. The
independent figures are (a) the General Method (z 10 °C, Tref 121.1 °C) of the cold-spot curve
the tool returns, written here with numpy, and (b) the exact conduction series of the product
(Carslaw & Jaeger; ``test_reference_model_vs_filed`` holds the independent series and Duhamel
sum).

Measured (log every 0.1 min: 10-min come-up from 40 °C, 74 min at 115 °C, cooling water 20 °C)::

    exact series: F0 2.169 min = 10.33 log reductions (12D NOT met); the same cold spot at the
                  process's z: F(z 12) 3.53 min = 16.8 "log reductions", F(z 14) 5.06 = 24.1
    tool:         F0 2.122 min, botulinum_log_reductions 10.10 at z 12 and at z 14 (F 3.46 and
                  4.97 min at the process's z), disposition reprocess-or-destroy (rule
                  botulinum-12d-not-met); tool / exact 0.978 (the lower reading between samples)

(issue 12 quoted F0 2.20 min, 10.5 log reductions, reported as 17.0 at z 12 and 24.4 at z 14 by
the engine before the fix).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest

from deviation.evaluate import evaluate_case
from deviation.inputs.case import LoadedCase, load_toml, parse_case
from tests.reference.test_reference_model_vs_filed import (
    DEMO,
    chili_log,
    demo_case,
    exact_cold_spot,
    exact_F0,
    trapezoid_F,
)

D_BOT_MIN = 0.21  # Stumbo 1973
TWELVE_D_F0_MIN = 12 * D_BOT_MIN  # 2.52 min, Stumbo 1973
HOLD_115 = {"hold_min": 74.0, "process_C": 115.0}


def lower_rate_F(t, cold_C, reference_C=121.1, z_C=10.0):
    """General Method, each interval credited at its lower lethal rate (the tool's reading of a
    recorded cycle: FDA Guide to Inspections of LACF Manufacturers, Part 1)."""
    L = 10.0 ** ((np.asarray(cold_C) - reference_C) / z_C)
    return float(np.sum(np.diff(t) * np.minimum(L[:-1], L[1:])))


def _scheduled(process_changes):
    probe = demo_case(process=process_changes)
    return evaluate_case(probe, rule_set=False, what_if=False).scheduled_F_min


def case_at_115(z_C, micro=None):
    """The 115 °C hold on the chili can, filed with the process's own z (target = the model's
    scheduled F at that z, so that the headline is the model's own figure)."""
    target = _scheduled({"z_C": z_C})
    return demo_case(process={"z_C": z_C, "target_F_min": target}, micro=micro,
                     deviation={"initial_temperature_C": 40.0}, log=chili_log(**HOLD_115))


def test_reference_values_stumbo():
    assert TWELVE_D_F0_MIN == pytest.approx(2.52)
    # the 115 °C hold misses 12D on the product itself (exact series)
    exact = exact_F0(*chili_log(**HOLD_115), 40.0)
    assert exact == pytest.approx(2.169, abs=0.005)
    assert exact < TWELVE_D_F0_MIN


@pytest.mark.parametrize("z_C", [12.0, 14.0])
def test_botulinum_log_reductions_are_F0_over_0_21_whatever_the_process_z(z_C):
    ev = evaluate_case(case_at_115(z_C), what_if=False)
    t = np.array(ev.cold_spot.time_min)
    cold = np.array(ev.cold_spot.temperature_C)
    assert ev.delivered_F_min == pytest.approx(ev.model_F_min, rel=1e-9)  # no relative scaling here
    # (a) from the cold-spot curve the tool returns, at Tref 121.1 °C and z 10 °C
    F0_curve = lower_rate_F(t, cold)
    assert ev.F0_min == pytest.approx(F0_curve, rel=1e-9)
    assert ev.botulinum_log_reductions == pytest.approx(F0_curve / D_BOT_MIN, rel=1e-9)
    assert ev.facts["F0_min"] == ev.F0_min
    # the process-z figure is another number, and would have passed 12D
    assert ev.delivered_F_min == pytest.approx(lower_rate_F(t, cold, 121.1, z_C), rel=1e-9)
    assert ev.delivered_F_min / D_BOT_MIN > 12.0
    assert ev.botulinum_log_reductions < 11.0
    # (b) never more than the product received (exact series, z 10 °C); 1e-3 for the grid
    exact = exact_F0(*chili_log(**HOLD_115), 40.0)
    assert ev.botulinum_log_reductions <= exact / D_BOT_MIN * (1.0 + 1e-3)
    assert ev.botulinum_log_reductions == pytest.approx(exact / D_BOT_MIN, rel=0.04)  # measured 0.978


@pytest.mark.parametrize("z_C", [12.0, 14.0])
def test_12D_rule_gives_the_most_severe_disposition_when_F0_misses_12D(z_C):
    ev = evaluate_case(case_at_115(z_C), what_if=False)
    assert ev.F0_min < TWELVE_D_F0_MIN
    assert "botulinum-12d-not-met" in ev.guidance["fired"]
    assert ev.guidance["disposition"] == "reprocess-or-destroy"


def test_filed_process_at_115_with_z_12_is_judged_on_F0():
    # a scheduled process filed at 115 °C / 74 min with z 12 °C, run exactly as filed: the
    # cycle shows no deviation, the spoilage target is met at z 12, but F0 misses 12D
    data = {"process": load_toml(DEMO / "processes" / "OH-CHL-87x115.toml")["process"],
            "deviation": {"lot": "Z12", "retort_id": "R1", "lot_size_containers": 4800,
                          "initial_temperature_C": 40.0}}
    data["process"].update(process_temperature_C=115.0, process_time_min=74.0, z_C=12.0,
                           alternate=[])
    probe = LoadedCase(case=parse_case(data), source="z12", sha256="")
    data["process"]["target_F_min"] = evaluate_case(probe, rule_set=False, what_if=False).scheduled_F_min
    ev = evaluate_case(replace(probe, case=parse_case(data)), what_if=False)
    assert not ev.facts["deviation_found"]
    assert ev.delivered_F_min >= ev.target_F_min * (1.0 - 1e-9)
    knots = [0.0, 10.0, 84.0, 84.0 + 1.0 / 60.0, 84.0 + 78.0]
    exact = exact_F0(knots, [40.0, 115.0, 115.0, 20.0, 20.0], 40.0)
    assert exact < TWELVE_D_F0_MIN
    assert ev.botulinum_log_reductions <= exact / D_BOT_MIN * (1.0 + 1e-3)
    assert ev.guidance["disposition"] == "reprocess-or-destroy"
    assert "botulinum-12d-not-met" in ev.guidance["fired"]


def test_12D_rule_does_not_fire_when_F0_meets_12D():
    # the same can and z 12, held at 121.1 °C as filed (the demo record): F0 well above 2.52
    target = _scheduled({"z_C": 12.0})
    ev = evaluate_case(demo_case(process={"z_C": 12.0, "target_F_min": target}), what_if=False)
    t, cold = np.array(ev.cold_spot.time_min), np.array(ev.cold_spot.temperature_C)
    assert ev.botulinum_log_reductions == pytest.approx(lower_rate_F(t, cold) / D_BOT_MIN, rel=1e-9)
    assert ev.botulinum_log_reductions >= 12.0
    assert "botulinum-12d-not-met" not in ev.guidance["fired"]


def test_a_botulinum_D_given_with_its_source_is_used_on_F0():
    # a case may give another D for C. botulinum with its source (issue 12); still F0 / D
    micro = {"botulinum_D_min": 0.25, "botulinum_D_source": "plant study PS-17 (invented for this test)"}
    ev = evaluate_case(case_at_115(12.0, micro=micro), what_if=False)
    assert ev.botulinum_log_reductions == pytest.approx(ev.F0_min / 0.25, rel=1e-12)


@pytest.mark.parametrize("spoilage_z_C, spoilage_reference_C", [(10.0, 121.1), (8.0, 115.0)])
def test_spoilage_uses_the_organism_own_z_and_Tref(spoilage_z_C, spoilage_reference_C):
    # N = N0 10^(-F/D) with F at the organism's Tref and z; P = 1 - exp(-N) (Stumbo 1973, Poisson)
    micro = {"spoilage_z_C": spoilage_z_C, "spoilage_reference_temperature_C": spoilage_reference_C,
             "spoilage_D_min": 0.5, "spores_per_container": 100.0}
    ev = evaluate_case(case_at_115(12.0, micro=micro), what_if=False)
    t, cold = np.array(ev.cold_spot.time_min), np.array(ev.cold_spot.temperature_C)
    F_organism = lower_rate_F(t, cold, spoilage_reference_C, spoilage_z_C)
    F_process = lower_rate_F(t, cold, 121.1, 12.0)
    assert abs(F_organism / F_process - 1.0) > 0.2  # the kinetics matter here
    N = 100.0 * 10.0 ** (-F_organism / 0.5)
    assert ev.spoilage_probability == pytest.approx(-math.expm1(-N), rel=1e-9)
    assert ev.log10_spoilage_probability == pytest.approx(math.log10(-math.expm1(-N)), rel=1e-9)
    # never friendlier than the same organism on the exact product
    t_x, _, cold_x = exact_cold_spot(*chili_log(**HOLD_115), 40.0)
    F_exact = trapezoid_F(t_x, cold_x, spoilage_reference_C, spoilage_z_C)
    assert ev.spoilage_probability >= -math.expm1(-100.0 * 10.0 ** (-F_exact / 0.5)) * (1.0 - 1e-9)
