"""``verify``: what it checks, and what it proves.

In one pass over the events in store order:

- both chains link (no gap in ``global_seq`` or a record's ``seq``; each ``prev_hash`` is the
  hash before it), every hash recomputes: HMAC-SHA-256 under the store's key for events written
  since the store has one, SHA-256 for the events before (whose last link must equal the head
  sealed under the key), an imported event's store-wide link over its content's SHA-256;
- every record starts with its ``entered`` event and its row agrees with it; event kinds are
  known; the library's events are library events;

then the key's row against its seal, the process library against its chain events, the summary
table against the records folded again (rebuilt where it differs), and the store head against
every anchor noted in the anchor file and ``--expect-head``.

What it proves: no event written under the key was changed, inserted or removed by someone
without the key, and (with anchors kept out of reach) nothing was cut from the end or rebuilt
since a head was noted. What it cannot prove: that the events were true when written (``--actor``
is what the user said), or anything against a holder of the key who also controls every anchor.
"""

from __future__ import annotations

import json
from pathlib import Path

import sqlalchemy as sa

from deviation.records import keys, ledger, roles, summaries
from deviation.records import processes as library
from deviation.records.chains import GENESIS_HASH, event_hash, global_hash, header_mismatch
from deviation.records.events import VerifyResult, origin_info
from deviation.records.schema import LIBRARY_ID, LIBRARY_KINDS, events_t, records_t, store_info_t, summaries_t

_MAX_LISTED = 100


class _Problems:
    def __init__(self) -> None:
        self.items: list[dict] = []
        self.count = 0

    def add(self, reason: str, *, record_id=None, seq=None, kind=None, global_seq=None) -> None:
        self.count += 1
        if len(self.items) < _MAX_LISTED:
            self.items.append({"record_id": record_id, "seq": seq, "kind": kind, "global_seq": global_seq,
                               "reason": reason})

    def on(self, row, reason: str) -> None:
        self.add(reason, record_id=row.record_id, seq=row.seq, kind=row.kind, global_seq=row.global_seq)


def _imported_hash_ok(row, key: bytes | None) -> bool | None:
    """An imported event's own hash, where it can be checked here (None: signed by another
    store's key, bound here through its store-wide link)."""
    info = origin_info(row.origin) or {}
    if info.get("signatures") == "sha256" or "signatures" not in info:
        return row.hash == event_hash(row.record_id, row.seq, row.kind, row.utc, row.actor, row.role,
                                      row.payload, row.prev_hash)
    return None


