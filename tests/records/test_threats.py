"""Issue 14, tried as a curious insider would: each attack on the record store reproduced, and
what the store does about it now. Both backends where the store is involved.

The attacker knows the tool and its hash formulas (they are published), can write bundles and,
in some tests, edit the database with its own client (sqlite3, psql); what they do not have is
the store's key (kept outside the database) or the anchors kept out of their reach.
"""

from __future__ import annotations

import copy
import json
import subprocess
import sys
from pathlib import Path

import pytest

from deviation.cli import main
from deviation.errors import PermissionDenied, StoreError
from deviation.records.chains import GENESIS_HASH, canonical_json, event_hash, global_hash, new_record_id, sha256_text
from deviation.records.store import open_store

REPO = Path(__file__).resolve().parents[2]
CASE = REPO / "tests" / "data" / "good_case.toml"
SNAPSHOT = {"case": {"deviation": {"lot": "L-1", "retort_id": "R1"}}}
EVALUATION = {"engine_version": "0.1.0", "delivered_F_min": 7.25, "target_F_min": 6.0,
              "flags": [{"code": "temperature-low", "message": "drop"}],
              "guidance": {"disposition": "evaluate", "rule_set_sha256": "cd" * 32}, "conservative": False}
OP = dict(actor="olga", role="operator")
SUP = dict(actor="sam", role="supervisor")
PA = dict(actor="pat", role="process-authority")


@pytest.fixture
def store(backend):
    s = backend.open("threats")
    yield s
    s.close()


def decided(store, decision="destroy"):
    rid = store.create_record(SNAPSHOT, lot="L-1", retort_id="R1", process_id="P-1", **OP)
    store.add_evaluation(rid, EVALUATION, **OP)
    store.place_hold(rid, reason="drop", **SUP)
    store.decide(rid, decision=decision, reason="F0 short, unsafe", **PA)
    return rid


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out = capsys.readouterr()
    return code, out.out, out.err


# -- crafted bundles ------------------------------------------------------------------------------


def craft(records: list[tuple[dict, list[tuple]]]) -> dict:
    """A bundle written by hand, with every hash an attacker can compute (unkeyed SHA-256)."""
    out = []
    for header, events in records:
        prev, evs = GENESIS_HASH, []
        for seq, (kind, utc, actor, role, payload) in enumerate(events, start=1):
            h = event_hash(header["id"], seq, kind, utc, actor, role, canonical_json(payload), prev)
            evs.append({"seq": seq, "kind": kind, "utc": utc, "actor": actor, "role": role, "payload": payload,
                        "prev_hash": prev, "hash": h, "alg": "sha256"})
            prev = h
        out.append({"record": header, "events": evs})
    body = {"format": "deviation-record-bundle", "format_version": 2, "source_store": "FORGED",
            "records": out}
    body["sha256"] = sha256_text(canonical_json(body))
    return body


def header(rid=None, utc="2019-03-01T08:00:00.000000Z"):
    return {"id": rid or new_record_id(), "lot": "L-F", "retort_id": "R9", "process_id": "P-1",
            "process_version": None, "created_utc": utc}


def entered(h, actor="olga", role="operator"):
    return ("entered", h["created_utc"], actor, role, {"record": h, "snapshot": SNAPSHOT})


def t(minute: int) -> str:
    return f"2019-03-01T08:{minute:02d}:00.000000Z"


EV = {"engine_version": "0.1.0", "evaluation": EVALUATION, "snapshot_seq": 1}


def _with_existing(store, rid, extra):
    """The exported record ``rid`` with events appended by hand (hashes recomputed, unkeyed)."""
    bundle = store.export_bundle([rid])
    rec = bundle["records"][0]
    evs = [(e["kind"], e["utc"], e["actor"], e["role"], e["payload"]) for e in rec["events"]]
    forged = craft([(rec["record"], evs + extra)])
    return forged


