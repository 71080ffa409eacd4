"""Check many files: per-file configuration, worker processes, results in file order.

Each file's options come from the closest configuration file above it (or an explicit
--config), with the command line on top, so results never depend on how files are
batched (a commit hook may call us several times per commit). Workers return small,
picklable FileResults; the parent streams them to the reporters in sorted-path order.
"""

from __future__ import annotations

import os
import sys
from collections.abc import Iterator
from dataclasses import field, replace
from checker.record import record
from functools import lru_cache
from typing import TYPE_CHECKING, Any

from checker import budget, workers
from checker.analysis import AnalysisOptions
from checker.cautions import KINDS as CAUTION_KINDS
from checker.cautions import not_a_rule
from checker.config import Config, ConfigError, Valued, find_config_file, parse_config
from checker.engine import ENGINE_RULES, RuleError, RunOptions, load_rules, selected
from checker.catalogue import engine_severity
from checker.findings import Finding, Severity
from checker.review import FileResult, review_file

if TYPE_CHECKING:  # loaded lazily at run time (only netlist files need it)
    from checker.netlist.mapping import NetlistMap

DEFAULT_STRAY_F = 1e-12  # layout stray at an inverting input (common practice: 0.5-2 pF)


@record(frozen=True)
class Request:
    """The command line's part of every file's options (picklable)."""

    config_file: str | None = None  # --config: use this one file for every path
    select: frozenset[str] | None = None
    also_select: frozenset[str] = frozenset()  # --also-select: added to the configured select
    ignore: frozenset[str] | None = None
    stray_capacitance_f: float | None = None
    parts: tuple[str, ...] = ()
    rules_dirs: tuple[str, ...] = ()
    use_config: bool = True
    figures_wanted: bool = True  # False when no report shows stage figures
    netlist_map: str | None = None  # --netlist-map: the map for every netlist
    plots_wanted: str = ""  # the HTML review's plots: "all", "failing" or "" (none)
    trust_config_rules: bool = False  # load rules-dirs named in configuration files
    time_budget_s: float | None = budget.DEFAULT_TIME_BUDGET_S  # per file; None: none
    memory_limit_mb: float | None = budget.DEFAULT_MEMORY_LIMIT_MB  # per file; None: none


@lru_cache(maxsize=64)
def rules_for(folders: tuple[str, ...]):
    return load_rules(folders)


@lru_cache(maxsize=256)
def config_at(config_file: str | None, trust_rules: bool = False) -> Config:
    if config_file is None:
        return Config()
    return parse_config(config_file, rules_for, trust_rules)


def config_for(path: str, request: Request) -> Config:
    """The configuration that governs ``path`` (overrides applied)."""
    if not request.use_config:
        return Config()
    config_file = request.config_file or find_config_file(os.path.dirname(os.path.abspath(path)))
    return config_at(config_file, request.trust_config_rules).for_file(path)


def _run_wide(request: Request, key: str):
    """A run-wide value from the configuration that governs the working folder (or
    --config); None when there is none."""
    if not request.use_config:
        return None
    config_file = request.config_file or find_config_file(os.getcwd())
    return config_at(config_file, request.trust_config_rules).get(key) if config_file else None


def run_wide_source(request: Request) -> tuple[str | None, Config]:
    """The file the run-wide keys come from (--config, else the working folder's) and
    its configuration, as ``check`` reads them."""
    if not request.use_config:
        return None, Config()
    config_file = request.config_file or find_config_file(os.getcwd())
    return config_file, config_at(config_file, request.trust_config_rules) if config_file \
        else Config()


@lru_cache(maxsize=64)
def _library(paths: tuple[str, ...]):
    from checker.parts.library import load_library

    return load_library(list(paths))


@record
class FileSetup:
    rules: list
    options: RunOptions
    library: dict
    all_rules: dict = field(default_factory=dict)
    netlist_map: NetlistMap | None = None  # for netlist files


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


def _severity(valued: Valued) -> Severity:
    assert isinstance(valued.value, Severity)  # the config parser stores it parsed
    return valued.value