def verify_store(store, *, anchors=None, expect_head: str | None = None,
                 rebuild_summaries: bool = True) -> VerifyResult:
    signer = store.signer
    key = signer.key
    problems = _Problems()
    anchor_file = Path(anchors) if anchors is not None else None
    expected = keys.parse_expected_head(expect_head) if expect_head else None
    with store._guard(), store.engine.connect() as conn:
        with conn.begin():
            store_id = conn.execute(sa.select(store_info_t.c.store_id)).scalar_one()
            if anchor_file is None:
                default = keys.anchor_path(store_id)
                anchor_file = default if default.exists() else None
            noted = keys.read_anchors(anchor_file, store_id) if anchor_file is not None else None
            wanted = set(noted.heads) if noted else set()
            if expected is not None and expected[0] is not None:
                wanted.add(expected[0])
            seen_hashes: dict[int, str] = {}  # the hashes at the noted positions
            found_expected: list[int] = []  # where an expected head without a position was found
            heads = {r["id"]: r for r in conn.execute(sa.select(records_t)).mappings()}
            if key is None:
                problems.add(signer.problem or "the store's key is not available")
            per: dict[str, tuple[int, str]] = {}
            folded: dict[str, dict] = {}
            gseq, gprev = 0, GENESIS_HASH
            checked = unsigned = 0
            from_seq = signer.from_global_seq
            q = sa.select(events_t).order_by(events_t.c.global_seq)
            for row in conn.execution_options(yield_per=500).execute(q):
                checked += 1
                payload_text = row.payload if isinstance(row.payload, str) else None
                if payload_text is None:
                    problems.on(row, f"payload is stored as {type(row.payload).__name__}, not text "
                                     "(changed behind the tool's back)")
                    payload_text = ""
                legacy = row.global_seq < from_seq
                hkey = None if legacy else key
                # Store-wide chain.
                if row.global_seq != gseq + 1:
                    problems.on(row, f"store-wide sequence jumps from {gseq} to {row.global_seq}: events are missing")
                if row.global_prev_hash != gprev:
                    problems.on(row, "global_prev_hash does not match the previous event's global_hash")
                if legacy or key is not None:
                    content = (ledger.content_sha256(row.record_id, row.seq, row.kind, row.utc, row.actor, row.role,
                                                     payload_text, row.prev_hash)
                               if row.origin is not None and not legacy else None)
                    if row.global_hash != global_hash(row.global_seq, row.record_id, row.seq, row.hash, row.origin,
                                                      row.global_prev_hash, hkey, content):
                        problems.on(row, "store-wide chain link does not match its hash (changed after writing"
                                         + ("" if legacy else ", or rebuilt without the store's key") + ")")
                else:
                    unsigned += 1
                if row.global_seq == from_seq - 1 and row.global_hash != signer.legacy_head and key is not None:
                    problems.on(row, "the events written before the store had its key do not end at the head "
                                     "sealed under the key (rebuilt or changed)")
                gseq, gprev = row.global_seq, row.global_hash
                if row.global_seq in wanted:
                    seen_hashes[row.global_seq] = row.global_hash
                if expected is not None and expected[0] is None and row.global_hash == expected[1]:
                    found_expected.append(row.global_seq)
                # Per-record chain.
                last_seq, last_hash = per.get(row.record_id, (0, GENESIS_HASH))
                if row.seq != last_seq + 1:
                    problems.on(row, f"record sequence jumps from {last_seq} to {row.seq}: events are missing or moved")
                if row.prev_hash != last_hash:
                    problems.on(row, "prev_hash does not match the hash of the record's previous event")
                if legacy or key is not None:
                    if row.origin is not None and not legacy:
                        ok = _imported_hash_ok(row, key)
                    else:
                        ok = row.hash == event_hash(row.record_id, row.seq, row.kind, row.utc, row.actor, row.role,
                                                    payload_text, row.prev_hash, hkey)
                    if ok is False:
                        problems.on(row, "event content does not match its hash (changed after writing"
                                         + ("" if legacy else ", or signed without the store's key") + ")")
                per[row.record_id] = (row.seq, row.hash)
                if row.record_id == LIBRARY_ID:
                    if row.kind not in LIBRARY_KINDS:
                        problems.on(row, f"the process library holds an event of kind '{row.kind}'")
                    continue
                if row.kind not in roles.EVENT_KINDS:
                    problems.on(row, f"unknown event kind '{row.kind}'")
                if (row.seq == 1) != (row.kind == "entered"):
                    problems.on(row, "a record starts with exactly one 'entered' event")
                if row.kind == "entered":
                    why = header_mismatch(heads.get(row.record_id), payload_text)
                    if why:
                        problems.on(row, why)
                try:
                    payload = json.loads(payload_text) if payload_text else {}
                except ValueError:
                    problems.on(row, "payload is not JSON")
                    payload = {}
                folded[row.record_id] = summaries.fold(
                    folded.get(row.record_id), kind=row.kind, seq=row.seq, utc=row.utc, actor=row.actor,
                    role=row.role, payload=payload if isinstance(payload, dict) else {}, origin=row.origin,
                    global_seq=row.global_seq, header=dict(heads[row.record_id]) if row.record_id in heads else None)
            if gseq < from_seq - 1:
                problems.add(f"the store ends at position {gseq}, but {from_seq - 1} events were written before "
                             "it got its key: events deleted from the end")
            for rid in heads:
                if rid not in per:
                    problems.add("record has no events (its entered event is missing)", record_id=rid)
            lib = library_check(conn, signer)
            for why in lib["problems"]:
                problems.add(why, record_id=LIBRARY_ID)
            anchor_result = _check_anchors(noted, seen_hashes, gseq, problems)
            expected_result = _check_expected(expected, seen_hashes, found_expected, gseq, problems)
            table = {r["id"]: r for r in conn.execute(sa.select(summaries_t)).mappings()}
    summary_result = _check_summaries(store, folded, table, problems, rebuild_summaries)
    first = problems.items[0] if problems.items else None
    return VerifyResult(
        ok=problems.count == 0, checked_events=checked, records=len([r for r in heads if r != LIBRARY_ID]),
        first_broken=first, broken_count=problems.count, head={"global_seq": gseq, "global_hash": gprev},
        problems=problems.items,
        signatures={"checked": key is not None, "key_id": signer.key_id, "keyed_from_global_seq": from_seq,
                    "unchecked_events": unsigned, "problem": signer.problem,
                    "key_location": keys.key_source(store_id).where},
        anchors=anchor_result, expected_head=expected_result, library=lib, summaries=summary_result)


