"""The ``ampcheck`` command: argument parsing and exit codes live here and only here.

Exit codes: 0 nothing at or above the failing severity; 1 findings at or above it;
2 a usage or configuration error (nothing was reviewed); 3 the review of at least one
file stopped (``review-failed``: an internal error, its time budget or its memory cap),
every other file was reviewed and every report is complete; 4 an internal error of the
run itself (reports may be missing). A signal ends the run with 128 + its number
(130 Ctrl-C, 143 SIGTERM, 129 SIGHUP); a reader that goes away (``| head``) with 141,
quietly.
"""

from __future__ import annotations

import argparse
import io
import json
import os
import signal
import sys
from contextlib import contextmanager

from checker import __version__

EXIT_OK, EXIT_FINDINGS, EXIT_USAGE, EXIT_REVIEW_FAILED, EXIT_INTERNAL = 0, 1, 2, 3, 4
EXIT_SIGNAL_BASE = 128
STOP_SIGNALS = ("SIGTERM", "SIGHUP")  # besides SIGINT, which Python raises itself
FORMAT_NAMES = ["text", "json", "sarif", "compact", "csv", "html"]
FIGURE_FORMATS = {"text", "json", "html"}  # the reports that show each stage's figures
HTML_MODULES = ("matplotlib", "jinja2")  # the `html` extra


class UsageError(Exception):
    """A mistake in how the command was called; exits 2 with the message."""


class Stopped(BaseException):
    """A signal asked the run to stop (SIGTERM, SIGHUP)."""

    def __init__(self, signum: int):
        super().__init__(signum)
        self.signum = signum


def _ignore_stops() -> None:
    """Once the run is stopping, a second signal must not cut its clean-up short."""
    for name in ("SIGINT", *STOP_SIGNALS):
        if hasattr(signal, name):
            signal.signal(getattr(signal, name), signal.SIG_IGN)


@contextmanager
def _stop_on_signals():
    """SIGTERM and SIGHUP raise Stopped in the main thread, as SIGINT raises
    KeyboardInterrupt, so the run unwinds: workers terminated, temporary files removed."""
    def stop(signum, _frame):
        _ignore_stops()
        raise Stopped(signum)

    previous = {}
    try:
        for name in STOP_SIGNALS:
            if hasattr(signal, name):
                number = getattr(signal, name)
                previous[number] = signal.signal(number, stop)
    except ValueError:  # not the main thread: leave the handlers alone
        pass
    try:
        yield
    finally:
        for number, handler in previous.items():
            signal.signal(number, handler)


