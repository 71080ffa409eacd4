"""The display filter of ``check --show``: the standard-output report leaves out
findings below a severity; the exit code (--fail-on), the --output files and the safety
cautions are not filtered."""

from __future__ import annotations

from dataclasses import replace

from checker.findings import Severity

SHOW_CHOICES = {"errors": Severity.ERROR, "warnings": Severity.WARNING, "all": Severity.INFO}


class ShownWriter:
    """A report writer that is given only the findings at or above ``lowest``."""

    def __init__(self, writer, lowest: Severity):
        self._writer, self._lowest = writer, lowest

    def add(self, result) -> None:
        keep = [f for f in result.problems if f.severity >= self._lowest]
        stages = [replace(stage, findings=[f for f in stage.findings
                                           if f.severity >= self._lowest])
                  for stage in result.stages]
        self._writer.add(replace(result, problems=keep, stages=stages))

    def __getattr__(self, name):
        return getattr(self._writer, name)
