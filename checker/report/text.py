"""The terminal report: safety cautions first, under their own heading; then findings
by severity, then file and line; a line per stage.

Rich styles when the output is a terminal; plain text otherwise. NO_COLOR and
FORCE_COLOR are honoured by rich itself.
"""

from __future__ import annotations

from rich.console import Console
from rich.text import Text

from checker.findings import Finding, Severity
from checker.records import DEFERRAL, MET, NOT_MET, Caution, Verdict
from checker.report.context import ReportContext
from checker.report import Writer as BaseWriter
from checker.records import FileResult, StageResult, count_by_severity
from checker.report.wrap import print_wrapped
from checker.report.archive_summary import (write_folder_rollup, write_severity_by_rule,
                                            write_stages_by_rule)
from checker.report.values import measure, measured_line, stage_gain
from checker.units import format_si

STYLE = {Severity.ERROR: "bold red", Severity.WARNING: "yellow", Severity.INFO: "cyan"}
HEADING = {Severity.ERROR: "Errors", Severity.WARNING: "Warnings", Severity.INFO: "Notes"}
MARK = {Severity.ERROR: "✗", Severity.WARNING: "!", Severity.INFO: "·"}
CAUTION_STYLE, CAUTION_MARK = "bold magenta", "⚠"
STAGE_LEGEND = ("  (✓ clean · ✗ an error or an unmet requirement · ! warnings · · notes only"
                f" · {CAUTION_MARK} a safety caution; requirements: ✓ met · ✗ not met ·"
                " ? could not check)")
STAGE_LINES_LIMIT = 60  # above this, the per-stage lines give way to the audit summary
WORST = 5


def _audit_summary(console: Console, results: list[FileResult], every: list[Finding],
                   limit: int = WORST) -> None:
    """Counts by rule, the worst files and stages, and the files that could not be read."""
    active = [f for f in every if not f.suppressed]
    if active:  # counts by rule: the severity-by-rule table above (archive_summary.py)
        def weight(findings) -> tuple:
            return (sum(f.severity == Severity.ERROR for f in findings),
                    sum(f.severity == Severity.WARNING for f in findings))

        files = sorted(((weight([f for f in r.findings() if not f.suppressed]), r.path)
                        for r in results), key=lambda item: (-item[0][0], -item[0][1], item[1]))
        worst = [f"{path} ({_count(e, 'error')}, {_count(w, 'warning')})"
                 for (e, w), path in files[:limit]
                 if e or w]
        if worst:
            console.print(Text("Worst files: ", style="bold").append("; ".join(worst)))
        stages = sorted(((weight([f for f in s.findings if not f.suppressed]), r.path, s.name)
                         for r in results for s in r.stages),
                        key=lambda item: (-item[0][0], -item[0][1], item[1], item[2]))
        worst = [f"{name} in {path} ({e}/{w})" for (e, w), path, name in stages[:limit]
                 if e or w]
        if worst:
            console.print(Text("Worst stages (errors/warnings): ", style="bold")
                          .append("; ".join(worst)))
    unreadable = [r.path for r in results if r.unreadable]
    if unreadable:
        shown = ", ".join(unreadable[:20]) + (f" and {len(unreadable) - 20} more"
                                               if len(unreadable) > 20 else "")
        console.print(Text(f"Could not read {_count(len(unreadable), 'file')}: ", style="bold")
                      .append(shown))
    console.print()



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
    print_wrapped(console, head, hang=6)
    print_wrapped(console, Text("      " + finding.message))
    measured = measured_line(finding.measured, finding.limit, finding.unit)
    if measured is not None:
        print_wrapped(console, Text(f"      {measured}", style="dim"))
    if finding.suggestion is not None:
        suggestion = finding.suggestion
        if suggestion.withheld:
            line = Text("      no safe fix: ", style="yellow")
            line.append(f"the computed one ({suggestion.text}) brings in an error when"
                        " re-checked, so it is not offered as it is")
        else:
            line = Text("      fix: ", style="green")
            line.append(suggestion.text)
        print_wrapped(console, line)
        if suggestion.check is not None:
            print_wrapped(console, Text("      " + suggestion.check.summary(), style="dim"))