def setup_for(path: str, request: Request) -> FileSetup:
    """Rules, run options and part library for one file. Raises ConfigError, RuleError
    or InputErrors (a part library) for configuration mistakes."""
    config = config_for(path, request)
    folders = tuple(config.get("rules-dirs", [])) + request.rules_dirs
    rules = rules_for(folders)
    select = request.select if request.select is not None else config.get("select")
    if select is not None and request.also_select:
        select = frozenset(select) | request.also_select
    for ids in (request.also_select,):
        unknown = sorted(set(ids) - set(rules) - set(ENGINE_RULES))
        if unknown:
            raise RuleError(f"unknown rule id {', '.join(unknown)}; `ampcheck rules` lists them")
    ignore = request.ignore if request.ignore is not None else config.get("ignore", frozenset())
    for given in (select or (), ignore):
        cautions = sorted(set(given) & set(CAUTION_KINDS))
        if cautions:
            raise RuleError(not_a_rule(cautions[0]))
        unknown = sorted(set(given) - set(rules) - set(ENGINE_RULES))
        if unknown:
            raise RuleError(f"unknown rule id {', '.join(unknown)}; `ampcheck rules` lists them")
    stray = request.stray_capacitance_f
    if stray is None:
        stray = config.get("stray-capacitance", DEFAULT_STRAY_F)
    # each value a number, or a list of numbers, as the rule's default is (options.Setting)
    settings: dict[str, dict[str, Any]] = {
        rid: {k: v.value for k, v in values.items() if k != "severity"}
        for rid, values in config.rules.items()}
    severities = {rid: _severity(values["severity"]) for rid, values in config.rules.items()
                  if "severity" in values}
    options = RunOptions(analysis=AnalysisOptions(stray_capacitance_f=stray), select=select,
                         ignore=frozenset(ignore), settings=settings, severities=severities,
                         known_rules=frozenset(rules))
    library_key = tuple(config.get("parts", [])) + request.parts
    library = _library(library_key)
    map_path = request.netlist_map or config.get("netlist-map")
    netlist_map = _netlist_map(map_path, library_key) if map_path else None
    return FileSetup(selected(rules, options), options, library, rules, netlist_map)


def files_read(paths: list[str], request: Request) -> list[str]:
    """Every file besides the stage files that a run over ``paths`` reads: the
    configuration governing each folder, the part libraries and netlist map it and the
    command line name, and the user rule files of its rule folders; so that no report
    is written over one of them. Unreadable configurations are left out (the run
    reports them itself)."""
    found: set[str] = set(request.parts)
    if request.netlist_map:
        found.add(request.netlist_map)
    rules_dirs = set(request.rules_dirs)
    folders = {os.path.dirname(os.path.abspath(path)) for path in paths} or {os.getcwd()}
    for folder in sorted(folders):
        config_file = request.config_file or (find_config_file(folder)
                                              if request.use_config else None)
        if not config_file:
            continue
        found.add(config_file)
        try:
            config = config_at(config_file, request.trust_config_rules)
        except ConfigError:
            continue
        found.update(config.get("parts", []))
        if config.get("netlist-map"):
            found.add(config.get("netlist-map"))
        rules_dirs.update(config.get("rules-dirs", []))
    for rules_dir in sorted(rules_dirs):
        if os.path.isdir(rules_dir):
            found.update(os.path.join(rules_dir, name) for name in os.listdir(rules_dir)
                         if name.endswith(".py"))
    return sorted(found)


def check_file(path: str, request: Request) -> FileResult:
    setup = setup_for(path, request)
    return review_file(path, setup.library, setup.rules, setup.options,
                       request.figures_wanted, setup.all_rules, setup.netlist_map,
                       request.plots_wanted)


REVIEW_FAILED = "review-failed"
MAX_MESSAGE = 300  # characters of an exception's text kept in the finding


