"""Every demo case gets the disposition a process authority would expect, with its reasons.

The expectations follow 21 CFR 113.89 (hold and evaluate any deviation; reprocess when the
lethality falls short; reprocess or destroy when the lot cannot be shown free of organisms of
public-health significance) and the 12D botulinum principle (Stumbo 1973).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from deviation.inputs.case import load_case
from deviation.evaluate import evaluate_case

DEMO = Path(__file__).resolve().parents[2] / "demo_cases"

EXPECTED = {
    # case: (disposition, flag codes that must be raised, rule that must fire)
    "chili_no_deviation": ("no-deviation", set(), None),
    "chili_temperature_drop": ("evaluate", {"temperature-low"}, "retort-temperature-drop"),
    # The bounding heating-curve model credits no heat after the steam loss that the product
    # could not have had: F0 below the filed target (issue 12).
    "peas_steam_loss": ("reprocess", {"temperature-low"}, "below-filed-target"),
    "peas_short_hold": ("reprocess", {"short-hold"}, "below-filed-target"),
    "chili_low_initial_temperature": ("evaluate", {"low-initial-temperature"}, "low-initial-temperature"),
    "tray_long_come_up": ("evaluate", {"long-come-up"}, "long-come-up"),
    # No heat across the 4.5-min gap in the hold (the worst case, FDA LACF guide): below target.
    "chili_record_gap": ("reprocess", {"record-gap"}, "below-filed-target"),
    "peas_fill_weight": ("evaluate", {"critical-factor-out"}, "critical-factor-out"),
    # The measured cold spot read at the lower reading between samples: below the filed target.
    "tray_measured_cold_spot": ("reprocess", {"temperature-low"}, "below-filed-target"),
    "chili_alternate_process": ("covered-by-alternate", {"alternate-process-met"}, "alternate-process-met"),
    "tray_steam_failure": ("reprocess-or-destroy", {"short-hold"}, "botulinum-12d-not-met"),
    "chili_cycle_running": ("evaluate", {"record-ends-before-cooling"}, "cycle-still-running"),
    # Issue 15: a retort system's own critical factors (21 CFR 113.40(a), (b)).
    "chili_vent_short": ("reprocess-or-destroy", {"vent-schedule-not-met"}, "vent-schedule-not-met"),
    "beans_low_water": ("reprocess-or-destroy", {"water-level-below-top-layer"}, "water-level-below-top-layer"),
    # Issue 15: continuous systems, container by container (21 CFR 113.40(d), (f)).
    "soup_reel_stop": ("evaluate", {"reel-stop", "temperature-low"}, "system-critical-factor"),
    "corn_dome_drop": ("reprocess", {"temperature-low"}, "below-filed-target"),
    # A broken heating curve: the pudding had thickened before the drop, so it recovers on the
    # second line (fh 75 min) and the F0 falls far below the target.
    "pudding_steam_drop": ("reprocess", {"temperature-low"}, "below-filed-target"),
}


def test_every_demo_case_is_listed():
    assert {p.stem for p in DEMO.glob("*.toml")} == set(EXPECTED)


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_demo_case_disposition(name):
    disposition, codes, rule = EXPECTED[name]
    ev = evaluate_case(load_case(DEMO / f"{name}.toml"))
    g = ev.guidance
    assert g["disposition"] == disposition
    assert codes <= {f.code for f in ev.flags}
    if rule:
        assert rule in g["fired"]
        assert all(r["basis"] for r in g["reasons"])
    assert "process authority" in g["caution"].lower()
    if disposition != "no-deviation":
        assert g["actions"], "a held lot always gets actions"
