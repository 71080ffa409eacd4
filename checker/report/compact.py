"""One line per finding, for editors and grep: PATH:LINE:COL: SEVERITY RULE: MESSAGE."""

from __future__ import annotations

from checker.report.context import ReportContext
from checker.review import FileResult


def render(results: list[FileResult], context: ReportContext) -> str:
    lines = []
    for result in results:
        for f in result.findings():
            tag = f" [waived: {f.waiver}]" if f.waiver is not None else (
                " [baseline]" if f.baselined else "")
            where = f" (stage {f.stage})" if f.stage else ""
            lines.append(f"{f.path}:{f.line}:{f.column}: {f.severity.label} {f.rule}:"
                         f" {f.message}{where}{tag}")
    return "\n".join(lines) + ("\n" if lines else "")
