"""docs/rules.md, generated from the rules' own docstrings (one source of truth)."""

from __future__ import annotations

from checker.cautions import KINDS as CAUTION_KINDS
from checker.catalogue import ENGINE_CATALOGUE
from checker.engine import DOC_SECTIONS, EXAMPLE_SECTIONS, Rule
from checker.rule_help import EXAMPLE_TITLES


def rules_markdown(rules: dict[str, Rule]) -> str:
    lines = ["# Rules", "",
             "Generated from the rules' docstrings by `ampcheck rules --markdown`;"
             " do not edit by hand.", "",
             "| id | default severity | summary |", "|---|---|---|"]
    for rule in rules.values():
        lines.append(f"| [`{rule.id}`](#{rule.id}) | {rule.severity.label} | {rule.summary} |")
    for item in ENGINE_CATALOGUE.values():
        lines.append(f"| [`{item.id}`](#{item.id}) | {item.severity.label} | {item.summary}"
                     " (engine) |")
    for kind in CAUTION_KINDS.values():
        lines.append(f"| [`{kind.id}`](#{kind.id}) | caution | {kind.summary} (safety"
                     " caution) |")
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
        examples = rule.examples()
        for heading in EXAMPLE_SECTIONS:
            if heading in examples:
                lines += ["", f"### {EXAMPLE_TITLES[heading]}", "", "```", examples[heading],
                          "```"]
    lines += ["", "## Engine findings", "",
              "The engine emits these itself (a file it cannot read, a waiver or baseline"
              " entry that matched nothing, a requirement no rule explains); each is"
              " emitted with the severity shown."]
    for item in ENGINE_CATALOGUE.values():
        lines += ["", f"## {item.id}", "", f"*{item.summary}* Emitted as"
                  f" **{item.severity.label}** by the engine."]
        for heading, text in item.sections().items():
            lines += ["", f"### {heading}", "", text]
    lines += ["", "## Safety cautions", "",
              "Cautions are not rules: no selection, ignore list, configuration or severity"
              " change removes them, and a baseline does not hold them. A waiver with a"
              " reason acknowledges one; it is still reported (docs/configuration.md).",
              "Each report shows them apart from the findings."]
    for kind in CAUTION_KINDS.values():
        lines += ["", f"## {kind.id}", "", f"*{kind.summary}* A safety caution."]
        current = None
        for line in kind.doc.splitlines():
            if line and not line.startswith(" ") and line.endswith(":"):
                current = line[:-1]
                lines += ["", f"### {current}", ""]
            elif line.strip():
                lines.append(line.strip())
    return "\n".join(lines) + "\n"
