"""How large a stage file may be, so that the work per file stays bounded.

A stage is one op-amp stage of a board: the samples have one to four op-amps and a few
passives each. The analysis solves one system of about (nets + op-amps + sources)
unknowns per frequency and copy of the stage, so its cost grows with the cube of the
size; the limits below leave room for large stages (a multi-op-amp filter, a resistor
ladder) and keep the largest legal stage well within the per-file time budget. They
are checked before anything else about a stage (documented in docs/format.md, "Limits").
"""

from __future__ import annotations

MAX_STAGES = 64  # stages in one file
MAX_OPAMPS = 16  # op-amps in one stage
MAX_ELEMENTS = 256  # op-amps, resistors, capacitors, inductors, sources and loads
MAX_NETS = 256  # distinct nets in one stage, the ground and supplies included
MAX_PARTS = 256  # part definitions in one file

ELEMENT_KEYS = ("opamps", "resistors", "capacitors", "inductors", "sources", "loads")


def stage_nets(node: dict) -> set[str]:
    """Every net a stage's plain tree names (before any checking)."""
    nets: set[str | None] = {node.get("ground")}
    nets.update(item.get("net") for item in node.get("supplies", []))
    for opamp in node.get("opamps", []):
        nets.update(opamp.get(pin) for pin in ("in+", "in-", "out", "v+", "v-"))
    for key in ("resistors", "capacitors", "inductors"):
        for item in node.get(key, []):
            nets.update(item.get("nets", ()))
    for key in ("sources", "loads"):
        nets.update(item.get("net") for item in node.get(key, []))
    return {net for net in nets if net is not None}


def stage_too_large(node: dict) -> str | None:
    """Why a stage's plain tree is beyond the limits, or None."""
    opamps = len(node.get("opamps", []))
    if opamps > MAX_OPAMPS:
        return f"has {opamps} op-amps; the limit is {MAX_OPAMPS} per stage"
    elements = sum(len(node.get(key, [])) for key in ELEMENT_KEYS)
    if elements > MAX_ELEMENTS:
        return f"has {elements} elements; the limit is {MAX_ELEMENTS} per stage"
    nets = len(stage_nets(node))
    if nets > MAX_NETS:
        return f"has {nets} nets; the limit is {MAX_NETS} per stage"
    return None
