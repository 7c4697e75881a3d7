"""Guidance rules: what to do with a lot after a deviation, as data.

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

from __future__ import annotations

import difflib
import hashlib
import json
import math
import operator
import os
import re
import string
import tomllib
from collections.abc import Iterable, Mapping, Sequence
from pathlib import Path
from typing import Annotated, Any, Union

from pydantic import (
    AfterValidator,
    BaseModel,
    ConfigDict,
    Discriminator,
    Field,
    Tag,
    ValidationError,
    ValidationInfo,
    field_validator,
    model_validator,
)
from pydantic_core import PydanticCustomError as _PydanticCustomError

from deviation.errors import RulesError

__all__ = [
    "BOOLEAN_METRICS",
    "DEVIATION_FLAG_CODES",
    "DISPOSITIONS",
    "DISPOSITION_SUMMARY",
    "FLAG_CODES",
    "NUMERIC_METRICS",
    "OPERATORS",
    "STANDING_CAUTION",
    "TEXT_FACTS",
    "Guidance",
    "GuidanceReason",
    "Rule",
    "RuleExplanation",
    "RuleSet",
    "check_rule_file",
    "default_rules_path",
    "evaluate_guidance",
    "explain",
    "load_rule_set",
    "severity",
]

# --------------------------------------------------------------------------------------------
# Vocabulary shared with the evaluation (deviation/evaluate.py provides exactly these facts)
# --------------------------------------------------------------------------------------------

NUMERIC_METRICS: tuple[str, ...] = (
    "delivered_F_min",
    "target_F_min",
    "scheduled_F_min",
    "F_margin_min",
    "botulinum_log_reductions",
    "botulinum_log_reductions_required",
    "spoilage_probability",
    "target_spoilage_probability",
    "expected_nonsterile_containers",
    "lot_size_containers",
    "max_record_gap_min",
    "record_gap_limit_min",
    "lowest_retort_during_hold_C",
    "process_temperature_C",
    "temperature_drop_C",
    "hold_deficit_min",
    "come_up_excess_min",
    "initial_temperature_deficit_C",
    "scheduled_F_ratio",
    "degree_minutes_below_C_min",
)
"""Numeric facts a condition may compare (units in the names)."""

BOOLEAN_METRICS: tuple[str, ...] = (
    "deviation_found",
    "covered_by_alternate",
    "lethality_established",
    "lethality_fully_established",
    "critical_factor_out",
    "cycle_running",
    "measured_cold_spot",
)
"""True/false facts a condition may test with ``==`` or ``!=``."""

TEXT_FACTS: tuple[str, ...] = ("critical_factors_out", "deviation_flags")
"""Facts usable only as ``{placeholders}`` in reasons, never in conditions.

