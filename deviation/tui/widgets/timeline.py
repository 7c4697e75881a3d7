"""The event timeline of a record: append-only, each event chained to the one before; an event
imported from another store is marked ⇩ with its origin. Every text is shown as typed."""

from __future__ import annotations

from rich.text import Text
from textual.widgets import DataTable

from deviation.records.events import Event, describe_event, origin_text
from deviation.records.text import one_line

# Each kind has its own symbol (colour is never the only signal).
KIND_LOOK = {
    "entered": ("＋", "bold"),
    "amended": ("✎", "yellow"),
    "evaluated": ("∑", "cyan"),
    "hold-placed": ("⏸", "bold yellow"),
    "hold-released": ("▶", "green"),
    "disposition": ("⚖", "bold magenta"),
    "note": ("✉", "dim"),
}


class Timeline(DataTable):
    """One row per event: seq, UTC, kind, who, what, hash."""

    DEFAULT_CSS = """
    Timeline { height: 1fr; }
    """

    def on_mount(self) -> None:
        self.cursor_type = "row"
        self.zebra_stripes = True
        self.add_columns("#", "UTC", "event", "who", "what", "hash")

    def show(self, events: list[Event]) -> None:
        self.clear()
        for e in events:
            symbol, style = KIND_LOOK.get(e.kind, ("·", ""))
            what = Text(one_line(describe_event(e), 70))
            if e.origin is not None:
                what = Text.assemble(("⇩ ", "bold yellow"), what,
                                     (f" [{one_line(origin_text(e.origin), 60)}]", "yellow"))
            self.add_row(str(e.seq), e.utc[:19].replace("T", " "), Text(f"{symbol} {one_line(e.kind)}", style=style),
                         Text(f"{one_line(e.actor)} ({one_line(e.role)})"), what, e.hash[:10] + "…",
                         key=str(e.seq))
