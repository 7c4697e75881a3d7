"""Roles and the record state machine: pure rules, and the store enforcing them."""

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from deviation.records import roles
from deviation.errors import PermissionDenied
from deviation.records.roles import TransitionRefused, check_role, state_of

SNAPSHOT = {"case": {"deviation": {"lot": "L-1"}}}
EVALUATION = {"engine_version": "0.1.0", "delivered_F_min": 7.0,
              "guidance": {"disposition": "evaluate", "rule_set_sha256": "ab" * 32}}


@pytest.fixture
def store(backend):  # SQLite and PostgreSQL (tests/store/conftest.py)
    s = backend.open("roles")
    yield s
    s.close()


def entered(store):
    return store.create_record(SNAPSHOT, actor="olga", role="operator", lot="L-1", retort_id="R1",
                               process_id="P-1")


# -- roles ---------------------------------------------------------------------------------


@pytest.mark.parametrize("role, action, allowed", [
    ("operator", "enter", True), ("operator", "amend", True), ("operator", "note", True),
    ("operator", "place-hold", False), ("operator", "decide", False),
    ("supervisor", "place-hold", True), ("supervisor", "release-hold", True), ("supervisor", "enter", False),
    ("supervisor", "decide", False),
    ("process-authority", "decide", True), ("process-authority", "place-hold", False),
    ("auditor", "read", True), ("auditor", "replay", True), ("auditor", "verify", True),
    ("auditor", "note", False), ("auditor", "enter", False), ("auditor", "decide", False),
])
def test_role_table(role, action, allowed):
    if allowed:
        assert check_role("x", role, action) == role
    else:
        with pytest.raises(PermissionDenied):
            check_role("x", role, action)


def test_refusal_names_actor_role_action_and_who_may():
    with pytest.raises(PermissionDenied) as info:
        check_role("olga", "operator", "place-hold")
    assert str(info.value) == "actor 'olga' (role operator) may not place-hold: that is for role supervisor"
    with pytest.raises(PermissionDenied, match="may not note: that is for roles operator, supervisor, "
                                               "process-authority"):
        check_role("ann", "auditor", "note")


def test_role_names_are_normalised_and_unknown_ones_listed():
    assert check_role("p", "Process_Authority", "decide") == "process-authority"
    assert check_role("p", "PA", "decide") == "process-authority"
    with pytest.raises(PermissionDenied, match="unknown role 'boss' \\(roles: operator, supervisor, "
                                               "process-authority, auditor\\)"):
        check_role("p", "boss", "decide")
    with pytest.raises(PermissionDenied, match="gave no role"):
        check_role("p", None, "decide")


# -- state machine -----------------------------------------------------------------------------


@pytest.mark.parametrize("kinds, state", [
    (["entered"], "entered"),
    (["entered", "evaluated"], "evaluated"),
    (["entered", "evaluated", "amended"], "entered"),
    (["entered", "evaluated", "hold-placed"], "held"),
    (["entered", "hold-placed", "evaluated"], "held"),
    (["entered", "evaluated", "hold-placed", "hold-released"], "released"),
    (["entered", "evaluated", "hold-placed", "hold-released", "hold-placed"], "held"),
    (["entered", "evaluated", "hold-placed", "disposition", "note"], "decided"),
])
def test_state_of(kinds, state):
    assert state_of(kinds).state == state


def test_allowed_actions_per_role_and_state():
    k = ["entered", "evaluated"]
    assert roles.allowed_actions("operator", k) == ["amend", "evaluate", "note"]
    assert roles.allowed_actions("supervisor", k) == ["evaluate", "place-hold", "note"]
    assert roles.allowed_actions("process-authority", k) == ["evaluate", "note"]  # not held: no decision
    assert roles.allowed_actions("process-authority", k + ["hold-placed"]) == ["evaluate", "decide", "note"]
    # Held and undecided: the supervisor may not release it (no disposition to cite).
    assert roles.allowed_actions("supervisor", k + ["hold-placed"]) == ["evaluate", "note"]
    # A reprocess decision keeps the lot on hold; the supervisor releases it citing the decision.
    reprocess = k + ["hold-placed", ("disposition", {"decision": "reprocess"})]
    assert roles.allowed_actions("supervisor", reprocess) == ["release-hold", "note"]
    assert roles.allowed_actions("process-authority", reprocess) == ["supersede", "note"]
    # Release after evaluation lifts the hold itself: nothing left to release.
    release = k + ["hold-placed", ("disposition", {"decision": "release-after-evaluation"})]
    assert roles.allowed_actions("supervisor", release) == ["note"]
    assert roles.allowed_actions("operator", k + ["hold-placed", ("disposition", {"decision": "destroy"})]) == ["note"]
    assert roles.allowed_actions("auditor", k) == []


def test_a_record_released_before_the_rule_is_read_as_written():
    legacy = ["entered", "evaluated", "hold-placed", "hold-released"]
    assert state_of(legacy).state == "released" and not state_of(legacy).held
    assert roles.allowed_actions("supervisor", legacy) == ["evaluate", "place-hold", "note"]


@pytest.mark.parametrize("typed, code", [("release", "release-after-evaluation"),
                                         ("Release after evaluation", "release-after-evaluation"),
                                         ("REPROCESS", "reprocess"), ("destroy", "destroy"), ("other", "other"),
                                         ("relase", None), ("release it", None), ("", None)])
def test_decisions_are_a_fixed_list(typed, code):
    assert roles.decision_code(typed) == code


