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


class AsDict:
    """``to_dict()``: a dataclass's fields as a dict (nested dataclasses too), for JSON."""

    def to_dict(self) -> dict:
        return asdict(self)


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

    @property
    def imported(self) -> bool:
        return self.origin is not None

    def to_dict(self, *, with_payload: bool = True) -> dict:
        d = asdict(self)
        if not with_payload:
            d.pop("payload")
        return d


@dataclass(frozen=True)
class RecordSummary:
    """A row of ``list_records`` (read from the derived table ``record_summaries``)."""

    id: str
    lot: str
    retort_id: str
    process_id: str
    process_version: str | None
    created_utc: str
    state: str
    events: int
    last_utc: str
    plant: str | None = None
    guidance: str | None = None  # the latest evaluation's guidance disposition
    delivered_F_min: float | None = None
    target_F_min: float | None = None
    held: bool = False  # the lot is on hold now
    decision: str | None = None  # the process authority's decision in force (code)
    decision_words: str | None = None
    decided_by: str | None = None
    decided_utc: str | None = None
    superseded: int = 0  # dispositions superseded by a later one
    imported: bool = False  # some event came from another store (see its origin)

    def __post_init__(self) -> None:  # booleans as booleans, whatever the database returned
        object.__setattr__(self, "held", bool(self.held))
        object.__setattr__(self, "imported", bool(self.imported))

    def to_dict(self) -> dict:
        return {k: getattr(self, k) for k in self.__dataclass_fields__}


@dataclass
class RecordView:
    """A record as it stands now, from its events.

    ``stored_evaluation`` is the latest evaluation as stored (figures, flags, guidance; since
    compact events, its arrays only as a digest). ``evaluation`` is the full evaluation: the
    stored one with the arrays recomputed from the record's snapshot on first use and checked
    against the digest (``arrays_check`` then says how they compare).
    """

    id: str
    lot: str
    retort_id: str
    process_id: str
    process_version: str | None
    created_utc: str
    state: str
    snapshot: dict
    snapshot_seq: int
    stored_evaluation: dict | None  # the latest evaluation JSON as stored
    evaluation_event: dict | None  # its event payload without the evaluation (engine, rules, arrays, ...)
    evaluation_current: bool  # the latest evaluation is of the latest snapshot
    hold: dict | None  # {"held", "placed_by", "placed_utc", "reason", ...} of the latest hold
    disposition: dict | None  # the disposition in force ({"decision", "words", "reason", "by", ...})
    notes: list[dict]
    events: list[Event]
    superseded: list[dict] = field(default_factory=list)  # dispositions superseded, oldest first
    origins: list[str] = field(default_factory=list)  # where imported events came from
    evaluated_snapshot: dict | None = None  # the snapshot the latest evaluation was made of
    arrays_check: dict | None = None  # set when ``evaluation`` recomputed the arrays
    _full: dict | None = field(default=None, repr=False)

    @property
    def evaluation(self) -> dict | None:
        """The latest evaluation with its arrays (recomputed once, checked against the digest)."""
        if self.stored_evaluation is None:
            return None
        if self._full is None:
            from deviation.records.arrays import recompute

            payload = dict(self.evaluation_event or {}, evaluation=self.stored_evaluation)
            self._full, self.arrays_check = recompute(payload, self.evaluated_snapshot or self.snapshot)
        return self._full

    @property
    def head_hash(self) -> str:
        return self.events[-1].hash

    @property
    def imported(self) -> bool:
        return bool(self.origins)

    def to_dict(self, *, event_payloads: bool = False, arrays: bool = False) -> dict:
        """JSON of the record: the evaluation as stored, or with ``arrays`` the full one (and
        ``arrays_check``)."""
        d = {k: getattr(self, k) for k in (
            "id", "lot", "retort_id", "process_id", "process_version", "created_utc", "state",
            "snapshot_seq", "evaluation_current", "hold", "disposition", "superseded", "notes")}
        d["imported"] = self.imported
        d["origins"] = [origin_info(o) for o in self.origins]
        d["head_hash"] = self.head_hash
        d["events"] = [event_summary(e, with_payload=event_payloads) for e in self.events]
        d["evaluation_event"] = self.evaluation_event
        d["evaluation"] = self.evaluation if arrays else self.stored_evaluation
        if arrays:
            d["arrays_check"] = self.arrays_check
        d["snapshot"] = self.snapshot
        return d


