"""Record summaries: what the holds board, ``record list`` and the deviation log show of a
record (state, hold, the disposition in force and the latest evaluation's figures), folded from
its events one at a time.

The same fold serves the derived table ``record_summaries`` (updated in the transaction of each
append, so it never disagrees with the events it follows) and its check: ``verify`` folds every
record again from its events and compares. The table is derived: rebuilding it changes no record.
"""

from __future__ import annotations

import json
from typing import Any

from deviation.records import roles

#: Bumped when the summary's content changes; ``verify`` rebuilds rows of an older format.
SUMMARY_FORMAT = 1

COLUMNS = ("id", "lot", "retort_id", "process_id", "process_version", "created_utc", "plant", "state",
           "events", "last_utc", "last_global_seq", "guidance", "delivered_F_min", "target_F_min", "held",
           "decision", "decision_words", "decided_by", "decided_utc", "superseded", "imported", "format")


def _plant(snapshot: Any) -> str | None:
    try:
        plant = snapshot["case"]["deviation"].get("plant")
    except (KeyError, TypeError, AttributeError):
        return None
    return plant if isinstance(plant, str) and plant.strip() else None


def _num(x: Any) -> float | None:
    return float(x) if isinstance(x, (int, float)) and not isinstance(x, bool) else None


def start(header: dict) -> dict:
    """The summary of a record before its first event is folded in."""
    return {"id": header["id"], "lot": header["lot"], "retort_id": header["retort_id"],
            "process_id": header["process_id"], "process_version": header.get("process_version"),
            "created_utc": header["created_utc"], "plant": None, "state": "entered", "events": 0,
            "last_utc": header["created_utc"], "last_global_seq": 0, "guidance": None,
            "delivered_F_min": None, "target_F_min": None, "held": False, "decision": None,
            "decision_words": None, "decided_by": None, "decided_utc": None, "superseded": 0,
            "imported": False, "format": SUMMARY_FORMAT,
            "rs": {}, "flags": [], "guidance_summary": None, "evaluated_utc": None,
            "evaluation_current": False, "hold": None, "disposition": None, "superseded_dispositions": [],
            "notes": 0, "origins": []}


def _record_state(s: dict) -> roles.RecordState:
    rs = s.get("rs") or {}
    return roles.RecordState(**rs) if rs else roles.START


def fold(s: dict | None, *, kind: str, seq: int, utc: str, actor: str, role: str, payload: dict,
         origin: str | None = None, global_seq: int = 0, header: dict | None = None) -> dict:
    """The summary after one more event (``s`` None: the record's first event, whose header is
    ``header`` or the ``record`` of an entered payload)."""
    if s is None:
        s = start(header or payload.get("record") or {})
    else:
        s = dict(s)
    p = payload if isinstance(payload, dict) else {}
    st = roles.advance(_record_state(s), kind, p, seq)
    s["rs"] = {k: getattr(st, k) for k in roles.RecordState.__dataclass_fields__}
    s.update(state=st.state, events=st.events, last_utc=utc, last_global_seq=global_seq, held=st.held)
    if origin is not None:
        s["imported"] = True
        if origin not in s["origins"]:
            s["origins"] = [*s["origins"], origin]
    if kind in ("entered", "amended"):
        s["plant"] = _plant(p.get("snapshot"))
        s["evaluation_current"] = False
    elif kind == "evaluated":
        ev = p.get("evaluation") if isinstance(p.get("evaluation"), dict) else {}
        g = ev.get("guidance") if isinstance(ev.get("guidance"), dict) else {}
        s.update(guidance=g.get("disposition"), guidance_summary=g.get("summary"),
                 delivered_F_min=_num(ev.get("delivered_F_min")), target_F_min=_num(ev.get("target_F_min")),
                 flags=[{"code": f.get("code"), "message": f.get("message")}
                        for f in ev.get("flags", []) if isinstance(f, dict)],
                 evaluated_utc=utc, evaluation_current=st.evaluated_current)
    elif kind == "hold-placed":
        s["hold"] = {"held": True, "placed_by": actor, "placed_utc": utc, "reason": p.get("reason"), "seq": seq}
    elif kind == "hold-released":
        s["hold"] = dict(s["hold"] or {}, held=False, released_by=actor, released_role=role, released_utc=utc,
                         release_reason=p.get("reason"), release_cites=p.get("decision_seq"), seq=seq)
    elif kind == "disposition":
        if s["disposition"] is not None:
            s["superseded_dispositions"] = [*s["superseded_dispositions"], s["disposition"]]
            s["superseded"] = len(s["superseded_dispositions"])
        d = {k: p.get(k) for k in ("decision", "decision_text", "reason", "result", "supersedes")
             if p.get(k) is not None}
        d.update(by=actor, role=role, utc=utc, seq=seq, words=roles.decision_words(p))
        s["disposition"] = d
        s.update(decision=st.decision, decision_words=d["words"], decided_by=actor, decided_utc=utc)
        if not st.held and s["hold"] is not None and s["hold"].get("held"):
            s["hold"] = dict(s["hold"], held=False, released_by=actor, released_role=role, released_utc=utc,
                             release_reason=f"disposition: {d['words']}", release_cites=seq, seq=seq)
    elif kind == "note":
        s["notes"] += 1
    return s


def to_row(s: dict) -> dict:
    """The table row of a summary (the columns, and the rest as JSON in ``detail``)."""
    row = {k: s[k] for k in COLUMNS}
    row["detail"] = json.dumps({k: v for k, v in s.items() if k not in COLUMNS}, sort_keys=True,
                               separators=(",", ":"), ensure_ascii=False)
    return row


def from_row(row) -> dict:
    get = row.get if isinstance(row, dict) else row.__getitem__
    s = {k: get(k) for k in COLUMNS}
    s["held"] = bool(s["held"])
    s["imported"] = bool(s["imported"])
    s.update(json.loads(get("detail")))
    return s


def is_open(s: dict) -> bool:
    """Open: the process authority has not decided (no disposition in force)."""
    return s.get("disposition") is None


__all__ = ["SUMMARY_FORMAT", "COLUMNS", "start", "fold", "to_row", "from_row", "is_open"]
