"""The one key map and symbol list of the terminal UI.

The app's and the floor screen's bindings, the footer, the help screen (F1) and the README's key
table are all made from the tables here, so they cannot disagree; the holds, record and audit
screens keep their own ``BINDINGS`` and a test checks them against :data:`SCREEN_KEYS`.
"""

from __future__ import annotations

import textwrap
from dataclasses import dataclass

from textual.binding import Binding

from deviation.evaluate import CAUTION
from deviation.guidance.wording import DISPOSITION_LOOK
from deviation.tui.widgets.timeline import KIND_LOOK


@dataclass(frozen=True)
class Key:
    """One key: the textual key name, the action it runs, its footer label ("" = not in the
    footer), how people write it, and what it does in the words of the trade."""

    key: str
    action: str
    label: str
    says: str
    footer: str = ""
    priority: bool = True


def _name(key: str) -> str:
    """``ctrl+l`` -> ``Ctrl+L``, ``f2`` -> ``F2``, ``slash`` -> ``/``."""
    special = {"slash": "/", "escape": "Esc", "enter": "Enter", "tab": "Tab", "shift+tab": "Shift+Tab"}
    if key in special:
        return special[key]
    if key.startswith("ctrl+"):
        return "Ctrl+" + key[5:].upper()
    return key.upper()


def key(key: str, action: str, says: str, footer: str = "", priority: bool = True) -> Key:
    return Key(key, action, _name(key), says, footer, priority)


#: Keys that work on every screen.
APP_KEYS = (
    key("f1", "help", "this help (every key and symbol)", "Help"),
    key("f2", "switch_mode('floor')", "floor entry: the operator enters a deviation as the cycle runs"),
    key("f3", "switch_mode('holds')", "holds board: supervisor holds and releases, process authority decides",
        "Holds"),
    key("f4", "switch_mode('audit')", "audit: replay stored against recomputed, verify the hash chains",
        "Audit"),
    key("f9", "identity", "who is at the terminal (name and role: recorded, not authenticated)"),
    key("ctrl+q", "quit", "quit (the floor entry is kept as a draft in the store)", "Quit"),
    key("tab", "app.focus_next", "next field (keys typed in one burst, as a scanner does, land field "
                                 "by field)"),
    key("shift+tab", "app.focus_previous", "previous field"),
)

#: Keys of the floor entry screen.
FLOOR_KEYS = (
    key("ctrl+l", "low_now", "temperature low now (the reading typed in Reading °C; Enter there "
                             "does the same)", "Low"),
    key("ctrl+b", "back_now", "back at process temperature now", "Back"),
    key("ctrl+t", "typed", "a reading at a typed time: At (min from steam on, or HH:MM) and Reading "
                           "°C (Enter in At does the same)", "Typed"),
    key("ctrl+r", "drop_last", "undo the last reading"),
    key("ctrl+o", "import_log", "import a retort log (CSV)"),
    key("ctrl+f", "follow_log", "follow a retort log the recorder is still writing (results refresh as "
                                "rows arrive; a bad row is reported and skipped)"),
    key("ctrl+f", "stop_follow", "again: stop following"),
    key("ctrl+s", "save", "save the record (operator); the screen is cleared for the next lot", "Save"),
    key("ctrl+n", "new_entry", "new entry (clears the lot, keeps the filed process)"),
    key("ctrl+g", "toggle_curves", "curves or flags and guidance (narrow terminals show one)", "Curves"),
    key("enter", "next_field", "next field (in Reading °C: low now; in At: the typed reading)"),
)

# What the holds board and the record screen both do to a record.
_RECORD_KEYS = (
    key("h", "hold", "place a hold (supervisor)", priority=False),
    key("r", "release", "release a hold (supervisor)", priority=False),
    key("d", "decide", "record the disposition (process authority)", priority=False),
    key("n", "note", "add a note", priority=False),
)

#: Keys of the other screens, as their own BINDINGS define them (checked by a test).
SCREEN_KEYS = {
    "holds": (
        key("enter", "open", "open the record and its timeline", priority=False),
        *_RECORD_KEYS,
        key("s", "sort", "sort", priority=False),
        key("a", "all", "all records or open ones only", priority=False),
        key("slash", "filter", "filter by lot, retort, process, state or guidance", priority=False),
        key("escape", "table", "back to the table", priority=False),
    ),
    "record": (
        key("escape", "back", "back to the board", priority=False),
        *_RECORD_KEYS,
        key("e", "evaluate", "re-evaluate with the current engine and rules", priority=False),
        key("y", "audit", "replay the record in the audit screen", priority=False),
    ),
    "audit": (
        key("enter", "replay", "replay the record: stored against recomputed", priority=False),
        key("v", "verify", "verify every hash chain", priority=False),
        key("x", "export", "export the evaluation report", priority=False),
    ),
}

