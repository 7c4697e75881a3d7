"""Bundles: records with their events as one JSON file, for moving records between stores
(``deviation export`` / ``import``).

A bundle (format 2) carries each event with its hashes, the scheme that made them (``alg``:
``hmac-sha256`` under the key ``key_id``, or ``sha256`` for events written before keys) and its
store-wide link in the source store, and the source store's head. Format 1 bundles (before keys)
are read too.

Import obeys the same rules as the commands: every event of every record, in order, must pass
the role, record-state and payload checks of its kind (:mod:`.roles`, :func:`.events.check_payload`),
its record id must be one this tool makes, and its chain must link; a bundle that breaks one is
refused whole, naming the record and event. Hashes are checked where they can be: SHA-256 ones
always, HMAC ones with the source store's key (``source_key``); without it the events are imported
marked "signatures not verified". Every imported event keeps its own hash and carries its
``origin`` (the bundle, when, by whom, from which store, whether its signatures were verified),
shown wherever the event is shown.
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any, Sequence

import sqlalchemy as sa

from deviation import __version__
from deviation.errors import StoreError
from deviation.records import keys, roles
from deviation.records.backends import check_columns, os_user
from deviation.records.chains import (
    GENESIS_HASH,
    HEADER_KEYS,
    RECORD_ID_RE,
    canonical_json,
    event_hash,
    header_mismatch,
    is_utc,
    sha256_text,
    utc_now,
)
from deviation.errors import DeviationError
from deviation.records.events import ImportResult, check_payload, origin_info
from deviation.records.schema import LIBRARY_ID, events_t, records_t, store_info_t

BUNDLE_FORMAT = "deviation-record-bundle"

BUNDLE_VERSION = 2

READS = (1, 2)


def check_bundle(bundle: Any, *, source_key: bytes | None = None) -> list[tuple[dict, list[dict]]]:
    """Verify a bundle's records and chains (and, with ``source_key``, its signatures); return
    the records ready to insert (each event with its ``signatures``: ``sha256``, ``verified`` or
    ``not-verified``).

    Raises :class:`StoreError` naming the record and event where a bundle was changed.
    """
    if not isinstance(bundle, dict) or bundle.get("format") != BUNDLE_FORMAT:
        raise StoreError(f"import refused: not a {BUNDLE_FORMAT} (no or wrong 'format')")
    version = bundle.get("format_version")
    if version not in READS:
        raise StoreError(f"import refused: bundle format version {version!r}; "
                         f"this tool reads versions {', '.join(map(str, READS))}")
    records = bundle.get("records")
    if not isinstance(records, list):
        raise StoreError("import refused: the bundle has no 'records' list")
    source_kid = keys.key_id(source_key) if source_key is not None else None
    out, seen = [], set()
    for i, item in enumerate(records):
        if not isinstance(item, dict) or not isinstance(item.get("record"), dict) \
                or not isinstance(item.get("events"), list) or not item["events"]:
            raise StoreError(f"import refused: records[{i}] needs a 'record' object and a non-empty 'events' list")
        rec = {k: item["record"].get(k) for k in HEADER_KEYS}
        rid = rec["id"]
        if not isinstance(rid, str) or not RECORD_ID_RE.match(rid):
            raise StoreError(f"import refused: records[{i}] has the id {rid!r}, which is not a record id of "
                             "this tool (DR- and 12 characters A-Z, 2-7)")
        if rid in seen:
            raise StoreError(f"import refused: record {rid} appears twice in the bundle")
        seen.add(rid)
        for k in ("lot", "retort_id", "process_id", "created_utc"):
            if not isinstance(rec[k], str) or not rec[k].strip():
                raise StoreError(f"import refused: record {rid}: the header needs a non-empty text '{k}'")
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
            alg = e.get("alg", "sha256") if version >= 2 else "sha256"
            if alg == "sha256":
                if event_hash(rid, seq, kind, utc, actor, role, payload_json, prev) != h:
                    raise StoreError(f"{where}{kind_txt}: content does not match its hash (changed after export)")
                signatures = "sha256"
            elif alg == "hmac-sha256":
                if source_key is not None and e.get("key_id") == source_kid:
                    if event_hash(rid, seq, kind, utc, actor, role, payload_json, prev, source_key) != h:
                        raise StoreError(f"{where}{kind_txt}: content does not match its signature under the "
                                         "source store's key (changed after export)")
                    signatures = "verified"
                else:
                    signatures = "not-verified"
            else:
                raise StoreError(f"{where}{kind_txt}: unknown hash scheme {alg!r}")
            if (seq == 1) != (kind == "entered"):
                raise StoreError(f"{where}{kind_txt}: a record starts with exactly one 'entered' event")
            if kind not in roles.EVENT_KINDS:
                raise StoreError(f"{where}: unknown event kind '{kind}'")
            evs.append({"seq": seq, "kind": kind, "utc": utc, "actor": actor, "role": role, "payload": payload,
                        "payload_json": payload_json, "prev_hash": prev, "hash": h, "alg": alg,
                        "key_id": e.get("key_id") if alg == "hmac-sha256" else None, "signatures": signatures})
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


def check_rules(rid: str, evs: list[dict], start: int, st: roles.RecordState, last_utc: str | None) -> None:
    """Every event from index ``start`` on, in order, as the commands would have to accept it:
    role, record state, payload; refuses (naming the event) the first that breaks one."""
    for e in evs[start:]:
        where = f"import refused: record {rid} event {e['seq']} ({e['kind']})"
        try:
            check_payload(e["kind"], e["payload"], legacy=True)
            if e["kind"] == "entered" and not isinstance(e["payload"].get("snapshot"), dict):
                raise StoreError("an 'entered' event needs the case 'snapshot' (an object)")
            action = roles.KIND_ACTION[e["kind"]]
            role = roles.check_role(e["actor"], e["role"], action)
            if role != e["role"]:
                raise StoreError(f"role '{e['role']}' is not written as this tool writes it ('{role}')")
            roles.check_transition(rid, st, action, actor=e["actor"], role=role, payload=e["payload"])
            if e["kind"] == "evaluated":
                asked = e["payload"].get("snapshot_seq")
                if asked is not None and asked != st.snapshot_seq:
                    raise StoreError(f"the evaluation is of snapshot event {asked}, but the snapshot then in "
                                     f"force is event {st.snapshot_seq}")
            if not is_utc(e["utc"]):
                raise StoreError(f"time {e['utc']!r} is not a UTC time as the store writes it")
            if last_utc is not None and e["utc"] < last_utc:
                raise StoreError(f"time {e['utc']} is before the record's previous event ({last_utc})")
        except DeviationError as exc:
            raise StoreError(f"{where}: {exc.message}") from None
        st = roles.advance(st, e["kind"], e["payload"], e["seq"])
        last_utc = e["utc"]


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


def _scheme(row, signer) -> tuple[str, str | None]:
    """How an event's own hash was made: (``alg``, key id)."""
    if row["origin"] is not None:
        info = origin_info(row["origin"]) or {}
        if info.get("signatures") in (None, "sha256"):
            return "sha256", None
        return "hmac-sha256", info.get("key_id")
    if row["global_seq"] < signer.from_global_seq:
        return "sha256", None
    return "hmac-sha256", signer.key_id


