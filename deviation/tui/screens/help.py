"""Help: every key and symbol, made from the one key map (:mod:`deviation.tui.keys`)."""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

from deviation.tui.keys import help_text
from deviation.tui.screens.holds import STATE_LOOK

HELP = help_text(STATE_LOOK)


class HelpScreen(ModalScreen[None]):
    """The keys of every screen and the symbols, scrolling; fits 80x24."""

    BINDINGS = [Binding("escape", "close", "Close"), Binding("f1", "close", "Close", priority=True)]
    CSS = """
    HelpScreen { align: center middle; }
    HelpScreen #help { width: 100%; max-width: 100; height: 100%; border: round $primary;
                       background: $surface; padding: 0 1; }
    """

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="help"):
            yield Static(Text(HELP))

    def on_mount(self) -> None:
        self.query_one("#help").border_title = "Help · Esc closes · ↑↓ scroll"

    def action_close(self) -> None:
        self.dismiss(None)
