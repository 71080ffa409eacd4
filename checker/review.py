"""One review run: every file read, built, analysed and checked, as plain results the
reporters render. Never raises for a bad file: its problems become findings."""

from __future__ import annotations

import math

import numpy as np

from checker.analysis import Figures
from checker.analysis.figures import signed_gain
from checker.analysis.mna import SingularCircuit
from checker.analysis.poles import stage_poles
from checker.analysis.signal import stage_signals
from checker.analysis.topology import classify
from checker.engine import Rule, RunOptions, check_file_stages
from checker.files import load_file
from checker.findings import INPUT_RULE
from checker.model import OpAmpPart, Stage
from checker.records import FileResult, StageResult, StageSheet, count_by_severity  # noqa: F401


def review_file(path: str, library: dict[str, OpAmpPart], rules: list[Rule],
                options: RunOptions, figures_wanted: bool = True,
                catalogue: dict[str, Rule] | None = None, netlist_map=None,
                plots_wanted: str = "") -> FileResult:
    """Read, build, analyse and check one file; ``figures_wanted`` false skips the
    per-stage summary figures (for reports that show findings only). ``catalogue`` is
    every loaded rule (the verdicts read the settings of rules that may not be
    selected); ``netlist_map`` is what a netlist file is cut into stages with.
    ``plots_wanted`` "all" or "failing" draws each stage's sheet for the HTML review
    (checker/report/plots.py) while its figures are alive."""
    loaded = load_file(path, library, netlist_map)
    result = FileResult(path, problems=loaded.problems)
    if INPUT_RULE in options.ignore:  # an archive's unreadable legacy files, ignored
        kept = [f for f in result.problems if f.rule != INPUT_RULE]
        result.ignored_problems = len(result.problems) - len(kept)
        result.problems = kept
    if not loaded.ok:
        return result
    figures, checks = check_file_stages(loaded.stages, rules, options, catalogue)
    for stage in loaded.stages:
        stage_figures = figures[stage.name]
        summary, amplifiers = summarise(stage, stage_figures) if figures_wanted else ({}, {})
        check = checks[stage.name]
        result.stages.append(StageResult(stage.name, stage.origin.line, check.findings,
                                         summary, amplifiers, check.verdicts,
                                         check.cautions,
                                         _sheet(stage, stage_figures, check, options,
                                                catalogue, plots_wanted),
                                         _gain_unit(stage)))
    return result


def _gain_unit(stage: Stage) -> str:
    """The summary gain's unit: that of the first signal (analysis/signal.py), V/A from
    a current source (a transimpedance, printed in Ω), V/V otherwise."""
    return "Ω" if stage.sources and stage.sources[0].kind == "current" else "V/V"


def _sheet(stage, figures, check, options, catalogue, plots_wanted) -> StageSheet | None:
    """The stage's element list and plots for the HTML review (None when not wanted)."""
    if not plots_wanted:
        return None
    from checker.report.plots import stage_sheet  # matplotlib: only for an HTML review

    return stage_sheet(stage, figures, check.findings, check.verdicts,
                       lambda rule_id: options.settings_of(rule_id, catalogue), plots_wanted)


def _finite(value) -> float | None:
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


SUMMARY_KEYS = ("topology", "gain", "gain_from_net", "input_resistance", "output_resistance",
                "bandwidth", "phase_margin", "crossover", "noise_gain", "feedback_pole",
                "output_low", "output_high", "stable", "pole_frequency", "pole_damping",
                "pole_q", "step_overshoot", "peaking_db", "oscillation_frequency")


def summarise(stage: Stage, figures: Figures) -> tuple[dict, dict]:
    """The stage's key figures (for the report line and the JSON document).

    The gain and bandwidth are the signal's, from the source itself (for a
    differential pair, Vout/(V1 - V2)); the gain from the source's net is kept where it
    differs. No closed-loop figure (gain, bandwidth, phase margin, crossover, noise
    gain) is given for a stage with an op-amp whose loop has no negative feedback, and no
    output range where a loop is regenerative (the output latches at a rail)."""
    summary = dict.fromkeys(SUMMARY_KEYS)
    amplifiers: dict = {}
    try:
        loops = figures.loops
    except SingularCircuit:
        return summary, amplifiers
    names = []
    for opamp in stage.opamps:
        loop = loops[opamp.ref]
        closed = loop.negative_somewhere
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
            "phase_margin": _finite(loop.phase_margin_deg) if closed else None,
            "crossover": _finite(loop.crossover_hz) if closed else None,
            "gain_margin": _finite(loop.margins.gain_margin_db) if closed else None,
            "noise_gain": _finite(loop.noise_gain_dc) if closed else None,
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
    summary.update(_pole_figures(figures))
    open_loop = any(not loops[o.ref].negative_somewhere for o in stage.opamps) \
        or not stage_poles(figures).stable  # an oscillating stage has no closed-loop gain
    worst = figures.worst_phase_margin
    ref = worst[0] if worst else stage.opamps[-1].ref
    if not open_loop:
        for key in ("phase_margin", "crossover", "noise_gain", "feedback_pole"):
            summary[key] = amplifiers[ref][key]
    if figures.sources:
        signal = stage_signals(figures)[0]
        if not open_loop:
            summary["gain"] = _finite(signed_gain(signal.gain))
            if signal.gain_from_net is not None and \
                    abs(signal.gain_from_net - signal.gain) > 1e-3 * abs(signal.gain):
                summary["gain_from_net"] = _finite(signed_gain(signal.gain_from_net))
            summary["bandwidth"] = _finite(signal.bandwidth_high_hz)
        voltage = [s.input_resistance_min for s in figures.sources if s.source.kind == "voltage"]
        if voltage and not any(loops[o.ref].regenerative_at_dc for o in stage.opamps):
            summary["input_resistance"] = _finite(min(voltage))
        reference = signal.reference_hz
        at = int(np.argmin(np.abs(figures.frequencies_hz - reference)))
        summary["output_resistance"] = _finite(abs(figures.output_impedance[at]))
    if any(loops[o.ref].regenerative_at_dc for o in stage.opamps):
        return summary, amplifiers  # the output latches at a rail: no linear range
    output = figures.output_range  # what the output does: clipped where an op-amp drives it
    summary["output_low"] = _finite(output.clipped_low)
    summary["output_high"] = _finite(output.clipped_high)
    return summary, amplifiers


def _pole_figures(figures: Figures) -> dict:
    """The stage's natural frequencies in a few numbers: stable or not, the dominant
    complex pair's frequency, damping, Q, step overshoot and peaking, and where it is
    unstable the frequency it oscillates at (0 for a runaway)."""
    poles = stage_poles(figures)
    pair = poles.dominant_pair
    result = {"stable": poles.stable, "oscillation_frequency": _finite(poles.oscillation_hz())}
    if pair is not None:
        result.update(pole_frequency=_finite(pair.frequency_hz),
                      pole_damping=_finite(pair.damping), pole_q=_finite(pair.q),
                      step_overshoot=_finite(pair.overshoot), peaking_db=_finite(pair.peaking_db))
    return result
