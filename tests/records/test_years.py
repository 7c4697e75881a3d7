"""Issue 16, stores of years: compact evaluated events (figures kept, arrays as a digest and
recomputed on demand), the derived summary table (one query for the board, the list and the log;
checked and rebuilt by verify), the deviation log, and the migration of a store written by the
release before (``data/legacy_store_v3.db``, made by ``data/make_legacy_store.py`` at c594ecd)."""

from __future__ import annotations

import csv
import hashlib
import io
import json
import math
import shutil
import sqlite3
import struct
from pathlib import Path

import pytest

from deviation.cli import main
from deviation.errors import StoreError
from deviation.records import arrays
from deviation.records.chains import canonical_json
from deviation.records.store import open_store

REPO = Path(__file__).resolve().parents[2]
DATA = Path(__file__).parent / "data"
LEGACY = DATA / "legacy_store_v3.db"
CASE = REPO / "demo_cases" / "chili_temperature_drop.toml"
OP = dict(actor="olga", role="operator")
SUP = dict(actor="sam", role="supervisor")
PA = dict(actor="pat", role="process-authority")


@pytest.fixture(autouse=True)
def _own_anchor_file(tmp_path, monkeypatch):
    """Copies of the fixture store share its store id: each test keeps its own anchor file."""
    monkeypatch.setenv("DEVIATION_ANCHOR_FILE", str(tmp_path / "anchors"))


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out = capsys.readouterr()
    return code, out.out, out.err


@pytest.fixture(scope="module")
def chili():
    from deviation.evaluate import evaluate_case
    from deviation.inputs.case import load_case

    loaded = load_case(CASE)
    return loaded.snapshot(), evaluate_case(loaded, conservative=False).model_dump(mode="json")


# -- compact evaluated events ------------------------------------------------------------------


def test_an_evaluated_event_keeps_every_figure_and_a_digest_not_the_arrays(backend, chili):
    snapshot, ev = chili
    s = backend.open("compact")
    rid = s.create_record(snapshot, lot="L", retort_id="R3", process_id="OH-CHL-87x115", **OP)
    e = s.add_evaluation(rid, ev, snapshot_seq=1, options={"conservative": False, "what_if": True}, **OP)
    stored = e.payload["evaluation"]
    size = len(json.dumps(e.payload, separators=(",", ":"), ensure_ascii=False).encode())
    assert size <= 10_000, size
    assert len(json.dumps(ev)) > 50_000  # the arrays were most of it
    # Every key of the evaluation stays (generically, whatever keys are added later), arrays aside.
    assert set(stored) == set(ev)
    for k, v in ev.items():
        if k != "cold_spot":
            assert stored[k] == v, k
    assert set(stored["cold_spot"]) == {k for k, v in ev["cold_spot"].items() if not isinstance(v, list)}
    digest = e.payload["arrays"]
    assert digest["lengths"] == {f"cold_spot.{k}": len(v) for k, v in ev["cold_spot"].items() if isinstance(v, list)}
    # On demand: recomputed from the snapshot and checked against the digest.
    view = s.record(rid)
    assert view.stored_evaluation == stored
    full = view.evaluation
    assert view.arrays_check["status"] == "identical"
    assert full["cold_spot"] == ev["cold_spot"] and full["delivered_F_min"] == ev["delivered_F_min"]


def test_the_digest_tells_identical_from_changed_arrays():
    ev = {"a": 1.0, "cold_spot": {"source": "x", "time_min": [float(i) for i in range(20)],
                                  "temperature_C": [100.0 + i for i in range(20)]}}
    compact, digest = arrays.compact_evaluation(ev)
    assert compact == {"a": 1.0, "cold_spot": {"source": "x"}}
    _, arr = arrays.split_arrays(ev)
    assert arrays.check_arrays(digest, arr)["status"] == "identical"
    nudged = {k: [x * (1 + 1e-12) for x in v] for k, v in arr.items()}
    assert arrays.check_arrays(digest, nudged)["status"] == "within-tolerance"
    changed = dict(arr, **{"cold_spot.temperature_C": [x - 1.0 for x in arr["cold_spot.temperature_C"]]})
    chk = arrays.check_arrays(digest, changed)
    assert chk["status"] == "differs" and "cold_spot.temperature_C" in chk["detail"]
    assert arrays.merge_arrays(compact, arr) == ev


