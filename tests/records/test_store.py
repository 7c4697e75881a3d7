"""The record store on real SQLite files and a real PostgreSQL server: schema, chains, views,
export/import, drafts.

Most tests take the ``backend`` fixture (tests/store/conftest.py) and run on both; the ones
about SQLite files as such (WAL, foreign or damaged files, paths) stay SQLite-only.
No engine here: hand-written snapshot and evaluation dicts stand in for a case and its result.
"""

import copy
import hashlib
import json
import re
import sqlite3
from pathlib import Path

import pytest

from deviation.records import bundles as B
from deviation.records import migrate as SC
from deviation.records import backends as BK
from deviation.records import store as S
from deviation.errors import StoreError
from deviation.records.chains import GENESIS_HASH, canonical_json, event_hash
from deviation.records.store import open_store

SNAPSHOT = {"case": {"process": {"id": "P-1", "target_F_min": 6.0},
                     "deviation": {"lot": "L-1", "retort_id": "R1", "initial_temperature_C": 45.5}},
            "source": "case.toml", "sha256": "ab" * 32,
            "retort_log_text": "time_min,temperature_C\n0,20\n10,121.1\n", "retort_log_source": "log.csv",
            "cold_spot_log_text": None, "cold_spot_log_source": None}
EVALUATION = {"engine_version": "0.1.0", "delivered_F_min": 7.25, "target_F_min": 6.0,
              "flags": [{"code": "temperature-low", "message": "drop"}],
              "guidance": {"disposition": "evaluate", "rule_set_sha256": "cd" * 32}, "conservative": False}
OP = dict(actor="olga", role="operator")
SUP = dict(actor="sam", role="supervisor")
PA = dict(actor="pat", role="process-authority")


def new(store, lot="L-1", retort="R1", snapshot=SNAPSHOT):
    return store.create_record(snapshot, lot=lot, retort_id=retort, process_id="P-1", **OP)


@pytest.fixture
def store(backend):
    s = backend.open("records")
    yield s
    s.close()


# -- hashes --------------------------------------------------------------------------------


@pytest.mark.parametrize("payload", [
    {"text": "ünïcødé ✓ °C", "x": 0.1 + 0.2, "n": None, "list": [1, 2.5e-300, True]},
    {"snapshot": SNAPSHOT, "reason": "typo in lot"},
    {},
])
def test_event_hash_is_sha256_of_the_canonical_json_of_the_event(payload):
    # Independent computation: the whole event dict through json.dumps as the docstring states.
    full = {"record_id": "DR-X", "seq": 3, "kind": "note", "utc": "2024-01-01T00:00:00.000000Z",
            "actor": "ä", "role": "operator", "payload": payload, "prev_hash": "f" * 64}
    text = json.dumps(full, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False)
    expected = hashlib.sha256(text.encode("utf-8")).hexdigest()
    got = event_hash("DR-X", 3, "note", "2024-01-01T00:00:00.000000Z", "ä", "operator",
                     canonical_json(payload), "f" * 64)
    assert got == expected


def test_chain_links_each_event_to_the_previous_and_starts_at_zeros(store):
    rid = new(store)
    store.add_evaluation(rid, EVALUATION, **OP)
    store.note(rid, "first note", **OP)
    evs = store.events(rid)
    assert [e.seq for e in evs] == [1, 2, 3]
    assert evs[0].prev_hash == GENESIS_HASH == "0" * 64
    for a, b in zip(evs, evs[1:]):
        assert b.prev_hash == a.hash
        assert b.global_prev_hash == a.global_hash
    key = store.signer.key  # HMAC-SHA-256 under the store's key
    for e in evs:  # recompute from the parsed payload, not the stored text
        assert e.hash == event_hash(e.record_id, e.seq, e.kind, e.utc, e.actor, e.role,
                                    canonical_json(e.payload), e.prev_hash, key)
        assert e.hash != event_hash(e.record_id, e.seq, e.kind, e.utc, e.actor, e.role,
                                    canonical_json(e.payload), e.prev_hash)  # not the unkeyed SHA-256
        assert re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\.\d{6}Z", e.utc)
    assert [e.global_seq for e in evs] == [1, 2, 3]


def test_record_id_is_dr_and_12_base32_characters(store):
    rid = new(store)
    assert re.fullmatch(r"DR-[A-Z2-7]{12}", rid)


