"""A small modal form that returns a typed result (the base of every dialog)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable, Generic, TypeVar

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import ModalScreen
from textual.widgets import Button, Input, Label, Select, Static

from deviation.errors import DeviationError
from deviation.tui.widgets.steady_input import SteadyInput

T = TypeVar("T")


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


class PathResult:
    """For a dialog asking for one file (its field ``path``): the path chosen, or
    ``MISSING`` as the error when none is given. Put it before the dialog's base class."""

    MISSING = "give a file name"

    def make_result(self, values: dict[str, str]) -> FileChoice:
        if not values["path"]:
            raise DeviationError(self.MISSING, source="file")
        return FileChoice(values["path"])
