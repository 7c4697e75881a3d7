"""Hash chains of the store: the canonical JSON that is hashed, the event and store-wide link
hashes, times and ids.

Every event carries a hash of ``{record_id, seq, kind, utc, actor, role, payload, prev_hash}``
(a chain per record); a second chain runs over the whole store in ``global_seq`` order, over
``{global_seq, record_id, seq, hash, origin, global_prev_hash}``.

Two schemes, told apart by the event's position in the store (see :mod:`deviation.records.keys`):

- **keyed** (every event written since the store got its key): both hashes are HMAC-SHA-256
  under the store's secret key, so a chain recomputed by someone without the key does not
  verify. An imported event keeps the hash its own store gave it; its store-wide link here
  also covers the SHA-256 of its content (``content``), so the content is bound under this
  store's key.
- **legacy** (events written before the upgrade that brought keys): plain SHA-256, as written;
  the upgrade sealed their head under the key.
"""

from __future__ import annotations

import base64
import hashlib
import hmac
import json
import os
import re
import uuid
from datetime import datetime, timezone
from typing import Any

from deviation.errors import StoreError

GENESIS_HASH = "0" * 64

#: A record id made by this tool: ``DR-`` and 12 base32 characters.
RECORD_ID_RE = re.compile(r"DR-[A-Z2-7]{12}\Z")


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


def mac_text(key: bytes, text: str) -> str:
    """HMAC-SHA-256 of a text (UTF-8) under ``key``, as 64 hex digits (RFC 2104)."""
    return hmac.new(key, text.encode("utf-8"), hashlib.sha256).hexdigest()


def digest(text: str, key: bytes | None) -> str:
    """HMAC-SHA-256 under ``key``, or plain SHA-256 when ``key`` is None (legacy events)."""
    return sha256_text(text) if key is None else mac_text(key, text)


def event_text(record_id: str, seq: int, kind: str, utc: str, actor: str, role: str,
               payload_json: str, prev_hash: str) -> str:
    """The canonical JSON of an event, given its payload as canonical JSON text.

    Equal to ``canonical_json({... "payload": json.loads(payload_json) ...})`` when
    ``payload_json`` is canonical; the payload text is spliced in (keys sort as actor, kind,
    payload, prev_hash, record_id, role, seq, utc) so a large payload is not parsed again, and
    any change to the stored text, even whitespace, changes the hash.
    """
    head = canonical_json({"actor": actor, "kind": kind})
    tail = canonical_json({"prev_hash": prev_hash, "record_id": record_id, "role": role,
                           "seq": seq, "utc": utc})
    return head[:-1] + ',"payload":' + payload_json + "," + tail[1:]


def event_hash(record_id: str, seq: int, kind: str, utc: str, actor: str, role: str,
               payload_json: str, prev_hash: str, key: bytes | None = None) -> str:
    """The hash of an event: HMAC-SHA-256 of :func:`event_text` under ``key`` (SHA-256 without)."""
    return digest(event_text(record_id, seq, kind, utc, actor, role, payload_json, prev_hash), key)


def link_text(global_seq: int, record_id: str, seq: int, hash_: str, origin: str | None,
              global_prev_hash: str, content: str | None = None) -> str:
    """The canonical JSON of one store-wide chain link (``content``: an imported event's SHA-256)."""
    link = {"global_prev_hash": global_prev_hash, "global_seq": global_seq, "hash": hash_,
            "origin": origin, "record_id": record_id, "seq": seq}
    if content is not None:
        link["content_sha256"] = content
    return canonical_json(link)


def global_hash(global_seq: int, record_id: str, seq: int, hash_: str, origin: str | None,
                global_prev_hash: str, key: bytes | None = None, content: str | None = None) -> str:
    """The hash of a store-wide chain link (HMAC-SHA-256 under ``key``; SHA-256 without)."""
    return digest(link_text(global_seq, record_id, seq, hash_, origin, global_prev_hash, content), key)


def utc_now() -> str:
    """Now in UTC, ISO-8601 with microseconds and ``Z``."""
    return datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


_UTC_RE = re.compile(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d(\.\d{1,6})?Z\Z")


def is_utc(text: Any) -> bool:
    """An ISO-8601 UTC time as the store writes it (``2024-05-01T08:00:00.000000Z``)."""
    if not isinstance(text, str) or not _UTC_RE.match(text):
        return False
    try:
        datetime.fromisoformat(text.replace("Z", "+00:00"))
    except ValueError:
        return False
    return True


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
