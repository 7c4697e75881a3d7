"""The filed-process library: versions kept, refs resolved, roles enforced (real SQLite files)."""

import json
from pathlib import Path

import pytest

from deviation.records import processes as library
from deviation.inputs.case import Process, load_case, load_toml
from deviation.cli import main
from deviation.errors import CaseError, PermissionDenied
from deviation.evaluate import scheduled_F_min
from deviation.records.store import open_store

REPO = Path(__file__).resolve().parents[2]
PEAS = REPO / "demo_cases" / "processes" / "OH-PEA-74x113.toml"
CHILI = REPO / "demo_cases" / "processes" / "OH-CHL-87x115.toml"
PA = dict(actor="pat", role="process-authority")


@pytest.fixture
def store(tmp_path, monkeypatch):
    monkeypatch.delenv("DEVIATION_DB", raising=False)
    monkeypatch.delenv("DEVIATION_ROLE", raising=False)
    s = open_store(tmp_path / "lib.db")
    yield s
    s.close()


def peas_table(**changes) -> dict:
    return dict(load_toml(PEAS)["process"], **changes)


def write_case(tmp_path: Path, ref: str) -> Path:
    path = tmp_path / f"case-{ref.replace('@', '-')}.toml"
    path.write_text(f"""
[deviation]
lot = "PEA-1"
retort_id = "R2"
lot_size_containers = 100
initial_temperature_C = 55
process_ref = "{ref}"
[[deviation.events]]
kind = "hold-time"
process_time_min = 15
""", encoding="utf-8")
    return path


def test_refiling_adds_a_version_and_keeps_the_first(store, tmp_path):
    first = library.add_process(store, PEAS, **PA)
    assert tuple(first)[:2] == ("OH-PEA-74x113", 1) and first.warning is None
    second = library.add_process(store, peas_table(process_time_min=25), reason="longer hold", **PA)
    assert (second.process_id, second.version) == ("OH-PEA-74x113", 2)

    v1 = library.get_process(store, "OH-PEA-74x113", 1)
    assert v1.process == load_toml(PEAS)["process"]  # as filed, unchanged by the re-filing
    assert library.get_process(store, "OH-PEA-74x113").version == 2
    assert library.resolve(store, "OH-PEA-74x113")["process_time_min"] == 25
    assert library.resolve(store, "OH-PEA-74x113@1")["process_time_min"] == 20
    assert [p.ref for p in library.list_processes(store, all_versions=True)] == \
        ["OH-PEA-74x113@1", "OH-PEA-74x113@2"]


def test_identical_refiling_adds_no_version(store):
    library.add_process(store, PEAS, **PA)
    again = library.add_process(store, PEAS, **PA)
    assert again.version == 1 and again.new_version is False
    assert again.warning == "identical to version 1 already filed: no new version"


def test_records_keep_the_version_they_were_evaluated_against(store, tmp_path):
    library.add_process(store, PEAS, **PA)
    res = library.resolver(store)
    loaded = load_case(write_case(tmp_path, "OH-PEA-74x113"), process_resolver=res)
    assert res.last.to_dict() == {"ref": "OH-PEA-74x113", "process_id": "OH-PEA-74x113",
                                  "process_version": 1,
                                  "sha256": library.get_process(store, "OH-PEA-74x113", 1).sha256}
    rid = store.create_record(loaded.snapshot(), actor="olga", role="operator", lot="PEA-1", retort_id="R2",
                              process_id=res.last.process_id, process_version=str(res.last.process_version))
    library.add_process(store, peas_table(process_time_min=25), **PA)
    # Version 2 filed later: the record still names version 1 and holds its process.
    view = store.record(rid)
    assert view.process_version == "1"
    assert view.snapshot["case"]["process"]["process_time_min"] == 20
    loaded2, ref2 = library.load_case_with_ref(write_case(tmp_path, "OH-PEA-74x113"), store)
    assert ref2.process_version == 2 and loaded2.case.process.process_time_min == 25
    _, ref1 = library.load_case_with_ref(write_case(tmp_path, "OH-PEA-74x113@1"), store)
    assert ref1.process_version == 1


def test_unknown_id_or_version_is_a_clear_error(store, tmp_path):
    with pytest.raises(CaseError) as err:
        load_case(write_case(tmp_path, "OH-PEA-74x113"), process_resolver=library.resolver(store))
    assert str(err.value) == ("process_ref 'OH-PEA-74x113': no process 'OH-PEA-74x113' is filed in the "
                              "library (the library is empty: a process authority files one with "
                              "'deviation process add FILE')")
    library.add_process(store, PEAS, **PA)
    library.add_process(store, CHILI, **PA)
    with pytest.raises(CaseError) as err:
        load_case(write_case(tmp_path, "OH-PEA-7x11"), process_resolver=library.resolver(store))
    assert str(err.value) == ("process_ref 'OH-PEA-7x11': no process 'OH-PEA-7x11' is filed in the library "
                              "(filed: OH-CHL-87x115, OH-PEA-74x113)")
    with pytest.raises(CaseError) as err:
        load_case(write_case(tmp_path, "OH-PEA-74x113@3"), process_resolver=library.resolver(store))
    assert str(err.value) == ("process_ref 'OH-PEA-74x113@3': process 'OH-PEA-74x113' has no version 3 "
                              "(filed versions: 1)")
    with pytest.raises(CaseError) as err:
        library.resolve(store, "OH-PEA-74x113@latest")
    assert str(err.value) == ("process_ref 'OH-PEA-74x113@latest': expected 'ID' (the latest active "
                              "version) or 'ID@N' (version N, a whole number from 1)")


