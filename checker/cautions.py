"""Safety cautions, from the stage model alone: supplies and sources beyond the
extra-low-voltage limits, and supplies or stages declared derived from the mains.

Cautions are not findings. No rule computes them, so no selection, ignore list,
configuration or severity change can remove them; the engine attaches them to every
stage result. A waiver that names a caution, with a reason, acknowledges it: the caution
is still reported, marked with the reason.

The limits are those of equipment standards for a touchable circuit: 60 V DC and
42.4 V peak (30 V rms) AC, class ES1 of IEC 62368-1 and the SELV limits of IEC 60950-1.
They are fixed here, not settings.

How a source's voltage is read (our reading, stated in docs/format.md):

* ``(amplitude A) (offset O)``: a DC part O and an AC part of peak A.
* ``(range LOW HIGH)`` with a band above 0 Hz: a signal swinging between LOW and HIGH,
  so a DC part (LOW + HIGH)/2 and an AC part of peak (HIGH - LOW)/2.
* ``(range LOW HIGH)`` with no band, or a band from 0 Hz: a DC signal (as the format
  reads it everywhere else) whose largest magnitude is judged against 60 V.
* A source with an AC part reaches |DC| + peak. That peak is judged against 60 V only
  when the AC part is a ripple on a DC voltage, at most 10 % of it in rms (a sine's rms
  is its peak over sqrt 2); otherwise against 42.4 V. The 10 % is the usual meaning of
  "ripple-free" DC in the touch-voltage standards (IEC 60364-4-41 and IEC 61201; from
  memory). Judging the peak, not the AC and DC parts apart, is the conservative reading.
"""

from __future__ import annotations

import math
from dataclasses import replace
from checker.record import record

from checker.limits import above
from checker.model import Source, Stage, Waiver
from checker.records import Caution
from checker.units import format_si

DC_LIMIT_V = 60.0  # IEC 62368-1 class ES1, DC; IEC 60950-1 SELV
AC_PEAK_LIMIT_V = 42.4  # IEC 62368-1 class ES1, AC: 30 V rms = 42.4 V peak
RIPPLE_FREE_FRACTION = 0.10  # ripple rms / DC at most this: "ripple-free" DC (from memory)

HIGH_VOLTAGE = "high-voltage"
MAINS_DERIVED = "mains-derived"
MAINS_VALUES = ("isolated", "not-isolated")  # the stage format's (mains ...) values


@record(frozen=True)
class CautionKind:
    """One kind of caution, documented like a rule (``ampcheck explain ID``)."""

    id: str
    summary: str
    doc: str


KINDS: dict[str, CautionKind] = {
    HIGH_VOLTAGE: CautionKind(
        HIGH_VOLTAGE,
        "A supply span or a source beyond the extra-low-voltage limits: a shock hazard.",
        """\
What it checks:
    The span of the stage's rails, the ground net included, against 60 V DC; and each
    voltage source against 60 V DC or 42.4 V peak AC. A range with a band above 0 Hz is
    an AC signal swinging between its ends; a range with no band, or a band from 0 Hz,
    is a DC signal; an amplitude is an AC part of that peak on a DC part, its offset.
    A source with an AC part reaches |offset| + peak, judged against 42.4 V, or against
    60 V when the AC part is a ripple of at most 10 % rms of the DC part.

Why it matters:
    Above these limits a touchable conductor can deliver a dangerous shock. Such a
    stage needs insulation, creepage and clearance distances, protective earthing or an
    enclosure, and review under the safety standards and local codes that apply, none
    of which this tool assesses.

What it asks of you:
    Nothing to compute. Have the design reviewed under the applicable equipment safety
    standard, local electrical codes and licensed practice. Once that is done, a waiver
    with its reason, (waive high-voltage "REASON"), acknowledges the caution; it is
    still reported. It cannot be selected, ignored, configured, demoted or baselined.

Sources:
    Extra-low-voltage limits of equipment standards: 60 V DC and 42.4 V peak (30 V rms)
    AC, IEC 62368-1 class ES1 and IEC 60950-1 SELV. Ripple-free DC as a ripple of at
    most 10 % rms: IEC 60364-4-41 and IEC 61201 (from memory).
"""),
    MAINS_DERIVED: CautionKind(
        MAINS_DERIVED,
        "A supply or stage declared derived from the mains, isolated or not.",
        """\
What it checks:
    A supply declared (mains isolated) or (mains not-isolated), and a stage declared
    the same. The declaration raises the caution whatever the stage's voltages.

Why it matters:
    A stage on a supply that is not isolated from the mains (a transformerless supply,
    a capacitive dropper, a converter on rectified mains) can have every net at mains
    potential, though its rails are 5 V apart. A supply isolated from the mains is only
    as safe as its isolation barrier, whose rating, creepage and clearance no stage
    description holds.

What it asks of you:
    Have the supply and the stage reviewed under the applicable equipment safety
    standard, local electrical codes and licensed practice. A waiver with its reason,
    (waive mains-derived "REASON"), acknowledges the caution; it is still reported. It
    cannot be selected, ignored, configured, demoted or baselined.

Sources:
    The stage's own declaration; the isolation requirements are those of the
    applicable equipment safety standard (for example IEC 62368-1, clause 5).
"""),
}


def not_a_rule(caution_id: str) -> str:
    """The message for an attempt to select, ignore, configure or re-grade a caution."""
    return (f"{caution_id} is a safety caution, not a rule: it is always reported, with"
            " limits fixed by the standards it cites, and cannot be selected, ignored,"
            " configured or given a severity; once the design has had its safety review,"
            f' acknowledge it in the stage file with (waive {caution_id} "REASON")')


