"""Bundles: records with their events as one JSON file, for moving records between stores
(``deviation export`` / ``import``); every chain is checked before anything is imported."""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any, Sequence

import sqlalchemy as sa

from deviation import __version__
from deviation.errors import StoreError
from deviation.records import roles
from deviation.records.backends import check_columns, os_user
from deviation.records.chains import (
    GENESIS_HASH,
    HEADER_KEYS,
    canonical_json,
    event_hash,
    header_mismatch,
    sha256_text,
    utc_now,
)
from deviation.records.events import ImportResult
from deviation.records.schema import events_t, records_t, store_info_t

BUNDLE_FORMAT = "deviation-record-bundle"


BUNDLE_VERSION = 1


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
        rec = {k: item["record"].get(k) for k in HEADER_KEYS}
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
        why = header_mismatch(rec, evs[0]["payload_json"])
        if why:
            raise StoreError(f"import refused: record {rid}: {why.replace('records table row', 'record header')}")
        out.append((rec, evs))
    if "sha256" in bundle:
        body = {k: v for k, v in bundle.items() if k != "sha256"}
        if sha256_text(canonical_json(body)) != bundle["sha256"]:
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



def export_bundle(store, record_ids: Sequence[str] | None = None) -> dict:
    """A JSON-able bundle of records with their events (per-record chains intact)."""
    ids = list(record_ids) if record_ids is not None else store.record_ids()
    out = []
    with store._read() as conn:
        for rid in ids:
            head = conn.execute(sa.select(records_t).where(records_t.c.id == rid)).mappings().first()
            if head is None:
                raise StoreError(f"no record {rid}", source=store.name)
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
    body["sha256"] = sha256_text(canonical_json(body))
    return body

def import_bundle(store, bundle: dict, *, actor: str | None = None, role: str = "auditor") -> ImportResult:
    """Import a bundle: every record's chain is verified first, and a broken one refuses the
    whole import. Records keep their ids and event hashes; the store-wide chain gets new
    links marked with the bundle's origin."""
    actor = actor or os_user()
    role = roles.check_role(actor, role, "import")
    checked = check_bundle(bundle)
    bundle_sha = bundle.get("sha256") or sha256_text(canonical_json(bundle))
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
                check_columns(records_t, rec, source=store.name)
                conn.execute(records_t.insert().values(**rec))
                added += 1
            else:
                if any(head[k] != rec[k] for k in rec):
                    raise StoreError(f"import refused: record {rid} exists here with another "
                                     "header (lot, retort, process or time)", source=store.name)
                common = min(len(have), len(evs))
                for i in range(common):
                    if have[i].hash != evs[i]["hash"]:
                        raise StoreError(
                            f"import refused: record {rid} diverges from the one in this store at "
                            f"event {i + 1}", source=store.name)
                if len(evs) <= len(have):
                    unchanged += 1
                    continue
            new = evs[len(have):] if head is not None else evs
            for e in new:
                store._insert_event(conn, record_id=rid, kind=e["kind"], utc=e["utc"], actor=e["actor"],
                                   role=e["role"], payload_json=e["payload_json"], origin=origin,
                                   given=(e["seq"], e["prev_hash"], e["hash"]))
                events_added += 1
        return ImportResult(added, events_added, unchanged, ids)

    # Idempotent: a retry after a committed import finds every event in place (unchanged).
    return store._retrying(write, idempotent=True)