def _stdout_closed() -> bool:
    """True when standard output was closed (``>&-``): Python then has no sys.stdout,
    and the first file the run opens would take its descriptor."""
    if sys.stdout is None:
        return True
    try:
        os.fstat(sys.stdout.fileno())
    except io.UnsupportedOperation:  # an in-memory stream (a test's capture)
        return False
    except (OSError, ValueError):
        return True
    return False


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="ampcheck",
        description="Review op-amp stages before layout: numeric analysis, design rules,"
                    " findings with computed fixes.")
    parser.add_argument("--version", action="version", version=f"ampcheck {__version__}")
    commands = parser.add_subparsers(dest="command", metavar="COMMAND")

    check = commands.add_parser("check", help="read, analyse and review stage files")
    check.add_argument("paths", nargs="+", metavar="PATH",
                       help="stage files, netlists or directories (searched for *.stage,"
                            " *.stage.json, and netlists where a netlist map governs them)")
    check.add_argument("--format", choices=FORMAT_NAMES, default="text",
                       help="report format on standard output (default text)")
    check.add_argument("--output", action="append", default=[], metavar="FORMAT:PATH",
                       help="also write a report to a new file (repeatable), e.g. sarif:out.sarif")
    check.add_argument("--fail-on", choices=["error", "warning", "info", "never"],
                       help="exit 1 when a finding reaches this severity (default error)")
    check.add_argument("--select", metavar="IDS",
                       help="run only these rules (comma-separated ids)")
    check.add_argument("--ignore", metavar="IDS", help="skip these rules (comma-separated ids)")
    check.add_argument("--rules-dir", action="append", default=[], metavar="DIR",
                       help="also load rules from this folder (repeatable)")
    check.add_argument("--parts", action="append", default=[], metavar="FILE",
                       help="a part library file (repeatable); its parts override built-ins")
    check.add_argument("--netlist-map", metavar="FILE",
                       help="the netlist map for netlist files (see docs/netlist.md)")
    check.add_argument("--stray-capacitance", metavar="VALUE",
                       help="stray capacitance added at every inverting input (default 1p)")
    check.add_argument("--config", metavar="FILE",
                       help="use this configuration file for every path")
    check.add_argument("--no-config", action="store_true",
                       help="ignore configuration files")
    check.add_argument("--trust-config-rules", action="store_true",
                       help="load the rule folders (Python code) that configuration files"
                            " name in rules-dirs (also: AMPCHECK_TRUST_CONFIG_RULES=1)")
    check.add_argument("--jobs", type=int, metavar="N",
                       help="worker processes (default: one per CPU)")
    check.add_argument("--time-budget", type=float, metavar="SECONDS",
                       help="stop one file's review after this long and report it"
                            " (default 60, 0 for none)")
    check.add_argument("--memory-limit", type=float, metavar="MB",
                       help="memory one file's review may add to its process (default"
                            " 1024, 0 for none; Linux)")
    check.add_argument("--no-progress", action="store_true",
                       help="no progress bar (it is off anyway when stderr is not a terminal)")
    check.add_argument("--baseline", metavar="FILE",
                       help="findings recorded in this baseline do not fail the run")
    check.add_argument("--write-baseline", metavar="FILE",
                       help="record this run's findings as a new baseline file")
    check.add_argument("--prune-baseline", action="store_true",
                       help="with --baseline: remove entries that no longer match (only shrinks)")

    config = commands.add_parser("config", help="print the resolved configuration for a path")
    config.add_argument("path", nargs="?", default=".", metavar="PATH")
    config.add_argument("--config", metavar="FILE")
    config.add_argument("--trust-config-rules", action="store_true",
                        help="load the rule folders the configuration names in rules-dirs")

    rules = commands.add_parser("rules", help="list the rules")
    rules.add_argument("--rules-dir", action="append", default=[], metavar="DIR")
    rules.add_argument("--markdown", action="store_true",
                       help="print the rules reference (docs/rules.md) instead")

    explain = commands.add_parser("explain", help="print a rule's documentation")
    explain.add_argument("rule", metavar="ID")
    explain.add_argument("--rules-dir", action="append", default=[], metavar="DIR")

    commands.add_parser("schema", help="print the JSON Schema of the stage format")

    convert = commands.add_parser("convert", help="convert a stage file to the other syntax")
    convert.add_argument("file", metavar="FILE")
    convert.add_argument("--to", choices=["json", "sexp"], required=True)
    convert.add_argument("-o", "--output", metavar="PATH",
                         help="write to a new file (never the input) instead of stdout")

    extract = commands.add_parser("extract", help="write netlists' stages as stage files")
    extract.add_argument("paths", nargs="+", metavar="NETLIST",
                         help="netlist files or directories (searched for netlist endings)")
    extract.add_argument("--into", required=True, metavar="DIR",
                         help="a new folder to write the stage files to (must not exist)")
    extract.add_argument("--netlist-map", metavar="FILE",
                         help="the netlist map (else the configuration's netlist-map)")
    extract.add_argument("--parts", action="append", default=[], metavar="FILE",
                         help="a part library file (repeatable)")
    extract.add_argument("--config", metavar="FILE",
                         help="use this configuration file for every path")
    extract.add_argument("--no-config", action="store_true", help="ignore configuration files")

    parts = commands.add_parser("parts", help="list the op-amp parts in the library")
    parts.add_argument("--parts", action="append", default=[], metavar="FILE",
                       help="also load this part library file (repeatable)")
    from checker import mend_command

    mend_command.register(commands)
    return parser


