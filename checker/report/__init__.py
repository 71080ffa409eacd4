"""Reporters: one module per output format; they know findings and figures only.

Each module offers ``render(results, context) -> str`` (or writes to a console);
FORMATS maps a format name to its module name, imported on first use.
"""

FORMATS = {"text": "checker.report.text", "json": "checker.report.json_document"}
