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

import base64
import getpass
import hashlib
import json
import os
import time
import uuid
from contextlib import contextmanager
from dataclasses import asdict, dataclass, field
from datetime import date, datetime, timedelta, timezone
from pathlib import Path
from typing import Any, Callable, Iterator, Sequence

import sqlalchemy as sa
from sqlalchemy import event as sa_event
from sqlalchemy import exc as sa_exc

from deviation import __version__
from deviation.records import roles
from deviation.errors import DeviationError, StoreError

GENESIS_HASH = "0" * 64
APP_NAME = "deviation"
BUNDLE_FORMAT = "deviation-record-bundle"
BUNDLE_VERSION = 1
_BUSY_TIMEOUT_S = 30.0
_WRITE_RETRIES = 6
_SQLITE_MAGIC = b"SQLite format 3\x00"
_RECONNECT_S = 30.0  # default window for reconnecting after a lost server (DEVIATION_DB_RECONNECT_S)
_CONNECT_TIMEOUT_S = 10
# Transaction-scoped advisory lock keys (PostgreSQL): schema changes, and every write.
_PG_SCHEMA_LOCK = 5050505
_PG_WRITE_LOCK = int.from_bytes(hashlib.sha256(b"deviation:chain-heads").digest()[:8], "big", signed=True)
_EVENT_ID_MAX = 40


class StoreUnavailable(StoreError):
    """The database server could not be reached (or the connection was lost) for longer than the
    reconnect window.

    ``outcome_unknown`` is True when the connection was lost while the write was committing: it
    may have been stored. Retrying with the same ``event_id`` (or record id) is then safe; the
    store recognises an append that did commit.
    """

    def __init__(self, message: str, *, source: str | None = None, outcome_unknown: bool = False,
                 event_id: str | None = None) -> None:
        super().__init__(message, source=source)
        self.outcome_unknown = outcome_unknown
        self.event_id = event_id

# ---------------------------------------------------------------------------------------------
# Canonical JSON and hashes


def canonical_json(obj: Any) -> str:
    """The canonical JSON text hashed by the store (sorted keys, no spaces, UTF-8, no NaN)."""
    try:
        return json.dumps(obj, sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                          allow_nan=False)
    except ValueError as exc:  # NaN or Infinity somewhere in the payload
        raise StoreError(f"cannot store a payload holding NaN or Infinity ({exc})") from None
    except TypeError as exc:
        raise StoreError(f"cannot store a payload that is not plain JSON data ({exc})") from None


def _sha256(text: str) -> str:
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def event_hash(record_id: str, seq: int, kind: str, utc: str, actor: str, role: str,
               payload_json: str, prev_hash: str) -> str:
    """SHA-256 of the canonical JSON of an event, given its payload as canonical JSON text.

    Equal to ``sha256(canonical_json({... "payload": json.loads(payload_json) ...}))`` when
    ``payload_json`` is canonical; the payload text is spliced in (keys sort as actor, kind,
    payload, prev_hash, record_id, role, seq, utc) so a large payload is not parsed again, and
    any change to the stored text, even whitespace, changes the hash.
    """
    head = canonical_json({"actor": actor, "kind": kind})
    tail = canonical_json({"prev_hash": prev_hash, "record_id": record_id, "role": role,
                           "seq": seq, "utc": utc})
    return _sha256(head[:-1] + ',"payload":' + payload_json + "," + tail[1:])


def global_hash(global_seq: int, record_id: str, seq: int, hash_: str, origin: str | None,
                global_prev_hash: str) -> str:
    """SHA-256 of the store-wide chain link of one event."""
    return _sha256(canonical_json({"global_prev_hash": global_prev_hash, "global_seq": global_seq,
                                   "hash": hash_, "origin": origin, "record_id": record_id,
                                   "seq": seq}))


def utc_now() -> str:
    """Now in UTC, ISO-8601 with microseconds and ``Z``."""
    return datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


def new_record_id() -> str:
    """``DR-`` and 12 base32 characters (60 random bits)."""
    return "DR-" + base64.b32encode(os.urandom(8)).decode("ascii")[:12]


def new_event_id() -> str:
    """A client-made idempotency key for one append (a random UUID, 32 hex digits)."""
    return uuid.uuid4().hex


# ---------------------------------------------------------------------------------------------
# Schema. When a table changes, freeze its old definition inside the migration that made it
# and add a migration; never edit a migration that has shipped.


