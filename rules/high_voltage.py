"""The caution for stages beyond extra-low-voltage limits."""

from __future__ import annotations

from checker.engine import rule
from checker.limits import above
from checker.units import format_si


@rule("high-voltage", "warning",
      "The stage works beyond extra-low-voltage limits: a shock hazard.",
      dc_limit_v=60.0, ac_peak_limit_v=42.4)
def high_voltage(view):
    """
    What it checks:
        The span of the stage's supplies and ground against `dc_limit_v` (60 V DC), and
        each voltage source's peak against `ac_peak_limit_v` (42.4 V peak, 30 V rms) when
        given as an AC amplitude, or against `dc_limit_v` when given as a range.

    Why it matters:
        Above these limits a touchable conductor can deliver a dangerous shock. Such a
        stage needs insulation, creepage and clearance distances, protective earthing
        or enclosure, and review under the safety standards and local codes that apply,
        none of which this tool assesses.

    How the fix is computed:
        Nothing to compute: the finding is a caution. Defer to local electrical codes,
        the applicable equipment safety standard, and licensed practice.

    Sources:
        Extra-low-voltage touch limits of equipment standards: 60 V DC, 42.4 V peak /
        30 V rms AC (IEC 62368-1 class ES1; IEC 60950-1 SELV).
    """
    stage, settings = view.stage, view.settings
    voltages = list(stage.rail_voltages.values())
    span = max(voltages) - min(voltages)
    caution = ("hazardous voltage: this tool does not assess electrical safety; follow the"
               " applicable safety standard, local electrical codes and licensed practice"
               " for insulation, spacing, earthing and enclosure")
    if above(span, settings["dc_limit_v"]):
        yield view.finding(
            f"the supplies span {format_si(span, 'V')}, beyond the"
            f" {format_si(settings['dc_limit_v'], 'V')} DC extra-low-voltage limit: {caution}",
            stage.origin, measured=span, limit=settings["dc_limit_v"], unit="V")
    for source in stage.sources:
        if source.kind != "voltage" or source.low is None:
            continue
        peak = max(abs(source.low), abs(source.high))
        alternating = source.amplitude is not None
        limit = settings["ac_peak_limit_v"] if alternating else settings["dc_limit_v"]
        if above(peak, limit):
            yield view.finding(
                f"{source.name} reaches {format_si(peak, 'V')}, beyond the"
                f" {format_si(limit, 'V')} {'AC peak' if alternating else 'DC'}"
                f" extra-low-voltage limit: {caution}", source.origin,
                elements=(source.name,), measured=peak, limit=limit, unit="V")
