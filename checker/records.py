"""Plain typed records that the reports carry: no numpy, no solver, no engine.

A requirement's verdict is one of these; reporters import this module alone.
"""

from __future__ import annotations

from dataclasses import dataclass

MET = "met"
NOT_MET = "not-met"
UNCHECKED = "could-not-check"
STATUSES = (MET, NOT_MET, UNCHECKED)


@dataclass(frozen=True)
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


@dataclass(frozen=True)
class Plot:
    """One drawn figure of a stage, for the HTML review: an SVG text and its words.

    ``key`` is unique within the stage ("loop-U1", "response-1", ...), ``alt`` the text
    alternative: what the plot shows, with its numbers."""

    kind: str  # "loop" | "response" | "range" | "noise" | "spread" | "poles"
    key: str
    title: str
    alt: str
    svg: str


@dataclass(frozen=True)
class ElementRow:
    """One element of a stage as the review lists it: designator, kind, nets, value."""

    ref: str
    kind: str  # "op-amp", "resistor", "capacitor", "inductor", "source", "load", "supply"
    nets: str  # "in → fb", or the op-amp's pins
    value: str  # "100 kΩ ±1 %", the part's name, a source's range and band
    line: int


@dataclass(frozen=True)
class StageSheet:
    """What the HTML review shows of a stage beyond findings and verdicts: its element
    list, its plots, and a note for each plot that was not drawn (and why)."""

    elements: tuple[ElementRow, ...] = ()
    plots: tuple[Plot, ...] = ()
    notes: tuple[str, ...] = ()
