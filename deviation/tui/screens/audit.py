"""Audit: pick a record, replay it with the current engine and rules, compare, verify, export.

Keys: Enter replays the record under the cursor, V verifies every hash chain of the store,
X exports the evaluation report (when the report layer is installed).
"""

from __future__ import annotations

import json
from pathlib import Path

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import Screen
from textual.widgets import DataTable, Footer, Static

from deviation.errors import DeviationError
from deviation.records.text import one_line
from deviation.tui.screens.dialogs import ExportReportDialog, FileChoice
from deviation.tui.widgets.comparison import ComparisonTable
from deviation.tui.widgets.status import StatusLine
from deviation.tui.widgets.timeline import Timeline


def replay_record(store, record_id: str) -> dict:
    """Recompute a record's latest evaluation; the stored and the new one, and what differs.

    The comparison is :func:`deviation.records.replay.replay_item` (the CLI's ``replay``), so the
    verdict and its reasons read the same here and in ``deviation replay``.
    """
    from deviation.evaluate import default_rule_set, evaluate_case
    from deviation.inputs.case import LoadedCase
    from deviation.records.replay import compare_evaluations, replay_item

    rs = default_rule_set()
    items = list(store.iter_replay_items([record_id]))
    if not items:
        raise DeviationError(f"no record {record_id}", source=getattr(store, "name", None))
    verdict = replay_item(items[0], rs)
    out = {"verdict": verdict, "stored": None, "now": None, "evaluation": None, "loaded": None}
    if items[0].get("evaluated") is None:
        return out
    stored_event = json.loads(items[0]["evaluated"])
    stored = stored_event["evaluation"]  # compact: the arrays are compared by their digest
    snapshots = {int(k): v for k, v in items[0]["snapshots"].items()}
    sseq = stored_event.get("snapshot_seq") or max(snapshots)
    snapshot = json.loads(snapshots[sseq])["snapshot"]
    opts = stored_event.get("options") or {}
    out["stored"] = stored
    try:
        loaded = LoadedCase.from_snapshot(snapshot)
        ev = evaluate_case(loaded, conservative=bool(opts.get("conservative", stored.get("conservative"))),
                           rule_set=rs, what_if=bool(opts.get("what_if", True)))
    except DeviationError:
        return out
    now = ev.model_dump(mode="json")
    out.update(now=now, evaluation=ev, loaded=loaded, differences=compare_evaluations(stored, now))
    return out


def verify_text(res) -> Text:
    """The CLI's verify sentence for a :class:`~deviation.records.store.VerifyResult`."""
    if res.ok:
        return Text(f"✓ every hash chain holds: {res.checked_events} events in {res.records} records; "
                    f"store head {res.head['global_seq']} {res.head['global_hash']}", style="green")
    b = res.first_broken
    where = (f"record {b['record_id']} event {b['seq']} ({b['kind']}, store position {b['global_seq']}): "
             if b.get("seq") is not None else "")
    return Text(f"✗ BROKEN: {where}{one_line(b['reason'])} ({res.broken_count} problem(s))", style="bold red")


def report_available() -> bool:
    try:
        from deviation import report  # noqa: F401
    except ImportError:
        return False
    return hasattr(report, "build_report_context") and hasattr(report, "write_report")


