"""Closing summary for an archive audit (more than one file): severity and stage counts
by rule, a roll-up by folder."""

from __future__ import annotations

import os

from rich.console import Console
from rich.text import Text

from checker.findings import Finding, Severity
from checker.records import FileResult
from checker.report.wrap import print_wrapped


def severity_by_rule(findings: list[Finding]) -> list[tuple[str, int, int, int]]:
    """(rule, errors, warnings, notes) for the unsuppressed findings, most first."""
    counts: dict[str, list[int]] = {}
    for f in findings:
        if f.suppressed:
            continue
        row = counts.setdefault(f.rule, [0, 0, 0])
        row[{Severity.ERROR: 0, Severity.WARNING: 1}.get(f.severity, 2)] += 1
    return sorted(((rule, row[0], row[1], row[2]) for rule, row in counts.items()),
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


def folder_rollup(results: list[FileResult]) -> list[tuple[str, int, int, int, int]]:
    """(folder relative to the inputs' common root, files, stages, errors, warnings),
    folders in path order; the root itself shows as '.'."""
    if not results:
        return []
    folders = [os.path.dirname(os.path.abspath(r.path)) for r in results]
    root = os.path.commonpath(folders)
    rows: dict[str, list[int]] = {}
    for result, folder in zip(results, folders):
        row = rows.setdefault(os.path.relpath(folder, root).replace(os.sep, "/"), [0, 0, 0, 0])
        active = [f for f in result.findings() if not f.suppressed]
        row[0] += 1
        row[1] += len(result.stages)
        row[2] += sum(f.severity == Severity.ERROR for f in active)
        row[3] += sum(f.severity == Severity.WARNING for f in active)
    return [(name, row[0], row[1], row[2], row[3]) for name, row in sorted(rows.items())]


def rollup_table(rows: list[tuple[str, int, int, int, int]], width: int = 80) -> list[str]:
    """Plain lines; a folder name too long for the width is cut from the left with '…'."""
    if not rows:
        return []
    numbers = "  {:>5}  {:>6}  {:>6}  {:>8}"
    room = max(12, width - 2 - len(numbers.format("", "", "", "")))
    names = [name if len(name) <= room else "…" + name[-(room - 1):] for name, *_ in rows]
    col = max(6, *(len(n) for n in names))
    lines = [f"{'folder':<{col}}" + numbers.format("files", "stages", "errors", "warnings")]
    lines += [f"{name:<{col}}" + numbers.format(*row[1:]) for name, row in zip(names, rows)]
    return lines


def write_folder_rollup(console: Console, results: list[FileResult]) -> None:
    rows = folder_rollup(results)
    if len(rows) > 1:
        console.print(Text("By folder", style="bold"))
        for line in rollup_table(rows, min(console.width, 80)):
            console.print(Text("  " + line))
