"""Reporters: one module per output format; they know findings and figures only."""