``critical_factors_out``: the critical factors outside their filed limits, in words (given by the
evaluation when it has them); ``deviation_flags``: the flag codes passed in, comma-separated
(always filled in by this module).
"""

FLAG_CODES: tuple[str, ...] = (
    "temperature-low",
    "short-hold",
    "long-come-up",
    "low-initial-temperature",
    "record-gap",
    "process-temperature-not-reached",
    "record-ends-before-cooling",
    "critical-factor-out",
    "scheduled-F-below-target",
    "implausible-input",
    "alternate-process-met",
)
"""Flag codes the evaluation may raise; a rule naming any other code is a load-time error."""

DEVIATION_FLAG_CODES: frozenset[str] = frozenset(FLAG_CODES) - {"alternate-process-met"}
"""Flag codes that mean a deviation (``alternate-process-met`` is information only)."""

DISPOSITIONS: tuple[str, ...] = (
    "no-deviation",
    "covered-by-alternate",
    "evaluate",
    "reprocess",
    "reprocess-or-destroy",
)
"""Dispositions ordered from least to most severe."""

DISPOSITION_SUMMARY: dict[str, str] = {
    "no-deviation": "The record shows every critical factor of the scheduled process met.",
    "covered-by-alternate": (
        "The cycle as recorded meets an alternate process filed with the scheduled process; "
        "document it in the deviation file."
    ),
    "evaluate": (
        "A deviation happened: hold the lot; the process authority evaluates it before any "
        "release."
    ),
    "reprocess": (
        "Delivered lethality is below the filed target: hold the lot; reprocess it as filed or "
        "have the process authority evaluate it."
    ),
    "reprocess-or-destroy": (
        "Public-health risk: the lot may not leave the plant under any reading of this tool; "
        "reprocess it as filed or destroy it."
    ),
}
"""One plain sentence per disposition, for an operator."""

STANDING_CAUTION: str = (
    "This is guidance, never a release: the process authority decides, in writing, and local "
    "regulations govern. "
    "Incubating samples cannot by itself show that a lot is safe: C. botulinum can grow without "
    "swelling the container. "
    "If any container of a deviant lot has been distributed, the regulator must be told. "
    "Incomplete records may make a lot impossible to evaluate; such a lot is reprocessed or "
    "destroyed."
)
"""Shown with every guidance, whatever the rules say."""

OPERATORS: dict[str, Any] = {
    "<": operator.lt,
    "<=": operator.le,
    ">": operator.gt,
    ">=": operator.ge,
    "==": operator.eq,
    "!=": operator.ne,
}
"""Comparisons a metric condition may use."""

_KNOWN_METRICS = NUMERIC_METRICS + BOOLEAN_METRICS
_PLACEHOLDER_FACTS = _KNOWN_METRICS + TEXT_FACTS
_SEVERITY = {name: rank for rank, name in enumerate(DISPOSITIONS)}
_ID_PATTERN = re.compile(r"^[a-z0-9]+(?:-[a-z0-9]+)*$")
_RULES_DIR_ENV = "DEVIATION_RULES_DIR"
_DEFAULT_FILE_NAME = "default.toml"


def _schema_error(kind: str, template: str, context: Mapping[str, Any]) -> Exception:
    """A pydantic error whose message is formatted here (``str.format``, so ``!r`` works)."""
    return _PydanticCustomError(kind, template.format(**context))


def severity(disposition: str) -> int:
    """Rank of a disposition: 0 for ``no-deviation`` up to 4 for ``reprocess-or-destroy``."""
    return _SEVERITY[disposition]


def default_rules_path() -> Path:
    """Path of the shipped default rule set.

    ``$DEVIATION_RULES_DIR/default.toml`` when that variable is set, else ``rules/default.toml``
    beside the package (the repository layout).
    """
    override = os.environ.get(_RULES_DIR_ENV)
    if override:
        return Path(override).expanduser() / _DEFAULT_FILE_NAME
    return Path(__file__).resolve().parents[2] / "rules" / _DEFAULT_FILE_NAME


# --------------------------------------------------------------------------------------------
# Helpers for messages and traces
# --------------------------------------------------------------------------------------------


def _describe(value: Any) -> str:
    """Name a TOML value and show it, for error messages: ``string '6.0'``, ``number 1``."""
    if isinstance(value, bool):
        return f"boolean {'true' if value else 'false'}"
    if isinstance(value, (int, float)):
        return f"number {value!r}"
    if isinstance(value, str):
        return f"string {value!r}"
    if isinstance(value, list):
        return "an array"
    if isinstance(value, dict):
        return "a table"
    return f"{type(value).__name__} {value!r}"


def _missing(value: Any) -> bool:
    """A fact counts as not computed when it is None or NaN."""
    return value is None or (isinstance(value, float) and math.isnan(value))


def _show(value: Any) -> str:
    """Show a fact value in a trace."""
    if _missing(value):
        return "not computed"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        number = float(value)
        if number.is_integer() and abs(number) < 1e15:
            return f"{number:.1f}"
        return f"{number:.6g}"
    return str(value)


def _word(outcome: bool | None) -> str:
    return "unknown" if outcome is None else ("true" if outcome else "false")


def _metric_kind(name: str) -> str:
    return "number" if name in NUMERIC_METRICS else "true/false"


def _check_metric_name(name: str) -> str:
    if name not in _KNOWN_METRICS:
        raise _schema_error(
            "unknown_metric",
            "unknown metric {name!r}; known: {known}",
            {"name": name, "known": ", ".join(_KNOWN_METRICS)},
        )
    return name


def _check_flag_code(code: str) -> str:
    if code not in FLAG_CODES:
        raise _schema_error(
            "unknown_flag",
            "unknown flag code {code!r}; known: {known}",
            {"code": code, "known": ", ".join(FLAG_CODES)},
        )
    return code


# --------------------------------------------------------------------------------------------
# Schema
# --------------------------------------------------------------------------------------------

_CONFIG = ConfigDict(extra="forbid", strict=True, frozen=True)

Outcome = Union[bool, None]
"""Three-valued outcome of a condition: True, False or None (unknown)."""
Facts = Mapping[str, Any]
Traced = tuple[Outcome, list[str]]


class MetricCondition(BaseModel):
    """Compare a metric with a literal value or with another metric (times ``scale``)."""

    model_config = _CONFIG

    metric: str
    op: str
    value: Any = None
    metric_ref: str | None = None
    scale: float | None = None

    @field_validator("metric")
    @classmethod
    def _known_metric(cls, name: str) -> str:
        return _check_metric_name(name)

    @field_validator("op")
    @classmethod
    def _known_op(cls, op: str, info: ValidationInfo) -> str:
        if op not in OPERATORS:
            raise _schema_error(
                "unknown_comparison",
                "unknown comparison {op!r}; expected one of: {known}",
                {"op": op, "known": ", ".join(OPERATORS)},
            )
        metric = info.data.get("metric")
        if metric in BOOLEAN_METRICS and op not in ("==", "!="):
            raise _schema_error(
                "op_for_boolean",
                "comparison {op!r} does not apply to the true/false metric {metric!r}; "
                "use == or !=",
                {"op": op, "metric": metric},
            )
        return op

    @field_validator("value")
    @classmethod
    def _value_type(cls, value: Any, info: ValidationInfo) -> Any:
        if value is None:
            return None
        metric = info.data.get("metric")
        is_number = isinstance(value, (int, float)) and not isinstance(value, bool)
        if metric in NUMERIC_METRICS and not is_number:
            raise _schema_error(
                "value_type",
                "value for the number metric {metric!r} must be a number, found {found}",
                {"metric": metric, "found": _describe(value)},
            )
        if metric in BOOLEAN_METRICS and not isinstance(value, bool):
            raise _schema_error(
                "value_type",
                "value for the true/false metric {metric!r} must be true or false, found {found}",
                {"metric": metric, "found": _describe(value)},
            )
        if not (is_number or isinstance(value, bool)):
            raise _schema_error(
                "value_type",
                "value must be a number or true/false, found {found}",
                {"found": _describe(value)},
            )
        if is_number:
            number = float(value)
            if not math.isfinite(number):
                raise _schema_error(
                    "value_type", "value must be a finite number, found {found}",
                    {"found": _describe(value)},
                )
            return number
        return value

    @field_validator("metric_ref")
    @classmethod
    def _known_ref(cls, name: str | None, info: ValidationInfo) -> str | None:
        if name is None:
            return None
        _check_metric_name(name)
        metric = info.data.get("metric")
        if metric is not None and _metric_kind(metric) != _metric_kind(name):
            raise _schema_error(
                "metric_ref_kind",
                "metric_ref {ref!r} is a {ref_kind} metric but {metric!r} is a {kind} metric",
                {
                    "ref": name,
                    "ref_kind": _metric_kind(name),
                    "metric": metric,
                    "kind": _metric_kind(metric),
                },
            )
        return name

    @field_validator("scale")
    @classmethod
    def _finite_scale(cls, scale: float | None) -> float | None:
        if scale is not None and not (math.isfinite(scale) and scale > 0):
            raise _schema_error(
                "scale_value", "scale must be a positive number, found {found}",
                {"found": _describe(scale)},
            )
        return None if scale is None else float(scale)

    @model_validator(mode="after")
    def _one_right_side(self) -> MetricCondition:
        if self.value is None and self.metric_ref is None:
            raise _schema_error(
                "right_side",
                "a metric condition needs value or metric_ref to compare {metric!r} with",
                {"metric": self.metric},
            )
        if self.value is not None and self.metric_ref is not None:
            raise _schema_error(
                "right_side", "give value or metric_ref, not both", {}
            )
        if self.scale is not None and self.metric_ref is None:
            raise _schema_error(
                "right_side", "scale applies only with metric_ref", {}
            )
        if self.scale is not None and self.metric_ref in BOOLEAN_METRICS:
            raise _schema_error(
                "right_side", "scale does not apply to true/false metrics", {}
            )
        return self

    def evaluate(self, facts: Facts, flags: frozenset[str]) -> Traced:
        left = facts.get(self.metric)
        if self.metric_ref is None:
            right = self.value
            right_text = _show(self.value)
        else:
            ref_value = facts.get(self.metric_ref)
            scale = 1.0 if self.scale is None else self.scale
            if _missing(ref_value):
                right = None
            elif self.scale is None:
                right = ref_value
            else:
                right = float(ref_value) * scale
            if self.scale is None:
                right_text = f"{self.metric_ref} = {_show(ref_value)}"
            else:
                right_text = (
                    f"{_show(scale)} × {self.metric_ref} ({_show(ref_value)}) = {_show(right)}"
                )
        if _missing(left) or _missing(right):
            outcome: Outcome = None
        else:
            outcome = bool(OPERATORS[self.op](left, right))
        line = f"{self.metric} = {_show(left)} {self.op} {right_text} → {_word(outcome)}"
        return outcome, [line]

    def metrics(self) -> list[str]:
        return [self.metric] + ([self.metric_ref] if self.metric_ref else [])


class FlagCondition(BaseModel):
    """True when the flag code is among the evaluation's flags."""

    model_config = _CONFIG

    flag: str

    @field_validator("flag")
    @classmethod
    def _known_flag(cls, code: str) -> str:
        return _check_flag_code(code)

    def evaluate(self, facts: Facts, flags: frozenset[str]) -> Traced:
        outcome = self.flag in flags
        present = "present" if outcome else "absent"
        return outcome, [f"flag {self.flag} {present} → {_word(outcome)}"]

    def metrics(self) -> list[str]:
        return []


