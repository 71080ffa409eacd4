"""Check many files: per-file configuration, worker processes, results in file order.

Each file's options come from the closest configuration file above it (or an explicit
--config), with the command line on top, so results never depend on how files are
batched (a commit hook may call us several times per commit). Workers return small,
picklable FileResults; the parent streams them to the reporters in sorted-path order.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from dataclasses import dataclass, field
from functools import lru_cache

from checker.analysis import AnalysisOptions
from checker.cautions import KINDS as CAUTION_KINDS
from checker.cautions import not_a_rule
from checker.config import Config, ConfigError, find_config_file, parse_config
from checker.engine import ENGINE_RULES, RuleError, RunOptions, load_rules, selected
from checker.findings import Severity
from checker.review import FileResult, review_file

DEFAULT_STRAY_F = 1e-12  # layout stray at an inverting input (common practice: 0.5-2 pF)


@dataclass(frozen=True)
class Request:
    """The command line's part of every file's options (picklable)."""

    config_file: str | None = None  # --config: use this one file for every path
    select: frozenset[str] | None = None
    ignore: frozenset[str] | None = None
    stray_capacitance_f: float | None = None
    parts: tuple[str, ...] = ()
    rules_dirs: tuple[str, ...] = ()
    use_config: bool = True
    figures_wanted: bool = True  # False when no report shows stage figures
    netlist_map: str | None = None  # --netlist-map: the map for every netlist
    plots_wanted: str = ""  # the HTML review's plots: "all", "failing" or "" (none)


@lru_cache(maxsize=64)
def rules_for(folders: tuple[str, ...]):
    return load_rules(folders)


@lru_cache(maxsize=256)
def config_at(config_file: str | None) -> Config:
    if config_file is None:
        return Config()
    return parse_config(config_file, rules_for)


def config_for(path: str, request: Request) -> Config:
    """The configuration that governs ``path`` (overrides applied)."""
    if not request.use_config:
        return Config()
    config_file = request.config_file or find_config_file(os.path.dirname(os.path.abspath(path)))
    return config_at(config_file).for_file(path)


@lru_cache(maxsize=64)
def _library(paths: tuple[str, ...]):
    from checker.parts.library import load_library

    return load_library(list(paths))


@dataclass
class FileSetup:
    rules: list
    options: RunOptions
    library: dict
    all_rules: dict = field(default_factory=dict)
    netlist_map: object = None  # checker.netlist.mapping.NetlistMap, for netlist files


def netlist_map_path(path: str, request: Request) -> str | None:
    """The netlist map that governs ``path``: --netlist-map, else the configuration's."""
    return request.netlist_map or config_for(path, request).get("netlist-map")


@lru_cache(maxsize=32)
def _netlist_map(path: str, library_key: tuple[str, ...]):
    from checker.io.positions import InputErrors
    from checker.netlist.mapping import check_parts, load_map

    try:
        netlist_map = load_map(path)
        check_parts(netlist_map, _library(library_key))
    except InputErrors as errors:
        raise ConfigError("cannot load netlist map:\n  " +
                          "\n  ".join(str(p) for p in errors.problems)) from None
    return netlist_map


def setup_for(path: str, request: Request) -> FileSetup:
    """Rules, run options and part library for one file. Raises ConfigError, RuleError
    or InputErrors (a part library) for configuration mistakes."""
    config = config_for(path, request)
    folders = tuple(config.get("rules-dirs", [])) + request.rules_dirs
    rules = rules_for(folders)
    select = request.select if request.select is not None else config.get("select")
    ignore = request.ignore if request.ignore is not None else config.get("ignore", frozenset())
    for ids in (select or (), ignore):
        cautions = sorted(set(ids) & set(CAUTION_KINDS))
        if cautions:
            raise RuleError(not_a_rule(cautions[0]))
        unknown = sorted(set(ids) - set(rules) - set(ENGINE_RULES))
        if unknown:
            raise RuleError(f"unknown rule id {', '.join(unknown)}; `ampcheck rules` lists them")
    stray = request.stray_capacitance_f
    if stray is None:
        stray = config.get("stray-capacitance", DEFAULT_STRAY_F)
    settings = {rid: {k: v.value for k, v in values.items() if k != "severity"}
                for rid, values in config.rules.items()}
    severities = {rid: values["severity"].value for rid, values in config.rules.items()
                  if "severity" in values}
    options = RunOptions(analysis=AnalysisOptions(stray_capacitance_f=stray), select=select,
                         ignore=frozenset(ignore), settings=settings, severities=severities,
                         known_rules=frozenset(rules))
    library_key = tuple(config.get("parts", [])) + request.parts
    library = _library(library_key)
    map_path = request.netlist_map or config.get("netlist-map")
    netlist_map = _netlist_map(map_path, library_key) if map_path else None
    return FileSetup(selected(rules, options), options, library, rules, netlist_map)


def check_file(path: str, request: Request) -> FileResult:
    setup = setup_for(path, request)
    return review_file(path, setup.library, setup.rules, setup.options,
                       request.figures_wanted, setup.all_rules, setup.netlist_map,
                       request.plots_wanted)


def _worker(task: tuple[str, Request]) -> FileResult:
    path, request = task
    return check_file(path, request)


def check_files(paths: list[str], request: Request, jobs: int = 1) -> Iterator[FileResult]:
    """FileResults in the order of ``paths``, from ``jobs`` processes (1: in process)."""
    if jobs <= 1 or len(paths) < 2:
        for path in paths:
            yield check_file(path, request)
        return
    import multiprocessing

    method = "fork" if "fork" in multiprocessing.get_all_start_methods() else "spawn"
    context = multiprocessing.get_context(method)
    chunk = max(1, min(16, len(paths) // (jobs * 8)))
    with context.Pool(jobs) as pool:
        yield from pool.imap(_worker, [(path, request) for path in paths], chunksize=chunk)


def forget() -> None:
    """Drop cached configurations and libraries (files may have changed since the last
    run in this process)."""
    from checker.netlist.mapping import load_map

    for cached in (config_at, rules_for, _library, find_config_file, _netlist_map, load_map):
        cached.cache_clear()


def preflight(paths: list[str], request: Request) -> None:
    """Resolve every configuration, rule folder and part library the run will use, once,
    so their mistakes stop the run (exit 2) before any work starts."""
    seen = set()
    for path in paths:
        folder = os.path.dirname(os.path.abspath(path))
        if folder in seen:
            continue
        seen.add(folder)
        setup_for(path, request)


def fail_on_for(request: Request, cli_value: str | None) -> Severity | None:
    """The failing severity: the command line, else the configuration that governs the
    working folder (or --config), else error."""
    value = cli_value
    if value is None and request.use_config:
        config_file = request.config_file or find_config_file(os.getcwd())
        value = config_at(config_file).get("fail-on") if config_file else None
    value = value or "error"
    return None if value == "never" else Severity.parse(value)


def jobs_for(request: Request, cli_value: int | None) -> int:
    value = cli_value
    if value is None and request.use_config:
        config_file = request.config_file or find_config_file(os.getcwd())
        value = config_at(config_file).get("jobs") if config_file else None
    if not value:
        value = os.cpu_count() or 1
    return value


__all__ = ["Request", "check_files", "preflight", "fail_on_for", "jobs_for", "ConfigError"]
