"""How a measured value, a limit and a stage's gain read in the human reports (text and
HTML): engineering notation with the unit, a slew rate in V/µs as the trade quotes it
(a slow drift in V/s), a gain as a plain number, and no limit shown where none applies."""

from __future__ import annotations

from checker.units import format_gain, format_si

SLOW_SLEW_V_PER_S = 1e3  # below 0.001 V/µs a rate reads better in V/s (a drift)


def measure(value: float | None, unit: str | None) -> str:
    """One value with its unit: 23.8°, 60.00 dB, -9.803, 0.5 V/µs, 100 mV/s, 4.7 kΩ."""
    if value is None:
        return "—"
    if unit == "°":
        return f"{value:.1f}°"
    if unit == "dB":
        return f"{value:.2f} dB"
    if unit == "V/V":  # a gain: a plain number
        return format_gain(value)
    if unit == "V/s":
        if abs(value) < SLOW_SLEW_V_PER_S:
            return format_si(value, "V/s")
        return f"{value / 1e6:.3g} V/µs"
    return format_si(value, unit or "")


def measured_line(measured: float | None, limit: float | None, unit: str | None) -> str | None:
    """'measured X, limit Y'; 'measured X' where the finding has no limit; None when it
    has neither."""
    if measured is None and limit is None:
        return None
    text = f"measured {measure(measured, unit)}"
    return text if limit is None else f"{text}, limit {measure(limit, unit)}"


def stage_gain(gain: float, unit: str) -> str:
    """A stage's gain: -9.803 (V/V) or -10 MΩ (a transimpedance, V/A)."""
    return format_si(gain, "Ω", digits=4) if unit == "Ω" else format_gain(gain)