def review_failed(path: str, kind: str, text: str) -> FileResult:
    """The result of a file whose review stopped: one ``review-failed`` finding."""
    text = " ".join(text.split())
    if len(text) > MAX_MESSAGE:
        text = text[:MAX_MESSAGE] + "..."
    finding = Finding(rule=REVIEW_FAILED, severity=engine_severity(REVIEW_FAILED),
                      message=f"the review of this file stopped: {kind}: {text}", path=path,
                      line=1, column=1, details={"kind": kind})
    return FileResult(path, problems=[finding])


def reviewed(path: str, request: Request) -> FileResult:
    """check_file behind a fence: within the file's time budget and memory cap, and any
    failure (an exception, the budget, the cap) becomes a ``review-failed`` finding on
    the file, so the run goes on. KeyboardInterrupt and signals still stop the run."""
    try:
        with budget.memory_cap(request.memory_limit_mb), \
                budget.time_budget(request.time_budget_s):
            return check_file(path, request)
    except budget.OverBudget as stop:
        return review_failed(path, "time budget", f"{stop} (--time-budget SECONDS sets it)")
    except MemoryError:
        return review_failed(path, "memory", "the review needed more memory than its cap of"
                             f" {request.memory_limit_mb:g} MB (--memory-limit MB sets it)")
    except RecursionError:
        return review_failed(path, "RecursionError", "nesting too deep to review")
    except Exception as error:  # noqa: BLE001 - the fence: a bug must not stop the audit
        return review_failed(path, type(error).__name__, str(error))


def _worker(task: tuple[str, Request]) -> FileResult:
    path, request = task
    return reviewed(path, request)


def _died(task: tuple[str, Request], why: str) -> FileResult:
    return review_failed(task[0], "worker died", why)


def check_files(paths: list[str], request: Request, jobs: int = 1) -> Iterator[FileResult]:
    """FileResults in the order of ``paths``, from ``jobs`` processes (1: in process)."""
    if jobs <= 1 or len(paths) < 2:
        for path in paths:
            yield reviewed(path, request)
        return
    chunk = max(1, min(16, len(paths) // (jobs * 8)))
    # A worker silent for much longer than its files' budgets is stuck in native code.
    patience = request.time_budget_s + 5 if request.time_budget_s else None
    yield from workers.ordered(_worker, [(path, request) for path in paths], jobs, chunk,
                               patience, _died)


def forget() -> None:
    """Drop cached configurations and libraries (files may have changed since the last
    run in this process)."""
    for cached in (config_at, rules_for, _library, find_config_file, _netlist_map):
        cached.cache_clear()
    mapping = sys.modules.get("checker.netlist.mapping")  # only loaded if a netlist was
    if mapping is not None:
        mapping.load_map.cache_clear()


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
    value = cli_value if cli_value is not None else _run_wide(request, "fail-on")
    value = value or "error"
    return None if value == "never" else Severity.parse(value)


def jobs_for(request: Request, cli_value: int | None) -> int:
    value = cli_value if cli_value is not None else _run_wide(request, "jobs")
    if not value:
        value = os.cpu_count() or 1
    return value


def worst_for(request: Request, cli_value: int | None) -> int:
    """How many worst files and stages the text summary names: the command line, else
    the working folder's configuration, else 5."""
    value = cli_value if cli_value is not None else _run_wide(request, "worst")
    return 5 if value is None else value


def limits_for(request: Request, time_budget_s: float | None,
               memory_limit_mb: float | None) -> Request:
    """The request with its per-file time budget and memory cap: the command line, else
    the configuration that governs the working folder, else the defaults (0: none)."""
    def pick(cli_value, key: str, default: float) -> float | None:
        value = cli_value if cli_value is not None else _run_wide(request, key)
        value = default if value is None else value
        return value or None

    return replace(request,
                   time_budget_s=pick(time_budget_s, "time-budget",
                                      budget.DEFAULT_TIME_BUDGET_S),
                   memory_limit_mb=pick(memory_limit_mb, "memory-limit",
                                        budget.DEFAULT_MEMORY_LIMIT_MB))


__all__ = ["Request", "check_files", "preflight", "fail_on_for", "jobs_for", "limits_for",
           "reviewed", "REVIEW_FAILED", "ConfigError"]
