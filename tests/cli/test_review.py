"""``deviation review``: exit codes, the JSON, the terminal table, the review sheet (HTML and PDF)."""

from __future__ import annotations

import json
import runpy
import subprocess
import sys
from pathlib import Path

import pytest

from deviation.cli import main

REPO = Path(__file__).resolve().parents[2]


# The demo plant's day generator (a script in demo_cases/, not a module of the package).
write_day = runpy.run_path(str(REPO / "demo_cases" / "review_day.py"))["write_day"]


@pytest.fixture(scope="module")
def day(tmp_path_factory) -> Path:
    return write_day(tmp_path_factory.mktemp("day"), cycles=10, step_s=30.0)


@pytest.fixture(scope="module")
def clean_day(tmp_path_factory) -> Path:
    return write_day(tmp_path_factory.mktemp("clean"), cycles=3, step_s=30.0, drop=None)


def test_json_and_exit_code_one_when_a_deviation_is_found(day, tmp_path, capsys):
    db = str(tmp_path / "plant.db")
    assert main(["review", str(day), "--db", db, "--actor", "rita", "--json"]) == 1
    out = capsys.readouterr().out
    assert out.count("\n") == 1
    review = json.loads(out)
    assert review["counts"] == {"clean": 9, "deviation": 1, "not_reviewed": 0, "records_opened": 1,
                                "records_already_open": 0, "records_not_opened": 0}
    assert review["reviewer"] == "rita" and review["caution"]
    # The opened record is the store's, readable by the record commands.
    rid = next(c["record_id"] for c in review["cycles"] if c["status"] == "deviation")
    assert main(["record", "show", rid, "--db", db, "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["lot"].endswith("R4002")


def test_a_clean_day_exits_zero(clean_day, tmp_path, capsys):
    assert main(["review", str(clean_day), "--db", str(tmp_path / "p.db"), "--actor", "rita"]) == 0
    out = capsys.readouterr().out
    assert "3 cycles: 3 reviewed clean, 0 with a deviation, 0 not reviewed" in out
    assert "process authority decides" in out


def test_terminal_table_sheet_html_and_user_text_escaped(day, tmp_path):
    rows = day.read_text(encoding="utf-8").splitlines()
    cells = rows[2].split(",")
    cells[0] = "[bold red]<b>LOT&1</b>"  # text from the schedule is never markup
    rows[2] = ",".join(cells)
    schedule = day.parent / "odd.csv"
    schedule.write_text("\n".join(rows) + "\n", encoding="utf-8")
    sheet = tmp_path / "sheet.html"
    r = subprocess.run([sys.executable, "-m", "deviation.cli", "review", str(schedule), "--no-record",
                        "--sheet", str(sheet)], capture_output=True, text=True, cwd=tmp_path, timeout=120,
                       env={"COLUMNS": "200", "PATH": "/usr/bin:/bin"})
    assert r.returncode == 1, r.stderr
    assert "[bold red]<b>LOT&1</b>" in r.stdout
    assert "⚑ DEVIATION" in r.stdout and "temperature-low" in r.stdout and "✓ clean" in r.stdout
    assert "no record store (--no-record)" in r.stdout
    assert "Traceback" not in r.stderr
    html = sheet.read_text(encoding="utf-8")
    assert "&lt;b&gt;LOT&amp;1&lt;/b&gt;" in html and "<b>LOT" not in html
    for line in rows[3:]:
        assert line.split(",")[0] in html  # every cycle is on the sheet
    assert "Qualified person" in html and "113.100(b)" in html and "process authority decides" in html
    assert "⚑ DEVIATION" in html and "temperature-low" in html


def test_sheet_pdf(day, tmp_path, capsys):
    pypdf = pytest.importorskip("pypdf")
    sheet = tmp_path / "sheet.pdf"
    assert main(["review", str(day), "--no-record", "--json", "--sheet", str(sheet)]) == 1
    assert json.loads(capsys.readouterr().out)["sheet"] == str(sheet)
    text = "\n".join(page.extract_text() for page in pypdf.PdfReader(str(sheet)).pages)
    assert "Daily record review" in text and "R4002" in text and "Qualified person" in text


@pytest.mark.parametrize("args, message", [
    (["review", "nope.csv", "--no-record"], "nope.csv: schedule file not found"),
    (["review", "{day}", "--no-record", "--sheet", "x.docx"], "name it .html or .pdf"),
])
def test_bad_input_is_one_line_and_exit_two(day, tmp_path, monkeypatch, capsys, args, message):
    monkeypatch.chdir(tmp_path)
    assert main([a.format(day=day) for a in args]) == 2
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err


def test_role_that_cannot_enter_is_refused(day, tmp_path, capsys):
    assert main(["review", str(day), "--db", str(tmp_path / "p.db"), "--actor", "sam",
                 "--role", "supervisor"]) == 4
    assert "sam" in capsys.readouterr().err
