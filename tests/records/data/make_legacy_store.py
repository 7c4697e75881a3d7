"""Writes ``legacy_store_v3.db`` and ``legacy_bundle_v1.json``: a small record store and bundle
made by the release before keyed chains (commit c594ecd, store schema version 3, bundle format 1).

Kept as committed fixtures so the migration tests read a store written by that code, not one
imitated by today's. Run once, from a checkout of that release::

    python tests/records/data/make_legacy_store.py tests/records/data

What it holds (every kind of event, and the shapes the new rules no longer accept):

- a record of the measured cold-spot demo case: entered, evaluated (the full evaluation with its
  cold-spot arrays), hold placed, a free-text disposition ``release``, a note holding Rich markup;
- a record held and then released by a supervisor with no disposition;
- a record with only a note holding HTML;
- a record imported from another store (its events carry an ``origin``);
- the process library: two filed processes, one of them retired.
"""

from __future__ import annotations

import json
import sqlite3
import sys
from pathlib import Path

REPO = Path(__file__).resolve().parents[3]
sys.path.insert(0, str(REPO))

from deviation.evaluate import evaluate_case  # noqa: E402
from deviation.inputs.case import load_case  # noqa: E402
from deviation.records import processes as library  # noqa: E402
from deviation.records.bundles import write_bundle  # noqa: E402
from deviation.records.store import open_store  # noqa: E402

OP = dict(actor="olga", role="operator")
SUP = dict(actor="sam", role="supervisor")
PA = dict(actor="pat", role="process-authority")
SMALL = {"case": {"deviation": {"lot": "L-B", "retort_id": "R2"}}}
SMALL_EV = {"engine_version": "0.1.0", "delivered_F_min": 7.25, "target_F_min": 6.0,
            "flags": [{"code": "temperature-low", "message": "drop"}],
            "guidance": {"disposition": "evaluate", "rule_set_sha256": "cd" * 32}, "conservative": False}


def main(out: Path) -> None:
    db, other = out / "legacy_store_v3.db", out / "legacy_other.db"
    for p in (db, other, out / "legacy_bundle_v1.json"):
        p.unlink(missing_ok=True)
    s = open_store(db)
    loaded = load_case(REPO / "demo_cases" / "tray_measured_cold_spot.toml")
    ev = evaluate_case(loaded).model_dump(mode="json")
    dev = loaded.case.deviation
    a = s.create_record(loaded.snapshot(), lot=dev.lot, retort_id=dev.retort_id,
                        process_id=loaded.case.process.id, **OP)
    s.add_evaluation(a, ev, snapshot_seq=1, options={"conservative": False, "what_if": True}, **OP)
    s.place_hold(a, reason="steam failure, set aside", **SUP)
    s.decide(a, decision="release", reason="measured F0 above target", **PA)
    s.note(a, "see [/x] and [white on white]hidden[/]", **OP)
    b = s.create_record(SMALL, lot="L-B", retort_id="R2", process_id="P-1", **OP)
    s.add_evaluation(b, SMALL_EV, **OP)
    s.place_hold(b, reason="drop", **SUP)
    s.release_hold(b, reason="need the cage space", **SUP)
    c = s.create_record(SMALL, lot="L-C", retort_id="R3", process_id="P-1", **OP)
    s.note(c, "<script>alert(1)</script>", **OP)
    o = open_store(other)
    d = o.create_record(SMALL, lot="L-D", retort_id="R4", process_id="P-1", **OP)
    o.note(d, "written in the other store", **OP)
    s.import_bundle(o.export_bundle(), actor="ada", role="auditor")
    o.close()
    other.unlink()
    library.add_process(s, REPO / "demo_cases" / "processes" / "OH-STW-TRAY.toml", **PA)
    library.add_process(s, REPO / "demo_cases" / "processes" / "OH-CHL-87x115.toml", **PA)
    library.retire_process(s, "OH-CHL-87x115", reason="superseded", **PA)
    assert s.verify().ok
    write_bundle(s.export_bundle([a, c]), out / "legacy_bundle_v1.json")
    write_bundle(s.export_bundle([b]), out / "legacy_bundle_v1_released.json")
    s.close()
    con = sqlite3.connect(db)  # one file, no WAL beside it
    con.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    con.execute("PRAGMA journal_mode=DELETE")
    con.close()
    print(json.dumps({"records": [a, b, c, d]}))


if __name__ == "__main__":
    main(Path(sys.argv[1]) if len(sys.argv) > 1 else Path(__file__).parent)
