"""Every safety caution, finding and requirement verdict as a CSV row, for spreadsheets.

The first column says which a row is: ``caution`` (`severity` says ``caution``, `rule`
its id, `waived` the reason that acknowledges it), ``finding`` (severity in `severity`,
the rule in `rule`) or ``requirement`` (its status, met / not-met / could-not-check, in
`severity`, its keyword in `rule`, what was measured in `message`). The last column,
`cautions`, names the cautions of the row's stage on every row of it, so a sheet
filtered or sorted by anything else still shows them.

A cell holding a list (`elements`, `cautions`) joins its items with ``"; "``: a
designator or a source label may contain spaces (``supply vcc``, ``bridge sensor``), so
a space could not split it back. Text that a spreadsheet would run as a formula gets a
leading apostrophe (csv_cells.py).
"""

from __future__ import annotations

import csv

from checker.report import Writer as BaseWriter
from checker.report.csv_cells import safe_row
from checker.report.machine_units import machine_unit

COLUMNS = ["record", "path", "line", "column", "severity", "rule", "stage", "elements",
           "message", "measured", "limit", "unit", "suggestion", "suggested_value",
           "fix_check", "fix_withheld", "waived", "baselined", "cautions"]


LIST_SEPARATOR = "; "


def _joined(items) -> str:
    return LIST_SEPARATOR.join(items)


def _number(value) -> str:
    return "" if value is None else repr(value)


class Writer(BaseWriter):
    def __init__(self, out, context):
        super().__init__(out, context)
        self.rows = csv.writer(out, lineterminator="\n")
        self.rows.writerow(COLUMNS)

    def add(self, result) -> None:
        by_stage = {stage.name: _joined(sorted({c.caution for c in stage.cautions}))
                    for stage in result.stages}
        for c in result.cautions():
            self.rows.writerow(safe_row([
                "caution", c.path, c.line, c.column, "caution", c.caution, c.stage,
                _joined(c.elements), c.message, _number(c.measured), _number(c.limit),
                machine_unit(c.unit) or "", "", "", "", "", c.acknowledged or "", "", by_stage[c.stage]]))
        for f in result.findings():
            s = f.suggestion
            self.rows.writerow(safe_row([
                "finding", f.path, f.line, f.column, f.severity.label, f.rule, f.stage or "",
                _joined(f.elements), f.message, _number(f.measured), _number(f.limit),
                machine_unit(f.unit) or "", s.text if s else "", _number(s.value) if s else "",
                s.check.summary() if s and s.check else "",
                "yes" if s and s.withheld else "", f.waiver or "",
                "yes" if f.baselined else "", by_stage.get(f.stage, "")]))
        for stage in result.stages:
            for v in stage.verdicts:
                statement = v.statement + (f"; {v.reason}" if v.reason else "")
                self.rows.writerow(safe_row([
                    "requirement", result.path, v.line, v.column, v.status, v.requirement,
                    stage.name, _joined(v.explained_by), f"{v.required}: {statement}",
                    _number(v.measured), _number(v.limit), machine_unit(v.unit) or "", "", "", "", "", "",
                    "", by_stage[stage.name]]))
