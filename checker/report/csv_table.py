"""Every finding as a CSV row, for spreadsheets."""

from __future__ import annotations

import csv

from checker.report import Writer as BaseWriter

COLUMNS = ["path", "line", "column", "severity", "rule", "stage", "elements", "message",
           "measured", "limit", "unit", "suggestion", "suggested_value", "waived", "baselined"]


class Writer(BaseWriter):
    def __init__(self, out, context):
        super().__init__(out, context)
        self.rows = csv.writer(out, lineterminator="\n")
        self.rows.writerow(COLUMNS)

    def add(self, result) -> None:
        for f in result.findings():
            self.rows.writerow([
                f.path, f.line, f.column, f.severity.label, f.rule, f.stage or "",
                " ".join(f.elements), f.message,
                "" if f.measured is None else repr(f.measured),
                "" if f.limit is None else repr(f.limit), f.unit or "",
                f.suggestion.text if f.suggestion else "",
                "" if not f.suggestion or f.suggestion.value is None else repr(f.suggestion.value),
                f.waiver or "", "yes" if f.baselined else ""])
