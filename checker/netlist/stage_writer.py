"""Write a netlist's extracted stages as a stage file, each element's netlist line in a
comment beside it, so a team can adopt the stage format from an archive."""

from __future__ import annotations

import copy
import os
import re

from checker.io.grammar import FORMS, child_by_key
from checker.io.sexp_writer import atom, write_form
from checker.netlist.extract import Extraction
from checker.units import UnitError, parse_value

_PREFIXES = ((12, "T"), (9, "G"), (6, "M"), (3, "k"), (0, ""), (-3, "m"), (-6, "u"),
             (-9, "n"), (-12, "p"), (-15, "f"))
_PASSIVE_KINDS = {"resistors": "resistance", "capacitors": "capacitance",
                  "inductors": "inductance"}
_SOURCE_FIELDS = {"range": "signal", "amplitude": "signal", "offset": "signal",
                  "band": "frequency", "impedance": "resistance", "capacitance": "capacitance"}
_UNITS = {"voltage": "V", "current": "A", "frequency": "Hz"}


def si_text(value, kind: str) -> object:
    """``value`` (SI) as stage-format text that reads back to exactly the same float
    (``10k``, ``4.7n``, ``1M`` -- mega, as the stage format has it), else unchanged."""
    if not isinstance(value, float):
        return value
    if value == 0.0 or (value.is_integer() and 1.0 <= abs(value) < 1000.0 and not
                        _UNITS.get(kind)):
        return int(value)
    unit = _UNITS.get(kind, "")
    for exponent, prefix in _PREFIXES:
        mantissa = value / 10.0 ** exponent
        if 1.0 <= abs(mantissa) < 1000.0:
            text = f"{mantissa:.12g}{prefix}{unit}"
            try:
                # the same value to rounding (22n reads as 22 * 1e-9, one unit in the last
                # place from float("22e-9"))
                if abs(parse_value(text, kind) - value) <= 1e-14 * abs(value):
                    return text
            except UnitError:
                pass
            break
    return value


def readable(stage: dict) -> dict:
    """A copy of a stage tree with its SI floats written as engineering text."""
    stage = copy.deepcopy(stage)
    for supply in stage.get("supplies", []):
        supply["voltage"] = si_text(supply["voltage"], "voltage")
    for plural, kind in _PASSIVE_KINDS.items():
        for item in stage.get(plural, []):
            item["value"] = si_text(item["value"], kind)
    for source in stage.get("sources", []):
        signal = "current" if source.get("kind") == "current" else "voltage"
        for name, kind in _SOURCE_FIELDS.items():
            kind = signal if kind == "signal" else kind
            if isinstance(source.get(name), list):
                source[name] = [si_text(v, kind) for v in source[name]]
            elif name in source:
                source[name] = si_text(source[name], kind)
    for load in stage.get("loads", []):
        for name in ("resistance", "capacitance"):
            if name in load:
                load[name] = si_text(load[name], name)
    return stage


def stage_file_text(extraction: Extraction, netlist_path: str, map_path: str | None) -> str:
    """The stage file of one netlist's extraction."""
    lines = [f"; Stages extracted by ampcheck from {os.path.basename(netlist_path)}"
             + (f" with the netlist map {os.path.basename(map_path)}." if map_path else "."),
             "; Each element's netlist line is in the comment beside it. The sources and loads",
             "; marked 'assumed' stand for what is beyond the board: declare them before",
             "; adopting this file (docs/netlist.md).",
             "(version 1)"]
    stage_form = FORMS["stage"]
    for i, raw in enumerate(extraction.tree["stages"]):
        stage = readable(raw)
        lines.append("")
        head = [f"(stage {atom(stage['name'])}"]
        for key in ("note", "ground"):
            if key in stage:
                head.append(f"({key} {atom(stage[key])})")
        lines.append(" ".join(head))
        body = []
        for key, (keyword, child) in child_by_key(stage_form).items():
            if key in ("note", "ground") or key not in stage:
                continue
            items = stage[key] if child.repeated else [stage[key]]
            for j, item in enumerate(items):
                path = ("stages", i, key, j) if child.repeated else ("stages", i, key)
                # one line per element: nested forms (feeds, require) stay on it
                text = re.sub(r"\n *", " ", write_form(keyword, item, 1))
                comment = extraction.comments.get(path)
                body.append((text, comment))
        for j, (text, comment) in enumerate(body):
            closing = ")" if j == len(body) - 1 else ""
            lines.append(f"  {text}{closing}" + (f"  ; {comment}" if comment else ""))
        if not body:
            lines[-1] += ")"
    return "\n".join(lines) + "\n"
