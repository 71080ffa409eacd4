"""A rule's help as plain text and as Markdown, built from its own documentation: a
rule's docstring sections and example stages (``Rule.sections()``, ``Rule.examples()``),
an engine finding's catalogue entry (checker/catalogue.py) or a caution's doc
(checker/cautions.py). SARIF's ``help`` carries both forms.

A leaf module: it reads the record it is given, never the engine, so a report writer can
use it without loading the solver.
"""

from __future__ import annotations

EXAMPLE_TITLES = {"Passes": "A stage it passes", "Fails": "A stage it fails"}


def _flat(text: str) -> str:
    return " ".join(text.split())


def doc_sections(doc: str) -> dict[str, str]:
    """The sections of a doc written as 'Heading:' lines over indented text (a
    caution's doc), each section's text on one line."""
    sections: dict[str, list[str]] = {}
    current = None
    for line in doc.splitlines():
        if line and not line.startswith(" ") and line.endswith(":"):
            current = line[:-1]
            sections[current] = []
        elif line.strip() and current is not None:
            sections[current].append(line.strip())
    return {heading: " ".join(lines) for heading, lines in sections.items()}


def _sections(item) -> list[tuple[str, str]]:
    found = item.sections() if hasattr(item, "sections") else doc_sections(item.doc)
    return [(heading, _flat(text)) for heading, text in found.items() if text.strip()]


def _setting(value) -> str:
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return f"{value:g}"
    return str(value)  # a user rule's list or text setting


def _settings(item, code: str) -> str | None:
    settings = getattr(item, "settings", None) or {}
    if not settings:
        return None
    return "Settings (override in configuration): " + ", ".join(
        f"{code}{name}{code} = {_setting(value)}" for name, value in settings.items()) + "."


def _examples(item) -> list[tuple[str, str]]:
    examples = item.examples() if hasattr(item, "examples") else {}
    return [(EXAMPLE_TITLES.get(heading, heading), text) for heading, text in examples.items()]


def help_text(item) -> str:
    """Plain text: each section as 'Heading: text', the settings, the example stages
    indented below their titles."""
    parts = [f"{heading}: {text}" for heading, text in _sections(item)]
    settings = _settings(item, "")
    if settings:
        parts.append(settings)
    for title, text in _examples(item):
        parts.append(f"{title}:\n" + "\n".join("    " + line for line in text.splitlines()))
    return "\n\n".join(parts)


def help_markdown(item) -> str:
    """Markdown: each section under a '###' heading, the settings, the example stages in
    fenced blocks."""
    parts = [f"### {heading}\n\n{text}" for heading, text in _sections(item)]
    settings = _settings(item, "`")
    if settings:
        parts.append(settings)
    for title, text in _examples(item):
        parts.append(f"### {title}\n\n```\n{text}\n```")
    return "\n\n".join(parts)
