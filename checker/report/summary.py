"""Rich tables for `ampcheck parts` and the read summary of `ampcheck check`."""

from __future__ import annotations

import dataclasses

from rich import box
from rich.columns import Columns
from rich.console import Console, Group
from rich.measure import Measurement
from rich.padding import Padding
from rich.text import Text
from rich.table import Table

from checker.model import PART_ATTRIBUTES
from checker.report.values import measure
from checker.units import format_si

# The stage format's keyword of each part field (gbw for gbw_hz): what a part file writes.
_KEYWORDS = {field: keyword for keyword, field in PART_ATTRIBUTES.items()}


class PipeConsole(Console):
    """A console whose reader going away (| head) ends the run as any other output's
    does, through BrokenPipeError (the command line's exit 128 + SIGPIPE), not with the
    terminal library's own exit status 1, which would read as findings."""

    def on_broken_pipe(self) -> None:
        self.quiet = True
        raise BrokenPipeError


def console(stderr: bool = False) -> Console:
    """A console that honours NO_COLOR / FORCE_COLOR and goes plain off a terminal,
    where it does not wrap lines either (one finding line stays one line for grep)."""
    out = PipeConsole(stderr=stderr, highlight=False)
    if not out.is_terminal:
        out = PipeConsole(stderr=stderr, highlight=False, soft_wrap=True, width=200)
    return out


def _range(low, high, unit) -> str:
    return f"{_short(low, unit)}…{_short(high, unit)}"


# (heading, cell maker): short headings so the table fits about 100 columns
_PART_CELLS = [
    ("GBW", lambda p: _short(p.gbw_hz, "Hz")),
    ("A0", lambda p: _short(p.open_loop_gain, "")),
    ("pole 2", lambda p: _short(p.second_pole_hz, "Hz")),
    ("SR", lambda p: measure(p.slew_rate_v_per_s, "V/s")
     if p.slew_rate_v_per_s is not None else "—"),
    ("Vos", lambda p: _short(p.offset_voltage_v, "V")),
    ("Ib", lambda p: _short(p.bias_current_a, "A")),
    ("Cin cm/dif", lambda p: f"{_short(p.input_capacitance_cm_f, 'F')}/"
                             f"{_short(p.input_capacitance_diff_f, 'F')}"),
    ("in range", lambda p: _range(p.input_range_low_v, p.input_range_high_v, "V")),
    ("Ro", lambda p: _short(p.output_resistance_ohm, "Ω")),
    ("headroom", lambda p: _short(p.output_headroom_high_v, "V")),
    ("Iout", lambda p: _short(p.output_current_a, "A")),
    ("supply", lambda p: _range(p.supply_min_v, p.supply_max_v, "V")),
    ("abs max", lambda p: _short(p.supply_abs_max_v, "V")),
    ("en /√Hz", lambda p: _short(p.voltage_noise_v_per_rthz, "V")),
    ("in /√Hz", lambda p: _short(p.current_noise_a_per_rthz, "A")),
    ("min gain", lambda p: _short(p.min_stable_gain, "")),
]


def parts_table(library: dict) -> Table:
    """One row per part; no cell wraps (a name is never cut)."""
    table = Table(title="Op-amp parts", title_justify="left", padding=(0, 0),
                  show_edge=False, box=box.SIMPLE_HEAD, pad_edge=False, collapse_padding=True)
    table.add_column("name", no_wrap=True, style="bold")
    for heading, _cell in _PART_CELLS:
        table.add_column(heading, justify="right", no_wrap=True)
    for name in sorted(library):
        part = library[name]
        label = name + ("" if part.builtin else " *")
        table.add_row(label, *(" " + cell(part) for _h, cell in _PART_CELLS))
    return table


def parts_blocks(library: dict) -> Group:
    """One block per part (name, class, then heading: value pairs) for a narrow screen."""
    blocks: list[Text | Padding] = []
    for name in sorted(library):
        part = library[name]
        pairs = Columns([Text.from_markup(f"[dim]{h}[/] {cell(part)}")
                         for h, cell in _PART_CELLS], padding=(0, 2))
        head = f"[bold]{name}{'' if part.builtin else ' *'}[/]"
        blocks.append(Text.from_markup(head + (f"  [dim]{part.family}[/]" if part.family else "")))
        blocks.append(Padding(pairs, (0, 0, 0, 2)))
    return Group(*blocks)


def print_parts(library: dict, out: Console | None = None) -> None:
    out = out or console()
    table = parts_table(library)
    if Measurement.get(out, out.options.update_width(10_000), table).maximum <= out.width:
        out.print(table)
    else:
        out.print(parts_blocks(library))
    out.print("Built-in parts are generic classes with typical values, not real parts."
              " * marks parts from your files; `ampcheck parts NAME` shows one in full.")


def _short(value, unit) -> str:
    return "—" if value is None else format_si(value, unit)


_UNIT_SUFFIXES = [("_v_per_rthz", "V/√Hz"), ("_a_per_rthz", "A/√Hz"), ("_v_per_s", "V/s"),
                  ("_hz", "Hz"), ("_v", "V"), ("_a", "A"), ("_f", "F"), ("_ohm", "Ω")]


def part_fields(part) -> list[tuple[str, float | None, str]]:
    """Every numeric parameter of a part as (keyword, value, unit): the part format's
    keyword (gbw, slew-rate, ...), the SI value and its unit from the field's name."""
    rows = []
    for field in dataclasses.fields(part):
        value = getattr(part, field.name)
        if field.name in ("name", "family", "note", "builtin", "origin"):
            continue
        unit = next((u for s, u in _UNIT_SUFFIXES if field.name.endswith(s)), "")
        rows.append((_KEYWORDS.get(field.name, field.name.replace("_", "-")), value, unit))
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
        shown = measure(value, unit) if unit == "V/s" and value is not None else \
            _short(value, unit)
        out.print(f"  {name:<24} {shown}")