class AuditScreen(Screen):
    """Replay, compare and verify."""

    TITLE_TEXT = "Audit"
    BINDINGS = [
        Binding("enter", "replay", "Replay"),
        Binding("v", "verify", "Verify chains"),
        Binding("x", "export", "Export report"),
    ]

    def __init__(self) -> None:
        super().__init__()
        self.result: dict | None = None
        self.record_id: str | None = None

    def compose(self) -> ComposeResult:
        yield StatusLine(id="status")
        yield Static("", id="verify-line")
        with Horizontal(id="audit-body"):
            yield DataTable(id="audit-records", cursor_type="row", zebra_stripes=True)
            with Vertical(id="audit-right"):
                yield Static("Pick a record and press Enter to replay it.", id="replay-verdict")
                yield ComparisonTable(id="comparison")
                yield Timeline(id="audit-timeline")
        yield Footer()

    def on_mount(self) -> None:
        t = self.query_one("#audit-records", DataTable)
        t.add_columns("record", "lot", "state")
        self.reload()
        self.action_verify()
        t.focus()

    def on_screen_resume(self) -> None:
        self.reload()

    def reload(self) -> None:
        ctx = self.app.ctx
        self.query_one(StatusLine).update(
            f"deviation · {self.TITLE_TEXT} · {ctx.actor} ({ctx.role}) · store {ctx.store_name}"
            "   F1 help  F2 floor  F3 holds  F4 audit")
        t = self.query_one("#audit-records", DataTable)
        t.clear()
        try:
            rows = ctx.store.list_records()
        except DeviationError as exc:
            self.notify(one_line(exc), severity="error", markup=False)
            return
        for r in reversed(rows):  # newest first
            t.add_row(Text(r.id + (" ⇩" if r.imported else "")), Text(one_line(r.lot)), r.state, key=r.id)
        if self.record_id:
            self.select(self.record_id)

    def select(self, record_id: str) -> None:
        t = self.query_one("#audit-records", DataTable)
        for i, key in enumerate(t.rows):
            if key.value == record_id:
                t.move_cursor(row=i)

    def current_id(self) -> str | None:
        t = self.query_one("#audit-records", DataTable)
        if not t.row_count:
            return None
        return t.coordinate_to_cell_key(t.cursor_coordinate).row_key.value

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        if event.data_table.id == "audit-records":
            self.replay(event.row_key.value)

    def action_replay(self) -> None:
        rid = self.current_id()
        if rid:
            self.replay(rid)

    def replay(self, record_id: str) -> None:
        store = self.app.ctx.store
        self.record_id = record_id
        try:
            res = replay_record(store, record_id)
            events = store.events(record_id)
        except DeviationError as exc:
            self.notify(one_line(exc), severity="error", markup=False)
            return
        self.result = res
        v = res["verdict"]
        look = {"reproduced": ("✓ REPRODUCED", "bold green"), "changed": ("✗ CHANGED", "bold red"),
                "not-evaluated": ("· NOT EVALUATED", "dim"), "error": ("✗ ERROR", "bold red")}[v["status"]]
        why = "; ".join(v.get("why", [])) or "stored result reproduced within the replay tolerances"
        self.query_one("#replay-verdict", Static).update(
            Text.assemble((f"{look[0]} ", look[1]), (f"{record_id}: ", "bold"), one_line(why)))
        differing = {d["field"] for d in res.get("differences", v.get("differences", []))}
        self.query_one(ComparisonTable).show(res["stored"], res["now"], differing)
        self.query_one("#audit-timeline", Timeline).show(events)

    def action_verify(self) -> None:
        try:
            res = self.app.ctx.store.verify()
        except DeviationError as exc:
            self.query_one("#verify-line", Static).update(Text(f"✗ {one_line(exc)}", style="bold red"))
            return
        self.verify_result = res
        self.query_one("#verify-line", Static).update(verify_text(res))

    def action_export(self) -> None:
        if not report_available():
            self.notify("the report layer (deviation.report) is not installed here", severity="warning", markup=False)
            return
        if not self.result or self.result.get("evaluation") is None:
            self.notify("replay a record first (Enter): the report is of its recomputed evaluation",
                        severity="warning", markup=False)
            return
        rid = self.record_id
        res = self.result

        def write(choice: FileChoice) -> None:
            from deviation import report
            from deviation.evaluate import default_rule_set

            path = Path(choice.path).expanduser()
            fmt = {".html": "html", ".htm": "html", ".md": "md", ".pdf": "pdf"}.get(path.suffix.lower())
            if fmt is None:
                raise DeviationError(f"'{path.name}': the file name must end in .html, .md or .pdf",
                                     source="file")
            view = self.app.ctx.store.record(rid)
            events = [e.to_dict() for e in view.events]
            ctx = report.build_report_context(res["loaded"], res["evaluation"], rule_set=default_rule_set(),
                                              events=events, record_id=rid, record_hash=view.head_hash,
                                              with_plots=fmt != "md")
            report.write_report(path, fmt, ctx)

        def done(choice: FileChoice | None) -> None:
            if choice is not None:
                self.notify(f"report written to {one_line(choice.path)}", title="Exported", markup=False)

        self.app.push_screen(ExportReportDialog(apply=write, values={"path": f"report-{rid}.html"}), done)