# The matrices are small (a stage has tens of unknowns) and the parallelism comes from
# worker processes, so BLAS threads only compete with each other: one per process,
# unless the user set a count. Effective only before numpy is first imported.
BLAS_THREAD_VARIABLES = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


def main(argv: list[str] | None = None) -> int:
    for variable in BLAS_THREAD_VARIABLES:
        os.environ.setdefault(variable, "1")
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as stop:  # argparse exits 2 on usage errors, 0 on --help
        return int(stop.code or 0)
    if args.command is None:
        parser.print_help()
        return EXIT_USAGE
    try:
        if _stdout_closed() and not (args.command == "convert" and args.output):
            raise UsageError("standard output is closed: there is nowhere to write")
        with _stop_on_signals():
            return COMMANDS[args.command](args)
    except UsageError as error:
        print(f"ampcheck: {error}", file=sys.stderr)
        return EXIT_USAGE
    except KeyboardInterrupt:
        _ignore_stops()
        print("ampcheck: interrupted", file=sys.stderr)
        return EXIT_SIGNAL_BASE + signal.SIGINT
    except Stopped as stop:
        print(f"ampcheck: stopped by {signal.Signals(stop.signum).name}", file=sys.stderr)
        return EXIT_SIGNAL_BASE + stop.signum
    except BrokenPipeError:  # the reader went away (| head): stop quietly
        try:
            devnull = os.open(os.devnull, os.O_WRONLY)
            os.dup2(devnull, sys.stdout.fileno())
        except (OSError, ValueError, AttributeError):
            pass
        return EXIT_SIGNAL_BASE + getattr(signal, "SIGPIPE", 13)
    except Exception as error:  # the last guard: no traceback reaches a user
        if os.environ.get("AMPCHECK_DEBUG"):
            raise
        print(f"ampcheck: internal error: {type(error).__name__}: {error}\n"
              "Set AMPCHECK_DEBUG=1 to see the traceback, and please report it.",
              file=sys.stderr)
        return EXIT_INTERNAL


def _library(paths: list[str]):
    from checker.io.positions import InputErrors
    from checker.parts.library import load_library

    try:
        return load_library(paths)
    except InputErrors as errors:
        raise UsageError("cannot load part library:\n  " +
                         "\n  ".join(str(p) for p in errors.problems)) from None


def _rules(folders: list[str]):
    from checker.engine import RuleError, load_rules

    try:
        return load_rules(folders)
    except RuleError as error:
        raise UsageError(str(error)) from None


def _request(args):
    from checker.audit import Request
    from checker.config import trusted_by_environment
    from checker.units import UnitError, check_plausible, parse_value

    def ids(text):
        if text is None:
            return None
        return frozenset(part.strip() for part in text.split(",") if part.strip())

    stray = None
    if args.stray_capacitance is not None:
        try:
            stray = parse_value(args.stray_capacitance, "capacitance")
            check_plausible(stray, "capacitance", args.stray_capacitance)
        except UnitError as error:
            raise UsageError(f"--stray-capacitance: {error}") from None
    config_file = getattr(args, "config", None)
    if config_file and not os.path.isfile(config_file):
        raise UsageError(f"--config: no such file {config_file}")
    formats = {args.format} | {item.partition(":")[0] for item in args.output}
    for name, value in (("--time-budget", args.time_budget),
                        ("--memory-limit", args.memory_limit)):
        if value is not None and not 0 <= value <= 1e9:
            raise UsageError(f"{name} takes a number from 0 (no limit) upwards")
    return Request(config_file=config_file, select=ids(args.select), ignore=ids(args.ignore),
                   stray_capacitance_f=stray, parts=tuple(args.parts),
                   rules_dirs=tuple(args.rules_dir), use_config=not args.no_config,
                   figures_wanted=bool(formats & FIGURE_FORMATS),
                   netlist_map=args.netlist_map,
                   plots_wanted=_plots_wanted(args),
                   trust_config_rules=args.trust_config_rules or trusted_by_environment())