def _cautions(console: Console, cautions: list[Caution]) -> None:
    """The run's safety cautions under their own heading, before any finding; the
    deferral once, then each caution (acknowledged ones marked with their reason)."""
    console.print(Text(f"Cautions ({len(cautions)})", style=CAUTION_STYLE))
    print_wrapped(console, Text(f"  {DEFERRAL[0].upper()}{DEFERRAL[1:]}.", style=CAUTION_STYLE))
    for caution in cautions:
        head = Text("  ")
        head.append(f"{caution.path}:{caution.line}:{caution.column}", style="bold")
        head.append("  ")
        head.append(f"{CAUTION_MARK} {caution.caution}", style=CAUTION_STYLE)
        head.append(f"  stage {caution.stage}")
        if caution.elements:
            head.append(f"  [{', '.join(caution.elements)}]", style="dim")
        if caution.acknowledged is not None:
            head.append(f"  acknowledged: {caution.acknowledged}", style="dim")
        print_wrapped(console, head, hang=6)
        print_wrapped(console, Text("      " + caution.statement))
        if caution.measured is not None:
            kind = "DC" if caution.basis == "dc" else "AC peak"
            measured = measured_line(caution.measured, caution.limit, caution.unit)
            print_wrapped(console, Text(f"      {measured} {kind}", style="dim"))
    console.print()


VERDICT_MARK = {MET: ("✓", "green"), NOT_MET: ("✗", "bold red")}
UNCHECKED_MARK = ("?", "yellow")


def _verdict(line: Text, verdict: Verdict) -> None:
    """One requirement's verdict, compactly: mark, keyword, requirement, and the
    measured figure where it is not met."""
    mark, style = VERDICT_MARK.get(verdict.status, UNCHECKED_MARK)
    line.append(mark, style=style)
    line.append(f" {verdict.requirement} {verdict.required}")
    if verdict.not_met and verdict.measured is not None:
        line.append(f" ({measure(verdict.measured, verdict.unit)})", style=style)
    elif verdict.unchecked:
        line.append(" (could not check)", style="dim")


def _verdict_line(console: Console, verdicts: list[Verdict]) -> None:
    line = Text("      requirements: ", style="dim")
    for i, verdict in enumerate(verdicts):
        if i:
            line.append(" · ")
        _verdict(line, verdict)
    print_wrapped(console, line)


def _stage_line(console: Console, result: FileResult) -> None:
    for item in result.stages:
        s = item.summary
        counts = count_by_severity(item.findings)
        worst = next((sev for sev in sorted(Severity, reverse=True)
                      if counts[sev.label]), None)
        if any(v.not_met for v in item.verdicts):
            worst = Severity.ERROR
        line = Text("  ")
        if worst != Severity.ERROR and item.cautions:  # a caution outranks warnings
            line.append(CAUTION_MARK, style=CAUTION_STYLE)
        else:
            line.append(MARK[worst] if worst else "✓", style=STYLE[worst] if worst else "green")
        line.append(f" {item.name}", style="bold")
        line.append(f"  {result.path}:{item.line}", style="dim")
        parts = [s.get("topology") or "?"]
        if s.get("gain") is not None:
            gain = f"gain {stage_gain(s['gain'], item.gain_unit)}"
            if s.get("gain_from_net") is not None:
                gain += f" (from its net {stage_gain(s['gain_from_net'], item.gain_unit)})"
            parts.append(gain)
        if s.get("input_resistance") is not None:
            parts.append(f"Rin {format_si(s['input_resistance'], 'Ω')}")
        if s.get("bandwidth") is not None:
            parts.append(f"BW {format_si(s['bandwidth'], 'Hz')}")
        if s.get("phase_margin") is not None:
            parts.append(f"PM {s['phase_margin']:.0f}°")
        if s.get("stable") is False:
            parts.append("UNSTABLE" + (f" at {format_si(s['oscillation_frequency'], 'Hz')}"
                                       if s.get("oscillation_frequency") else ""))
        elif s.get("pole_damping") is not None:
            parts.append(f"ζ {s['pole_damping']:.2f} at {format_si(s['pole_frequency'], 'Hz')}")
        if s.get("output_low") is not None:
            parts.append(f"out {format_si(s['output_low'], 'V')} … {format_si(s['output_high'], 'V')}")
        line.append("  " + " · ".join(parts))
        print_wrapped(console, line, hang=6)
        if item.verdicts:
            _verdict_line(console, item.verdicts)


