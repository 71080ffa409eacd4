"""The terminal report: findings by severity, then file and line; a line per stage.

Rich styles when the output is a terminal; plain text otherwise. NO_COLOR and
FORCE_COLOR are honoured by rich itself.
"""

from __future__ import annotations

from rich.console import Console
from rich.text import Text

from checker.findings import Finding, Severity
from checker.report.context import ReportContext
from checker.review import FileResult, count_by_severity
from checker.units import format_si

STYLE = {Severity.ERROR: "bold red", Severity.WARNING: "yellow", Severity.INFO: "cyan"}
HEADING = {Severity.ERROR: "Errors", Severity.WARNING: "Warnings", Severity.INFO: "Notes"}
MARK = {Severity.ERROR: "✗", Severity.WARNING: "!", Severity.INFO: "·"}


def _value(value: float | None, unit: str | None) -> str:
    if value is None:
        return "—"
    if unit == "°":
        return f"{value:.1f}°"
    if unit == "dB":
        return f"{value:.2f} dB"
    return format_si(value, unit or "")


def _finding(console: Console, finding: Finding) -> None:
    head = Text("  ")
    head.append(f"{finding.path}:{finding.line}:{finding.column}", style="bold")
    head.append("  ")
    head.append(finding.rule, style="dim" if finding.suppressed else STYLE[finding.severity])
    if finding.stage:
        head.append(f"  stage {finding.stage}")
    if finding.elements:
        head.append(f"  [{', '.join(finding.elements)}]", style="dim")
    if finding.waiver is not None:
        head.append(f"  waived: {finding.waiver}", style="dim")
    elif finding.baselined:
        head.append("  in baseline", style="dim")
    console.print(head)
    console.print(Text("      " + finding.message))
    if finding.measured is not None or finding.limit is not None:
        console.print(Text(f"      measured {_value(finding.measured, finding.unit)},"
                           f" limit {_value(finding.limit, finding.unit)}", style="dim"))
    if finding.suggestion is not None:
        line = Text("      fix: ", style="green")
        line.append(finding.suggestion.text)
        console.print(line)


def _stage_line(console: Console, result: FileResult) -> None:
    for item in result.stages:
        s = item.summary
        counts = count_by_severity(item.findings)
        worst = next((sev for sev in sorted(Severity, reverse=True)
                      if counts[sev.label]), None)
        line = Text("  ")
        line.append(MARK[worst] if worst else "✓", style=STYLE[worst] if worst else "green")
        line.append(f" {item.name}", style="bold")
        line.append(f"  {result.path}:{item.line}", style="dim")
        parts = [s.get("topology") or "?"]
        if s.get("gain") is not None:
            parts.append(f"gain {s['gain']:.4g}")
        if s.get("input_resistance") is not None:
            parts.append(f"Rin {format_si(s['input_resistance'], 'Ω')}")
        if s.get("bandwidth") is not None:
            parts.append(f"BW {format_si(s['bandwidth'], 'Hz')}")
        if s.get("phase_margin") is not None:
            parts.append(f"PM {s['phase_margin']:.0f}°")
        if s.get("output_low") is not None:
            parts.append(f"out {format_si(s['output_low'], 'V')} … {format_si(s['output_high'], 'V')}")
        line.append("  " + " · ".join(parts))
        console.print(line)


def write(console: Console, results: list[FileResult], context: ReportContext) -> None:
    every = [f for result in results for f in result.findings()]
    for severity in sorted(Severity, reverse=True):
        group = [f for f in every if f.severity == severity]
        if not group:
            continue
        console.print(Text(f"{HEADING[severity]} ({len(group)})", style=STYLE[severity]))
        for finding in sorted(group, key=Finding.sort_key):
            _finding(console, finding)
        console.print()
    if any(result.stages for result in results):
        console.print(Text("Stages", style="bold"))
        for result in results:
            _stage_line(console, result)
        console.print()
    counts = count_by_severity([f for f in every if not f.suppressed])
    suppressed = sum(1 for f in every if f.suppressed)
    stages = sum(len(r.stages) for r in results)
    unreadable = sum(1 for r in results if r.problems)
    closing = Text(f"{len(results)} files, {stages} stages: ")
    closing.append(f"{counts['error']} errors", style=STYLE[Severity.ERROR] if counts["error"] else "")
    closing.append(", ")
    closing.append(f"{counts['warning']} warnings",
                   style=STYLE[Severity.WARNING] if counts["warning"] else "")
    closing.append(f", {counts['info']} notes")
    if suppressed:
        closing.append(f" ({suppressed} more waived or in the baseline)")
    if unreadable:
        closing.append(f"; {unreadable} files could not be read")
    if context.fail_on is not None:
        failing = sum(1 for f in every if context.fails(f))
        closing.append(f" — {failing} at or above {context.fail_on.label}" if failing
                       else f" — nothing at or above {context.fail_on.label}")
    console.print(closing)
