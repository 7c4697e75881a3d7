"""Hold, release, decide and note on a record: the role check first, then a dialog.

Shared by the holds board and the record screen. The store applies the same role and
record-state rules as the CLI and its refusals are shown with the same words. A disposition is
chosen from the fixed list and written only after its summary is confirmed (the same summary
``deviation record decide`` shows); on a decided record, ``D`` opens a superseding disposition.
"""

from __future__ import annotations

from typing import Callable

from deviation.errors import DeviationError
from deviation.records import roles
from deviation.records.events import disposition_summary
from deviation.records.text import one_line
from deviation.tui.screens.dialogs import (
    ConfirmDialog,
    DecideDialog,
    Decision,
    HoldDialog,
    HoldRequest,
    NoteDialog,
    NoteText,
    ReleaseDialog,
    ReleaseRequest,
)

# action -> dialog class
_ACTIONS = {
    "place-hold": HoldDialog,
    "release-hold": ReleaseDialog,
    "note": NoteDialog,
}


def _refused(screen, exc: Exception) -> None:
    screen.notify(one_line(exc), title="Refused", severity="error", markup=False)


def run_record_action(screen, record_id: str, action: str, on_done: Callable[[], None]) -> None:
    """Open the dialog for ``action`` on ``record_id`` when the role allows it; else say why."""
    ctx = screen.app.ctx
    try:
        role = roles.check_role(ctx.actor, ctx.role, action)
    except DeviationError as exc:
        _refused(screen, exc)
        return
    store = ctx.store
    subtitle = f"Record {record_id} · {ctx.actor} ({role})"
    if action == "decide":
        _decide(screen, record_id, role, subtitle, on_done)
        return

    def apply(result) -> None:
        if isinstance(result, HoldRequest):
            store.place_hold(record_id, reason=result.reason, actor=ctx.actor, role=role)
        elif isinstance(result, ReleaseRequest):
            store.release_hold(record_id, reason=result.reason, actor=ctx.actor, role=role)
        elif isinstance(result, NoteText):
            store.note(record_id, result.text, actor=ctx.actor, role=role)

    def done(result) -> None:
        if result is not None:
            screen.notify(f"Record {record_id}: {action} recorded by {one_line(ctx.actor)} ({role}).",
                          title="Recorded", markup=False)
            on_done()

    screen.app.push_screen(_ACTIONS[action](apply=apply, subtitle=subtitle), done)


def _decide(screen, record_id: str, role: str, subtitle: str, on_done: Callable[[], None]) -> None:
    """Choose, confirm, then write (or, on a decided record, supersede) the disposition."""
    ctx = screen.app.ctx
    store = ctx.store
    try:
        view = store.record(record_id)
        st = roles.state_of(view.events)
        supersedes = st.decision_seq if st.state == "decided" else None
        roles.check_transition(record_id, st, "decide", actor=ctx.actor, role=role,
                               payload={"supersedes": supersedes})
    except DeviationError as exc:
        _refused(screen, exc)
        return

    def chosen(decision: Decision | None) -> None:
        if decision is None:
            return
        lines = disposition_summary(view, decision=decision.decision, decision_text=decision.decision_text,
                                    reason=decision.reason, result=decision.result,
                                    supersedes=decision.supersedes, actor=ctx.actor, role=role)

        def confirmed(ok: bool | None) -> None:
            if not ok:
                screen.notify("Disposition not written.", title="Back", markup=False)
                return
            try:
                store.decide(record_id, decision=decision.decision, decision_text=decision.decision_text,
                             reason=decision.reason, result=decision.result, supersedes=decision.supersedes,
                             actor=ctx.actor, role=role)
            except DeviationError as exc:
                _refused(screen, exc)
                return
            screen.notify(f"Record {record_id}: disposition "
                          f"{one_line(roles.decision_words({'decision': decision.decision, 'decision_text': decision.decision_text}))} "
                          f"recorded by {one_line(ctx.actor)} ({role}).", title="⚖ Decided", markup=False)
            on_done()

        screen.app.push_screen(ConfirmDialog("⚖ Write this disposition? It is kept for good; only a "
                                             "superseding disposition corrects it.", lines), confirmed)

    screen.app.push_screen(DecideDialog(subtitle=subtitle, supersedes=supersedes), chosen)
