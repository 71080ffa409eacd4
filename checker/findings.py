"""Findings: what a rule (or the reader) reports, and their severities."""

from __future__ import annotations

import enum
from dataclasses import dataclass, field


class Severity(enum.IntEnum):
    """How much a finding matters; higher is worse."""

    INFO = 1
    WARNING = 2
    ERROR = 3

    @property
    def label(self) -> str:
        return self.name.lower()

    @classmethod
    def parse(cls, text: str) -> "Severity":
        try:
            return cls[text.upper()]
        except KeyError:
            raise ValueError(f"unknown severity {text!r}: use error, warning or info") from None


@dataclass(frozen=True)
class Suggestion:
    """A computed fix: what to change, and the value to change it to where there is one."""

    text: str
    value: float | None = None
    unit: str | None = None
    element: str | None = None


@dataclass(frozen=True)
class Finding:
    rule: str
    severity: Severity
    message: str
    path: str
    line: int
    column: int
    stage: str | None = None
    elements: tuple[str, ...] = ()
    measured: float | None = None
    limit: float | None = None
    unit: str | None = None
    suggestion: Suggestion | None = None
    details: dict = field(default_factory=dict, compare=False)
    waiver: str | None = None  # the reason, when a waiver in the stage file covers it
    baselined: bool = False  # recorded in the baseline the run was given

    @property
    def suppressed(self) -> bool:
        """Waived or baselined: shown, but never a reason to fail."""
        return self.waiver is not None or self.baselined

    def sort_key(self) -> tuple:
        return (self.path, self.line, self.column, -self.severity, self.rule, self.elements,
                self.message)


INPUT_RULE = "input-invalid"


def input_finding(problem) -> Finding:
    """A reader or builder problem as a finding of the ``input-invalid`` rule."""
    return Finding(rule=INPUT_RULE, severity=Severity.ERROR, message=problem.message,
                   path=problem.path, line=problem.line, column=problem.column,
                   elements=(problem.element,) if problem.element else ())
