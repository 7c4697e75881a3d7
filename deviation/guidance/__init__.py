"""Guidance: what to do with a lot after a deviation, as rules that are data.

Modules: ``vocabulary`` (facts, flags, dispositions), ``conditions`` (the condition schema and
three-valued logic), ``rules`` (rules, rule sets, loading and layering), ``explain`` (guidance
and explanations), ``wording`` (how every face shows a disposition).

A rule file is TOML holding ``[[rule]]`` tables. Each rule names a condition over the facts
of an evaluation (``delivered_F_min``, ``botulinum_log_reductions``, ...) and the deviation
flag codes, a disposition, the reasons shown to the user, the actions required and its basis
(the regulation or published practice it rests on). The shipped default set is
``rules/default.toml``; a plant layers its own files over it, overriding rules by id.

Dispositions, least to most severe (the most severe disposition among the rules that fire
wins): ``no-deviation``, ``covered-by-alternate``, ``evaluate``, ``reprocess``,
``reprocess-or-destroy``.

Conditions are structured tables, never strings to evaluate::

    { metric = "delivered_F_min", op = "<", value = 6.0 }
    { metric = "delivered_F_min", op = "<", metric_ref = "target_F_min", scale = 1.0 }
    { flag = "temperature-low" }
    { any_flag = ["record-gap", "critical-factor-out"] }
    { all = [cond, ...] }   { any = [cond, ...] }   { not = cond }

A fact whose value is ``None`` (not computed) makes a comparison on it *unknown*. Logic is
three-valued (Kleene): ``all`` is false if any part is false, ``any`` is true if any part is
true, ``not`` keeps unknown unknown; a rule fires only when its condition is true. Unknown
comparisons are reported in :func:`explain` and in ``Guidance.not_computed``, and the default
rules reach the severe outcome for missing lethality through ``lethality_established == false``.

The tool gives guidance, never a release: the process authority decides, in writing, and
local regulations govern (21 CFR 113.89).

References
----------
.. [1] 21 CFR 113.89, Deviations in processing, venting, or critical control factors.
.. [2] 21 CFR 113.40, Equipment and procedures for pressure processing in steam in still retorts.
.. [3] 21 CFR 113.100, Processing and production records.
.. [4] Stumbo, C. R. (1973). Thermobacteriology in Food Processing, 2nd ed. Academic Press.
.. [5] US FDA, Guide to Inspections of Low Acid Canned Food Manufacturers, Part 1.
"""

from deviation.guidance.explain import (
    Guidance,
    GuidanceReason,
    RuleExplanation,
    evaluate_guidance,
    explain,
)
from deviation.guidance.rules import (
    Rule,
    RuleSet,
    Settings,
    check_rule_file,
    default_rules_path,
    load_rule_set,
)
from deviation.guidance.vocabulary import (
    BOOLEAN_METRICS,
    DEVIATION_FLAG_CODES,
    DISPOSITION_SUMMARY,
    DISPOSITIONS,
    FLAG_CODES,
    INFORMATION_FLAG_CODES,
    NUMERIC_METRICS,
    OPERATORS,
    STANDING_CAUTION,
    TEXT_FACTS,
    severity,
)

__all__ = [
    "BOOLEAN_METRICS", "DEVIATION_FLAG_CODES", "DISPOSITIONS", "DISPOSITION_SUMMARY", "FLAG_CODES", "INFORMATION_FLAG_CODES",
    "NUMERIC_METRICS", "OPERATORS", "STANDING_CAUTION", "TEXT_FACTS", "Guidance", "GuidanceReason",
    "Rule", "RuleExplanation", "RuleSet", "Settings", "check_rule_file", "default_rules_path",
    "evaluate_guidance", "explain", "load_rule_set", "severity",
]
