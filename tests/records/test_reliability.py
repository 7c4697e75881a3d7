"""Reliability of the store with real processes (no mocks), on SQLite files and on PostgreSQL.

- a writer killed with SIGKILL mid-write leaves a store that opens and verifies, with every
  event the writer saw committed (both backends);
- two processes appending to the same record at once both land, in order, chain intact (both);
- a row edited behind the tool's back (the ``sqlite3`` command-line tool; ``psql``) is caught by
  ``verify``, naming the event (both);
- a corrupt or foreign file gives a clear error, never a traceback (SQLite files);
- a tampered bundle is refused on import (both).
"""

import json
import os
import random
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest

from deviation.errors import StoreError
from deviation.records.store import open_store

REPO = Path(__file__).resolve().parents[2]
ENV = dict(os.environ, PYTHONPATH=str(REPO) + os.pathsep + os.environ.get("PYTHONPATH", ""))

SNAPSHOT = {"case": {"deviation": {"lot": "L-1"}}, "retort_log_text": "t,T\n" + "0,121.1\n" * 20000}
OP = dict(actor="olga", role="operator")


def py(code: str, *args: str, **kw) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-c", code, *args], env=ENV, cwd=REPO, text=True,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, **kw)


def cli(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "deviation.cli", *args], env=ENV, cwd=REPO, text=True,
                          capture_output=True, timeout=120)


# -- SIGKILL mid-write -------------------------------------------------------------------------

WRITER = r"""
import sys
from deviation.records.store import open_store
snapshot = {"case": {"deviation": {"lot": "L-1"}}, "retort_log_text": "t,T\n" + "0,121.1\n" * 20000}
s = open_store(sys.argv[1])
rid = None
i = 0
while True:
    if i % 4 == 0:
        rid = s.create_record(snapshot, actor="olga", role="operator", lot=f"L-{i}", retort_id="R1",
                              process_id="P-1")
        seq = 1
    else:
        seq = s.note(rid, f"note {i}", actor="olga", role="operator").seq
    print(rid, seq, flush=True)  # printed only after the commit returned
    i += 1
"""


def test_sigkill_mid_write_leaves_a_store_that_opens_and_verifies(backend):
    db = backend.target("killed")
    open_store(db).close()
    committed: set[tuple[str, int]] = set()
    rng = random.Random(5)
    for round_ in range(3):
        proc = py(WRITER, str(db))
        want = rng.randint(5, 25)
        for _ in range(want):
            line = proc.stdout.readline()
            assert line, proc.stderr.read()
            rid, seq = line.split()
            committed.add((rid, int(seq)))
        time.sleep(rng.uniform(0.0, 0.02))  # land somewhere inside the next write
        proc.send_signal(signal.SIGKILL)
        proc.wait(timeout=30)
        for line in proc.stdout.read().splitlines():  # committed before the kill, printed but unread
            rid, seq = line.split()
            committed.add((rid, int(seq)))
        assert proc.returncode == -signal.SIGKILL
    s = open_store(db)
    res = s.verify()
    assert res.ok, res.first_broken
    stored = {(e.record_id, e.seq) for rid in s.record_ids() for e in s.events(rid)}
    assert committed <= stored  # every committed event is there
    assert len(stored) - len(committed) <= 3  # at most the one in flight per killed writer
    s.note(s.record_ids()[-1], "the store takes writes after the crash", **OP)
    assert s.verify().ok


# -- two writers on one record ---------------------------------------------------------------

APPENDER = r"""
import os, sys, time
from deviation.records.store import open_store
db, rid, name, n, go = sys.argv[1], sys.argv[2], sys.argv[3], int(sys.argv[4]), sys.argv[5]
s = open_store(db)
while not os.path.exists(go):
    time.sleep(0.001)
for i in range(n):
    s.note(rid, f"{name}-{i}", actor=name, role="operator")
print("done", flush=True)
"""


