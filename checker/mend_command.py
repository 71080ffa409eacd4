"""`ampcheck mend FILE`: a stage file's verified fixes written into a new file, shown as
a unified diff, or (with --in-place only) written over the file itself."""

from __future__ import annotations

import os
import sys

from checker.io.load import STAGE_ENDINGS

EXIT_OK, EXIT_FINDINGS, EXIT_USAGE = 0, 1, 2


class MendError(Exception):
    """A usage problem, for cli.py to print (exit 2)."""


def register(commands) -> None:
    """The subcommand's arguments, on cli.py's subparsers."""
    mend = commands.add_parser("mend", help="write a stage file's verified fixes into a"
                               " new file, or show them as a diff")
    mend.add_argument("file", metavar="FILE", help="a stage file (.stage or .stage.json)")
    where = mend.add_mutually_exclusive_group()
    where.add_argument("--to", metavar="PATH", help="the new file (default: NAME.mended"
                       ".stage beside the input)")
    where.add_argument("--diff", action="store_true",
                       help="print a unified diff instead of writing a file")
    where.add_argument("--in-place", action="store_true",
                       help="write the fixes over FILE itself")
    mend.add_argument("--parts", action="append", default=[], metavar="FILE",
                      help="a part library file (repeatable)")
    mend.add_argument("--config", metavar="FILE", help="use this configuration file")
    mend.add_argument("--no-config", action="store_true", help="ignore configuration files")


_SYNTAX_NAMES = {"json": "JSON", "sexp": "an s-expression"}


def _starts_with_mark(path: str) -> bool:
    """The file begins with a UTF-8 byte order mark (the reader drops it)."""
    try:
        with open(path, "rb") as handle:
            return handle.read(3) == b"\xef\xbb\xbf"
    except OSError:
        return False


def mended_path(path: str) -> str:
    """conductivity.stage -> conductivity.mended.stage (x.stage.json ->
    x.mended.stage.json)."""
    for ending in sorted(STAGE_ENDINGS, key=len, reverse=True):
        if path.endswith(ending):
            return path[: -len(ending)] + ".mended" + ending
    return path + ".mended"


def run(args) -> int:
    from checker import audit
    from checker.config import ConfigError
    from checker.engine import RuleError
    from checker.io.load import parse_text, read_text, syntax_of
    from checker.io.positions import InputErrors
    from checker.io.write import write_new_file
    from checker.mend import mend_text

    path = args.file
    if not os.path.exists(path):
        raise MendError(f"no such file {path}")
    if os.path.isdir(path):
        raise MendError(f"{path} is a folder: mend edits one stage file at a time")
    if args.to is not None and not args.to.strip():
        raise MendError("--to names the copy to write, e.g. filter.mended.stage")
    if args.to and not os.path.isdir(os.path.dirname(os.path.abspath(args.to))):
        raise MendError(f"--to {args.to}: no folder {os.path.dirname(args.to) or '.'}")
    if not path.endswith(STAGE_ENDINGS):
        raise MendError(f"{path} is not a stage file (*.stage, *.stage.json): mend edits"
                        " stage files only; for a netlist, `ampcheck extract` writes its"
                        " stages as stage files, or change the schematic")
    if args.to and syntax_of(args.to) != syntax_of(path):  # the ending decides the reading
        raise MendError(f"{args.to} would be read as {_SYNTAX_NAMES[syntax_of(args.to)]}, but"
                        f" the mended stage is {_SYNTAX_NAMES[syntax_of(path)]} like {path};"
                        " give it the same ending (`ampcheck convert` changes the syntax)")
    if args.config and args.no_config:
        raise MendError("--config FILE and --no-config contradict each other: give one")
    if args.config and not os.path.isfile(args.config):
        raise MendError(f"--config: no such file {args.config}")
    request = audit.Request(config_file=args.config, parts=tuple(args.parts),
                            use_config=not args.no_config, figures_wanted=False)
    try:
        text = read_text(path)
        parsed = parse_text(text, path)
    except InputErrors as errors:
        for problem in errors.problems:
            print(problem, file=sys.stderr)
        print(f"ampcheck mend: {path} is not mended: it does not read", file=sys.stderr)
        return EXIT_FINDINGS
    try:
        audit.config_for(path, request)  # a broken configuration is the run's error
        result = audit.reviewed(path, request)
    except (ConfigError, RuleError) as error:
        raise MendError(str(error)) from None
    if result.problems:
        for finding in result.problems:
            print(f"{finding.path}:{finding.line}:{finding.column}: {finding.message}",
                  file=sys.stderr)
        print(f"ampcheck mend: {path} is not mended: it does not build", file=sys.stderr)
        return EXIT_FINDINGS
    mended = mend_text(text, parsed, {s.name: s.findings for s in result.stages})
    for outcome in mended.outcomes:
        where = f"{path}:{outcome.line}: {outcome.rule} [{', '.join(outcome.elements)}]"
        if outcome.applied:
            print(f"applied  {where}: {outcome.text}", file=sys.stderr)
        else:
            print(f"left out {where}: {outcome.why}", file=sys.stderr)
    if not mended.applied:
        print(f"ampcheck mend: no verified fix to apply in {path}; nothing written",
              file=sys.stderr)
        return EXIT_OK
    if args.diff:
        import difflib  # only the --diff output needs it

        sys.stdout.writelines(difflib.unified_diff(
            text.splitlines(keepends=True), mended.text.splitlines(keepends=True),
            fromfile=path, tofile=mended_path(path)))
        return EXIT_OK
    target = path if args.in_place else (args.to or mended_path(path))
    try:
        # never over a file the check read: the stage (unless mended in place), its
        # configuration, part libraries and rule files
        read = audit.files_read([path], request)
        mark = "\ufeff" if _starts_with_mark(path) else ""  # as the file was written
        write_new_file(target, mark + mended.text,
                       protect=read if args.in_place else [path, *read])
    except (OSError, ValueError) as error:
        raise MendError(str(error)) from None
    print(f"ampcheck mend: {len(mended.applied)} fix{'es' if len(mended.applied) != 1 else ''}"
          f" written to {target}", file=sys.stderr)
    return EXIT_OK
