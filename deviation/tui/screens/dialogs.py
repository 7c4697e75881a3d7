"""Modal dialogs that return a typed result (or ``None`` when cancelled).

A dialog may be given ``apply``: called with the typed result before the dialog closes; a
:class:`~deviation.errors.DeviationError` it raises (role refused, record state, empty reason)
is shown in place, with the same words as the CLI, and the dialog stays open. Error lines and
subtitles are shown as text (a name or reason with ``[`` in it is not markup).

The disposition is chosen from the fixed list (:data:`deviation.records.roles.DECISIONS`) and
confirmed with a summary (:class:`ConfirmDialog`) before it is written.
"""

from __future__ import annotations

from dataclasses import dataclass

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import ModalScreen
from textual.widgets import Button, Label, Static

from deviation.errors import DeviationError
from deviation.records.roles import DECISION_WORDS, DECISIONS, ROLES, decision_code
from deviation.records.text import one_line
from deviation.tui.widgets.form import Field, FileChoice, FormDialog, PathResult


class _TextDialog(FormDialog):
    """A form whose error line and subtitle are text, never markup."""

    def compose(self) -> ComposeResult:
        subtitle, self._subtitle = self._subtitle, ""
        for widget in super().compose():
            if isinstance(widget, Label) and subtitle and widget.id == "dialog-title":
                yield widget
                yield Static(Text(one_line(subtitle)), id="dialog-subtitle")
                continue
            yield widget

    def show_error(self, text: str) -> None:
        self.query_one("#dialog-error", Static).update(Text(f"✗ {one_line(text)}"))


@dataclass(frozen=True)
class HoldRequest:
    reason: str


@dataclass(frozen=True)
class ReleaseRequest:
    reason: str


@dataclass(frozen=True)
class Decision:
    decision: str  # a code of roles.DECISIONS
    reason: str
    result: str | None = None
    decision_text: str | None = None  # the decision in words, for "other"
    supersedes: int | None = None  # the disposition in force it corrects


@dataclass(frozen=True)
class NoteText:
    text: str


@dataclass(frozen=True)
class Identity:
    actor: str
    role: str


class HoldDialog(_TextDialog):
    TITLE_TEXT = "⏸ Place the lot on hold (set aside for evaluation)"
    FIELDS = (Field("reason", "Reason (recorded with the hold)", "e.g. temperature drop in the hold"),)

    def make_result(self, v):
        return HoldRequest(v["reason"])


class ReleaseDialog(_TextDialog):
    TITLE_TEXT = "▶ Release the hold, citing the process authority's disposition"
    FIELDS = (Field("reason", "Reason (recorded with the release)", "e.g. reprocessed as filed"),)

    def make_result(self, v):
        return ReleaseRequest(v["reason"])


class DecideDialog(_TextDialog):
    """The disposition: one of the fixed list (``other`` with its words), a reason, a result.

    ``supersedes``: the disposition in force this one corrects (a reason is then required)."""

    TITLE_TEXT = "⚖ Disposition (process authority)"
    FIELDS = (Field("decision", "Decision", choices=DECISIONS),
              Field("decision_text", "The decision in words (for other)", ""),
              Field("reason", "Reason", "the basis of the decision"),
              Field("result", "Reprocess or incubation result (optional)", ""))

    def __init__(self, *, supersedes: int | None = None, **kw) -> None:
        super().__init__(**kw)
        self.supersedes = supersedes
        if supersedes:
            self.TITLE_TEXT = f"⚖ Superseding disposition (corrects event {supersedes}; both are kept)"

    def make_result(self, v):
        code = decision_code(v["decision"])
        if code is None:
            raise DeviationError(f"choose a disposition: {', '.join(DECISION_WORDS[d] for d in DECISIONS)}",
                                 source="decision")
        if code == "other" and not v["decision_text"]:
            raise DeviationError("a disposition 'other' needs the decision in words", source="decision")
        if not v["reason"]:
            raise DeviationError("give the reason for the disposition", source="reason")
        return Decision(code, v["reason"], v["result"] or None, v["decision_text"] or None, self.supersedes)


class ConfirmDialog(ModalScreen[bool]):
    """A summary to read before something is written once for all: Enter or Y writes it, Esc
    goes back. Returns True when confirmed."""

    BINDINGS = [Binding("escape", "cancel", "Back"), Binding("y", "confirm", "Write it"),
                Binding("enter", "confirm", "Write it", show=False)]

    def __init__(self, title: str, lines: list[str]) -> None:
        super().__init__()
        self.title_text = title
        self.lines = lines

    def compose(self) -> ComposeResult:
        with Vertical(id="dialog"):
            yield Label(self.title_text, id="dialog-title")
            yield Static(Text("\n".join(self.lines)), id="confirm-summary")
            with Horizontal(id="dialog-buttons"):
                yield Button("Write it (Y)", variant="warning", id="ok")
                yield Button("Back (Esc)", id="cancel")

    def action_confirm(self) -> None:
        self.dismiss(True)

    def action_cancel(self) -> None:
        self.dismiss(False)

    def on_button_pressed(self, event: Button.Pressed) -> None:
        event.stop()
        self.dismiss(event.button.id == "ok")


class NoteDialog(_TextDialog):
    TITLE_TEXT = "✉ Add a note"
    FIELDS = (Field("text", "Note", "what happened, who was told"),)

    def make_result(self, v):
        return NoteText(v["text"])


class IdentityDialog(_TextDialog):
    TITLE_TEXT = "Who is at the terminal (recorded with every event; not authentication)"
    FIELDS = (Field("actor", "Name", "your name"), Field("role", "Role", choices=ROLES))

    def make_result(self, v):
        from deviation.records.roles import normalize_role

        if not v["actor"]:
            raise DeviationError("give a name: it is recorded with every event", source="name")
        return Identity(v["actor"], normalize_role(v["role"], actor=v["actor"]))


class ExportReportDialog(PathResult, _TextDialog):
    TITLE_TEXT = "Export the evaluation report (HTML or Markdown by suffix)"
    FIELDS = (Field("path", "File", "report.html"),)
    MISSING = "give a file name ending in .html or .md"


__all__ = ["HoldDialog", "ReleaseDialog", "DecideDialog", "ConfirmDialog", "NoteDialog", "IdentityDialog",
           "ExportReportDialog", "HoldRequest", "ReleaseRequest", "Decision",
           "NoteText", "Identity"]
