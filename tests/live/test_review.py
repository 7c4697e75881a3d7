"""Daily record review: a generated day of the demo plant, one retort with a drop nobody entered."""

from __future__ import annotations

import json
import runpy
import shutil
from pathlib import Path

import pytest

from deviation.errors import CaseError, PermissionDenied
from deviation.live.review import entry_key, read_manifest, review_day
from deviation.records import processes as library
from deviation.records.store import open_store

REPO = Path(__file__).resolve().parents[2]
PROCESSES = REPO / "demo_cases" / "processes"


# The demo plant's day generator (a script in demo_cases/, not a module of the package).
write_day = runpy.run_path(str(REPO / "demo_cases" / "review_day.py"))["write_day"]


@pytest.fixture(scope="module")
def day(tmp_path_factory) -> Path:
    """12 cycles on six retorts, a reading every 30 s; R4's second cycle lost steam in the hold."""
    return write_day(tmp_path_factory.mktemp("day"), cycles=12, step_s=30.0)


def _copy_day(day: Path, to: Path) -> Path:
    shutil.copytree(day.parent, to, dirs_exist_ok=True)
    # the process paths in the schedule are relative to it: point them at the repository's files
    text = (to / "schedule.csv").read_text(encoding="utf-8")
    for pid in ("OH-CHL-87x115", "OH-PEA-74x113", "OH-STW-TRAY"):
        text = text.replace(_process_ref(day, pid), str(PROCESSES / f"{pid}.toml"))
    (to / "schedule.csv").write_text(text, encoding="utf-8")
    return to / "schedule.csv"


def _process_ref(day: Path, pid: str) -> str:
    for line in day.read_text(encoding="utf-8").splitlines():
        if f"{pid}.toml" in line:
            return line.split(",")[2]
    raise AssertionError(pid)


def _by_status(review: dict, status: str) -> list[dict]:
    return [c for c in review["cycles"] if c["status"] == status]


def test_the_unentered_drop_is_found_and_its_record_opened(day, tmp_path):
    store = open_store(tmp_path / "plant.db")
    review = review_day(read_manifest(day), store=store, actor="rita", jobs=2)
    json.dumps(review, allow_nan=False)  # the --json contract
    assert review["count"] == 12 and review["counts"]["not_reviewed"] == 0
    [found] = _by_status(review, "deviation")
    assert found["retort"] == "R4" and found["lot"].endswith("R4002")
    assert [f["code"] for f in found["flags"]] == ["temperature-low"]
    assert found["guidance"]["disposition"] in ("evaluate", "reprocess", "reprocess-or-destroy")
    assert found["guidance"]["actions"], "guidance says what to do now"
    assert found["record"] == "opened" and found["record_id"].startswith("DR-")
    assert all(c["disposition"] == "no-deviation" for c in _by_status(review, "clean"))
    assert "process authority" in review["caution"]
    # The record: entered with the snapshot (log contents, the review's provenance) and evaluated.
    view = store.record(found["record_id"])
    assert [e.kind for e in view.events] == ["entered", "evaluated"]
    assert view.events[0].event_id == found["entry_key"]
    snap = view.snapshot
    assert snap["review"]["recorder_sha256"] == found["recorder_sha256"]
    assert snap["retort_log_text"].startswith("# Invented demo record")
    assert snap["case"]["deviation"]["lot"] == found["lot"]


def test_a_second_run_of_the_same_day_opens_nothing_twice(day, tmp_path):
    store = open_store(tmp_path / "plant.db")
    first = review_day(read_manifest(day), store=store, actor="rita", jobs=1)
    events = store.count_events()
    second = review_day(read_manifest(day), store=store, actor="rita", jobs=2)
    assert first["counts"]["records_opened"] == 1 and second["counts"]["records_opened"] == 0
    assert second["counts"]["records_already_open"] == 1
    assert store.count_records() == 1 and store.count_events() == events
    [a], [b] = _by_status(first, "deviation"), _by_status(second, "deviation")
    assert a["record_id"] == b["record_id"] and a["entry_key"] == b["entry_key"]


