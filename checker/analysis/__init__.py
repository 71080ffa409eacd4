"""The numeric core: modified nodal analysis of a Stage with an op-amp macro-model.

Pure functions over numpy arrays; knows matrices and physics, nothing of files, rules or
output. Entry point: :func:`analyse`, which returns lazily computed :class:`Figures`.
"""

from checker.analysis.figures import AnalysisOptions, Figures, analyse

__all__ = ["AnalysisOptions", "Figures", "analyse"]
