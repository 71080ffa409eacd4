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
FORMAT_NAMES = ["text", "json", "sarif", "compact", "csv", "figures-csv", "html"]
FIGURE_FORMATS = {"text", "json", "html", "figures-csv"}  # the reports that show each stage's figures
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
    from checker.options import BY_NAME, help_for

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
    check.add_argument("-f", "--format", choices=FORMAT_NAMES, default="text",
                       help="report format on standard output (default text)")
    check.add_argument("-o", "--output", action="append", default=[], metavar="[FORMAT:]PATH",
                       help="also write a report to a new file (repeatable), e.g."
                            " sarif:out.sarif; a path ending in .json, .csv, .sarif, .html or"
                            " .txt takes its format from the ending")
    check.add_argument("--fail-on", choices=BY_NAME["fail-on"].allowed,
                       help=help_for("--fail-on"))
    check.add_argument("--select", action="append", metavar="IDS",
                       help=help_for("--select"))
    check.add_argument("--also-select", action="append", metavar="IDS",
                       help="add these rules to the configured selection (repeatable)")
    check.add_argument("--ignore", action="append", metavar="IDS", help=help_for("--ignore"))
    check.add_argument("--rules-dir", action="append", default=[], metavar="DIR",
                       help=help_for("--rules-dir"))
    check.add_argument("--parts", action="append", default=[], metavar="FILE",
                       help=help_for("--parts"))
    check.add_argument("--netlist-map", metavar="FILE",
                       help=help_for("--netlist-map"))
    check.add_argument("--stray-capacitance", metavar="VALUE",
                       help=help_for("--stray-capacitance"))
    check.add_argument("--exclude", action="append", default=[], metavar="GLOB",
                       help=help_for("--exclude"))
    check.add_argument("--config", metavar="FILE",
                       help="use this configuration file for every path")
    check.add_argument("--no-config", action="store_true",
                       help="ignore configuration files")
    check.add_argument("--trust-config-rules", action="store_true",
                       help="load the rule folders (Python code) that configuration files"
                            " name in rules-dirs (also: AMPCHECK_TRUST_CONFIG_RULES=1)")
    check.add_argument("-j", "--jobs", type=int, metavar="N",
                       help=help_for("--jobs"))
    check.add_argument("--time-budget", type=float, metavar="SECONDS",
                       help=help_for("--time-budget"))
    check.add_argument("--memory-limit", type=float, metavar="MB",
                       help=help_for("--memory-limit"))
    check.add_argument("--figures-csv", metavar="PATH",
                       help="also write one CSV row per stage: gain, bandwidth (Hz), phase"
                            " margin (deg), output range (V) and its finding counts")
    check.add_argument("--worst", type=int, metavar="N", help=help_for("--worst"))
    check.add_argument("--no-progress", action="store_true",
                       help="no progress bar (it is off anyway when stderr is not a terminal)")
    check.add_argument("-q", "--quiet", action="store_true",
                       help="no report on standard output and no progress bar: the exit code"
                            " and the --output files only (safety cautions still go to"
                            " standard error)")
    check.add_argument("--show", choices=["errors", "warnings", "all"], default="all",
                       help="the standard-output report shows only findings of this"
                            " severity and above (default all); --fail-on, --output files"
                            " and safety cautions are not filtered")
    check.add_argument("--show-baselined", action="store_true",
                       help="list the findings the baseline holds too (marked); by default"
                            " the text and compact reports leave them out (json, sarif,"
                            " csv and html keep them, marked)")
    check.add_argument("--stdin-name", metavar="NAME", default=STDIN_NAME,
                       help="with PATH '-': the name the stage read from standard input"
                            " takes in messages and reports (its ending picks the syntax)")
    check.add_argument("--color", choices=["auto", "always", "never"], default="auto",
                       help="colour in terminal output (auto: at a terminal, honouring"
                            " NO_COLOR and FORCE_COLOR)")
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
    rules.add_argument("--format", choices=["table", "json"], default="table")

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
    parts.add_argument("name", nargs="?", help="show this one part in full")
    parts.add_argument("--format", choices=["table", "json"], default="table")
    parts.add_argument("--parts", action="append", default=[], metavar="FILE",
                       help="also load this part library file (repeatable)")
    from checker import mend_command

    mend_command.register(commands)
    from checker import rule_scaffold

    rule_scaffold.register(commands)
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
            code = COMMANDS[args.command](args)
            sys.stdout.flush()  # a full disk under standard output fails here, not at exit
            return code
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
        _discard_stdout()
        return EXIT_SIGNAL_BASE + getattr(signal, "SIGPIPE", 13)
    except OSError as error:
        from checker.io.write import unnamed_write_error

        if not unnamed_write_error(error):
            return _internal_error(error)
        _discard_stdout()
        print(f"ampcheck: cannot write to standard output: {error.strerror or error}",
              file=sys.stderr)
        return EXIT_USAGE
    except Exception as error:  # the last guard: no traceback reaches a user
        return _internal_error(error)


