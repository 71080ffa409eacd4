"""One netlist file end to end up to the model: read, extract, validate, build."""

from __future__ import annotations

from dataclasses import replace

from checker.build import build_stages
from checker.io.load import ParsedFile, read_text
from checker.io.netlist_reader import read_netlist
from checker.io.positions import InputErrors
from checker.io.schema import validate
from checker.model import OpAmpPart, Stage
from checker.netlist.extract import Extraction, extract
from checker.netlist.mapping import NetlistMap


def parse_netlist(text: str, path: str, netlist_map: NetlistMap | None
                  ) -> tuple[ParsedFile, Extraction]:
    """The netlist's extracted stages as a validated ParsedFile (positions at the
    netlist's lines) and the extraction's notes and comments; InputErrors when bad."""
    extraction = extract(read_netlist(text, path), netlist_map)
    problems = validate(extraction.tree, extraction.positions, path)
    if problems:
        raise InputErrors(problems)
    return ParsedFile(path, "netlist", extraction.tree, extraction.positions), extraction


def read_netlist_file(path: str, netlist_map: NetlistMap | None
                      ) -> tuple[ParsedFile, Extraction]:
    return parse_netlist(read_text(path), path, netlist_map)


def build_netlist_stages(parsed: ParsedFile, extraction: Extraction,
                         library: dict[str, OpAmpPart]) -> list[Stage]:
    """The model's stages, each with the notes the extraction made for it, and each
    source that is another stage's output given that output's range (see below)."""
    stages = [replace(stage, reader_notes=tuple(extraction.notes.get(stage.name, ())))
              for stage in build_stages(parsed, library)]
    return _ranges_from_upstream(stages, extraction)


def _ranges_from_upstream(stages: list[Stage], extraction: Extraction) -> list[Stage]:
    """A source that is another stage's output takes that output's DC range, clipped at
    its rails, from the upstream stage's own analysis, as the stage format asks of a
    stage fed by another (docs/format.md, "source"); upstream stages first, so a chain
    passes its ranges on. The tree is updated too, so a written stage file holds them.
    A source the netlist map declares keeps its declared range."""
    from checker.analysis import AnalysisOptions, analyse
    from checker.analysis.mna import SingularCircuit

    by_name = {stage.name: i for i, stage in enumerate(stages)}
    trees = {tree["name"]: tree for tree in extraction.tree["stages"]}
    links = [link for link in extraction.links if link[0] in by_name and link[2] in by_name]
    done = set(by_name) - {link[0] for link in links}  # fed by no other stage
    for _ in range(len(stages) + 1):
        waiting = [link for link in links if link[0] not in done]
        if not waiting:
            break
        upstream_of: dict[str, set[str]] = {}
        for stage, _net, upstream in waiting:
            upstream_of.setdefault(stage, set()).add(upstream)
        ready = [name for name, ups in upstream_of.items() if not (ups - done - {name})]
        if not ready:
            break
        for name in ready:
            for stage_name, net, upstream in waiting:
                if stage_name != name:
                    continue
                i = by_name[name]
                index = next((k for k, s in enumerate(stages[i].sources) if s.net == net),
                             None)
                if index is None or stages[i].sources[index].low is not None:
                    continue
                try:
                    node = analyse(stages[by_name[upstream]],
                                   AnalysisOptions()).node_range(net)
                    low, high = node.clipped_low, node.clipped_high
                except (SingularCircuit, KeyError, ValueError, ArithmeticError):
                    continue
                source = stages[i].sources[index]
                label = f"{source.label}, {low:.4g} V to {high:.4g} V by its analysis"
                sources = list(stages[i].sources)
                sources[index] = replace(source, low=min(low, high), high=max(low, high),
                                         label=label)
                stages[i] = replace(stages[i], sources=tuple(sources))
                tree = trees[name]["sources"][index]
                tree["range"] = [min(low, high), max(low, high)]
                tree["label"] = label
            done.add(name)
    return stages


def load_netlist_stages(path: str, library: dict[str, OpAmpPart],
                        netlist_map: NetlistMap | None) -> list[Stage]:
    """Read, extract, validate and build one netlist file."""
    parsed, extraction = read_netlist_file(path, netlist_map)
    return build_netlist_stages(parsed, extraction, library)
