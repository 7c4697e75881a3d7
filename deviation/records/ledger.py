"""Appending one event at the heads of both chains, inside a write transaction: the hashes
under the store's key, and the record's summary row kept in step.

Used by the store's writers, by import, by the process library and by the upgrade that brought
keys; nothing else writes the ``events`` table. Append-only: an event is INSERTed, never changed
or removed (``record_summaries`` is derived and is rewritten here).
"""

from __future__ import annotations

import json
from collections.abc import Mapping
from dataclasses import dataclass

import sqlalchemy as sa

from deviation.errors import StoreError
from deviation.records import summaries
from deviation.records.chains import (
    GENESIS_HASH,
    canonical_json,
    event_hash,
    event_text,
    global_hash,
    mac_text,
    sha256_text,
)
from deviation.records.schema import LIBRARY_ID, events_t, summaries_t


#: ``insert_event(summary=...)`` / ``fold_into_summary(found=...)`` not given: read it.
UNREAD = object()


@dataclass(frozen=True)
class Signer:
    """The store's key as the chains use it.

    ``key`` None: the key was not found (``problem`` says where it was looked for); the store
    can be read but not written. ``from_global_seq``: the first event hashed with the key
    (events before it were written before the store had one).
    """

    key_id: str
    from_global_seq: int
    legacy_head: str
    key: bytes | None = None
    problem: str | None = None

    def require(self, source: str | None = None) -> bytes:
        if self.key is None:
            raise StoreError(f"cannot write: {self.problem}", source=source)
        return self.key


def seal_text(store_id: str, key_id: str, from_global_seq: int, legacy_head: str, created_utc: str) -> str:
    """What the ``store_keys`` row's MAC covers."""
    return canonical_json({"created_utc": created_utc, "from_global_seq": from_global_seq, "key_id": key_id,
                           "legacy_head": legacy_head, "store_id": store_id})


def seal(key: bytes, store_id: str, key_id: str, from_global_seq: int, legacy_head: str, created_utc: str) -> str:
    return mac_text(key, seal_text(store_id, key_id, from_global_seq, legacy_head, created_utc))


# The statements of an append, built once: executed with parameters, SQLAlchemy compiles each
# once per process and the driver prepares it once per connection (the work is done under the
# store's write lock, where every other writer waits).
_RECORD_HEAD = (sa.select(events_t.c.seq, events_t.c.hash)
                .where(events_t.c.record_id == sa.bindparam("rid")).order_by(events_t.c.seq.desc()).limit(1))
_GLOBAL_HEAD = (sa.select(events_t.c.global_seq, events_t.c.global_hash)
                .order_by(events_t.c.global_seq.desc()).limit(1))


def _append_context_query() -> sa.Select:
    head = _GLOBAL_HEAD.subquery()
    payload = sa.case((events_t.c.kind == "disposition", events_t.c.payload), else_=sa.null())
    return (sa.select(events_t.c.seq, events_t.c.kind, events_t.c.hash, payload.label("p"),
                      head.c.global_seq.label("g_seq"), head.c.global_hash.label("g_hash"),
                      *[c.label(f"s_{c.name}") for c in summaries_t.c])
            .select_from(events_t.join(head, sa.true())
                         .outerjoin(summaries_t, summaries_t.c.id == events_t.c.record_id))
            .where(events_t.c.record_id == sa.bindparam("rid")).order_by(events_t.c.seq))


_APPEND_CONTEXT = _append_context_query()
_INSERT_EVENT = events_t.insert()
_INSERT_SUMMARY = summaries_t.insert()
_UPDATE_SUMMARY = summaries_t.update().where(summaries_t.c.id == sa.bindparam("summary_id"))
_SELECT_SUMMARY = sa.select(summaries_t).where(summaries_t.c.id == sa.bindparam("rid"))


def record_head(conn: sa.Connection, record_id: str) -> tuple[int, str]:
    row = conn.execute(_RECORD_HEAD, {"rid": record_id}).first()
    return (row.seq, row.hash) if row else (0, GENESIS_HASH)


def global_head(conn: sa.Connection) -> tuple[int, str]:
    row = conn.execute(_GLOBAL_HEAD).first()
    return (row.global_seq, row.global_hash) if row else (0, GENESIS_HASH)


def append_context(conn: sa.Connection, record_id: str) -> tuple[list, tuple[int, str], dict | None]:
    """What an append to ``record_id`` reads under the write lock, in one query (one round trip
    while every other writer waits): the record's events in order (``seq``, ``kind``, ``hash``
    and, for dispositions only, the payload as ``p``), the store head ``(global_seq,
    global_hash)`` and the record's summary row (None when it has none). No events: ``([],
    store head, None)``."""
    rows = conn.execute(_APPEND_CONTEXT, {"rid": record_id}).all()
    if not rows:
        return [], global_head(conn), None
    first = rows[0]._mapping
    found = ({c.name: first[f"s_{c.name}"] for c in summaries_t.c}
             if first["s_id"] is not None else None)
    return rows, (first["g_seq"], first["g_hash"]), found