def _discard_stdout() -> None:
    """Point standard output at the null device, so the interpreter's last flush of
    what could not be written fails no more (it would print a traceback)."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError, AttributeError):
        pass


def _internal_error(error: Exception) -> int:
    if os.environ.get("AMPCHECK_DEBUG"):
        raise error
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

    def ids(texts, flag: str = ""):
        """Repeated options accumulate: --select A --select B runs A and B. An empty
        ``flag`` list (--select only) is refused: it would run no rule and pass anything."""
        if texts is None:
            return None
        given = frozenset(part.strip() for text in texts for part in text.split(",")
                          if part.strip())
        if not given and flag:
            raise UsageError(f"{flag} names no rule id; `ampcheck rules` lists them")
        return given

    stray = None
    if args.stray_capacitance is not None:
        try:
            stray = parse_value(args.stray_capacitance, "capacitance")
            check_plausible(stray, "capacitance", args.stray_capacitance)
        except UnitError as error:
            raise UsageError(f"--stray-capacitance: {error}") from None
        if stray < 0:  # as a configuration file's stray-capacitance (options.py)
            raise UsageError("--stray-capacitance cannot be negative")
        from checker.options import MAX_STRAY_F, STRAY_TOO_LARGE

        if stray > MAX_STRAY_F:
            raise UsageError(f"--stray-capacitance {args.stray_capacitance}: {STRAY_TOO_LARGE}")
    config_file = getattr(args, "config", None)
    if config_file and getattr(args, "no_config", False):
        raise UsageError("--config FILE and --no-config contradict each other: give one")
    if config_file and not os.path.isfile(config_file):
        raise UsageError(f"--config: no such file {config_file}")
    formats = {args.format} | {name for name, _ in _outputs(args)}
    for name, value in (("--time-budget", args.time_budget),
                        ("--memory-limit", args.memory_limit)):
        if value is not None and not 0 <= value <= 1e9:
            raise UsageError(f"{name} takes a number from 0 (no limit) to 1e9")
    select, ignore = ids(args.select, "--select"), ids(args.ignore)
    if select and ignore and select <= ignore:  # as an empty --select: nothing would run
        raise UsageError("every rule --select names is in --ignore too, so no rule would"
                         " run; drop one of them")
    return Request(config_file=config_file, select=select,
                   ignore=ignore,
                   also_select=ids(args.also_select) or frozenset(),
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

    html = ([None] if args.format == "html" and not args.quiet else []) + [
        path for name, path in (output_item(item) for item in args.output) if name == "html"]
    if not html:
        return ""
    if any(not writes_folder("html", path) for path in html):
        return "all"
    return "failing"


def _check_html_extra(args) -> None:
    """A clear message, naming the install command, when HTML is asked for without the
    `html` extra (matplotlib and jinja2); nothing is imported here."""
    import importlib.util

    if args.format != "html" and not any(output_item(item)[0] == "html"
                                         for item in args.output):
        return
    missing = [name for name in HTML_MODULES if importlib.util.find_spec(name) is None]
    if missing:
        raise UsageError(f"the HTML review needs {' and '.join(missing)}, which are not"
                         " installed: install the html extra with"
                         " pip install 'ampcheck[html]' (from a checkout: pip install"
                         " '.[html]')")


OUTPUT_ENDINGS = {".json": "json", ".csv": "csv", ".sarif": "sarif", ".html": "html",
                  ".txt": "text"}


def output_item(item: str) -> tuple[str, str]:
    """(format, path) of one --output: FORMAT:PATH, or a PATH whose ending names it."""
    name, colon, path = item.partition(":")
    if colon and name in FORMAT_NAMES:
        return name, path
    ending = os.path.splitext(item)[1].lower()
    if ending in OUTPUT_ENDINGS:
        return OUTPUT_ENDINGS[ending], item
    return name, path


def _outputs(args) -> list[tuple[str, str]]:
    outputs = []
    for item in args.output:
        name, path = output_item(item)
        if name not in FORMAT_NAMES or not path:
            raise UsageError(f"--output {item!r}: write FORMAT:PATH with FORMAT one of"
                             f" {', '.join(FORMAT_NAMES)}, or a PATH ending in"
                             f" {', '.join(OUTPUT_ENDINGS)}")
        if path == "-":  # a file named '-' is never what was meant
            raise UsageError(f"--output {item}: standard output takes the --format report;"
                             " --output writes files")
        outputs.append((name, path))
    if args.figures_csv:
        outputs.append(("figures-csv", args.figures_csv))
    _distinct_outputs(outputs)
    return outputs


def _distinct_outputs(outputs: list[tuple[str, str]]) -> None:
    """UsageError when two outputs (reports, a baseline written) name one file: the
    last would win silently."""
    seen: dict[str, str] = {}
    for name, path in outputs:
        where = os.path.realpath(path)
        if where in seen:
            raise UsageError(f"--output {path} is given twice ({seen[where]} and {name});"
                             " give each report its own file")
        seen.setdefault(where, name)


def _caution_notice_wanted(args) -> bool:
    """Cautions go to standard error as well, unless the text report is read at a
    terminal (its Cautions heading shows them): always under a commit hook, which
    shows a passing hook's output only when verbose."""
    if os.environ.get("PRE_COMMIT") or args.quiet:
        return True
    return not (args.format == "text" and sys.stdout.isatty())


