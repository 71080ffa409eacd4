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


def cmd_check(args) -> int:
    from checker.files import discover, load_file
    from checker.report.summary import print_load_summary

    library = _library(args.parts)
    paths, missing = discover(args.paths)
    if not paths and not missing:
        raise UsageError("no stage files (*.stage, *.stage.json) found in "
                         + ", ".join(args.paths))
    loaded = [load_file(path, library) for path in paths]
    print_load_summary(loaded, missing)
    bad = missing or any(not item.ok for item in loaded)
    return EXIT_FINDINGS if bad else EXIT_OK


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
            "parts": cmd_parts}
