"""Who may do what to a deviation record, and in which state of the record.

Four roles (issue 5): an **operator** enters a deviation, amends it before a hold decision and
writes notes; a **supervisor** places and releases the hold (the lot is set aside for
evaluation); a **process authority** records the disposition; an **auditor** reads, replays and
verifies. Everyone may read; re-evaluating a record (new rules, new engine) is open to the
three acting roles.

The state of a record follows from its events alone::

    entered --evaluate--> evaluated --place-hold--> held --decide--> decided
       ^  \\                  |  ^                    |
       amend \\--place-hold---+  +-----(again)------ released <--release-hold

- ``amend`` is possible only before any hold decision (no hold placed or released yet) and
  makes the latest evaluation stale (state back to ``entered``);
- ``decide`` needs the lot held and an evaluation of the current case snapshot;
- ``decided`` is final: only notes follow.

Identity is what the command line or the OS says (``--actor``, ``--role``): this is an
accountability record, not authentication. A plant that needs authentication puts the store
behind accounts it controls (database roles, OS accounts).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterable

from deviation.errors import PermissionDenied

ROLES: tuple[str, ...] = ("operator", "supervisor", "process-authority", "auditor")

# action -> roles allowed to take it
ACTIONS: dict[str, tuple[str, ...]] = {
    "enter": ("operator",),
    "amend": ("operator",),
    "note": ("operator", "supervisor", "process-authority"),
    "evaluate": ("operator", "supervisor", "process-authority"),
    "place-hold": ("supervisor",),
    "release-hold": ("supervisor",),
    "decide": ("process-authority",),
    "import": ("supervisor", "auditor"),
    "read": ROLES,
    "replay": ROLES,
    "verify": ROLES,
    "export": ROLES,
}

# event kind -> the action that writes it
KIND_ACTION: dict[str, str] = {
    "entered": "enter",
    "amended": "amend",
    "evaluated": "evaluate",
    "hold-placed": "place-hold",
    "hold-released": "release-hold",
    "disposition": "decide",
    "note": "note",
}
EVENT_KINDS: tuple[str, ...] = tuple(KIND_ACTION)

STATES: tuple[str, ...] = ("entered", "evaluated", "held", "released", "decided")

_ALIASES = {"process_authority": "process-authority", "processauthority": "process-authority",
            "pa": "process-authority", "process authority": "process-authority"}


class TransitionRefused(PermissionDenied):
    """An action the actor's role allows, refused because of the record's state."""


def normalize_role(role: str | None, *, actor: str | None = None) -> str:
    """The canonical role name; refuses an unknown or missing role with the list of roles."""
    if role is None or not str(role).strip():
        raise PermissionDenied(
            f"actor '{actor or '?'}' gave no role; give --role (one of {', '.join(ROLES)}) "
            "or set DEVIATION_ROLE")
    key = str(role).strip().lower()
    key = _ALIASES.get(key, key)
    if key not in ROLES:
        raise PermissionDenied(
            f"actor '{actor or '?'}': unknown role '{role}' (roles: {', '.join(ROLES)})")
    return key


def roles_for(action: str) -> tuple[str, ...]:
    """The roles allowed to take ``action``."""
    try:
        return ACTIONS[action]
    except KeyError:
        raise PermissionDenied(f"unknown action '{action}' (actions: {', '.join(ACTIONS)})") from None


def _who(roles: Iterable[str]) -> str:
    roles = list(roles)
    return f"role {roles[0]}" if len(roles) == 1 else "roles " + ", ".join(roles)


def check_role(actor: str, role: str, action: str) -> str:
    """Refuse ``action`` unless ``role`` may take it; return the canonical role.

    Raises
    ------
    PermissionDenied
        naming the actor, the role, the action and the role(s) that may take it.
    """
    role = normalize_role(role, actor=actor)
    allowed = roles_for(action)
    if role not in allowed:
        raise PermissionDenied(
            f"actor '{actor}' (role {role}) may not {action}: that is for {_who(allowed)}")
    return role


@dataclass(frozen=True)
class RecordState:
    """What the event history of a record says about it now."""

    state: str
    evaluated_current: bool  # an evaluation follows the latest snapshot (entered/amended)
    hold_decided: bool  # a hold has been placed or released at some time
    events: int


def state_of(kinds: Iterable[str]) -> RecordState:
    """Replay the event kinds of a record (in order) into its state."""
    state, current, hold_decided, n = "entered", False, False, 0
    for kind in kinds:
        n += 1
        if kind in ("entered", "amended"):
            current = False
            if state in ("entered", "evaluated"):
                state = "entered"
        elif kind == "evaluated":
            current = True
            if state == "entered":
                state = "evaluated"
        elif kind == "hold-placed":
            state, hold_decided = "held", True
        elif kind == "hold-released":
            state, hold_decided = "released", True
        elif kind == "disposition":
            state = "decided"
    return RecordState(state, current, hold_decided, n)


def _refuse_transition(record_id: str, st: RecordState, action: str) -> str | None:
    """Why ``action`` is impossible in state ``st`` (None when it is possible)."""
    s = st.state
    if action == "enter":
        return "it already exists" if st.events else None
    if st.events == 0:
        return "it has no entered event"
    if action == "note":
        return None
    if s == "decided":
        return ("it is decided (a process authority recorded the disposition): only notes may "
                "follow; replay recomputes it without changing it")
    if action == "amend":
        if st.hold_decided:
            return ("a hold decision has been made on it: amendments close at the hold decision; "
                    "add a note, or ask the process authority")
        return None
    if action == "evaluate":
        return None
    if action == "place-hold":
        return "it is already held" if s == "held" else None
    if action == "release-hold":
        return None if s == "held" else f"it is not held (state {s})"
    if action == "decide":
        if s != "held":
            return f"it is not held (state {s}): a supervisor places the hold before a disposition"
        if not st.evaluated_current:
            return "its current case snapshot has not been evaluated: evaluate it first"
        return None
    return None


def check_transition(record_id: str, st: RecordState, action: str, *, actor: str, role: str) -> None:
    """Refuse an action the record's state does not allow (:class:`TransitionRefused`)."""
    why = _refuse_transition(record_id, st, action)
    if why:
        raise TransitionRefused(f"actor '{actor}' (role {role}) cannot {action} record {record_id}: {why}")


def authorize(record_id: str, kinds: Iterable[str], action: str, *, actor: str, role: str) -> str:
    """Role check, then state check; returns the canonical role."""
    role = check_role(actor, role, action)
    check_transition(record_id, state_of(kinds), action, actor=actor, role=role)
    return role


def allowed_actions(role: str, kinds: Iterable[str]) -> list[str]:
    """The writing actions ``role`` may take on a record with these event kinds now (for a UI)."""
    role = normalize_role(role)
    st = state_of(list(kinds))
    out = []
    for action in ("amend", "evaluate", "place-hold", "release-hold", "decide", "note"):
        if role in ACTIONS[action] and _refuse_transition("", st, action) is None:
            out.append(action)
    return out


__all__ = ["ROLES", "ACTIONS", "KIND_ACTION", "EVENT_KINDS", "STATES", "RecordState",
           "TransitionRefused", "normalize_role", "roles_for", "check_role", "state_of",
           "check_transition", "authorize", "allowed_actions"]