def export_bundle(store, record_ids: Sequence[str] | None = None) -> dict:
    """A JSON-able bundle of records with their events (per-record chains and store-wide links)."""
    ids = list(record_ids) if record_ids is not None else store.record_ids()
    out = []
    with store._read() as conn:
        for rid in ids:
            head = conn.execute(sa.select(records_t).where(records_t.c.id == rid)).mappings().first()
            if head is None or rid == LIBRARY_ID:
                raise StoreError(f"no record {rid}", source=store.name)
            rows = conn.execute(sa.select(events_t).where(events_t.c.record_id == rid)
                                .order_by(events_t.c.seq)).mappings().all()
            events = []
            for r in rows:
                alg, kid = _scheme(r, store.signer)
                e = {"seq": r["seq"], "kind": r["kind"], "utc": r["utc"], "actor": r["actor"], "role": r["role"],
                     "payload": json.loads(r["payload"]), "prev_hash": r["prev_hash"], "hash": r["hash"],
                     "alg": alg, "origin": r["origin"], "global_seq": r["global_seq"],
                     "global_prev_hash": r["global_prev_hash"], "global_hash": r["global_hash"]}
                if kid:
                    e["key_id"] = kid
                events.append(e)
            out.append({"record": {k: head[k] for k in HEADER_KEYS}, "events": events})
        store_id = conn.execute(sa.select(store_info_t.c.store_id)).scalar_one()
        head_seq, head_hash = _head(conn)
    body = {"format": BUNDLE_FORMAT, "format_version": BUNDLE_VERSION, "exported_utc": utc_now(),
            "source_store": store_id, "tool_version": __version__, "key_id": store.signer.key_id,
            "head": {"global_seq": head_seq, "global_hash": head_hash}, "records": out}
    body["sha256"] = sha256_text(canonical_json(body))
    return body