def test_a_drawn_id_that_is_taken_is_drawn_again_and_the_stored_record_kept(store, monkeypatch):
    # The write no longer looks the id up first (one query fewer under the write lock): the
    # INSERT of a taken id fails and the retry draws a new one.
    first = new(store)
    before = [e.hash for e in store.events(first)]
    draws = iter([first, "DR-AAAAAAAAAAAB"])
    monkeypatch.setattr(S, "new_record_id", lambda: next(draws))
    second = new(store, lot="L-2")
    assert second == "DR-AAAAAAAAAAAB"
    assert [e.hash for e in store.events(first)] == before
    assert store.record(first).lot == "L-1" and store.record(second).lot == "L-2"
    assert {s.id: s.events for s in store.list_records()} == {first: 1, second: 1}
    assert store.verify().ok


def test_under_the_write_lock_an_append_reads_once_then_writes_the_event_and_summary(store):
    # The store's throughput with many writers is the time each spends under the write lock
    # (README benchmark table, PostgreSQL load): a regression guard on what is done there.
    import sqlalchemy as sa

    seen: list[tuple[str, str]] = []

    def note(conn, cursor, statement, params, context, executemany):  # noqa: ANN001
        text = " ".join(statement.split())
        if text.startswith("BEGIN") or "pg_advisory_xact_lock" in text or text == "SELECT 1":
            return
        m = re.match(r"(INSERT) INTO (\w+)|(UPDATE) (\w+)|(SELECT) .*? FROM (\w+)", text)
        verb, table = [g for g in m.groups() if g]
        seen.append((verb, table))

    sa.event.listen(store.engine, "before_cursor_execute", note)
    try:
        rid = new(store)
        created = list(seen)
        seen.clear()
        store.place_hold(rid, reason="drop", **SUP)
        held = list(seen)
    finally:
        sa.event.remove(store.engine, "before_cursor_execute", note)
    # A new record: the record, the store head, its first event and its summary (no look-ups).
    assert created == [("INSERT", "records"), ("SELECT", "events"), ("INSERT", "events"),
                       ("INSERT", "record_summaries")]
    # An append: one read (events, store head and summary together), the event, the summary.
    assert held == [("SELECT", "events"), ("INSERT", "events"), ("UPDATE", "record_summaries")]


def test_nan_and_non_json_payloads_are_refused(store):
    rid = new(store)
    with pytest.raises(StoreError, match="NaN or Infinity"):
        store.append_event(rid, "note", {"text": "x", "v": float("nan")}, **OP)
    with pytest.raises(StoreError, match="plain JSON"):
        store.append_event(rid, "note", {"text": "x", "v": object()}, **OP)


@pytest.mark.parametrize("kind, payload, message", [
    ("note", {}, "non-empty text 'text'"),
    ("hold-placed", {"reason": "  "}, "non-empty text 'reason'"),
    ("disposition", {"decision": "release"}, "non-empty text 'reason'"),
    ("amended", {"reason": "x"}, "needs the case 'snapshot'"),
    ("evaluated", {"engine_version": "1"}, "needs the 'evaluation'"),
    ("bogus", {}, "unknown event kind 'bogus'"),
    ("entered", {"snapshot": {}}, "use create_record"),
])
def test_payload_rules_per_kind(store, kind, payload, message):
    rid = new(store)
    with pytest.raises(StoreError, match=re.escape(message)):
        store.append_event(rid, kind, payload, **OP)


def test_unknown_record_is_a_store_error(store):
    with pytest.raises(StoreError, match="no record DR-NOPE"):
        store.note("DR-NOPE", "x", **OP)
    with pytest.raises(StoreError, match="no record DR-NOPE"):
        store.record("DR-NOPE")


# -- views ---------------------------------------------------------------------------------