@dataclass(frozen=True)
class VerifyResult(AsDict):
    """What ``verify`` found: ``first_broken`` is ``{record_id, seq, kind, global_seq, reason}``.

    ``signatures``: whether the keyed hashes were checked (the key was found) and from which
    store position events are keyed; ``anchors``: the anchor file and how many noted heads were
    checked; ``expected_head``: the ``--expect-head`` check; ``library``: problems of the filed
    process library; ``summaries``: the derived summary table checked (and rebuilt if it differed).
    """

    ok: bool
    checked_events: int
    records: int
    first_broken: dict | None = None
    broken_count: int = 0
    head: dict | None = None  # {"global_seq", "global_hash"}: note it to detect a truncated tail
    problems: list[dict] = field(default_factory=list)  # every problem (the first 100)
    signatures: dict | None = None
    anchors: dict | None = None
    expected_head: dict | None = None
    library: dict | None = None
    summaries: dict | None = None


@dataclass(frozen=True)
class ImportResult(AsDict):
    records_added: int
    events_added: int
    records_unchanged: int
    record_ids: list[str] = field(default_factory=list)


_SMALL_KINDS = ("hold-placed", "hold-released", "disposition", "note", "process-filed", "process-retired")


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
        Ftxt = f"F0 {F:.3g} min" if isinstance(F, (int, float)) and not isinstance(F, bool) else "F0 ?"
        return (f"{Ftxt}, guidance {g.get('disposition', '?')} "
                f"(engine {p.get('engine_version')}, rules {str(p.get('rule_set_sha256'))[:12]})")
    if e.kind == "hold-placed":
        return str(p.get("reason", ""))
    if e.kind == "hold-released":
        cites = f" (citing the disposition, event {p['decision_seq']})" if p.get("decision_seq") else ""
        return f"{p.get('reason', '')}{cites}"
    if e.kind == "disposition":
        res = f"; result: {p['result']}" if p.get("result") else ""
        sup = f" (supersedes event {p['supersedes']})" if p.get("supersedes") else ""
        return f"{roles.decision_words(p)}: {p.get('reason')}{res}{sup}"
    if e.kind == "note":
        return str(p.get("text", ""))
    if e.kind == "process-filed":
        return (f"process {p.get('process_id')} version {p.get('version')} filed, sha256 "
                f"{str(p.get('sha256'))[:12]}…" + (" (filed before the library was chained)" if p.get("migrated") else ""))
    if e.kind == "process-retired":
        return f"process {p.get('process_id')} retired up to version {p.get('up_to_version')}: {p.get('reason')}"
    return ""


def disposition_summary(view: RecordView, *, decision: str, decision_text: str | None, reason: str,
                        result: str | None, supersedes: int | None, actor: str, role: str) -> list[str]:
    """What a disposition will write, in lines of plain text (the confirmation of every face)."""
    from deviation.records.text import one_line

    def num(x) -> str:
        return f"{x:.3f}" if isinstance(x, (int, float)) and not isinstance(x, bool) else "?"

    words = roles.decision_words({"decision": decision, "decision_text": decision_text})
    ev = view.stored_evaluation or {}
    g = ev.get("guidance") or {}
    lines = [f"Disposition of record {view.id}: lot {one_line(view.lot)}, retort {one_line(view.retort_id)}, "
             f"process {one_line(view.process_id)}",
             f"  decision:  {one_line(words)}",
             f"  reason:    {one_line(reason)}"]
    if result:
        lines.append(f"  result:    {one_line(result)}")
    if supersedes:
        old = view.disposition or {}
        lines.append(f"  supersedes event {supersedes}: {one_line(old.get('words'))} by {one_line(old.get('by'))} "
                     f"at {old.get('utc')} ({one_line(old.get('reason'))}); both stay on record")
    if g:
        lines.append(f"  guidance on record: {one_line(g.get('disposition'))}, delivered F0 "
                     f"{num(ev.get('delivered_F_min'))} of {num(ev.get('target_F_min'))} min")
    if decision == "release-after-evaluation":
        lines.append("  the hold is lifted by this disposition")
    lines.append(f"  by {one_line(actor)} ({one_line(role)}); written once, corrected only by a superseding "
                 "disposition")
    return lines


