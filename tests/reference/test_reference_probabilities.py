"""Reference: probabilities that do not underflow, and the lot's probability (issue 12, item 10).

Source: C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., 1973: first-order
survivors ``N = N0 · 10^(-F/D)`` per container; survivors Poisson-distributed among containers,
so ``P(container nonsterile) = 1 - exp(-N)``; containers independent, so the lot holds at least
one nonsterile container with ``1 - (1 - p)^n`` (common practice).

Independent figures: python ``decimal`` at 60 to 1000 significant digits (the exponent range of
``decimal`` reaches 10^-999999, so nothing underflows there); ``Decimal(x)`` of a float is exact.

- ``log10_spoilage_probability`` for F/D = 400 and 1000 (p far below 1e-308, 0 in double
  precision) is ``log10 N0 - F/D``: exact, because ``log10(1 - exp(-N)) = log10 N + log10(1 -
  N/2 + ...)`` and N/2 < 1e-300;
- the lot probability against ``1 - (1 - p)^n`` in ``decimal`` for p from 0.3 to 1e-400 and n
  from 1 to 10^9;
- no value 0 for a positive probability is the only figure in the evaluation JSON: each one
  has its ``log10_`` twin.

Defects this module found, now fixed (kept as regressions):

- ``test_guidance_text_never_shows_0_for_a_positive_probability``: the reasons of the rule
  ``below-filed-target`` format the probabilities with ``{...:.2g}``; the garden peas 6 min
  short (OH-PEA-74x113, F0 2.63 min) with a spoilage D of 0.01 min read "the spoilage
  probability rises to 1.1e-263 per container against the filed 0" (the filed target's
  probability is 10^-500);
- ``test_monte_carlo_probability_has_its_log10_twin``: ``uncertainty.spoilage_probability_p95``
  is 0.0 with no ``log10_`` twin when it underflows (chili drop demo, spoilage D 0.008 min).
"""

from __future__ import annotations

import json
import math
import re
from decimal import Decimal, localcontext

import pytest

from deviation.evaluate import evaluate_case
from deviation.guidance.wording import fmt_probability
from deviation.physics.spoilage import log10_nonsterile_probability, lot_nonsterile_probability
from tests.reference.test_reference_model_vs_filed import demo_case

PROBABILITY_KEYS = ("spoilage_probability", "target_spoilage_probability",
                    "scheduled_spoilage_probability", "expected_nonsterile_containers",
                    "lot_nonsterile_probability")


def decimal_log10_nonsterile(F_min, D_min, n0, digits=60):
    """log10(1 - exp(-N)), N = N0 10^(-F/D), in decimal arithmetic."""
    with localcontext() as ctx:
        ctx.prec = digits
        N = Decimal(n0) * Decimal(10) ** (-(Decimal(F_min) / Decimal(D_min)))
        if N < Decimal("1e-20"):
            p = N - N * N / 2 + N * N * N / 6  # -expm1(-N), the rest below 10^-80 of p
        else:
            p = 1 - (-N).exp()
        return float(p.log10())


def decimal_lot(p_float, n, digits=1000):
    """1 - (1 - p)^n and its log10, in decimal arithmetic (p taken exactly from the float)."""
    with localcontext() as ctx:
        ctx.prec = digits
        P = 1 - (1 - Decimal(p_float)) ** n
        return P, float(P.log10())


def _tiny_D_case(ratio=400.0, n0=3.0, name="chili_temperature_drop", **kw):
    """A demo case with a spoilage D so small that F/D = ``ratio`` (p = 10^-ratio)."""
    first = evaluate_case(demo_case(name, **kw), what_if=False, rule_set=False)
    D = first.delivered_F_min / ratio
    loaded = demo_case(name, micro={"spoilage_D_min": D, "spores_per_container": n0}, **kw)
    return loaded, D


# --- per container -----------------------------------------------------------------------------


@pytest.mark.parametrize("ratio", [5.0, 20.0, 400.0, 1000.0])
def test_log10_nonsterile_probability_against_decimal(ratio):
    D, n0 = 0.5, 3.0
    got = log10_nonsterile_probability(ratio * D, D, n0)
    assert got == pytest.approx(decimal_log10_nonsterile(ratio * D, D, n0), rel=1e-12)
    if ratio >= 400.0:  # below 1e-308: the first-order figure exactly
        assert got == math.log10(n0) - ratio


