"""The package installs from a wheel and works from any folder (issue 16).

Builds the wheel from this checkout, installs it into a throw-away virtual environment that sees
this interpreter's site-packages (so numpy, scipy, textual... are not downloaded again) and
checks that the copy in the venv, not the checkout, is the one imported. Then, from a folder
outside the checkout: ``deviation evaluate`` and ``deviation report`` on a demo case taken from
the installed package data, ``deviation tui --demo`` (headless: the app that command builds,
with its demo store seeded from the installed demo plant, run by textual's test driver) and
``deviation review`` on the installed demo day.
"""

from __future__ import annotations

import importlib.util
import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]

pytestmark = pytest.mark.timeout(240)


TUI_DEMO = """
import asyncio, json
from deviation.tui import build_app

async def main():
    app = build_app(demo=True, actor="olga", role="operator")
    async with app.run_test(size=(100, 30)) as pilot:
        await pilot.pause()
        await app.workers.wait_for_complete()
        await pilot.pause()
        text = " ".join(str(w.render()) for w in app.screen.query("Static"))
        out = {"records": app.ctx.store.count_records(), "cases": str(app.ctx.cases_dir),
               "processes": len(getattr(app.screen, "processes", None) or {}),
               "caution_shown": "process authority" in text.lower()}
    print(json.dumps(out))

asyncio.run(main())
"""


def _run(cmd, *, cwd, env, timeout=120, ok=(0,)) -> subprocess.CompletedProcess:
    proc = subprocess.run([str(c) for c in cmd], cwd=cwd, env=env, capture_output=True, text=True,
                          timeout=timeout)
    assert proc.returncode in ok, (f"{' '.join(map(str, cmd))} exited {proc.returncode}\n"
                                  f"stdout:\n{proc.stdout[-3000:]}\nstderr:\n{proc.stderr[-3000:]}")
    return proc


@pytest.fixture(scope="module")
def installed(tmp_path_factory):
    """(venv python, venv bin folder, clean environment, a folder outside the checkout)."""
    root = tmp_path_factory.mktemp("wheel")
    env = {k: v for k, v in os.environ.items()
           if k not in ("PYTHONPATH", "PYTHONHOME", "VIRTUAL_ENV", "PYTHONSTARTUP")}
    env.update(DEVIATION_DB=str(root / "plant.db"), COLUMNS="100", PIP_DISABLE_PIP_VERSION_CHECK="1")
    # Build offline with the backend this interpreter has (the test extra installs hatchling);
    # without it pip fetches the backend named in pyproject.toml.
    offline = ["--no-build-isolation"] if importlib.util.find_spec("hatchling") else []
    _run([sys.executable, "-m", "pip", "wheel", "--no-deps", *offline, "-w", root / "dist", REPO], cwd=root,
         env=env, timeout=180)
    wheels = sorted((root / "dist").glob("deviation-*.whl"))
    assert len(wheels) == 1, wheels
    venv = root / "venv"
    # --without-pip: the venv uses pip from this interpreter's site-packages (visible to it).
    _run([sys.executable, "-m", "venv", "--system-site-packages", "--without-pip", venv], cwd=root, env=env)
    bin_dir = venv / ("Scripts" if os.name == "nt" else "bin")
    python = bin_dir / "python"
    _run([python, "-m", "pip", "install", "--no-deps", "--force-reinstall", "--no-index", wheels[0]],
         cwd=root, env=env)
    elsewhere = root / "elsewhere"
    elsewhere.mkdir()
    env["PATH"] = f"{bin_dir}{os.pathsep}{env.get('PATH', '')}"
    return python, bin_dir, env, elsewhere


def test_the_venv_imports_its_own_copy_with_its_data(installed):
    python, _, env, elsewhere = installed
    code = ("import json, deviation; from deviation.guidance.rules import default_rules_path; "
            "from deviation.tui.sources import REPO_DEMO_CASES; "
            "print(json.dumps([deviation.__file__, str(default_rules_path()), str(REPO_DEMO_CASES)]))")
    module, rules, demo = json.loads(_run([python, "-c", code], cwd=elsewhere, env=env).stdout)
    site = Path(python).parents[1]
    for path in (module, rules, demo):
        assert Path(path).resolve().is_relative_to(site.resolve()), (path, "is not the venv's copy")
        assert not Path(path).resolve().is_relative_to(REPO), path
    assert Path(rules).is_file() and Path(rules).name == "default.toml"
    assert (Path(demo) / "processes").is_dir()
    assert sorted(Path(demo).glob("*.toml")), "no demo case shipped"


def test_evaluate_report_tui_and_review_from_any_folder(installed):
    python, bin_dir, env, elsewhere = installed
    code = "import json; from deviation.tui.sources import REPO_DEMO_CASES as d; print(json.dumps(str(d)))"
    demo = Path(json.loads(_run([python, "-c", code], cwd=elsewhere, env=env).stdout))
    # A demo case and its retort log, copied out of the installed package data.
    case = elsewhere / "chili_temperature_drop.toml"
    shutil.copy(demo / case.name, case)
    (elsewhere / "logs").mkdir()
    for log in (demo / "logs").glob("R3-2026-1104-A*.csv"):
        shutil.copy(log, elsewhere / "logs" / log.name)
    deviation = bin_dir / "deviation"

    out = json.loads(_run([deviation, "evaluate", case.name, "--json"], cwd=elsewhere, env=env).stdout)
    assert out["delivered_F_min"] > 0 and out["guidance"]["disposition"]
    assert "process authority" in out["caution"]
    human = _run([deviation, "evaluate", case.name], cwd=elsewhere, env=env).stdout
    assert "process authority" in human.lower()

    _run([deviation, "report", case.name, "-o", "x.html"], cwd=elsewhere, env=env)
    html = (elsewhere / "x.html").read_text(encoding="utf-8")
    assert "CHL-261104-A" in html and "process authority" in html

    # `deviation tui --demo`, headless: the app the command builds, run by textual's test driver.
    tui = json.loads(_run([python, "-c", TUI_DEMO], cwd=elsewhere, env=env, timeout=150).stdout)
    assert tui["records"] > 0, "the demo store was not seeded from the installed demo plant"
    assert Path(tui["cases"]).resolve().is_relative_to(Path(python).parents[1].resolve())
    assert tui["processes"] >= 3 and tui["caution_shown"]

    # The demo day has one deviation nobody entered: exit 1 says the review found something.
    review = _run([deviation, "review", demo / "review_day" / "schedule.csv", "--no-record", "--json"],
                  cwd=elsewhere, env=env, ok=(1,))
    day = json.loads(review.stdout)
    assert day["counts"]["deviation"] == 1 and day["counts"]["not_reviewed"] == 0
