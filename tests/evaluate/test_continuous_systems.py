"""Issue 15: continuous systems in the evaluation — which containers a deviation touched.

The engine's own checks (against a brute-force evaluation of sampled entry times) are in
tests/physics/test_continuous.py and tests/reference/test_reference_continuous.py; here: the
affected_containers contract, clock times, covering every container once, and refusals.
"""

from __future__ import annotations

from dataclasses import replace
from datetime import datetime, timedelta
from pathlib import Path

import pytest

from deviation.errors import CaseError, DeviationError
from deviation.evaluate import evaluate_case
from deviation.inputs.case import load_case, parse_case

DEMO = Path(__file__).resolve().parents[2] / "demo_cases"


@pytest.fixture(scope="module")
def corn():
    loaded = load_case(DEMO / "corn_dome_drop.toml")
    return loaded, evaluate_case(loaded)


def test_every_container_of_the_window_is_in_one_interval(corn):
    loaded, ev = corn
    rows = ev.affected_containers
    stream, system = loaded.case.deviation.stream, loaded.case.process.system
    assert rows[0]["entry_start_min"] == pytest.approx(stream.entry_start_min)
    assert rows[-1]["entry_end_min"] == pytest.approx(stream.entry_end_min)
    for a, b in zip(rows, rows[1:]):
        assert a["entry_end_min"] == pytest.approx(b["entry_start_min"])
    per_min = system.carriers_per_min * system.containers_per_carrier
    total = (stream.entry_end_min - stream.entry_start_min) * per_min
    assert sum(r["containers"] for r in rows) == pytest.approx(total, abs=per_min)


def test_containers_inside_during_the_drop_are_never_unaffected(corn):
    loaded, ev = corn
    residence = loaded.case.process.process_time_min
    drop_start, drop_end = 80.0, 88.0  # the demo's dome drop
    for row in ev.affected_containers:
        inside_during = row["entry_end_min"] > drop_start - residence and row["entry_start_min"] < drop_end
        if inside_during and row["entry_end_min"] - row["entry_start_min"] > 0.5:
            assert row["disposition"] != "unaffected", row
    assert {"unaffected", "reprocess"} <= {r["disposition"] for r in ev.affected_containers}


def test_intervals_name_clock_times_and_the_headline_is_the_worst_container(corn):
    loaded, ev = corn
    first = datetime.fromisoformat(loaded.case.deviation.stream.first_entry)
    row = next(r for r in ev.affected_containers if r["disposition"] == "reprocess")
    assert row["entry_start"] == (first + timedelta(minutes=row["entry_start_min"] - 5.0)).isoformat(timespec="seconds")
    assert ev.delivered_F_min == pytest.approx(min(r["min_F_min"] for r in ev.affected_containers), rel=1e-9)
    assert ev.system == "hydrostatic"
    # unaffected containers passed the filed process: the filed target, no more
    assert all(r["min_F_min"] == pytest.approx(ev.target_F_min, rel=1e-9)
               for r in ev.affected_containers if r["disposition"] == "unaffected")


def test_a_reel_stop_gives_the_containers_inside_a_longer_residence():
    ev = evaluate_case(load_case(DEMO / "soup_reel_stop.toml"))
    stopped = [r for r in ev.affected_containers if r["off_filed_speed"]]
    assert stopped and max(r["longest_residence_min"] for r in stopped) == pytest.approx(12.0 + 6.0, abs=0.2)
    assert "reel-stop" in [f.code for f in ev.flags]


def test_a_heating_curve_filing_is_refused_for_a_continuous_system():
    loaded = load_case(DEMO / "corn_dome_drop.toml")
    data = loaded.case.model_dump()
    data["process"]["heat_penetration"] = {"model": "heating-curve", "fh_min": 14.0, "jh": 1.6}
    with pytest.raises(DeviationError, match="continuous system is evaluated container by container"):
        evaluate_case(replace(loaded, case=parse_case(data)))


def test_a_stream_needs_a_continuous_system_and_the_reverse():
    loaded = load_case(DEMO / "corn_dome_drop.toml")
    data = loaded.case.model_dump()
    data["deviation"]["stream"] = None
    with pytest.raises(CaseError, match="'hydrostatic' system needs deviation.stream"):
        parse_case(data)
    chili = load_case(DEMO / "chili_no_deviation.toml").case.model_dump()
    chili["deviation"]["stream"] = {"entry_start_min": 0.0, "entry_end_min": 10.0}
    with pytest.raises(CaseError, match="deviation.stream applies to a continuous system"):
        parse_case(chili)