def test_record_view_follows_the_events(store):
    rid = new(store)
    v = store.record(rid)
    assert (v.state, v.evaluation, v.hold, v.disposition, v.snapshot) == ("entered", None, None, None, SNAPSHOT)
    store.add_evaluation(rid, EVALUATION, **OP)
    v = store.record(rid)
    assert v.state == "evaluated" and v.evaluation == EVALUATION and v.evaluation_current
    assert v.evaluation_event["rule_set_sha256"] == "cd" * 32 and v.evaluation_event["snapshot_seq"] == 1
    amended = copy.deepcopy(SNAPSHOT)
    amended["case"]["deviation"]["initial_temperature_C"] = 50.0
    store.amend(rid, amended, reason="initial temperature misread", **OP)
    v = store.record(rid)
    assert v.state == "entered" and v.snapshot == amended and v.snapshot_seq == 3
    assert not v.evaluation_current  # the old evaluation is of the old snapshot
    store.add_evaluation(rid, EVALUATION, **OP)
    store.place_hold(rid, reason="temperature drop", **SUP)
    v = store.record(rid)
    assert v.state == "held" and v.hold["held"] and v.hold["placed_by"] == "sam"
    store.decide(rid, decision="reprocess", reason="F short", result="incubation negative", **PA)
    store.note(rid, "reprocessed on R2", **OP)
    v = store.record(rid)
    assert v.state == "decided"
    assert v.disposition["decision"] == "reprocess" and v.disposition["result"] == "incubation negative"
    assert v.notes[0]["text"] == "reprocessed on R2"
    d = v.to_dict()
    json.dumps(d)  # JSON-able
    assert d["head_hash"] == v.events[-1].hash and len(d["events"]) == 7


def test_evaluation_of_a_superseded_snapshot_is_refused(store):
    rid = new(store)
    store.amend(rid, SNAPSHOT, reason="again", **OP)
    with pytest.raises(Exception, match="amended since"):
        store.add_evaluation(rid, EVALUATION, snapshot_seq=1, **OP)


def test_list_records_filters(store, tmp_path):
    a = new(store, lot="L-A", retort="R1")
    b = new(store, lot="L-B", retort="R2")
    store.add_evaluation(b, EVALUATION, **OP)
    store.place_hold(b, reason="x", **SUP)
    assert [r.id for r in store.list_records()] == [a, b]
    assert [r.id for r in store.list_records(state="held")] == [b]
    assert [r.id for r in store.list_records(lot="L-A")] == [a]
    assert [r.id for r in store.list_records(retort="R2")] == [b]
    created = store.record(a).created_utc
    day = created[:10]
    assert len(store.list_records(since=day, until=day)) == 2  # a date covers the whole day
    assert store.list_records(since="2999-01-01") == []
    assert store.list_records(until="2000-01-01") == []
    summary = store.list_records(state="held")[0]
    assert summary.events == 3 and summary.state == "held"
    with pytest.raises(Exception, match="unknown state"):
        store.list_records(state="lost")
    with pytest.raises(Exception, match="not a date"):
        store.list_records(since="yesterday")


# -- verify --------------------------------------------------------------------------------


def test_verify_ok_counts_every_event(store):
    for _ in range(3):
        rid = new(store)
        store.note(rid, "n", **OP)
    res = store.verify()
    assert res.ok and res.checked_events == 6 and res.records == 3 and res.first_broken is None
    assert res.head["global_seq"] == 6


def test_verify_names_an_event_changed_behind_the_store(store, backend):
    rid = new(store)
    store.note(rid, "original text", **OP)
    store.note(rid, "later", **OP)
    store.close()
    backend.sql(backend.target("records"),
                "UPDATE events SET payload = replace(payload, 'original', 'innocent') WHERE seq = 2")
    res = backend.open("records").verify()
    assert not res.ok
    assert res.first_broken["record_id"] == rid and res.first_broken["seq"] == 2
    assert res.first_broken["kind"] == "note" and "does not match its hash" in res.first_broken["reason"]


# -- schema --------------------------------------------------------------------------------


def test_fresh_store_has_the_current_schema(backend):
    s = backend.open("x")
    assert s.schema_version() == SC.SCHEMA_VERSION == len(SC.MIGRATIONS)
    s.close()
    versions = [r[0] for r in backend.query(backend.target("x"),
                                            "SELECT version FROM schema_version ORDER BY version")]
    assert versions == list(range(1, SC.SCHEMA_VERSION + 1))


def test_fresh_sqlite_store_has_the_current_schema_and_wal(tmp_path):
    s = open_store(tmp_path / "x.db")
    assert s.schema_version() == SC.SCHEMA_VERSION == len(SC.MIGRATIONS)
    s.close()
    con = sqlite3.connect(tmp_path / "x.db")
    assert con.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    versions = [r[0] for r in con.execute("SELECT version FROM schema_version ORDER BY version")]
    assert versions == list(range(1, SC.SCHEMA_VERSION + 1))


