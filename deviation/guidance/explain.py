"""Applying rules to the facts of one evaluation: the guidance (most severe disposition wins,
with every reason and its basis) and the explanation of why each rule did or did not fire."""

from __future__ import annotations

import math

from typing import Any, Mapping, Sequence

from pydantic import BaseModel

from deviation.guidance.conditions import Facts, Outcome, _missing, _word
from deviation.guidance.rules import Rule, RuleSet
from deviation.guidance.vocabulary import (
    DEVIATION_FLAG_CODES,
    DISPOSITION_SUMMARY,
    INFORMATION_FLAG_CODES,
    STANDING_CAUTION,
)


class GuidanceReason(BaseModel):
    """One reason shown to the user, with the rule it comes from and that rule's basis."""

    rule_id: str
    text: str
    basis: str


class Guidance(BaseModel):
    """What to do with the lot, why, and on what basis (the ``guidance`` of the JSON output)."""

    disposition: str
    summary: str
    reasons: list[GuidanceReason]
    actions: list[str]
    caution: str
    fired: list[str]
    not_computed: list[str]
    rule_set_sha256: str


class RuleExplanation(BaseModel):
    """How one rule came out on one evaluation (``deviation rules explain``)."""

    id: str
    title: str
    disposition: str
    enabled: bool
    fired: bool
    outcome: str
    trace: list[str]
    not_computed: list[str]
    source: str

    @property
    def rule_id(self) -> str:
        """The rule's id (same as ``id``; the name GuidanceReason uses)."""
        return self.id


class _Shown:
    """A fact for ``str.format_map``: ``n/a`` when not computed, never an exception; a
    probability that underflowed to 0 is shown from its ``log10`` twin, never as 0."""

    def __init__(self, value: Any, log10: float | None = None) -> None:
        self.value = value
        self.log10 = log10

    def __format__(self, spec: str) -> str:
        if _missing(self.value):
            return "n/a"
        if isinstance(self.value, bool):
            return "yes" if self.value else "no"
        if self.log10 is not None and isinstance(self.value, float) and 0.0 <= self.value < 1e-300:
            exponent = math.floor(self.log10)
            return f"{10.0 ** (self.log10 - exponent):.2g}e{exponent}"
        try:
            return format(self.value, spec)
        except (TypeError, ValueError):
            return str(self.value)

    def __str__(self) -> str:
        return self.__format__("")


class _SafeFacts(dict):
    def __missing__(self, key: str) -> _Shown:
        return _Shown(None)


def _reason_mapping(facts: Mapping[str, Any], flags: Sequence[str]) -> _SafeFacts:
    mapping = _SafeFacts({name: _Shown(value, facts.get(f"log10_{name}")) for name, value in facts.items()})
    # The flags that are deviations of this cycle (not the information about the filed process).
    shown = [flag for flag in flags if flag not in INFORMATION_FLAG_CODES]
    mapping["deviation_flags"] = _Shown(", ".join(shown) if shown else "none")
    return mapping


def _run(rule: Rule, facts: Facts, flags: frozenset[str]) -> tuple[Outcome, list[str], list[str]]:
    outcome, trace = rule.when.evaluate(facts, flags)
    missing = sorted({name for name in rule.when.metrics() if _missing(facts.get(name))})
    return outcome, trace, missing


