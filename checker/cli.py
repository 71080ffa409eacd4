"""The ``ampcheck`` command: argument parsing and exit codes live here and only here.

Exit codes: 0 nothing at or above the failing severity; 1 findings at or above it;
2 usage, configuration or internal error.
"""

from __future__ import annotations

import argparse
import json
import os
import sys

from checker import __version__

EXIT_OK, EXIT_FINDINGS, EXIT_USAGE = 0, 1, 2


class UsageError(Exception):
    """A mistake in how the command was called; exits 2 with the message."""


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="ampcheck",
        description="Review op-amp stages before layout: numeric analysis, design rules,"
                    " findings with computed fixes.")
    parser.add_argument("--version", action="version", version=f"ampcheck {__version__}")
    commands = parser.add_subparsers(dest="command", metavar="COMMAND")

    check = commands.add_parser("check", help="read, analyse and review stage files")
    check.add_argument("paths", nargs="+", metavar="PATH",
                       help="stage files or directories (searched for *.stage, *.stage.json)")
    check.add_argument("--parts", action="append", default=[], metavar="FILE",
                       help="a part library file (repeatable); its parts override built-ins")
    check.add_argument("--format", choices=["text", "json"], default="text",
                       help="report format (default text)")
    check.add_argument("--fail-on", choices=["error", "warning", "info", "never"],
                       default="error",
                       help="exit 1 when a finding reaches this severity (default error)")
    check.add_argument("--select", metavar="IDS",
                       help="run only these rules (comma-separated ids)")
    check.add_argument("--ignore", metavar="IDS", help="skip these rules (comma-separated ids)")
    check.add_argument("--rules-dir", action="append", default=[], metavar="DIR",
                       help="also load rules from this folder (repeatable)")
    check.add_argument("--stray-capacitance", default="1p", metavar="VALUE",
                       help="stray capacitance added at every inverting input (default 1p)")

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

    parts = commands.add_parser("parts", help="list the op-amp parts in the library")
    parts.add_argument("--parts", action="append", default=[], metavar="FILE",
                       help="also load this part library file (repeatable)")
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as stop:  # argparse exits 2 on usage errors, 0 on --help
        return int(stop.code or 0)
    if args.command is None:
        parser.print_help()
        return EXIT_USAGE
    try:
        return COMMANDS[args.command](args)
    except UsageError as error:
        print(f"ampcheck: {error}", file=sys.stderr)
        return EXIT_USAGE
    except KeyboardInterrupt:
        print("ampcheck: interrupted", file=sys.stderr)
        return EXIT_USAGE
    except Exception as error:  # the last guard: no traceback reaches a user
        if os.environ.get("AMPCHECK_DEBUG"):
            raise
        print(f"ampcheck: internal error: {type(error).__name__}: {error}\n"
              "Set AMPCHECK_DEBUG=1 to see the traceback, and please report it.",
              file=sys.stderr)
        return EXIT_USAGE


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


def _ids(text: str | None, known: dict) -> frozenset[str] | None:
    if text is None:
        return None
    from checker.engine import ENGINE_RULES

    ids = frozenset(part.strip() for part in text.split(",") if part.strip())
    unknown = sorted(ids - set(known) - set(ENGINE_RULES))
    if unknown:
        raise UsageError(f"unknown rule id {', '.join(unknown)}; `ampcheck rules` lists them")
    return ids


def cmd_check(args) -> int:
    from checker.analysis import AnalysisOptions
    from checker.engine import RunOptions, selected
    from checker.files import discover
    from checker.findings import Severity
    from checker.report.context import ReportContext
    from checker.review import FileResult, review_file
    from checker.units import UnitError, parse_value

    library = _library(args.parts)
    rules = _rules(args.rules_dir)
    try:
        stray = parse_value(args.stray_capacitance, "capacitance")
    except UnitError as error:
        raise UsageError(f"--stray-capacitance: {error}") from None
    options = RunOptions(analysis=AnalysisOptions(stray_capacitance_f=stray),
                         select=_ids(args.select, rules),
                         ignore=_ids(args.ignore, rules) or frozenset())
    paths, missing = discover(args.paths)
    if not paths and not missing:
        raise UsageError("no stage files (*.stage, *.stage.json) found in "
                         + ", ".join(args.paths))
    active = selected(rules, options)
    results = [FileResult(f.path, problems=[f]) for f in missing]
    results += [review_file(path, library, active, options) for path in paths]
    fail_on = None if args.fail_on == "never" else Severity.parse(args.fail_on)
    context = ReportContext(__version__, fail_on, rules)
    if args.format == "json":
        from checker.report.json_document import render

        sys.stdout.write(render(results, context))
    else:
        from checker.report.summary import console
        from checker.report.text import write

        write(console(), results, context)
    failing = any(context.fails(f) for r in results for f in r.findings())
    return EXIT_FINDINGS if failing else EXIT_OK


def cmd_rules(args) -> int:
    from rich.table import Table

    from checker.engine import ENGINE_RULES
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
        table.add_row(rid, "error", summary + " (built into the engine)")
    console().print(table)
    return EXIT_OK


def cmd_explain(args) -> int:
    from checker.engine import ENGINE_RULES

    rules = _rules(args.rules_dir)
    if args.rule in ENGINE_RULES:
        print(f"{args.rule} (error, built into the engine)\n\n{ENGINE_RULES[args.rule]}")
        return EXIT_OK
    if args.rule not in rules:
        import difflib

        close = difflib.get_close_matches(args.rule, list(rules), n=1)
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


def cmd_parts(args) -> int:
    from checker.report.summary import print_parts

    print_parts(_library(args.parts))
    return EXIT_OK


COMMANDS = {"check": cmd_check, "schema": cmd_schema, "convert": cmd_convert,
            "parts": cmd_parts, "rules": cmd_rules, "explain": cmd_explain}
