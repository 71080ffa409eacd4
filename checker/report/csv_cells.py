"""Cells a spreadsheet would run as formulas, made plain text.

A spreadsheet reads a cell that begins with =, +, -, @, a tab or a carriage return as a
formula, so a file or stage named ``=HYPERLINK(...)`` would run in the reader's sheet
(CSV injection, as the OWASP guidance on it describes). Such text cells get a leading
apostrophe, which spreadsheets show as text; a cell that is a number (``-0.5``,
``1e-06``) is left as it is.
"""

from __future__ import annotations

FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def safe_cell(value):
    """``value`` with a leading apostrophe when it is text a spreadsheet would run."""
    if isinstance(value, str) and value.startswith(FORMULA_STARTS) and not _is_number(value):
        return "'" + value
    return value


def safe_row(row) -> list:
    return [safe_cell(value) for value in row]