def test_retired_id_resolves_only_by_explicit_version(store):
    library.add_process(store, PEAS, **PA)
    r = library.retire_process(store, "OH-PEA-74x113", reason="can size withdrawn", **PA)
    assert r.up_to_version == 1
    with pytest.raises(CaseError) as err:
        library.resolve(store, "OH-PEA-74x113")
    assert str(err.value) == (
        f"process_ref 'OH-PEA-74x113': process 'OH-PEA-74x113' was retired on {r.retired_utc[:10]} by pat "
        "(can size withdrawn); name a version explicitly ('OH-PEA-74x113@N') to use a retired one "
        "(filed versions: 1)")
    assert library.resolve(store, "OH-PEA-74x113@1")["id"] == "OH-PEA-74x113"
    assert library.list_processes(store) == []
    assert [p.ref for p in library.list_processes(store, include_retired=True)] == ["OH-PEA-74x113@1"]
    # Filing again makes the id active again, as version 2; version 1 stays retired.
    assert library.add_process(store, PEAS, **PA).version == 2
    assert library.lookup(store, "OH-PEA-74x113").version == 2
    assert library.get_process(store, "OH-PEA-74x113", 1).active is False


def test_only_a_process_authority_files_or_retires(store):
    with pytest.raises(PermissionDenied) as err:
        library.add_process(store, PEAS, actor="olga", role="operator")
    assert str(err.value) == ("actor 'olga' (role operator) may not file or retire a scheduled process: "
                              "that is for role process-authority")
    library.add_process(store, PEAS, **PA)
    with pytest.raises(PermissionDenied) as err:
        library.retire_process(store, "OH-PEA-74x113", reason="x", actor="sam", role="supervisor")
    assert str(err.value) == ("actor 'sam' (role supervisor) may not file or retire a scheduled process: "
                              "that is for role process-authority")
    assert library.lookup(store, "OH-PEA-74x113").active


def test_scheduled_F_shortfall_needs_a_reason(store):
    table = peas_table(target_F_min=7.0)
    F = scheduled_F_min(Process.model_validate(table))
    assert F < 7.0  # the model gives about 6.0 min for the filed peas cycle
    with pytest.raises(CaseError) as err:
        library.add_process(store, table, **PA)
    assert str(err.value).startswith(f"the model gives F0 {F:.2f} min for process OH-PEA-74x113 as "
                                     "scheduled, below its filed target 7.00 min")
    assert "--reason" in str(err.value)
    filed = library.add_process(store, table, reason="heat penetration tests HP-2026-03", **PA)
    assert filed.version == 1 and filed.scheduled_F_min == pytest.approx(F, rel=1e-12)
    assert "below its filed target 7.00 min" in filed.warning
    assert library.get_process(store, "OH-PEA-74x113").reason == "heat penetration tests HP-2026-03"


def test_library_lives_beside_the_store_without_disturbing_it(store, tmp_path):
    library.add_process(store, PEAS, **PA)
    version = store.schema_version()
    store.close()
    again = open_store(tmp_path / "lib.db")  # the store still opens and verifies
    assert again.schema_version() == version and again.verify().ok
    with again._read() as conn:
        assert conn.exec_driver_sql("SELECT max(version) FROM library_schema_version").scalar() == \
            library.LIBRARY_SCHEMA_VERSION
    assert library.get_process(again, "OH-PEA-74x113", 1).process["id"] == "OH-PEA-74x113"
    again.close()


def run_json(capsys, *argv):
    code = main([str(a) for a in argv] + ["--json"])
    out = capsys.readouterr()
    return code, (json.loads(out.out) if out.out.strip() else None), out.err


def test_cli_add_list_show_retire(store, capsys):
    db = store.url.replace("sqlite:///", "")
    code, doc, _ = run_json(capsys, "process", "add", PEAS, "--db", db, "--actor", "pat", "--role",
                            "process-authority")
    assert code == 0 and (doc["id"], doc["version"], doc["warning"]) == ("OH-PEA-74x113", 1, None)
    code, doc, err = run_json(capsys, "process", "add", CHILI, "--db", db, "--actor", "olga", "--role", "operator")
    assert code == 4 and doc is None
    assert err.strip() == ("error: actor 'olga' (role operator) may not file or retire a scheduled process: "
                           "that is for role process-authority")
    code, doc, _ = run_json(capsys, "process", "list", "--db", db)
    assert code == 0 and [p["ref"] for p in doc["processes"]] == ["OH-PEA-74x113@1"]
    code, doc, _ = run_json(capsys, "process", "show", "OH-PEA-74x113", "--version", "1", "--db", db)
    assert code == 0 and doc["process"]["process_time_min"] == 20 and doc["history"]["retirements"] == []
    code, doc, err = run_json(capsys, "process", "show", "OH-PEA-74x113", "--version", "2", "--db", db)
    assert code == 2 and err.strip() == "error: process 'OH-PEA-74x113' has no version 2 (filed versions: 1)"
    code, doc, err = run_json(capsys, "process", "retire", "OH-PEA-74x113", "--reason", "withdrawn", "--db", db,
                              "--actor", "olga", "--role", "operator")
    assert code == 4
    code, doc, _ = run_json(capsys, "process", "retire", "OH-PEA-74x113", "--reason", "withdrawn", "--db", db,
                            "--actor", "pat", "--role", "process-authority")
    assert code == 0 and doc["retired"]["up_to_version"] == 1
    code, doc, _ = run_json(capsys, "process", "list", "--all", "--db", db)
    assert [p["active"] for p in doc["processes"]] == [False]