# A store written by the release before keys (schema 3), committed as a fixture: see
# tests/records/data/make_legacy_store.py. Undoing its migrations 3 and 2 gives a version-1 store.
LEGACY = Path(__file__).parent / "data" / "legacy_store_v3.db"
TO_VERSION_1 = ("DROP INDEX uq_events_event_id", "ALTER TABLE events DROP COLUMN event_id",
                "DROP TABLE drafts", "DELETE FROM schema_version WHERE version > 1")


def test_a_version_1_store_is_upgraded_with_its_records_kept(tmp_path, monkeypatch):
    import shutil

    monkeypatch.setenv("DEVIATION_ANCHOR_FILE", str(tmp_path / "anchors"))  # copies share a store id
    db = tmp_path / "old.db"
    shutil.copy(LEGACY, db)
    con = sqlite3.connect(db)
    before = con.execute("SELECT global_seq, hash, global_hash, payload FROM events ORDER BY global_seq").fetchall()
    for statement in TO_VERSION_1:
        con.execute(statement)
    con.commit()
    con.close()
    s = open_store(db)
    assert s.schema_version() == SC.SCHEMA_VERSION == 4
    con = sqlite3.connect(db)
    after = con.execute("SELECT global_seq, hash, global_hash, payload FROM events ORDER BY global_seq").fetchall()
    assert after[:len(before)] == before  # no event rewritten
    rid = s.record_ids()[0]
    assert [e.event_id for e in s.events(rid)] == [None] * len(s.events(rid))
    assert s.verify().ok
    s.save_draft("k", {"a": 1})
    assert s.load_draft("k") == {"a": 1}
    e = s.note(rid, "after the upgrade", event_id="key-1", **OP)
    assert s.note(rid, "after the upgrade", event_id="key-1", **OP) == e  # keys work now
    assert s.verify().ok


def test_a_newer_store_is_refused_and_left_untouched(backend):
    target = backend.target("new")
    open_store(target).close()
    backend.sql(target, "INSERT INTO schema_version VALUES (99, 'deviation', '2099-01-01T00:00:00Z', '9.0')")
    listing = "SELECT version, app, applied_utc, tool_version FROM schema_version ORDER BY version"
    before = backend.query(target, listing)
    raw = Path(target).read_bytes() if backend.name == "sqlite" else None
    with pytest.raises(StoreError, match=r"newer deviation \(schema version 99"):
        open_store(target)
    assert backend.query(target, listing) == before
    if raw is not None:
        assert Path(target).read_bytes() == raw


def test_another_apps_tables_are_refused(backend):
    target = backend.target("shop")
    backend.sql(target, "CREATE TABLE customers (id INTEGER PRIMARY KEY, name TEXT)")
    with pytest.raises(StoreError, match=r"is not a deviation record store \(it holds other tables: customers\)"):
        open_store(target)
    assert backend.query(target, "SELECT count(*) FROM customers") == [(0,)]  # left as it was


def test_foreign_sqlite_database_is_refused(tmp_path):
    path = tmp_path / "shop.db"
    con = sqlite3.connect(path)
    con.execute("CREATE TABLE customers (id INTEGER PRIMARY KEY, name TEXT)")
    con.commit()
    con.close()
    with pytest.raises(StoreError, match=r"shop.db: is not a deviation record store \(it holds other tables: customers\)"):
        open_store(path)


def test_random_bytes_are_refused(tmp_path):
    path = tmp_path / "noise.db"
    path.write_bytes(bytes(range(256)) * 64)
    with pytest.raises(StoreError, match="noise.db: is not a deviation record store"):
        open_store(path)


def test_empty_file_becomes_a_store(tmp_path):
    path = tmp_path / "empty.db"
    path.write_bytes(b"")
    assert open_store(path).verify().ok


def test_directory_or_missing_parent_is_refused(tmp_path):
    with pytest.raises(StoreError, match="is a directory"):
        open_store(tmp_path)
    with pytest.raises(StoreError, match="does not exist"):
        open_store(tmp_path / "nope" / "x.db")


def test_default_location_env_and_user_data_dir(tmp_path, monkeypatch):
    monkeypatch.setenv("DEVIATION_DB", str(tmp_path / "env.db"))
    s = open_store(None)
    assert s.path == tmp_path / "env.db" and (tmp_path / "env.db").exists()
    s.close()
    monkeypatch.delenv("DEVIATION_DB")
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "xdg"))  # platformdirs on Linux
    s = open_store(None)
    assert s.path == tmp_path / "xdg" / "deviation" / "deviation.db"
    s.close()


