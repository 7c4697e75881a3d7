"""A text field whose cursor does not blink: steady for the operator's eye and for snapshots."""

from __future__ import annotations

from textual.reactive import reactive
from textual.widgets import Input


class SteadyInput(Input):
    """``Input`` with a steady cursor (a blinking one is harder to find at a glance on the floor,
    and makes screenshots depend on the moment they are taken)."""

    cursor_blink = reactive(False, init=False)
