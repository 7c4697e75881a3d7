"""One record: its state, hold and disposition (and any it superseded), where imported events
came from, what the actor may do now, and its timeline.

E re-evaluates the record's latest snapshot with the current engine and rules, as
``deviation record evaluate ID`` does (the same function writes the ``evaluated`` event). Every
text a person typed is shown as text, never as markup.
"""

from __future__ import annotations

from rich.console import Group
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import Footer, Static

from deviation.errors import DeviationError
from deviation.records import roles
from deviation.records.events import origin_text
from deviation.records.text import one_line
from deviation.tui.screens.actions import run_record_action
from deviation.tui.widgets.results import disposition_text
from deviation.tui.widgets.status import StatusLine
from deviation.tui.widgets.timeline import Timeline


def _F(x) -> str:
    return f"{x:.2f}" if isinstance(x, (int, float)) and not isinstance(x, bool) else "?"


def record_header(view, actor: str, role: str) -> Group:
    ev = view.stored_evaluation or {}
    g = ev.get("guidance") or {}
    lines = [
        Text.assemble(("Record ", "bold"), (view.id, "bold"), f"  state {view.state}"),
        Text(f"lot {one_line(view.lot)} · retort {one_line(view.retort_id)} · process {one_line(view.process_id)}"
             + (f" v{one_line(view.process_version)}" if view.process_version else "")),
    ]
    if ev:
        F = ev.get("delivered_F_min")
        lines.append(Text.assemble("guidance ", disposition_text(g.get("disposition")),
                                   f" · F0 {_F(F)} of {_F(ev.get('target_F_min'))} min" if F is not None else ""))
        if not view.evaluation_current:
            lines.append(Text("! the latest evaluation is of an earlier snapshot: evaluate again", style="yellow"))
    if view.hold:
        h = view.hold
        txt = f"hold placed by {one_line(h.get('placed_by'))}: {one_line(h.get('reason'))}"
        if not h.get("held"):
            txt += f" · released by {one_line(h.get('released_by'))}: {one_line(h.get('release_reason'))}"
        lines.append(Text(("⏸ " if h.get("held") else "▶ ") + txt))
    if view.disposition:
        d = view.disposition
        lines.append(Text(f"⚖ disposition by {one_line(d['by'])}: {one_line(d.get('words'))}: "
                          f"{one_line(d.get('reason'))}"
                          + (f" (result: {one_line(d['result'])})" if d.get("result") else ""), style="bold"))
        for old in reversed(view.superseded):
            lines.append(Text(f"  superseded: {one_line(old.get('words'))} by {one_line(old.get('by'))} "
                              f"({one_line(old.get('reason'))})", style="dim"))
    for o in view.origins:
        lines.append(Text(f"⇩ {one_line(origin_text(o))}", style="yellow"))
    allowed = roles.allowed_actions(role, view.events)
    lines.append(Text(f"{one_line(actor)} ({role}) may now: {', '.join(allowed) or 'read only'}", style="dim"))
    return Group(*lines)


class RecordScreen(Screen):
    """A record and its event timeline."""

    TITLE_TEXT = "Record"
    BINDINGS = [
        Binding("escape", "back", "Back"),
        Binding("h", "hold", "Hold"),
        Binding("r", "release", "Release"),
        Binding("d", "decide", "Decide"),
        Binding("n", "note", "Note"),
        Binding("e", "evaluate", "Evaluate"),
        Binding("y", "audit", "Replay in audit"),
    ]

    def __init__(self, record_id: str) -> None:
        super().__init__()
        self.record_id = record_id

    def compose(self) -> ComposeResult:
        yield StatusLine(id="status")
        yield Static("", id="record-header")
        yield Timeline(id="timeline")
        yield Footer()

    def on_mount(self) -> None:
        self.reload()

    def reload(self) -> None:
        ctx = self.app.ctx
        self.query_one(StatusLine).update(
            f"deviation · Record {self.record_id} · {ctx.actor} ({ctx.role}) · store {ctx.store_name}")
        try:
            view = ctx.store.record(self.record_id)
        except DeviationError as exc:
            self.notify(one_line(exc), severity="error", markup=False)
            return
        self.view = view
        self.query_one("#record-header", Static).update(record_header(view, ctx.actor, ctx.role))
        self.query_one(Timeline).show(view.events)

    def action_back(self) -> None:
        self.app.pop_screen()

    def action_hold(self) -> None:
        run_record_action(self, self.record_id, "place-hold", self.reload)

    def action_release(self) -> None:
        run_record_action(self, self.record_id, "release-hold", self.reload)

    def action_decide(self) -> None:
        run_record_action(self, self.record_id, "decide", self.reload)

    def action_note(self) -> None:
        run_record_action(self, self.record_id, "note", self.reload)

    def action_evaluate(self) -> None:
        """Re-evaluate the latest snapshot and append ``evaluated`` (role checked as in the CLI)."""
        from deviation.records.replay import evaluate_into, evaluation_summary

        ctx = self.app.ctx
        try:
            role = roles.check_role(ctx.actor, ctx.role, "evaluate")
            view = ctx.store.record(self.record_id)
            before = evaluation_summary(view.stored_evaluation)
            # The CLI's defaults: the lower reading between samples, the built-in rule set.
            ev = evaluate_into(ctx.store, self.record_id, view.snapshot, view.snapshot_seq,
                               conservative=True, rule_paths=None, actor=ctx.actor, role=role)
        except DeviationError as exc:
            self.notify(one_line(exc), title="Refused", severity="error", markup=False)
            return
        after = evaluation_summary(ev)
        was = (f" (was F0 {before['delivered_F_min']:.3f} min, {before['disposition']})"
               if before and before.get("delivered_F_min") is not None else "")
        F = after.get("delivered_F_min")
        self.notify(f"Record {self.record_id} re-evaluated by {one_line(ctx.actor)} ({role}): "
                    + (f"F0 {F:.3f} min, " if F is not None else "")
                    + f"guidance {after.get('disposition')}{was}.", title="◐ Evaluated", markup=False)
        self.reload()

    def action_audit(self) -> None:
        self.app.open_audit(self.record_id)
