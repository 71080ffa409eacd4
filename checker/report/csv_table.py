"""Every finding as a CSV row, for spreadsheets."""

from __future__ import annotations

import csv
import io

from checker.report.context import ReportContext
from checker.review import FileResult

COLUMNS = ["path", "line", "column", "severity", "rule", "stage", "elements", "message",
           "measured", "limit", "unit", "suggestion", "suggested_value", "waived", "baselined"]


def render(results: list[FileResult], context: ReportContext) -> str:
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(COLUMNS)
    for result in results:
        for f in result.findings():
            writer.writerow([
                f.path, f.line, f.column, f.severity.label, f.rule, f.stage or "",
                " ".join(f.elements), f.message,
                "" if f.measured is None else repr(f.measured),
                "" if f.limit is None else repr(f.limit), f.unit or "",
                f.suggestion.text if f.suggestion else "",
                "" if not f.suggestion or f.suggestion.value is None else repr(f.suggestion.value),
                f.waiver or "", "yes" if f.baselined else ""])
    return out.getvalue()
