"""The record store: deviation records as append-only, hash-chained event histories.

One code path on SQLAlchemy Core runs on the embedded default (an SQLite file in WAL mode in the
user data directory) and on a PostgreSQL server given by URL. The tool creates and migrates its
own schema (table ``schema_version``; an older store is upgraded in place, never dropped).

Integrity
---------
Every event carries the SHA-256 of a canonical JSON form (keys sorted, separators ``,`` and
``:``, UTF-8 as is, no NaN) of ``{record_id, seq, kind, utc, actor, role, payload, prev_hash}``
where ``prev_hash`` is the hash of the record's previous event (64 zeros for the first): a chain
per record. A second chain runs over the whole store in ``global_seq`` order, over
``{global_seq, record_id, seq, hash, origin, global_prev_hash}``. :meth:`Store.verify` recomputes
both and names the first event that does not hold. A chain proves that nothing was changed after
the fact *relative to its head*; dropping the newest events of the whole store leaves a shorter
valid chain, so an auditor notes the head (``verify`` reports it) and compares it later.

Nothing in the ``events`` or ``records`` tables is ever UPDATEd or DELETEd: an amendment is a new
event (a test greps this file to keep it so). Drafts (the TUI's unsaved entry) live in their own
mutable table and are not records.

Concurrency: on SQLite every write runs in ``BEGIN IMMEDIATE`` (writers queue on the file lock,
with a busy timeout); on PostgreSQL (READ COMMITTED) a write first takes a transaction-scoped
advisory lock, so the chain heads it reads afterwards are current and no two writers link to the
same head (a lock rather than ``SELECT ... FOR UPDATE`` so a writer's database role needs no
UPDATE privilege). A lock wait is bounded (``lock_timeout``); a unique-key, serialisation or
deadlock conflict is retried with a bounded backoff.

Lost connections (PostgreSQL): a write whose connection fails before its COMMIT was sent is
retried (nothing of it was stored) until the server answers again or the reconnect window
(``DEVIATION_DB_RECONNECT_S``, 30 s) runs out. When the connection fails *during* COMMIT the
outcome is unknown; every appended event therefore carries a client-made ``event_id`` (unique
in the store; outside the hashes), and the retry first looks it up, so an append that did
commit is recognised, returned and never written twice. When the window runs out the caller
gets :class:`StoreUnavailable` saying whether anything may have been stored; a caller that
retries later with the same ``event_id`` is recognised the same way.
"""

from __future__ import annotations

import json
import os
from datetime import date, datetime
from typing import Iterator, Sequence

import sqlalchemy as sa

from deviation.errors import DeviationError, StoreError
from deviation.records import bundles, roles
from deviation.records.backends import Database, check_columns, created_bound, url_for
from deviation.records.chains import (
    GENESIS_HASH,
    canonical_json,
    event_hash,
    global_hash,
    header_mismatch,
    new_record_id,
    utc_now,
)
from deviation.records.events import (
    Event,
    ImportResult,
    RecordSummary,
    RecordView,
    VerifyResult,
    check_payload,
    checked_event_id,
    event_from_row,
)
from deviation.records.schema import drafts_t, events_t, records_t

# ---------------------------------------------------------------------------------------------
# Canonical JSON and hashes


# ---------------------------------------------------------------------------------------------
# Schema. When a table changes, freeze its old definition inside the migration that made it
# and add a migration; never edit a migration that has shipped.


# ---------------------------------------------------------------------------------------------
# Views


# ---------------------------------------------------------------------------------------------
# Payload rules per event kind


# ---------------------------------------------------------------------------------------------
# Opening


def open_store(url_or_path: str | os.PathLike | None = None, *,
               reconnect_s: float | None = None) -> "Store":
    """Open (creating or upgrading) a record store.

    ``None`` uses ``DEVIATION_DB``, else ``deviation.db`` in the user data directory; a plain
    path is an SQLite file; anything with ``://`` is a SQLAlchemy URL
    (``postgresql+psycopg://user@host/db``; ``postgresql://`` means the same).
    ``reconnect_s`` [s]: how long a write keeps retrying a lost server (default
    ``DEVIATION_DB_RECONNECT_S`` or 30 s).
    """
    url, path = url_for(url_or_path)
    return Store(url, path=path, reconnect_s=reconnect_s)


