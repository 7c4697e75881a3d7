"""Hash chains of the store: the canonical JSON that is hashed, the event and store-wide link
hashes, times and ids.

Every event carries the SHA-256 of ``{record_id, seq, kind, utc, actor, role, payload, prev_hash}``
(a chain per record); a second chain runs over the whole store in ``global_seq`` order.
"""

from __future__ import annotations

import base64
import hashlib
import json
import os
import uuid
from datetime import datetime, timezone
from typing import Any

from deviation.errors import StoreError

GENESIS_HASH = "0" * 64


def canonical_json(obj: Any) -> str:
    """The canonical JSON text hashed by the store (sorted keys, no spaces, UTF-8, no NaN)."""
    try:
        return json.dumps(obj, sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                          allow_nan=False)
    except ValueError as exc:  # NaN or Infinity somewhere in the payload
        raise StoreError(f"cannot store a payload holding NaN or Infinity ({exc})") from None
    except TypeError as exc:
        raise StoreError(f"cannot store a payload that is not plain JSON data ({exc})") from None


def sha256_text(text: str) -> str:
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
    return sha256_text(head[:-1] + ',"payload":' + payload_json + "," + tail[1:])


def global_hash(global_seq: int, record_id: str, seq: int, hash_: str, origin: str | None,
                global_prev_hash: str) -> str:
    """SHA-256 of the store-wide chain link of one event."""
    return sha256_text(canonical_json({"global_prev_hash": global_prev_hash, "global_seq": global_seq,
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


HEADER_KEYS = ("id", "lot", "retort_id", "process_id", "process_version", "created_utc")


def header_mismatch(head, payload_json: str) -> str | None:
    """Why a records row disagrees with its entered event (None when it agrees)."""
    if head is None:
        return "the record's row in the records table is missing"
    try:
        rec = json.loads(payload_json).get("record", {})
    except (ValueError, AttributeError):
        return "entered payload is not a JSON object"
    diff = [k for k in HEADER_KEYS if rec.get(k) != head[k]]
    if diff:
        return f"records table row differs from the entered event in {', '.join(diff)} (changed after writing)"
    return None