ACTIONS = ["amend", "evaluate", "place-hold", "release-hold", "decide", "supersede", "note"]
KIND_OF = {v: k for k, v in roles.KIND_ACTION.items()}


@settings(max_examples=400, deadline=None)
@given(st.lists(st.tuples(st.sampled_from(ACTIONS), st.sampled_from(roles.DECISIONS)), max_size=25))
def test_any_allowed_history_keeps_the_invariants(attempts):
    """Apply only the actions the rules allow; the history then always obeys the invariants."""
    events = [("entered", {})]
    for action, decision in attempts:
        st_ = state_of(events)
        payload = {"decision": decision}
        if action == "supersede":
            action, payload = "decide", {"decision": decision, "supersedes": st_.decision_seq or 1}
        try:
            roles.check_transition("DR-X", st_, action, actor="a", role="r", payload=payload)
        except TransitionRefused:
            continue
        events.append((KIND_OF[action], payload if action == "decide" else {}))
    kinds = [k for k, _ in events]
    first_hold = next((i for i, k in enumerate(kinds) if k in ("hold-placed", "hold-released")), len(kinds))
    assert "amended" not in kinds[first_hold:]  # no amendment after a hold decision
    if "disposition" in kinds:
        d = kinds.index("disposition")
        assert set(kinds[d + 1:]) <= {"note", "hold-released", "disposition"}  # after the decision
        for i in range(d + 1, len(kinds)):
            if kinds[i] == "disposition":  # a later disposition supersedes the one in force
                assert events[i][1]["supersedes"] == max(j + 1 for j in range(i) if kinds[j] == "disposition")
        before = kinds[:d]
        last_hold = max(i for i, k in enumerate(before) if k in ("hold-placed", "hold-released"))
        assert before[last_hold] == "hold-placed"  # decided while held
        last_snapshot = max(i for i, k in enumerate(before) if k in ("entered", "amended"))
        assert "evaluated" in before[last_snapshot:]  # on an evaluation of the current snapshot
    # No lot is released without a disposition: every release follows one.
    for i, k in enumerate(kinds):
        if k == "hold-released":
            assert "disposition" in kinds[:i]
    assert kinds.count("hold-released") <= 1
    for a, b in zip(kinds, kinds[1:]):
        assert not (a == b == "hold-placed")


# -- the store enforces them ------------------------------------------------------------------


def test_store_refuses_out_of_role_writes(store):
    with pytest.raises(PermissionDenied, match="actor 'ann' \\(role auditor\\) may not enter"):
        store.create_record(SNAPSHOT, actor="ann", role="auditor", lot="L", retort_id="R", process_id="P")
    rid = entered(store)
    with pytest.raises(PermissionDenied, match="actor 'olga' \\(role operator\\) may not place-hold: "
                                               "that is for role supervisor"):
        store.place_hold(rid, reason="x", actor="olga", role="operator")
    with pytest.raises(PermissionDenied, match="may not decide: that is for role process-authority"):
        store.decide(rid, decision="release", reason="x", actor="sam", role="supervisor")
    assert store.count_events() == 1  # nothing written by a refused action


def test_store_refuses_writes_the_state_does_not_allow(store):
    rid = entered(store)
    with pytest.raises(TransitionRefused, match="cannot release-hold .*: it is not held"):
        store.release_hold(rid, reason="x", actor="sam", role="supervisor")
    store.place_hold(rid, reason="drop", actor="sam", role="supervisor")
    with pytest.raises(TransitionRefused, match="already held"):
        store.place_hold(rid, reason="drop", actor="sam", role="supervisor")
    with pytest.raises(TransitionRefused, match="amendments close at the hold decision"):
        store.amend(rid, SNAPSHOT, reason="x", actor="olga", role="operator")
    with pytest.raises(TransitionRefused, match="has not been evaluated"):
        store.decide(rid, decision="release", reason="x", actor="pat", role="process-authority")
    with pytest.raises(TransitionRefused, match="the process authority has not decided on it"):
        store.release_hold(rid, reason="need the cage space", actor="sam", role="supervisor")
    store.add_evaluation(rid, EVALUATION, actor="sam", role="supervisor")
    d = store.decide(rid, decision="reprocess", reason="F short", actor="pat", role="process-authority")
    with pytest.raises(TransitionRefused, match="it is decided"):
        store.add_evaluation(rid, EVALUATION, actor="pat", role="process-authority")
    with pytest.raises(TransitionRefused, match="a superseding one"):
        store.decide(rid, decision="destroy", reason="x", actor="pat", role="process-authority")
    with pytest.raises(TransitionRefused, match="cites event 2, but the disposition in force is event"):
        store.release_hold(rid, reason="reprocessed", decision_seq=2, actor="sam", role="supervisor")
    store.note(rid, "reprocessed 2024-05-02", actor="olga", role="operator")
    rel = store.release_hold(rid, reason="reprocessed as filed", actor="sam", role="supervisor")
    assert rel.payload["decision_seq"] == d.seq  # the release cites the disposition
    with pytest.raises(TransitionRefused, match="it is not held"):
        store.release_hold(rid, reason="again", actor="sam", role="supervisor")
    v = store.record(rid)
    assert v.state == "decided" and not v.hold["held"] and v.hold["release_cites"] == d.seq
    assert store.verify().ok


def test_refused_actions_are_exit_code_4():
    assert PermissionDenied.exit_code == 4 and TransitionRefused("x").exit_code == 4
