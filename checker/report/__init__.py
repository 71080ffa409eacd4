"""Reporters: one module per output format; they know findings and figures only.

Each format module has a ``Writer(out, context)`` that takes results one file at a time
(``add``) and finishes its output on ``close``, so a long audit streams: the machine
formats keep nothing but counters, the text report keeps only its findings. FORMATS
maps a format name to its module, imported on first use.
"""

from __future__ import annotations

import importlib
from typing import Protocol

FORMATS = {
    "text": "checker.report.text",
    "json": "checker.report.json_document",
    "sarif": "checker.report.sarif",
    "compact": "checker.report.compact",
    "csv": "checker.report.csv_table",
    "html": "checker.report.html_page",
    "figures-csv": "checker.report.figures_csv",
}
# Formats whose --output path may name a folder (checker/report/html_page.py): any path
# that does not end in one of these is a folder.
FOLDER_FORMATS = {"html": (".html", ".htm")}


def writes_folder(name: str, path: str | None) -> bool:
    """True when format ``name`` written to ``path`` is a folder rather than a file."""
    return name in FOLDER_FORMATS and path is not None and \
        not path.lower().endswith(FOLDER_FORMATS[name])


class Receiver(Protocol):
    """What a run hands results to: a format's Writer, or a wrapper around one (such as
    checker.shown.ShownWriter)."""

    def add(self, result) -> None: ...

    def close(self) -> None: ...


class Writer:
    """Base of the format writers: results arrive in path order, then close()."""

    def __init__(self, out, context):
        self.out = out
        self.context = context

    def add(self, result) -> None:
        raise NotImplementedError

    def close(self) -> None:
        """Finish the output (the base writes nothing more)."""


def writer(name: str, out, context, **options) -> Writer:
    """A writer of format ``name`` to the text stream ``out`` (``folder=`` for a format
    that writes a folder)."""
    return importlib.import_module(FORMATS[name]).Writer(out, context, **options)