def test_digest_format_2_hashes_the_bits_and_format_1_digests_are_still_checked():
    t = [i / 60.0 for i in range(40)]
    arr = {"cold_spot.time_min": t, "cold_spot.temperature_C": [20.0 + 2.5 * x for x in t],
           "cold_spot.index": list(range(40))}  # an integer array is digested as its JSON
    new = arrays.arrays_digest(arr)
    old = arrays.arrays_digest(arr, digest_format=1)
    assert new["format"] == 2 and "format" not in old and new["sha256"] != old["sha256"]
    # Format 1 as it was written (the canonical JSON of {path: array}), recomputed by hand.
    assert old["sha256"] == hashlib.sha256(canonical_json(arr).encode("utf-8")).hexdigest()
    # Format 2 by hand: the header, then the float64 bits little-endian, the integers as JSON.
    paths = sorted(arr)
    head = canonical_json([[p, 40, "json" if p.endswith("index") else "f8"] for p in paths]) + "\n"
    body = b"".join(struct.pack("<40d", *arr[p]) if not p.endswith("index") else canonical_json(arr[p]).encode()
                    for p in paths)
    assert new["sha256"] == hashlib.sha256(head.encode() + body).hexdigest()
    for digest in (new, old):
        assert arrays.check_arrays(digest, arr)["status"] == "identical"
        one_ulp = dict(arr, **{"cold_spot.time_min": [math.nextafter(t[0], 1.0)] + t[1:]})
        assert arrays.check_arrays(digest, one_ulp)["status"] == "within-tolerance"
        as_ints = dict(arr, **{"cold_spot.index": [float(i) for i in range(40)]})  # 3 vs 3.0: other values
        assert arrays.check_arrays(digest, as_ints)["status"] != "identical"
    unknown = dict(new, format=3)
    chk = arrays.check_arrays(unknown, arr)
    assert chk["status"] == "differs" and "format 3" in chk["detail"]


def test_an_event_digested_in_format_1_replays_identical(capsys, backend):
    # As the release before format 2 wrote it: compact, the digest the canonical JSON's SHA-256.
    from deviation.evaluate import evaluate_snapshot
    from deviation.evaluate.pipeline import default_rule_set
    from deviation.inputs.case import load_case

    snapshot = load_case(CASE).snapshot()
    ev = evaluate_snapshot(snapshot, conservative=False, rule_set=default_rule_set()).model_dump(mode="json")
    compact, arr = arrays.split_arrays(ev)
    db = backend.target("fmt1")
    store = open_store(db)
    try:
        rid = store.create_record(snapshot, lot="L-1", retort_id="R1", process_id="P", **OP)
        store.append_event(rid, "evaluated", {"engine_version": ev["engine_version"],
                                              "rule_set_sha256": ev["guidance"]["rule_set_sha256"],
                                              "options": {"conservative": False, "what_if": True},
                                              "snapshot_seq": 1, "evaluation": compact,
                                              "arrays": arrays.arrays_digest(arr, digest_format=1)}, **OP)
        assert "format" not in store.events(rid)[-1].payload["arrays"]
    finally:
        store.close()
    code, out, _ = run(capsys, "replay", rid, "--db", db, "--json")
    r = json.loads(out)["records"][0]
    assert code == 0 and r["reproduced"] and r["arrays"] == "identical"


def test_an_evaluated_event_with_an_unknown_digest_format_is_refused(backend):
    store = backend.open("fmt")
    try:
        rid = store.create_record({"case": {}}, actor="olga", role="operator", lot="L", retort_id="R",
                                  process_id="P")
        for bad in (3, True, "2"):
            payload = {"engine_version": "0.2.1", "evaluation": {"delivered_F_min": 1.0},
                       "arrays": {"format": bad, "sha256": "0" * 64, "lengths": {}, "last": {}}}
            with pytest.raises(StoreError, match="expected 1 or 2"):
                store.append_event(rid, "evaluated", payload, actor="olga", role="operator")
    finally:
        store.close()