#: Symbols of the floor entry (each goes with a word and a colour, never alone).
FLOOR_SYMBOLS = (
    ("▼", "low: reading below the process temperature"),
    ("▲", "back at process temperature"),
    ("•", "a reading at a typed time"),
    ("⚑", "flag: a deviation the record shows"),
    ("◔", "cycle still running: figures projected"),
    ("◌", "nothing entered yet"),
    ("◉", "following a retort log"),
    ("░", "shaded on the curves: retort below process temperature"),
    ("✓", "meets / reproduced"),
    ("✗", "below / differs / refused"),
)


def bindings(keys: tuple[Key, ...]) -> list[Binding]:
    """Textual bindings for ``keys`` (footer label shown where one is given)."""
    return [Binding(k.key, k.action, k.footer or k.says, show=bool(k.footer), priority=k.priority)
            for k in keys]


#: The help fits an 80-column terminal (border, padding and scroll bar take 12).
HELP_WIDTH = 68


def _rows(keys: tuple[Key, ...], width: int = 10) -> list[str]:
    seen: dict[str, list[str]] = {}
    for k in keys:
        seen.setdefault(k.label, []).append(k.says)
    out = []
    for label, says in seen.items():
        out += textwrap.wrap(f"  {label:<{width}} {'; '.join(says)}", HELP_WIDTH,
                             subsequent_indent=" " * (width + 3))
    return out


def symbol_rows(state_look: dict | None = None) -> list[str]:
    """Every symbol the screens show, with its word: floor marks, guidance, record states (holds
    board, ``state_look`` as the board draws them), events (timeline); read from the tables the
    screens draw with."""
    rows = [f"  {s:<3}{w}" for s, w in FLOOR_SYMBOLS]
    rows += ["", "Guidance"] + [f"  {symbol:<3}{word.lower()}" for word, symbol, _ in DISPOSITION_LOOK.values()]
    if state_look:
        rows += ["", "Record states (holds board)"] + [f"  {text}" for text, _ in state_look.values()]
    rows += ["", "Events (timeline)"] + [f"  {symbol:<3}{kind}" for kind, (symbol, _) in KIND_LOOK.items()]
    return rows


def help_text(state_look: dict | None = None) -> str:
    """The help screen (F1), made from the tables above (and the holds board's state symbols)."""
    parts = ["deviation · terminal UI (Esc or F1 closes)", "", "Every screen"]
    parts += _rows(APP_KEYS)
    parts += ["", "Floor entry (F2)"]
    parts += _rows(FLOOR_KEYS)
    parts += ['  "now" is the clock minus Steam on; the screen refreshes by itself',
              "  while the cycle runs; an open low interval counts until now."]
    for title, screen in (("Holds board (F3)", "holds"), ("Record (Enter on the board)", "record"),
                          ("Audit (F4)", "audit")):
        parts += ["", title]
        parts += _rows(SCREEN_KEYS[screen])
    parts += ["", "Symbols (always with a word and a colour)"]
    parts += symbol_rows(state_look)
    parts += [""] + textwrap.wrap(CAUTION, HELP_WIDTH)
    return "\n".join(parts) + "\n"


def keys_markdown() -> str:
    """The README's key table (a test checks the README holds exactly this)."""
    lines = ["| screen | key | what it does |", "|---|---|---|"]
    groups = [("every screen", APP_KEYS), ("floor entry", FLOOR_KEYS)]
    groups += [(name, keys) for name, keys in (("holds board", SCREEN_KEYS["holds"]),
                                               ("record", SCREEN_KEYS["record"]),
                                               ("audit", SCREEN_KEYS["audit"]))]
    for screen, keys in groups:
        for k in keys:
            lines.append(f"| {screen} | `{k.label}` | {k.says} |")
    return "\n".join(lines) + "\n"


__all__ = ["Key", "APP_KEYS", "FLOOR_KEYS", "SCREEN_KEYS", "FLOOR_SYMBOLS", "bindings", "help_text",
           "keys_markdown", "symbol_rows"]