class Store(Database):
    """A deviation record store (see the module docstring)."""

    # -- writing -----------------------------------------------------------------------------

    @staticmethod
    def _record_head(conn: sa.Connection, record_id: str) -> tuple[int, str]:
        row = conn.execute(
            sa.select(events_t.c.seq, events_t.c.hash).where(events_t.c.record_id == record_id)
            .order_by(events_t.c.seq.desc()).limit(1)).first()
        return (row.seq, row.hash) if row else (0, GENESIS_HASH)

    @staticmethod
    def _global_head(conn: sa.Connection) -> tuple[int, str]:
        row = conn.execute(sa.select(events_t.c.global_seq, events_t.c.global_hash)
                           .order_by(events_t.c.global_seq.desc()).limit(1)).first()
        return (row.global_seq, row.global_hash) if row else (0, GENESIS_HASH)

    @staticmethod
    def _event_by_id(conn: sa.Connection, event_id: str):
        return conn.execute(sa.select(events_t).where(events_t.c.event_id == event_id)).mappings().first()

    def _insert_event(self, conn: sa.Connection, *, record_id: str, kind: str, utc: str, actor: str,
                      role: str, payload_json: str, origin: str | None = None,
                      given: tuple[int, str, str] | None = None, event_id: str | None = None) -> dict:
        """Insert one event at the heads of both chains (``given``: seq, prev_hash, hash of an
        imported event, which keeps its own chain)."""
        check_columns(events_t, {"actor": actor, "role": role, "kind": kind, "utc": utc},
                       source=self.name)
        if given is None:
            last_seq, prev = self._record_head(conn, record_id)
            seq = last_seq + 1
            h = event_hash(record_id, seq, kind, utc, actor, role, payload_json, prev)
        else:
            seq, prev, h = given
        gseq, gprev = self._global_head(conn)
        gseq += 1
        gh = global_hash(gseq, record_id, seq, h, origin, gprev)
        row = dict(global_seq=gseq, record_id=record_id, seq=seq, kind=kind, utc=utc, actor=actor,
                   role=role, payload=payload_json, prev_hash=prev, hash=h, origin=origin,
                   global_prev_hash=gprev, global_hash=gh, event_id=event_id)
        # Append-only: events are INSERTed, never changed or removed.
        conn.execute(events_t.insert().values(**row))
        return row

    def create_record(self, snapshot: dict, *, actor: str, role: str, lot: str, retort_id: str,
                      process_id: str, process_version: str | None = None,
                      event_id: str | None = None) -> str:
        """Create a record with its ``entered`` event (the full case snapshot); returns its id.

        ``event_id``: the idempotency key of the ``entered`` event (made here when not given).
        Called again with the same key after an unknown outcome, it returns the record that was
        created instead of creating a second one.
        """
        role = roles.check_role(actor, role, "enter")
        for name, value in (("lot", lot), ("retort_id", retort_id), ("process_id", process_id)):
            if not isinstance(value, str) or not value.strip():
                raise StoreError(f"a record needs a non-empty {name}")
        if not isinstance(snapshot, dict):
            raise StoreError("the case snapshot must be a JSON object")
        check_columns(records_t, {"lot": lot, "retort_id": retort_id, "process_id": process_id,
                                   "process_version": process_version}, source=self.name)
        check_first = event_id is not None
        eid = checked_event_id(event_id)
        # Made once, outside the transaction: a retry writes the same record, not a new one.
        created = {"id": new_record_id()}
        # The snapshot (log contents and all) is serialised before the transaction; the payload
        # text is exactly canonical_json({"record": header, "snapshot": snapshot}).
        snapshot_json = canonical_json(snapshot)

        def write(conn: sa.Connection) -> str:
            nonlocal check_first
            if check_first:
                done = self._event_by_id(conn, eid)
                if done is not None:
                    if done["kind"] != "entered":
                        raise StoreError(f"event id {eid} is already used by event {done['seq']} "
                                         f"({done['kind']}) of record {done['record_id']}", source=self.name)
                    return done["record_id"]
            check_first = True
            rid = created["id"]
            if conn.execute(sa.select(records_t.c.id).where(records_t.c.id == rid)).first() is not None:
                rid = created["id"] = new_record_id()  # 60 random bits collided: draw again
            when = utc_now()
            header = {"id": rid, "lot": lot, "retort_id": retort_id, "process_id": process_id,
                      "process_version": process_version, "created_utc": when}
            payload_json = '{"record":' + canonical_json(header) + ',"snapshot":' + snapshot_json + "}"
            conn.execute(records_t.insert().values(**header))
            self._insert_event(conn, record_id=rid, kind="entered", utc=when, actor=actor,
                               role=role, payload_json=payload_json, event_id=eid)
            return rid

        return self._retrying(write, idempotent=True)

    def append_event(self, record_id: str, kind: str, payload: dict, *, actor: str, role: str,
                     event_id: str | None = None) -> Event:
        """Append one event, after the role and record-state rules of :mod:`deviation.records.roles`.

        ``event_id``: the append's idempotency key (made here when not given). If an event with
        this key is already stored (a retry of an append that did commit), that event is
        returned and nothing is written.
        """
        if kind == "entered":
            raise StoreError("an 'entered' event starts a record: use create_record")
        check_payload(kind, payload)
        action = roles.KIND_ACTION[kind]
        role = roles.check_role(actor, role, action)
        payload = dict(payload)
        check_first = event_id is not None
        eid = checked_event_id(event_id)
        # Serialised before the transaction (a large evaluation takes a while), unless the
        # snapshot it refers to is only known inside it.
        ready_json = (canonical_json(payload) if kind != "evaluated" or payload.get("snapshot_seq") is not None
                      else None)

        def write(conn: sa.Connection) -> Event:
            nonlocal check_first
            if check_first:
                # Before the state rules: a committed "decide" must be recognised, not refused
                # because the record is decided now.
                done = self._event_by_id(conn, eid)
                if done is not None:
                    if (done["record_id"], done["kind"]) != (record_id, kind):
                        raise StoreError(f"event id {eid} is already used by event {done['seq']} "
                                         f"({done['kind']}) of record {done['record_id']}", source=self.name)
                    return event_from_row(done)
            check_first = True  # any retry looks first
            rows = conn.execute(sa.select(events_t.c.seq, events_t.c.kind)
                                .where(events_t.c.record_id == record_id)
                                .order_by(events_t.c.seq)).all()
            if not rows:
                raise StoreError(f"no record {record_id}", source=self.name)
            roles.check_transition(record_id, roles.state_of(r.kind for r in rows), action,
                                   actor=actor, role=role)
            if kind == "evaluated":
                latest = max(r.seq for r in rows if r.kind in ("entered", "amended"))
                asked = payload.get("snapshot_seq")
                if asked is None:
                    payload["snapshot_seq"] = latest
                elif asked != latest:
                    raise roles.TransitionRefused(
                        f"actor '{actor}' (role {role}) cannot evaluate record {record_id}: the "
                        f"evaluation is of snapshot event {asked} but the record was amended since "
                        f"(current snapshot event {latest}); evaluate again")
            row = self._insert_event(conn, record_id=record_id, kind=kind, utc=utc_now(),
                                     actor=actor, role=role,
                                     payload_json=ready_json if ready_json is not None else canonical_json(payload),
                                     event_id=eid)
            return event_from_row(row, payload)

        return self._retrying(write, idempotent=True)

    # Convenience writers (the CLI and TUI use these).

    def amend(self, record_id: str, snapshot: dict, *, reason: str, actor: str, role: str,
              event_id: str | None = None) -> Event:
        return self.append_event(record_id, "amended", {"snapshot": snapshot, "reason": reason},
                                 actor=actor, role=role, event_id=event_id)

    def add_evaluation(self, record_id: str, evaluation: dict, *, actor: str, role: str,
                       snapshot_seq: int | None = None, options: dict | None = None,
                       event_id: str | None = None) -> Event:
        """Append ``evaluated`` with the engine version and rule-set hash read from the evaluation."""
        guidance = evaluation.get("guidance") or {}
        payload = {"engine_version": evaluation.get("engine_version"),
                   "rule_set_sha256": guidance.get("rule_set_sha256"),
                   "options": options or {"conservative": bool(evaluation.get("conservative", False))},
                   "evaluation": evaluation}
        if snapshot_seq is not None:
            payload["snapshot_seq"] = snapshot_seq
        return self.append_event(record_id, "evaluated", payload, actor=actor, role=role, event_id=event_id)

    def place_hold(self, record_id: str, *, reason: str, actor: str, role: str,
                   event_id: str | None = None) -> Event:
        return self.append_event(record_id, "hold-placed", {"reason": reason}, actor=actor, role=role,
                                 event_id=event_id)

    def release_hold(self, record_id: str, *, reason: str, actor: str, role: str,
                     event_id: str | None = None) -> Event:
        return self.append_event(record_id, "hold-released", {"reason": reason}, actor=actor, role=role,
                                 event_id=event_id)

    def decide(self, record_id: str, *, decision: str, reason: str, actor: str, role: str,
               result: str | None = None, event_id: str | None = None) -> Event:
        payload = {"decision": decision, "reason": reason}
        if result:
            payload["result"] = result
        return self.append_event(record_id, "disposition", payload, actor=actor, role=role,
                                 event_id=event_id)

    def note(self, record_id: str, text: str, *, actor: str, role: str,
             event_id: str | None = None) -> Event:
        return self.append_event(record_id, "note", {"text": text}, actor=actor, role=role,
                                 event_id=event_id)

    # -- reading -----------------------------------------------------------------------------

    def events(self, record_id: str) -> list[Event]:
        """Every event of a record in order (StoreError if there is no such record)."""
        with self._read() as conn:
            rows = conn.execute(sa.select(events_t).where(events_t.c.record_id == record_id)
                                .order_by(events_t.c.seq)).mappings().all()
        if not rows:
            raise StoreError(f"no record {record_id}", source=self.name)
        return [event_from_row(r) for r in rows]

    def _bytewise(self, col: sa.ColumnElement) -> sa.ColumnElement:
        """A text column compared code point by code point on every backend (SQLite's own rule;
        a PostgreSQL database's default collation may follow a language's rules)."""
        return col.collate("C") if self.dialect == "postgresql" else col

    def record_ids(self) -> list[str]:
        with self._read() as conn:
            return list(conn.execute(sa.select(records_t.c.id).order_by(
                self._bytewise(records_t.c.created_utc), self._bytewise(records_t.c.id))).scalars())

    def record(self, record_id: str) -> RecordView:
        """The record as it stands now (state, latest snapshot and evaluation, hold, disposition)."""
        evs = self.events(record_id)
        with self._read() as conn:
            head = conn.execute(sa.select(records_t).where(records_t.c.id == record_id)).mappings().one()
        st = roles.state_of(e.kind for e in evs)
        snapshot, snapshot_seq = {}, 0
        evaluation = evaluation_event = None
        eval_snapshot_seq = None
        hold = disposition = None
        notes = []
        for e in evs:
            p = e.payload
            if e.kind in ("entered", "amended"):
                snapshot, snapshot_seq = p.get("snapshot", {}), e.seq
            elif e.kind == "evaluated":
                evaluation = p.get("evaluation")
                evaluation_event = {k: v for k, v in p.items() if k != "evaluation"}
                evaluation_event.update(seq=e.seq, utc=e.utc, actor=e.actor, role=e.role)
                eval_snapshot_seq = p.get("snapshot_seq")
            elif e.kind == "hold-placed":
                hold = {"held": True, "placed_by": e.actor, "placed_utc": e.utc, "reason": p.get("reason"),
                        "seq": e.seq}
            elif e.kind == "hold-released":
                hold = dict(hold or {}, held=False, released_by=e.actor, released_utc=e.utc,
                            release_reason=p.get("reason"), seq=e.seq)
            elif e.kind == "disposition":
                disposition = dict(p, by=e.actor, utc=e.utc, seq=e.seq)
            elif e.kind == "note":
                notes.append({"text": p.get("text"), "by": e.actor, "role": e.role, "utc": e.utc, "seq": e.seq})
        return RecordView(
            id=record_id, lot=head["lot"], retort_id=head["retort_id"], process_id=head["process_id"],
            process_version=head["process_version"], created_utc=head["created_utc"], state=st.state,
            snapshot=snapshot, snapshot_seq=snapshot_seq, evaluation=evaluation,
            evaluation_event=evaluation_event,
            evaluation_current=evaluation is not None and eval_snapshot_seq == snapshot_seq,
            hold=hold, disposition=disposition, notes=notes, events=evs)

    def list_records(self, state: str | None = None, lot: str | None = None, retort: str | None = None,
                     since: str | date | datetime | None = None,
                     until: str | date | datetime | None = None) -> list[RecordSummary]:
        """Records (oldest first) filtered by state, lot, retort and creation time (UTC).

        ``since``/``until`` take a date (``2024-05-01``, the whole day counts) or an ISO time.
        """
        if state is not None and state not in roles.STATES:
            raise DeviationError(f"unknown state '{state}' (states: {', '.join(roles.STATES)})",
                                 source="--state")
        q = sa.select(records_t)
        if lot is not None:
            q = q.where(records_t.c.lot == lot)
        if retort is not None:
            q = q.where(records_t.c.retort_id == retort)
        if since is not None:
            q = q.where(self._bytewise(records_t.c.created_utc) >= created_bound(since, "since"))
        if until is not None:
            q = q.where(self._bytewise(records_t.c.created_utc) < created_bound(until, "until"))
        q = q.order_by(self._bytewise(records_t.c.created_utc), self._bytewise(records_t.c.id))
        with self._read() as conn:
            heads = conn.execute(q).mappings().all()
            kinds: dict[str, list[str]] = {h["id"]: [] for h in heads}
            last: dict[str, str] = {}
            if heads:
                ids = q.with_only_columns(records_t.c.id).order_by(None)
                evq = (sa.select(events_t.c.record_id, events_t.c.kind, events_t.c.utc)
                       .where(events_t.c.record_id.in_(ids))
                       .order_by(events_t.c.record_id, events_t.c.seq))
                for r in conn.execute(evq):
                    kinds[r.record_id].append(r.kind)
                    last[r.record_id] = r.utc
        out = []
        for h in heads:
            st = roles.state_of(kinds[h["id"]])
            if state is not None and st.state != state:
                continue
            out.append(RecordSummary(id=h["id"], lot=h["lot"], retort_id=h["retort_id"],
                                     process_id=h["process_id"], process_version=h["process_version"],
                                     created_utc=h["created_utc"], state=st.state, events=st.events,
                                     last_utc=last.get(h["id"], h["created_utc"])))
        return out

    def iter_replay_items(self, record_ids: Sequence[str] | None = None) -> Iterator[dict]:
        """For each record: its id, snapshot payload texts by seq and latest evaluated payload text.

        One streaming pass in (record, seq) order; payloads stay as JSON text so the parsing can
        happen in the replay workers.
        """
        wanted = set(record_ids) if record_ids is not None else None
        q = (sa.select(events_t.c.record_id, events_t.c.seq, events_t.c.kind, events_t.c.payload)
             .where(events_t.c.kind.in_(("entered", "amended", "evaluated")))
             .order_by(events_t.c.record_id, events_t.c.seq))
        if record_ids is not None:
            q = q.where(events_t.c.record_id.in_(list(wanted)))
        current: dict | None = None
        with self._guard(), self.engine.connect() as conn:
            with conn.begin():
                for r in conn.execution_options(yield_per=200).execute(q):
                    if current is None or current["id"] != r.record_id:
                        if current is not None:
                            yield current
                        current = {"id": r.record_id, "snapshots": {}, "evaluated": None}
                    if r.kind == "evaluated":
                        current["evaluated"] = r.payload
                    else:
                        current["snapshots"][r.seq] = r.payload
        if current is not None:
            yield current

    def count_records(self) -> int:
        with self._read() as conn:
            return conn.execute(sa.select(sa.func.count()).select_from(records_t)).scalar_one()

    def count_events(self) -> int:
        with self._read() as conn:
            return conn.execute(sa.select(sa.func.count()).select_from(events_t)).scalar_one()

    # -- verify ------------------------------------------------------------------------------

    def verify(self) -> VerifyResult:
        """Recompute every hash of both chains; name the first event (store order) that breaks."""
        first: dict | None = None
        broken = 0
        checked = 0

        def fail(row, reason: str) -> None:
            nonlocal first, broken
            broken += 1
            if first is None:
                first = {"record_id": row.record_id, "seq": row.seq, "kind": row.kind,
                         "global_seq": row.global_seq, "reason": reason}

        with self._guard(), self.engine.connect() as conn:
            with conn.begin():
                heads = {r["id"]: r for r in conn.execute(sa.select(records_t)).mappings()}
                per: dict[str, tuple[int, str]] = {}
                gseq, gprev = 0, GENESIS_HASH
                q = sa.select(events_t).order_by(events_t.c.global_seq)
                for row in conn.execution_options(yield_per=500).execute(q):
                    checked += 1
                    # Store-wide chain.
                    if row.global_seq != gseq + 1:
                        fail(row, f"store-wide sequence jumps from {gseq} to {row.global_seq}: "
                                  "events are missing")
                    if row.global_prev_hash != gprev:
                        fail(row, "global_prev_hash does not match the previous event's global_hash")
                    expect_g = global_hash(row.global_seq, row.record_id, row.seq, row.hash,
                                           row.origin, row.global_prev_hash)
                    if row.global_hash != expect_g:
                        fail(row, "store-wide chain link does not match its hash (changed after writing)")
                    gseq, gprev = row.global_seq, row.global_hash
                    # Per-record chain.
                    last_seq, last_hash = per.get(row.record_id, (0, GENESIS_HASH))
                    if row.seq != last_seq + 1:
                        fail(row, f"record sequence jumps from {last_seq} to {row.seq}: "
                                  "events are missing or moved")
                    if row.prev_hash != last_hash:
                        fail(row, "prev_hash does not match the hash of the record's previous event")
                    expect = event_hash(row.record_id, row.seq, row.kind, row.utc, row.actor, row.role,
                                        row.payload, row.prev_hash)
                    if row.hash != expect:
                        fail(row, "event content does not match its hash (changed after writing)")
                    if row.kind not in roles.EVENT_KINDS:
                        fail(row, f"unknown event kind '{row.kind}'")
                    if (row.seq == 1) != (row.kind == "entered"):
                        fail(row, "a record starts with exactly one 'entered' event")
                    if row.kind == "entered":
                        why = header_mismatch(heads.get(row.record_id), row.payload)
                        if why:
                            fail(row, why)
                    per[row.record_id] = (row.seq, row.hash)
                for rid in heads:
                    if rid not in per and first is None:
                        broken += 1
                        first = {"record_id": rid, "seq": None, "kind": None, "global_seq": None,
                                 "reason": "record has no events (its entered event is missing)"}
        return VerifyResult(ok=broken == 0, checked_events=checked, records=len(heads),
                            first_broken=first, broken_count=broken,
                            head={"global_seq": gseq, "global_hash": gprev})

    # -- export / import ---------------------------------------------------------------------

    def export_bundle(self, record_ids: Sequence[str] | None = None) -> dict:
        """A JSON-able bundle of records with their events (see :func:`bundles.export_bundle`)."""
        return bundles.export_bundle(self, record_ids)

    def import_bundle(self, bundle: dict, *, actor: str | None = None, role: str = "auditor") -> ImportResult:
        """Import a bundle (see :func:`bundles.import_bundle`)."""
        return bundles.import_bundle(self, bundle, actor=actor, role=role)

    # -- drafts (mutable, not records) ------------------------------------------------------

    def save_draft(self, key: str, payload: dict) -> None:
        text = canonical_json(payload)

        def write(conn: sa.Connection) -> None:
            conn.execute(drafts_t.delete().where(drafts_t.c.key == key))
            conn.execute(drafts_t.insert().values(key=key, payload=text, saved_utc=utc_now()))

        self._retrying(write, idempotent=True)

    def load_draft(self, key: str) -> dict | None:
        with self._read() as conn:
            text = conn.execute(sa.select(drafts_t.c.payload).where(drafts_t.c.key == key)).scalar()
        return json.loads(text) if text is not None else None

    def delete_draft(self, key: str) -> None:
        self._retrying(lambda conn: conn.execute(drafts_t.delete().where(drafts_t.c.key == key)),
                       idempotent=True)

    def draft_keys(self) -> list[str]:
        with self._read() as conn:
            return list(conn.execute(sa.select(drafts_t.c.key).order_by(self._bytewise(drafts_t.c.key))).scalars())

    # -- process library (not in this schema yet) -------------------------------------------

    def resolve_process_ref(self, ref: str) -> dict:
        """Resolve ``deviation.process_ref`` from the process library on this store."""
        from deviation.records import processes as library

        return library.resolve(self, ref)


# ---------------------------------------------------------------------------------------------
# Helpers


__all__ = ["open_store", "Store"]
