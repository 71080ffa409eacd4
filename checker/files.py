"""Find stage files and turn each into stages or input findings, never raising."""

from __future__ import annotations

import os
from dataclasses import field
from checker.record import record

from checker.build import build_stages
from checker.findings import Finding, input_finding
from checker.io.load import STAGE_ENDINGS, read_file
from checker.io.positions import InputErrors, InputProblem
from checker.model import OpAmpPart, Stage
from checker.netlist import NETLIST_ENDINGS, is_netlist


@record
class LoadedFile:
    """One input file: the stages it built, or the problems that stopped it."""

    path: str
    stages: list[Stage] = field(default_factory=list)
    problems: list[Finding] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not self.problems


def discover(paths: list[str], netlists_wanted=None) -> tuple[list[str], list[Finding]]:
    """Stage files named by ``paths`` (directories searched recursively), sorted.

    A named file is taken whatever its ending; in directories only our endings count,
    and netlists (NETLIST_ENDINGS) only where ``netlists_wanted(path)`` says a netlist
    map governs them. Paths that do not exist, and folders that cannot be listed, become
    input findings.
    """
    found: set[str] = set()
    missing: list[Finding] = []

    def unreadable(error: OSError) -> None:  # a folder os.walk cannot list
        folder = error.filename or path
        missing.append(input_finding(InputProblem(
            os.path.normpath(folder), 1, 1,
            f"cannot read this folder: {error.strerror or error}; its stage files were"
            " not checked")))

    for path in paths:
        if os.path.isdir(path):
            for root, dirs, names in os.walk(path, onerror=unreadable):
                dirs[:] = sorted(d for d in dirs if not d.startswith("."))
                for name in names:
                    if name.endswith(STAGE_ENDINGS) or netlists_wanted is not None and \
                            name.lower().endswith(NETLIST_ENDINGS) and \
                            netlists_wanted(os.path.join(root, name)):
                        found.add(os.path.normpath(os.path.join(root, name)))
        elif os.path.exists(path):
            found.add(os.path.normpath(path))
        else:
            missing.append(input_finding(InputProblem(path, 1, 1, "no such file or directory")))
    return sorted(found), missing


def load_file(path: str, library: dict[str, OpAmpPart], netlist_map=None) -> LoadedFile:
    """Read, validate and build one file; every failure becomes an input finding.
    A netlist (by its ending) is cut into stages with ``netlist_map``."""
    try:
        if is_netlist(path):
            from checker.netlist.load import load_netlist_stages

            stages = load_netlist_stages(path, library, netlist_map)
        else:
            stages = build_stages(read_file(path), library)
    except InputErrors as errors:
        return LoadedFile(path, problems=[input_finding(p) for p in errors.problems])
    except RecursionError:
        return LoadedFile(path, problems=[input_finding(InputProblem(
            path, 1, 1, "nesting too deep to read"))])
    return LoadedFile(path, stages=stages)