def stage_cautions(stage: Stage) -> list[Caution]:
    """Every caution of ``stage``, from its supplies, sources and declarations."""
    found = []
    span = _supply_span(stage)
    if span is not None:
        found.append(span)
    for source in stage.sources:
        caution = _source_caution(stage, source)
        if caution is not None:
            found.append(caution)
    for supply in stage.supplies:
        if supply.mains is not None:
            found.append(_declared(stage, f"supply {supply.net}", supply.mains,
                                   supply.origin, (f"supply {supply.net}",)))
    if stage.mains is not None:
        found.append(_declared(stage, f"stage {stage.name}", stage.mains, stage.origin, ()))
    return sorted(found, key=Caution.sort_key)


def _supply_span(stage: Stage) -> Caution | None:
    rails = stage.rail_voltages
    span = max(rails.values()) - min(rails.values())
    if not above(span, DC_LIMIT_V):
        return None
    highest = max(rails, key=lambda net: rails[net])
    lowest = min(rails, key=lambda net: rails[net])
    # Point at the supply farthest from the ground: the one that makes the span.
    farthest = max(stage.supplies, key=lambda s: abs(s.voltage_v))
    return Caution(
        HIGH_VOLTAGE,
        f"the supplies span {format_si(span, 'V')} ({lowest} {format_si(rails[lowest], 'V')}"
        f" to {highest} {format_si(rails[highest], 'V')}), beyond the"
        f" {format_si(DC_LIMIT_V, 'V')} DC extra-low-voltage limit",
        farthest.origin.path, farthest.origin.line, farthest.origin.column, stage.name,
        basis="dc", measured=span, limit=DC_LIMIT_V, unit="V")


def source_parts(source: Source) -> tuple[float, float] | None:
    """(DC part, AC peak) of a voltage source in volts; None when it gives no values
    (or is a current source). See the module's docstring for the reading."""
    if source.kind != "voltage" or source.low is None or source.high is None:
        return None
    if source.amplitude is not None:
        return (source.low + source.high) / 2, source.amplitude
    alternating = source.band_low_hz is not None and source.band_low_hz > 0
    if alternating:
        return (source.low + source.high) / 2, (source.high - source.low) / 2
    return max(source.low, source.high, key=abs), 0.0


def judged(dc_v: float, ac_peak_v: float) -> tuple[str, float, float]:
    """(basis, measured peak, limit) of a voltage with a DC part and an AC peak."""
    peak = abs(dc_v) + ac_peak_v
    if ac_peak_v == 0:
        return "dc", peak, DC_LIMIT_V
    ripple_rms = ac_peak_v / math.sqrt(2)
    if ripple_rms <= RIPPLE_FREE_FRACTION * abs(dc_v):
        return "dc", peak, DC_LIMIT_V
    return "ac-peak", peak, AC_PEAK_LIMIT_V


def _source_caution(stage: Stage, source: Source) -> Caution | None:
    parts = source_parts(source)
    if parts is None:
        return None
    dc_v, ac_peak_v = parts
    basis, peak, limit = judged(dc_v, ac_peak_v)
    if not above(peak, limit):
        return None
    if ac_peak_v == 0:
        what = f"{source.name} reaches {format_si(peak, 'V')} DC"
    elif basis == "dc":
        what = (f"{source.name} reaches {format_si(peak, 'V')}: {format_si(dc_v, 'V')} DC"
                f" with a ripple of {format_si(ac_peak_v, 'V')} peak")
    elif dc_v == 0:
        what = f"{source.name} reaches {format_si(peak, 'V')} peak AC"
    else:
        what = (f"{source.name} reaches {format_si(peak, 'V')} peak"
                f" ({format_si(ac_peak_v, 'V')} AC peak on {format_si(dc_v, 'V')} DC)")
    kind = "DC" if basis == "dc" else "AC peak"
    return Caution(
        HIGH_VOLTAGE, f"{what}, beyond the {format_si(limit, 'V')} {kind} extra-low-voltage"
        " limit", source.origin.path, source.origin.line, source.origin.column, stage.name,
        elements=(source.name,), basis=basis, measured=peak, limit=limit, unit="V")


def _declared(stage: Stage, what: str, value: str, origin, elements) -> Caution:
    if value == "not-isolated":
        statement = (f"{what} is declared derived from the mains without isolation: every"
                     " net of the stage may be at mains potential, whatever its voltage to"
                     " the ground net")
    else:
        statement = (f"{what} is declared derived from the mains through isolation: the"
                     " isolation barrier, its rating, creepage and clearance are not"
                     " described here")
    return Caution(MAINS_DERIVED, statement, origin.path, origin.line, origin.column,
                   stage.name, elements=tuple(elements), basis="declared")


def acknowledge(stage: Stage, cautions: list[Caution]
                ) -> tuple[list[Caution], list[Waiver]]:
    """The cautions with the reasons of the waivers that name them, and the waivers of
    a caution that matched none (stale). Waivers without a reason acknowledge nothing
    (the engine reports them as invalid)."""
    result = list(cautions)
    stale = []
    for waiver in stage.waivers:
        if waiver.rule not in KINDS or waiver.reason is None:
            continue
        matched = False
        for i, caution in enumerate(result):
            if caution.caution == waiver.rule and caution.acknowledged is None and (
                    waiver.element is None or waiver.element in caution.elements):
                result[i] = replace(caution, acknowledged=waiver.reason)
                matched = True
        if not matched:
            stale.append(waiver)
    return result, stale
