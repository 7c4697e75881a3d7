"""A text field for the floor: a steady cursor, and Tab into it never selects the whole text."""

from __future__ import annotations

from textual.reactive import reactive
from textual.widgets import Input


class SteadyInput(Input):
    """``Input`` with a steady cursor (a blinking one is harder to find at a glance on the floor,
    and makes screenshots depend on the moment they are taken).

    Tab into the field puts the cursor at the end of the text instead of selecting all of it
    (textual's default), so one Backspace after Tab deletes one character, not the whole field.
    """

    cursor_blink = reactive(False, init=False)

    def __init__(self, *args, **kwargs) -> None:
        kwargs.setdefault("select_on_focus", False)
        super().__init__(*args, **kwargs)

    def _on_focus(self, event) -> None:
        super()._on_focus(event)
        self.cursor_position = len(self.value)
