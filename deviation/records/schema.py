"""The store's tables and their migrations. When a table changes, freeze its old definition
inside the migration that made it and add a migration; never edit a migration that has shipped.
"""

from __future__ import annotations

import base64
import os
from typing import Callable

import sqlalchemy as sa

from deviation.records.chains import utc_now

APP_NAME = "deviation"


EVENT_ID_MAX = 40


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
    events.append_column(sa.Column("event_id", sa.String(EVENT_ID_MAX), nullable=True))
    sa.Index("uq_events_event_id", events.c.event_id, unique=True)


def _define_v4(md: sa.MetaData) -> dict[str, sa.Table]:
    """Version 4: the store's key (its id and where keyed hashing starts, sealed under the key)
    and the derived record summaries."""
    store_keys = sa.Table(
        "store_keys", md,
        sa.Column("key_id", sa.String(64), primary_key=True),
        sa.Column("from_global_seq", sa.Integer, nullable=False),  # first event hashed with the key
        sa.Column("legacy_head", sa.String(64), nullable=False),  # global_hash before it (sealed)
        sa.Column("created_utc", sa.String(32), nullable=False),
        sa.Column("mac", sa.String(64), nullable=False),  # HMAC of the row under the key
    )
    summaries = sa.Table(
        "record_summaries", md,
        sa.Column("id", sa.String(64), primary_key=True),
        sa.Column("lot", sa.String(200), nullable=False),
        sa.Column("retort_id", sa.String(200), nullable=False),
        sa.Column("process_id", sa.String(200), nullable=False),
        sa.Column("process_version", sa.String(200), nullable=True),
        sa.Column("created_utc", sa.String(32), nullable=False),
        sa.Column("plant", sa.Text, nullable=True),
        sa.Column("state", sa.String(32), nullable=False),
        sa.Column("events", sa.Integer, nullable=False),
        sa.Column("last_utc", sa.String(32), nullable=False),
        sa.Column("last_global_seq", sa.Integer, nullable=False),
        sa.Column("guidance", sa.String(64), nullable=True),
        sa.Column("delivered_F_min", sa.Float, nullable=True),
        sa.Column("target_F_min", sa.Float, nullable=True),
        sa.Column("held", sa.Boolean, nullable=False),
        sa.Column("decision", sa.Text, nullable=True),
        sa.Column("decision_words", sa.Text, nullable=True),
        sa.Column("decided_by", sa.String(200), nullable=True),
        sa.Column("decided_utc", sa.String(32), nullable=True),
        sa.Column("superseded", sa.Integer, nullable=False),
        sa.Column("imported", sa.Boolean, nullable=False),
        sa.Column("format", sa.Integer, nullable=False),
        sa.Column("detail", sa.Text, nullable=False),
        sa.Index("ix_record_summaries_created", "created_utc"),
        sa.Index("ix_record_summaries_state", "state"),
    )
    return {"store_keys": store_keys, "record_summaries": summaries}


metadata = sa.MetaData()


_T = {**_define_v1(metadata), **_define_v2(metadata), **_define_v4(metadata)}


_define_v3(_T["events"])


schema_version_t, store_info_t, records_t, events_t, drafts_t = (
    _T["schema_version"], _T["store_info"], _T["records"], _T["events"], _T["drafts"])
store_keys_t, summaries_t = _T["store_keys"], _T["record_summaries"]

#: The pseudo-record whose events chain the process library (filings and retirements).
LIBRARY_ID = "LIBRARY"
LIBRARY_KINDS = ("process-filed", "process-retired")


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
    conn.exec_driver_sql(f"ALTER TABLE events ADD COLUMN event_id VARCHAR({EVENT_ID_MAX})")
    conn.exec_driver_sql("CREATE UNIQUE INDEX uq_events_event_id ON events (event_id)")


def create_v4_tables(conn: sa.Connection) -> None:
    """The tables of version 4 (the rest of that migration is in :mod:`.migrate`)."""
    md = sa.MetaData()
    tables = _define_v4(md)
    md.create_all(conn, tables=list(tables.values()))


# Applied in order, each in its own transaction; index + 1 is the schema version it makes.
# Version 4 (keys, summaries, the library in the chain) is in :mod:`deviation.records.migrate`.
MIGRATIONS_1_TO_3: list[Callable[[sa.Connection], None]] = [_migrate_1, _migrate_2, _migrate_3]
