"""The record store: deviation records as append-only, hash-chained event histories.

One code path on SQLAlchemy Core runs on the embedded default (an SQLite file in WAL mode in the
user data directory) and on a PostgreSQL server given by URL. The tool creates and migrates its
own schema (table ``schema_version``; an older store is upgraded in place, never dropped).

Integrity
---------
Every event carries a hash of a canonical JSON form (keys sorted, separators ``,`` and ``:``,
UTF-8 as is, no NaN) of ``{record_id, seq, kind, utc, actor, role, payload, prev_hash}`` where
``prev_hash`` is the hash of the record's previous event (64 zeros for the first): a chain per
record. A second chain runs over the whole store in ``global_seq`` order, over
``{global_seq, record_id, seq, hash, origin, global_prev_hash}``. Both are HMAC-SHA-256 under the
store's secret key (kept outside the database, :mod:`deviation.records.keys`), so a chain
recomputed without the key does not verify; events written before the store had a key keep their
SHA-256 and are sealed by the key's row. :meth:`Store.verify` recomputes both chains, checks the
filed-process library and the summary table against them, and compares the store head with the
anchors noted after each write (and ``expect_head``): events deleted from the end, or a chain
rebuilt even with the key, no longer match an anchor kept out of reach.

Nothing in the ``events`` or ``records`` tables is ever UPDATEd or DELETEd: an amendment is a new
event (a test greps this file to keep it so). Drafts (the TUI's unsaved entry) live in their own
mutable table, and ``record_summaries`` is derived from the events (rebuilt by ``verify``).

Evaluated events are compact: the figures, flags and guidance, and a digest of the arrays
(:mod:`deviation.records.arrays`); the arrays are recomputed from the snapshot when asked for.

Concurrency: on SQLite every write runs in ``BEGIN IMMEDIATE`` (writers queue on the file lock,
with a busy timeout); on PostgreSQL (READ COMMITTED) a write first takes a transaction-scoped
advisory lock, so the chain heads it reads afterwards are current and no two writers link to the
same head (a lock rather than ``SELECT ... FOR UPDATE`` so a writer's database role needs no
UPDATE privilege on the records). A lock wait is bounded (``lock_timeout``); a unique-key,
serialisation or deadlock conflict is retried with a bounded backoff.

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
import sys
from datetime import date, datetime
from typing import Any, Callable, Iterator, Sequence

import sqlalchemy as sa

from deviation.errors import DeviationError, StoreError
from deviation.records import bundles, keys, ledger, roles, summaries
from deviation.records.arrays import compact_evaluation
from deviation.records.backends import Database, check_columns, created_bound, url_for
from deviation.records.chains import GENESIS_HASH, canonical_json, new_record_id, utc_now
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
from deviation.records.schema import (
    LIBRARY_ID,
    drafts_t,
    events_t,
    records_t,
    store_info_t,
    store_keys_t,
    summaries_t,
)

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

    signer: ledger.Signer

    def _open(self) -> None:
        super()._open()
        self.signer = self._load_signer()
        self.last_head: tuple[int, str] | None = None
        self.anchor_problem: str | None = None

    def _load_signer(self) -> ledger.Signer:
        """The store's key row and the key itself (from outside the database)."""
        with self._read() as conn:
            store_id = conn.execute(sa.select(store_info_t.c.store_id)).scalar_one()
            rows = conn.execute(sa.select(store_keys_t)).mappings().all()
        self._store_id = store_id
        if len(rows) != 1:
            return ledger.Signer("", 1, "", None, f"the store has {len(rows)} key rows, expected one "
                                                  "(changed behind the tool's back)")
        r = rows[0]
        src = keys.key_source(store_id)
        key = keys.load_key(store_id)
        if key is None:
            problem = (f"this store's key (id {r['key_id']}) is not at {src.where}: copy the key file "
                       f"from the machine that created the store, or give it with {keys.KEY_FILE_ENV} or "
                       f"{keys.KEY_ENV}. Without it nothing can be signed and verify cannot check "
                       "signatures")
            return ledger.Signer(r["key_id"], r["from_global_seq"], r["legacy_head"], None, problem)
        if keys.key_id(key) != r["key_id"]:
            return ledger.Signer(r["key_id"], r["from_global_seq"], r["legacy_head"], None,
                                 f"the key at {src.where} is not this store's key (its id is "
                                 f"{keys.key_id(key)}, the store's is {r['key_id']})")
        if ledger.seal(key, store_id, r["key_id"], r["from_global_seq"], r["legacy_head"],
                       r["created_utc"]) != r["mac"]:
            return ledger.Signer(r["key_id"], r["from_global_seq"], r["legacy_head"], None,
                                 "the store's key row does not match its seal (changed behind the "
                                 "tool's back): run deviation verify")
        return ledger.Signer(r["key_id"], r["from_global_seq"], r["legacy_head"], key)

    # -- writing -----------------------------------------------------------------------------

    @staticmethod
    def _event_by_id(conn: sa.Connection, event_id: str):
        return conn.execute(sa.select(events_t).where(events_t.c.event_id == event_id)).mappings().first()

    def _insert_event(self, conn: sa.Connection, **kw) -> dict:
        """Insert one event at the heads of both chains (see :func:`ledger.insert_event`)."""
        check_columns(events_t, {k: kw[k] for k in ("actor", "role", "kind", "utc")}, source=self.name)
        return ledger.insert_event(conn, self.signer, source=self.name, **kw)

    def write_anchored(self, fn: Callable[[sa.Connection, list], Any], *, idempotent: bool = True) -> Any:
        """Run a write transaction ``fn(conn, rows)`` (``rows``: the event rows it inserted) and
        note the new store head in the anchor file once it has committed."""
        rows: list[dict] = []

        def run(conn: sa.Connection):
            rows.clear()
            return fn(conn, rows)

        result = self._retrying(run, idempotent=idempotent)
        if rows:
            self._anchor(rows[-1])
        return result

    def _anchor(self, row: dict) -> None:
        head = (row["global_seq"], row["global_hash"])
        self.last_head = head
        self.anchor_problem = keys.append_anchor(keys.anchor_path(self._store_id), self._store_id, *head,
                                                 utc_now())
        if keys.print_heads():
            print(f"store head {head[0]} {head[1]}", file=sys.stderr)

    def _write_event(self, **kw) -> Callable[[sa.Connection, list], dict]:
        def write(conn: sa.Connection, rows: list) -> dict:
            row = self._insert_event(conn, **kw)
            rows.append(row)
            return row
        return write

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
        self.signer.require(self.name)
        # A retry after an unknown outcome finds the committed event by its id first (so it
        # returns that record, never makes a second); one that did not commit draws a new id.
        created = {"id": new_record_id(), "tries": 0}
        # The snapshot (log contents and all) is serialised before the transaction; the payload
        # text is exactly canonical_json({"record": header, "snapshot": snapshot}).
        snapshot_json = canonical_json(snapshot)

        def write(conn: sa.Connection, rows: list) -> str:
            nonlocal check_first
            if check_first:
                done = self._event_by_id(conn, eid)
                if done is not None:
                    if done["kind"] != "entered":
                        raise StoreError(f"event id {eid} is already used by event {done['seq']} "
                                         f"({done['kind']}) of record {done['record_id']}", source=self.name)
                    return done["record_id"]
            if created["tries"]:
                # Not committed before (no event with this key): a retry, e.g. after the
                # unlikely collision of 60 random bits with a stored id, draws a new id.
                created["id"] = new_record_id()
            check_first = True
            created["tries"] += 1
            rid = created["id"]
            when = utc_now()
            header = {"id": rid, "lot": lot, "retort_id": retort_id, "process_id": process_id,
                      "process_version": process_version, "created_utc": when}
            payload_json = '{"record":' + canonical_json(header) + ',"snapshot":' + snapshot_json + "}"
            # A stored id makes the INSERT fail (a conflict: retried with a new id). The record is
            # new, so its chain and summary start empty (a stray summary row with its id would
            # fail the summary's INSERT the same way).
            conn.execute(records_t.insert(), header)
            rows.append(self._insert_event(conn, record_id=rid, kind="entered", utc=when, actor=actor, role=role,
                                           payload_json=payload_json, payload={"record": header, "snapshot": snapshot},
                                           event_id=eid, header=header, head=(0, GENESIS_HASH), summary=None))
            return rid

        return self.write_anchored(write)

    def append_event(self, record_id: str, kind: str, payload: dict, *, actor: str, role: str,
                     event_id: str | None = None) -> Event:
        """Append one event, after the role and record-state rules of :mod:`deviation.records.roles`.

        ``event_id``: the append's idempotency key (made here when not given). If an event with
        this key is already stored (a retry of an append that did commit), that event is
        returned and nothing is written. An ``evaluated`` payload is stored compact (its arrays
        as a digest); a ``hold-released`` one cites the disposition in force (``decision_seq``).
        """
        if kind == "entered":
            raise StoreError("an 'entered' event starts a record: use create_record")
        if kind in ("process-filed", "process-retired"):
            raise StoreError(f"a '{kind}' event is written by the process library (deviation process ...)")
        check_payload(kind, payload)
        action = roles.KIND_ACTION[kind]
        role = roles.check_role(actor, role, action)
        payload = dict(payload)
        if kind == "evaluated" and "arrays" not in payload:
            payload["evaluation"], digest = compact_evaluation(payload["evaluation"])
            if digest is not None:
                payload["arrays"] = digest
        check_first = event_id is not None
        eid = checked_event_id(event_id)
        self.signer.require(self.name)
        # Serialised before the transaction, unless something in it is only known inside it.
        ready_json = (canonical_json(payload)
                      if not (kind == "evaluated" and payload.get("snapshot_seq") is None)
                      and not (kind == "hold-released" and payload.get("decision_seq") is None) else None)

        def write(conn: sa.Connection, rows: list) -> Event:
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
            st, heads = self._state(conn, record_id)
            p = dict(payload)
            roles.check_transition(record_id, st, action, actor=actor, role=role, payload=p)
            if kind == "evaluated":
                asked = p.get("snapshot_seq")
                if asked is None:
                    p["snapshot_seq"] = st.snapshot_seq
                elif asked != st.snapshot_seq:
                    raise roles.TransitionRefused(
                        f"actor '{actor}' (role {role}) cannot evaluate record {record_id}: the "
                        f"evaluation is of snapshot event {asked} but the record was amended since "
                        f"(current snapshot event {st.snapshot_seq}); evaluate again")
            if kind == "hold-released" and p.get("decision_seq") is None:
                p["decision_seq"] = st.decision_seq  # the supervisor cites the disposition in force
            text = ready_json if ready_json is not None else canonical_json(p)
            row = self._insert_event(conn, record_id=record_id, kind=kind, utc=utc_now(), actor=actor,
                                     role=role, payload_json=text, payload=p, event_id=eid, **heads)
            rows.append(row)
            return event_from_row(row, p)

        return self.write_anchored(write)

    def _state(self, conn: sa.Connection, record_id: str) -> tuple[roles.RecordState, dict]:
        """The record's state from its events (only dispositions' payloads are read, for their
        decision), and what the append needs besides (``insert_event`` keywords: the record's
        chain head, the store head, the summary row), all in one query under the write lock."""
        rows, store_head, found = ledger.append_context(conn, record_id)
        if not rows or record_id == LIBRARY_ID:
            raise StoreError(f"no record {record_id}", source=self.name)
        st = roles.START
        for r in rows:
            st = roles.advance(st, r.kind, json.loads(r.p) if r.p is not None else None, r.seq)
        return st, {"head": (rows[-1].seq, rows[-1].hash), "store_head": store_head, "summary": found}

    # Convenience writers (the CLI and TUI use these).

    def amend(self, record_id: str, snapshot: dict, *, reason: str, actor: str, role: str,
              event_id: str | None = None) -> Event:
        return self.append_event(record_id, "amended", {"snapshot": snapshot, "reason": reason},
                                 actor=actor, role=role, event_id=event_id)

    def add_evaluation(self, record_id: str, evaluation: dict, *, actor: str, role: str,
                       snapshot_seq: int | None = None, options: dict | None = None,
                       event_id: str | None = None) -> Event:
        """Append ``evaluated`` with the engine version and rule-set hash read from the
        evaluation; stored compact (figures, flags, guidance and a digest of the arrays)."""
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
                     decision_seq: int | None = None, event_id: str | None = None) -> Event:
        """Lift the hold citing the process authority's disposition (``decision_seq``; default:
        the one in force). Refused while the record holds no disposition."""
        payload: dict = {"reason": reason}
        if decision_seq is not None:
            payload["decision_seq"] = decision_seq
        return self.append_event(record_id, "hold-released", payload, actor=actor, role=role,
                                 event_id=event_id)

    def decide(self, record_id: str, *, decision: str, reason: str, actor: str, role: str,
               result: str | None = None, decision_text: str | None = None, supersedes: int | None = None,
               event_id: str | None = None) -> Event:
        """Record the disposition: ``decision`` from :data:`roles.DECISIONS` (``release`` is read
        as ``release-after-evaluation``; ``other`` needs ``decision_text``). A disposition in
        force is corrected only by a superseding one (``supersedes``: its event number)."""
        code = roles.decision_code(decision)
        payload: dict = {"decision": code or decision, "reason": reason}
        for k, v in (("decision_text", decision_text), ("result", result), ("supersedes", supersedes)):
            if v:
                payload[k] = v
        return self.append_event(record_id, "disposition", payload, actor=actor, role=role, event_id=event_id)

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
            return list(conn.execute(sa.select(records_t.c.id).where(records_t.c.id != LIBRARY_ID).order_by(
                self._bytewise(records_t.c.created_utc), self._bytewise(records_t.c.id))).scalars())

    def head(self) -> dict:
        """The store head: ``{"global_seq", "global_hash"}`` of the newest event."""
        with self._read() as conn:
            seq, h = ledger.global_head(conn)
        return {"global_seq": seq, "global_hash": h}

    def record(self, record_id: str) -> RecordView:
        """The record as it stands now (state, latest snapshot and evaluation, hold, disposition)."""
        if record_id == LIBRARY_ID:
            raise StoreError(f"no record {record_id} (the process library: deviation process list)",
                             source=self.name)
        evs = self.events(record_id)
        with self._read() as conn:
            head = conn.execute(sa.select(records_t).where(records_t.c.id == record_id)).mappings().one()
        s = None
        snapshots: dict[int, dict] = {}
        snapshot, snapshot_seq = {}, 0
        evaluation = evaluation_event = None
        eval_snapshot_seq = None
        notes = []
        for e in evs:
            p = e.payload if isinstance(e.payload, dict) else {}
            s = summaries.fold(s, kind=e.kind, seq=e.seq, utc=e.utc, actor=e.actor, role=e.role, payload=p,
                               origin=e.origin, global_seq=e.global_seq or 0, header=dict(head))
            if e.kind in ("entered", "amended"):
                snapshot, snapshot_seq = p.get("snapshot", {}), e.seq
                snapshots[e.seq] = snapshot
            elif e.kind == "evaluated":
                evaluation = p.get("evaluation")
                evaluation_event = {k: v for k, v in p.items() if k != "evaluation"}
                evaluation_event.update(seq=e.seq, utc=e.utc, actor=e.actor, role=e.role)
                eval_snapshot_seq = p.get("snapshot_seq")
            elif e.kind == "note":
                notes.append({"text": p.get("text"), "by": e.actor, "role": e.role, "utc": e.utc, "seq": e.seq})
        return RecordView(
            id=record_id, lot=head["lot"], retort_id=head["retort_id"], process_id=head["process_id"],
            process_version=head["process_version"], created_utc=head["created_utc"], state=s["state"],
            snapshot=snapshot, snapshot_seq=snapshot_seq, stored_evaluation=evaluation,
            evaluation_event=evaluation_event,
            evaluation_current=evaluation is not None and eval_snapshot_seq == snapshot_seq,
            hold=s["hold"], disposition=s["disposition"], notes=notes, events=evs,
            superseded=s["superseded_dispositions"], origins=s["origins"],
            evaluated_snapshot=snapshots.get(eval_snapshot_seq) if eval_snapshot_seq else None)

    def _summary_query(self, state: str | None = None, lot: str | None = None, retort: str | None = None,
                       since: str | date | datetime | None = None, until: str | date | datetime | None = None,
                       plant: str | None = None):
        if state is not None and state not in roles.STATES:
            raise DeviationError(f"unknown state '{state}' (states: {', '.join(roles.STATES)})",
                                 source="--state")
        q = sa.select(summaries_t)
        if state is not None:
            q = q.where(summaries_t.c.state == state)
        if lot is not None:
            q = q.where(summaries_t.c.lot == lot)
        if retort is not None:
            q = q.where(summaries_t.c.retort_id == retort)
        if plant is not None:
            q = q.where(summaries_t.c.plant == plant)
        if since is not None:
            q = q.where(self._bytewise(summaries_t.c.created_utc) >= created_bound(since, "since"))
        if until is not None:
            q = q.where(self._bytewise(summaries_t.c.created_utc) < created_bound(until, "until"))
        return q.order_by(self._bytewise(summaries_t.c.created_utc), self._bytewise(summaries_t.c.id))

    def summaries(self, **filters) -> list[dict]:
        """Record summaries (oldest first), in one query of the derived table; filters as
        :meth:`list_records` and ``plant``."""
        with self._read() as conn:
            return [summaries.from_row(r) for r in conn.execute(self._summary_query(**filters)).mappings()]

    def list_records(self, state: str | None = None, lot: str | None = None, retort: str | None = None,
                     since: str | date | datetime | None = None,
                     until: str | date | datetime | None = None, plant: str | None = None) -> list[RecordSummary]:
        """Records (oldest first) filtered by state, lot, retort, plant and creation time (UTC).

        ``since``/``until`` take a date (``2024-05-01``, the whole day counts) or an ISO time.
        One query of the summary table.
        """
        return [RecordSummary(**r) for r in self.list_rows(state=state, lot=lot, retort=retort, since=since,
                                                           until=until, plant=plant)]

    def list_rows(self, **filters) -> list[dict]:
        """:meth:`list_records` as plain dicts (``RecordSummary.to_dict()``, the rows of
        ``record list --json``), read straight from the query's tuples: 10,000 rows in a few
        hundredths of a second."""
        q = self._summary_query(**filters)
        names = tuple(RecordSummary.__dataclass_fields__)  # columns only: a list row reads no JSON
        q = q.with_only_columns(*(summaries_t.c[c] for c in names))
        with self._read() as conn:
            rows = [dict(zip(names, r)) for r in conn.execute(q)]
        for r in rows:  # booleans as booleans, whatever the database returned
            r["held"], r["imported"] = bool(r["held"]), bool(r["imported"])
        return rows

    def deviation_log(self, *, since: str | date | datetime | None = None,
                      until: str | date | datetime | None = None, plant: str | None = None) -> list[dict]:
        """Every record entered in the period (the deviation log of 21 CFR 113.89), open items
        first (no disposition yet), then by time entered; one query of the summary table."""
        rows = self.summaries(since=since, until=until, plant=plant)
        return sorted(rows, key=lambda s: (not summaries.is_open(s), s["created_utc"], s["id"]))

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
            return conn.execute(sa.select(sa.func.count()).select_from(records_t)
                                .where(records_t.c.id != LIBRARY_ID)).scalar_one()

    def count_events(self) -> int:
        """Events of deviation records (the library's chain events are not counted)."""
        with self._read() as conn:
            return conn.execute(sa.select(sa.func.count()).select_from(events_t)
                                .where(events_t.c.record_id != LIBRARY_ID)).scalar_one()

    # -- verify ------------------------------------------------------------------------------

    def verify(self, *, anchors: str | os.PathLike | None = None, expect_head: str | None = None,
               rebuild_summaries: bool = True) -> VerifyResult:
        """Check every event of both chains (keyed hashes under the store's key), the key's
        seal, the process library, the summary table (rebuilt when it differs) and the store
        head against the anchors (``anchors``: an anchor file; default the store's own, when it
        exists) and ``expect_head`` (``HASH`` or ``SEQ:HASH``). See :mod:`.verify`."""
        from deviation.records.verify import verify_store

        return verify_store(self, anchors=anchors, expect_head=expect_head, rebuild_summaries=rebuild_summaries)

    # -- export / import ---------------------------------------------------------------------

    def export_bundle(self, record_ids: Sequence[str] | None = None) -> dict:
        """A JSON-able bundle of records with their events (see :func:`bundles.export_bundle`)."""
        return bundles.export_bundle(self, record_ids)

    def import_bundle(self, bundle: dict, *, actor: str | None = None, role: str = "auditor",
                      source_key: bytes | None = None) -> ImportResult:
        """Import a bundle (see :func:`bundles.import_bundle`)."""
        return bundles.import_bundle(self, bundle, actor=actor, role=role, source_key=source_key)

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

    # -- process library ---------------------------------------------------------------------

    def resolve_process_ref(self, ref: str) -> dict:
        """Resolve ``deviation.process_ref`` from the process library on this store."""
        from deviation.records import processes as library

        return library.resolve(self, ref)


__all__ = ["open_store", "Store"]
