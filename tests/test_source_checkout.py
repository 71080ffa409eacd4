"""`python -m checker` from a source checkout that is not installed: the rules folder
beside the package is the built-in rule package, and the rules' own imports of their
shared helpers resolve."""

import pathlib
import shutil
import subprocess
import sys

ROOT = pathlib.Path(__file__).resolve().parents[1]


def test_python_dash_m_from_an_uninstalled_checkout_runs_every_rule(tmp_path):
    checkout = tmp_path / "checkout"
    for name in ("checker", "rules", "samples"):
        shutil.copytree(ROOT / name, checkout / name,
                        ignore=shutil.ignore_patterns("__pycache__"))
    # no site initialisation (-S): no editable-install hook; the dependencies' folder is
    # added by hand after the checkout, which comes first, as in `python -m checker`
    import numpy

    dependencies = str(pathlib.Path(numpy.__file__).resolve().parents[1])
    code = (f"import sys; sys.path[:0] = ['.']; sys.path.append({dependencies!r});"
            " import runpy; runpy.run_module('checker', run_name='__main__', alter_sys=True)")
    done = subprocess.run([sys.executable, "-S", "-c", code, "rules"], cwd=checkout,
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    assert "loop-margin" in done.stdout and "swapped-inputs" in done.stdout