class AnyFlagCondition(BaseModel):
    """True when any of the flag codes is among the evaluation's flags."""

    model_config = _CONFIG

    any_flag: list[str]

    @field_validator("any_flag")
    @classmethod
    def _known_flags(cls, codes: list[str]) -> list[str]:
        if not codes:
            raise _schema_error(
                "empty_condition", "'any_flag' needs at least one flag code", {}
            )
        for code in codes:
            _check_flag_code(code)
        return codes

    def evaluate(self, facts: Facts, flags: frozenset[str]) -> Traced:
        found = [code for code in self.any_flag if code in flags]
        outcome = bool(found)
        seen = ", ".join(found) if found else "none present"
        return outcome, [f"any flag of {', '.join(self.any_flag)} ({seen}) → {_word(outcome)}"]

    def metrics(self) -> list[str]:
        return []


def _non_empty(conditions: list, key: str) -> list:
    if not conditions:
        raise _schema_error(
            "empty_condition", "{key!r} needs at least one condition", {"key": key}
        )
    return conditions


def _indent(lines: list[str]) -> list[str]:
    return ["  " + line for line in lines]


class AllCondition(BaseModel):
    """True when every part is true (false if any part is false, else unknown)."""

    model_config = _CONFIG

    all: list[Condition]

    @field_validator("all")
    @classmethod
    def _some(cls, conditions: list) -> list:
        return _non_empty(conditions, "all")

    def evaluate(self, facts: Facts, flags: frozenset[str]) -> Traced:
        results = [part.evaluate(facts, flags) for part in self.all]
        outcomes = [outcome for outcome, _ in results]
        if any(outcome is False for outcome in outcomes):
            outcome: Outcome = False
        elif any(outcome is None for outcome in outcomes):
            outcome = None
        else:
            outcome = True
        lines = [f"all of → {_word(outcome)}"]
        for _, trace in results:
            lines += _indent(trace)
        return outcome, lines

    def metrics(self) -> list[str]:
        return [name for part in self.all for name in part.metrics()]


