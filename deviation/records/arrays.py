"""Compact evaluated events: the figures, flags and guidance are stored; the long arrays (the
cold-spot history: ``time_min``, ``retort_C``, ``temperature_C``, ``lethal_rate``,
``cumulative_F_min``) are stored only as a digest and recomputed on demand from the record's
snapshot, then checked against it.

Which values are arrays is decided generically, not from a list of names: every list of at
least :data:`MIN_ARRAY` numbers anywhere in the evaluation (by its path, ``cold_spot.time_min``)
goes into the digest; every other key, present or added later, is kept as it is.

The digest (``arrays`` in the ``evaluated`` payload) is ``{"format", "sha256", "lengths",
"last"}``: a SHA-256 of the arrays, each array's length and last value. A recomputation that
gives the same SHA-256 gave the stored arrays bit for bit; one that gives other bits but the
same lengths and last values within the replay tolerance (another numerical library or
platform) is told apart from one that differs. What the SHA-256 covers (``format``):

- ``2`` (what new events get): the canonical JSON of ``[[path, length, "f8"|"json"], ...]``
  (paths sorted), a newline, then each array in that order: an array of floats only as its
  IEEE 754 binary64 values, little-endian (``"f8"``), any other (an integer in it) as its
  canonical JSON (``"json"``). Reading the bits is some twenty times faster than writing the
  decimal text of every number, with the same meaning: same SHA-256, same bits.
- no ``format`` (format 1, events written before): the canonical JSON of ``{path: array}``.
  Such a digest is checked as it was made; stored events are never rewritten.
"""

from __future__ import annotations

import array
import copy
import hashlib
import math
import sys
from typing import Any

from deviation.records.chains import canonical_json, sha256_text

#: A list of at least this many numbers is an array (kept only as a digest).
MIN_ARRAY = 16
_RTOL, _ATOL = 1e-6, 1e-9


_NUMBER_TYPES = frozenset((int, float))


def _is_array(value: Any) -> bool:
    # The types of the items, read at C speed (bool is not an int here: its type is bool).
    return isinstance(value, list) and len(value) >= MIN_ARRAY and set(map(type, value)) <= _NUMBER_TYPES


def split_arrays(evaluation: dict) -> tuple[dict, dict[str, list]]:
    """``(evaluation without its arrays, {path: array})``; the evaluation is not changed."""
    arrays: dict[str, list] = {}

    def walk(d: dict, prefix: str) -> dict:
        out = {}
        for k, v in d.items():
            path = f"{prefix}{k}"
            if _is_array(v):
                arrays[path] = v
            elif isinstance(v, dict):
                out[k] = walk(v, path + ".")
            else:
                out[k] = v
        return out

    return walk(evaluation, ""), arrays


#: The digest format new events are written with (see the module docstring).
DIGEST_FORMAT = 2


def _sha256_binary(arrays: dict[str, list]) -> str:
    """Format 2's SHA-256 (module docstring)."""
    paths = sorted(arrays)
    kinds = ["f8" if set(map(type, arrays[p])) == {float} else "json" for p in paths]
    h = hashlib.sha256(canonical_json([[p, len(arrays[p]), k] for p, k in zip(paths, kinds)]).encode("utf-8")
                       + b"\n")
    for p, k in zip(paths, kinds):
        if k == "f8":
            values = array.array("d", arrays[p])
            if sys.byteorder != "little":
                values.byteswap()
            h.update(values.tobytes())
        else:
            h.update(canonical_json(arrays[p]).encode("utf-8"))
    return h.hexdigest()


def arrays_digest(arrays: dict[str, list], *, digest_format: int = DIGEST_FORMAT) -> dict:
    """The digest kept in place of the arrays (``digest_format`` 2, or 1 to check an older one)."""
    if digest_format == 1:
        head = {"sha256": sha256_text(canonical_json(arrays))}
    elif digest_format == 2:
        head = {"format": 2, "sha256": _sha256_binary(arrays)}
    else:
        raise ValueError(f"unknown arrays digest format {digest_format!r} (known: 1, 2)")
    return {**head, "lengths": {p: len(a) for p, a in sorted(arrays.items())},
            "last": {p: a[-1] for p, a in sorted(arrays.items())}}


