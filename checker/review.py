"""One review run: every file read, built, analysed and checked, as plain results the
reporters render. Never raises for a bad file: its problems become findings."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from checker.analysis import Figures
from checker.analysis.figures import signed_gain
from checker.analysis.mna import SingularCircuit
from checker.analysis.topology import classify
from checker.engine import Rule, RunOptions, check_stages
from checker.files import load_file
from checker.findings import Finding, Severity
from checker.model import OpAmpPart, Stage


@dataclass
class StageResult:
    """What a report needs of one stage: small and picklable (no model, no arrays), so a
    worker process can send it back and a long audit keeps little in memory."""

    name: str
    line: int
    findings: list[Finding]
    summary: dict = field(default_factory=dict)  # key figures, SI floats or None
    amplifiers: dict = field(default_factory=dict)  # per op-amp figures


@dataclass
class FileResult:
    path: str
    problems: list[Finding] = field(default_factory=list)  # input-invalid findings
    stages: list[StageResult] = field(default_factory=list)

    def findings(self) -> list[Finding]:
        found = list(self.problems)
        for result in self.stages:
            found.extend(result.findings)
        return sorted(found, key=Finding.sort_key)


def review_file(path: str, library: dict[str, OpAmpPart], rules: list[Rule],
                options: RunOptions, figures_wanted: bool = True,
                netlist_map=None) -> FileResult:
    """Read, build, analyse and check one file; ``figures_wanted`` false skips the
    per-stage summary figures (for reports that show findings only); ``netlist_map``
    is what a netlist file is cut into stages with."""
    loaded = load_file(path, library, netlist_map)
    result = FileResult(path, problems=loaded.problems)
    if not loaded.ok:
        return result
    figures, findings = check_stages(loaded.stages, rules, options)
    for stage in loaded.stages:
        stage_figures = figures[stage.name]
        summary, amplifiers = summarise(stage, stage_figures) if figures_wanted else ({}, {})
        result.stages.append(StageResult(stage.name, stage.origin.line, findings[stage.name],
                                         summary, amplifiers))
    return result


def _finite(value) -> float | None:
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def summarise(stage: Stage, figures: Figures) -> tuple[dict, dict]:
    """The stage's key figures (for the report line and the JSON document)."""
    summary = dict.fromkeys(("topology", "gain", "input_resistance", "output_resistance",
                             "bandwidth", "phase_margin", "crossover", "noise_gain",
                             "feedback_pole", "output_low", "output_high"))
    amplifiers: dict = {}
    try:
        loops = figures.loops
    except SingularCircuit:
        return summary, amplifiers
    names = []
    for opamp in stage.opamps:
        loop = loops[opamp.ref]
        resistance, capacitance, pole = figures.inverting_input[opamp.ref]
        topology = classify(stage, opamp, loop.feedback)
        names.append(topology.name)
        node = figures.node_range(opamp.out)
        current = figures.output_currents[opamp.ref]
        amplifiers[opamp.ref] = {
            "part": opamp.part.name,
            "topology": topology.name,
            "feedback": loop.feedback,
            "loop_gain_dc": _finite(loop.loop_gain_dc),
            "phase_margin": _finite(loop.phase_margin_deg),
            "crossover": _finite(loop.crossover_hz),
            "gain_margin": _finite(loop.margins.gain_margin_db),
            "noise_gain": _finite(loop.noise_gain_dc),
            "feedback_pole": _finite(pole),
            "inverting_input_resistance": _finite(resistance),
            "inverting_input_capacitance": _finite(capacitance),
            "output_low": _finite(node.low),
            "output_high": _finite(node.high),
            "usable_low": _finite(node.clip_low),
            "usable_high": _finite(node.clip_high),
            "output_current_sourced": _finite(current.most_sourced_a),
            "output_current_sunk": _finite(current.most_sunk_a),
        }
    summary["topology"] = names[0] if len(set(names)) == 1 else " + ".join(names)
    worst = figures.worst_phase_margin
    if worst:
        ref = worst[0]
    else:
        ref = stage.opamps[-1].ref
    for key in ("phase_margin", "crossover", "noise_gain", "feedback_pole"):
        summary[key] = amplifiers[ref][key]
    if figures.sources:
        main = figures.sources[0]
        summary["gain"] = _finite(signed_gain(main.gain_mid))
        voltage = [s.input_resistance_min for s in figures.sources if s.source.kind == "voltage"]
        summary["input_resistance"] = _finite(min(voltage)) if voltage else None
        summary["bandwidth"] = _finite(main.bandwidth_high_hz)
        at = int(np.argmin(np.abs(figures.frequencies_hz - main.reference_hz)))
        summary["output_resistance"] = _finite(abs(figures.output_impedance[at]))
    output = figures.output_range  # what the output does: clipped where an op-amp drives it
    summary["output_low"] = _finite(output.clipped_low)
    summary["output_high"] = _finite(output.clipped_high)
    return summary, amplifiers


def count_by_severity(findings: list[Finding]) -> dict[str, int]:
    counts = {severity.label: 0 for severity in sorted(Severity, reverse=True)}
    for finding in findings:
        counts[finding.severity.label] += 1
    return counts