CRAFTED = {
    # name: (build(store) -> bundle, words of the refusal)
    "second disposition on a decided record": (
        lambda s: _with_existing(s, decided(s, "destroy"), [
            ("disposition", "2099-01-01T00:00:00.000000Z", "pat", "process-authority",
             {"decision": "release-after-evaluation", "reason": "changed my mind"})]),
        "event 5 (disposition): actor 'pat' (role process-authority) cannot decide record"),
    "disposition on a record never held": (
        lambda s: (lambda h: craft([(h, [entered(h), ("evaluated", t(1), "olga", "operator", EV),
                                         ("disposition", t(2), "pat", "process-authority",
                                          {"decision": "release-after-evaluation", "reason": "fine"})])]))(header()),
        "event 3 (disposition): actor 'pat' (role process-authority) cannot decide record"),
    "disposition by an operator": (
        lambda s: (lambda h: craft([(h, [entered(h), ("evaluated", t(1), "olga", "operator", EV),
                                         ("hold-placed", t(2), "sam", "supervisor", {"reason": "drop"}),
                                         ("disposition", t(3), "olga", "operator",
                                          {"decision": "release-after-evaluation", "reason": "fine"})])]))(header()),
        "event 4 (disposition): actor 'olga' (role operator) may not decide"),
    "disposition by a janitor": (
        lambda s: (lambda h: craft([(h, [entered(h), ("evaluated", t(1), "olga", "operator", EV),
                                         ("hold-placed", t(2), "sam", "supervisor", {"reason": "drop"}),
                                         ("disposition", t(3), "jo", "janitor",
                                          {"decision": "release-after-evaluation", "reason": "fine"})])]))(header()),
        "event 4 (disposition): actor 'jo': unknown role 'janitor'"),
    "a 2019 record decided with no evaluation or hold": (
        lambda s: (lambda h: craft([(h, [entered(h), ("disposition", t(1), "pat", "process-authority",
                                                      {"decision": "release-after-evaluation", "reason": "ok"})])]))(
            header()),
        "event 2 (disposition): actor 'pat' (role process-authority) cannot decide record"),
    "release with no disposition": (
        lambda s: (lambda h: craft([(h, [entered(h), ("evaluated", t(1), "olga", "operator", EV),
                                         ("hold-placed", t(2), "sam", "supervisor", {"reason": "drop"}),
                                         ("hold-released", t(3), "sam", "supervisor",
                                          {"reason": "need the cage space"})])]))(header()),
        "event 4 (hold-released): actor 'sam' (role supervisor) cannot release-hold record"),
    "a disposition word not on the list": (
        lambda s: (lambda h: craft([(h, [entered(h), ("evaluated", t(1), "olga", "operator", EV),
                                         ("hold-placed", t(2), "sam", "supervisor", {"reason": "drop"}),
                                         ("disposition", t(3), "pat", "process-authority",
                                          {"decision": "relase", "reason": "fine"})])]))(header()),
        "event 4 (disposition): decision 'relase' is not one of the dispositions"),
    "a disposition without a decision": (
        lambda s: (lambda h: craft([(h, [entered(h), ("evaluated", t(1), "olga", "operator", EV),
                                         ("hold-placed", t(2), "sam", "supervisor", {"reason": "drop"}),
                                         ("disposition", t(3), "pat", "process-authority", {"reason": "fine"})])]))(
            header()),
        "event 4 (disposition): a 'disposition' event needs a non-empty text 'decision'"),
    "a record id of another shape": (
        lambda s: (lambda h: craft([(h, [entered(h)])]))(header("../../tmp/x")),
        "has the id '../../tmp/x', which is not a record id of this tool"),
    "an entered event by an auditor": (
        lambda s: (lambda h: craft([(h, [entered(h, "ada", "auditor")])]))(header()),
        "event 1 (entered): actor 'ada' (role auditor) may not enter"),
    "events out of time order": (
        lambda s: (lambda h: craft([(h, [entered(h, ), ("note", "2018-01-01T00:00:00.000000Z", "olga", "operator",
                                                         {"text": "back-dated"})])]))(header()),
        "event 2 (note): time 2018-01-01T00:00:00.000000Z is before the record's previous event"),
}


@pytest.mark.parametrize("name", list(CRAFTED))
def test_a_crafted_bundle_is_refused_whole_naming_the_event(store, backend, name):
    build, words = CRAFTED[name]
    bundle = build(store)
    target = backend.open("target")
    good = decided(target)  # the target has a record of its own; an honest record rides in the bundle too
    honest = craft([(lambda h: (h, [entered(h), ("note", t(5), "olga", "operator", {"text": "fine"})]))(header())])
    bundle = dict(bundle, records=honest["records"] + bundle["records"])
    bundle["sha256"] = sha256_text(canonical_json({k: v for k, v in bundle.items() if k != "sha256"}))
    before = (target.count_records(), target.count_events())
    with pytest.raises(StoreError, match="import refused") as info:
        target.import_bundle(bundle, actor="ada", role="auditor")
    assert words in str(info.value)
    assert (target.count_records(), target.count_events()) == before  # refused whole
    assert target.record(good).disposition["decision"] == "destroy"
    assert target.verify().ok