def _plots_wanted(args) -> str:
    """What the HTML review draws: every stage in full when one HTML file is written,
    only what bears on findings when it is only a folder (an audit), else nothing."""
    from checker.report import writes_folder

    html = ([None] if args.format == "html" else []) + [
        path for name, _, path in (item.partition(":") for item in args.output)
        if name == "html"]
    if not html:
        return ""
    if any(not writes_folder("html", path) for path in html):
        return "all"
    return "failing"


def _check_html_extra(args) -> None:
    """A clear message, naming the install command, when HTML is asked for without the
    `html` extra (matplotlib and jinja2); nothing is imported here."""
    import importlib.util

    if args.format != "html" and not any(item.partition(":")[0] == "html"
                                         for item in args.output):
        return
    missing = [name for name in HTML_MODULES if importlib.util.find_spec(name) is None]
    if missing:
        raise UsageError(f"the HTML review needs {' and '.join(missing)}, which are not"
                         " installed: install the html extra with"
                         " pip install 'ampcheck[html]' (from a checkout: pip install"
                         " '.[html]')")


def _outputs(args) -> list[tuple[str, str]]:
    outputs = []
    for item in args.output:
        name, _, path = item.partition(":")
        if name not in FORMAT_NAMES or not path:
            raise UsageError(f"--output {item!r}: write FORMAT:PATH with FORMAT one of"
                             f" {', '.join(FORMAT_NAMES)}")
        outputs.append((name, path))
    return outputs


def _caution_notice_wanted(args) -> bool:
    """Cautions go to standard error as well, unless the text report is read at a
    terminal (its Cautions heading shows them): always under a commit hook, which
    shows a passing hook's output only when verbose."""
    if os.environ.get("PRE_COMMIT"):
        return True
    return not (args.format == "text" and sys.stdout.isatty())


def _progress_wanted(args) -> bool:
    return (not args.no_progress and sys.stderr.isatty() and not os.environ.get("PRE_COMMIT")
            and not os.environ.get("CI"))


def cmd_check(args) -> int:
    from checker import audit, baseline as baselines
    from checker.check_run import CheckRun, RunError, open_sinks, probe_output
    from checker.config import ConfigError
    from checker.engine import RuleError
    from checker.files import discover
    from checker.io.positions import InputErrors
    from checker.report.context import ReportContext

    audit.forget()
    request = _request(args)
    outputs = _outputs(args)
    _check_html_extra(args)
    if args.prune_baseline and not args.baseline:
        raise UsageError("--prune-baseline goes with --baseline FILE")
    try:
        paths, missing = discover(args.paths,
                                  lambda path: audit.netlist_map_path(path, request) is not None)
    except ConfigError as error:
        raise UsageError(str(error)) from None
    if not paths and not missing:
        raise UsageError("no stage files (*.stage, *.stage.json) found in "
                         + ", ".join(args.paths))
    try:
        audit.preflight(paths or ["."], request)
        fail_on = audit.fail_on_for(request, args.fail_on)
        jobs = audit.jobs_for(request, args.jobs)
        request = audit.limits_for(request, args.time_budget, args.memory_limit)
        rules = audit.setup_for(paths[0] if paths else "x", request).all_rules
        baseline = baselines.load_baseline(args.baseline) if args.baseline else None
    except (ConfigError, RuleError, baselines.BaselineError) as error:
        raise UsageError(str(error)) from None
    except InputErrors as errors:
        raise UsageError("cannot load part library:\n  " +
                         "\n  ".join(str(p) for p in errors.problems)) from None
    if jobs < 1:
        raise UsageError("--jobs takes a whole number of at least 1")

    context = ReportContext(__version__, fail_on, rules)
    sinks = []
    try:
        for path in (args.write_baseline, args.baseline if args.prune_baseline else None):
            if path:
                probe_output(path, paths)
        sinks = open_sinks([(args.format, None)] + outputs, context, paths)
        run = CheckRun(context, sinks, baseline, args.prune_baseline, args.write_baseline,
                       caution_notice=_caution_notice_wanted(args))
        failing = run.run(paths, missing, request, jobs, _progress(args, len(paths)))
    except RunError as error:
        for sink in sinks:  # reports opened before the one that could not be
            sink.abandon()
        raise UsageError(str(error)) from None
    if run.review_failed:
        return EXIT_REVIEW_FAILED
    return EXIT_FINDINGS if failing else EXIT_OK


