"""The numeric core: modified nodal analysis of a Stage with an op-amp macro-model.

Knows matrices and physics, nothing of files, rules or output. solution.py owns the
solves of one stage; the figure modules (loops, sources, ranges, network, noise,
spread, signal, poles, dc_error) are functions of it; figures.py is the thin cache the
rules read. Entry point: :func:`analyse`, which returns lazily computed :class:`Figures`.
"""

from checker.analysis.figures import AnalysisOptions, Figures, analyse

__all__ = ["AnalysisOptions", "Figures", "analyse"]
