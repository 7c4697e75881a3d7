"""Modal dialogs that return a typed result (or ``None`` when cancelled).

A dialog may be given ``apply``: called with the typed result before the dialog closes; a
:class:`~deviation.errors.DeviationError` it raises (role refused, record state, empty reason)
is shown in place, with the same words as the CLI, and the dialog stays open.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable, Generic, TypeVar

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import ModalScreen
from deviation.tui.widgets.steady_input import SteadyInput
from textual.widgets import Button, Input, Label, Select, Static

from deviation.errors import DeviationError
from deviation.records.roles import ROLES
from deviation.tui.follow import FollowStart, open_followed_log

T = TypeVar("T")


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


@dataclass(frozen=True)
class FileChoice:
    path: str


@dataclass(frozen=True)
class Field:
    name: str
    label: str
    placeholder: str = ""
    value: str = ""
    choices: tuple[str, ...] | None = None  # a Select instead of an Input


class FormDialog(ModalScreen[T | None], Generic[T]):
    """A small form: fields, an error line, OK and Cancel. Enter submits, Escape cancels."""

    BINDINGS = [Binding("escape", "cancel", "Cancel"), Binding("ctrl+s", "submit", "OK", priority=True)]
    TITLE_TEXT = "Dialog"
    FIELDS: tuple[Field, ...] = ()

    def __init__(self, *, apply: Callable[[T], Any] | None = None, subtitle: str = "",
                 values: dict[str, str] | None = None) -> None:
        super().__init__()
        self._apply = apply
        self._subtitle = subtitle
        self._values = values or {}

    def compose(self) -> ComposeResult:
        with Vertical(id="dialog"):
            yield Label(self.TITLE_TEXT, id="dialog-title")
            if self._subtitle:
                yield Static(self._subtitle, id="dialog-subtitle")
            for f in self.FIELDS:
                yield Label(f.label)
                value = self._values.get(f.name, f.value)
                if f.choices:
                    yield Select([(c, c) for c in f.choices], value=value if value in f.choices else f.choices[0],
                                 allow_blank=False, id=f"field-{f.name}")
                else:
                    yield SteadyInput(value=value, placeholder=f.placeholder, id=f"field-{f.name}")
            yield Static("", id="dialog-error")
            with Horizontal(id="dialog-buttons"):
                yield Button("OK (Enter)", variant="primary", id="ok")
                yield Button("Cancel (Esc)", id="cancel")

    def values(self) -> dict[str, str]:
        out = {}
        for f in self.FIELDS:
            w = self.query_one(f"#field-{f.name}")
            out[f.name] = str(w.value).strip() if not isinstance(w, Select) else str(w.value)
        return out

    def make_result(self, values: dict[str, str]) -> T:  # pragma: no cover - overridden
        raise NotImplementedError

    def show_error(self, text: str) -> None:
        self.query_one("#dialog-error", Static).update(f"✗ {text}")

    def action_submit(self) -> None:
        try:
            result = self.make_result(self.values())
            if self._apply is not None:
                self._apply(result)
        except DeviationError as exc:
            self.show_error(str(exc))
            return
        self.dismiss(result)

    def action_cancel(self) -> None:
        self.dismiss(None)

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self.action_submit()

    def on_button_pressed(self, event: Button.Pressed) -> None:
        event.stop()
        if event.button.id == "ok":
            self.action_submit()
        else:
            self.action_cancel()


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


class ImportLogDialog(FormDialog[FileChoice]):
    TITLE_TEXT = "Import a retort log (CSV: time_min, temperature_C)"
    FIELDS = (Field("path", "File", "path/to/retort-log.csv"),)

    def make_result(self, v):
        if not v["path"]:
            raise DeviationError("give the path of the retort log CSV", source="file")
        return FileChoice(v["path"])


class FollowLogDialog(FormDialog[FollowStart]):
    """The path of a retort log still being written; checked in place (exists, valid header)."""

    TITLE_TEXT = "◉ Follow a retort log the recorder is still writing (CSV)"
    FIELDS = (Field("path", "File (rows are read as they are written)", "path/to/retort-log.csv"),)

    def make_result(self, v):
        return open_followed_log(v["path"])


class ExportReportDialog(FormDialog[FileChoice]):
    TITLE_TEXT = "Export the evaluation report (HTML or Markdown by suffix)"
    FIELDS = (Field("path", "File", "report.html"),)

    def make_result(self, v):
        if not v["path"]:
            raise DeviationError("give a file name ending in .html or .md", source="file")
        return FileChoice(v["path"])


__all__ = ["FormDialog", "HoldDialog", "ReleaseDialog", "DecideDialog", "NoteDialog", "IdentityDialog",
           "ImportLogDialog", "FollowLogDialog", "ExportReportDialog", "HoldRequest", "ReleaseRequest", "Decision",
           "NoteText", "Identity", "FileChoice"]