def test_the_import_command_names_the_event_and_writes_nothing(capsys, backend, tmp_path):
    s = backend.open("src")
    rid = decided(s, "destroy")
    bundle = _with_existing(s, rid, [("disposition", "2099-01-01T00:00:00.000000Z", "pat", "process-authority",
                                      {"decision": "release-after-evaluation", "reason": "changed my mind"})])
    path = tmp_path / "forged.json"
    path.write_text(json.dumps(bundle), encoding="utf-8")
    db = backend.target("dst")
    code, out, err = run(capsys, "import", path, "--db", db, "--actor", "ada", "--role", "auditor")
    assert code == 3 and "Traceback" not in err
    assert f"import refused: record {rid} event 5 (disposition)" in err and "superseding" in err
    assert open_store(db).count_records() == 0


def test_imported_events_show_their_origin(capsys, backend):
    src = backend.open("src")
    rid = decided(src, "reprocess")
    dst = backend.target("dst")
    res = open_store(dst).import_bundle(src.export_bundle([rid]), actor="ada", role="auditor",
                                        source_key=src.signer.key)
    assert res.events_added == 4
    view = open_store(dst).record(rid)
    assert view.imported and all(e.origin for e in view.events)
    assert json.loads(view.events[0].origin)["signatures"] == "verified"
    code, out, _ = run(capsys, "record", "show", rid, "--db", dst)
    flat = " ".join(out.split())
    assert code == 0 and "⇩ imported" in flat and f"from store {src.store_id()}" in flat
    assert "signatures verified with the source store's key" in flat
    code, out, _ = run(capsys, "record", "show", rid, "--db", dst, "--json")
    doc = json.loads(out)
    assert doc["imported"] is True and doc["origins"][0]["source_store"] == src.store_id()
    # Without the source key the import is marked so.
    other = backend.open("other")
    other.import_bundle(src.export_bundle([rid]), actor="ada", role="auditor")
    assert json.loads(other.record(rid).events[0].origin)["signatures"] == "not-verified"
    assert other.verify().ok  # bound under this store's key from the import on


# -- tail deletion, rebuilt chains -------------------------------------------------------------


def test_a_deleted_tail_is_caught_by_the_anchor_file(backend):
    db = backend.target("tail")
    s = open_store(db)
    rid = decided(s)
    head = s.head()
    assert s.verify().ok
    s.close()
    # The newest event (the disposition) deleted: the record reads "held" again.
    backend.sql(db, f"DELETE FROM events WHERE record_id = '{rid}' AND seq = 4")
    s = open_store(db)
    assert s.record(rid).state == "held"
    res = s.verify()
    assert not res.ok
    assert any(f"the store ends at position {head['global_seq'] - 1}, but the anchor file noted position "
               f"{head['global_seq']}" in p["reason"] for p in res.problems)


def test_a_deleted_tail_is_caught_by_an_expected_head(capsys, backend, tmp_path, monkeypatch):
    # The anchor file kept elsewhere (here: none on this machine), the head written down instead.
    monkeypatch.setenv("DEVIATION_ANCHOR_FILE", str(tmp_path / "elsewhere.anchors"))
    db = backend.target("tail")
    s = open_store(db)
    rid = decided(s)
    code, out, _ = run(capsys, "verify", "--db", db)
    noted = next(line.split()[3] for line in out.splitlines() if line.startswith("store head"))
    assert code == 0 and len(noted) == 64  # the full head is printed
    s.close()
    backend.sql(db, f"DELETE FROM events WHERE record_id = '{rid}' AND seq = 4")
    (tmp_path / "elsewhere.anchors").unlink()
    code, out, _ = run(capsys, "verify", "--db", db)
    assert code == 1  # still: the summary table disagrees with the events, and it is rebuilt
    code, out, _ = run(capsys, "verify", "--db", db, "--expect-head", noted)
    assert code == 1 and f"the expected head {noted} is not in the store's chain" in " ".join(out.split())


