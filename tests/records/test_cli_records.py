"""The record commands end to end (in-process ``deviation.cli.main``), with the real engine."""

import json
import shutil
from pathlib import Path

import pytest

from deviation.cli import main
from deviation.evaluate import CAUTION
from deviation.records.store import open_store

REPO = Path(__file__).resolve().parents[2]
CASE = REPO / "tests" / "data" / "good_case.toml"
LOGGED_CASE = REPO / "demo_cases" / "chili_temperature_drop.toml"


@pytest.fixture
def db(backend, monkeypatch):
    """The ``--db`` value: an SQLite file or a PostgreSQL URL (tests/store/conftest.py)."""
    monkeypatch.delenv("DEVIATION_DB", raising=False)
    monkeypatch.delenv("DEVIATION_ROLE", raising=False)
    return backend.target("cli")


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out = capsys.readouterr()
    return code, out.out, out.err


def run_json(capsys, *argv):
    code, out, err = run(capsys, *argv, "--json")
    lines = out.strip().splitlines()
    assert len(lines) == 1, out  # one JSON object
    return code, json.loads(lines[0]), err


def test_operator_supervisor_process_authority_auditor_flow(capsys, db, backend, tmp_path):
    code, doc, _ = run_json(capsys, "record", "new", CASE, "--db", db, "--actor", "olga", "--role", "operator")
    assert code == 0 and doc["state"] == "evaluated" and doc["evaluated"] is True
    rid = doc["id"]
    assert doc["evaluation"]["delivered_F_min"] > 0 and doc["evaluation"]["disposition"]

    code, out, err = run(capsys, "record", "hold", rid, "--reason", "temperature drop", "--db", db,
                         "--actor", "olga", "--role", "operator")
    assert code == 4 and out == ""
    assert err.strip() == "error: actor 'olga' (role operator) may not place-hold: that is for role supervisor"

    code, doc, _ = run_json(capsys, "record", "hold", rid, "--reason", "temperature drop", "--db", db,
                            "--actor", "sam", "--role", "supervisor")
    assert code == 0 and doc["state"] == "held" and doc["event"]["kind"] == "hold-placed"

    code, _, err = run(capsys, "record", "amend", rid, CASE, "--reason", "late fix", "--db", db,
                       "--actor", "olga", "--role", "operator")
    assert code == 4 and "amendments close at the hold decision" in err

    code, doc, _ = run_json(capsys, "record", "decide", rid, "--decision", "reprocess", "--reason",
                            "F0 short of target", "--result", "reprocessed 2024-05-02", "--db", db,
                            "--actor", "pat", "--role", "process-authority", "--yes")
    assert code == 0 and doc["state"] == "decided"
    assert doc["event"]["payload"] == {"decision": "reprocess", "reason": "F0 short of target",
                                       "result": "reprocessed 2024-05-02"}

    code, doc, _ = run_json(capsys, "record", "note", rid, "--text", "lot reprocessed", "--db", db,
                            "--actor", "olga", "--role", "operator")
    assert code == 0 and doc["event"]["seq"] == 5

    code, doc, _ = run_json(capsys, "record", "show", rid, "--db", db)
    assert code == 0 and doc["id"] == rid and doc["state"] == "decided"
    assert [e["kind"] for e in doc["events"]] == ["entered", "evaluated", "hold-placed", "disposition", "note"]
    assert [e["actor"] for e in doc["events"]] == ["olga", "olga", "sam", "pat", "olga"]
    assert doc["snapshot"]["case"]["deviation"]["lot"] == "L1"
    assert doc["evaluation"]["delivered_F_min"] > 0

    code, doc, _ = run_json(capsys, "record", "list", "--state", "decided", "--lot", "L1", "--retort", "R1",
                            "--db", db)
    assert code == 0 and [r["id"] for r in doc["records"]] == [rid]

    code, doc, _ = run_json(capsys, "verify", "--db", db, "--actor", "ann")
    assert code == 0 and doc == {**doc, "ok": True, "checked_events": 5, "first_broken": None}

    code, doc, _ = run_json(capsys, "replay", rid, "--db", db)
    assert code == 0 and doc["records"][0]["id"] == rid and doc["records"][0]["reproduced"] is True
    assert doc["throughput_records_per_s"] > 0

    bundle = tmp_path / "b.json"
    code, doc, _ = run_json(capsys, "export", rid, "-o", bundle, "--db", db)
    assert code == 0 and doc["records"] == 1 and doc["events"] == 5
    other = backend.target("other")
    code, doc, _ = run_json(capsys, "import", bundle, "--db", other, "--role", "auditor", "--actor", "ann")
    assert code == 0 and doc["records_added"] == 1 and doc["ok"] is True
    assert open_store(other).verify().ok
    assert [e.hash for e in open_store(other).events(rid)] == [e.hash for e in open_store(db).events(rid)]


