"""One exception family for everything a user can get wrong.

Every message names where the problem is (file, row, field), the value found and what
was expected. The CLI prints ``str(error)`` and exits with ``error.exit_code``.
"""

from __future__ import annotations


class DeviationError(Exception):
    """Base of all errors the tool reports to a user (never shown as a traceback)."""

    exit_code = 2

    def __init__(self, message: str, *, source: str | None = None) -> None:
        self.message = message
        self.source = source
        super().__init__(f"{source}: {message}" if source else message)


class CaseError(DeviationError):
    """A case file (TOML) is unreadable or breaks the case contract."""


class RecordError(DeviationError):
    """A retort log or cold-spot log (CSV) is unreadable or implausible."""


class ModelError(DeviationError):
    """A heat-penetration model cannot be built from the parameters given."""


class RulesError(DeviationError):
    """A guidance rule file is unreadable or breaks the rule schema."""


class StoreError(DeviationError):
    """The record store cannot be opened, is corrupt, or refused an operation."""

    exit_code = 3


class PermissionDenied(DeviationError):
    """An actor tried an action outside their role."""

    exit_code = 4


def location(file: str | None = None, row: int | None = None, field: str | None = None) -> str:
    """Format a location prefix such as ``log.csv, row 12, column temperature_C``."""
    parts = []
    if file:
        parts.append(str(file))
    if row is not None:
        parts.append(f"row {row}")
    if field:
        parts.append(f"field {field}")
    return ", ".join(parts)