def _define_v1(md: sa.MetaData) -> dict[str, sa.Table]:
    schema_version = sa.Table(
        "schema_version", md,
        sa.Column("version", sa.Integer, primary_key=True, autoincrement=False),
        sa.Column("app", sa.String(32), nullable=False),
        sa.Column("applied_utc", sa.String(32), nullable=False),
        sa.Column("tool_version", sa.String(32), nullable=False),
    )
    store_info = sa.Table(
        "store_info", md,
        sa.Column("store_id", sa.String(64), primary_key=True),
        sa.Column("created_utc", sa.String(32), nullable=False),
    )
    records = sa.Table(
        "records", md,
        sa.Column("id", sa.String(64), primary_key=True),
        sa.Column("lot", sa.String(200), nullable=False),
        sa.Column("retort_id", sa.String(200), nullable=False),
        sa.Column("process_id", sa.String(200), nullable=False),
        sa.Column("process_version", sa.String(200), nullable=True),
        sa.Column("created_utc", sa.String(32), nullable=False),
        sa.Index("ix_records_lot", "lot"),
        sa.Index("ix_records_retort", "retort_id"),
        sa.Index("ix_records_created", "created_utc"),
    )
    events = sa.Table(
        "events", md,
        sa.Column("global_seq", sa.Integer, primary_key=True, autoincrement=False),
        sa.Column("record_id", sa.String(64), sa.ForeignKey("records.id"), nullable=False),
        sa.Column("seq", sa.Integer, nullable=False),
        sa.Column("kind", sa.String(32), nullable=False),
        sa.Column("utc", sa.String(32), nullable=False),
        sa.Column("actor", sa.String(200), nullable=False),
        sa.Column("role", sa.String(32), nullable=False),
        sa.Column("payload", sa.Text, nullable=False),
        sa.Column("prev_hash", sa.String(64), nullable=False),
        sa.Column("hash", sa.String(64), nullable=False),
        sa.Column("origin", sa.Text, nullable=True),
        sa.Column("global_prev_hash", sa.String(64), nullable=False),
        sa.Column("global_hash", sa.String(64), nullable=False),
        sa.UniqueConstraint("record_id", "seq", name="uq_events_record_seq"),
    )
    return {t.name: t for t in (schema_version, store_info, records, events)}


def _define_v2(md: sa.MetaData) -> dict[str, sa.Table]:
    drafts = sa.Table(
        "drafts", md,
        sa.Column("key", sa.String(200), primary_key=True),
        sa.Column("payload", sa.Text, nullable=False),
        sa.Column("saved_utc", sa.String(32), nullable=False),
    )
    return {"drafts": drafts}


def _define_v3(events: sa.Table) -> None:
    """Version 3 adds to ``events``: ``event_id``, the client-made idempotency key of an append."""
    events.append_column(sa.Column("event_id", sa.String(_EVENT_ID_MAX), nullable=True))
    sa.Index("uq_events_event_id", events.c.event_id, unique=True)


metadata = sa.MetaData()
_T = {**_define_v1(metadata), **_define_v2(metadata)}
_define_v3(_T["events"])
schema_version_t, store_info_t, records_t, events_t, drafts_t = (
    _T["schema_version"], _T["store_info"], _T["records"], _T["events"], _T["drafts"])


def _migrate_1(conn: sa.Connection) -> None:
    """Records, events (both chains), the store's identity."""
    md = sa.MetaData()
    tables = _define_v1(md)
    md.create_all(conn, tables=list(tables.values()))
    conn.execute(tables["store_info"].insert().values(
        store_id=base64.b32encode(os.urandom(10)).decode("ascii"), created_utc=utc_now()))


def _migrate_2(conn: sa.Connection) -> None:
    """Drafts: the TUI's unsaved entry (mutable; not records)."""
    md = sa.MetaData()
    tables = _define_v2(md)
    md.create_all(conn, tables=list(tables.values()))


def _migrate_3(conn: sa.Connection) -> None:
    """Idempotency keys: ``events.event_id`` (NULL for events written before; unique otherwise).

    Plain SQL that SQLite and PostgreSQL read alike; not part of any hash.
    """
    conn.exec_driver_sql(f"ALTER TABLE events ADD COLUMN event_id VARCHAR({_EVENT_ID_MAX})")
    conn.exec_driver_sql("CREATE UNIQUE INDEX uq_events_event_id ON events (event_id)")


# Applied in order, each in its own transaction; index + 1 is the schema version it makes.
MIGRATIONS: list[Callable[[sa.Connection], None]] = [_migrate_1, _migrate_2, _migrate_3]
SCHEMA_VERSION = len(MIGRATIONS)


# ---------------------------------------------------------------------------------------------
# Views


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


# ---------------------------------------------------------------------------------------------
# Payload rules per event kind


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


# ---------------------------------------------------------------------------------------------
# Opening


def default_db_path() -> Path:
    """``deviation.db`` in the user data directory (platformdirs)."""
    import platformdirs

    return Path(platformdirs.user_data_dir(APP_NAME)) / "deviation.db"


