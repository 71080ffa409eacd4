"""Each built-in rule's docstring carries a stage it passes and a stage it fails
(``Passes:`` and ``Fails:``); this test checks both with the rule alone, under the
default analysis options a user gets, so the docs cannot drift from the rule.

An example is stage text, or, for a rule about netlists, a netlist (its first line a
``*`` title) and its netlist map after a line ``---``."""

from __future__ import annotations

import pytest

from checker.build import build_stages
from checker.engine import RunOptions, check_stages, load_rules
from checker.io.load import parse_text
from checker.netlist.load import build_netlist_stages, parse_netlist
from checker.netlist.mapping import parse_map
from checker.parts.library import load_library

RULES = {rule_id: rule for rule_id, rule in load_rules().items()
         if rule.module.startswith("checker.rules.")}
LIBRARY = load_library()


def example_stages(rule_id: str, text: str) -> list:
    if not text.startswith("*"):
        return build_stages(parse_text(text, f"{rule_id}-example.stage"), LIBRARY)
    netlist, _, map_text = text.partition("\n---\n")
    mapping = parse_map("(version 1)\n" + map_text, f"{rule_id}-example.netmap")
    parsed, extraction = parse_netlist(netlist + "\n", f"{rule_id}-example.cir", mapping)
    return build_netlist_stages(parsed, extraction, LIBRARY)


def rule_findings(rule_id: str, text: str) -> list:
    stages = example_stages(rule_id, text)
    _figures, by_stage = check_stages(stages, [RULES[rule_id]], RunOptions())
    return [f for found in by_stage.values() for f in found if f.rule == rule_id]


def test_every_built_in_rule_has_both_examples():
    missing = sorted(rule_id for rule_id, rule in RULES.items()
                     if set(rule.examples()) != {"Passes", "Fails"})
    assert missing == []


@pytest.mark.parametrize("rule_id", sorted(RULES))
def test_the_rule_passes_its_passing_example(rule_id):
    example = RULES[rule_id].examples().get("Passes")
    assert example, f"{rule_id} has no Passes: example"
    assert rule_findings(rule_id, example) == []


@pytest.mark.parametrize("rule_id", sorted(RULES))
def test_the_rule_fails_its_failing_example(rule_id):
    example = RULES[rule_id].examples().get("Fails")
    assert example, f"{rule_id} has no Fails: example"
    assert rule_findings(rule_id, example), f"{rule_id} did not fire on its Fails: example"


def test_examples_do_not_leak_into_the_prose_sections():
    for rule in RULES.values():
        for text in rule.sections().values():
            assert "(stage " not in text and "\n---\n" not in text, rule.id