def origin_info(origin: str | None) -> dict | None:
    """An imported event's origin as a dict (``{"import", "utc", "actor", "role", "source_store",
    "signatures"}``); None for an event written here."""
    if origin is None:
        return None
    try:
        d = json.loads(origin)
    except ValueError:
        return {"text": origin}
    return d if isinstance(d, dict) else {"text": origin}


def origin_text(origin: str | None) -> str:
    """An imported event's origin in words ("" for an event written here)."""
    d = origin_info(origin)
    if d is None:
        return ""
    if "text" in d and len(d) == 1:
        return f"imported ({d['text']})"
    sig = {"verified": "signatures verified with the source store's key",
           "not-verified": "signatures not verified (the source store's key was not given)",
           "sha256": "unkeyed SHA-256 hashes, checked"}.get(d.get("signatures"), "signatures not verified")
    return (f"imported {str(d.get('utc', ''))[:10]} from store {d.get('source_store') or '?'} by "
            f"{d.get('actor')} ({d.get('role')}); {sig}")


def _text(payload: dict, key: str, kind: str, *, required: bool = True) -> None:
    value = payload.get(key)
    if value is None and not required:
        return
    if not isinstance(value, str) or not value.strip():
        raise StoreError(f"a '{kind}' event needs a non-empty text '{key}'")


def _seq(payload: dict, key: str, kind: str) -> None:
    value = payload.get(key)
    if value is not None and (not isinstance(value, int) or isinstance(value, bool) or value < 1):
        raise StoreError(f"a '{kind}' event's '{key}' must be an event number (1 or more), found {value!r}")


def check_payload(kind: str, payload: Any, *, legacy: bool = False) -> None:
    """Refuse a payload that does not have what its kind needs.

    ``legacy``: as written before the fixed list of decisions (an import of old records): a
    decision may be one of the words the list accepts as typed (``release``).
    """
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
        arrays = payload.get("arrays")
        if arrays is not None and not (isinstance(arrays, dict) and isinstance(arrays.get("sha256"), str)):
            raise StoreError("an 'evaluated' event's 'arrays' must be the digest of the arrays (with 'sha256')")
        if arrays is not None and ("format" in arrays and (type(arrays["format"]) is not int
                                                          or arrays["format"] not in (1, 2))):
            raise StoreError(f"an 'evaluated' event's arrays digest has format {arrays['format']!r}; "
                             "expected 1 or 2")
        _seq(payload, "snapshot_seq", kind)
    elif kind in ("hold-placed", "hold-released"):
        _text(payload, "reason", kind)
        if kind == "hold-released":
            _seq(payload, "decision_seq", kind)
    elif kind == "disposition":
        _text(payload, "decision", kind)
        _text(payload, "reason", kind)
        code = roles.decision_code(payload["decision"]) if legacy else (
            payload["decision"] if payload["decision"] in roles.DECISIONS else None)
        if code is None:
            raise StoreError(f"decision '{payload['decision']}' is not one of the dispositions: "
                             f"{', '.join(roles.DECISIONS)} (other: give the decision in words)")
        if code == "other":
            _text(payload, "decision_text", kind)
        else:
            _text(payload, "decision_text", kind, required=False)
        _text(payload, "result", kind, required=False)
        _seq(payload, "supersedes", kind)
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
