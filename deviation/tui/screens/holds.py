"""Holds board: the open records with their state, guidance and the process authority's
decision, for the supervisor.

Keys: Enter opens a record, H places a hold, R releases it (citing the disposition), D records a
disposition, N adds a note, S changes the sort, A shows all records or only the open ones, /
filters. The rows come from the store's summary table in one query; every text is shown as typed.
"""

from __future__ import annotations

from dataclasses import dataclass

from rich.console import Group
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import DataTable, Footer, Input, Static

from deviation.errors import DeviationError
from deviation.records.text import one_line
from deviation.tui.screens.actions import run_record_action
from deviation.tui.widgets.results import affected_lines, disposition_look
from deviation.tui.widgets.status import StatusLine
from deviation.tui.widgets.steady_input import SteadyInput

STATE_LOOK = {
    "entered": ("○ entered", ""),
    "evaluated": ("◐ evaluated", "cyan"),
    "held": ("⏸ held", "bold yellow"),
    "released": ("▶ released", "green"),
    "decided": ("⚖ decided", "magenta"),
}
# Most severe first when sorting by disposition.
SEVERITY = {"reprocess-or-destroy": 0, "reprocess": 1, "evaluate": 2, "covered-by-alternate": 3,
            "no-deviation": 4, None: 5}
SORTS = ("created", "disposition", "state", "lot", "retort")


@dataclass(frozen=True)
class BoardRow:
    id: str
    lot: str
    retort_id: str
    process_id: str
    state: str
    disposition: str | None
    delivered_F_min: float | None
    target_F_min: float | None
    created_utc: str
    decision: str | None = None  # the process authority's decision in force, in words
    held: bool = False
    imported: bool = False

    def matches(self, text: str) -> bool:
        text = text.strip().lower()
        if not text:
            return True
        hay = " ".join(str(v) for v in (self.id, self.lot, self.retort_id, self.process_id, self.state,
                                         self.disposition or "", self.decision or "")).lower()
        return all(word in hay for word in text.split())


def board_rows(store, *, open_only: bool) -> list[BoardRow]:
    """The records of the store (open ones: not decided), from the summary table in one query."""
    return [BoardRow(s.id, s.lot, s.retort_id, s.process_id, s.state, s.guidance, s.delivered_F_min,
                     s.target_F_min, s.created_utc, s.decision_words, s.held, s.imported)
            for s in store.list_records() if not (open_only and s.state == "decided")]


def sort_rows(rows: list[BoardRow], key: str) -> list[BoardRow]:
    fn = {
        "created": lambda r: r.created_utc,
        "disposition": lambda r: (SEVERITY.get(r.disposition, 5), r.created_utc),
        "state": lambda r: (list(STATE_LOOK).index(r.state) if r.state in STATE_LOOK else 9, r.created_utc),
        "lot": lambda r: r.lot,
        "retort": lambda r: (r.retort_id, r.created_utc),
    }[key]
    return sorted(rows, key=fn)