def _head(conn: sa.Connection) -> tuple[int, str]:
    from deviation.records.ledger import global_head

    return global_head(conn)


def _existing_state(conn: sa.Connection, rid: str, upto: int) -> tuple[roles.RecordState, str | None]:
    rows = conn.execute(sa.select(events_t.c.seq, events_t.c.kind, events_t.c.payload, events_t.c.utc)
                        .where(events_t.c.record_id == rid, events_t.c.seq <= upto)
                        .order_by(events_t.c.seq)).all()
    st, last = roles.START, None
    for r in rows:
        st = roles.advance(st, r.kind, json.loads(r.payload), r.seq)
        last = r.utc
    return st, last


def import_bundle(store, bundle: dict, *, actor: str | None = None, role: str = "auditor",
                  source_key: bytes | None = None) -> ImportResult:
    """Import a bundle: every record's chain is verified and every event checked against the
    rules of its kind first; one failure refuses the whole import. Records keep their ids and
    event hashes; the store-wide chain gets new links marked with each event's origin."""
    actor = actor or os_user()
    role = roles.check_role(actor, role, "import")
    checked = check_bundle(bundle, source_key=source_key)
    bundle_sha = bundle.get("sha256") or sha256_text(canonical_json(bundle))
    when = utc_now()

    def origin(e: dict) -> str:
        o = {"import": bundle_sha, "utc": when, "actor": actor, "role": role,
             "source_store": bundle.get("source_store"), "signatures": e["signatures"]}
        if e["key_id"]:
            o["key_id"] = e["key_id"]
        return canonical_json(o)

    def write(conn: sa.Connection, rows: list) -> ImportResult:
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
                check_rules(rid, evs, 0, roles.START, None)
                check_columns(records_t, rec, source=store.name)
                conn.execute(records_t.insert().values(**rec))
                added += 1
                new = evs
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
                st, last_utc = _existing_state(conn, rid, len(have))
                check_rules(rid, evs, len(have), st, last_utc)
                new = evs[len(have):]
            for e in new:
                check_columns(events_t, {k: e[k] for k in ("actor", "role", "kind", "utc")}, source=store.name)
                rows.append(store._insert_event(
                    conn, record_id=rid, kind=e["kind"], utc=e["utc"], actor=e["actor"], role=e["role"],
                    payload_json=e["payload_json"], payload=e["payload"], origin=origin(e),
                    given=(e["seq"], e["prev_hash"], e["hash"]),
                    header=rec if e["seq"] == 1 else None))
                events_added += 1
        return ImportResult(added, events_added, unchanged, ids)

    # Idempotent: a retry after a committed import finds every event in place (unchanged).
    return store.write_anchored(write)
