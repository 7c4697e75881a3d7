"""Reference: the temperature-indicating device is the reference instrument (issue 12, item 4).

Sources: 21 CFR 113.40(a)(1) and (a)(2) (still steam retorts; the same words for the other
systems): "the temperature-indicating device, not the temperature/time recording device, shall
be used as the reference instrument for indicating the processing temperature", and the recorder
is adjusted to agree as nearly as possible with, and never higher than, the indicating device;
9 CFR 318.305(a)(1) for meat and poultry. A process authority evaluates on the lower of the two
(shared/domain.md, "Safe-side rules a process authority applies").

The cases: the demo plant's chili can (87 x 115 mm, conduction, fh 52 min, filed 72 min at
121.1 °C, target F0 6.50 min), a retort record every 0.5 min whose recorder reads 1.5 °C above
the indicating device through the hold, the indicating device read every 5 min (sparse cells of
``indicating_temperature_C``). The true retort (the indicating readings) held 120.1 °C.

Measured::

    recorder alone (121.6 °C):                   F0 6.98 min  no-deviation
    recorder + indicating column (flag raised):   F0 5.05 min  reprocess (below the target)
    a log written at the indicating values:       F0 5.12 min  reprocess
    exact series on the indicating values:        F0 5.71 min  (the product)

The tool lowers the whole recorder trace (come-up and cooling too) by the largest excess, so it
stays a little below the log written at the indicating values (0.986 x).

(issue 12 quoted 7.05 for the recorder and 5.15 for the indicating readings on its own record).
"""

from __future__ import annotations

import numpy as np
import pytest

from deviation.evaluate import evaluate_case
from deviation.guidance import severity
from tests.reference.test_reference_model_vs_filed import demo_case, exact_F0, log_text

EXCESS_C = 1.5
TRUE_HOLD_C = 120.1
STEP_MIN = 0.5


def record(hold_C=TRUE_HOLD_C, hold_min=72.0, come_up_min=10.0, initial_C=40.0):
    """Time, the true retort (what the indicating device reads), and the hold window."""
    off = come_up_min + hold_min
    t = np.arange(0.0, off + 60.0 + 1e-9, STEP_MIN)
    true = np.where(t <= come_up_min, initial_C + (hold_C - initial_C) * t / come_up_min, hold_C)
    true = np.where(t > off + 1e-9, 20.0, true)
    hold = (t >= come_up_min) & (t <= off)
    return t, true, hold


def indicating_every_5_min(t, values, hold):
    return np.where(hold & np.isclose(np.mod(t, 5.0), 0.0), values, np.nan)


def evaluate(text):
    loaded = demo_case(deviation={"initial_temperature_C": 40.0}, text=text)
    return evaluate_case(loaded, what_if=False)


def codes(ev):
    return [f.code for f in ev.flags]


def test_recorder_above_indicating_is_evaluated_on_the_indicating_device():
    t, true, hold = record()
    recorder = true + np.where(hold, EXCESS_C, 0.0)
    indicating = indicating_every_5_min(t, true, hold)
    both = evaluate(log_text(t, recorder, indicating))
    recorder_only = evaluate(log_text(t, recorder))
    at_indicating = evaluate(log_text(t, true))
    # the recorder alone would release the lot
    assert recorder_only.delivered_F_min >= recorder_only.target_F_min
    assert recorder_only.guidance["disposition"] == "no-deviation"
    # with the indicating readings: the flag, and the figure of the indicating device
    (flag,) = [f for f in both.flags if f.code == "recorder-above-indicating"]
    assert flag.value == pytest.approx(EXCESS_C, abs=1e-6)
    assert "21 CFR 113.40" in flag.message
    assert "recorder-above-indicating" in both.guidance["fired"]
    assert both.delivered_F_min < both.target_F_min
    assert both.delivered_F_min <= at_indicating.delivered_F_min + 1e-9
    assert both.delivered_F_min == pytest.approx(at_indicating.delivered_F_min, rel=0.02)
    # never a milder disposition than a log written at the indicating values
    assert severity(both.guidance["disposition"]) >= severity(at_indicating.guidance["disposition"])
    assert severity(both.guidance["disposition"]) >= severity("reprocess")
    # never more than the product received on the indicating values (exact series); 1e-3 grid
    assert both.delivered_F_min <= exact_F0(t, true, 40.0) * (1.0 + 1e-3)
    assert both.F0_min / 0.21 <= exact_F0(t, true, 40.0) / 0.21 * (1.0 + 1e-3)


def test_the_whole_trace_is_lowered_by_the_largest_excess():
    # one indicating reading 1.5 °C below the recorder, the others agreeing: the recorder is not
    # trusted elsewhere either, so the figure is never above a log at the pointwise lower of the
    # two instruments nor above the recorder lowered by 1.5 °C throughout
    t, true, hold = record(hold_C=121.6)
    indicating = indicating_every_5_min(t, true, hold)
    one = np.flatnonzero(np.isfinite(indicating))[7]
    indicating[one] = true[one] - EXCESS_C
    ev = evaluate(log_text(t, true, indicating))
    assert "recorder-above-indicating" in codes(ev)
    pointwise_lower = np.where(np.isfinite(indicating), np.fmin(true, indicating), true)
    assert ev.delivered_F_min <= evaluate(log_text(t, pointwise_lower)).delivered_F_min + 1e-9
    assert ev.delivered_F_min == pytest.approx(evaluate(log_text(t, true - EXCESS_C)).delivered_F_min,
                                               rel=1e-9)


def test_indicating_readings_in_fahrenheit_are_the_same_reference():
    t, true, hold = record()
    recorder = true + np.where(hold, EXCESS_C, 0.0)
    celsius = evaluate(log_text(t, recorder, indicating_every_5_min(t, true, hold)))
    fahrenheit = evaluate(log_text(t, recorder, indicating_every_5_min(t, true * 9.0 / 5.0 + 32.0, hold),
                                   column="indicating_temperature_F"))
    assert "recorder-above-indicating" in codes(fahrenheit)
    assert fahrenheit.delivered_F_min == pytest.approx(celsius.delivered_F_min, rel=1e-4)


@pytest.mark.parametrize("below_C", [0.5, 0.1])
def test_a_recorder_reading_below_the_indicating_device_changes_nothing(below_C):
    # 21 CFR 113.40 forbids only the recorder reading higher; lower is already the safe side
    t, true, hold = record(hold_C=121.6)
    indicating = indicating_every_5_min(t, true + below_C, hold)
    with_column = evaluate(log_text(t, true, indicating))
    without = evaluate(log_text(t, true))
    assert "recorder-above-indicating" not in codes(with_column)
    assert with_column.delivered_F_min == without.delivered_F_min
    assert with_column.guidance["disposition"] == without.guidance["disposition"]
    assert codes(with_column) == codes(without)