def test_sqlite_url_is_accepted(tmp_path):
    s = open_store(f"sqlite:///{tmp_path / 'u.db'}")
    assert s.path == tmp_path / "u.db" and s.verify().ok


def test_bad_url_is_a_store_error():
    with pytest.raises(StoreError, match="cannot use database URL"):
        open_store("nosuchdb+driver://host/db")


# -- append-only -----------------------------------------------------------------------------


def test_store_source_never_updates_or_deletes_events_or_records():
    text = "\n".join(p.read_text(encoding="utf-8") for p in sorted(Path(S.__file__).parent.glob("*.py")))
    code = "\n".join(line for line in text.splitlines() if not line.lstrip().startswith("#"))
    patterns = [r"\bUPDATE\s+(events|records)\b", r"\bDELETE\s+FROM\s+(events|records)\b",
                r"\b(events|records)_t\.(update|delete)\(", r"\bsa\.(update|delete)\(\s*(events|records)_t",
                r"\b(update|delete)\(\s*(events|records)_t"]
    for pat in patterns:
        assert not re.search(pat, code, re.IGNORECASE), pat
    assert "drafts_t.delete()" in code  # drafts are the one mutable table (the grep does see deletes)


# -- export / import ------------------------------------------------------------------------


def _filled(store):
    a = new(store, lot="L-A")
    store.add_evaluation(a, EVALUATION, **OP)
    store.place_hold(a, reason="drop", **SUP)
    b = new(store, lot="L-B")
    store.note(b, "ünïcødé note", **OP)
    return a, b


def test_export_import_keeps_ids_and_hashes(store, backend):
    a, b = _filled(store)
    bundle = store.export_bundle()
    target = backend.open("target")
    new(target, lot="already-here")  # the target's own chain continues under the imports
    res = target.import_bundle(json.loads(json.dumps(bundle)), actor="ann", role="auditor")
    assert (res.records_added, res.events_added) == (2, 5)
    for rid in (a, b):
        assert [e.hash for e in target.events(rid)] == [e.hash for e in store.events(rid)]
        assert target.record(rid).state == store.record(rid).state
    imported = target.events(a)
    assert all(json.loads(e.origin)["import"] == bundle["sha256"] for e in imported)
    assert [e.global_seq for e in imported] == [2, 3, 4]  # new links in the store-wide chain
    assert target.verify().ok and target.verify().checked_events == 6
    again = target.import_bundle(bundle)
    assert (again.records_added, again.events_added, again.records_unchanged) == (0, 0, 2)


def test_import_extends_a_record_exported_earlier(store, backend):
    a, _ = _filled(store)
    early = store.export_bundle([a])
    target = backend.open("t")
    target.import_bundle(early)
    store.decide(a, decision="destroy", reason="unsafe", **PA)
    res = target.import_bundle(store.export_bundle([a]))
    assert (res.records_added, res.events_added) == (0, 1)
    assert target.record(a).state == "decided" and target.verify().ok


def test_import_refuses_a_divergent_record(store, backend):
    a, _ = _filled(store)
    target = backend.open("t")
    target.import_bundle(store.export_bundle([a]))
    target.note(a, "written in the target", **OP)
    store.note(a, "written in the source", **OP)
    with pytest.raises(StoreError, match=f"record {a} diverges .* at event 4"):
        target.import_bundle(store.export_bundle([a]))


def _tamper(bundle, how):
    b = copy.deepcopy(bundle)
    evs = b["records"][0]["events"]
    if how == "payload":
        evs[2]["payload"]["reason"] = "nothing to see"
    elif how == "actor":
        evs[1]["actor"] = "someone else"
    elif how == "drop-event":
        del evs[1]
    elif how == "reorder":
        evs[1], evs[2] = evs[2], evs[1]
    elif how == "header":
        b["records"][0]["record"]["lot"] = "L-Z"
    elif how == "rehash-one":  # the forger recomputes this event's hash, not the chain after it
        e = evs[1]
        e["payload"]["evaluation"]["delivered_F_min"] = 99.0
        e["alg"] = "sha256"
        e["hash"] = event_hash(b["records"][0]["record"]["id"], e["seq"], e["kind"], e["utc"], e["actor"],
                               e["role"], canonical_json(e["payload"]), e["prev_hash"])
    return b