def _progress_wanted(args) -> bool:
    """A bar on a terminal's stderr, except when a format other than text streams its
    findings to that same terminal (the bar would be glued to the first finding)."""
    streams_to_terminal = not args.quiet and args.format != "text" and sys.stdout.isatty()
    return (not args.no_progress and not args.quiet and sys.stderr.isatty()
            and not streams_to_terminal and not os.environ.get("PRE_COMMIT")
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
    _set_colour(args.color)
    if "-" in args.paths:
        return _check_stdin(args)
    if args.stdin_name != STDIN_NAME:
        raise UsageError("--stdin-name names the stage read from standard input: give '-'"
                         " as the path")
    absent = [path for path in args.paths if not os.path.exists(path)]
    if absent:
        raise UsageError(f"no such file or directory: {', '.join(absent)}")
    request = _request(args)
    outputs = _outputs(args)
    _check_html_extra(args)
    args.paths, governing_only = _governed_paths(args.paths, request)
    if governing_only and not args.paths:
        return EXIT_OK  # a configuration or part library that governs no stage file
    if args.prune_baseline and not args.baseline:
        raise UsageError("--prune-baseline goes with --baseline FILE")
    try:
        paths, missing = discover(args.paths,
                                  lambda path: audit.netlist_map_path(path, request) is not None)
        paths = _without_excluded(paths, args, request)  # reads each folder's configuration
    except ConfigError as error:
        raise UsageError(str(error)) from None
    if not paths and not missing:
        raise UsageError("no stage files (*.stage, *.stage.json) found in "
                         + ", ".join(args.paths))
    try:
        audit.preflight(paths or ["."], request)
        fail_on = audit.fail_on_for(request, args.fail_on)
        jobs = audit.jobs_for(request, 1 if args.jobs is None and os.environ.get("PRE_COMMIT")
                              else args.jobs)
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
    worst = audit.worst_for(request, args.worst)
    if worst < 0:
        raise UsageError("--worst takes a whole number of at least 0")

    context = ReportContext(__version__, fail_on, rules, worst)
    # no report over a file the run reads: the stages, and the configuration, part
    # libraries, netlist map, rule files and the baseline (unless it is pruned in place)
    read = [*paths, *audit.files_read(paths, request)]
    if args.baseline and not args.prune_baseline:
        read.append(args.baseline)
    written = [(name, path) for name, path in (("--write-baseline", args.write_baseline),
                                               ("--prune-baseline", args.baseline
                                                if args.prune_baseline else None)) if path]
    _distinct_outputs(outputs + written)
    sinks = []
    try:
        for _name, path in written:
            probe_output(path, read)
        report: list[tuple[str, str | None]] = [] if args.quiet else [(args.format, None)]
        sinks = open_sinks([*report, *outputs], context, read)
        # the human formats leave the baseline's findings out unless asked; the machine
        # formats keep each one, marked baselined, for the tools that read them
        hide_baselined = (baseline is not None and not args.show_baselined
                          and args.format in HUMAN_FORMATS)
        if report and (args.show != "all" or hide_baselined):
            from checker.shown import SHOW_CHOICES, ShownWriter

            sinks[0].writer = ShownWriter(sinks[0].writer, SHOW_CHOICES[args.show],
                                          show_baselined=not hide_baselined)
        run = CheckRun(context, sinks, baseline, args.prune_baseline, args.write_baseline,
                       caution_notice=_caution_notice_wanted(args))
        failing = run.run(paths, missing, request, jobs, _progress(args, len(paths)))
    except RunError as error:
        for sink in sinks:  # reports opened before the one that could not be
            sink.abandon()
        raise UsageError(str(error)) from None
    if run.review_failed:
        return EXIT_REVIEW_FAILED
    if args.write_baseline:  # the baseline was written: that was the job asked for
        return EXIT_OK
    return EXIT_FINDINGS if failing else EXIT_OK


HUMAN_FORMATS = ("text", "compact")
STDIN_NAME = "stdin.stage"  # --stdin-name's default


def _check_stdin(args) -> int:
    """PATH '-': the stage on standard input is written to a private temporary folder
    under --stdin-name, checked from there (so messages and reports name it by that
    name), and removed afterwards. The configuration is the working folder's."""
    import shutil
    import tempfile

    if args.paths != ["-"]:
        raise UsageError("'-' (standard input) is checked on its own, not with other paths")
    name = args.stdin_name
    if os.path.isabs(name) or ".." in name.replace("\\", "/").split("/") or not name.strip():
        raise UsageError("--stdin-name is a relative file name, e.g. board/filter.stage")
    if sys.stdin is None:  # started with standard input closed
        raise UsageError("'-' reads standard input, which is closed")
    data = sys.stdin.buffer.read() if hasattr(sys.stdin, "buffer") else \
        sys.stdin.read().encode()
    folder = tempfile.mkdtemp(prefix="ampcheck-stdin-")
    here = os.getcwd()
    try:
        target = os.path.join(folder, name)
        os.makedirs(os.path.dirname(target), exist_ok=True)
        with open(target, "wb") as handle:
            handle.write(data)
        if args.config is None and not args.no_config:
            from checker.config import find_config_file

            args.config = find_config_file(here)
        args.output = [_absolute_output(item, here) for item in args.output]
        for key in ("write_baseline", "baseline"):
            if getattr(args, key):
                setattr(args, key, os.path.join(here, getattr(args, key)))
        args.parts = [os.path.join(here, p) for p in args.parts]
        args.rules_dir = [os.path.join(here, p) for p in args.rules_dir]
        if args.netlist_map:
            args.netlist_map = os.path.join(here, args.netlist_map)
        if args.config:
            args.config = os.path.join(here, args.config)
        args.paths = [name]
        args.stdin_name = STDIN_NAME  # read already: the check of the file it became
        os.chdir(folder)
        return cmd_check(args)
    finally:
        os.chdir(here)
        shutil.rmtree(folder, ignore_errors=True)


def _absolute_output(item: str, here: str) -> str:
    name, path = output_item(item)
    if item == path:
        return os.path.join(here, path)
    return f"{name}:{os.path.join(here, path)}"


def _governed_paths(paths: list[str], request) -> tuple[list[str], bool]:
    """Named configuration files and part libraries replaced by the stage files they
    govern (checker.governed); the second value says every path was one of them."""
    from checker import audit
    from checker.config import ConfigError
    from checker.governed import governed_by, is_governing

    result, governing = [], 0
    for path in paths:
        if os.path.isfile(path) and is_governing(path):
            governing += 1
            try:
                found = governed_by(path, lambda stage: audit.config_for(stage, request),
                                    os.getcwd())
            except ConfigError as error:
                raise UsageError(str(error)) from None
            result += [p for p in found if p not in result]
        elif path not in result:
            result.append(path)
    return result, governing == len(paths)


def _set_colour(choice: str) -> None:
    """--color: always and never set FORCE_COLOR / NO_COLOR, which every console reads."""
    if choice == "always":
        os.environ.pop("NO_COLOR", None)
        os.environ["FORCE_COLOR"] = "1"
    elif choice == "never":
        os.environ.pop("FORCE_COLOR", None)
        os.environ["NO_COLOR"] = "1"


def _without_excluded(paths: list[str], args, request) -> list[str]:
    """The found paths less those an exclude pattern matches: --exclude relative to the
    working folder, the configuration's exclude relative to its file; a named file is
    never excluded."""
    from checker import audit
    from checker.config import matches_any

    named = {os.path.normpath(p) for p in args.paths if not os.path.isdir(p)}
    kept = []
    for path in paths:
        if path not in named:
            if matches_any(path, os.getcwd(), args.exclude):
                continue
            config = audit.config_for(path, request)
            patterns = config.get("exclude") or []
            # exclude patterns come from a file, so the configuration has its path
            if patterns and config.path is not None and \
                    matches_any(path, os.path.dirname(os.path.abspath(config.path)), patterns):
                continue
        kept.append(path)
    return kept


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
    """What `check PATH` would use, run from this folder: each option of the table in
    checker.options with its origin, and every rule setting by its kebab-case key."""
    from checker.audit import Request, config_for, forget, rules_for, run_wide_source
    from checker.config import ConfigError, find_config_file, trusted_by_environment
    from checker.findings import Severity
    from checker.options import OPTIONS, rule_settings
    from checker.units import format_si

    forget()
    if not os.path.exists(args.path):
        raise UsageError(f"{args.path}: no such file or directory")
    request = Request(config_file=args.config,
                      trust_config_rules=args.trust_config_rules or trusted_by_environment())
    probe = os.path.join(args.path, "x") if os.path.isdir(args.path) else args.path
    try:
        config = config_for(probe, request)
        wide_file, wide = run_wide_source(request)
        rules = rules_for(tuple(config.get("rules-dirs", [])))
    except ConfigError as error:
        raise UsageError(str(error)) from None
    source = args.config or find_config_file(os.path.dirname(os.path.abspath(probe)))
    print(f"configuration for {args.path}: {source or 'none found (defaults)'}")
    if wide_file != source:
        print(f"run-wide keys from the working folder's configuration: {wide_file or 'none'}")
    for option in OPTIONS:
        item = (wide if option.run_wide else config).values.get(option.name)
        if item is None:
            value, origin = option.default_text or option.default, "default"
        else:
            value, origin = item.value, item.origin
        if isinstance(value, frozenset):
            value = ", ".join(sorted(value))
        elif isinstance(value, list):
            value = ", ".join(value) or "none"
        if option.type == "quantity" and item is not None:
            assert isinstance(value, float)  # parse_option reads a quantity as a float
            value = format_si(value, "F")
        print(f"  {option.name} = {value}    ({origin})")
    for rule_id, rule in rules.items():
        configured = config.rules.get(rule_id, {})
        for key, setting in rule_settings(rule).items():
            item = configured.get(setting.name)
            value = setting.default if item is None else item.value
            print(f"  rules.{rule_id}.{key} = {setting.show(value)}    "
                  f"({'default' if item is None else item.origin})")
        item = configured.get("severity")
        if item is not None:
            assert isinstance(item.value, Severity)  # parse_config stores it parsed
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
    if args.format == "json":
        from checker.report.listings import rules_json

        rows = [{"id": r.id, "severity": r.severity.label, "summary": r.summary,
                 "kind": "rule", "settings": dict(r.settings)}
                for r in _rules(args.rules_dir).values()]
        rows += [{"id": rid, "severity": ENGINE_SEVERITIES[rid].label, "summary": text,
                  "kind": "engine", "settings": {}} for rid, text in ENGINE_RULES.items()]
        rows += [{"id": k.id, "severity": "caution", "summary": k.summary,
                  "kind": "caution", "settings": {}} for k in CAUTION_KINDS.values()]
        sys.stdout.write(rules_json(rows))
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
        from checker.catalogue import ENGINE_CATALOGUE

        print(f"{args.rule} ({ENGINE_SEVERITIES[args.rule].label}, built into the engine)"
              f"\n{ENGINE_RULES[args.rule]}\n")
        print(ENGINE_CATALOGUE[args.rule].doc)
        return EXIT_OK
    if args.rule not in rules:
        import difflib

        close = difflib.get_close_matches(args.rule, list(rules) + list(CAUTION_KINDS), n=1)
        hint = f"; did you mean {close[0]}?" if close else "; `ampcheck rules` lists them"
        raise UsageError(f"no rule {args.rule!r}{hint}")
    from checker.options import rule_settings

    rule = rules[args.rule]
    settings = ", ".join(f"{key} = {setting.show(setting.default)}"
                         for key, setting in rule_settings(rule).items()) or "none"
    print(f"{rule.id} ({rule.severity.label})\n{rule.summary}\n\nSettings: {settings}\n")
    print(rule.doc)
    return EXIT_OK


def cmd_schema(args) -> int:
    from checker.io.schema import stage_schema

    print(json.dumps(stage_schema(), indent=2, ensure_ascii=False))
    return EXIT_OK


# (as a kind of file, as what a file is read as) and an example name, per syntax
_SYNTAX_WORDS = {"json": ("JSON", "JSON"), "sexp": ("s-expression", "s-expressions")}
_EXAMPLE = {"json": "NAME.stage.json", "sexp": "NAME.stage"}


def cmd_convert(args) -> int:
    from checker.io.load import read_file, syntax_of
    from checker.io.positions import InputErrors
    from checker.io.sexp_writer import write_sexp
    from checker.io.write import write_new_file

    try:
        parsed = read_file(args.file)
    except InputErrors as errors:
        for problem in errors.problems:
            print(problem, file=sys.stderr)
        return EXIT_FINDINGS
    text = json.dumps(parsed.tree, indent=2, ensure_ascii=False) + "\n" if args.to == "json" else write_sexp(parsed.tree)
    if args.output is None:
        sys.stdout.write(text)
        return EXIT_OK
    wanted, ending = ("json" if args.to == "json" else "sexp"), syntax_of(args.output)
    if ending != wanted:  # the ending says how the file is read
        read_as, kind, example = _SYNTAX_WORDS[ending], _SYNTAX_WORDS[wanted], _EXAMPLE[wanted]
        raise UsageError(f"-o {args.output}: a file ending so is read as {read_as[1]};"
                         f" name the {kind[0]} file {example}")
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
    import difflib

    from checker.report.summary import print_part, print_parts

    library = _library(args.parts)
    if args.name is None and args.format == "json":
        from checker.report.listings import parts_json

        sys.stdout.write(parts_json(library))
        return EXIT_OK
    if args.name is None:
        print_parts(library)
        return EXIT_OK
    if args.name not in library:
        near = difflib.get_close_matches(args.name, list(library), n=3, cutoff=0.4)
        hint = f"; nearest: {', '.join(near)}" if near else ""
        print(f"ampcheck: no part named {args.name!r}{hint}", file=sys.stderr)
        return EXIT_USAGE
    print_part(library[args.name])
    return EXIT_OK


def cmd_mend(args) -> int:
    from checker.mend_command import MendError, run

    try:
        return run(args)
    except MendError as error:
        raise UsageError(str(error)) from None


def cmd_new_rule(args) -> int:
    from checker.cautions import KINDS as CAUTION_KINDS
    from checker.engine import ENGINE_RULES
    from checker.rule_scaffold import ScaffoldError, run

    known = set(_rules(args.rules_dir)) | set(ENGINE_RULES) | set(CAUTION_KINDS)
    try:
        return run(args, known)
    except (ScaffoldError, OSError) as error:
        raise UsageError(str(error)) from None


COMMANDS = {"new-rule": cmd_new_rule, "mend": cmd_mend, "check": cmd_check, "schema": cmd_schema, "convert": cmd_convert,
            "parts": cmd_parts, "rules": cmd_rules, "explain": cmd_explain,
            "config": cmd_config, "extract": cmd_extract}
