"""Machine-readable listings for `ampcheck parts --format json` and `ampcheck rules
--format json`: plain SI floats with the unit named beside each value."""

from __future__ import annotations

import json

from checker.report.summary import part_fields

LISTING_VERSION = 1


def part_record(part) -> dict:
    """One part: name, class, note, source, and every parameter as {value, unit}."""
    source = {"kind": "builtin", "invented": True} if part.builtin else {
        "kind": "file", "path": part.origin.path if part.origin else None}
    return {"name": part.name, "class": part.family, "note": part.note, "source": source,
            "parameters": {name: {"value": value, "unit": unit}
                           for name, value, unit in part_fields(part)}}


def parts_json(library: dict) -> str:
    return json.dumps({"version": LISTING_VERSION,
                       "parts": [part_record(library[n]) for n in sorted(library)]},
                      ensure_ascii=False, indent=2) + "\n"


def rules_json(rows: list[dict]) -> str:
    """rows: {id, severity, summary, kind, settings} dicts built by the caller."""
    return json.dumps({"version": LISTING_VERSION, "rules": rows},
                      ensure_ascii=False, indent=2) + "\n"
