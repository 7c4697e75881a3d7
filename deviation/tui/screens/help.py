"""Help: the keys of every screen and the path of a deviation from entry to decision."""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

from deviation.evaluate import CAUTION

HELP = f"""\
deviation · terminal UI                          Esc or F1 closes this help

Screens (function keys work everywhere)
  F2  Floor entry   the operator enters a deviation while the cycle runs
  F3  Holds board   supervisor holds/releases; process authority decides
  F4  Audit         replay, stored against recomputed, verify the chains
  F9  Who is at the terminal (name, role: recorded, not authenticated)
  Ctrl+Q quit (the floor entry is kept as a draft in the store)

Floor entry
  Tab / Shift+Tab  move between fields; Enter in "Reading" = low now
  Ctrl+L  temperature low now (the reading typed in "Reading °C")
  Ctrl+B  back at process temperature now
  Ctrl+T  typed entry: "At" (min from steam on, or HH:MM) + "Reading"
  Ctrl+O  import a retort log (CSV)      Ctrl+R  undo the last reading
  Ctrl+F  follow a retort log the recorder is still writing: results
          refresh as rows arrive, ⚑ toast on each new flag; Ctrl+F
          again stops (Ctrl+S saves the record with the rows so far)
  Ctrl+S  save the record (operator)     Ctrl+N  new entry
  Ctrl+G  curves or guidance (narrow terminals show one at a time)
  "now" is the clock minus "Steam on"; an open low interval counts
  until now.

Holds board and record
  Enter open · H hold · R release · D disposition · N note
  S sort · A all or open only · / filter
  Esc back from a record; Y replays the record in the audit screen
  E (record) re-evaluate the latest snapshot with the current engine
    and rules (operator, supervisor, process authority)

Audit
  Enter replay · V verify every hash chain · X export the report

Symbols: ✓ meets / reproduced  ✗ below / differs  ! hold  ⚑ flag
         ▼ low  ▲ back  ○ entered  ◐ evaluated  ⏸ held  ▶ released
         ⚖ decided

{CAUTION}
"""


class HelpScreen(ModalScreen[None]):
    BINDINGS = [Binding("escape", "close", "Close"), Binding("f1", "close", "Close", priority=True)]

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="help"):
            yield Static(Text(HELP))

    def action_close(self) -> None:
        self.dismiss(None)
