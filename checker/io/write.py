"""Write output files atomically, and never over an input."""

from __future__ import annotations

import os
import tempfile


def write_new_file(path: str, text: str, protect: list[str] = ()) -> None:
    """Write ``text`` to ``path`` via a temporary file and a rename.

    Refuses (ValueError) when ``path`` is one of the ``protect`` files: the tool never
    writes over its input.
    """
    target = os.path.realpath(path)
    for other in protect:
        if os.path.exists(other) and os.path.realpath(other) == target:
            raise ValueError(f"refusing to write over the input file {other}")
    folder = os.path.dirname(target) or "."
    handle, temporary = tempfile.mkstemp(dir=folder, prefix=".ampcheck-", suffix=".tmp")
    try:
        with os.fdopen(handle, "w", encoding="utf-8") as out:
            out.write(text)
        os.replace(temporary, target)
    except BaseException:
        if os.path.exists(temporary):
            os.unlink(temporary)
        raise