def _rebuild_chain(backend, db, key: bytes | None):
    """Edit the disposition, then recompute every hash after it as the tool would (with ``key``
    when the attacker holds it)."""
    import sqlalchemy as sa

    from deviation.records.schema import events_t

    engine = sa.create_engine(db if "://" in str(db) else f"sqlite:///{db}")
    with engine.begin() as conn:
        rows = [dict(r) for r in conn.execute(sa.select(events_t).order_by(events_t.c.global_seq)).mappings()]
        per: dict = {}
        gprev = GENESIS_HASH
        for r in rows:
            if r["kind"] == "disposition":
                p = json.loads(r["payload"])
                p["decision"] = "release-after-evaluation"
                r["payload"] = canonical_json(p)
            prev = per.get(r["record_id"], GENESIS_HASH)
            r["prev_hash"] = prev
            r["hash"] = event_hash(r["record_id"], r["seq"], r["kind"], r["utc"], r["actor"], r["role"],
                                   r["payload"], prev, key)
            r["global_prev_hash"] = gprev
            r["global_hash"] = global_hash(r["global_seq"], r["record_id"], r["seq"], r["hash"], r["origin"], gprev,
                                           key)
            per[r["record_id"]], gprev = r["hash"], r["global_hash"]
            conn.execute(events_t.update().where(events_t.c.global_seq == r["global_seq"]).values(
                payload=r["payload"], prev_hash=r["prev_hash"], hash=r["hash"],
                global_prev_hash=r["global_prev_hash"], global_hash=r["global_hash"]))
    engine.dispose()


@pytest.mark.parametrize("with_key", [False, True], ids=["without-key", "with-key"])
def test_a_rebuilt_chain_is_caught(backend, tmp_path, monkeypatch, with_key):
    kept = tmp_path / "kept-elsewhere.anchors"  # the anchors out of the attacker's reach
    monkeypatch.setenv("DEVIATION_ANCHOR_FILE", str(kept))
    db = backend.target("rebuilt")
    s = open_store(db)
    rid = decided(s, "destroy")
    key = s.signer.key
    s.close()
    _rebuild_chain(backend, db, key if with_key else None)
    s = open_store(db)
    assert s.record(rid).disposition["decision"] == "release-after-evaluation"  # the edit took
    res = s.verify(anchors=kept)
    assert not res.ok
    reasons = " ".join(p["reason"] for p in res.problems)
    if with_key:  # the signatures hold; only the anchors kept elsewhere tell
        assert "no longer has the hash the anchor file noted" in reasons
    else:
        assert "signed without the store's key" in reasons or "rebuilt without the store's key" in reasons


# -- the library -------------------------------------------------------------------------------


def test_a_library_edit_is_caught_and_the_process_is_not_used(capsys, backend, tmp_path):
    from deviation.records import processes as library

    db = backend.target("lib")
    s = open_store(db)
    library.add_process(s, REPO / "demo_cases" / "processes" / "OH-CHL-87x115.toml", **PA)
    assert s.verify().ok and s.verify().library["ok"]
    s.close()
    backend.sql(db, "UPDATE processes SET process = replace(process, '\"process_temperature_C\":121.1', "
                    "'\"process_temperature_C\":117.0') WHERE process_id = 'OH-CHL-87x115'")
    assert "117.0" in backend.query(db, "SELECT process FROM processes")[0][0]
    s = open_store(db)
    res = s.verify()
    assert not res.ok and "was changed after it was filed" in " ".join(res.library["problems"])
    code, _, err = run(capsys, "process", "show", "OH-CHL-87x115", "--db", db)
    assert code == 3 and "was changed after it was filed" in err and "Traceback" not in err
    case = tmp_path / "case.toml"
    text = (REPO / "demo_cases" / "chili_temperature_drop.toml").read_text(encoding="utf-8")
    start, end = text.index("[process]"), text.index("[deviation]")
    case.write_text(text[:start] + text[end:].replace("[deviation]", '[deviation]\nprocess_ref = "OH-CHL-87x115"', 1)
                    .replace('retort_log = "logs/', f'retort_log = "{REPO}/demo_cases/logs/'), encoding="utf-8")
    code, _, err = run(capsys, "evaluate", case, "--db", db)
    assert code == 3 and "was changed after it was filed" in err


