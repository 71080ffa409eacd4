"""The display filters of ``check``: ``--show`` leaves out findings below a severity,
and the text and compact reports leave out the findings a baseline holds unless
``--show-baselined`` is given. Both filter the standard-output report only; the exit code (--fail-on), the --output files
(where a baselined finding is marked) and the safety cautions are not filtered."""

from __future__ import annotations

import sys
from dataclasses import replace

from checker.findings import Severity

SHOW_CHOICES = {"errors": Severity.ERROR, "warnings": Severity.WARNING, "all": Severity.INFO}


class ShownWriter:
    """A report writer that is given only the findings at or above ``lowest``, and the
    baselined ones only when ``show_baselined``; ``close`` says how many baselined
    findings were left out (on standard error, so a machine format stays clean)."""

    def __init__(self, writer, lowest: Severity, show_baselined: bool = False):
        self._writer, self._lowest = writer, lowest
        self._show_baselined = show_baselined
        self.hidden_baselined = 0

    def _shown(self, findings: list) -> list:
        kept = []
        for finding in findings:
            if finding.baselined and not self._show_baselined:
                self.hidden_baselined += 1
            elif finding.severity >= self._lowest:
                kept.append(finding)
        return kept

    def add(self, result) -> None:
        problems = self._shown(result.problems)
        stages = [replace(stage, findings=self._shown(stage.findings))
                  for stage in result.stages]
        self._writer.add(replace(result, problems=problems, stages=stages))

    def close(self) -> None:
        self._writer.close()
        if self.hidden_baselined:
            count = self.hidden_baselined
            print(f"ampcheck: {count} finding{'s' if count != 1 else ''} in the baseline not"
                  " listed (--show-baselined lists them)", file=sys.stderr)

    def __getattr__(self, name):
        return getattr(self._writer, name)