def test_two_processes_appending_to_one_record_both_land_in_order(backend, tmp_path):
    db, go, n = backend.target("shared"), tmp_path / "go", 40
    s = open_store(db)
    rid = s.create_record({"case": {}}, lot="L-1", retort_id="R1", process_id="P-1", **OP)
    s.close()
    procs = [py(APPENDER, str(db), rid, name, str(n), str(go)) for name in ("A", "B")]
    time.sleep(0.5)  # both opened the store and wait
    go.write_text("go")
    for p in procs:
        out, err = p.communicate(timeout=120)
        assert p.returncode == 0, err
        assert out.strip() == "done"
    s = open_store(db)
    evs = s.events(rid)
    assert [e.seq for e in evs] == list(range(1, 2 * n + 2))
    for name in ("A", "B"):
        texts = [e.payload["text"] for e in evs if e.actor == name]
        assert texts == [f"{name}-{i}" for i in range(n)]  # each writer's events in its own order
    for a, b in zip(evs, evs[1:]):
        assert b.prev_hash == a.hash
    assert s.verify().ok


# -- edits with the sqlite3 tool ---------------------------------------------------------------


def _three_records(db) -> list[str]:
    s = open_store(db)
    ids = []
    for lot in ("L-1", "L-2", "L-3"):
        rid = s.create_record({"case": {"lot": lot}}, lot=lot, retort_id="R1", process_id="P-1", **OP)
        s.note(rid, f"first note on {lot}", **OP)
        s.note(rid, f"second note on {lot}", **OP)
        ids.append(rid)
    s.close()
    return ids


EDITS = [
    # (what, SQL with {rid}, seq reported, words in the reason)
    ("payload", "UPDATE events SET payload = replace(payload, 'first', 'only') WHERE record_id = '{rid}' AND seq = 2",
     2, "content does not match its hash"),
    ("actor", "UPDATE events SET actor = 'mallory' WHERE record_id = '{rid}' AND seq = 3", 3,
     "content does not match its hash"),
    ("time", "UPDATE events SET utc = '2020-01-01T00:00:00.000000Z' WHERE record_id = '{rid}' AND seq = 2", 2,
     "content does not match its hash"),
    ("role", "UPDATE events SET role = 'supervisor' WHERE record_id = '{rid}' AND seq = 2", 2,
     "content does not match its hash"),
    ("hash", "UPDATE events SET hash = '" + "a" * 64 + "' WHERE record_id = '{rid}' AND seq = 2", 2,
     "store-wide chain link does not match"),
    ("deleted event", "DELETE FROM events WHERE record_id = '{rid}' AND seq = 2", 3,
     "sequence jumps"),
    ("records row", "UPDATE records SET lot = 'L-9' WHERE id = '{rid}'", 1,
     "records table row differs from the entered event in lot"),
    ("moved event", "UPDATE events SET record_id = (SELECT id FROM records WHERE id <> '{rid}' LIMIT 1), "
     "seq = 4 WHERE record_id = '{rid}' AND seq = 3", 4, "does not match"),
]


@pytest.mark.parametrize("what, statement, seq, reason", EDITS, ids=[e[0] for e in EDITS])
def test_an_edit_behind_the_tools_back_is_caught_by_verify_naming_the_event(backend, what, statement, seq,
                                                                            reason):
    # sqlite3 on an SQLite file, psql on PostgreSQL: the same SQL either way.
    db = backend.target("edited")
    rid = _three_records(db)[1]
    backend.sql(db, statement.format(rid=rid))
    res = open_store(db).verify()
    assert not res.ok
    b = res.first_broken
    assert reason in b["reason"]
    if what != "moved event":  # a moved event is reported where it landed
        assert (b["record_id"], b["seq"]) == (rid, seq)


def test_verify_command_names_the_broken_event_and_exits_1(backend):
    db = backend.target("edited")
    rid = _three_records(db)[2]
    backend.sql(db, f"UPDATE events SET payload = replace(payload, 'second', 'third') "
                    f"WHERE record_id = '{rid}' AND seq = 3")
    out = cli("verify", "--db", str(db))
    assert out.returncode == 1
    assert f"record {rid} event 3 (note" in " ".join(out.stdout.split())
    js = cli("verify", "--db", str(db), "--json")
    assert js.returncode == 1
    doc = json.loads(js.stdout)
    assert doc["ok"] is False and doc["first_broken"]["record_id"] == rid and doc["first_broken"]["seq"] == 3
    ok_db = backend.target("fine")
    _three_records(ok_db)
    good = cli("verify", "--db", str(ok_db), "--json")
    assert good.returncode == 0 and json.loads(good.stdout)["ok"] is True
    assert json.loads(good.stdout)["checked_events"] == 9


# -- corrupt or foreign files --------------------------------------------------------------------