def compact_evaluation(evaluation: dict) -> tuple[dict, dict | None]:
    """``(compact evaluation, digest)``; the digest is None when the evaluation has no arrays."""
    compact, arrays = split_arrays(evaluation)
    return compact, (arrays_digest(arrays) if arrays else None)


def merge_arrays(compact: dict, arrays: dict[str, list]) -> dict:
    """The compact evaluation with the arrays put back at their paths (a new dict)."""
    out = copy.deepcopy(compact)
    for path, values in arrays.items():
        node = out
        *parents, last = path.split(".")
        for p in parents:
            node = node.setdefault(p, {})
        node[last] = values
    return out


def _close(a: Any, b: Any) -> bool:
    if isinstance(a, (int, float)) and isinstance(b, (int, float)):
        if math.isinf(a) or math.isinf(b):
            return a == b
        return abs(a - b) <= _ATOL + _RTOL * abs(a)
    return a == b


def check_arrays(digest: dict, arrays: dict[str, list]) -> dict:
    """How recomputed arrays compare with a stored digest.

    ``status``: ``identical`` (same SHA-256), ``within-tolerance`` (other bits; same paths,
    lengths and last values within rel 1e-6 + abs 1e-9), or ``differs``; ``detail`` in words.
    The recomputed arrays are digested in the stored digest's format; one of a format this
    version does not know ``differs`` (said so).
    """
    fmt = digest.get("format", 1)
    if type(fmt) is not int or fmt not in (1, 2):
        return {"status": "differs", "detail": f"the stored digest has format {fmt!r}, which this version "
                                               "cannot check (known: 1, 2)"}
    now = arrays_digest(arrays, digest_format=fmt)
    if now["sha256"] == digest.get("sha256"):
        return {"status": "identical", "detail": "the recomputed arrays are the stored ones, bit for bit"}
    if now["lengths"] == digest.get("lengths") and all(
            _close(digest.get("last", {}).get(p), v) for p, v in now["last"].items()):
        return {"status": "within-tolerance",
                "detail": "the recomputed arrays are not bit-identical to the stored ones but agree in "
                          "length and final values within the replay tolerance (another numerical "
                          "library or platform)"}
    changed = sorted(p for p in set(now["lengths"]) | set(digest.get("lengths", {}))
                     if now["lengths"].get(p) != digest.get("lengths", {}).get(p)
                     or not _close(digest.get("last", {}).get(p), now["last"].get(p)))
    return {"status": "differs",
            "detail": "the recomputed arrays differ from the stored digest"
                      + (f" ({', '.join(changed)})" if changed else "")}


def recompute(payload: dict, snapshot: dict) -> tuple[dict, dict]:
    """The full evaluation of an ``evaluated`` payload: its stored figures with the arrays
    recomputed from ``snapshot`` (the stored options), and the check against the digest.

    The figures are the stored ones (what was signed off); only the arrays are recomputed. An
    evaluation stored whole (before compact events) is returned as it is.
    """
    stored = payload.get("evaluation") or {}
    digest = payload.get("arrays")
    if not digest:
        _, arrays = split_arrays(stored)
        status = "stored" if arrays else "none"
        return stored, {"status": status, "detail": "the arrays are stored with the evaluation"
                        if arrays else "the evaluation holds no arrays"}
    from deviation.errors import DeviationError
    from deviation.evaluate import default_rule_set, evaluate_snapshot

    opts = payload.get("options") or {}
    try:
        now = evaluate_snapshot(snapshot, conservative=bool(opts.get("conservative", stored.get("conservative"))),
                                rule_set=default_rule_set(),
                                what_if=bool(opts.get("what_if", True))).model_dump(mode="json")
    except DeviationError as exc:
        return stored, {"status": "not-recomputed", "detail": f"the arrays cannot be recomputed: {exc}"}
    _, arrays = split_arrays(now)
    return merge_arrays(stored, arrays), check_arrays(digest, arrays)


__all__ = ["MIN_ARRAY", "DIGEST_FORMAT", "split_arrays", "arrays_digest", "compact_evaluation", "merge_arrays",
           "check_arrays", "recompute"]
