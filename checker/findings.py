"""Findings: what a rule (or the reader) reports, and their severities."""

from __future__ import annotations

import enum
from dataclasses import field
from checker.record import record


class Severity(enum.IntEnum):
    """How much a finding matters; higher is worse."""

    INFO = 1
    WARNING = 2
    ERROR = 3

    @property
    def label(self) -> str:
        return self.name.lower()

    @classmethod
    def parse(cls, text: str) -> Severity:
        try:
            return cls[text.upper()]
        except KeyError:
            raise ValueError(f"unknown severity {text!r}: use error, warning or info") from None


@record(frozen=True)
class FixCheck:
    """What re-checking a fix's changes with every rule found: whether the finding it
    was proposed for is gone, and what else it changes."""

    clears: bool  # the finding it was proposed for is gone
    introduces: tuple[str, ...] = ()  # new findings: "warning bandwidth (U1): ..."
    introduces_error: bool = False
    clears_also: tuple[str, ...] = ()  # other findings it clears: "rule (elements)"
    meets: tuple[str, ...] = ()  # requirements not met before and met with it
    breaks: tuple[str, ...] = ()  # requirements met before and not with it

    def summary(self) -> str:
        """One line for a report: 're-checked with every rule: clears it; ...'."""
        parts = ["clears it" if self.clears else "does not clear it on its own"]
        if self.meets:
            parts.append("meets " + ", ".join(self.meets))
        if self.clears_also:
            parts.append("also clears " + ", ".join(self.clears_also))
        if self.breaks:
            parts.append("breaks " + ", ".join(self.breaks))
        parts.append("brings in " + "; ".join(self.introduces) if self.introduces
                     else "brings in nothing new")
        return "re-checked with every rule: " + "; ".join(parts)


@record(frozen=True)
class Suggestion:
    """A computed fix: what to change, and the value to change it to where there is one.

    ``changes`` are the edits it proposes, as records (checker/changes.py) the engine
    applies to a copy of the stage and re-checks with every rule; ``check`` is what that
    found. A fix whose re-check brings in a new error is ``withheld``: reported as
    such, not offered as it is. Advice with no changes (choose a comparator part) is
    not re-checked."""

    text: str
    value: float | None = None
    unit: str | None = None
    element: str | None = None
    changes: tuple = ()
    check: FixCheck | None = None
    withheld: bool = False


@record(frozen=True)
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
    from checker.catalogue import engine_severity  # the catalogue imports this module

    return Finding(rule=INPUT_RULE, severity=engine_severity(INPUT_RULE), message=problem.message,
                   path=problem.path, line=problem.line, column=problem.column,
                   elements=(problem.element,) if problem.element else ())
