"""Helpers for the analysis tests: stage text in, Stage or Figures out.

A test writes its stage in the s-expression stage format and gives the op-amp's
parameters inline with ``(params ...)`` instead of ``(part NAME)``; :func:`params` spells
that form from Python keywords so a test can keep its numbers next to its reference.
"""

from __future__ import annotations

from checker.analysis import AnalysisOptions, Figures, analyse
from checker.build import build_stages
from checker.io.load import parse_text
from checker.model import Stage
from checker.parts.library import load_library


def stage_from_text(text: str, path: str = "<test>.stage") -> Stage:
    """The one stage written in ``text`` (a ``(version 1)`` header is added if missing)."""
    if "(version" not in text:
        text = "(version 1)\n" + text
    stages = build_stages(parse_text(text, path, "sexp"), load_library())
    assert len(stages) == 1, f"expected one stage in the text, got {len(stages)}"
    return stages[0]


def analyse_text(text: str, stray_capacitance_f: float = 0.0, points: int | None = None
                 ) -> Figures:
    """Figures of the one stage in ``text``, with no stray capacitance unless asked."""
    options = AnalysisOptions(stray_capacitance_f=stray_capacitance_f)
    if points is not None:
        options = AnalysisOptions(stray_capacitance_f=stray_capacitance_f, points=points)
    return analyse(stage_from_text(text), options)


def params(**values: float | str) -> str:
    """The inline ``(params ...)`` form of an op-amp: Python keywords with ``_`` for
    ``-`` (``open_loop_gain=250e3, gbw="40MHz"`` -> ``(params (open-loop-gain 250000.0)
    (gbw 40MHz))``). Floats are written with full precision."""
    items = []
    for key, value in values.items():
        text = repr(float(value)) if isinstance(value, (int, float)) else value
        items.append(f"({key.replace('_', '-')} {text})")
    return "(params " + " ".join(items) + ")"


def rails() -> str:
    """Supplies and ground shared by the test stages: +-15 V, ground net gnd."""
    return "(supply vcc 15V) (supply vee -15V) (ground gnd)"
