"""Helpers for the rule tests: run one rule over stage text, pick out its findings.

A rule test writes its stage file as text, starting with ``(version 1)`` on line 1, so
the line of every element is plain to see in the test; :func:`line_of` finds it again,
so a test can state the line it expects and also check that the text agrees.

The analysis runs with no stray capacitance unless a test asks for some, so the numbers
derived by hand in a test see exactly the parts written in the stage.
"""

from __future__ import annotations

import math
import textwrap

from checker.analysis import AnalysisOptions, Figures, analyse
from checker.build import build_stages
from checker.engine import RunOptions, check_stages, load_rules
from checker.findings import Finding
from checker.io.load import parse_text
from checker.model import Stage
from checker.parts.library import load_library

PATH = "t.stage"
TWO_PI = 2 * math.pi

_RULES = load_rules()
_LIBRARY = load_library()


def stage_text(text: str) -> str:
    """Test stage text without its common indentation or a leading newline."""
    return textwrap.dedent(text).lstrip("\n")


def mesh_stage(opamp: str, elements: list[str]) -> str:
    """Stage text of an inverting stage "mesh" (in+ at ground, feedback node fb, output
    out, +-15 V) whose resistor network is ``elements``; one source at net in, 10k load."""
    return stage_text(f"""
        (version 1)
        (stage mesh (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {opamp} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          {' '.join(elements)}
          (source in (range -0.1V 0.1V) (band 0Hz 10Hz) (impedance 50))
          (load out (resistance 10k)))
        """)


def build(text: str) -> list[Stage]:
    """Every stage of a stage file given as text."""
    return build_stages(parse_text(stage_text(text), PATH), _LIBRARY)


def run(text: str, rule_id: str, stray_capacitance_f: float = 0.0,
        settings: dict[str, float] | None = None
        ) -> tuple[dict[str, Figures], dict[str, list[Finding]]]:
    """(figures, findings) by stage name for the stage file ``text`` checked by one rule."""
    options = RunOptions(analysis=AnalysisOptions(stray_capacitance_f=stray_capacitance_f),
                         settings={rule_id: settings} if settings else {},
                         judge_requirements=False)
    return check_stages(build(text), [_RULES[rule_id]], options)


def findings(text: str, rule_id: str, **kwargs) -> list[Finding]:
    """The findings of rule ``rule_id`` over every stage of ``text``, in order."""
    _figures, by_stage = run(text, rule_id, **kwargs)
    found = [f for stage_findings in by_stage.values() for f in stage_findings]
    unexpected = [f for f in found if f.rule != rule_id]
    assert not unexpected, f"the engine reported something else: {unexpected}"
    return found


def only(text: str, rule_id: str, **kwargs) -> Finding:
    """The one finding of ``rule_id`` over ``text`` (fails unless there is exactly one)."""
    found = findings(text, rule_id, **kwargs)
    assert len(found) == 1, f"expected one {rule_id} finding, got {found}"
    return found[0]


def figures_of(text: str, stage: str | None = None, stray_capacitance_f: float = 0.0
               ) -> Figures:
    """The figures of one stage of ``text`` (the first when no name is given)."""
    stages = build(text)
    chosen = next(s for s in stages if s.name == stage) if stage else stages[0]
    return analyse(chosen, AnalysisOptions(stray_capacitance_f=stray_capacitance_f))


def line_of(text: str, needle: str) -> int:
    """1-based line of the only line of ``text`` (as :func:`stage_text` lays it out) that
    contains ``needle``."""
    lines = [i for i, line in enumerate(stage_text(text).splitlines(), start=1)
             if needle in line]
    assert len(lines) == 1, f"{needle!r} is on lines {lines}"
    return lines[0]


def params(**values: float | str) -> str:
    """The inline ``(params ...)`` form from Python keywords, ``_`` for ``-``; floats are
    written with full precision (``gbw=1e6`` -> ``(gbw 1000000.0)``)."""
    items = []
    for key, value in values.items():
        text = repr(float(value)) if isinstance(value, (int, float)) else value
        items.append(f"({key.replace('_', '-')} {text})")
    return "(params " + " ".join(items) + ")"


def parallel(*resistances: float) -> float:
    """Resistors in parallel."""
    return 1.0 / sum(1.0 / r for r in resistances)


def db(ratio: float) -> float:
    """20 log10 of a voltage ratio."""
    return 20 * math.log10(ratio)
