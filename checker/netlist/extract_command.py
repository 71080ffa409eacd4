"""``ampcheck extract``: netlists in, one stage file per netlist out, in a new folder.

The folder is written beside its final place under a temporary name and renamed when
every file is in it, so an interrupted run leaves no half-written folder; it must not
exist yet, so nothing, inputs included, is ever written over.
"""

from __future__ import annotations

import os
import shutil
import sys


from checker.io.positions import InputErrors, InputProblem
from checker.io.write import new_folder
from checker.netlist import NETLIST_ENDINGS
from checker.netlist.load import build_netlist_stages, read_netlist_file
from checker.netlist.stage_writer import stage_file_text


class ExtractError(Exception):
    """A usage or configuration mistake: the command exits 2."""


def netlist_files(paths: list[str]) -> list[tuple[str, str]]:
    """(netlist path, stage file name in the output folder) for every netlist named or
    found in a folder (by NETLIST_ENDINGS), sorted; names mirror folders' layout."""
    found: dict[str, str] = {}
    for path in paths:
        if os.path.isdir(path):
            for root, dirs, names in os.walk(path):
                dirs[:] = sorted(d for d in dirs if not d.startswith("."))
                for name in sorted(names):
                    if name.lower().endswith(NETLIST_ENDINGS):
                        full = os.path.normpath(os.path.join(root, name))
                        found[full] = os.path.relpath(full, path)
        elif os.path.isfile(path):
            found[os.path.normpath(path)] = os.path.basename(path)
        else:
            raise ExtractError(f"no such file or directory: {path}")
    taken: set[str] = set()
    result = []
    for netlist in sorted(found):
        stem, ending = os.path.splitext(found[netlist])
        name = stem + ".stage"
        if name in taken:
            name = f"{stem}-{ending.lstrip('.')}.stage"
        taken.add(name)
        result.append((netlist, name))
    return result


def extract_into(paths: list[str], into: str, request) -> bool:
    """Write the stage file of each netlist into the new folder ``into``; True when a
    netlist could not be read (its problems go to standard error, the others go on)."""
    from checker import audit
    from checker.config import ConfigError

    if os.path.lexists(into):
        raise ExtractError(f"--into {into}: it exists; extract writes a new folder")
    items = netlist_files(paths)
    if not items:
        raise ExtractError("no netlists (" + ", ".join(f"*{e}" for e in NETLIST_ENDINGS)
                           + ") found in " + ", ".join(paths))
    parent = os.path.dirname(os.path.abspath(into))
    if not os.path.isdir(parent):
        raise ExtractError(f"--into {into}: the folder {parent} does not exist")
    audit.forget()
    failed = False
    written = []
    try:
        temporary = new_folder(parent, ".ampcheck-extract-")
    except OSError as error:
        raise ExtractError(f"--into {into}: {error.strerror or error}") from None
    try:
        for netlist, name in items:
            try:
                setup = audit.setup_for(netlist, request)
            except ConfigError as error:
                raise ExtractError(str(error)) from None
            map_path = audit.netlist_map_path(netlist, request)
            try:
                parsed, extraction = read_netlist_file(netlist, setup.netlist_map)
                build_netlist_stages(parsed, extraction, setup.library)
            except InputErrors as errors:
                for problem in errors.problems:
                    print(f"error {problem}", file=sys.stderr)
                failed = True
                continue
            except RecursionError:
                print(f"error {InputProblem(netlist, 1, 1, 'nesting too deep to read')}",
                      file=sys.stderr)
                failed = True
                continue
            target = os.path.join(temporary, name)
            try:
                os.makedirs(os.path.dirname(target), exist_ok=True)
                with open(target, "w", encoding="utf-8") as handle:
                    handle.write(stage_file_text(extraction, netlist, map_path))
            except OSError as error:  # a full disk: named by the folder asked for
                raise ExtractError(f"--into {into}: cannot write"
                                   f" {os.path.join(into, name)}:"
                                   f" {error.strerror or error}") from None
            written.append(name)
        try:
            os.rename(temporary, into)
        except OSError as error:
            raise ExtractError(f"--into {into}: {error.strerror or error}") from None
    except BaseException:
        shutil.rmtree(temporary, ignore_errors=True)
        raise
    for name in written:
        print(f"wrote {os.path.join(into, name)}", file=sys.stderr)
    return failed