def test_filing_and_retiring_are_events_of_the_store_wide_chain(backend):
    from deviation.records import processes as library

    s = backend.open("lib")
    library.add_process(s, REPO / "demo_cases" / "processes" / "OH-CHL-87x115.toml", **PA)
    library.retire_process(s, "OH-CHL-87x115", reason="superseded", **PA)
    evs = s.events("LIBRARY")
    assert [e.kind for e in evs] == ["process-filed", "process-retired"]
    assert evs[0].payload["sha256"] == library.get_process(s, "OH-CHL-87x115", 1).sha256
    assert s.record_ids() == [] and s.count_records() == 0  # not a deviation record
    assert s.verify().ok
    # A retirement row deleted behind the tool's back does not bring the process back.
    s.close()
    backend.sql(backend.target("lib"), "DELETE FROM process_retirements")
    s = backend.open("lib")
    with pytest.raises(Exception, match="retired"):
        library.resolve(s, "OH-CHL-87x115")
    assert not s.verify().ok


# -- the workflow ----------------------------------------------------------------------------


def test_a_supervisor_cannot_release_a_held_lot_without_a_decision(capsys, backend):
    db = backend.target("wf")
    s = open_store(db)
    rid = s.create_record(SNAPSHOT, lot="L-1", retort_id="R1", process_id="P-1", **OP)
    s.add_evaluation(rid, EVALUATION, **OP)
    s.place_hold(rid, reason="drop", **SUP)
    code, _, err = run(capsys, "record", "release", rid, "--reason", "need the cage space", "--db", db,
                       "--actor", "sam", "--role", "supervisor")
    assert code == 4 and "the process authority has not decided on it" in err
    assert s.record(rid).state == "held"
    with pytest.raises(PermissionDenied):
        s.release_hold(rid, reason="need the cage space", **SUP)


def test_a_disposition_is_chosen_from_the_list_and_confirmed(capsys, backend):
    db = backend.target("wf")
    s = open_store(db)
    rid = s.create_record(SNAPSHOT, lot="L-1", retort_id="R1", process_id="P-1", **OP)
    s.add_evaluation(rid, EVALUATION, **OP)
    s.place_hold(rid, reason="drop", **SUP)
    argv = ["record", "decide", rid, "--reason", "F0 above target", "--db", db, "--actor", "pat",
            "--role", "process-authority"]
    code, _, err = run(capsys, *argv, "--decision", "relase", "--yes")
    assert code == 2 and "'relase' is not a disposition" in err
    with pytest.raises(StoreError, match="decision 'relase' is not one of the dispositions"):
        s.append_event(rid, "disposition", {"decision": "relase", "reason": "x"}, **PA)
    code, _, err = run(capsys, *argv, "--decision", "other")
    assert code == 2 and "needs the decision in words" in err
    code, out, err = run(capsys, *argv, "--decision", "release")  # no --yes, no terminal: not written
    assert code == 2 and "decision:  release after evaluation" in err and "confirm it with --yes" in err
    assert s.record(rid).state == "held"
    code, out, _ = run(capsys, *argv, "--decision", "release", "--yes")
    assert code == 0
    v = s.record(rid)
    assert v.disposition["decision"] == "release-after-evaluation" and not v.hold["held"]
    # Corrected only by a superseding disposition with a reason; both stay.
    code, _, err = run(capsys, *argv, "--decision", "destroy", "--yes")
    assert code == 4 and "superseding" in err
    first = v.disposition["seq"]
    code, _, _ = run(capsys, "record", "decide", rid, "--decision", "other", "--decision-text",
                     "hold for incubation results", "--reason", "new information from the lab",
                     "--supersedes", str(first), "--yes", "--db", db, "--actor", "pat", "--role", "process-authority")
    assert code == 0
    v = s.record(rid)
    assert v.disposition["words"] == "other: hold for incubation results" and v.disposition["supersedes"] == first
    assert [d["words"] for d in v.superseded] == ["release after evaluation"]
    code, out, _ = run(capsys, "record", "show", rid, "--db", db)
    assert "superseded: release after evaluation by pat" in " ".join(out.split())


def test_record_new_is_idempotent_with_an_entry_key(capsys, backend):
    db = backend.target("new")
    argv = ["record", "new", CASE, "--db", db, "--role", "operator", "--entry-key", "T7-000123", "--json"]
    code, out, _ = run(capsys, *argv)
    assert code == 0
    first = json.loads(out)["id"]
    code, out, _ = run(capsys, *argv)  # the retry after "it failed" (it had not)
    assert code == 0 and json.loads(out)["id"] == first
    s = open_store(db)
    assert s.count_records() == 1 and [e.kind for e in s.events(first)] == ["entered", "evaluated"]


