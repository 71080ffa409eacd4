"""Read one file of the stage format, whichever syntax, into a validated plain tree."""

from __future__ import annotations

import os
import re
import stat
from checker.record import record

from checker.io.json_reader import read_json
from checker.io.positions import InputErrors, InputProblem, LineIndex, Path, Position
from checker.io.schema import validate
from checker.io.sexp_reader import read_sexp

STAGE_ENDINGS = (".stage", ".stage.json")
PART_ENDINGS = (".parts", ".parts.json")
MAX_FILE_BYTES = 4 * 1024 * 1024


@record(frozen=True)
class ParsedFile:
    """A file's validated plain tree and the position of each of its nodes."""

    path: str
    syntax: str  # "sexp" | "json"
    tree: dict
    positions: dict[Path, Position]


def syntax_of(path: str) -> str:
    """'json' for files ending in .json, else 'sexp'."""
    return "json" if path.endswith(".json") else "sexp"


def read_text(path: str) -> str:
    """The file's text as UTF-8; InputErrors for unreadable, oversized or non-UTF-8 files
    and for anything that is not a regular file (a FIFO would block, a device such as
    /dev/zero never ends): only regular files are read."""
    def refuse(message: str) -> InputErrors:
        return InputErrors([InputProblem(path, 1, 1, message)])

    try:
        kind = _not_regular(os.stat(path).st_mode)
        if kind:
            raise refuse(f"not a regular file ({kind}); only regular files are read")
        # Non-blocking, so a file swapped for a FIFO after the check cannot hang the run.
        handle = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))
        try:
            details = os.fstat(handle)
            kind = _not_regular(details.st_mode)
            if kind:
                raise refuse(f"not a regular file ({kind}); only regular files are read")
            if details.st_size > MAX_FILE_BYTES:
                raise refuse(f"file is {details.st_size / 1e6:.1f} MB; the limit is"
                             f" {MAX_FILE_BYTES / 1e6:.0f} MB")
            with os.fdopen(handle, "rb", closefd=False) as stream:
                data = stream.read(MAX_FILE_BYTES + 1)
        finally:
            os.close(handle)
        if len(data) > MAX_FILE_BYTES:
            raise refuse(f"file is larger than the limit of {MAX_FILE_BYTES / 1e6:.0f} MB")
    except OSError as error:
        raise refuse(f"cannot read: {error.strerror or error}") from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as error:
        pos = LineIndex(data[: error.start].decode("utf-8", "replace")).position(
            len(data[: error.start].decode("utf-8", "replace")))
        raise InputErrors([InputProblem(path, pos.line, pos.column,
                                        f"not UTF-8 text: byte 0x{data[error.start]:02x}"
                                        " cannot be decoded; save the file as UTF-8")]) from None
    return text.removeprefix("\ufeff")


def _not_regular(mode: int) -> str | None:
    """What a non-regular file is, for the message; None for a regular file."""
    if stat.S_ISREG(mode):
        return None
    for test, name in ((stat.S_ISDIR, "a folder"), (stat.S_ISFIFO, "a FIFO"),
                       (stat.S_ISCHR, "a character device"), (stat.S_ISBLK, "a block device"),
                       (stat.S_ISSOCK, "a socket")):
        if test(mode):
            return name
    return "not a plain file"


_LONE_CR = re.compile(r"\r(?!\n)")


def parse_text(text: str, path: str, syntax: str | None = None) -> ParsedFile:
    """Parse and validate ``text``; raise InputErrors with every problem found."""
    syntax = syntax or syntax_of(path)
    lone = _LONE_CR.search(text)
    if lone:  # every position would read as line 1, and a comment would run to the end
        line = text.count("\n", 0, lone.start()) + 1
        raise InputErrors([InputProblem(path, line, lone.start() - text.rfind("\n", 0, lone.start()),
                                        "a line ends in a carriage return alone (an old"
                                        " convention): save the file with LF or CRLF line"
                                        " endings")])
    if syntax == "json":
        tree, positions = read_json(text, path)
    else:
        tree, positions = read_sexp(text, path)
    problems = validate(tree, positions, path)
    if problems:
        raise InputErrors(problems)
    return ParsedFile(path, syntax, tree, positions)


def read_file(path: str) -> ParsedFile:
    """Read, parse and validate one file."""
    return parse_text(read_text(path), path)
