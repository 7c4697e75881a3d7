"""The store's migrations, in order, and version 4: keyed chains, record summaries, and the
process library in the chain.

Version 4 rewrites no event. It

1. creates ``store_keys`` and ``record_summaries``;
2. loads the store's key (or makes one: see :mod:`.keys`) and seals, under it, the store head as
   it stands (``legacy_head``) and the position from which events are hashed with the key: the
   events already written keep their SHA-256 hashes, and a chain rebuilt over them no longer
   matches the sealed head;
3. folds every record's events into its summary row;
4. appends, for every process already filed in the library and every retirement, an event in
   the store-wide chain (``process-filed`` / ``process-retired``, marked ``migrated``) holding
   its SHA-256 as found, so a later edit of a filed process is caught.
"""

from __future__ import annotations

from typing import Callable

import sqlalchemy as sa

from deviation.records import keys, ledger
from deviation.records import processes as library
from deviation.records.chains import utc_now
from deviation.records.schema import (
    LIBRARY_ID,
    MIGRATIONS_1_TO_3,
    create_v4_tables,
    events_t,
    records_t,
    store_info_t,
    store_keys_t,
)


def _migrate_4(conn: sa.Connection) -> None:
    """Keys, summaries, the library in the chain (see the module docstring)."""
    create_v4_tables(conn)
    store_id = conn.execute(sa.select(store_info_t.c.store_id)).scalar_one()
    key = keys.load_or_create_key(store_id)
    head_seq, head_hash = ledger.global_head(conn)
    created = utc_now()
    kid = keys.key_id(key)
    conn.execute(store_keys_t.insert().values(
        key_id=kid, from_global_seq=head_seq + 1, legacy_head=head_hash, created_utc=created,
        mac=ledger.seal(key, store_id, kid, head_seq + 1, head_hash, created)))
    signer = ledger.Signer(kid, head_seq + 1, head_hash, key)
    _fill_summaries(conn)
    _chain_library(conn, signer, created)


def _fill_summaries(conn: sa.Connection) -> None:
    """One record at a time (a store of years does not fit in memory at once)."""
    ids = conn.execute(sa.select(records_t.c.id).where(records_t.c.id != LIBRARY_ID)).scalars().all()
    for rid in ids:
        rows = conn.execute(sa.select(events_t).where(events_t.c.record_id == rid)
                            .order_by(events_t.c.seq)).mappings().all()
        s = ledger.fold_events(rows)
        if s is not None:
            ledger.write_summary(conn, s, exists=False)


def _chain_library(conn: sa.Connection, signer: ledger.Signer, when: str) -> None:
    names = set(sa.inspect(conn).get_table_names())
    if "processes" not in names:
        return
    filings = conn.execute(sa.select(library.processes_t)).mappings().all()
    retirements = (conn.execute(sa.select(library.retirements_t).order_by(library.retirements_t.c.seq))
                   .mappings().all() if "process_retirements" in names else [])
    steps = sorted([(r["filed_utc"], 0, r) for r in filings] + [(r["retired_utc"], 1, r) for r in retirements],
                   key=lambda x: (x[0], x[1]))
    for _, is_retirement, r in steps:
        if is_retirement:
            payload = library.retirement_payload(r["process_id"], r["up_to_version"], r["reason"],
                                                 retired_utc=r["retired_utc"], migrated=True)
            kind = "process-retired"
        else:
            payload = library.filing_payload(r, migrated=True)
            kind = "process-filed"
        library.append_library_event(conn, signer, kind, payload, actor=r["actor"], role=r["role"], utc=when)


# Applied in order, each in its own transaction; index + 1 is the schema version it makes.
MIGRATIONS: list[Callable[[sa.Connection], None]] = [*MIGRATIONS_1_TO_3, _migrate_4]

SCHEMA_VERSION = len(MIGRATIONS)

__all__ = ["MIGRATIONS", "SCHEMA_VERSION"]
