"""Readers and writers of the stage-description format: syntax and positions only."""
