"""The tags of each rule for SARIF ``properties.tags``: every rule is tagged
``design-review`` and with the area it checks, so a code-scanning view can filter by
area. These are circuit-design findings, not vulnerabilities: no rule is tagged
``security``, and no rule carries a security severity. A rule not listed here (a user
rule) is tagged ``design-review`` and ``user-rule``.

A leaf module: ids only, no rule is loaded.
"""

from __future__ import annotations

BASE_TAG = "design-review"
USER_RULE_TAG = "user-rule"

AREAS: dict[str, tuple[str, ...]] = {
    "stability": ("feedback-pole", "loop-margin", "stable-gain", "unstable-stage",
                  "swapped-inputs"),
    "accuracy": ("gain-tolerance", "difference-balance", "dc-error", "integrator-drift"),
    "speed": ("bandwidth", "slew-rate"),
    "signal-range": ("rail-headroom", "common-mode-range", "supply-range"),
    "loading": ("input-resistance", "load-isolation", "output-current"),
    "noise": ("noise",),
    "components": ("preferred-values", "resistor-range", "resistor-power"),
    "wiring": ("floating-input", "open-loop", "boundary-assumed", "not-analysed",
               "output-on-rail"),
    "input": ("input-invalid", "stage-unsolvable"),
    "tool": ("rule-failed", "review-failed"),
    "waivers": ("waiver-invalid", "waiver-stale", "baseline-stale"),
    "requirements": ("requirement-unmet", "requirement-unchecked"),
}
AREA_OF: dict[str, str] = {rule_id: area for area, ids in AREAS.items() for rule_id in ids}


def rule_tags(rule_id: str) -> list[str]:
    """['design-review', AREA] for a known rule; ['design-review', 'user-rule'] else."""
    return [BASE_TAG, AREA_OF.get(rule_id, USER_RULE_TAG)]
