"""The one-line status bar every screen shows at its top."""

from __future__ import annotations

from textual.widgets import Static


class StatusLine(Static):
    """One line: the screen, who is at the terminal, the store."""

    DEFAULT_CSS = "StatusLine { height: 1; background: $panel; padding: 0 1; }"
