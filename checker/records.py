"""Plain typed records that the reports carry: no numpy, no solver, no engine.

A requirement's verdict and a safety caution are these; reporters import this module
alone.
"""

from __future__ import annotations

from dataclasses import field
from checker.record import record

from checker.findings import Finding, Severity

MET = "met"
NOT_MET = "not-met"
UNCHECKED = "could-not-check"
STATUSES = (MET, NOT_MET, UNCHECKED)


@record(frozen=True)
class Verdict:
    """One stated requirement, answered: met, not met, or could not check (and why).

    ``measured`` and ``limit`` are SI floats in ``unit``; ``statement`` says what was
    measured from the signal's side, ``reason`` why it fails or could not be checked;
    ``explained_by`` names the rules whose findings give the cause and the fix."""

    requirement: str  # the stage-format keyword: "gain", "bandwidth", ...
    status: str  # MET | NOT_MET | UNCHECKED
    required: str  # the requirement as a reader writes it: "-10 ±2 %", "≥ 20 kHz"
    statement: str  # what the stage does: "gain from the source -8.33 (from its net -10)"
    path: str
    line: int
    column: int
    measured: float | None = None
    limit: float | None = None
    unit: str | None = None
    reason: str | None = None
    explained_by: tuple[str, ...] = ()

    @property
    def met(self) -> bool:
        return self.status == MET

    @property
    def not_met(self) -> bool:
        return self.status == NOT_MET

    @property
    def unchecked(self) -> bool:
        return self.status == UNCHECKED


# The tag that marks a caution in machine formats (SARIF ``properties.tags``).
CAUTION_TAG = "ampcheck-safety-caution"
# What every caution defers to: said once in each caution's message.
DEFERRAL = ("this tool does not assess electrical safety; the applicable safety standard,"
            " local electrical codes and licensed practice decide insulation, spacing,"
            " earthing and enclosure")
BASES = ("dc", "ac-peak", "declared")


@record(frozen=True)
class Caution:
    """A safety caution on a stage: a supply span or a source beyond the extra-low-voltage
    limits, or a supply or stage declared derived from the mains.

    Not a finding: it has no severity and no rule to select, ignore, configure or
    baseline; a waiver naming it with a reason ``acknowledged`` it, and it is reported
    all the same. ``basis`` says what it was judged on: ``dc`` (against the DC limit),
    ``ac-peak`` (the peak against the AC limit) or ``declared`` (a mains declaration);
    ``measured`` and ``limit`` are volts, None for a declaration."""

    caution: str  # the caution's id: "high-voltage" | "mains-derived"
    statement: str  # what was found: "the supplies span 150 V, beyond the 60 V DC limit"
    path: str
    line: int
    column: int
    stage: str
    elements: tuple[str, ...] = ()
    basis: str = "dc"
    measured: float | None = None
    limit: float | None = None
    unit: str | None = None
    acknowledged: str | None = None  # the reason of the waiver that acknowledges it

    @property
    def message(self) -> str:
        return f"{self.statement}: {DEFERRAL}"

    def sort_key(self) -> tuple:
        return (self.path, self.line, self.column, self.caution, self.elements,
                self.statement)


@record(frozen=True)
class Plot:
    """One drawn figure of a stage, for the HTML review: an SVG text and its words.

    ``key`` is unique within the stage ("loop-U1", "response-1", ...), ``alt`` the text
    alternative: what the plot shows, with its numbers."""

    kind: str  # "loop" | "response" | "range" | "noise" | "spread" | "poles"
    key: str
    title: str
    alt: str
    svg: str


@record(frozen=True)
class ElementRow:
    """One element of a stage as the review lists it: designator, kind, nets, value."""

    ref: str
    kind: str  # "op-amp", "resistor", "capacitor", "inductor", "source", "load", "supply"
    nets: str  # "in → fb", or the op-amp's pins
    value: str  # "100 kΩ ±1 %", the part's name, a source's range and band
    line: int


@record(frozen=True)
class StageSheet:
    """What the HTML review shows of a stage beyond findings and verdicts: its element
    list, its plots, and a note for each plot that was not drawn (and why)."""

    elements: tuple[ElementRow, ...] = ()
    plots: tuple[Plot, ...] = ()
    notes: tuple[str, ...] = ()


@record
class StageResult:
    """What a report needs of one stage: small and picklable (no model, no arrays), so a
    worker process can send it back and a long audit keeps little in memory."""

    name: str
    line: int
    findings: list[Finding]
    summary: dict = field(default_factory=dict)  # key figures, SI floats or None
    amplifiers: dict = field(default_factory=dict)  # per op-amp figures
    verdicts: list[Verdict] = field(default_factory=list)  # one per stated requirement
    cautions: list[Caution] = field(default_factory=list)  # safety cautions, always
    sheet: StageSheet | None = None  # element list and plots, for the HTML review only
    gain_unit: str = "V/V"  # the summary gain's unit: "Ω" (V/A) from a current source


@record
class FileResult:
    path: str
    problems: list[Finding] = field(default_factory=list)  # input-invalid findings
    stages: list[StageResult] = field(default_factory=list)
    # input-invalid findings left out because the run ignores that id (--ignore
    # input-invalid): the file still counts as one that could not be read
    ignored_problems: int = 0

    @property
    def unreadable(self) -> bool:
        """The file could not be read, parsed, validated or built."""
        return bool(self.problems) or self.ignored_problems > 0

    def findings(self) -> list[Finding]:
        found = list(self.problems)
        for result in self.stages:
            found.extend(result.findings)
        return sorted(found, key=Finding.sort_key)

    def cautions(self) -> list[Caution]:
        """Every stage's safety cautions, in file order."""
        found = [caution for result in self.stages for caution in result.cautions]
        return sorted(found, key=Caution.sort_key)


def count_by_severity(findings: list[Finding]) -> dict[str, int]:
    counts = {severity.label: 0 for severity in sorted(Severity, reverse=True)}
    for finding in findings:
        counts[finding.severity.label] += 1
    return counts