class AnyCondition(BaseModel):
    """True when some part is true (false if every part is false, else unknown)."""

    model_config = _CONFIG

    any: list[Condition]

    @field_validator("any")
    @classmethod
    def _some(cls, conditions: list) -> list:
        return _non_empty(conditions, "any")

    def evaluate(self, facts: Facts, flags: frozenset[str]) -> Traced:
        results = [part.evaluate(facts, flags) for part in self.any]
        outcomes = [outcome for outcome, _ in results]
        if any(outcome is True for outcome in outcomes):
            outcome: Outcome = True
        elif any(outcome is None for outcome in outcomes):
            outcome = None
        else:
            outcome = False
        lines = [f"any of → {_word(outcome)}"]
        for _, trace in results:
            lines += _indent(trace)
        return outcome, lines

    def metrics(self) -> list[str]:
        return [name for part in self.any for name in part.metrics()]


class NotCondition(BaseModel):
    """Negation; an unknown part stays unknown (so ``not`` never turns a gap into a pass)."""

    model_config = ConfigDict(**_CONFIG, populate_by_name=False)

    not_: Condition = Field(alias="not")

    def evaluate(self, facts: Facts, flags: frozenset[str]) -> Traced:
        inner, trace = self.not_.evaluate(facts, flags)
        outcome = None if inner is None else not inner
        return outcome, [f"not → {_word(outcome)}"] + _indent(trace)

    def metrics(self) -> list[str]:
        return self.not_.metrics()