def test_underflowing_probability_keeps_its_exponent_through_the_evaluation():
    loaded, D = _tiny_D_case(400.0)
    ev = evaluate_case(loaded, what_if=False)
    F = ev.delivered_F_min  # the spoilage organism has the process's z and Tref here
    assert F / D == pytest.approx(400.0, rel=1e-9)
    lp = math.log10(3.0) - F / D
    assert ev.spoilage_probability == 0.0  # 10^-399.5: below the double range
    assert ev.log10_spoilage_probability == pytest.approx(lp, rel=1e-12)
    assert ev.log10_target_spoilage_probability == pytest.approx(math.log10(3.0) - ev.target_F_min / D,
                                                                 rel=1e-12)
    lot = loaded.case.deviation.lot_size_containers
    assert ev.log10_expected_nonsterile_containers == pytest.approx(lp + math.log10(lot), rel=1e-12)
    with localcontext() as ctx:
        ctx.prec = 1000
        p = Decimal(10) ** Decimal(lp)
        exact_lot = float((1 - (1 - p) ** lot).log10())
    assert ev.log10_lot_nonsterile_probability == pytest.approx(exact_lot, rel=1e-12)
    assert ev.lot_nonsterile_probability == 0.0


# --- the lot -------------------------------------------------------------------------------------


@pytest.mark.parametrize("p, n", [(0.3, 50), (1e-3, 1), (1e-3, 4800), (1e-6, 4800), (1e-9, 10**6),
                                  (1e-12, 10**9), (1e-200, 10**9), (0.5, 10**6)])
def test_lot_probability_against_decimal(p, n):
    lp = math.log10(p)
    P, log10_P = lot_nonsterile_probability(lp, n)
    exact, exact_log10 = decimal_lot(10.0**lp, n)  # the function forms p = 10^lp
    assert P == pytest.approx(float(exact), rel=1e-12)
    assert log10_P == pytest.approx(exact_log10, rel=1e-12, abs=1e-15)


def test_lot_probability_below_the_double_range():
    lp, n = -400.0, 4800
    P, log10_P = lot_nonsterile_probability(lp, n)
    with localcontext() as ctx:
        ctx.prec = 1000
        exact = 1 - (1 - Decimal(10) ** Decimal(lp)) ** n
        assert log10_P == pytest.approx(float(exact.log10()), rel=1e-12)
    assert P == 0.0


def test_lot_probability_of_an_evaluation():
    ev = evaluate_case(demo_case("chili_temperature_drop"), what_if=False)
    lot = demo_case("chili_temperature_drop").case.deviation.lot_size_containers
    exact, exact_log10 = decimal_lot(10.0**ev.log10_spoilage_probability, lot)
    assert 0.0 < ev.spoilage_probability < 1e-3
    assert ev.lot_nonsterile_probability == pytest.approx(float(exact), rel=1e-10)
    assert ev.log10_lot_nonsterile_probability == pytest.approx(exact_log10, rel=1e-10)
    # the lot's probability is never below the single container's
    assert ev.lot_nonsterile_probability >= ev.spoilage_probability


# --- nothing shown as 0 ------------------------------------------------------------------------


def test_no_zero_probability_in_the_json_without_its_log10_twin():
    loaded, _ = _tiny_D_case(400.0)
    data = json.loads(evaluate_case(loaded, what_if=False).model_dump_json())
    zeros = [key for key in PROBABILITY_KEYS if data[key] == 0.0]
    assert zeros  # the case underflows
    for key in PROBABILITY_KEYS:
        twin = data[f"log10_{key}"]
        assert isinstance(twin, float) and math.isfinite(twin), key
        if data[key] > 0.0:
            assert twin == pytest.approx(math.log10(data[key]), rel=1e-9, abs=1e-12)
    for key, value in data["facts"].items():  # facts are read by the rules; twins at top level
        if value == 0.0 and key in PROBABILITY_KEYS:
            assert math.isfinite(data[f"log10_{key}"])


def test_monte_carlo_probability_has_its_log10_twin():
    loaded = demo_case("chili_temperature_drop", micro={"spoilage_D_min": 0.008, "spores_per_container": 3.0},
                       deviation={"uncertainty": {"samples": 30}})
    mc = json.loads(evaluate_case(loaded, what_if=False).model_dump_json())["uncertainty"]
    for key, value in mc.items():
        if "probability" in key and "below_target" not in key and value == 0.0:
            twin = mc.get(f"log10_{key}")
            assert isinstance(twin, float) and math.isfinite(twin), key


def test_fmt_probability_never_shows_0_for_a_positive_probability():
    assert fmt_probability(0.0, math.log10(3.0) - 400.0).startswith("3.00e-400")
    assert fmt_probability(1e-320, -320.0).startswith("1.00e-320")  # a subnormal double


def test_guidance_text_never_shows_0_for_a_positive_probability():
    loaded = demo_case("peas_short_hold", micro={"spoilage_D_min": 0.01})
    ev = evaluate_case(loaded, what_if=False)
    assert ev.log10_target_spoilage_probability is not None  # positive, 10^-500
    assert "below-filed-target" in ev.guidance["fired"]
    for reason in ev.guidance["reasons"]:
        # a bare 0 (not part of another number) in a sentence about probabilities
        if "probability" in reason["text"]:
            assert not re.search(r"(?<![\d.eE+-])0(?![\d.eE])", reason["text"]), reason["text"]
