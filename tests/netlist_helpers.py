"""Helpers for the netlist tests: netlist and map text in, stages and extraction out."""

from __future__ import annotations

from checker.netlist.load import build_netlist_stages, parse_netlist
from checker.netlist.mapping import parse_map
from checker.parts.library import load_library

# An op-amp of the DC checks: flat open-loop gain, nothing else (no input or output
# resistance), so the same circuit in Lcapy is a controlled source of that gain.
IDEAL_MAP_HEADER = """(version 1)
(opamp-model OA (params (open-loop-gain 1e6)) (pins in+ in- v+ v- out))
"""


def extract_text(netlist: str, netlist_map: str | None = IDEAL_MAP_HEADER,
                 path: str = "board.cir"):
    """(stages by name, extraction) of a netlist text with a map text."""
    mapping = parse_map(netlist_map, "board.netmap") if netlist_map is not None else None
    parsed, extraction = parse_netlist(netlist, path, mapping)
    stages = build_netlist_stages(parsed, extraction, load_library())
    return {stage.name: stage for stage in stages}, extraction


def opamp_refs(stages) -> dict[str, list[str]]:
    return {name: [o.ref for o in stage.opamps] for name, stage in stages.items()}
