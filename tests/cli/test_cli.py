"""The command line: exit codes, the JSON contract, messages without tracebacks."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from deviation.cli import main

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "demo_cases"
DATA = Path(__file__).parents[1] / "data"


def run(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "deviation.cli", *args], capture_output=True, text=True,
                          cwd=ROOT, timeout=120)


def test_evaluate_prints_guidance_figures_and_caution():
    r = run("evaluate", str(DEMO / "chili_temperature_drop.toml"))
    assert r.returncode == 0, r.stderr
    out = r.stdout
    assert "HOLD" in out and "evaluate" in out
    assert "temperature-low" in out
    assert "delivered F0" in out
    assert "process authority decides" in out.lower()
    # Guidance first, then flags, then figures, then the caution.
    assert out.index("Guidance") < out.index("What the record shows") < out.index("delivered F0") \
        < out.index("Process authority decides")


def test_evaluate_json_is_one_object(capsys):
    assert main(["evaluate", str(DEMO / "peas_short_hold.toml"), "--json"]) == 0
    out = capsys.readouterr().out
    assert out.count("\n") == 1
    data = json.loads(out)
    assert data["guidance"]["disposition"] == "reprocess"
    assert data["delivered_F_min"] < data["target_F_min"]
    assert data["flags"][0]["code"] == "short-hold"


@pytest.mark.parametrize("name", ["missing_target.toml", "syntax_error.toml", "unknown_key.toml"])
def test_bad_case_exits_2_with_one_message(name):
    r = run("evaluate", str(DATA / "bad_cases" / name), "--json")
    assert r.returncode == 2
    assert r.stdout == ""
    assert "Traceback" not in r.stderr
    assert r.stderr.startswith("error: ") and name in r.stderr
    assert len(r.stderr.strip().splitlines()) <= 2


def test_bad_log_exits_2_naming_the_file(tmp_path):
    case = (DATA / "good_case.toml").read_text() + 'retort_log = "log.csv"\n'
    (tmp_path / "case.toml").write_text(case)
    (tmp_path / "log.csv").write_text("time_min,temperature_C\n0,30\n1,abc\n")
    r = run("evaluate", str(tmp_path / "case.toml"))
    assert r.returncode == 2
    assert "Traceback" not in r.stderr
    assert "log.csv" in r.stderr and "abc" in r.stderr


def test_missing_case_file():
    r = run("evaluate", "no/such/case.toml")
    assert r.returncode == 2 and "file not found" in r.stderr and "Traceback" not in r.stderr


def test_schema_is_json(capsys):
    assert main(["schema"]) == 0
    schema = json.loads(capsys.readouterr().out)
    assert schema["title"] == "Case"
    assert "process" in schema["properties"] and "deviation" in schema["properties"]


def test_no_command_prints_help():
    r = run()
    assert r.returncode == 2 and "evaluate" in r.stdout
