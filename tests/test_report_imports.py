"""Each report writer imports the plain records alone: no numpy, no solver, no engine
(a reporter knows findings and figures, nothing of circuits)."""

import subprocess
import sys

import pytest

from checker.report import FORMATS

HEAVY = ("numpy", "checker.analysis", "checker.engine", "checker.review")


@pytest.mark.parametrize("name", sorted(n for n in FORMATS if n != "html"))
def test_importing_a_writer_loads_no_numpy_solver_or_engine(name):
    code = (f"import sys, importlib; importlib.import_module({FORMATS[name]!r});"
            f" print([m for m in {HEAVY!r} if m in sys.modules])")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          check=True)
    assert done.stdout.strip() == "[]", done.stdout