def _url_for(target: str | os.PathLike | None) -> tuple[str, Path | None]:
    """The SQLAlchemy URL and, for SQLite, the file path."""
    if target is None:
        target = os.environ.get("DEVIATION_DB") or None
    if target is None:
        path = default_db_path()
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise StoreError(f"cannot create the data directory {path.parent}: {exc.strerror}") from None
        return f"sqlite:///{path}", path
    text = os.fspath(target)
    if "://" in text:
        scheme, rest = text.split("://", 1)
        if scheme in ("postgresql", "postgres"):  # the driver this tool ships with: psycopg 3
            return f"postgresql+psycopg://{rest}", None
        if text.startswith("sqlite:///") and len(text) > len("sqlite:///"):
            p = text[len("sqlite:///"):].split("?", 1)[0]
            return text, (Path(p) if p != ":memory:" else None)
        return text, None
    path = Path(text).expanduser()
    return f"sqlite:///{path}", path


def _precheck_file(path: Path, name: str) -> None:
    """A clear word before SQLite says something obscure about a file that is not ours."""
    if path.is_dir():
        raise StoreError("is a directory, not a deviation record store", source=name)
    if not path.parent.exists():
        raise StoreError(f"the directory {path.parent} does not exist", source=name)
    if path.exists():
        try:
            with path.open("rb") as fh:
                head = fh.read(16)
        except OSError as exc:
            raise StoreError(f"cannot be read: {exc.strerror}", source=name) from None
        if head and head != _SQLITE_MAGIC:
            raise StoreError("is not a deviation record store (not an SQLite database file)",
                             source=name)


def open_store(url_or_path: str | os.PathLike | None = None, *,
               reconnect_s: float | None = None) -> "Store":
    """Open (creating or upgrading) a record store.

    ``None`` uses ``DEVIATION_DB``, else ``deviation.db`` in the user data directory; a plain
    path is an SQLite file; anything with ``://`` is a SQLAlchemy URL
    (``postgresql+psycopg://user@host/db``; ``postgresql://`` means the same).
    ``reconnect_s`` [s]: how long a write keeps retrying a lost server (default
    ``DEVIATION_DB_RECONNECT_S`` or 30 s).
    """
    url, path = _url_for(url_or_path)
    return Store(url, path=path, reconnect_s=reconnect_s)


def _reconnect_window_s(value: float | None) -> float:
    if value is not None:
        return max(0.0, float(value))
    text = os.environ.get("DEVIATION_DB_RECONNECT_S")
    if not text:
        return _RECONNECT_S
    try:
        return max(0.0, float(text))
    except ValueError:
        raise StoreError(f"DEVIATION_DB_RECONNECT_S must be a number of seconds, found {text!r}") from None


