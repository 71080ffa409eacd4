"""The project's own habits hold: the pinned linter and type checker pass on the whole tree."""

import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

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


def test_mypy_is_clean():
    # pyproject.toml's [tool.mypy] names the files (checker, rules) and the settings
    result = subprocess.run([_tool("mypy")], cwd=ROOT, capture_output=True, text=True)
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


THREAD_PROBE = """
import os, sys
import checker.cli
assert "numpy" not in sys.modules, "checker.cli must not import numpy before main() runs"
code = checker.cli.main(["check", sys.argv[1], "--format", "json", "-o", sys.argv[2],
                         "--no-progress", "--quiet", "--fail-on", "never"])
import numpy as np
a = np.random.default_rng(1).random((300, 300))
a @ a  # a BLAS call big enough to start its worker threads, were any allowed
status = open(f"/proc/{os.getpid()}/status").read()
print(code, status.split("Threads:")[1].split()[0])
"""


@pytest.mark.skipif(not Path("/proc/self/status").exists(), reason="reads /proc (Linux)")
def test_a_check_runs_blas_on_one_thread(tmp_path):
    """The matrices are tens of unknowns: BLAS threads only spin (issue: performance).
    cli.main limits them before numpy is first imported, unless the user set a count."""
    env = {k: v for k, v in os.environ.items()
           if k not in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")}
    result = subprocess.run([sys.executable, "-c", THREAD_PROBE,
                             str(ROOT / "samples/conductivity.stage"), str(tmp_path / "o.json")],
                            capture_output=True, text=True, env=env, cwd=tmp_path)
    assert result.returncode == 0, result.stderr
    code, threads = result.stdout.split()
    assert code == "0" and threads == "1"
