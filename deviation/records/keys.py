"""The store's secret key and its anchor file, both kept outside the database.

Key
---
Every event written since a store got its key is signed with HMAC-SHA-256 under it, so a
chain recomputed without the key does not verify. The key is 32 random bytes written as 64 hex
digits; it is created on the store's first use (its upgrade) and never stored in the database,
which keeps only a key id (an HMAC of a fixed text, so a wrong key is told apart from a broken
chain). Where it is, in order:

1. ``DEVIATION_KEY``: the key itself (64 hex digits), e.g. from a service's secret store;
2. ``DEVIATION_KEY_FILE``: a file holding it (one per store, readable only by the tool's users);
3. ``<key dir>/<store id>.key``, where the key dir is ``DEVIATION_KEY_DIR`` or ``keys/`` in the
   user configuration directory (``~/.config/deviation/keys`` on Linux).

A terminal of a PostgreSQL store needs the same key as the one that created it: copy the file,
or set ``DEVIATION_KEY_FILE``/``DEVIATION_KEY``. A store whose key is lost stays readable, but
no new event can be signed and ``verify`` cannot check signatures (it says so and fails).

Anchors
-------
After each write the store appends the new store head (``global_seq``, ``global_hash``) to an
append-only anchor file (``DEVIATION_ANCHOR_FILE``, else ``<key dir>/<store id>.anchors``), one
JSON line per head; ``deviation verify`` checks every anchor it finds (or ``--anchors FILE``), so
events deleted from the end, or a chain rebuilt, no longer match. With
``DEVIATION_ANCHOR_PRINT=1`` the commands also print each new head on standard error, for a
paper log. An anchor is worth what its keeping is worth: kept where the database's editors
cannot reach (another machine, a paper log), it catches even someone who holds the key.
"""

from __future__ import annotations

import hmac
import hashlib
import json
import os
import re
from dataclasses import dataclass
from pathlib import Path

from deviation.errors import StoreError

KEY_ENV = "DEVIATION_KEY"
KEY_FILE_ENV = "DEVIATION_KEY_FILE"
KEY_DIR_ENV = "DEVIATION_KEY_DIR"
ANCHOR_FILE_ENV = "DEVIATION_ANCHOR_FILE"
ANCHOR_PRINT_ENV = "DEVIATION_ANCHOR_PRINT"

_KEY_BYTES = 32
_HEX_RE = re.compile(r"[0-9a-fA-F]{64}\Z")
_KEY_ID_TEXT = b"deviation store key id"


def key_dir() -> Path:
    """Where keys and anchor files are kept unless told otherwise."""
    env = os.environ.get(KEY_DIR_ENV)
    if env:
        return Path(env).expanduser()
    import platformdirs

    return Path(platformdirs.user_config_dir("deviation")) / "keys"


def key_id(key: bytes) -> str:
    """The id of a key (32 hex digits): an HMAC of a fixed text, which reveals nothing of the key."""
    return hmac.new(key, _KEY_ID_TEXT, hashlib.sha256).hexdigest()[:32]


@dataclass(frozen=True)
class KeySource:
    """Where the key of a store is looked for, in words and as a path (None: the environment)."""

    where: str
    path: Path | None


def key_source(store_id: str) -> KeySource:
    if os.environ.get(KEY_ENV):
        return KeySource(f"the environment variable {KEY_ENV}", None)
    if os.environ.get(KEY_FILE_ENV):
        p = Path(os.environ[KEY_FILE_ENV]).expanduser()
        return KeySource(f"{p} ({KEY_FILE_ENV})", p)
    p = key_dir() / f"{store_id}.key"
    return KeySource(str(p), p)


def _parse(text: str, where: str) -> bytes:
    text = text.strip()
    if not _HEX_RE.match(text):
        raise StoreError(f"the store key in {where} is not 64 hex digits")
    return bytes.fromhex(text)


def load_key(store_id: str) -> bytes | None:
    """The store's key from the environment or its file; None when there is none."""
    src = key_source(store_id)
    if src.path is None:
        return _parse(os.environ[KEY_ENV], src.where)
    try:
        return _parse(src.path.read_text(encoding="ascii"), src.where)
    except FileNotFoundError:
        return None
    except (OSError, UnicodeDecodeError) as exc:
        raise StoreError(f"cannot read the store key {src.where}: {exc}") from None


