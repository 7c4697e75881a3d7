"""What the store returns (events, record views and summaries, results) and the payload rules
of each event kind."""

from __future__ import annotations

import json
from dataclasses import asdict, dataclass, field
from typing import Any

from deviation.errors import StoreError
from deviation.records import roles
from deviation.records.chains import new_event_id
from deviation.records.schema import EVENT_ID_MAX


@dataclass(frozen=True)
class Event:
    """One stored event."""

    record_id: str
    seq: int
    kind: str
    utc: str
    actor: str
    role: str
    payload: dict
    prev_hash: str
    hash: str
    global_seq: int | None = None
    global_prev_hash: str | None = None
    global_hash: str | None = None
    origin: str | None = None
    event_id: str | None = None  # the append's idempotency key (not hashed; None for imports)

    def to_dict(self, *, with_payload: bool = True) -> dict:
        d = asdict(self)
        if not with_payload:
            d.pop("payload")
        return d


@dataclass(frozen=True)
class RecordSummary:
    """A row of ``list_records``."""

    id: str
    lot: str
    retort_id: str
    process_id: str
    process_version: str | None
    created_utc: str
    state: str
    events: int
    last_utc: str

    def to_dict(self) -> dict:
        return asdict(self)


@dataclass(frozen=True)
class RecordView:
    """A record as it stands now, from its events."""

    id: str
    lot: str
    retort_id: str
    process_id: str
    process_version: str | None
    created_utc: str
    state: str
    snapshot: dict
    snapshot_seq: int
    evaluation: dict | None  # the latest evaluation JSON
    evaluation_event: dict | None  # its event payload without the evaluation (engine, rules, ...)
    evaluation_current: bool  # the latest evaluation is of the latest snapshot
    hold: dict | None  # {"held", "placed_by", "placed_utc", "reason", ...} of the latest hold
    disposition: dict | None
    notes: list[dict]
    events: list[Event]

    @property
    def head_hash(self) -> str:
        return self.events[-1].hash

    def to_dict(self, *, event_payloads: bool = False) -> dict:
        d = {k: getattr(self, k) for k in (
            "id", "lot", "retort_id", "process_id", "process_version", "created_utc", "state",
            "snapshot_seq", "evaluation_current", "hold", "disposition", "notes")}
        d["head_hash"] = self.head_hash
        d["events"] = [event_summary(e, with_payload=event_payloads) for e in self.events]
        d["evaluation_event"] = self.evaluation_event
        d["evaluation"] = self.evaluation
        d["snapshot"] = self.snapshot
        return d


@dataclass(frozen=True)
class VerifyResult:
    """What ``verify`` found: ``first_broken`` is ``{record_id, seq, kind, global_seq, reason}``."""

    ok: bool
    checked_events: int
    records: int
    first_broken: dict | None = None
    broken_count: int = 0
    head: dict | None = None  # {"global_seq", "global_hash"}: note it to detect a truncated tail

    def to_dict(self) -> dict:
        return asdict(self)


@dataclass(frozen=True)
class ImportResult:
    records_added: int
    events_added: int
    records_unchanged: int
    record_ids: list[str] = field(default_factory=list)

    def to_dict(self) -> dict:
        return asdict(self)


_SMALL_KINDS = ("hold-placed", "hold-released", "disposition", "note")


def event_summary(e: Event, *, with_payload: bool = False) -> dict:
    """An event as JSON without its large payloads (snapshots, evaluations) unless asked."""
    d = e.to_dict(with_payload=with_payload or e.kind in _SMALL_KINDS)
    d["summary"] = describe_event(e)
    return d


def describe_event(e: Event) -> str:
    """One line saying what an event holds."""
    p = e.payload
    if e.kind == "entered":
        rec = p.get("record", {})
        return f"lot {rec.get('lot')} retort {rec.get('retort_id')} process {rec.get('process_id')}"
    if e.kind == "amended":
        return f"new case snapshot: {p.get('reason', '')}"
    if e.kind == "evaluated":
        ev = p.get("evaluation") or {}
        g = ev.get("guidance") or {}
        F = ev.get("delivered_F_min")
        Ftxt = f"F0 {F:.3g} min" if isinstance(F, (int, float)) else "F0 ?"
        return (f"{Ftxt}, guidance {g.get('disposition', '?')} "
                f"(engine {p.get('engine_version')}, rules {str(p.get('rule_set_sha256'))[:12]})")
    if e.kind in ("hold-placed", "hold-released"):
        return p.get("reason", "")
    if e.kind == "disposition":
        res = f"; result: {p['result']}" if p.get("result") else ""
        return f"{p.get('decision')}: {p.get('reason')}{res}"
    if e.kind == "note":
        return p.get("text", "")
    return ""


def _text(payload: dict, key: str, kind: str, *, required: bool = True) -> None:
    value = payload.get(key)
    if value is None and not required:
        return
    if not isinstance(value, str) or not value.strip():
        raise StoreError(f"a '{kind}' event needs a non-empty text '{key}'")


def check_payload(kind: str, payload: Any) -> None:
    """Refuse a payload that does not have what its kind needs."""
    if kind not in roles.EVENT_KINDS:
        raise StoreError(f"unknown event kind '{kind}' (kinds: {', '.join(roles.EVENT_KINDS)})")
    if not isinstance(payload, dict):
        raise StoreError(f"a '{kind}' event payload must be a JSON object, found {type(payload).__name__}")
    if kind in ("entered", "amended"):
        if not isinstance(payload.get("snapshot"), dict):
            raise StoreError(f"a '{kind}' event needs the case 'snapshot' (an object)")
    if kind == "amended":
        _text(payload, "reason", kind)
    elif kind == "evaluated":
        if not isinstance(payload.get("evaluation"), dict):
            raise StoreError("an 'evaluated' event needs the 'evaluation' JSON (an object)")
        _text(payload, "engine_version", kind)
    elif kind in ("hold-placed", "hold-released"):
        _text(payload, "reason", kind)
    elif kind == "disposition":
        _text(payload, "decision", kind)
        _text(payload, "reason", kind)
        _text(payload, "result", kind, required=False)
    elif kind == "note":
        _text(payload, "text", kind)


def event_from_row(row, payload: dict | None = None) -> Event:
    get = row.get if isinstance(row, dict) else row.__getitem__
    return Event(record_id=get("record_id"), seq=get("seq"), kind=get("kind"), utc=get("utc"),
                 actor=get("actor"), role=get("role"),
                 payload=payload if payload is not None else json.loads(get("payload")),
                 prev_hash=get("prev_hash"), hash=get("hash"), global_seq=get("global_seq"),
                 global_prev_hash=get("global_prev_hash"), global_hash=get("global_hash"),
                 origin=get("origin"), event_id=get("event_id"))


def checked_event_id(event_id: str | None) -> str:
    if event_id is None:
        return new_event_id()
    if not isinstance(event_id, str) or not event_id.strip() or len(event_id) > EVENT_ID_MAX:
        raise StoreError(f"an event id must be a non-empty text of at most {EVENT_ID_MAX} characters, "
                         f"found {event_id!r}")
    return event_id