def _progress(args, total: int):
    if not _progress_wanted(args):
        return None
    from rich.progress import Progress

    from checker.report.summary import console

    progress = Progress(console=console(stderr=True), transient=True)
    progress.add_task("checking", total=total)
    progress.start()
    return progress


def cmd_config(args) -> int:
    from checker.audit import Request, config_for, rules_for
    from checker.config import ConfigError, find_config_file

    from checker.audit import forget

    from checker.config import trusted_by_environment

    forget()
    request = Request(config_file=args.config,
                      trust_config_rules=args.trust_config_rules or trusted_by_environment())
    try:
        config = config_for(os.path.join(args.path, "x") if os.path.isdir(args.path)
                            else args.path, request)
        rules = rules_for(tuple(config.get("rules-dirs", [])))
    except ConfigError as error:
        raise UsageError(str(error)) from None
    source = args.config or find_config_file(
        args.path if os.path.isdir(args.path) else os.path.dirname(os.path.abspath(args.path)))
    print(f"configuration for {args.path}: {source or 'none found (defaults)'}")
    defaults = {"fail-on": "error", "select": "all rules", "ignore": "none",
                "rules-dirs": "none", "parts": "none", "netlist-map": "none",
                "stray-capacitance": "1p", "jobs": "CPU count", "time-budget": "60",
                "memory-limit": "1024"}
    for key, default in defaults.items():
        item = config.values.get(key)
        value = default if item is None else item.value
        if isinstance(value, frozenset):
            value = ", ".join(sorted(value))
        origin = "default" if item is None else item.origin
        print(f"  {key} = {value}    ({origin})")
    for rule_id, rule in rules.items():
        for name, default in rule.settings.items():
            item = config.rules.get(rule_id, {}).get(name)
            value = default if item is None else item.value
            print(f"  rules.{rule_id}.{name} = {value:g}    "
                  f"({'default' if item is None else item.origin})")
        item = config.rules.get(rule_id, {}).get("severity")
        if item is not None:
            print(f"  rules.{rule_id}.severity = {item.value.label}    ({item.origin})")
    return EXIT_OK


def cmd_rules(args) -> int:
    from rich.table import Table

    from checker.cautions import KINDS as CAUTION_KINDS
    from checker.engine import ENGINE_RULES, ENGINE_SEVERITIES
    from checker.report.summary import console

    if args.markdown:
        from checker.rule_docs import rules_markdown

        sys.stdout.write(rules_markdown(_rules(args.rules_dir)))
        return EXIT_OK
    table = Table(title="Rules", title_justify="left")
    table.add_column("id", style="bold", no_wrap=True)
    table.add_column("severity")
    table.add_column("summary")
    for rule in _rules(args.rules_dir).values():
        table.add_row(rule.id, rule.severity.label, rule.summary)
    for rid, summary in ENGINE_RULES.items():
        table.add_row(rid, ENGINE_SEVERITIES[rid].label, summary + " (built into the engine)")
    for kind in CAUTION_KINDS.values():
        table.add_row(kind.id, "caution", kind.summary + " (a safety caution: always"
                      " reported, never selected, ignored or configured)")
    console().print(table)
    return EXIT_OK


