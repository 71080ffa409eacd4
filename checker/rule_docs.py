"""docs/rules.md, generated from the rules' own docstrings (one source of truth)."""

from __future__ import annotations

from checker.engine import DOC_SECTIONS, ENGINE_RULES, ENGINE_SEVERITIES, Rule


def rules_markdown(rules: dict[str, Rule]) -> str:
    lines = ["# Rules", "",
             "Generated from the rules' docstrings by `ampcheck rules --markdown`;"
             " do not edit by hand.", "",
             "| id | default severity | summary |", "|---|---|---|"]
    for rule in rules.values():
        lines.append(f"| [`{rule.id}`](#{rule.id}) | {rule.severity.label} | {rule.summary} |")
    for rid, summary in ENGINE_RULES.items():
        lines.append(f"| `{rid}` | {ENGINE_SEVERITIES[rid].label} | {summary} (engine) |")
    for rule in rules.values():
        lines += ["", f"## {rule.id}", "", f"*{rule.summary}* Default severity:"
                  f" **{rule.severity.label}**.", ""]
        if rule.settings:
            lines.append("Settings (override in configuration): " + ", ".join(
                f"`{name}` = {value:g}" for name, value in rule.settings.items()) + ".")
        sections = rule.sections()
        for heading in DOC_SECTIONS:
            text = " ".join(sections.get(heading, "").split())
            lines += ["", f"### {heading}", "", text]
    return "\n".join(lines) + "\n"