class HoldsScreen(Screen):
    """The supervisor's board of open records."""

    TITLE_TEXT = "Holds board"
    BINDINGS = [
        Binding("enter", "open", "Open", show=True),
        Binding("h", "hold", "Hold"),
        Binding("r", "release", "Release"),
        Binding("d", "decide", "Decide"),
        Binding("n", "note", "Note"),
        Binding("s", "sort", "Sort"),
        Binding("a", "all", "All/open"),
        Binding("slash", "filter", "Filter"),
        Binding("escape", "table", "Table", show=False),
    ]

    def __init__(self) -> None:
        super().__init__()
        self.sort_key = "disposition"
        self.open_only = True
        self.rows: list[BoardRow] = []

    def compose(self) -> ComposeResult:
        yield StatusLine(id="status")
        yield SteadyInput(placeholder="/ filter: lot, retort, process, state or guidance words", id="filter",
                    compact=True)
        yield DataTable(id="board", cursor_type="row", zebra_stripes=True)
        yield Static("", id="board-detail")
        yield Static("", id="board-summary")
        yield Footer()

    def on_mount(self) -> None:
        t = self.query_one("#board", DataTable)
        t.add_columns("state", "guidance", "decision", "lot", "retort", "process", "F0 / target", "entered (UTC)",
                      "record")
        self.reload()
        t.focus()

    def on_screen_resume(self) -> None:
        self.reload()

    def refresh_status(self) -> None:
        ctx = self.app.ctx
        self.query_one(StatusLine).update(
            f"deviation · {self.TITLE_TEXT} · {ctx.actor} ({ctx.role}) · store {ctx.store_name}"
            "   F1 help  F2 floor  F3 holds  F4 audit")

    def reload(self) -> None:
        self.refresh_status()
        try:
            self.rows = board_rows(self.app.ctx.store, open_only=self.open_only)
        except DeviationError as exc:
            self.notify(one_line(exc), severity="error", markup=False)
            self.rows = []
        self.fill()

    def fill(self) -> None:
        t = self.query_one("#board", DataTable)
        keep = self.current_id()
        t.clear()
        text = self.query_one("#filter", Input).value
        shown = [r for r in sort_rows(self.rows, self.sort_key) if r.matches(text)]
        for r in shown:
            st, st_style = STATE_LOOK.get(r.state, (r.state, ""))
            word, symbol, style = disposition_look(r.disposition)
            short = {"reprocess-or-destroy": "reprocess/destroy", "covered-by-alternate": "alternate",
                     "no-deviation": "no deviation"}.get(r.disposition or "", r.disposition or "none")
            F = (f"{r.delivered_F_min:.2f} / {r.target_F_min:g}"
                 if r.delivered_F_min is not None and r.target_F_min is not None else "—")
            if r.state == "decided" and r.held:
                st = st + " ⏸"  # decided, the lot still on hold (e.g. until the reprocess is done)
            decision = Text(f"⚖ {one_line(r.decision, 28)}", style="magenta") if r.decision else Text("—", style="dim")
            t.add_row(Text(st, style=st_style), Text(f"{symbol} {one_line(short)}", style=style), decision,
                      Text(one_line(r.lot)), Text(one_line(r.retort_id)), Text(one_line(r.process_id)), F,
                      r.created_utc[:16].replace("T", " "), Text(r.id + (" ⇩" if r.imported else "")), key=r.id)
        if keep is not None:
            for i, r in enumerate(shown):
                if r.id == keep:
                    t.move_cursor(row=i)
        which = "open records" if self.open_only else "all records"
        self.query_one("#board-summary", Static).update(
            f"{len(shown)} of {len(self.rows)} {which} · sorted by {self.sort_key} · "
            f"guidance: the process authority decides")

    def current_id(self) -> str | None:
        t = self.query_one("#board", DataTable)
        if not t.row_count:
            return None
        try:
            return t.coordinate_to_cell_key(t.cursor_coordinate).row_key.value
        except Exception:  # noqa: BLE001 - no row under the cursor
            return None

    def on_input_changed(self, event: Input.Changed) -> None:
        if event.input.id == "filter":
            self.fill()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        self.query_one("#board", DataTable).focus()

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        """Under the board: a continuous system's affected entry ranges for the row in focus."""
        if event.data_table.id != "board":
            return
        detail = self.query_one("#board-detail", Static)
        rid = event.row_key.value if event.row_key is not None else None
        lines: list = []
        if rid:
            try:
                lines = affected_lines(self.app.ctx.store.record(rid).stored_evaluation or {}, most=3)
            except DeviationError:
                lines = []
        detail.update(Group(*lines) if lines else "")

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        if event.data_table.id == "board":
            self._open(event.row_key.value)

    def _open(self, rid: str | None) -> None:
        if rid:
            from deviation.tui.screens.record import RecordScreen

            self.app.push_screen(RecordScreen(rid))

    def action_open(self) -> None:
        self._open(self.current_id())

    def _act(self, action: str) -> None:
        rid = self.current_id()
        if rid is None:
            self.notify("no record selected", severity="warning")
            return
        run_record_action(self, rid, action, self.reload)

    def action_hold(self) -> None:
        self._act("place-hold")

    def action_release(self) -> None:
        self._act("release-hold")

    def action_decide(self) -> None:
        self._act("decide")

    def action_note(self) -> None:
        self._act("note")

    def action_sort(self) -> None:
        self.sort_key = SORTS[(SORTS.index(self.sort_key) + 1) % len(SORTS)]
        self.fill()

    def action_all(self) -> None:
        self.open_only = not self.open_only
        self.reload()

    def action_filter(self) -> None:
        self.query_one("#filter", Input).focus()

    def action_table(self) -> None:
        self.query_one("#board", DataTable).focus()

    def check_action(self, action: str, parameters) -> bool | None:
        # Letter keys type into the filter while it has the focus.
        if action in ("hold", "release", "decide", "note", "sort", "all", "filter", "open"):
            return not isinstance(self.focused, Input)
        return True
