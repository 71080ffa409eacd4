"""ampcheck: design-rule review of op-amp stages before layout."""

__version__ = "0.1.0"
