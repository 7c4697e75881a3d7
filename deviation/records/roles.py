"""Who may do what to a deviation record, and in which state of the record.

Four roles (issue 5): an **operator** enters a deviation, amends it before a hold decision and
writes notes; a **supervisor** places the hold (the lot is set aside for evaluation) and lifts it
once the process authority has decided; a **process authority** records the disposition; an
**auditor** reads, replays and verifies. Everyone may read; re-evaluating a record (new rules,
new engine) is open to the three acting roles.

The state of a record follows from its events alone::

    entered --evaluate--> evaluated --place-hold--> held --decide--> decided
       ^  \\                                          |  ^            |   (hold lifted by a
       amend \\--place-hold---------------------------+  +--supersede-+    release-after-evaluation
                                                                          disposition, or by a
                                                                          supervisor citing it)

- ``amend`` is possible only before any hold decision (no hold placed or released yet) and
  makes the latest evaluation stale (state back to ``entered``);
- ``decide`` needs the lot held and an evaluation of the current case snapshot; the decision is
  one of :data:`DECISIONS` (``other`` with its words in ``decision_text``);
- a held lot is released only by the process authority's disposition (``release-after-
  evaluation`` lifts the hold) or by a supervisor citing the disposition the record holds
  (``decision_seq``; e.g. after a reprocess): 21 CFR 113.89 has the lot set aside until the
  evaluation by a process authority;
- after the disposition only notes follow, the supervisor's release citing it, and a
  **superseding** disposition by a process authority (``supersedes``: the event it corrects, with
  a reason); both stay on record and are shown.

Records written before this rule may hold a release without a disposition (state
``released``); they are read as written.

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


#: A disposition is one of these (21 CFR 113.89: reprocess, destroy, or set aside and release
#: on the process authority's evaluation); ``other`` needs the decision in words.
DECISIONS: tuple[str, ...] = ("release-after-evaluation", "reprocess", "destroy", "other")
DECISION_WORDS = {"release-after-evaluation": "release after evaluation", "reprocess": "reprocess",
                  "destroy": "destroy", "other": "other"}
#: Words accepted for a decision as typed (the store keeps the code).
DECISION_ALIASES = {"release": "release-after-evaluation", "release after evaluation": "release-after-evaluation",
                    "release-after-evaluation": "release-after-evaluation", "reprocess": "reprocess",
                    "destroy": "destroy", "other": "other"}


def decision_code(text: str | None) -> str | None:
    """The decision code of a decision as typed (case and spacing ignored); None if not one."""
    if not isinstance(text, str):
        return None
    key = " ".join(text.strip().lower().replace("_", "-").split())
    return DECISION_ALIASES.get(key) or DECISION_ALIASES.get(key.replace("-", " "))


def decision_words(payload: dict | None) -> str:
    """A disposition in words: the fixed word, or for ``other`` (and records written before the
    list) the words given."""
    p = payload or {}
    code = decision_code(p.get("decision"))
    if code == "other":
        return f"other: {p.get('decision_text') or '?'}"
    if code is None:
        return str(p.get("decision") or "?")
    return DECISION_WORDS[code]


@dataclass(frozen=True)
class RecordState:
    """What the event history of a record says about it now."""

    state: str
    evaluated_current: bool  # an evaluation follows the latest snapshot (entered/amended)
    hold_decided: bool  # a hold has been placed or released at some time
    events: int
    held: bool = False  # the lot is on hold now
    decision_seq: int | None = None  # the disposition in force (its event seq)
    decision: str | None = None  # its decision code (or the words of an old free-text one)
    snapshot_seq: int = 0  # the latest entered/amended event


START = RecordState("entered", False, False, 0)


def advance(st: RecordState, kind: str, payload: dict | None = None, seq: int | None = None) -> RecordState:
    """The state after one more event (``payload`` and ``seq`` matter for dispositions)."""
    n = st.events + 1
    seq = n if seq is None else seq
    state, current, hold_decided, held = st.state, st.evaluated_current, st.hold_decided, st.held
    decision_seq, decision, snap = st.decision_seq, st.decision, st.snapshot_seq
    if kind in ("entered", "amended"):
        current, snap = False, seq
        if state in ("entered", "evaluated"):
            state = "entered"
    elif kind == "evaluated":
        current = True
        if state == "entered":
            state = "evaluated"
    elif kind == "hold-placed":
        state, hold_decided, held = "held", True, True
    elif kind == "hold-released":
        hold_decided, held = True, False
        if decision_seq is None:  # written before the rule: released without a decision
            state = "released"
    elif kind == "disposition":
        p = payload or {}
        state, decision_seq = "decided", seq
        decision = decision_code(p.get("decision")) or p.get("decision")
        if decision == "release-after-evaluation":
            held = False
    return RecordState(state, current, hold_decided, n, held, decision_seq, decision, snap)


def state_of(items: Iterable) -> RecordState:
    """Replay a record's events (in order) into its state.

    ``items``: event kinds, ``(kind, payload)`` pairs, or objects with ``kind``, ``payload`` and
    ``seq`` (events); kinds alone do not tell whether a disposition released the lot.
    """
    st = START
    for item in items:
        if isinstance(item, str):
            st = advance(st, item)
        elif isinstance(item, tuple):
            st = advance(st, item[0], item[1] if len(item) > 1 else None)
        else:
            st = advance(st, item.kind, getattr(item, "payload", None), getattr(item, "seq", None))
    return st


def _refuse_transition(record_id: str, st: RecordState, action: str, payload: dict | None = None) -> str | None:
    """Why ``action`` (with this payload) is impossible in state ``st`` (None when it is possible)."""
    s = st.state
    p = payload or {}
    if action == "enter":
        return "it already exists" if st.events else None
    if st.events == 0:
        return "it has no entered event"
    if action == "note":
        return None
    if action == "release-hold":
        if not st.held:
            return f"it is not held (state {s})"
        if st.decision_seq is None:
            return ("the process authority has not decided on it: a held lot is released only by "
                    "the process authority's disposition (deviation record decide), or by a "
                    "supervisor citing that disposition once it is recorded")
        cited = p.get("decision_seq")
        if cited is not None and cited != st.decision_seq:
            return (f"the release cites event {cited}, but the disposition in force is event "
                    f"{st.decision_seq}")
        return None
    if action == "decide" and s == "decided":
        asked = p.get("supersedes")
        if asked is None:
            return (f"it is decided (event {st.decision_seq}): a process authority corrects a "
                    "disposition only by a superseding one, naming the event it supersedes and "
                    "why (--supersedes)")
        if asked != st.decision_seq:
            return (f"the disposition in force is event {st.decision_seq}, not {asked}: a "
                    "superseding disposition names the one in force")
        return None
    if s == "decided":
        return ("it is decided (a process authority recorded the disposition): only notes, the "
                "release of the hold citing the disposition, and a superseding disposition may "
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
    if action == "decide":
        if p.get("supersedes") is not None:
            return "it has no disposition to supersede"
        if s != "held":
            return f"it is not held (state {s}): a supervisor places the hold before a disposition"
        if not st.evaluated_current:
            return "its current case snapshot has not been evaluated: evaluate it first"
        return None
    return None


def check_transition(record_id: str, st: RecordState, action: str, *, actor: str, role: str,
                     payload: dict | None = None) -> None:
    """Refuse an action the record's state does not allow (:class:`TransitionRefused`)."""
    why = _refuse_transition(record_id, st, action, payload)
    if why:
        raise TransitionRefused(f"actor '{actor}' (role {role}) cannot {action} record {record_id}: {why}")