_CONDITION_KEYS = ("metric", "flag", "any_flag", "all", "any", "not")
_CONDITION_TAGS = {
    "metric": "cond:metric",
    "flag": "cond:flag",
    "any_flag": "cond:any_flag",
    "all": "cond:all",
    "any": "cond:any",
    "not": "cond:not",
}
_TAG_MODELS: dict[str, type[BaseModel]] = {
    "cond:metric": MetricCondition,
    "cond:flag": FlagCondition,
    "cond:any_flag": AnyFlagCondition,
    "cond:all": AllCondition,
    "cond:any": AnyCondition,
    "cond:not": NotCondition,
}
_MODEL_TAGS = {model: tag for tag, model in _TAG_MODELS.items()}


def _condition_tag(value: Any) -> str | None:
    """Pick the condition model from the one key that names its kind (None: not one kind)."""
    if isinstance(value, BaseModel):
        return _MODEL_TAGS.get(type(value))
    if not isinstance(value, dict):
        return None
    kinds = [key for key in _CONDITION_KEYS if key in value]
    return _CONDITION_TAGS[kinds[0]] if len(kinds) == 1 else None


Condition = Annotated[
    Union[
        Annotated[MetricCondition, Tag("cond:metric")],
        Annotated[FlagCondition, Tag("cond:flag")],
        Annotated[AnyFlagCondition, Tag("cond:any_flag")],
        Annotated[AllCondition, Tag("cond:all")],
        Annotated[AnyCondition, Tag("cond:any")],
        Annotated[NotCondition, Tag("cond:not")],
    ],
    Discriminator(
        _condition_tag,
        custom_error_type="condition_kind",
        custom_error_message="a condition holds exactly one of: " + ", ".join(_CONDITION_KEYS),
    ),
]

for _model in (AllCondition, AnyCondition, NotCondition):
    _model.model_rebuild()


def _check_template(text: str) -> str:
    """Check a reason's ``{placeholders}`` name known facts and have usable format specs."""
    try:
        parts = list(string.Formatter().parse(text))
    except ValueError as error:
        raise _schema_error(
            "reason_template",
            "bad placeholder braces ({problem}); write {{{{ and }}}} for literal braces",
            {"problem": str(error)},
        ) from None
    for _, name, spec, _conversion in parts:
        if name is None:
            continue
        if name not in _PLACEHOLDER_FACTS:
            raise _schema_error(
                "reason_placeholder",
                "placeholder {{{name}}} names no known fact; known: {known}",
                {"name": name, "known": ", ".join(_PLACEHOLDER_FACTS)},
            )
        if spec and ("{" in spec or "}" in spec):
            raise _schema_error(
                "reason_placeholder", "placeholder {{{name}}}: nested braces are not allowed",
                {"name": name},
            )
        if spec and name in NUMERIC_METRICS:
            try:
                format(1.5, spec)
            except ValueError:
                raise _schema_error(
                    "reason_placeholder",
                    "placeholder {{{name}}}: format {spec!r} does not apply to a number",
                    {"name": name, "spec": spec},
                ) from None
    return text