def test_serial_and_parallel_reviews_agree(day):
    one = review_day(read_manifest(day), jobs=1)
    two = review_day(read_manifest(day), jobs=2)
    assert two["jobs"] == 2
    keys = ("where", "lot", "status", "disposition", "delivered_F_min", "entry_key")
    assert [{k: c[k] for k in keys} for c in one["cycles"]] == [{k: c[k] for k in keys} for c in two["cycles"]]


def _line(review: dict, lot_suffix: str) -> dict:
    [c] = [c for c in review["cycles"] if c["lot"].endswith(lot_suffix)]
    return c


def test_a_missing_or_bad_recorder_file_is_never_clean(day, tmp_path):
    schedule = _copy_day(day, tmp_path / "day")
    rec = tmp_path / "day" / "recorders"
    files = sorted(rec.glob("*.csv"))
    rows = (tmp_path / "day" / "schedule.csv").read_text(encoding="utf-8").splitlines()
    by_lot = {r.split(",")[0]: r.split(",")[3] for r in rows[2:]}
    (tmp_path / "day" / by_lot["CHL-261201-R1001"]).unlink()                      # missing
    (tmp_path / "day" / by_lot["PEA-261201-R2001"]).write_text("")               # empty
    (tmp_path / "day" / by_lot["STW-261201-R3001"]).write_text(                  # unreadable reading
        "time,temperature_C\n2026-12-01T05:44:00,30.0\n2026-12-01T05:44:30,hot\n")
    shutil.copy(tmp_path / "day" / by_lot["PEA-261201-R5001"],                    # a copied file
                tmp_path / "day" / by_lot["STW-261201-R6001"])
    review = review_day(read_manifest(schedule), jobs=1)
    assert len(files) == 12
    assert review["counts"]["not_reviewed"] == 4 and review["counts"]["clean"] == 7
    missing = _line(review, "R1001")
    assert missing["status"] == "not-reviewed"
    assert "schedule.csv line 3" in missing["why"][0] and "recorder file not found" in missing["why"][0]
    assert "is empty" in _line(review, "R2001")["why"][0]
    bad = _line(review, "R3001")["why"][0]
    assert bad.startswith("schedule.csv line 5: ") and "temperature_C" in bad and "hot" in bad
    copied = _line(review, "R6001")["why"][0]
    assert "same record as schedule.csv line 7" in copied and "PEA-261201-R5001" in copied


def test_a_recorder_file_of_another_time_is_not_this_cycles_record(day, tmp_path):
    schedule = _copy_day(day, tmp_path / "day")
    text = schedule.read_text(encoding="utf-8").replace("2026-12-01T05:30", "2026-12-01T09:30", 1)
    schedule.write_text(text, encoding="utf-8")
    line = _line(review_day(read_manifest(schedule), jobs=1), "R1001")
    assert line["status"] == "not-reviewed"
    assert "begins at 2026-12-01 05:30" in line["why"][0] and "steam on at 2026-12-01 09:30" in line["why"][0]


def test_row_problems_name_the_line_and_field(day, tmp_path):
    schedule = _copy_day(day, tmp_path / "day")
    rows = schedule.read_text(encoding="utf-8").splitlines()
    cells = rows[2].split(",")
    cells[5] = ""  # initial temperature not recorded
    rows[2] = ",".join(cells)
    cells = rows[3].split(",")
    cells[4], cells[6] = "half past five", "many"
    rows[3] = ",".join(cells)
    cells = rows[4].split(",")
    cells[2] = "OH-NOT-FILED"  # a library id, and no store
    rows[4] = ",".join(cells)
    schedule.write_text("\n".join(rows) + "\n", encoding="utf-8")
    review = review_day(read_manifest(schedule), jobs=1)
    assert "schedule.csv line 3: initial_temperature_C is empty" in _line(review, "R1001")["why"][0]
    why = " | ".join(_line(review, "R2001")["why"])
    assert "line 4: steam_on 'half past five' is not a time" in why and "lot_size 'many'" in why
    assert "OH-NOT-FILED" in _line(review, "R3001")["why"][0]
    assert review["counts"]["not_reviewed"] == 3