def test_human_output_ends_with_the_caution(capsys, db):
    code, out, _ = run(capsys, "record", "new", CASE, "--db", db, "--role", "operator")
    assert code == 0
    assert " ".join(out.split()).endswith(" ".join(CAUTION.split()))
    rid = open_store(db).record_ids()[0]
    for argv in (["record", "show", rid], ["record", "list"], ["verify"], ["replay", rid]):
        code, out, _ = run(capsys, *argv, "--db", db)
        assert code == 0
        assert " ".join(out.split()).endswith(" ".join(CAUTION.split())), argv


def test_record_new_with_a_retort_log_stores_the_log_contents(capsys, db):
    code, doc, _ = run_json(capsys, "record", "new", LOGGED_CASE, "--db", db, "--role", "operator")
    assert code == 0
    view = open_store(db).record(doc["id"])
    text = (LOGGED_CASE.parent / view.snapshot["case"]["deviation"]["retort_log"]).read_text(encoding="utf-8-sig")
    assert view.snapshot["retort_log_text"] == text  # the contents, so replay needs no file


def test_replay_survives_moved_case_files(capsys, db, tmp_path):
    shutil.copytree(REPO / "demo_cases", tmp_path / "cases")
    code, doc, _ = run_json(capsys, "record", "new", tmp_path / "cases" / LOGGED_CASE.name, "--db", db,
                            "--role", "operator")
    assert code == 0
    shutil.rmtree(tmp_path / "cases")
    code, doc, _ = run_json(capsys, "replay", doc["id"], "--db", db)
    assert code == 0 and doc["records"][0]["reproduced"] is True


def test_replay_reports_what_changed_and_why(capsys, db):
    code, doc, _ = run_json(capsys, "record", "new", CASE, "--db", db, "--role", "operator")
    rid = doc["id"]
    s = open_store(db)
    stored = dict(s.record(rid).evaluation)
    stored["delivered_F_min"] *= 1.0 + 1e-7  # inside the tolerance (rel 1e-6)
    s.add_evaluation(rid, stored, actor="sam", role="supervisor")
    code, doc, _ = run_json(capsys, "replay", rid, "--db", db)
    assert code == 0 and doc["records"][0]["reproduced"] is True

    stored["delivered_F_min"] *= 1.01
    stored["engine_version"] = "0.0.9"
    stored["flags"] = stored["flags"] + [{"code": "record-gap", "message": "x"}]
    s.add_evaluation(rid, stored, actor="sam", role="supervisor")
    code, doc, _ = run_json(capsys, "replay", rid, "--db", db)
    assert code == 1
    r = doc["records"][0]
    assert r["reproduced"] is False and r["status"] == "changed"
    fields = {d["field"]: d for d in r["differences"]}
    assert set(fields) >= {"delivered_F_min", "flags"}
    assert fields["delivered_F_min"]["stored"] == pytest.approx(fields["delivered_F_min"]["now"] * 1.01, rel=1e-6)
    assert "engine version changed: 0.0.9 -> " in r["why"][0]
    assert r["engine_version"]["stored"] == "0.0.9"

    code, out, _ = run(capsys, "replay", rid, "--db", db)
    assert code == 1 and "changed" in out and "delivered_F_min" in " ".join(out.split())


def test_replay_all_uses_a_pool_and_reports_throughput(capsys, db):
    for _ in range(4):
        assert run_json(capsys, "record", "new", CASE, "--db", db, "--role", "operator")[0] == 0
    rid = open_store(db).create_record({"case": {}}, actor="o", role="operator", lot="L9", retort_id="R1",
                                       process_id="P")
    code, doc, _ = run_json(capsys, "replay", "--all", "--jobs", "2", "--db", db)
    assert code == 0  # a record never evaluated is listed, not a failure
    assert doc["count"] == 5 and doc["reproduced"] == 4 and doc["not_evaluated"] == 1 and doc["jobs"] == 2
    assert {r["id"]: r["status"] for r in doc["records"]}[rid] == "not-evaluated"
    assert doc["throughput_records_per_s"] > 0
    code, out, err = run(capsys, "replay", "--all", "--jobs", "2", "--db", db)
    assert code == 0 and "5 record(s): 4 reproduced" in " ".join(out.split())
    assert "replaying" in err  # the progress bar goes to stderr


