"""One CSV row per stage with its figures, for a spreadsheet: plain SI numbers in the
cells, the unit in each column's header (a transimpedance stage's gain is in ohms,
which `gain_unit` says). Text that a spreadsheet would run as a formula gets a leading
apostrophe (csv_cells.py)."""

from __future__ import annotations

import csv

from checker.findings import Severity
from checker.report import Writer as BaseWriter
from checker.report.csv_cells import safe_row

COLUMNS = ["file", "stage", "gain", "gain_unit", "bandwidth (Hz)", "phase_margin (deg)",
           "output_low (V)", "output_high (V)", "errors", "warnings", "notes"]


def _number(value) -> str:
    return "" if value is None or isinstance(value, bool) else repr(float(value))


def stage_row(path: str, stage) -> list:
    s = stage.summary or {}
    active = [f for f in stage.findings if not f.suppressed]
    return [path, stage.name, _number(s.get("gain")), stage.gain_unit or "V/V",
            _number(s.get("bandwidth")), _number(s.get("phase_margin")),
            _number(s.get("output_low")), _number(s.get("output_high")),
            sum(f.severity == Severity.ERROR for f in active),
            sum(f.severity == Severity.WARNING for f in active),
            sum(f.severity == Severity.INFO for f in active)]


class Writer(BaseWriter):
    def __init__(self, out, context):
        super().__init__(out, context)
        self.rows = csv.writer(out, lineterminator="\n")
        self.rows.writerow(COLUMNS)

    def add(self, result) -> None:
        for stage in result.stages:
            self.rows.writerow(safe_row(stage_row(result.path, stage)))