_ReasonText = Annotated[str, AfterValidator(_check_template)]


class Rule(BaseModel):
    """One guidance rule: when its condition holds, its disposition applies."""

    model_config = _CONFIG

    id: str
    title: str
    disposition: str
    when: Condition
    reasons: list[_ReasonText]
    actions: list[str] = []
    basis: str
    enabled: bool = True

    @field_validator("id")
    @classmethod
    def _kebab(cls, rule_id: str) -> str:
        if not _ID_PATTERN.match(rule_id):
            raise _schema_error(
                "rule_id",
                "id {rule_id!r} must be kebab-case: lower-case letters and digits joined by "
                "single hyphens, such as 'short-hold'",
                {"rule_id": rule_id},
            )
        return rule_id

    @field_validator("title", "basis")
    @classmethod
    def _not_blank(cls, text: str) -> str:
        if not text.strip():
            raise _schema_error("blank", "must not be empty", {})
        return text.strip()

    @field_validator("disposition")
    @classmethod
    def _known_disposition(cls, disposition: str) -> str:
        if disposition not in DISPOSITIONS:
            raise _schema_error(
                "unknown_disposition",
                "unknown disposition {found!r}; expected one of: {known}",
                {"found": disposition, "known": ", ".join(DISPOSITIONS)},
            )
        return disposition

    @field_validator("reasons")
    @classmethod
    def _reasons(cls, reasons: list[str]) -> list[str]:
        if not reasons:
            raise _schema_error("empty_reasons", "a rule needs at least one reason", {})
        return reasons

    def severity(self) -> int:
        """Rank of this rule's disposition (see :func:`severity`)."""
        return _SEVERITY[self.disposition]


# --------------------------------------------------------------------------------------------
# Rule sets and loading
# --------------------------------------------------------------------------------------------


class RuleSet(BaseModel):
    """The merged rules of the default file and the plant's layers.

    Attributes
    ----------
    rules
        Every rule in order (the default file's order; added rules after), disabled ones too.
    sources
        The rule files read, in the order read.
    rule_sources
        For each rule id, the last file that defined or changed it.
    sha256
        Hash of a canonical JSON of the enabled rules: it changes when any rule's meaning
        changes and not when only whitespace or comments of a file change.
    """

    model_config = ConfigDict(frozen=True)

    rules: tuple[Rule, ...]
    sources: tuple[str, ...]
    rule_sources: dict[str, str]
    sha256: str

    def enabled_rules(self) -> list[Rule]:
        """The rules that take part in guidance."""
        return [rule for rule in self.rules if rule.enabled]

    def get(self, rule_id: str) -> Rule:
        """The rule with this id (KeyError if none)."""
        for rule in self.rules:
            if rule.id == rule_id:
                return rule
        raise KeyError(rule_id)