def write(console: Console, results: list[FileResult], context: ReportContext) -> None:
    every = [f for result in results for f in result.findings()]
    cautions = [c for result in results for c in result.cautions()]
    if cautions:
        _cautions(console, cautions)
    for severity in sorted(Severity, reverse=True):
        group = [f for f in every if f.severity == severity]
        if not group:
            continue
        # the header counts what the closing summary counts; set-aside ones apart
        set_aside = sum(1 for f in group if f.suppressed)
        counted = f"{len(group) - set_aside}" + (
            f", +{set_aside} waived or in the baseline" if set_aside else "")
        console.print(Text(f"{HEADING[severity]} ({counted})", style=STYLE[severity]))
        for finding in sorted(group, key=Finding.sort_key):
            _finding(console, finding)
        console.print()
    stage_total = sum(len(result.stages) for result in results)
    if 0 < stage_total <= STAGE_LINES_LIMIT:
        print_wrapped(console, Text("Stages", style="bold").append(STAGE_LEGEND, style="dim"),
                      hang=2)
        for result in results:
            _stage_line(console, result)
        console.print()
    elif stage_total:
        console.print(Text(f"{stage_total} stages: their figures are in --format json",
                           style="dim"))
    if len(results) > 1:
        write_severity_by_rule(console, every)
        write_stages_by_rule(console, every)
        write_folder_rollup(console, results)
        _audit_summary(console, results, every, context.worst)
    counts = count_by_severity([f for f in every if not f.suppressed])
    suppressed = sum(1 for f in every if f.suppressed)
    stages = sum(len(r.stages) for r in results)
    unreadable = sum(1 for r in results if r.unreadable)
    closing = Text(f"{_count(len(results), 'file')}, {_count(stages, 'stage')}: ")
    if cautions:
        acknowledged = sum(1 for c in cautions if c.acknowledged is not None)
        closing.append(_count(len(cautions), "caution"), style=CAUTION_STYLE)
        closing.append(f" ({acknowledged} acknowledged), " if acknowledged else ", ")
    closing.append(_count(counts["error"], "error"),
                   style=STYLE[Severity.ERROR] if counts["error"] else "")
    closing.append(", ")
    closing.append(_count(counts["warning"], "warning"),
                   style=STYLE[Severity.WARNING] if counts["warning"] else "")
    closing.append(f", {_count(counts['info'], 'note')}")
    if suppressed:
        closing.append(f" ({suppressed} more waived or in the baseline)")
    if unreadable:
        closing.append(f"; {_count(unreadable, 'file')} could not be read")
    if context.fail_on is not None:
        failing = sum(1 for f in every if context.fails(f)) + sum(
            1 for c in cautions if context.caution_fails(c))
        closing.append(f" — {failing} at or above {context.fail_on.label}" if failing
                       else f" — nothing at or above {context.fail_on.label}")
    console.print(closing)


class Writer(BaseWriter):
    """Keeps what the report needs of each file (its findings; stage figures only while
    the stage lines will be printed) and writes it all on close, grouped by severity."""

    def __init__(self, out, context: ReportContext):
        super().__init__(out, context)
        self.kept: list[FileResult] = []
        self.stage_count = 0

    def add(self, result: FileResult) -> None:
        self.stage_count += len(result.stages)
        keep_figures = self.stage_count <= STAGE_LINES_LIMIT
        stages = [StageResult(s.name, s.line, s.findings,
                              s.summary if keep_figures else {}, {},
                              s.verdicts if keep_figures else [], s.cautions,
                              gain_unit=s.gain_unit)
                  for s in result.stages]
        self.kept.append(FileResult(result.path, result.problems, stages,
                                    ignored_problems=result.ignored_problems))

    def close(self) -> None:
        import sys

        if self.out is sys.stdout:
            from checker.report.summary import console

            target = console()
        else:
            target = Console(file=self.out, width=200, soft_wrap=True, color_system=None,
                             highlight=False)
        write(target, self.kept, self.context)


def _count(number: int, noun: str) -> str:
    """'1 error', '2 errors'."""
    return f"{number} {noun}{'' if number == 1 else 's'}"
