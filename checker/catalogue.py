"""The engine's own findings, by id: a summary and the severity each is emitted with.

A leaf module (no numpy, no solver): the rule catalogue, the docs and the reporters read
it without loading the engine.
"""

from __future__ import annotations

from checker.findings import Severity

ENGINE_RULES = {
    "input-invalid": "A file could not be read, parsed, validated or built.",
    "stage-unsolvable": "The stage's equations have no unique solution as drawn.",
    "output-on-rail": "An op-amp's output is wired straight to a supply rail.",
    "rule-failed": "A rule stopped with an internal error; the other rules still ran.",
    "review-failed": "A file's review stopped (an internal error, its time budget or its"
                     " memory cap); the other files were still reviewed.",
    "waiver-invalid": "A waiver in a stage file gives no reason or names no known rule.",
    "waiver-stale": "A waiver in a stage file matched no finding; remove it.",
    "baseline-stale": "A baseline entry matched no finding; prune the baseline.",
    "requirement-unmet": "A stated requirement is not met and no rule names the cause.",
    "requirement-unchecked": "A stated requirement could not be checked (the reason is"
                             " given).",
}
REQUIREMENT_UNMET, REQUIREMENT_UNCHECKED = "requirement-unmet", "requirement-unchecked"
# The severity each engine finding is emitted with (the catalogue prints these).
ENGINE_SEVERITIES = {rid: Severity.ERROR for rid in ENGINE_RULES} | {
    "waiver-stale": Severity.INFO, "baseline-stale": Severity.INFO,
    "requirement-unchecked": Severity.INFO}