def _assert_clear_cli_error(db: Path, expect: str):
    for args in (["verify"], ["record", "list"]):
        out = cli(*args, "--db", str(db))
        assert "Traceback" not in out.stderr, out.stderr
        assert out.returncode == 3, (out.returncode, out.stdout, out.stderr)
        assert expect in out.stderr


def test_random_bytes_give_a_clear_error(tmp_path):
    db = tmp_path / "noise.db"
    db.write_bytes(random.Random(1).randbytes(64 * 1024))
    with pytest.raises(StoreError, match="is not a deviation record store"):
        open_store(db)
    _assert_clear_cli_error(db, "noise.db: is not a deviation record store")


def test_another_apps_sqlite_database_gives_a_clear_error(tmp_path):
    db = tmp_path / "inventory.db"
    con = sqlite3.connect(db)
    con.executescript("CREATE TABLE items (sku TEXT PRIMARY KEY, qty INTEGER);"
                      "INSERT INTO items VALUES ('can-87x115', 12000);")
    con.close()
    with pytest.raises(StoreError, match="not a deviation record store .*items"):
        open_store(db)
    _assert_clear_cli_error(db, "is not a deviation record store (it holds other tables: items)")
    con = sqlite3.connect(db)
    assert con.execute("SELECT qty FROM items").fetchone() == (12000,)  # left as it was
    assert con.execute("PRAGMA journal_mode").fetchone()[0] == "delete"


def test_damaged_header_gives_a_clear_error(tmp_path):
    db = tmp_path / "damaged.db"
    _three_records(db)
    data = bytearray(db.read_bytes())
    data[0:16] = b"garbage garbage!"
    db.write_bytes(bytes(data))
    _assert_clear_cli_error(db, "is not a deviation record store (not an SQLite database file)")


def test_corrupt_pages_give_a_clear_error_or_a_failed_verify(tmp_path):
    db = tmp_path / "corrupt.db"
    s = open_store(db)
    for i in range(6):
        s.create_record(SNAPSHOT, lot=f"L-{i}", retort_id="R1", process_id="P-1", **OP)
    s.close()
    assert not Path(str(db) + "-wal").exists() or Path(str(db) + "-wal").stat().st_size == 0
    data = bytearray(db.read_bytes())
    assert len(data) > 40_000
    rng = random.Random(7)
    for start in (4096, len(data) // 2, len(data) - 8192):  # schema page, a data page, near the end
        data[start:start + 4096] = rng.randbytes(4096)
    db.write_bytes(bytes(data))
    try:
        res = open_store(db).verify()
        assert not res.ok
    except StoreError as exc:
        assert "corrupt.db" in str(exc)
    out = cli("verify", "--db", str(db))
    assert "Traceback" not in out.stderr, out.stderr
    assert out.returncode in (1, 3)
    assert out.stderr.startswith("error: ") or "BROKEN" in out.stdout


# -- tampered bundle ------------------------------------------------------------------------------


def test_import_of_a_tampered_bundle_is_refused_by_the_command(backend, tmp_path):
    src, dst, bundle = backend.target("src"), backend.target("dst"), tmp_path / "bundle.json"
    ids = _three_records(src)
    out = cli("export", "--all", "-o", str(bundle), "--db", str(src), "--json")
    assert out.returncode == 0, out.stderr
    assert json.loads(out.stdout)["records"] == 3
    doc = json.loads(bundle.read_text(encoding="utf-8"))
    doc["records"][1]["events"][1]["payload"]["text"] = "a note nobody wrote"
    bundle.write_text(json.dumps(doc), encoding="utf-8")
    out = cli("import", str(bundle), "--db", str(dst), "--role", "auditor")
    assert out.returncode == 3 and "Traceback" not in out.stderr
    assert "import refused: the bundle's sha256 does not match its contents" in out.stderr
    # With the source store's key, the changed event itself is named.
    from deviation.records import keys

    key_file = keys.key_source(open_store(src).store_id()).path
    out = cli("import", str(bundle), "--db", str(dst), "--role", "auditor", "--source-key", str(key_file))
    assert out.returncode == 3 and "Traceback" not in out.stderr
    assert (f"import refused: record {ids[1]} event 2 (note): content does not match its signature under "
            "the source store's key") in out.stderr
    assert open_store(dst).count_records() == 0  # nothing of a refused bundle is written
