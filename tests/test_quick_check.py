"""The fast schema check agrees with jsonschema (the reference implementation) on
valid trees and on trees broken in many ways."""

import json

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from jsonschema import Draft202012Validator
from test_convert import documents

from checker.io.quick_check import build
from checker.io.schema import _inlined, quick_check, stage_schema

REFERENCE = Draft202012Validator(stage_schema())  # the schema as printed, $refs and all

junk = st.one_of(st.none(), st.booleans(), st.integers(), st.floats(allow_nan=False),
                 st.text(max_size=5), st.lists(st.integers(), max_size=3),
                 st.dictionaries(st.text(max_size=4), st.integers(), max_size=2))


@st.composite
def broken(draw):
    """A valid tree with one node replaced, one key added or one key removed."""
    tree = json.loads(json.dumps(draw(documents)))
    paths = []

    def walk(node, path):
        paths.append(path)
        if isinstance(node, dict):
            for key, value in node.items():
                walk(value, path + (key,))
        elif isinstance(node, list):
            for i, value in enumerate(node):
                walk(value, path + (i,))

    walk(tree, ())
    path = draw(st.sampled_from(paths))
    parent = tree
    for step in path[:-1]:
        parent = parent[step]
    action = draw(st.sampled_from(["replace", "add", "remove"]))
    if not path or action == "add":
        target = tree if not path else parent[path[-1]]
        if isinstance(target, dict):
            target[draw(st.sampled_from(["bogus", "value", "ref", "nets", "kind"]))] = draw(junk)
        return tree
    if action == "remove" and isinstance(parent, dict):
        del parent[path[-1]]
        return tree
    parent[path[-1]] = draw(junk)
    return tree


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(documents)
def test_valid_trees_pass_both(tree):
    assert REFERENCE.is_valid(tree) and quick_check()(tree)


@settings(max_examples=500, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(broken())
def test_verdicts_agree_on_broken_trees(tree):
    assert quick_check()(tree) == REFERENCE.is_valid(tree)


def test_inlined_schema_means_the_same_as_the_printed_one():
    Draft202012Validator.check_schema(_inlined(stage_schema()))
    assert "$ref" not in json.dumps(_inlined(stage_schema()))


def test_an_unknown_keyword_stops_the_build():
    try:
        build({"type": "object", "patternProperties": {}})
    except ValueError as error:
        assert "patternProperties" in str(error)
    else:
        raise AssertionError("an unknown keyword must not be ignored")