def library_check(conn: sa.Connection, signer) -> dict:
    problems = library.library_problems(conn, signer)
    return {"ok": not problems, "problems": problems}


def _check_anchors(noted, seen: dict[int, str], head_seq: int, problems: _Problems) -> dict | None:
    if noted is None:
        return {"file": None, "checked": 0,
                "note": "no anchor file: a store cut short at its end cannot be told from one never longer"}
    bad = 0
    for seq, (h, utc) in sorted(noted.heads.items()):
        if seq > head_seq:
            bad += 1
            problems.add(f"the store ends at position {head_seq}, but the anchor file noted position {seq} "
                         f"({h}) at {utc}: events deleted from the end, or an older copy of the store",
                         global_seq=seq)
        elif seen.get(seq) != h:
            bad += 1
            problems.add(f"store position {seq} no longer has the hash the anchor file noted at {utc} "
                         f"({h}): the chain was rebuilt or changed", global_seq=seq)
    return {"file": str(noted.path), "checked": len(noted.heads), "mismatched": bad,
            "unreadable_lines": noted.unreadable_lines, "other_stores": noted.other_stores}


def _check_expected(expected, seen: dict[int, str], found: list[int], head_seq: int,
                    problems: _Problems) -> dict | None:
    if expected is None:
        return None
    seq, h = expected
    if seq is not None:
        ok = seen.get(seq) == h
        where = f"position {seq}"
    else:
        ok, where = bool(found), (f"position {found[0]}" if found else "no position")
        seq = found[0] if found else None
    if not ok:
        problems.add(f"the expected head {h} is not in the store's chain ({where}; the store ends at "
                     f"{head_seq}): events removed, or the chain rebuilt since it was noted")
    return {"global_seq": seq, "global_hash": h, "found": ok}


def _check_summaries(store, folded: dict[str, dict], table: dict, problems: _Problems, rebuild: bool) -> dict:
    """Compare the summary table with the records folded again; rebuild what differs."""
    differing, outdated = [], []
    want = {rid: summaries.to_row(s) for rid, s in folded.items()}
    for rid, row in want.items():
        have = table.get(rid)
        if have is None:
            differing.append(rid)
        elif have["format"] != summaries.SUMMARY_FORMAT:
            outdated.append(rid)
        elif any(_differs(have[k], v) for k, v in row.items()):
            differing.append(rid)
    extra = [rid for rid in table if rid not in want]
    for rid in differing[:10]:
        problems.add("its row in the summary table (holds board, record list, log) differs from its events "
                     "(changed behind the tool's back); rebuilt from the events" if rebuild else
                     "its row in the summary table differs from its events", record_id=rid)
    for rid in extra[:10]:
        problems.add("the summary table has a row for a record with no events", record_id=rid)
    if len(differing) > 10 or len(extra) > 10:
        problems.count += max(0, len(differing) - 10) + max(0, len(extra) - 10)
    result = {"checked": len(want), "differing": len(differing), "outdated_format": len(outdated),
              "extra": len(extra), "rebuilt": 0}
    todo = differing + outdated
    if rebuild and (todo or extra):
        try:
            def write(conn: sa.Connection) -> None:
                for rid in todo + extra:
                    conn.execute(summaries_t.delete().where(summaries_t.c.id == rid))
                for rid in todo:
                    conn.execute(summaries_t.insert().values(**want[rid]))
            store._retrying(write)
            result["rebuilt"] = len(todo) + len(extra)
        except Exception as exc:  # noqa: BLE001 - a read-only login still gets its verdict
            result["rebuild_error"] = str(exc)
    return result


def _differs(a, b) -> bool:
    if isinstance(b, bool) or isinstance(a, bool):
        return bool(a) != bool(b)
    if isinstance(b, float) or isinstance(a, float):
        return a is None or b is None or float(a) != float(b)
    if isinstance(b, str) and isinstance(a, str) and b.startswith("{"):
        try:
            return json.loads(a) != json.loads(b)
        except ValueError:
            return True
    return a != b


__all__ = ["verify_store"]
