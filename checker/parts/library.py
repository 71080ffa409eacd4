"""Load op-amp parts: the built-in generic classes, then user part files on top."""

from __future__ import annotations

from collections.abc import Sequence
from functools import lru_cache
from importlib import resources

from checker.build import build_parts
from checker.io.load import PART_ENDINGS, parse_text, read_file
from checker.io.positions import InputErrors, InputProblem
from checker.model import OpAmpPart

BUILTIN_FILE = "generic.parts"


@lru_cache(maxsize=1)
def builtin_parts() -> dict[str, OpAmpPart]:
    """The built-in generic classes by name (invented names, typical values)."""
    text = resources.files("checker.parts").joinpath(BUILTIN_FILE).read_text("utf-8")
    parsed = parse_text(text, f"<built-in>/{BUILTIN_FILE}", "sexp")
    return {part.name: part for part in build_parts(parsed, builtin=True)}


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