@pytest.mark.parametrize("how, message", [
    ("payload", r"event 3 \(hold-placed\): content does not match its hash"),
    ("actor", r"event 2 \(evaluated\): content does not match its hash"),
    ("drop-event", r"event 2 \(hold-placed\): seq 3, expected 2"),
    ("reorder", r"event 2 \(hold-placed\): seq 3, expected 2"),
    ("header", r"record header differs from the entered event in lot"),
    ("rehash-one", r"event 3 \(hold-placed\): prev_hash does not match"),
])
def test_import_refuses_a_tampered_bundle(store, backend, how, message):
    a, _ = _filled(store)
    bundle = _tamper(store.export_bundle([a]), how)
    target = backend.open("t")
    # With the source store's key every event's signature is checked and the event is named.
    with pytest.raises(StoreError, match=f"import refused: record {a}.*" + message.replace(
            "content does not match its hash", "content does not match its (hash|signature)")):
        target.import_bundle(bundle, source_key=store.signer.key)
    # Without it, the bundle's own checksum (or the chain) still refuses it.
    with pytest.raises(StoreError, match="import refused"):
        target.import_bundle(bundle)
    assert target.count_records() == 0 and target.count_events() == 0


def test_import_refuses_a_bundle_changed_outside_the_records(store, backend):
    _filled(store)
    bundle = store.export_bundle()
    bundle["source_store"] = "elsewhere"
    with pytest.raises(StoreError, match="sha256 does not match"):
        backend.open("t").import_bundle(bundle)
    with pytest.raises(StoreError, match="not a deviation-record-bundle"):
        backend.open("t").import_bundle({"records": []})


def test_bundle_files_round_trip(store, backend, tmp_path):
    _filled(store)
    B.write_bundle(store.export_bundle(), tmp_path / "b.json")
    assert backend.open("t").import_bundle(B.read_bundle(tmp_path / "b.json")).records_added == 2
    (tmp_path / "bad.json").write_text("{not json", encoding="utf-8")
    with pytest.raises(StoreError, match="not JSON"):
        B.read_bundle(tmp_path / "bad.json")


# -- drafts --------------------------------------------------------------------------------


def test_drafts_are_mutable_and_not_records(store):
    assert store.load_draft("entry") is None
    store.save_draft("entry", {"lot": "L-1"})
    store.save_draft("entry", {"lot": "L-2"})
    assert store.load_draft("entry") == {"lot": "L-2"}
    assert store.draft_keys() == ["entry"]
    assert store.list_records() == [] and store.count_events() == 0
    store.delete_draft("entry")
    assert store.load_draft("entry") is None
    assert store.verify().ok


# -- the same hashes on both backends --------------------------------------------------------


def test_a_record_hashes_the_same_on_sqlite_and_postgresql(tmp_path, pg_backend):
    sqlite_store = open_store(tmp_path / "plant.db")
    a, b = _filled(sqlite_store)
    sqlite_store.decide(a, decision="reprocess", reason="F0 short ünïcødé °C", **PA)
    bundle = json.loads(json.dumps(sqlite_store.export_bundle()))  # through a file's text
    pg = pg_backend.open("central")
    res = pg.import_bundle(bundle, actor="ann", role="auditor")
    assert (res.records_added, res.events_added) == (2, 6)
    assert pg.verify().ok
    for rid in (a, b):
        assert [e.hash for e in pg.events(rid)] == [e.hash for e in sqlite_store.events(rid)]
        assert [e.payload for e in pg.events(rid)] == [e.payload for e in sqlite_store.events(rid)]
    # ...and back: PostgreSQL's export re-imports into a fresh SQLite store, hashes unchanged.
    back = open_store(tmp_path / "back.db")
    back.import_bundle(pg.export_bundle())
    assert back.verify().ok
    assert [e.hash for e in back.events(a)] == [e.hash for e in sqlite_store.events(a)]
    # Written on PostgreSQL, the hash is recomputed here from the stored fields alone.
    e = pg.note(a, "written on the server", **OP)
    assert e.hash == event_hash(e.record_id, e.seq, e.kind, e.utc, e.actor, e.role,
                                canonical_json(e.payload), e.prev_hash, pg.signer.key)
    assert open_store(tmp_path / "back.db").import_bundle(pg.export_bundle([a])).events_added == 1