def test_replay_reproduces_a_compact_event_and_checks_the_arrays(capsys, backend):
    db = backend.target("replay")
    code, out, _ = run(capsys, "record", "new", CASE, "--db", db, "--role", "operator", "--json")
    rid = json.loads(out)["id"]
    code, out, _ = run(capsys, "replay", rid, "--db", db, "--json")
    r = json.loads(out)["records"][0]
    assert code == 0 and r["reproduced"] and r["arrays"] == "identical"
    code, out, _ = run(capsys, "record", "show", rid, "--db", db, "--json", "--arrays")
    doc = json.loads(out)
    assert doc["arrays_check"]["status"] == "identical" and len(doc["evaluation"]["cold_spot"]["time_min"]) > 100


# -- summaries ---------------------------------------------------------------------------------


def _states(store) -> dict[str, str]:
    ids = {}
    for lot in ("A", "B", "C", "D"):
        ids[lot] = store.create_record({"case": {"deviation": {"lot": lot, "plant": "Osterby Hollow"}}},
                                       lot=lot, retort_id="R1", process_id="P-1", **OP)
    ev = {"engine_version": "1", "delivered_F_min": 5.0, "target_F_min": 6.0,
          "flags": [{"code": "temperature-low", "message": "retort at 116.0 °C from 30 to 40 min"}],
          "guidance": {"disposition": "reprocess", "summary": "hold the lot", "rule_set_sha256": "ab" * 32}}
    for lot in ("B", "C", "D"):
        store.add_evaluation(ids[lot], ev, **OP)
    for lot in ("C", "D"):
        store.place_hold(ids[lot], reason="drop", **SUP)
    store.decide(ids["D"], decision="reprocess", reason="F0 short", result="reprocessed", **PA)
    store.release_hold(ids["D"], reason="reprocessed as filed", **SUP)
    return ids


def test_list_reads_the_summary_table_in_one_query(backend):
    s = backend.open("sum")
    ids = _states(s)
    rows = {r.lot: r for r in s.list_records()}
    assert {k: rows[k].state for k in rows} == {"A": "entered", "B": "evaluated", "C": "held", "D": "decided"}
    assert rows["C"].held and not rows["D"].held
    assert rows["D"].decision == "reprocess" and rows["D"].decided_by == "pat"
    assert rows["B"].guidance == "reprocess" and rows["B"].delivered_F_min == 5.0
    assert rows["A"].plant == "Osterby Hollow"
    assert [r.lot for r in s.list_records(state="held")] == ["C"]
    assert [r.id for r in s.list_records(plant="Osterby Hollow")] == list(ids.values())
    assert s.list_records(plant="elsewhere") == []
    queries = []
    import sqlalchemy as sa

    sa.event.listen(s.engine, "before_cursor_execute", lambda *a: queries.append(a[2]))
    s.list_records()
    assert len([q for q in queries if q.lstrip().upper().startswith("SELECT")]) == 1


def test_verify_checks_and_rebuilds_the_summary_table(backend):
    db = backend.target("sum")
    s = open_store(db)
    ids = _states(s)
    assert s.verify().summaries == {"checked": 4, "differing": 0, "outdated_format": 0, "extra": 0, "rebuilt": 0}
    s.close()
    # The board lied: a held lot shown as decided, and a row removed.
    backend.sql(db, f"UPDATE record_summaries SET state = 'decided', decision = 'release-after-evaluation' "
                    f"WHERE id = '{ids['C']}'")
    backend.sql(db, f"DELETE FROM record_summaries WHERE id = '{ids['A']}'")
    s = open_store(db)
    assert {r.lot: r.state for r in s.list_records()}.get("C") == "decided"
    res = s.verify()
    assert not res.ok and res.summaries["differing"] == 2 and res.summaries["rebuilt"] == 2
    assert {r.lot: r.state for r in s.list_records()} == {"A": "entered", "B": "evaluated", "C": "held",
                                                          "D": "decided"}
    assert s.verify().ok  # rebuilt from the events


