"""What every reporter needs besides the results: the run's settings and totals."""

from __future__ import annotations

from checker.record import record

from checker.findings import Finding, Severity
from checker.records import Caution


@record(frozen=True)
class ReportContext:
    tool_version: str
    fail_on: Severity | None  # None: never fail
    rules: dict  # id -> Rule, for documentation in machine formats
    worst: int = 5  # entries in the text summary's worst lists, 0 for none

    def fails(self, finding: Finding) -> bool:
        return (self.fail_on is not None and not finding.suppressed
                and finding.severity >= self.fail_on)

    def caution_fails(self, caution: Caution) -> bool:
        """A caution not acknowledged counts as a warning towards failing: it fails a
        run that fails on warnings or notes (never one that fails on errors only)."""
        return (self.fail_on is not None and caution.acknowledged is None
                and Severity.WARNING >= self.fail_on)