# -- text is data ------------------------------------------------------------------------------

MARKUP = ["see [/x]", "[white on white]hidden[/]", "[bold red]RELEASE APPROVED[/]", ":warning: done",
          "\x1b[31mred\x1b[0m", "exe.\u202etxt", "line one\nline two"]


def test_markup_text_round_trips_literally_and_never_ends_in_a_traceback(capsys, backend, monkeypatch):
    monkeypatch.setenv("COLUMNS", "400")  # one line per row: the texts are not wrapped
    db = backend.target("text")
    s = open_store(db)
    rid = s.create_record(SNAPSHOT, lot="[bold]L-1[/bold]", retort_id="R1", process_id="P-1", **OP)
    for text in MARKUP:
        code, out, err = run(capsys, "record", "note", rid, "--text", text, "--db", db, "--role", "operator",
                             "--actor", "olga")
        assert code == 0 and "Traceback" not in err and err == "", (text, err)
    assert [n["text"] for n in s.record(rid).notes] == MARKUP  # stored exactly as typed
    code, out, err = run(capsys, "record", "show", rid, "--db", db)
    assert code == 0 and err == ""
    flat = " ".join(out.split())
    assert "see [/x]" in flat and "[white on white]hidden[/]" in flat and "[bold]L-1[/bold]" in flat
    assert ":warning: done" in flat and "⚠" not in flat  # no emoji substitution
    assert "exe.⟨U+202E⟩txt" in flat and "⟨U+001B⟩[31mred" in flat  # shown visibly
    assert "\u202e" not in out and "\x1b[31m" not in out
    code, out, _ = run(capsys, "record", "list", "--db", db)
    assert code == 0 and "[bold]L-1[/bold]" in " ".join(out.split())


def test_verify_reports_a_payload_stored_as_a_blob(tmp_path):
    import sqlite3

    db = tmp_path / "blob.db"
    s = open_store(db)
    rid = decided(s)
    s.close()
    con = sqlite3.connect(db)
    con.execute("UPDATE events SET payload = CAST(payload AS BLOB) WHERE record_id = ? AND seq = 2", (rid,))
    con.commit()
    con.close()
    out = subprocess.run([sys.executable, "-m", "deviation.cli", "verify", "--db", str(db)], capture_output=True,
                         text=True, cwd=REPO, timeout=120)
    assert out.returncode in (1, 3) and "Traceback" not in out.stderr
    assert "BROKEN" in out.stdout or out.stderr.startswith("error: ")


def test_a_lost_key_is_said_plainly(backend, monkeypatch, tmp_path):
    from deviation.records import keys

    db = backend.target("lost")
    s = open_store(db)
    rid = decided(s)
    s.close()
    monkeypatch.setenv("DEVIATION_KEY_DIR", str(tmp_path / "no-keys-here"))
    s = open_store(db)
    assert s.record(rid).state == "decided"  # readable
    with pytest.raises(StoreError, match="this store's key .* is not at .*no-keys-here"):
        s.note(rid, "x", **OP)
    res = s.verify()
    assert not res.ok and not res.signatures["checked"]
    monkeypatch.setenv("DEVIATION_KEY", "ab" * 32)  # a key, but not this store's
    s = open_store(db)
    with pytest.raises(StoreError, match="is not this store's key"):
        s.note(rid, "x", **OP)
    assert keys.key_id(bytes.fromhex("ab" * 32)) in open_store(db).signer.problem


def test_a_bundle_round_trip_keeps_verifying(backend):
    src = backend.open("src")
    rid = decided(src, "reprocess")
    src.note(rid, "ünïcødé ✓ °C", **OP)
    b = json.loads(json.dumps(src.export_bundle()))
    dst = backend.open("dst")
    dst.import_bundle(copy.deepcopy(b), source_key=src.signer.key)
    dst.release_hold(rid, reason="reprocessed as filed", **SUP)  # written in the target, keyed there
    back = backend.open("back")
    back.import_bundle(dst.export_bundle())
    assert back.verify().ok and dst.verify().ok and src.verify().ok
    assert [e.hash for e in back.events(rid)][:5] == [e.hash for e in src.events(rid)]
