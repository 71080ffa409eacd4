"""The stage files a configuration file or a part library governs, so that a commit
changing one re-checks them (the pre-commit hook passes such files to ``check``).

A configuration file (ampcheck.toml, or pyproject.toml with [tool.ampcheck]) governs
the stage files below its folder for which it is the closest configuration; a part
library governs the stage files whose configuration names it in ``parts``. A
pyproject.toml without an ampcheck table governs nothing.
"""

from __future__ import annotations

import os

from checker.config import CONFIG_FILE, find_config_file
from checker.io.load import STAGE_ENDINGS

PART_ENDINGS = (".parts", ".parts.json")


def is_governing(path: str) -> bool:
    """True for a configuration file or a part library (by name)."""
    name = os.path.basename(path)
    return name in (CONFIG_FILE, "pyproject.toml") or name.endswith(PART_ENDINGS)


def _stage_files(folder: str) -> list[str]:
    found = []
    for root, dirs, names in os.walk(folder):
        dirs[:] = sorted(d for d in dirs if not d.startswith("."))
        found += [os.path.normpath(os.path.join(root, n)) for n in names
                  if n.endswith(STAGE_ENDINGS)]
    return found


def governed_by(path: str, config_for, search_root: str) -> list[str]:
    """The stage files ``path`` governs. ``config_for(stage)`` is the configuration
    ``check`` would use for a stage; part libraries are looked for from
    ``search_root`` (the working folder) down."""
    target = os.path.abspath(path)
    if not path.endswith(PART_ENDINGS):
        folder = os.path.dirname(target)
        return [stage for stage in _stage_files(folder)
                if find_config_file(os.path.dirname(os.path.abspath(stage))) == target]
    return [stage for stage in _stage_files(search_root)
            if target in {os.path.abspath(p) for p in config_for(stage).get("parts", [])}]
