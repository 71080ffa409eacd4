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


def test_the_projects_own_pre_commit_config_is_valid_and_runs_the_pinned_tools():
    config = ROOT / ".pre-commit-config.yaml"
    result = subprocess.run([sys.executable, "-m", "pre_commit", "validate-config",
                             str(config)], capture_output=True, text=True)
    assert result.returncode == 0, result.stdout + result.stderr
    text = config.read_text(encoding="utf-8")
    extras = (ROOT / "pyproject.toml").read_text(encoding="utf-8")
    for tool in ("ruff", "mypy"):
        assert f"entry: .venv/bin/{tool}" in text
        assert f'"{tool}==' in extras, f"{tool} is not pinned in the test extras"
