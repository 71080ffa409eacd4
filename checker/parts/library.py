"""Load op-amp parts: the built-in generic classes, then user part files on top."""

from __future__ import annotations

import os
import re
import zlib
from collections.abc import Sequence
from functools import lru_cache

from checker.build import build_parts
from checker.io.load import PART_ENDINGS, parse_text, read_file
from checker.io.positions import InputErrors, InputProblem
from checker.model import OpAmpPart

BUILTIN_FILE = "generic.parts"


TABLE_MODULE = "checker/parts/builtin_table.py"


def _builtin_text() -> str:
    # a plain read beside this module (installed as package data): importlib.resources
    # would add ~10 ms to every cold start
    with open(os.path.join(os.path.dirname(__file__), BUILTIN_FILE), encoding="utf-8") as f:
        return f.read()


def _digest(text: str) -> str:
    """A change detector for generic.parts (CRC-32 and length; not a security hash, and
    zlib loads in microseconds where hashlib's OpenSSL costs ~6 ms per start)."""
    data = text.encode("utf-8")
    return f"crc32-{zlib.crc32(data):08x}-{len(data)}"


def parse_builtin_parts(text: str | None = None) -> dict[str, OpAmpPart]:
    """The built-in classes read from generic.parts the full way (reader, schema,
    builder)."""
    text = _builtin_text() if text is None else text
    parsed = parse_text(text, f"<built-in>/{BUILTIN_FILE}", "sexp")
    return {part.name: part for part in build_parts(parsed, builtin=True)}


@lru_cache(maxsize=1)
def builtin_parts() -> dict[str, OpAmpPart]:
    """The built-in generic classes by name (invented names, typical values).

    Read from the generated table (checker/parts/builtin_table.py, compiled once by
    Python) when its digest matches generic.parts, so a start does not re-parse the
    library; parsed the full way when the file changed and the table was not made anew.
    """
    text = _builtin_text()
    try:
        from checker.parts import builtin_table
    except ImportError:
        return parse_builtin_parts(text)
    if builtin_table.SOURCE_DIGEST != _digest(text):
        return parse_builtin_parts(text)
    return dict(builtin_table.PARTS)


def builtin_table_source() -> str:
    """The text of checker/parts/builtin_table.py for the current generic.parts."""
    text = _builtin_text()
    parts = parse_builtin_parts(text)
    names = sorted(set(re.findall(r"\b([A-Z][A-Za-z]+)\(", repr(parts))))
    lines = ['"""The built-in part classes of generic.parts, already read: generated, do not edit.',
             "",
             "Made anew by `python -m checker.parts.library`; checker/parts/library.py uses it",
             "only while SOURCE_DIGEST matches generic.parts (tests/test_part_table.py).",
             '"""', "", f"from checker.model import {', '.join(names)}", "",
             f'SOURCE_DIGEST = "{_digest(text)}"', "", "PARTS = {"]
    for name, part in parts.items():
        lines.append(f"    {name!r}: {part!r},")
    lines.append("}")
    return "\n".join(lines) + "\n"


def load_library(paths: Sequence[str] = ()) -> dict[str, OpAmpPart]:
    """Built-in parts, overridden in order by the parts of each file in ``paths``.

    Raises InputErrors for a part file that cannot be read. A file whose name does not
    end in .parts or .parts.json is refused unread: it is not a part library, and its
    contents must not turn up in error messages (a configured path may name any file).
    """
    library = dict(builtin_parts())
    for path in paths:
        if not path.endswith(PART_ENDINGS):
            raise InputErrors([InputProblem(path, 1, 1, "not a part library: a part file's"
                                            " name ends in .parts or .parts.json")])
        for part in build_parts(read_file(path)):
            library[part.name] = part
    return library


if __name__ == "__main__":  # regenerate the table beside this module
    from checker.io.write import write_new_file

    write_new_file(os.path.join(os.path.dirname(__file__), "builtin_table.py"),
                   builtin_table_source())
