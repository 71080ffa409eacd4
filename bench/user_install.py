"""A throw-away install of this checkout as a user gets it, for cold-start figures.

A user's `pip install` copies the packages into site-packages and compiles them to
bytecode; the developer's editable install does neither (each start runs a path finder
and, where PYTHONDONTWRITEBYTECODE is set, compiles every module from source again), so
cold starts timed from it are not a user's. This builds a virtual environment without
pip whose site-packages holds a copy of checker/ (rules/ as checker.rules, as
pyproject.toml maps it) compiled with compileall, and a .pth line that lends it this
interpreter's installed dependencies; its `ampcheck` is the console script a wheel
install writes. Nothing outside the given folder is touched.

Run alone to print the install's folder: .venv/bin/python bench/user_install.py FOLDER
"""

from __future__ import annotations

import compileall
import os
import shutil
import subprocess
import sys
import sysconfig

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
SCRIPT = """import sys
from checker.cli import main
if __name__ == "__main__":
    sys.exit(main())
"""


def user_install(folder: str, root: str = ROOT) -> list[str]:
    """Build the install of the checkout at ``root`` (default: this one) in ``folder``;
    returns the command that runs its ampcheck (its first item: the install's python)."""
    subprocess.run([sys.executable, "-m", "venv", "--without-pip", folder], check=True)
    python = os.path.join(folder, "bin", "python")
    purelib = subprocess.run(
        [python, "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])"],
        check=True, capture_output=True, text=True).stdout.strip()
    ignore = shutil.ignore_patterns("__pycache__", "*.pyc")
    shutil.copytree(os.path.join(root, "checker"), os.path.join(purelib, "checker"),
                    ignore=ignore)
    shutil.copytree(os.path.join(root, "rules"), os.path.join(purelib, "checker", "rules"),
                    ignore=ignore)
    with open(os.path.join(purelib, "ampcheck-dependencies.pth"), "w") as handle:
        handle.write(sysconfig.get_paths()["purelib"] + "\n")
    compileall.compile_dir(os.path.join(purelib, "checker"), quiet=1)
    script = os.path.join(folder, "bin", "ampcheck")
    with open(script, "w") as handle:
        handle.write(f"#!{python}\n{SCRIPT}")
    os.chmod(script, 0o755)
    return [python, script]


if __name__ == "__main__":
    print(" ".join(user_install(sys.argv[1])))