def test_the_deviation_log_in_every_format(capsys, backend, tmp_path):
    db = backend.target("log")
    s = open_store(db)
    ids = _states(s)
    s.note(ids["C"], "<script>alert(1)</script> # DISPOSITION: RELEASE APPROVED", **OP)
    day = s.record(ids["A"]).created_utc[:10]
    code, out, _ = run(capsys, "record", "log", "--since", day, "--until", day, "--db", db)
    assert code == 0
    rows = list(csv.DictReader(io.StringIO(out)))
    assert [r["lot"] for r in rows] == ["A", "B", "C", "D"]  # open items first (D is decided)
    d = rows[3]
    assert (d["decision"], d["decided_by"], d["decision_reason"], d["open"]) == ("reprocess", "pat", "F0 short", "no")
    assert d["hold_released_by"] == "sam" and "retort at 116.0 °C" in d["what_happened"]
    assert rows[0]["what_happened"] == "not evaluated" and rows[0]["open"] == "yes"
    code, out, _ = run(capsys, "record", "log", "--plant", "elsewhere", "--db", db, "--json")
    assert code == 0 and json.loads(out)["count"] == 0
    for fmt in ("html", "md", "pdf"):
        path = tmp_path / f"log.{fmt}"
        code, _, err = run(capsys, "record", "log", "--since", day, "--db", db, "-o", path)
        assert code == 0 and path.stat().st_size > 500, err
    html = (tmp_path / "log.html").read_text(encoding="utf-8")
    assert "OPEN: awaiting the process authority" in html and "<strong>reprocess</strong> by pat" in html
    code, _, err = run(capsys, "record", "log", "--format", "pdf", "--db", db)
    assert code == 2 and "a PDF is not written to the terminal" in err


def test_a_lot_name_cannot_become_a_formula_in_the_csv(capsys, backend):
    db = backend.target("csv")
    s = open_store(db)
    s.create_record({"case": {}}, lot="=HYPERLINK(\"http://x\")", retort_id="+R1", process_id="P-1", **OP)
    code, out, _ = run(capsys, "record", "log", "--db", db)
    row = next(csv.DictReader(io.StringIO(out)))
    assert row["lot"] == "'=HYPERLINK(\"http://x\")" and row["retort_id"] == "'+R1"


# -- migration of a store written by the release before ----------------------------------------


def _legacy_copy(tmp_path) -> Path:
    db = tmp_path / "legacy.db"
    shutil.copy(LEGACY, db)
    return db


def _rows(db) -> list[tuple]:
    con = sqlite3.connect(db)
    try:
        return con.execute("SELECT global_seq, record_id, seq, kind, utc, actor, role, payload, prev_hash, hash, "
                           "origin, global_prev_hash, global_hash FROM events ORDER BY global_seq").fetchall()
    finally:
        con.close()


def test_a_store_of_the_release_before_migrates_with_its_chains_intact(capsys, tmp_path):
    db = _legacy_copy(tmp_path)
    before = _rows(db)
    s = open_store(db)
    assert s.schema_version() == 4
    after = _rows(db)
    assert after[:len(before)] == before  # no event rewritten
    assert [r[3] for r in after[len(before):]] == ["process-filed", "process-filed", "process-retired"]
    res = s.verify()
    assert res.ok, res.problems
    assert res.signatures["keyed_from_global_seq"] == len(before) + 1
    a, b, c, d = (r.id for r in s.list_records())
    va = s.record(a)
    assert va.state == "decided" and va.disposition["words"] == "release after evaluation"  # the old word
    assert "cold_spot" in va.stored_evaluation and va.arrays_check is None  # kept whole, as written
    assert va.evaluation["cold_spot"]["time_min"] and va.arrays_check["status"] == "stored"
    assert s.record(b).state == "released" and s.record(b).disposition is None  # read as written
    assert s.record(d).imported
    # The summaries were built; the library was put in the chain and reads back checked.
    assert {r.id: r.state for r in s.list_records()} == {a: "decided", b: "released", c: "entered", d: "entered"}
    from deviation.records import processes as library

    assert library.get_process(s, "OH-STW-TRAY").version == 1
    with pytest.raises(Exception, match="retired"):
        library.resolve(s, "OH-CHL-87x115")
    # New events are keyed and compact; the legacy part stays verifiable under the seal.
    s.note(a, "after the upgrade", **OP)
    assert s.verify().ok
    code, out, _ = run(capsys, "replay", "--all", "--db", db, "--json")
    assert json.loads(out)["count"] == 4


