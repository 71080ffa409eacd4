"""Closing summary for an archive audit (more than one file): severity counts by rule."""

from __future__ import annotations

from rich.console import Console
from rich.text import Text

from checker.findings import Finding, Severity


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
