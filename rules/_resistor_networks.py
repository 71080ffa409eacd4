"""Shared by the resistor-range and noise rules: an op-amp's resistor network, and the
same network scaled by one factor (which keeps every ratio, and so the gain).

Not a rule module (the leading underscore keeps the loader away from it).
"""

from __future__ import annotations

import math
from dataclasses import replace
from checker.record import record

from checker.analysis.topology import classify
from checker.model import OpAmp, Passive, Stage
from checker.preferred import ladder, nearest, series_for_tolerance


@record(frozen=True)
class Network:
    """One op-amp's resistors, by the role that decides what a bad value costs."""

    opamp: OpAmp
    feedback: tuple[Passive, ...]  # carry the output's or the loop's current
    bias: tuple[Passive, ...]  # at the non-inverting input only
    rails: frozenset[str]  # the fixed-potential nets of the stage

    @property
    def scalable(self) -> tuple[Passive, ...]:
        """The resistors that scale together: every one but a pull from the output to a
        rail, which is a load rather than part of the gain."""
        return tuple(r for r in self.feedback + self.bias if not self.is_output_pull(r))

    def is_output_pull(self, resistor: Passive) -> bool:
        return self.opamp.out in resistor.nets and \
            resistor.other(self.opamp.out) in self.rails

    def touches_output(self, resistor: Passive) -> bool:
        return self.opamp.out in resistor.nets


def network_of(stage: Stage, opamp: OpAmp) -> Network:
    """Resistors touching in- (and a T-network's tee), between out and in+, and from
    out to a rail: the feedback network; other resistors touching in+: its bias. A
    follower's in- is its output, and an input on a rail has no network of its own."""
    rails = set(stage.rail_voltages)
    tee = classify(stage, opamp).tee_elements
    inverting = opamp.in_neg if opamp.in_neg not in rails | {opamp.out} else None
    positive = opamp.in_pos if opamp.in_pos not in rails else None
    feedback, bias = [], []
    for resistor in stage.resistors():
        nets = set(resistor.nets)
        if resistor.ref in tee or inverting in nets or nets == {opamp.out, opamp.in_pos} \
                or (opamp.out in nets and resistor.other(opamp.out) in rails):
            feedback.append(resistor)
        elif positive in nets:
            bias.append(resistor)
    return Network(opamp, tuple(feedback), tuple(bias), frozenset(rails))


def scaled(stage: Stage, resistors, factor: float) -> tuple[Stage, dict[str, float]]:
    """The stage with each of ``resistors`` multiplied by ``factor`` and snapped to the
    series its tolerance implies (E96 for 1 % or better, else E24); the new values."""
    values = rounded(resistors, factor)
    passives = tuple(replace(p, value=values[p.ref]) if p.ref in values else p
                     for p in stage.passives)
    return replace(stage, passives=passives), values


def rounded(resistors, factor: float) -> dict[str, float]:
    """Each of ``resistors`` times ``factor``, rounded to the series its tolerance implies
    (E96 for 1 % or better, else E24)."""
    return {r.ref: nearest(r.value * factor, series_for_tolerance(r.tolerance))
            for r in resistors}


def best_factor(resistors, k_min: float, k_max: float, tolerance: float,
                accept=lambda values: True) -> float | None:
    """A factor in [k_min, k_max] for ``resistors`` whose rounded values keep their
    ratios: each series value of the largest resistor in that span is a candidate, and
    of those whose rounded values ``accept`` takes, the one nearest 1 that keeps every
    ratio within half of ``tolerance`` wins, else the one that keeps them best. None
    when no candidate is accepted."""
    if k_min > k_max or not resistors:
        return None
    anchor = max(resistors, key=lambda r: r.value)
    series = series_for_tolerance(anchor.tolerance)
    candidates = [v / anchor.value for v in ladder(anchor.value * k_min,
                                                   anchor.value * k_max, series)]
    candidates = [k for k in candidates if accept(rounded(resistors, k))]
    if not candidates:
        return None

    def spread(factor: float) -> float:
        values = rounded(resistors, factor)
        logs = [math.log(values[r.ref] / (r.value * factor)) for r in resistors]
        return max(logs) - min(logs)

    by_closeness = sorted(candidates, key=lambda k: abs(math.log(k)))
    for factor in by_closeness:
        if spread(factor) <= tolerance / 2:
            return factor
    return min(by_closeness, key=spread)


def gain_change(before, after) -> float:
    """The largest relative change of a source's signal gain (from the source, at its
    reference) from ``before`` to ``after``; sources of no gain before are skipped."""
    return max((abs(new.gain_from_source_mid / old.gain_from_source_mid - 1)
                for old, new in zip(before.sources, after.sources)
                if old.gain_from_source_mid != 0), default=0.0)


def gain_kept(before, after, tolerance: float) -> bool:
    """Every source's signal gain of ``after`` within ``tolerance`` of ``before``."""
    return not gain_change(before, after) > tolerance