def content_sha256(record_id: str, seq: int, kind: str, utc: str, actor: str, role: str, payload_json: str,
                   prev_hash: str) -> str:
    """The unkeyed SHA-256 of an event (what the store-wide link of an imported event covers)."""
    return sha256_text(event_text(record_id, seq, kind, utc, actor, role, payload_json, prev_hash))


def insert_event(conn: sa.Connection, signer: Signer, *, record_id: str, kind: str, utc: str, actor: str,
                 role: str, payload_json: str, payload: dict | None = None, origin: str | None = None,
                 given: tuple[int, str, str] | None = None, event_id: str | None = None,
                 header: dict | None = None, source: str | None = None,
                 head: tuple[int, str] | None = None, store_head: tuple[int, str] | None = None,
                 summary: dict | None | object = UNREAD) -> dict:
    """Insert one event at the heads of both chains and fold it into the record's summary.

    ``given``: (seq, prev_hash, hash) of an imported event, which keeps its own chain; its
    store-wide link then covers its content's SHA-256. ``payload``: the parsed payload if the
    caller has it (else parsed here for the summary). ``head``, ``store_head`` and ``summary``:
    the record's (seq, hash), the store's (global_seq, global_hash) and the record's summary row
    (None: it has none) when the caller read them in this transaction under the write lock
    (:func:`append_context`); each one not given is read here. Returns the row as inserted.
    """
    key = signer.require(source)
    if given is None:
        last_seq, prev = head if head is not None else record_head(conn, record_id)
        seq = last_seq + 1
        h = event_hash(record_id, seq, kind, utc, actor, role, payload_json, prev, key)
        content = None
    else:
        seq, prev, h = given
        content = content_sha256(record_id, seq, kind, utc, actor, role, payload_json, prev)
    gseq, gprev = store_head if store_head is not None else global_head(conn)
    gseq += 1
    gh = global_hash(gseq, record_id, seq, h, origin, gprev, key, content)
    row = dict(global_seq=gseq, record_id=record_id, seq=seq, kind=kind, utc=utc, actor=actor,
               role=role, payload=payload_json, prev_hash=prev, hash=h, origin=origin,
               global_prev_hash=gprev, global_hash=gh, event_id=event_id)
    # Append-only: events are INSERTed, never changed or removed.
    conn.execute(_INSERT_EVENT, row)
    if record_id != LIBRARY_ID:
        fold_into_summary(conn, row, payload if payload is not None else json.loads(payload_json), header=header,
                          found=summary)
    return row


def fold_events(rows) -> dict | None:
    """The summary of one record from its event rows in order (None when it has none)."""
    s = None
    for r in rows:
        s = summaries.fold(s, kind=r["kind"], seq=r["seq"], utc=r["utc"], actor=r["actor"], role=r["role"],
                           payload=_parsed(r["payload"]), origin=r["origin"], global_seq=r["global_seq"])
    return s


def _parsed(text: str) -> dict:
    try:
        p = json.loads(text)
    except (TypeError, ValueError):
        return {}
    return p if isinstance(p, dict) else {}


def write_summary(conn: sa.Connection, s: dict, *, exists: bool) -> None:
    values = summaries.to_row(s)
    if exists:
        conn.execute(_UPDATE_SUMMARY, {**{k: v for k, v in values.items() if k != "id"}, "summary_id": s["id"]})
    else:
        conn.execute(_INSERT_SUMMARY, values)


def fold_into_summary(conn: sa.Connection, row: dict, payload: dict, *, header: dict | None = None,
                      found: Mapping | None | object = UNREAD) -> None:
    """Bring the record's summary row up to date with one more event (same transaction).

    ``found``: the summary row as read in this transaction before the event was inserted (None:
    there is none); read here when not given. A row that is missing or out of step (it has not
    folded exactly the events before this one) is folded again from all the record's events.
    """
    rid = row["record_id"]
    if found is UNREAD:
        found = conn.execute(_SELECT_SUMMARY, {"rid": rid}).mappings().first()
    current = summaries.from_row(found) if found is not None else None
    if row["seq"] == 1 and (header is not None or isinstance(payload.get("record"), dict)):
        s = summaries.fold(None, kind=row["kind"], seq=1, utc=row["utc"], actor=row["actor"], role=row["role"],
                           payload=payload, origin=row["origin"], global_seq=row["global_seq"], header=header)
    elif current is not None and current.get("events") == row["seq"] - 1 \
            and current.get("format") == summaries.SUMMARY_FORMAT:
        s = summaries.fold(current, kind=row["kind"], seq=row["seq"], utc=row["utc"], actor=row["actor"],
                           role=row["role"], payload=payload, origin=row["origin"], global_seq=row["global_seq"])
    else:
        rows = conn.execute(sa.select(events_t).where(events_t.c.record_id == rid)
                            .order_by(events_t.c.seq)).mappings().all()
        s = fold_events(rows)
        if s is None:  # pragma: no cover - the row was just inserted
            return
    write_summary(conn, s, exists=found is not None)


__all__ = ["Signer", "UNREAD", "seal", "seal_text", "record_head", "global_head", "append_context",
           "content_sha256", "insert_event",
           "fold_events", "fold_into_summary", "write_summary"]
