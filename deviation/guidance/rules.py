"""Rules and rule sets: the ``[[rule]]`` schema, reading rule files with one clear message per
problem, and layering a plant's files over the shipped defaults (by rule id)."""

from __future__ import annotations

import difflib
import hashlib
import json
import os
import re
import string
import tomllib
from collections.abc import Iterable, Mapping, Sequence
from pathlib import Path
from typing import Annotated, Any

from pydantic import (
    AfterValidator,
    BaseModel,
    ConfigDict,
    Field,
    ValidationError,
    field_validator,
)

from deviation.errors import RulesError
from deviation.guidance.conditions import (
    _CONDITION_KEYS,
    _CONFIG,
    _TAG_MODELS,
    Condition,
    _describe,
    _schema_error,
)
from deviation.guidance.vocabulary import (
    _PLACEHOLDER_FACTS,
    _SEVERITY,
    DISPOSITIONS,
    NUMERIC_METRICS,
)

__all__ = ["Rule", "RuleSet", "Settings", "check_rule_file", "default_rules_path", "load_rule_set"]

_ID_PATTERN = re.compile(r"^[a-z0-9]+(?:-[a-z0-9]+)*$")
_RULES_DIR_ENV = "DEVIATION_RULES_DIR"
_DEFAULT_FILE_NAME = "default.toml"


def default_rules_path() -> Path:
    """Path of the shipped default rule set.

    ``$DEVIATION_RULES_DIR/default.toml`` when that variable is set; else the copy installed with
    the package (``deviation/_data/rules/``, where the wheel maps the repository's ``rules/``);
    else ``rules/default.toml`` beside the package (a checkout).
    """
    override = os.environ.get(_RULES_DIR_ENV)
    if override:
        return Path(override).expanduser() / _DEFAULT_FILE_NAME
    from deviation.resources import shipped

    return shipped("rules") / _DEFAULT_FILE_NAME


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


class Settings(BaseModel):
    """Tolerances the evaluation applies before the rules run (``[settings]`` of a rule file).

    A plant or process authority may change them in its own rule file; each is a fraction.
    """

    model_config = ConfigDict(extra="forbid", strict=True, frozen=True)

    model_vs_filed_tolerance: Annotated[float, Field(gt=0.0, le=1.0)] = 0.15
    """Largest relative difference between the model's F for the filed cycle and the filed
    target before the flag ``model-vs-filed`` is raised (either way)."""
    ball_formula_tolerance: Annotated[float, Field(gt=0.0, le=5.0)] = 0.25
    """Largest relative difference between the model's filed-cycle F and Ball's formula before
    the flag ``ball-formula-differs`` is raised."""
    jh_theory_tolerance: Annotated[float, Field(gt=0.0, le=1.0)] = 0.15
    """Largest relative difference between a filed jh and the shape's theoretical centre jh
    (conduction) before the flag ``jh-differs-from-theory`` is raised."""


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
        Hash of a canonical JSON of the enabled rules and the settings: it changes when any
        rule's meaning or a tolerance changes and not when only whitespace or comments of a file
        change.
    settings
        The tolerances (``[settings]``), defaults overridden key by key by later files.
    """

    model_config = ConfigDict(frozen=True)

    rules: tuple[Rule, ...]
    sources: tuple[str, ...]
    rule_sources: dict[str, str]
    sha256: str
    settings: Settings = Settings()

    def enabled_rules(self) -> list[Rule]:
        """The rules that take part in guidance."""
        return [rule for rule in self.rules if rule.enabled]

    def get(self, rule_id: str) -> Rule:
        """The rule with this id (KeyError if none)."""
        for rule in self.rules:
            if rule.id == rule_id:
                return rule
        raise KeyError(rule_id)


def _canonical_sha256(rules: Iterable[Rule], settings: Settings) -> str:
    payload = {"rules": [rule.model_dump(mode="json", by_alias=True) for rule in rules if rule.enabled],
               "settings": settings.model_dump(mode="json")}
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


# In a rules folder, the input bounds (rules/limits.toml) are not a rule file.
_NOT_RULE_FILES = ("limits.toml",)


def _rule_files(path: Path) -> list[Path]:
    if path.is_dir():
        files = sorted(p for p in path.glob("*.toml") if p.name not in _NOT_RULE_FILES)
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
    settings: dict[str, Any] | None = None,
) -> None:
    """Validate one rule file and merge its rules into ``merged`` (by id) and its ``[settings]``
    into ``settings`` (by key), or raise RulesError."""
    document = _read_toml(path)
    problems: list[str] = []
    for key in document:
        if key not in ("rule", "settings"):
            problems.append(
                f"{path}, field {key}: unknown key; a rule file holds [[rule]] tables and a "
                "[settings] table"
            )
    if "settings" in document:
        given = document["settings"]
        if not isinstance(given, dict):
            problems.append(f"{path}, field settings: must be a table, found {_describe(given)}")
        else:
            try:
                Settings.model_validate({**(settings or {}), **given})
            except ValidationError as error:
                for item in error.errors(include_url=False):
                    where = ".".join(str(part) for part in item["loc"])
                    problems.append(f"{path}, field settings.{where}: "
                                    f"{_problem_text(item, Settings)}")
            else:
                if settings is not None:
                    settings.update(given)
    entries = document.get("rule")
    if entries is None and "settings" in document and not is_base:
        if problems:
            raise RulesError("\n".join(problems))
        return
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
    settings: dict[str, Any] = {}
    for index, file in enumerate(files):
        _merge_file(file, merged, raw, rule_sources, is_base=index == 0, settings=settings)
    rules = tuple(merged.values())
    tolerances = Settings.model_validate(settings)
    return RuleSet(
        rules=rules,
        sources=tuple(str(file) for file in files),
        rule_sources=rule_sources,
        sha256=_canonical_sha256(rules, tolerances),
        settings=tolerances,
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


