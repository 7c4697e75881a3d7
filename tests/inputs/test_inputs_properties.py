"""Issue 13 property: arbitrary values and files through the case loader and the CSV reader.

0 tracebacks (every refusal is a DeviationError naming the field or line), 0 hangs (each example
is bounded in time), no accepted value outside its bounds (rules/limits.toml), and an accepted
record never holds a reading a retort cannot give. Run with ``--hypothesis-show-statistics`` to
see the number of examples.
"""

from __future__ import annotations

import math
import time
import tomllib
from pathlib import Path

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from deviation.errors import DeviationError
from deviation.evaluate import evaluate_case
from deviation.inputs import limits
from deviation.inputs.case import LoadedCase, _bounds, parse_case
from deviation.inputs.logs import parse_log_text

GOOD = Path(__file__).resolve().parents[2] / "tests" / "data" / "good_case.toml"
BASE = tomllib.loads(GOOD.read_text())
# Every numeric key of the case, with where it sits.
NUMERIC_KEYS = [
    ("process", k) for k in ("process_temperature_C", "process_time_min", "come_up_time_min",
                             "minimum_initial_temperature_C", "target_F_min", "z_C",
                             "reference_temperature_C", "cooling_water_temperature_C")
] + [("process.microbiology", k) for k in ("spoilage_D_min", "spores_per_container", "botulinum_D_min")] + [
    ("process.container", k) for k in ("diameter_mm", "height_mm")
] + [("process.heat_penetration", k) for k in ("fh_min", "jh")] + [
    ("deviation", k) for k in ("lot_size_containers", "initial_temperature_C", "record_gap_limit_min")
]

ANY_VALUE = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.floats(min_value=-1e3, max_value=1e3),
    st.integers(min_value=-10**12, max_value=10**12),
    st.booleans(),
    st.text(max_size=12),
    st.just(""),
    st.just("   "),
    st.lists(st.integers(), max_size=3),
    st.none(),
)

ACCEPTED = {"cases": 0, "refused": 0}


def _table(data: dict, where: str) -> dict:
    node = data
    for part in where.split("."):
        node = node[part]
    return node


def _in_bounds(case) -> None:
    """Every bounded number the accepted case holds lies inside its bounds."""
    bounds = _bounds()

    def walk(model):
        for name in type(model).model_fields:
            value = getattr(model, name)
            if hasattr(value, "model_fields"):
                walk(value)
            elif isinstance(value, list):
                for item in value:
                    if hasattr(item, "model_fields"):
                        walk(item)
            elif name in bounds and isinstance(value, (int, float)) and not isinstance(value, bool):
                low, high, _ = bounds[name]
                assert math.isfinite(value) and low <= value <= high, (name, value)

    walk(case)


@settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(changes=st.lists(st.tuples(st.sampled_from(NUMERIC_KEYS), ANY_VALUE), min_size=1, max_size=4),
       text=st.sampled_from([("deviation", "lot"), ("deviation", "retort_id"), ("process", "id"),
                             ("process", "product")]),
       text_value=st.one_of(st.text(max_size=8), st.just("  \t ")))
def test_any_case_values_give_a_case_or_a_clear_refusal(changes, text, text_value):
    data = {k: (dict(v) if isinstance(v, dict) else v) for k, v in BASE.items()}
    data["process"] = {k: (dict(v) if isinstance(v, dict) else v) for k, v in BASE["process"].items()}
    data["deviation"] = dict(BASE["deviation"])
    for (where, key), value in changes:
        _table(data, where)[key] = value
    _table(data, text[0])[text[1]] = text_value
    started = time.monotonic()
    try:
        case = parse_case(data, source="property")
    except DeviationError as exc:
        ACCEPTED["refused"] += 1
        assert str(exc).startswith("property: ") and len(str(exc)) < 2000
        return
    ACCEPTED["cases"] += 1
    _in_bounds(case)
    assert case.deviation.lot.strip() and case.process.id.strip()
    assert case.deviation.initial_temperature_C < case.process.process_temperature_C
    # An accepted case evaluates, or says clearly why not.
    try:
        ev = evaluate_case(LoadedCase(case=case, source="property", sha256=""), what_if=False)
    except DeviationError:
        return
    assert math.isfinite(ev.delivered_F_min) and ev.guidance is not None
    assert time.monotonic() - started < 30.0


ROW = st.one_of(
    st.tuples(st.floats(allow_nan=True, allow_infinity=True), st.floats(allow_nan=True, allow_infinity=True)).map(
        lambda r: f"{r[0]!r},{r[1]!r}"),
    st.tuples(st.floats(0, 300), st.floats(-100, 400)).map(lambda r: f"{r[0]:.2f},{r[1]:.2f}"),
    st.text(alphabet="0123456789,.;-eE \t#", max_size=20),
    st.just("99999999.00,20.00"),
    st.just("0,28,00"),
)


@settings(max_examples=400, deadline=None)
@given(header=st.sampled_from(["time_min,temperature_C", "time_min,temperature_F", "time,temperature_C",
                               "time_min;temperature_C", "root:x:0:0:root", ""]),
       rows=st.lists(ROW, max_size=40))
def test_any_log_text_gives_a_record_or_a_clear_refusal(header, rows):
    text = "\n".join([header, *rows])
    try:
        profile = parse_log_text(text, source="p.csv")
    except DeviationError as exc:
        assert str(exc).startswith("p.csv: ")
        assert "root:x" not in str(exc)  # a file that is no log is never echoed
        return
    lim = limits.current()
    assert profile.time_min[-1] <= lim.record_span_max_min
    assert np.all(np.isfinite(profile.temperature_C))
    assert np.all((profile.temperature_C >= lim.retort_reading_min_C)
                  & (profile.temperature_C <= lim.retort_reading_max_C))
    assert np.all(np.diff(profile.time_min) > 0)