def cmd_explain(args) -> int:
    from checker.cautions import KINDS as CAUTION_KINDS
    from checker.engine import ENGINE_RULES, ENGINE_SEVERITIES

    if args.rule in CAUTION_KINDS:
        kind = CAUTION_KINDS[args.rule]
        print(f"{kind.id} (a safety caution: always reported; not a rule, so it cannot be"
              f" selected, ignored, configured or given a severity)\n{kind.summary}\n")
        print(kind.doc.rstrip())
        return EXIT_OK
    rules = _rules(args.rules_dir)
    if args.rule in ENGINE_RULES:
        print(f"{args.rule} ({ENGINE_SEVERITIES[args.rule].label}, built into the engine)"
              f"\n\n{ENGINE_RULES[args.rule]}")
        return EXIT_OK
    if args.rule not in rules:
        import difflib

        close = difflib.get_close_matches(args.rule, list(rules) + list(CAUTION_KINDS), n=1)
        hint = f"; did you mean {close[0]}?" if close else "; `ampcheck rules` lists them"
        raise UsageError(f"no rule {args.rule!r}{hint}")
    rule = rules[args.rule]
    settings = ", ".join(f"{k} = {v:g}" for k, v in rule.settings.items()) or "none"
    print(f"{rule.id} ({rule.severity.label})\n{rule.summary}\n\nSettings: {settings}\n")
    print(rule.doc)
    return EXIT_OK


def cmd_schema(args) -> int:
    from checker.io.schema import stage_schema

    print(json.dumps(stage_schema(), indent=2, ensure_ascii=False))
    return EXIT_OK


def cmd_convert(args) -> int:
    from checker.io.load import read_file
    from checker.io.positions import InputErrors
    from checker.io.sexp_writer import write_sexp
    from checker.io.write import write_new_file

    try:
        parsed = read_file(args.file)
    except InputErrors as errors:
        for problem in errors.problems:
            print(problem, file=sys.stderr)
        return EXIT_FINDINGS
    if args.to == "json":
        text = json.dumps(parsed.tree, indent=2, ensure_ascii=False) + "\n"
    else:
        text = write_sexp(parsed.tree)
    if args.output is None:
        sys.stdout.write(text)
        return EXIT_OK
    try:
        write_new_file(args.output, text, protect=[args.file])
    except (OSError, ValueError) as error:
        raise UsageError(str(error)) from None
    print(f"wrote {args.output}", file=sys.stderr)
    return EXIT_OK


def cmd_extract(args) -> int:
    from checker.netlist.extract_command import ExtractError, extract_into

    try:
        failed = extract_into(args.paths, args.into, _extract_request(args))
    except ExtractError as error:
        raise UsageError(str(error)) from None
    return EXIT_FINDINGS if failed else EXIT_OK


def _extract_request(args):
    from checker.audit import Request

    if args.config and not os.path.isfile(args.config):
        raise UsageError(f"--config: no such file {args.config}")
    return Request(config_file=args.config, parts=tuple(args.parts),
                   use_config=not args.no_config, netlist_map=args.netlist_map)


def cmd_parts(args) -> int:
    from checker.report.summary import print_parts

    print_parts(_library(args.parts))
    return EXIT_OK


def cmd_mend(args) -> int:
    from checker.mend_command import MendError, run

    try:
        return run(args)
    except MendError as error:
        raise UsageError(str(error)) from None


COMMANDS = {"mend": cmd_mend, "check": cmd_check, "schema": cmd_schema, "convert": cmd_convert,
            "parts": cmd_parts, "rules": cmd_rules, "explain": cmd_explain,
            "config": cmd_config, "extract": cmd_extract}
