"""The layers hold: `lint-imports` keeps every contract in pyproject.toml ([tool.importlinter]).

Layers one way down (faces -> live -> records -> evaluate -> guidance | inputs -> physics), the
numerical core free of pydantic/rich/textual/sqlalchemy, faces using each other only through
their public entry points, and no circle among the modules of any package.
"""

import shutil
import subprocess
import sys
from pathlib import Path

REPO_ROOT = Path(__file__).resolve().parents[1]


def test_import_contracts_are_kept():
    exe = shutil.which("lint-imports") or str(Path(sys.executable).with_name("lint-imports"))
    result = subprocess.run([exe, "--no-cache"], cwd=REPO_ROOT, capture_output=True, text=True,
                            timeout=300, check=False)
    assert result.returncode == 0, result.stdout + result.stderr
    assert "0 broken" in result.stdout