def test_toml_schedule_with_clock_times_and_library_processes(day, tmp_path):
    store = open_store(tmp_path / "plant.db")
    for pid in ("OH-CHL-87x115", "OH-PEA-74x113", "OH-STW-TRAY"):
        library.add_process(store, PROCESSES / f"{pid}.toml", actor="cho", role="process-authority")
    csv_review = review_day(read_manifest(day), jobs=1)
    lines = day.read_text(encoding="utf-8").splitlines()[2:]
    cycles = []
    for row in lines:
        lot, retort, ref, rec, steam_on, it, size, *_ = row.split(",")
        pid = Path(ref).stem
        cycles.append(f'[[cycle]]\nlot = "{lot}"\nretort = "{retort}"\nprocess = "{pid}"\n'
                      f'recorder_file = "{rec}"\nsteam_on = {steam_on[11:]}:00\n'
                      f"initial_temperature_F = {float(it) * 9 / 5 + 32:.2f}\nlot_size = {size}\n")
    toml = day.parent / "day.toml"
    toml.write_text('[day]\nplant = "Osterby Hollow Cannery"\ndate = 2026-12-01\n\n' + "\n".join(cycles),
                    encoding="utf-8")
    review = review_day(read_manifest(toml), store=store, actor="rita", jobs=1)
    assert review["plant"] == "Osterby Hollow Cannery" and review["date"] == "2026-12-01"
    assert [c["status"] for c in review["cycles"]] == [c["status"] for c in csv_review["cycles"]]
    [found] = _by_status(review, "deviation")
    assert found["process_version"] == 1 and found["where"] == "day.toml [[cycle]] 10"
    assert found["steam_on"].startswith("2026-12-01T")
    assert store.record(found["record_id"]).snapshot["process_ref"]["process_version"] == 1
    assert found["delivered_F_min"] == pytest.approx(
        next(c for c in csv_review["cycles"] if c["lot"] == found["lot"])["delivered_F_min"], rel=1e-3)


def test_opening_records_needs_a_role_that_enters(day, tmp_path):
    with pytest.raises(PermissionDenied):
        review_day(read_manifest(day), store=open_store(tmp_path / "plant.db"), actor="sam", role="supervisor")


def test_entry_key_follows_the_row_and_the_file(day):
    manifest = read_manifest(day)
    a, b = manifest.entries[0], manifest.entries[1]
    assert entry_key(a, "0" * 64) == entry_key(a, "0" * 64)
    assert entry_key(a, "0" * 64) != entry_key(a, "1" * 64) != entry_key(b, "1" * 64)
    assert len(entry_key(a, "0" * 64)) <= 40


@pytest.mark.parametrize("text, message", [
    ("lot,retort,process,recorder_file,steam_on,initial_temp_C,lot_size\n",
     "no initial_temperature_C (or initial_temperature_F) column (did you mean 'initial_temp_C'?)"),
    ("lot,retort,proces,recorder_file,steam_on,initial_temperature_C,lot_size\n",
     "no 'process' column (did you mean 'proces'?)"),
    ("# only a comment\n", "no header row"),
    ("lot,retort,process,recorder_file,steam_on,initial_temperature_C,lot_size\n", "lists no cycle"),
])
def test_a_schedule_that_cannot_be_read_is_one_clear_error(tmp_path, text, message):
    path = tmp_path / "schedule.csv"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(CaseError) as err:
        read_manifest(path)
    assert message in str(err.value) and str(path) in str(err.value)


def test_missing_schedule_file(tmp_path):
    with pytest.raises(CaseError, match="schedule file not found"):
        read_manifest(tmp_path / "nope.csv")