def test_evaluate_appends_an_evaluation(capsys, db):
    _, doc, _ = run_json(capsys, "record", "new", CASE, "--db", db, "--role", "operator")
    code, doc2, _ = run_json(capsys, "record", "evaluate", doc["id"], "--conservative", "--db", db,
                             "--role", "supervisor")
    assert code == 0 and doc2["previous"]["delivered_F_min"] == doc["evaluation"]["delivered_F_min"]
    ev = open_store(db).record(doc["id"]).evaluation_event
    assert ev["options"]["conservative"] is True and ev["seq"] == 3 and ev["role"] == "supervisor"
    code, doc3, _ = run_json(capsys, "replay", doc["id"], "--db", db)
    assert code == 0 and doc3["records"][0]["reproduced"] is True  # replayed with the stored options


def test_amend_before_hold_writes_amended_and_evaluated(capsys, db):
    _, doc, _ = run_json(capsys, "record", "new", CASE, "--db", db, "--role", "operator")
    code, doc2, _ = run_json(capsys, "record", "amend", doc["id"], CASE, "--reason", "lot size misread",
                             "--db", db, "--role", "operator")
    assert code == 0 and doc2["amended_seq"] == 3
    kinds = [e.kind for e in open_store(db).events(doc["id"])]
    assert kinds == ["entered", "evaluated", "amended", "evaluated"]


def test_role_from_environment_and_missing_role(capsys, db, monkeypatch):
    code, _, err = run(capsys, "record", "new", CASE, "--db", db)
    assert code == 4 and "give --role" in err
    monkeypatch.setenv("DEVIATION_ROLE", "operator")
    assert run(capsys, "record", "new", CASE, "--db", db)[0] == 0
    code, _, err = run(capsys, "record", "new", CASE, "--db", db, "--role", "auditor", "--actor", "ann")
    assert code == 4 and err.strip() == "error: actor 'ann' (role auditor) may not enter: that is for role operator"
    assert open_store(db).count_records() == 1


def test_bad_input_makes_no_record(capsys, db):
    bad = REPO / "tests" / "data" / "bad_cases" / "missing_target.toml"
    code, out, err = run(capsys, "record", "new", bad, "--db", db, "--role", "operator")
    assert code == 2 and err.startswith("error: ") and "target_F_min" in err
    assert open_store(db).count_records() == 0
    code, _, err = run(capsys, "record", "list", "--since", "last week", "--db", db)
    assert code == 2 and "not a date" in err
    code, _, err = run(capsys, "record", "show", "DR-NOSUCHRECORD", "--db", db)
    assert code == 3 and "no record DR-NOSUCHRECORD" in err
    code, _, err = run(capsys, "replay", "--db", db)
    assert code == 2 and "give a record ID or --all" in err


def test_record_without_subcommand_prints_usage(capsys):
    code, _, err = run(capsys, "record")
    assert code == 2 and "SUBCOMMAND" in err


def test_a_store_that_is_not_ours_is_exit_3_without_traceback(capsys, tmp_path):
    junk = tmp_path / "junk.db"
    junk.write_bytes(b"\x00\xff" * 5000)
    for argv in (["record", "list"], ["verify"], ["record", "new", CASE, "--role", "operator"]):
        code, out, err = run(capsys, *argv, "--db", junk)
        assert code == 3 and "Traceback" not in err
        assert err.strip() == f"error: {junk}: is not a deviation record store (not an SQLite database file)"


def test_a_record_the_engine_cannot_evaluate_is_kept_and_says_why(capsys, db, tmp_path):
    # a continuous cooker filed with the heating-curve model: the engine refuses to evaluate it
    # (its bounding pair is not a convolution), the deviation stays on record, entered
    text = (REPO / "demo_cases" / "soup_reel_stop.toml").read_text()
    text = text.replace('model = "conduction"\nfh_min = 7.0', 'model = "heating-curve"\nfh_min = 7.0\njh = 1.2')
    case = tmp_path / "soup.toml"
    case.write_text(text.replace('retort_log = "logs/', f'retort_log = "{REPO / "demo_cases" / "logs"}/'))
    code, doc, _ = run_json(capsys, "record", "new", case, "--db", db, "--actor", "olga", "--role", "operator")
    assert code != 0 and doc["state"] == "entered" and doc["evaluated"] is False
    assert "linear cold-spot model" in doc["error"]
    code, out, _ = run(capsys, "record", "new", case, "--db", db, "--actor", "olga", "--role", "operator")
    assert "not evaluated" in out and "Traceback" not in out


@pytest.mark.parametrize("actor", ["", "   ", "ol\x1bga"])
def test_a_blank_or_unprintable_actor_is_refused(capsys, db, actor):
    code, out, err = run(capsys, "record", "new", CASE, "--db", db, "--actor", actor, "--role", "operator")
    assert code != 0 and out == ""
    assert "--actor" in err and "person's name" in err
