"""The numerical core loads no UI, validation or database library (numpy/scipy only)."""

import subprocess
import sys
from pathlib import Path

import pytest

CORE_MODULES = [
    "deviation.heating",
    "deviation.heating.conduction",
    "deviation.heating.heating_curve",
    "deviation.heating.superposition",
    "deviation.heating.finite_difference",
    "deviation.uncertainty",
    "deviation.lethality",
    "deviation.spoilage",
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