def read_key_file(path: str | os.PathLike) -> bytes:
    """A key file given on the command line (``import --source-key FILE``)."""
    p = Path(path).expanduser()
    try:
        return _parse(p.read_text(encoding="ascii"), str(p))
    except FileNotFoundError:
        raise StoreError(f"key file not found: {p}") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise StoreError(f"cannot read the key file {p}: {exc}") from None


def load_or_create_key(store_id: str) -> bytes:
    """The store's key; a new one is made (and written, readable by the owner only) if none is
    found. Two processes making it at once agree: the file is created exclusively."""
    key = load_key(store_id)
    if key is not None:
        return key
    src = key_source(store_id)
    assert src.path is not None
    new = os.urandom(_KEY_BYTES)
    try:
        src.path.parent.mkdir(parents=True, exist_ok=True, mode=0o700)
        fd = os.open(src.path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    except FileExistsError:
        key = load_key(store_id)
        if key is None:  # pragma: no cover - removed again in between
            raise StoreError(f"the store key {src.where} vanished while it was being made") from None
        return key
    except OSError as exc:
        raise StoreError(f"cannot write the new store key {src.where}: {exc.strerror}") from None
    try:
        os.write(fd, (new.hex() + "\n").encode("ascii"))
        os.fsync(fd)
    finally:
        os.close(fd)
    return new


# ---------------------------------------------------------------------------------------------
# Anchors


def anchor_path(store_id: str) -> Path:
    env = os.environ.get(ANCHOR_FILE_ENV)
    return Path(env).expanduser() if env else key_dir() / f"{store_id}.anchors"


def append_anchor(path: Path, store_id: str, global_seq: int, global_hash: str, utc: str) -> str | None:
    """Append one head to the anchor file (one ``write`` of one line, so writers never
    interleave); returns why it could not be written (None when written)."""
    line = json.dumps({"store_id": store_id, "global_seq": global_seq, "global_hash": global_hash,
                       "utc": utc}, separators=(",", ":")) + "\n"
    try:
        path.parent.mkdir(parents=True, exist_ok=True, mode=0o700)
        fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_APPEND, 0o600)
        try:
            os.write(fd, line.encode("ascii"))
        finally:
            os.close(fd)
    except OSError as exc:
        return f"cannot write the anchor file {path}: {exc.strerror}"
    return None


@dataclass(frozen=True)
class Anchors:
    """Heads read from an anchor file: ``{global_seq: (global_hash, utc)}`` for this store."""

    path: Path
    heads: dict[int, tuple[str, str]]
    unreadable_lines: int
    other_stores: int


def read_anchors(path: Path, store_id: str) -> Anchors:
    """The heads noted for ``store_id`` (a line cut short by a crash is counted, not fatal)."""
    try:
        text = path.read_text(encoding="utf-8", errors="replace")
    except FileNotFoundError:
        raise StoreError(f"anchor file not found: {path}") from None
    except OSError as exc:
        raise StoreError(f"cannot read the anchor file {path}: {exc.strerror}") from None
    heads: dict[int, tuple[str, str]] = {}
    bad = other = 0
    for line in text.splitlines():
        if not line.strip():
            continue
        try:
            d = json.loads(line)
            seq, h = int(d["global_seq"]), str(d["global_hash"])
        except (ValueError, KeyError, TypeError):
            bad += 1
            continue
        if d.get("store_id") not in (None, store_id):
            other += 1
            continue
        heads[seq] = (h, str(d.get("utc", "")))
    return Anchors(path, heads, bad, other)


def parse_expected_head(text: str) -> tuple[int | None, str]:
    """``--expect-head``: ``HASH`` or ``SEQ:HASH`` (64 hex digits) -> (seq or None, hash)."""
    seq_txt, sep, h = text.strip().rpartition(":")
    h = h.strip().lower()
    if not re.fullmatch(r"[0-9a-f]{64}", h) or (sep and not seq_txt.strip().isdigit()):
        from deviation.errors import DeviationError

        raise DeviationError(f"'{text}' is not a store head: give the 64 hex digits verify printed, "
                             "or SEQ:HASH", source="--expect-head")
    return (int(seq_txt) if sep else None), h


def print_heads() -> bool:
    """Whether commands print each new store head for a paper log (``DEVIATION_ANCHOR_PRINT``)."""
    return os.environ.get(ANCHOR_PRINT_ENV, "").strip().lower() in ("1", "true", "yes", "on")
