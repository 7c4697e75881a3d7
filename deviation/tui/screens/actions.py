"""Hold, release, decide and note on a record: the role check first, then a dialog.

Shared by the holds board and the record screen. The store applies the same role and
record-state rules as the CLI and its refusals are shown with the same words.
"""

from __future__ import annotations

from typing import Callable

from deviation.errors import DeviationError
from deviation.records import roles
from deviation.tui.screens.dialogs import (
    DecideDialog,
    Decision,
    HoldDialog,
    HoldRequest,
    NoteDialog,
    NoteText,
    ReleaseDialog,
    ReleaseRequest,
)

# action -> (dialog class, what the store is asked)
_ACTIONS = {
    "place-hold": HoldDialog,
    "release-hold": ReleaseDialog,
    "decide": DecideDialog,
    "note": NoteDialog,
}


def run_record_action(screen, record_id: str, action: str, on_done: Callable[[], None]) -> None:
    """Open the dialog for ``action`` on ``record_id`` when the role allows it; else say why."""
    ctx = screen.app.ctx
    try:
        role = roles.check_role(ctx.actor, ctx.role, action)
    except DeviationError as exc:
        screen.notify(str(exc), title="Refused", severity="error")
        return
    store = ctx.store

    def apply(result) -> None:
        if isinstance(result, HoldRequest):
            store.place_hold(record_id, reason=result.reason, actor=ctx.actor, role=role)
        elif isinstance(result, ReleaseRequest):
            store.release_hold(record_id, reason=result.reason, actor=ctx.actor, role=role)
        elif isinstance(result, Decision):
            store.decide(record_id, decision=result.decision, reason=result.reason, result=result.result,
                         actor=ctx.actor, role=role)
        elif isinstance(result, NoteText):
            store.note(record_id, result.text, actor=ctx.actor, role=role)

    def done(result) -> None:
        if result is not None:
            screen.notify(f"Record {record_id}: {action} recorded by {ctx.actor} ({role}).", title="Recorded")
            on_done()

    dialog = _ACTIONS[action](apply=apply, subtitle=f"Record {record_id} · {ctx.actor} ({role})")
    screen.app.push_screen(dialog, done)
