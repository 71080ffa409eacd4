"""Closing summary for an archive audit (more than one file): severity and stage counts
by rule, a roll-up by folder."""

from __future__ import annotations

from rich.console import Console
from rich.text import Text

from checker.findings import Finding, Severity
from checker.report.wrap import print_wrapped


def severity_by_rule(findings: list[Finding]) -> list[tuple[str, int, int, int]]:
    """(rule, errors, warnings, notes) for the unsuppressed findings, most first."""
    counts: dict[str, list[int]] = {}
    for f in findings:
        if f.suppressed:
            continue
        row = counts.setdefault(f.rule, [0, 0, 0])
        row[{Severity.ERROR: 0, Severity.WARNING: 1}.get(f.severity, 2)] += 1
    return sorted(((rule, *row) for rule, row in counts.items()),
                  key=lambda r: (-(r[1] + r[2] + r[3]), r[0]))


def severity_table(rows: list[tuple[str, int, int, int]]) -> list[str]:
    """Plain lines: rule id, then errors / warnings / notes in right-aligned columns."""
    if not rows:
        return []
    width = max(4, *(len(r[0]) for r in rows))
    lines = [f"{'rule':<{width}}  {'errors':>6}  {'warnings':>8}  {'notes':>5}"]
    lines += [f"{rule:<{width}}  {e:>6}  {w:>8}  {n:>5}" for rule, e, w, n in rows]
    return lines


def write_severity_by_rule(console: Console, findings: list[Finding]) -> None:
    lines = severity_table(severity_by_rule(findings))
    if lines:
        console.print(Text("Severity by rule", style="bold"))
        for line in lines:
            console.print(Text("  " + line))


def stages_by_rule(findings: list[Finding]) -> list[tuple[str, int]]:
    """(rule, distinct stages it fired on) for unsuppressed findings; a stage is a
    (file, stage name) pair, and a finding outside any stage counts its file."""
    seen: dict[str, set[tuple[str, str | None]]] = {}
    for f in findings:
        if not f.suppressed:
            seen.setdefault(f.rule, set()).add((f.path, f.stage))
    return sorted(((rule, len(s)) for rule, s in seen.items()), key=lambda r: (-r[1], r[0]))


def write_stages_by_rule(console: Console, findings: list[Finding]) -> None:
    rows = stages_by_rule(findings)
    if rows:
        line = Text("Stages by rule: ", style="bold")
        line.append(", ".join(f"{rule} {n}" for rule, n in rows))
        print_wrapped(console, line, hang=2)
