"""A record entered from a case that references the process library keeps (id, version)."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
DATA = Path(__file__).parents[1] / "data"


def run(*args, db):
    r = subprocess.run([sys.executable, "-m", "deviation.cli", *args, "--db", str(db)], capture_output=True,
                       text=True, cwd=ROOT, timeout=180)
    return r


def test_record_keeps_the_filed_version(tmp_path):
    db = tmp_path / "plant.db"
    proc = ROOT / "demo_cases" / "processes" / "OH-PEA-74x113.toml"
    r = run("process", "add", str(proc), "--actor", "pa", "--role", "process-authority", "--json", db=db)
    assert r.returncode == 0, r.stderr
    # Re-file with a longer hold: version 2.
    v2 = tmp_path / "v2.toml"
    v2.write_text(proc.read_text().replace("process_time_min = 20", "process_time_min = 22", 1))
    r = run("process", "add", str(v2), "--actor", "pa", "--role", "process-authority", "--json", db=db)
    assert r.returncode == 0, r.stderr
    assert json.loads(r.stdout)["version"] == 2

    case = tmp_path / "case.toml"
    case.write_text((DATA / "ref_case.toml").read_text().replace('"OH-PEA-74x113"', '"OH-PEA-74x113@1"'))
    r = run("record", "new", str(case), "--actor", "op", "--role", "operator", "--json", db=db)
    assert r.returncode == 0, r.stderr
    rid = json.loads(r.stdout)["id"]
    r = run("record", "show", rid, "--json", db=db)
    shown = json.loads(r.stdout)
    assert shown["process_id"] == "OH-PEA-74x113"
    assert str(shown["process_version"]) == "1"

    # The latest version is used without @N, and evaluate resolves it from --db too.
    r = run("evaluate", str(DATA / "ref_case.toml"), "--json", db=db)
    assert r.returncode == 0, r.stderr
    assert json.loads(r.stdout)["process_id"] == "OH-PEA-74x113"


def test_unknown_ref_is_a_clear_error(tmp_path):
    db = tmp_path / "plant.db"
    r = run("evaluate", str(DATA / "ref_case.toml"), db=db)
    assert r.returncode == 2
    assert "Traceback" not in r.stderr
    assert "process_ref 'OH-PEA-74x113': no process 'OH-PEA-74x113' is filed in the library" in r.stderr
