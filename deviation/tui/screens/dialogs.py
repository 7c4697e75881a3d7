"""Modal dialogs that return a typed result (or ``None`` when cancelled).

A dialog may be given ``apply``: called with the typed result before the dialog closes; a
:class:`~deviation.errors.DeviationError` it raises (role refused, record state, empty reason)
is shown in place, with the same words as the CLI, and the dialog stays open.
"""

from __future__ import annotations

from dataclasses import dataclass


from deviation.errors import DeviationError
from deviation.records.roles import ROLES
from deviation.tui.widgets.form import Field, FileChoice, FormDialog


@dataclass(frozen=True)
class HoldRequest:
    reason: str


@dataclass(frozen=True)
class ReleaseRequest:
    reason: str


@dataclass(frozen=True)
class Decision:
    decision: str
    reason: str
    result: str | None = None


@dataclass(frozen=True)
class NoteText:
    text: str


@dataclass(frozen=True)
class Identity:
    actor: str
    role: str


class HoldDialog(FormDialog[HoldRequest]):
    TITLE_TEXT = "⏸ Place the lot on hold (set aside for evaluation)"
    FIELDS = (Field("reason", "Reason (recorded with the hold)", "e.g. temperature drop in the hold"),)

    def make_result(self, v):
        return HoldRequest(v["reason"])


class ReleaseDialog(FormDialog[ReleaseRequest]):
    TITLE_TEXT = "▶ Release the hold"
    FIELDS = (Field("reason", "Reason (recorded with the release)", "e.g. process authority decision"),)

    def make_result(self, v):
        return ReleaseRequest(v["reason"])


class DecideDialog(FormDialog[Decision]):
    TITLE_TEXT = "⚖ Disposition (process authority)"
    FIELDS = (Field("decision", "Decision", "release, reprocess or destroy"),
              Field("reason", "Reason", "the basis of the decision"),
              Field("result", "Reprocess or incubation result (optional)", ""))

    def make_result(self, v):
        return Decision(v["decision"], v["reason"], v["result"] or None)


class NoteDialog(FormDialog[NoteText]):
    TITLE_TEXT = "✉ Add a note"
    FIELDS = (Field("text", "Note", "what happened, who was told"),)

    def make_result(self, v):
        return NoteText(v["text"])


class IdentityDialog(FormDialog[Identity]):
    TITLE_TEXT = "Who is at the terminal (recorded with every event; not authentication)"
    FIELDS = (Field("actor", "Name", "your name"), Field("role", "Role", choices=ROLES))

    def make_result(self, v):
        from deviation.records.roles import normalize_role

        if not v["actor"]:
            raise DeviationError("give a name: it is recorded with every event", source="name")
        return Identity(v["actor"], normalize_role(v["role"], actor=v["actor"]))


class ExportReportDialog(FormDialog[FileChoice]):
    TITLE_TEXT = "Export the evaluation report (HTML or Markdown by suffix)"
    FIELDS = (Field("path", "File", "report.html"),)

    def make_result(self, v):
        if not v["path"]:
            raise DeviationError("give a file name ending in .html or .md", source="file")
        return FileChoice(v["path"])


__all__ = ["HoldDialog", "ReleaseDialog", "DecideDialog", "NoteDialog", "IdentityDialog",
           "ExportReportDialog", "HoldRequest", "ReleaseRequest", "Decision",
           "NoteText", "Identity"]
