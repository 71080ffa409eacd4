"""Reporters: one module per output format; they know findings and figures only.

Each format module offers ``render(results, context) -> str``; the text format renders
through rich. FORMATS maps a format name to its module, imported on first use.
"""

from __future__ import annotations

import importlib

FORMATS = {
    "text": "checker.report.text",
    "json": "checker.report.json_document",
    "sarif": "checker.report.sarif",
    "compact": "checker.report.compact",
    "csv": "checker.report.csv_table",
}


def renderer(name: str):
    """The render function of format ``name``."""
    return importlib.import_module(FORMATS[name]).render
