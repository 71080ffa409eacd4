"""The built-in part library is read from a generated table, not re-parsed on every
start; the table must equal a full parse of generic.parts, and a generic.parts edited
without making the table anew is parsed the full way (never stale values)."""

from __future__ import annotations

from pathlib import Path

import checker.parts.library as library
from checker.parts import builtin_table


def test_the_generated_table_is_a_full_parse_of_generic_parts():
    assert builtin_table.SOURCE_DIGEST == library._digest(library._builtin_text()), (
        "generic.parts changed: run `python -m checker.parts.library`")
    assert builtin_table.PARTS == library.parse_builtin_parts()
    assert (library.builtin_table_source()
            == Path(builtin_table.__file__).read_text(encoding="utf-8"))


def test_an_edited_generic_parts_is_parsed_not_read_from_the_stale_table(monkeypatch):
    edited = library._builtin_text().replace("(gbw 1MHz)", "(gbw 3MHz)", 1)
    assert edited != library._builtin_text()
    monkeypatch.setattr(library, "_builtin_text", lambda: edited)
    library.builtin_parts.cache_clear()
    try:
        parts = library.builtin_parts()
        changed = [name for name, part in parts.items()
                   if part != builtin_table.PARTS[name]]
        assert len(changed) == 1 and parts[changed[0]].gbw_hz == 3e6
    finally:
        library.builtin_parts.cache_clear()
