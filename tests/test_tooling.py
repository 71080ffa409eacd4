"""The project's own habits hold: the pinned linter passes on the whole tree."""

import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def _tool(name: str) -> str:
    here = Path(sys.executable).parent / name
    found = str(here) if here.exists() else shutil.which(name)
    assert found, f"{name} is pinned in the test extras and must be installed"
    return found


def test_ruff_is_clean_on_the_tree():
    result = subprocess.run([_tool("ruff"), "check", "--no-cache", "."], cwd=ROOT,
                            capture_output=True, text=True)
    assert result.returncode == 0, result.stdout + result.stderr