def test_a_rebuilt_legacy_chain_breaks_the_seal(tmp_path):
    db = _legacy_copy(tmp_path)
    open_store(db).close()
    con = sqlite3.connect(db)
    # The old disposition edited, its SHA-256 chain recomputed by hand (no key needed for it).
    from deviation.records.chains import canonical_json, event_hash, global_hash

    rows = con.execute("SELECT global_seq, record_id, seq, kind, utc, actor, role, payload, prev_hash, origin "
                       "FROM events ORDER BY global_seq").fetchall()
    per, gprev = {}, "0" * 64
    seal_seq = con.execute("SELECT from_global_seq FROM store_keys").fetchone()[0]
    for gseq, rid, seq, kind, utc, actor, role, payload, prev, origin in rows:
        if gseq >= seal_seq:
            break
        if kind == "disposition":
            payload = canonical_json(dict(json.loads(payload), decision="destroy"))
        prev = per.get(rid, "0" * 64)
        h = event_hash(rid, seq, kind, utc, actor, role, payload, prev)
        gh = global_hash(gseq, rid, seq, h, origin, gprev)
        con.execute("UPDATE events SET payload=?, prev_hash=?, hash=?, global_prev_hash=?, global_hash=? "
                    "WHERE global_seq=?", (payload, prev, h, gprev, gh, gseq))
        per[rid], gprev = h, gh
    con.commit()
    con.close()
    res = open_store(db).verify()
    assert not res.ok
    assert any("do not end at the head sealed under the key" in p["reason"] for p in res.problems)


def test_a_legacy_bundle_imports_under_the_rules_of_today(tmp_path):
    s = open_store(tmp_path / "new.db")
    bundle = json.loads((DATA / "legacy_bundle_v1.json").read_text(encoding="utf-8"))
    res = s.import_bundle(bundle, actor="ada", role="auditor")
    assert res.records_added == 2 and s.verify().ok
    released = json.loads((DATA / "legacy_bundle_v1_released.json").read_text(encoding="utf-8"))
    with pytest.raises(Exception, match="event 4 \\(hold-released\\).*has not decided"):
        s.import_bundle(released, actor="ada", role="auditor")


def test_the_legacy_store_migrates_on_postgresql(pg_backend, tmp_path):
    """The same fixture's rows, copied into a PostgreSQL schema at version 3, then opened."""
    import sqlalchemy as sa

    from deviation.records import processes as library
    from deviation.records.schema import MIGRATIONS_1_TO_3

    target = pg_backend.target("legacy")
    engine = sa.create_engine(target)
    src = sqlite3.connect(LEGACY)
    try:
        with engine.begin() as conn:
            for m in MIGRATIONS_1_TO_3:
                m(conn)
            conn.exec_driver_sql("DELETE FROM store_info")
            md = sa.MetaData()
            library._define_v1(md)
            md.create_all(conn)
            for table in ("schema_version", "store_info", "records", "events", "library_schema_version",
                          "processes", "process_retirements"):
                cur = src.execute(f"SELECT * FROM {table}")
                cols = [c[0] for c in cur.description]
                rows = [dict(zip(cols, r)) for r in cur.fetchall()]
                if rows:
                    conn.execute(sa.table(table, *[sa.column(c) for c in cols]).insert(), rows)
    finally:
        src.close()
        engine.dispose()
    before = pg_backend.query(target, "SELECT global_seq, hash, global_hash, payload FROM events ORDER BY global_seq")
    s = open_store(target)
    after = pg_backend.query(target, "SELECT global_seq, hash, global_hash, payload FROM events ORDER BY global_seq")
    assert after[:len(before)] == before
    res = s.verify()
    assert res.ok and s.schema_version() == 4, res.problems
    assert len(s.list_records()) == 4
