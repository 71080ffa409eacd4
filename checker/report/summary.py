"""Rich tables for `ampcheck parts` and the read summary of `ampcheck check`."""

from __future__ import annotations

import dataclasses

from rich.console import Console
from rich.table import Table

from checker.units import format_si


def console(stderr: bool = False) -> Console:
    """A console that honours NO_COLOR / FORCE_COLOR and goes plain off a terminal,
    where it does not wrap lines either (one finding line stays one line for grep)."""
    out = Console(stderr=stderr, highlight=False)
    if not out.is_terminal:
        out = Console(stderr=stderr, highlight=False, soft_wrap=True, width=200)
    return out


_PART_COLUMNS = [
    ("GBW", "gbw_hz", "Hz"), ("A0", "open_loop_gain", ""), ("SR V/µs", None, None),
    ("Vos", "offset_voltage_v", "V"), ("Ib", "bias_current_a", "A"),
    ("Cin cm/diff", None, None), ("Ro", "output_resistance_ohm", "Ω"),
    ("headroom", "output_headroom_high_v", "V"), ("Iout", "output_current_a", "A"),
    ("supply", None, None), ("en", "voltage_noise_v_per_rthz", "V/√Hz"),
    ("min gain", "min_stable_gain", ""),
]


def print_parts(library: dict) -> None:
    table = Table(title="Op-amp parts", title_justify="left")
    table.add_column("name (class)")
    for heading, _attr, _unit in _PART_COLUMNS:
        table.add_column(heading, justify="right")
    for name in sorted(library):
        part = library[name]
        cells = []
        for _heading, attr, unit in _PART_COLUMNS:
            if _heading == "Cin cm/diff":
                cells.append(f"{_short(part.input_capacitance_cm_f, 'F')}/"
                             f"{_short(part.input_capacitance_diff_f, 'F')}")
            elif _heading == "SR V/µs":
                rate = part.slew_rate_v_per_s
                cells.append("—" if rate is None else f"{rate / 1e6:.3g}")
            elif _heading == "supply":
                cells.append(f"{_short(part.supply_min_v, 'V')}–{_short(part.supply_max_v, 'V')}")
            else:
                cells.append(_short(getattr(part, attr), unit))
        origin = "" if part.builtin else " *"
        label = f"[bold]{name}{origin}[/]" + (f"\n[dim]{part.family}[/]" if part.family else "")
        table.add_row(label, *cells)
    out = console()
    out.print(table)
    out.print("Built-in parts are generic classes with typical values, not real parts."
              " * marks parts from your files.")


def _short(value, unit) -> str:
    return "—" if value is None else format_si(value, unit)


_UNIT_SUFFIXES = [("_v_per_rthz", "V/√Hz"), ("_a_per_rthz", "A/√Hz"), ("_v_per_s", "V/s"),
                  ("_hz", "Hz"), ("_v", "V"), ("_a", "A"), ("_f", "F"), ("_ohm", "Ω")]


def part_fields(part) -> list[tuple[str, float | None, str]]:
    """Every numeric parameter of a part as (field, value, unit), unit from its name."""
    rows = []
    for field in dataclasses.fields(part):
        value = getattr(part, field.name)
        if field.name in ("name", "family", "note", "builtin", "origin"):
            continue
        unit = next((u for s, u in _UNIT_SUFFIXES if field.name.endswith(s)), "")
        rows.append((field.name, value, unit))
    return rows


def print_part(part) -> None:
    """One part in full: every parameter with its unit, and where it came from."""
    out = console()
    out.print(f"[bold]{part.name}[/]" + (f" ({part.family})" if part.family else ""))
    if part.builtin:
        out.print("source: built-in library (invented, typical of the class)")
    else:
        where = part.origin.path if part.origin is not None else "?"
        out.print(f"source: user part file {where}")
    if part.note:
        out.print(f"note: {part.note}")
    for name, value, unit in part_fields(part):
        out.print(f"  {name:<28} {_short(value, unit)}")