def authorize(record_id: str, kinds: Iterable, action: str, *, actor: str, role: str,
              payload: dict | None = None) -> str:
    """Role check, then state check; returns the canonical role."""
    role = check_role(actor, role, action)
    check_transition(record_id, state_of(kinds), action, actor=actor, role=role, payload=payload)
    return role


def allowed_actions(role: str, kinds: Iterable) -> list[str]:
    """The writing actions ``role`` may take on a record with these events now (for a UI).

    ``supersede`` stands for a superseding disposition (``decide`` on a decided record)."""
    role = normalize_role(role)
    st = state_of(list(kinds))
    out = []
    for action in ("amend", "evaluate", "place-hold", "release-hold", "decide", "note"):
        if role not in ACTIONS[action]:
            continue
        if action == "decide" and st.state == "decided":
            if _refuse_transition("", st, action, {"supersedes": st.decision_seq}) is None:
                out.append("supersede")
        elif _refuse_transition("", st, action) is None:
            out.append(action)
    return out


__all__ = ["ROLES", "ACTIONS", "KIND_ACTION", "EVENT_KINDS", "STATES", "DECISIONS", "DECISION_WORDS",
           "RecordState", "TransitionRefused", "normalize_role", "roles_for", "check_role", "advance",
           "state_of", "check_transition", "authorize", "allowed_actions", "decision_code",
           "decision_words"]