# -- idempotency keys ------------------------------------------------------------------------


def test_an_append_repeated_with_its_event_id_is_recognised_not_written_twice(store):
    rid = new(store)
    first = store.note(rid, "once", event_id="terminal-7-0001", **OP)
    again = store.note(rid, "once", event_id="terminal-7-0001", **OP)
    assert again == first and first.event_id == "terminal-7-0001"
    assert store.count_events() == 2 and store.verify().ok
    store.add_evaluation(rid, EVALUATION, **OP)
    store.place_hold(rid, reason="drop", **SUP)
    d = store.decide(rid, decision="destroy", reason="x", event_id="pa-1", **PA)
    # A decided record refuses a second decision, but the retry of the same one is recognised.
    assert store.decide(rid, decision="destroy", reason="x", event_id="pa-1", **PA) == d
    with pytest.raises(StoreError, match="event id pa-1 is already used by event 5 \\(disposition\\)"):
        store.note(rid, "other", event_id="pa-1", **OP)
    made = store.create_record(SNAPSHOT, lot="L-2", retort_id="R1", process_id="P-1", event_id="new-1", **OP)
    assert store.create_record(SNAPSHOT, lot="L-2", retort_id="R1", process_id="P-1", event_id="new-1",
                               **OP) == made
    assert store.count_records() == 2
    generated = store.note(rid, "key made by the store", **OP).event_id
    assert re.fullmatch(r"[0-9a-f]{32}", generated)
    with pytest.raises(StoreError, match="an event id must be"):
        store.note(rid, "x", event_id="k" * 41, **OP)


def _lose_commit_reply(monkeypatch, store, times=1):
    """The COMMIT reaches the database but its answer is lost (as when the server goes away at
    that instant): the write is stored, the client sees a dropped connection."""
    from contextlib import contextmanager

    from sqlalchemy import exc as sa_exc

    real = store._write
    left = {"n": times}

    @contextmanager
    def write(**kw):
        with real(**kw) as conn:
            yield conn
        if left["n"] > 0:
            left["n"] -= 1
            try:
                raise sa_exc.OperationalError("COMMIT", {}, ConnectionError("server closed the connection"),
                                              connection_invalidated=True)
            except sa_exc.OperationalError as exc:
                raise store._store_error(exc) from None

    monkeypatch.setattr(store, "_write", write)


def test_a_commit_with_a_lost_answer_is_retried_without_a_duplicate(store, monkeypatch):
    rid = new(store)
    _lose_commit_reply(monkeypatch, store)
    e = store.note(rid, "the answer was lost", **OP)
    evs = store.events(rid)
    assert [x.seq for x in evs] == [1, 2] and evs[-1] == e  # stored once, the retry recognised it
    _lose_commit_reply(monkeypatch, store)
    rid2 = store.create_record(SNAPSHOT, lot="L-9", retort_id="R1", process_id="P-1", **OP)
    assert store.count_records() == 2 and [x.kind for x in store.events(rid2)] == ["entered"]
    assert store.verify().ok
    # A write that cannot recognise itself is not repeated: the caller is told it may be stored.
    _lose_commit_reply(monkeypatch, store)
    with pytest.raises(BK.StoreUnavailable, match="may have been stored") as info:
        store._retrying(lambda conn: store._insert_event(
            conn, record_id=rid, kind="note", utc=S.utc_now(), actor="olga", role="operator",
            payload_json=canonical_json({"text": "raw"})))
    assert info.value.outcome_unknown and info.value.exit_code == 3
    assert store.count_events() == 4  # it was stored, once


def test_text_longer_than_its_column_is_refused_alike_on_both_backends(store):
    with pytest.raises(StoreError, match="lot is 201 characters long; the store keeps at most 200"):
        store.create_record(SNAPSHOT, lot="L" * 201, retort_id="R1", process_id="P-1", **OP)
    rid = new(store)
    with pytest.raises(StoreError, match="actor is 201 characters long"):
        store.note(rid, "x", actor="a" * 201, role="operator")
    with pytest.raises(StoreError, match="retort_id contains a NUL character"):
        store.create_record(SNAPSHOT, lot="L", retort_id="R\x001", process_id="P-1", **OP)
    assert store.count_records() == 1 and store.verify().ok
