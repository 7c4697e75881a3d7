"""The numerical core loads no UI, validation or database library (numpy/scipy only)."""

import subprocess
import sys
from pathlib import Path

import pytest

CORE_MODULES = [
    "deviation.physics.heating",
    "deviation.physics.heating.conduction",
    "deviation.physics.heating.heating_curve",
    "deviation.physics.heating.superposition",
    "deviation.physics.heating.finite_difference",
    "deviation.physics.uncertainty",
    "deviation.physics.lethality",
    "deviation.physics.spoilage",
    "deviation.physics.ball_formula",
    "deviation.physics.continuous",
    "deviation.physics.calibration",
    "deviation.physics.calibration.semilog",
    "deviation.physics.calibration.least_squares",
    "deviation.physics.calibration.fit",
]
FORBIDDEN = ["pydantic", "rich", "textual", "sqlalchemy"]
REPO_ROOT = Path(__file__).resolve().parents[1]


@pytest.mark.parametrize("module", CORE_MODULES)
def test_core_module_imports_no_ui_or_io_library(module):
    code = (
        f"import sys, {module}; "
        f"print(','.join(m for m in {FORBIDDEN!r} if m in sys.modules))"
    )
    result = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, timeout=120, check=False,
        cwd=REPO_ROOT,
    )
    assert result.returncode == 0, result.stderr
    assert result.stdout.strip() == "", f"{module} loaded {result.stdout.strip()}"