def explain(
    rule_set: RuleSet, facts: Mapping[str, Any], flags: Sequence[str]
) -> list[RuleExplanation]:
    """Each rule of the set, whether it fired, and a trace of its condition with the facts.

    Parameters
    ----------
    rule_set
        Rules from :func:`load_rule_set`.
    facts
        Evaluation facts by metric name (``None`` for a fact not computed).
    flags
        Flag codes raised by the evaluation.
    """
    flag_set = frozenset(flags)
    explanations = []
    for rule in rule_set.rules:
        source = rule_set.rule_sources.get(rule.id, "")
        if not rule.enabled:
            explanations.append(
                RuleExplanation(
                    id=rule.id, title=rule.title, disposition=rule.disposition, enabled=False,
                    fired=False, outcome="disabled", trace=[f"disabled by {source}"],
                    not_computed=[], source=source,
                )
            )
            continue
        outcome, trace, missing = _run(rule, facts, flag_set)
        explanations.append(
            RuleExplanation(
                id=rule.id, title=rule.title, disposition=rule.disposition, enabled=True,
                fired=outcome is True, outcome=_word(outcome), trace=trace,
                not_computed=missing, source=source,
            )
        )
    return explanations


_FALLBACK_REASON = (
    "A deviation was found but no guidance rule covers it: the lot is held until the process "
    "authority evaluates it."
)


_FALLBACK_ACTIONS = (
    "Hold the lot: do not ship, label and segregate it.",
    "Notify the process authority now; record the deviation in the deviation file.",
)


def evaluate_guidance(
    rule_set: RuleSet, facts: Mapping[str, Any], flags: Sequence[str]
) -> Guidance:
    """Guidance for a lot: the most severe disposition of the rules that fire.

    Reasons and actions come from the fired rules, ordered by severity (most severe first) and
    then by rule order; actions are de-duplicated. When no rule fires the disposition is
    ``no-deviation`` only if ``deviation_found`` is false and no deviation flag is raised;
    otherwise it is ``evaluate`` with a reason saying no rule covered the deviation.

    Parameters
    ----------
    rule_set
        Rules from :func:`load_rule_set`.
    facts
        Evaluation facts by metric name (``None`` for a fact not computed); names outside
        :data:`NUMERIC_METRICS`, :data:`BOOLEAN_METRICS` and :data:`TEXT_FACTS` are ignored.
    flags
        Flag codes raised by the evaluation.

    Returns
    -------
    Guidance
        Disposition, reasons with their basis, actions, the standing caution, the fired rule
        ids, the metrics rules needed but were not computed, and the rule set's hash.

    References
    ----------
    .. [1] 21 CFR 113.89 (hold, evaluation by a process authority, reprocess or destroy).
    """
    flag_set = frozenset(flags)
    flag_list = list(dict.fromkeys(flags))
    fired: list[tuple[int, int, Rule]] = []
    not_computed: set[str] = set()
    for order, rule in enumerate(rule_set.enabled_rules()):
        outcome, _trace, missing = _run(rule, facts, flag_set)
        not_computed.update(missing)
        if outcome is True:
            fired.append((-rule.severity(), order, rule))
    fired.sort(key=lambda item: (item[0], item[1]))
    mapping = _reason_mapping(facts, flag_list)

    reasons = [
        GuidanceReason(rule_id=rule.id, text=text.format_map(mapping), basis=rule.basis)
        for _, _, rule in fired
        for text in rule.reasons
    ]
    actions = list(dict.fromkeys(action for _, _, rule in fired for action in rule.actions))
    disposition = fired[0][2].disposition if fired else "no-deviation"

    deviation_possible = facts.get("deviation_found") is not False or bool(
        flag_set & DEVIATION_FLAG_CODES
    )
    if disposition == "no-deviation" and deviation_possible:
        # Defensive: a deviation (or an unknown answer to "was there one?") is never waved on.
        disposition = "evaluate"
        reasons.append(
            GuidanceReason(rule_id="no-rule-covered", text=_FALLBACK_REASON, basis="21 CFR 113.89")
        )
        actions = list(dict.fromkeys([*actions, *_FALLBACK_ACTIONS]))

    return Guidance(
        disposition=disposition,
        summary=DISPOSITION_SUMMARY[disposition],
        reasons=reasons,
        actions=actions,
        caution=STANDING_CAUTION,
        fired=[rule.id for _, _, rule in fired],
        not_computed=sorted(not_computed),
        rule_set_sha256=rule_set.sha256,
    )
