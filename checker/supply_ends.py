"""Supplies with a range (a battery from 10.5 V to 14.4 V): the stage is checked at the
nominal voltages and again at every combination of the ranged supplies' ends (at most
three supplies, eight combinations; build.py refuses more).

Every rule and requirement is evaluated at each end: a finding that appears only at an
end is reported with that end named (and its fix re-checked there); a requirement met at
the nominal voltages but not at an end is not met, with the end named; a safety caution
is judged at the end that makes it worst. The figures the reports print stay those of
the nominal voltages."""

from __future__ import annotations

from dataclasses import replace
from itertools import product

from checker.model import Stage, Supply
from checker.records import NOT_MET, UNCHECKED, Caution, Verdict
from checker.units import format_si


def supply_ends(stage: Stage) -> list[tuple[str, Stage]]:
    """(label, the stage with its ranged supplies at one combination of their ends), for
    every combination; empty when no supply has a range."""
    ranged = [s for s in stage.supplies if s.ranged]
    if not ranged:
        return []
    ends = []
    for choice in product((0, 1), repeat=len(ranged)):
        voltages = {s.net: _range_ends(s)[pick] for s, pick in zip(ranged, choice)}
        supplies = tuple(replace(s, voltage_v=voltages[s.net]) if s.net in voltages else s
                         for s in stage.supplies)
        label = ", ".join(f"{net} at {format_si(v, 'V')}" for net, v in voltages.items())
        ends.append((label, replace(stage, supplies=supplies)))
    return ends


def _range_ends(supply: Supply) -> tuple[float, float]:
    """(low, high) of a ranged supply."""
    assert supply.low_v is not None and supply.high_v is not None  # only ranged supplies
    return supply.low_v, supply.high_v


def _finding_key(finding) -> tuple:
    return (finding.rule, finding.elements, finding.line, finding.column)


def merged_findings(nominal: list, at_ends: list[tuple[str, list]]) -> list:
    """The nominal findings, plus each finding that appears only at an end, once, with
    the first end it appears at named in its message."""
    seen = {_finding_key(f) for f in nominal}
    merged = list(nominal)
    for label, findings in at_ends:
        for finding in findings:
            key = _finding_key(finding)
            if key in seen:
                continue
            seen.add(key)
            merged.append(replace(finding, message=f"with {label}: {finding.message}"))
    return merged


def merged_verdicts(nominal: list[Verdict], at_ends: list[tuple[str, list[Verdict]]]
                    ) -> list[Verdict]:
    """Each requirement's verdict over the ends: not met if not met at any end (that
    end's verdict, the end named), else could not check if so at any end, else met."""
    rank = {NOT_MET: 2, UNCHECKED: 1}
    merged = []
    for i, verdict in enumerate(nominal):
        worst, where = verdict, None
        for label, verdicts in at_ends:
            other = verdicts[i] if i < len(verdicts) else None
            if other is None or other.requirement != verdict.requirement:
                continue
            if rank.get(other.status, 0) > rank.get(worst.status, 0):
                worst, where = other, label
        if where is not None:
            reason = f"with {where}" + (f": {worst.reason}" if worst.reason else "")
            worst = replace(worst, statement=f"{worst.statement} (with {where})",
                            reason=reason)
        merged.append(worst)
    return merged


def merged_cautions(nominal: list[Caution], at_ends: list[tuple[str, list[Caution]]]
                    ) -> list[Caution]:
    """Each caution at the end where its measured value is largest."""
    best: dict[tuple, Caution] = {}
    order: list[tuple] = []
    for caution in nominal + [c for _label, cautions in at_ends for c in cautions]:
        key = (caution.caution, caution.path, caution.line, caution.column)
        if key not in best:
            order.append(key)
            best[key] = caution
        elif (caution.measured or 0) > (best[key].measured or 0):
            best[key] = caution
    return sorted((best[k] for k in order), key=Caution.sort_key)