class Store:
    """A deviation record store (see the module docstring)."""

    def __init__(self, url: str, *, path: Path | None = None, reconnect_s: float | None = None) -> None:
        self.url = url
        self.path = path
        self.reconnect_s = _reconnect_window_s(reconnect_s)
        try:
            self.engine = self._make_engine(url)
        except ModuleNotFoundError as exc:
            raise StoreError(f"cannot use database URL: its driver '{exc.name}' is not installed"
                             + (" (pip install 'psycopg[binary]')" if "psycopg" in str(exc.name) else ""),
                             source=url.split("@")[-1]) from None
        except (sa_exc.ArgumentError, sa_exc.NoSuchModuleError, ImportError) as exc:
            raise StoreError(f"cannot use database URL: {exc}", source=url.split("@")[-1]) from None
        self.name = str(path) if path is not None else self.engine.url.render_as_string(hide_password=True)
        self.dialect = self.engine.dialect.name
        if path is not None:
            _precheck_file(path, self.name)
        self._open()

    # -- engine ------------------------------------------------------------------------------

    @staticmethod
    def _make_engine(url: str) -> sa.Engine:
        if url.startswith("sqlite"):
            engine = sa.create_engine(url, connect_args={"timeout": _BUSY_TIMEOUT_S})

            @sa_event.listens_for(engine, "connect")
            def _on_connect(dbapi_conn, _record):  # noqa: ANN001
                # Let SQLAlchemy's "begin" below issue BEGIN itself (the driver's own
                # transaction handling would defer it and lose BEGIN IMMEDIATE).
                dbapi_conn.isolation_level = None
                cur = dbapi_conn.cursor()
                cur.execute("PRAGMA foreign_keys=ON")
                cur.execute(f"PRAGMA busy_timeout={int(_BUSY_TIMEOUT_S * 1000)}")
                # FULL: a committed event survives power loss too, not only a killed process.
                cur.execute("PRAGMA synchronous=FULL")
                cur.close()

            @sa_event.listens_for(engine, "begin")
            def _on_begin(conn):  # noqa: ANN001
                # Writers take the write lock at BEGIN so concurrent appends queue, never
                # interleave on stale chain heads.
                if conn.get_execution_options().get("deviation_write"):
                    conn.exec_driver_sql("BEGIN IMMEDIATE")
                else:
                    conn.exec_driver_sql("BEGIN")

            return engine
        connect_args: dict[str, Any] = {}
        if url.startswith("postgresql+psycopg"):
            # Give up on an unreachable server in bounded time, and notice a dead peer (TCP
            # keepalive) instead of waiting on it for ever. libpq parameters in the URL win.
            connect_args = {"connect_timeout": _CONNECT_TIMEOUT_S, "keepalives": 1,
                            "keepalives_idle": 30, "keepalives_interval": 10, "keepalives_count": 3,
                            "application_name": APP_NAME}
            query = sa.engine.make_url(url).query
            connect_args = {k: v for k, v in connect_args.items() if k not in query}
        # pre_ping: a pooled connection that died with a restarted server is replaced, not used.
        return sa.create_engine(url, pool_pre_ping=True, connect_args=connect_args)

    def close(self) -> None:
        self.engine.dispose()

    def __enter__(self) -> "Store":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def __repr__(self) -> str:
        return f"Store({self.name!r})"

    @contextmanager
    def _guard(self) -> Iterator[None]:
        """Database errors become StoreError naming the store."""
        try:
            yield
        except DeviationError:
            raise
        except sa_exc.SQLAlchemyError as exc:
            raise self._store_error(exc) from None

    def _store_error(self, exc: Exception) -> StoreError:
        orig = getattr(exc, "orig", None)
        reason = str(orig if orig is not None else exc).strip().splitlines()[0] if str(exc) else type(exc).__name__
        low = reason.lower()
        kind = _classify(exc)
        if kind == "disconnect":
            return StoreError(f"cannot reach the database server or lost the connection to it ({reason})",
                              source=self.name)
        state = _sqlstate(exc) or ""
        if self.dialect == "postgresql":
            fatal = reason.partition("FATAL:")[2].strip()
            if fatal:
                if "does not exist" in fatal and "database" in fatal:
                    state = "3D000"
                elif any(w in fatal for w in ("authentication failed", "pg_hba.conf", "password", "role")):
                    state = "28000"
                reason = fatal
            if state == "55P03":
                return StoreError(f"the store stayed locked by another writer for over "
                                  f"{_BUSY_TIMEOUT_S:.0f} s ({reason}); try again", source=self.name)
            if state == "3D000":
                return StoreError(f"the database does not exist ({reason}); create it first "
                                  "(createdb), the tool makes its tables itself", source=self.name)
            if state.startswith("28"):
                return StoreError(f"the database server refused the login ({reason})", source=self.name)
            if state == "42501":
                return StoreError(f"the database role lacks a privilege this action needs ({reason}); "
                                  "see the README on grants", source=self.name)
            if state in ("53100", "53200", "53300"):
                return StoreError(f"the database server is out of resources ({reason}); try again "
                                  "later", source=self.name)
        if "file is not a database" in low:
            return StoreError("is not a deviation record store (not an SQLite database, or its "
                              f"header is damaged): {reason}", source=self.name)
        if "malformed" in low or "corrupt" in low:
            return StoreError(f"the database file is corrupt ({reason}); restore it from a backup",
                              source=self.name)
        if "locked" in low or "busy" in low:
            return StoreError(f"the store stayed locked by another process for over "
                              f"{_BUSY_TIMEOUT_S:.0f} s ({reason}); try again", source=self.name)
        if "unable to open" in low or "readonly" in low or "read-only" in low:
            return StoreError(f"cannot open or write the database file ({reason})", source=self.name)
        return StoreError(f"database error: {reason}", source=self.name)

    @contextmanager
    def _read(self) -> Iterator[sa.Connection]:
        with self._guard(), self.engine.connect() as conn:
            with conn.begin():
                yield conn

    @contextmanager
    def _write(self, *, lock_heads: bool = True) -> Iterator[sa.Connection]:
        with self._guard(), self.engine.connect() as conn:
            conn.execution_options(deviation_write=True)
            with conn.begin():
                if self.dialect == "postgresql":
                    # A bounded wait for any lock, like SQLite's busy timeout.
                    conn.exec_driver_sql(f"SET LOCAL lock_timeout = '{int(_BUSY_TIMEOUT_S * 1000)}ms'")
                    if lock_heads:
                        # Every writer takes the same lock: the chain heads read after it are
                        # current until COMMIT. Transaction-scoped, so a lost client frees it.
                        conn.exec_driver_sql(f"SELECT pg_advisory_xact_lock({_PG_WRITE_LOCK})")
                yield conn

    def _retrying(self, fn: Callable[[sa.Connection], Any], *, idempotent: bool = False) -> Any:
        """Run a write transaction ``fn(conn)``; retried when a concurrent writer took the same
        key (a few times, with backoff) and when the server went away (within the reconnect
        window).

        A failure before COMMIT was sent leaves nothing stored, so any ``fn`` is retried; a
        failure during COMMIT has an unknown outcome and is retried only when ``fn`` is
        ``idempotent`` (it recognises its own committed write, e.g. by an ``event_id``).
        """
        conflicts = 0
        lost = 0
        deadline: float | None = None
        while True:
            phase = "begin"
            try:
                with self._write() as conn:
                    phase = "write"
                    result = fn(conn)
                    phase = "commit"
                return result
            except StoreError as exc:
                cause = exc.__context__
                kind = _classify(cause) if isinstance(cause, Exception) else None
                if kind == "conflict" and conflicts < _WRITE_RETRIES - 1:
                    time.sleep(0.01 * (2 ** conflicts) * (0.5 + _jitter()))
                    conflicts += 1
                    continue
                if kind != "disconnect":
                    raise
                unknown = phase == "commit"
                now = time.monotonic()
                if deadline is None:
                    deadline = now + self.reconnect_s
                if (idempotent or not unknown) and now < deadline:
                    # Bounded exponential backoff with jitter, never past the window.
                    time.sleep(min(1.0, 0.05 * (2 ** lost), max(0.0, deadline - now)) * (0.5 + _jitter()))
                    lost += 1
                    continue
                raise self._unavailable(exc, unknown=unknown, tries=lost + 1) from None

    def _unavailable(self, exc: StoreError, *, unknown: bool, tries: int) -> StoreUnavailable:
        reason = exc.message
        if unknown:
            tail = ("the connection was lost while the write was committing, so it may have been "
                    "stored: check (deviation record show / list) before repeating it")
        else:
            tail = "nothing of this write was stored; repeat it when the server is back"
        waited = f"tried {tries} time(s) over {self.reconnect_s:g} s" if tries > 1 else "not retried"
        return StoreUnavailable(f"{reason}; {waited}; {tail}", source=self.name, outcome_unknown=unknown)

    # -- schema ------------------------------------------------------------------------------

    def _open(self) -> None:
        with self._guard():
            with self.engine.connect() as conn:
                names = set(sa.inspect(conn).get_table_names())
                version = self._check_tables(conn, names)
            if self.dialect == "sqlite" and self.path is not None:
                self._set_wal()
            if version < SCHEMA_VERSION:
                self._upgrade()

    def _check_tables(self, conn: sa.Connection, names: set[str]) -> int:
        if not names:
            return 0
        if "schema_version" not in names or "events" not in names:
            shown = ", ".join(sorted(names)[:8]) + (", ..." if len(names) > 8 else "")
            raise StoreError(f"is not a deviation record store (it holds other tables: {shown})",
                             source=self.name)
        rows = conn.execute(sa.select(schema_version_t.c.version, schema_version_t.c.app)).all()
        if not rows or any(r.app != APP_NAME for r in rows):
            raise StoreError("is not a deviation record store (its schema_version table is not ours)",
                             source=self.name)
        version = max(r.version for r in rows)
        if version > SCHEMA_VERSION:
            raise StoreError(
                f"was written by a newer deviation (schema version {version}; this deviation "
                f"{__version__} knows up to {SCHEMA_VERSION}); upgrade the tool, the store is "
                "left untouched", source=self.name)
        return version

    def _set_wal(self) -> None:
        with self.engine.connect() as conn:
            # Outside any transaction: SQLite cannot switch journal mode inside one.
            dbapi = conn.connection.driver_connection
            mode = dbapi.execute("PRAGMA journal_mode=WAL").fetchone()[0]
            if str(mode).lower() != "wal":  # pragma: no cover - e.g. a file system without locks
                raise StoreError(f"cannot use WAL journal mode (got {mode})", source=self.name)

    def _upgrade(self) -> None:
        for version, migration in enumerate(MIGRATIONS, start=1):
            with self._write(lock_heads=False) as conn:
                if self.dialect == "postgresql":
                    # Two tools creating one fresh schema at once: the second waits, then skips.
                    conn.exec_driver_sql(f"SELECT pg_advisory_xact_lock({_PG_SCHEMA_LOCK})")
                current = self._version_in(conn)
                if current >= version:
                    continue
                migration(conn)
                conn.execute(schema_version_t.insert().values(
                    version=version, app=APP_NAME, applied_utc=utc_now(), tool_version=__version__))

    @staticmethod
    def _version_in(conn: sa.Connection) -> int:
        if "schema_version" not in set(sa.inspect(conn).get_table_names()):
            return 0
        return conn.execute(sa.select(sa.func.max(schema_version_t.c.version))).scalar() or 0

    def schema_version(self) -> int:
        with self._read() as conn:
            return self._version_in(conn)

    def store_id(self) -> str:
        with self._read() as conn:
            return conn.execute(sa.select(store_info_t.c.store_id)).scalar_one()

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
        _check_columns(events_t, {"actor": actor, "role": role, "kind": kind, "utc": utc},
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
        _check_columns(records_t, {"lot": lot, "retort_id": retort_id, "process_id": process_id,
                                   "process_version": process_version}, source=self.name)
        check_first = event_id is not None
        eid = _checked_event_id(event_id)
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
        eid = _checked_event_id(event_id)
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
                    return _event_from_row(done)
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
            return _event_from_row(row, payload)

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
        return [_event_from_row(r) for r in rows]

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
            q = q.where(self._bytewise(records_t.c.created_utc) >= _bound(since, "since"))
        if until is not None:
            q = q.where(self._bytewise(records_t.c.created_utc) < _bound(until, "until"))
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
                        why = _header_mismatch(heads.get(row.record_id), row.payload)
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
        """A JSON-able bundle of records with their events (per-record chains intact)."""
        ids = list(record_ids) if record_ids is not None else self.record_ids()
        out = []
        with self._read() as conn:
            for rid in ids:
                head = conn.execute(sa.select(records_t).where(records_t.c.id == rid)).mappings().first()
                if head is None:
                    raise StoreError(f"no record {rid}", source=self.name)
                rows = conn.execute(sa.select(events_t).where(events_t.c.record_id == rid)
                                    .order_by(events_t.c.seq)).mappings().all()
                out.append({
                    "record": {k: head[k] for k in ("id", "lot", "retort_id", "process_id",
                                                    "process_version", "created_utc")},
                    "events": [{"seq": r["seq"], "kind": r["kind"], "utc": r["utc"], "actor": r["actor"],
                                "role": r["role"], "payload": json.loads(r["payload"]),
                                "prev_hash": r["prev_hash"], "hash": r["hash"]} for r in rows],
                })
            store_id = conn.execute(sa.select(store_info_t.c.store_id)).scalar_one()
        body = {"format": BUNDLE_FORMAT, "format_version": BUNDLE_VERSION, "exported_utc": utc_now(),
                "source_store": store_id, "tool_version": __version__, "records": out}
        body["sha256"] = _sha256(canonical_json(body))
        return body

    def import_bundle(self, bundle: dict, *, actor: str | None = None, role: str = "auditor") -> ImportResult:
        """Import a bundle: every record's chain is verified first, and a broken one refuses the
        whole import. Records keep their ids and event hashes; the store-wide chain gets new
        links marked with the bundle's origin."""
        actor = actor or _os_user()
        role = roles.check_role(actor, role, "import")
        checked = check_bundle(bundle)
        bundle_sha = bundle.get("sha256") or _sha256(canonical_json(bundle))
        origin = canonical_json({"import": bundle_sha, "utc": utc_now(), "actor": actor, "role": role,
                                 "source_store": bundle.get("source_store")})

        def write(conn: sa.Connection) -> ImportResult:
            added = events_added = unchanged = 0
            ids = []
            for rec, evs in checked:
                rid = rec["id"]
                ids.append(rid)
                head = conn.execute(sa.select(records_t).where(records_t.c.id == rid)).mappings().first()
                have = conn.execute(sa.select(events_t.c.seq, events_t.c.hash)
                                    .where(events_t.c.record_id == rid)
                                    .order_by(events_t.c.seq)).all()
                if head is None:
                    _check_columns(records_t, rec, source=self.name)
                    conn.execute(records_t.insert().values(**rec))
                    added += 1
                else:
                    if any(head[k] != rec[k] for k in rec):
                        raise StoreError(f"import refused: record {rid} exists here with another "
                                         "header (lot, retort, process or time)", source=self.name)
                    common = min(len(have), len(evs))
                    for i in range(common):
                        if have[i].hash != evs[i]["hash"]:
                            raise StoreError(
                                f"import refused: record {rid} diverges from the one in this store at "
                                f"event {i + 1}", source=self.name)
                    if len(evs) <= len(have):
                        unchanged += 1
                        continue
                new = evs[len(have):] if head is not None else evs
                for e in new:
                    self._insert_event(conn, record_id=rid, kind=e["kind"], utc=e["utc"], actor=e["actor"],
                                       role=e["role"], payload_json=e["payload_json"], origin=origin,
                                       given=(e["seq"], e["prev_hash"], e["hash"]))
                    events_added += 1
            return ImportResult(added, events_added, unchanged, ids)

        # Idempotent: a retry after a committed import finds every event in place (unchanged).
        return self._retrying(write, idempotent=True)

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


def _os_user() -> str:
    try:
        return getpass.getuser()
    except Exception:  # noqa: BLE001 - no user name in some containers
        return "unknown"


def _is_conflict(exc: Exception) -> bool:
    low = str(getattr(exc, "orig", exc)).lower()
    return ("unique" in low or "duplicate" in low or "serializ" in low or "deadlock" in low
            or "could not obtain lock" in low)


def _sqlstate(exc: BaseException | None) -> str | None:
    orig = getattr(exc, "orig", None)
    return getattr(orig, "sqlstate", None) if orig is not None else None


# SQLSTATEs of a server that went away or is not ready: admin/crash shutdown, cannot connect now
# (starting up or shutting down), and the connection-exception class 08.
_GONE_STATES = ("57P01", "57P02", "57P03")
_CONFLICT_STATES = ("40001", "40P01", "23505")
_GONE_WORDS = ("starting up", "shutting down", "recovery mode", "not yet accepting", "terminating connection",
               "too many clients", "remaining connection slots")


def _classify(exc: BaseException | None) -> str | None:
    """``"disconnect"`` (the server is unreachable or the connection died), ``"conflict"``
    (another writer got there first: worth retrying at once) or None."""
    if not isinstance(exc, sa_exc.DBAPIError):
        return None
    orig = exc.orig
    state = getattr(orig, "sqlstate", None)
    module = type(orig).__module__ or ""
    if module.startswith("psycopg"):
        if exc.connection_invalidated or state in _GONE_STATES or (state or "").startswith("08"):
            return "disconnect"
        # psycopg's own errors without a server SQLSTATE: a refused or broken connection, or a
        # server that answered the connection attempt with a FATAL message.
        if state is None and isinstance(exc, sa_exc.OperationalError):
            fatal = str(orig).partition("FATAL:")[2].lower()
            if fatal and not any(w in fatal for w in _GONE_WORDS):
                return None  # a wrong database, user or password: retrying will not help
            return "disconnect"
        if state in _CONFLICT_STATES:
            return "conflict"
        return None
    if exc.connection_invalidated:
        return "disconnect"
    if isinstance(exc, (sa_exc.IntegrityError, sa_exc.OperationalError)) and _is_conflict(exc):
        return "conflict"
    return None


def _jitter() -> float:
    return int.from_bytes(os.urandom(2), "big") / 65535.0


def _event_from_row(row, payload: dict | None = None) -> Event:
    get = row.get if isinstance(row, dict) else row.__getitem__
    return Event(record_id=get("record_id"), seq=get("seq"), kind=get("kind"), utc=get("utc"),
                 actor=get("actor"), role=get("role"),
                 payload=payload if payload is not None else json.loads(get("payload")),
                 prev_hash=get("prev_hash"), hash=get("hash"), global_seq=get("global_seq"),
                 global_prev_hash=get("global_prev_hash"), global_hash=get("global_hash"),
                 origin=get("origin"), event_id=get("event_id"))


_HEADER_KEYS = ("id", "lot", "retort_id", "process_id", "process_version", "created_utc")


def _checked_event_id(event_id: str | None) -> str:
    if event_id is None:
        return new_event_id()
    if not isinstance(event_id, str) or not event_id.strip() or len(event_id) > _EVENT_ID_MAX:
        raise StoreError(f"an event id must be a non-empty text of at most {_EVENT_ID_MAX} characters, "
                         f"found {event_id!r}")
    return event_id


def _check_columns(table: sa.Table, values: dict, *, source: str | None = None) -> None:
    """The same refusal on every backend for text a column cannot hold (SQLite would store any
    length; PostgreSQL refuses it, and NUL characters, with a database error)."""
    for key, value in values.items():
        if not isinstance(value, str):
            continue
        length = getattr(table.c[key].type, "length", None)
        if length is not None and len(value) > length:
            raise StoreError(f"{key} is {len(value)} characters long; the store keeps at most {length}",
                             source=source)
        if "\x00" in value:
            raise StoreError(f"{key} contains a NUL character", source=source)


def _header_mismatch(head, payload_json: str) -> str | None:
    """Why a records row disagrees with its entered event (None when it agrees)."""
    if head is None:
        return "the record's row in the records table is missing"
    try:
        rec = json.loads(payload_json).get("record", {})
    except (ValueError, AttributeError):
        return "entered payload is not a JSON object"
    diff = [k for k in _HEADER_KEYS if rec.get(k) != head[k]]
    if diff:
        return f"records table row differs from the entered event in {', '.join(diff)} (changed after writing)"
    return None


def _bound(value: str | date | datetime, which: str) -> str:
    """A ``created_utc`` comparison bound: dates whole-day, times converted to UTC."""
    if isinstance(value, datetime):
        dt = value if value.tzinfo else value.replace(tzinfo=timezone.utc)
    elif isinstance(value, date):
        dt = datetime(value.year, value.month, value.day, tzinfo=timezone.utc)
        if which == "until":
            dt += timedelta(days=1)
    else:
        text = str(value).strip()
        try:
            if len(text) == 10:
                d = date.fromisoformat(text)
                return _bound(d, which)
            dt = datetime.fromisoformat(text.replace("Z", "+00:00"))
        except ValueError:
            raise DeviationError(f"'{value}' is not a date (YYYY-MM-DD) or an ISO time",
                                 source=f"--{which}") from None
        dt = dt if dt.tzinfo else dt.replace(tzinfo=timezone.utc)
    return dt.astimezone(timezone.utc).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


def check_bundle(bundle: Any) -> list[tuple[dict, list[dict]]]:
    """Verify a bundle's records and chains; return them ready to insert.

    Raises :class:`StoreError` naming the record and event where a bundle was changed.
    """
    if not isinstance(bundle, dict) or bundle.get("format") != BUNDLE_FORMAT:
        raise StoreError(f"import refused: not a {BUNDLE_FORMAT} (no or wrong 'format')")
    if bundle.get("format_version") != BUNDLE_VERSION:
        raise StoreError(f"import refused: bundle format version {bundle.get('format_version')!r}; "
                         f"this tool reads version {BUNDLE_VERSION}")
    records = bundle.get("records")
    if not isinstance(records, list):
        raise StoreError("import refused: the bundle has no 'records' list")
    out, seen = [], set()
    for i, item in enumerate(records):
        if not isinstance(item, dict) or not isinstance(item.get("record"), dict) \
                or not isinstance(item.get("events"), list) or not item["events"]:
            raise StoreError(f"import refused: records[{i}] needs a 'record' object and a non-empty 'events' list")
        rec = {k: item["record"].get(k) for k in _HEADER_KEYS}
        rid = rec["id"]
        if not isinstance(rid, str) or not rid or rid in seen:
            raise StoreError(f"import refused: records[{i}] has a missing or repeated id {rid!r}")
        seen.add(rid)
        prev, evs = GENESIS_HASH, []
        for j, e in enumerate(item["events"]):
            where = f"import refused: record {rid} event {j + 1}"
            if not isinstance(e, dict):
                raise StoreError(f"{where}: not an object")
            try:
                seq, kind, utc, actor, role, h = (e["seq"], e["kind"], e["utc"], e["actor"], e["role"], e["hash"])
                payload = e["payload"]
            except KeyError as exc:
                raise StoreError(f"{where}: missing field {exc.args[0]}") from None
            kind_txt = f" ({kind})" if isinstance(kind, str) else ""
            if seq != j + 1:
                raise StoreError(f"{where}{kind_txt}: seq {seq!r}, expected {j + 1} (events missing or reordered)")
            if e.get("prev_hash") != prev:
                raise StoreError(f"{where}{kind_txt}: prev_hash does not match the previous event's hash")
            if not all(isinstance(v, str) for v in (kind, utc, actor, role, h)):
                raise StoreError(f"{where}: kind, utc, actor, role and hash must be text")
            payload_json = canonical_json(payload)
            if event_hash(rid, seq, kind, utc, actor, role, payload_json, prev) != h:
                raise StoreError(f"{where}{kind_txt}: content does not match its hash (changed after export)")
            if (seq == 1) != (kind == "entered"):
                raise StoreError(f"{where}{kind_txt}: a record starts with exactly one 'entered' event")
            if kind not in roles.EVENT_KINDS:
                raise StoreError(f"{where}: unknown event kind '{kind}'")
            evs.append({"seq": seq, "kind": kind, "utc": utc, "actor": actor, "role": role,
                        "payload_json": payload_json, "prev_hash": prev, "hash": h})
            prev = h
        why = _header_mismatch(rec, evs[0]["payload_json"])
        if why:
            raise StoreError(f"import refused: record {rid}: {why.replace('records table row', 'record header')}")
        out.append((rec, evs))
    if "sha256" in bundle:
        body = {k: v for k, v in bundle.items() if k != "sha256"}
        if _sha256(canonical_json(body)) != bundle["sha256"]:
            raise StoreError("import refused: the bundle's sha256 does not match its contents "
                             "(changed after export)")
    return out


def read_bundle(path: str | os.PathLike) -> dict:
    """Read a bundle file (JSON); StoreError when it is not readable JSON."""
    p = Path(path)
    try:
        return json.loads(p.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise StoreError("bundle file not found", source=str(p)) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise StoreError(f"cannot read the bundle: {exc}", source=str(p)) from None
    except json.JSONDecodeError as exc:
        raise StoreError(f"import refused: not JSON ({exc.msg} at line {exc.lineno} column {exc.colno})",
                         source=str(p)) from None


def write_bundle(bundle: dict, path: str | os.PathLike) -> None:
    """Write a bundle file atomically (a temporary file renamed into place)."""
    p = Path(path)
    tmp = p.with_name(p.name + ".tmp")
    try:
        tmp.write_text(json.dumps(bundle, ensure_ascii=False, allow_nan=False, indent=1), encoding="utf-8")
        os.replace(tmp, p)
    except OSError as exc:
        raise StoreError(f"cannot write the bundle: {exc.strerror}", source=str(p)) from None


__all__ = ["open_store", "Store", "Event", "RecordView", "RecordSummary", "VerifyResult", "ImportResult",
           "canonical_json", "event_hash", "global_hash", "check_bundle", "check_payload", "read_bundle",
           "write_bundle", "default_db_path", "SCHEMA_VERSION", "MIGRATIONS", "GENESIS_HASH", "utc_now",
           "new_record_id", "new_event_id", "describe_event", "event_summary", "StoreUnavailable"]