def _canonical_sha256(rules: Iterable[Rule]) -> str:
    payload = [rule.model_dump(mode="json", by_alias=True) for rule in rules if rule.enabled]
    text = json.dumps(payload, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _read_toml(path: Path) -> dict[str, Any]:
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise RulesError(f"{path}: no such rule file") from None
    except OSError as error:
        raise RulesError(f"{path}: cannot read the rule file ({error.strerror})") from None
    try:
        return tomllib.loads(data.decode("utf-8"))
    except UnicodeDecodeError as error:
        raise RulesError(
            f"{path}: not UTF-8 text (byte {error.start}); save the rule file as UTF-8"
        ) from None
    except tomllib.TOMLDecodeError as error:
        text = str(error)
        match = re.search(r"\s*\(at line (\d+), column (\d+)\)$", text)
        if match:
            detail = text[: match.start()]
            raise RulesError(
                f"{path}, line {match.group(1)}, column {match.group(2)}: "
                f"TOML syntax error: {detail}"
            ) from None
        raise RulesError(f"{path}: TOML syntax error: {text}") from None


def _allowed_keys(model: type[BaseModel]) -> list[str]:
    return [field.alias or name for name, field in model.model_fields.items()]


def _format_loc(loc: Sequence[Any]) -> tuple[str, type[BaseModel]]:
    """Dotted path without union tags (``when.all[0].metric``) and the model holding the end."""
    parts: list[str] = []
    owner: type[BaseModel] = Rule
    for index, item in enumerate(loc):
        if isinstance(item, str) and item in _TAG_MODELS:
            if index < len(loc) - 1:
                owner = _TAG_MODELS[item]
            continue
        if isinstance(item, int):
            parts.append(f"[{item}]")
        else:
            parts.append(("." if parts else "") + str(item))
    return "".join(parts), owner


def _problem_text(error: Mapping[str, Any], owner: type[BaseModel]) -> str:
    """The problem of one pydantic error, in the words of a rule file."""
    kind = error["type"]
    value = error.get("input")
    if kind == "missing":
        return "required but missing"
    if kind == "extra_forbidden":
        return f"unknown key; expected one of: {', '.join(_allowed_keys(owner))}"
    if kind == "condition_kind":
        if isinstance(value, dict):
            kinds = [key for key in _CONDITION_KEYS if key in value]
            found = ", ".join(kinds) if kinds else "none of them (keys: " + (
                ", ".join(value) or "none") + ")"
            return f"a condition holds exactly one of: {', '.join(_CONDITION_KEYS)}; found {found}"
        return (
            "a condition must be a table such as "
            "{ metric = \"delivered_F_min\", op = \"<\", value = 3.0 }, "
            f"found {_describe(value)}"
        )
    if kind in _TYPE_WORDS:
        return f"must be {_TYPE_WORDS[kind]}, found {_describe(value)}"
    if kind.endswith("_type") and kind != "value_type":
        return f"{error['msg']}, found {_describe(value)}"
    return str(error["msg"])


_TYPE_WORDS = {
    "string_type": "a string",
    "bool_type": "true or false",
    "list_type": "an array",
    "float_type": "a number",
    "int_type": "a whole number",
    "model_type": "a table",
    "dict_type": "a table",
}


def _validation_lines(
    error: ValidationError,
    prefix: str,
    new_rule_id: str | None,
    known_ids: Sequence[str] = (),
) -> list[str]:
    """One ``<prefix>, field <path>: <problem>`` line per problem of a ValidationError.

    For a new rule of a layer file the missing fields are named on one line, with the ids of
    earlier files that look alike (a typo in an override is the usual cause).
    """
    lines = []
    missing = []
    for item in error.errors(include_url=False):
        path, owner = _format_loc(item["loc"])
        if new_rule_id is not None and item["type"] == "missing" and len(item["loc"]) == 1:
            missing.append(path)
            continue
        where = f"{prefix}, field {path}" if path else prefix
        lines.append(f"{where}: {_problem_text(item, owner)}")
    if missing:
        fields = ("field " if len(missing) == 1 else "fields ") + ", ".join(missing)
        hint = (
            f"; no earlier rule file defines {new_rule_id!r}, so this is a new rule and needs "
            "every field"
        )
        alike = difflib.get_close_matches(new_rule_id, known_ids, n=1)
        if alike:
            hint += f" (did you mean {alike[0]!r}?)"
        lines.insert(0, f"{prefix}, {fields}: required but missing{hint}")
    return lines


def _rule_files(path: Path) -> list[Path]:
    if path.is_dir():
        files = sorted(path.glob("*.toml"))
        if not files:
            raise RulesError(f"{path}: the rules folder holds no *.toml rule files")
        return files
    if not path.exists():
        raise RulesError(f"{path}: no such rule file or folder")
    return [path]


def _merge_file(
    path: Path,
    merged: dict[str, Rule],
    raw: dict[str, dict[str, Any]],
    rule_sources: dict[str, str],
    is_base: bool,
) -> None:
    """Validate one rule file and merge its rules into ``merged`` (by id), or raise RulesError."""
    document = _read_toml(path)
    problems: list[str] = []
    for key in document:
        if key != "rule":
            problems.append(
                f"{path}, field {key}: unknown key; a rule file holds only [[rule]] tables"
            )
    entries = document.get("rule")
    if entries is None:
        problems.append(f"{path}: no [[rule]] tables found")
        raise RulesError("\n".join(problems))
    if not isinstance(entries, list) or not all(isinstance(entry, dict) for entry in entries):
        problems.append(
            f"{path}, field rule: must be an array of tables written [[rule]], "
            f"found {_describe(entries)}"
        )
        raise RulesError("\n".join(problems))

    seen: dict[str, int] = {}
    updates: list[tuple[str, Rule, dict[str, Any]]] = []
    for number, entry in enumerate(entries, start=1):
        rule_id = entry.get("id")
        named = isinstance(rule_id, str)
        prefix = f"{path}, rule {rule_id!r} (#{number})" if named else f"{path}, rule #{number}"
        if named and rule_id in seen:
            problems.append(
                f"{prefix}: duplicate id; rule #{seen[rule_id]} of this file has the same id"
            )
            continue
        if named:
            seen[rule_id] = number
        inherits = named and not is_base and rule_id in raw
        candidate = {**raw[rule_id], **entry} if inherits else entry
        new_rule_id = rule_id if (named and not is_base and not inherits) else None
        try:
            rule = Rule.model_validate(candidate)
        except ValidationError as error:
            problems += _validation_lines(error, prefix, new_rule_id, known_ids=list(raw))
            continue
        updates.append((rule.id, rule, candidate))
    if problems:
        raise RulesError("\n".join(problems))
    for rule_id, rule, candidate in updates:
        merged[rule_id] = rule  # an override keeps the position of the rule it replaces
        raw[rule_id] = candidate
        rule_sources[rule_id] = str(path)


def load_rule_set(paths: Sequence[Path | str] = ()) -> RuleSet:
    """Load the default rules, then layer each file (or folder of ``*.toml``, sorted) over them.

    A later file overrides a rule of the same id: the fields it gives replace the earlier
    ones (``when`` as a whole), the rest are kept; ``enabled = false`` with the id alone
    disables a rule. A new id adds a rule, which then needs every field.

    Parameters
    ----------
    paths
        Rule files or folders, applied in order after the default file.

    Returns
    -------
    RuleSet
        The merged rules, the files read and the hash of the enabled rules.

    Raises
    ------
    RulesError
        A file is missing, unreadable, not TOML, or breaks the rule schema; the message has
        one line per problem naming the file, rule and field.
    """
    default = default_rules_path()
    files = [default]
    default_resolved = default.resolve()
    for entry in paths:
        for file in _rule_files(Path(entry)):
            if file.resolve() != default_resolved:  # a rules folder may hold default.toml too
                files.append(file)
    merged: dict[str, Rule] = {}
    raw: dict[str, dict[str, Any]] = {}
    rule_sources: dict[str, str] = {}
    for index, file in enumerate(files):
        _merge_file(file, merged, raw, rule_sources, is_base=index == 0)
    rules = tuple(merged.values())
    return RuleSet(
        rules=rules,
        sources=tuple(str(file) for file in files),
        rule_sources=rule_sources,
        sha256=_canonical_sha256(rules),
    )


def check_rule_file(path: Path | str | None = None) -> RuleSet:
    """Validate a rule file as it would be used: layered over the default rules.

    With no path, or the default file's own path, the default rules alone are checked.
    Used by ``deviation rules check [FILE]``; raises :class:`~deviation.errors.RulesError`.
    """
    if path is None:
        return load_rule_set([])
    return load_rule_set([Path(path)])


# --------------------------------------------------------------------------------------------
# Guidance
# --------------------------------------------------------------------------------------------


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
    """A fact for ``str.format_map``: ``n/a`` when not computed, never an exception."""

    def __init__(self, value: Any) -> None:
        self.value = value

    def __format__(self, spec: str) -> str:
        if _missing(self.value):
            return "n/a"
        if isinstance(self.value, bool):
            return "yes" if self.value else "no"
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
    mapping = _SafeFacts({name: _Shown(value) for name, value in facts.items()})
    mapping["deviation_flags"] = _Shown(", ".join(flags) if flags else "none")
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
