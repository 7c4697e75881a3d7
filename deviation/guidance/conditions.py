"""Conditions of a rule, as structured data: metric comparisons, flags, and three-valued
``all`` / ``any`` / ``not`` (Kleene logic: an unknown fact never turns into a pass)."""

from __future__ import annotations

import math
from typing import Annotated, Any, Mapping, Union

from pydantic import (
    BaseModel,
    ConfigDict,
    Discriminator,
    Field,
    Tag,
    ValidationInfo,
    field_validator,
    model_validator,
)
from pydantic_core import PydanticCustomError as _PydanticCustomError

from deviation.guidance.vocabulary import (
    _KNOWN_METRICS,
    BOOLEAN_METRICS,
    FLAG_CODES,
    NUMERIC_METRICS,
    OPERATORS,
)


def _schema_error(kind: str, template: str, context: Mapping[str, Any]) -> Exception:
    """A pydantic error whose message is formatted here (``str.format``, so ``!r`` works)."""
    return _PydanticCustomError(kind, template.format(**context))


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


def _combine(parts: list, facts: Facts, flags: frozenset[str], *, decisive: bool, label: str) -> Traced:
    """Kleene combination: one part with the ``decisive`` outcome decides (False for ``all``,
    True for ``any``); otherwise any unknown part leaves the whole unknown."""
    results = [part.evaluate(facts, flags) for part in parts]
    outcomes = [outcome for outcome, _ in results]
    if any(outcome is decisive for outcome in outcomes):
        outcome: Outcome = decisive
    elif any(outcome is None for outcome in outcomes):
        outcome = None
    else:
        outcome = not decisive
    lines = [f"{label} → {_word(outcome)}"]
    for _, trace in results:
        lines += _indent(trace)
    return outcome, lines


class AllCondition(BaseModel):
    """True when every part is true (false if any part is false, else unknown)."""

    model_config = _CONFIG

    all: list[Condition]

    @field_validator("all")
    @classmethod
    def _some(cls, conditions: list) -> list:
        return _non_empty(conditions, "all")

    def evaluate(self, facts: Facts, flags: frozenset[str]) -> Traced:
        return _combine(self.all, facts, flags, decisive=False, label="all of")

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
        return _combine(self.any, facts, flags, decisive=True, label="any of")

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
