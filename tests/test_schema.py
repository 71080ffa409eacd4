"""The one JSON Schema of the plain tree: valid Draft 2020-12, and in step with the grammar."""

import json

import pytest
from jsonschema import Draft202012Validator

from checker.cli import main
from checker.io.grammar import FORMS, PART_PARAMETERS, REQUIREMENTS, positional_slots
from checker.io.schema import stage_schema

SHARED_DEFS = {"value", "name", "designator"}  # the schema's own leaf types


def printed_schema(capsys) -> tuple[int, dict]:
    code = main(["schema"])
    return code, json.loads(capsys.readouterr().out)


def form_schema(name: str) -> dict:
    schema = stage_schema()
    return schema if name == "document" else schema["$defs"][name]


def grammar_keys(name: str) -> set[str]:
    """The tree keys a grammar form may fill: its positional fields and its children."""
    form = FORMS[name]
    return ({key for key, _count, _optional in positional_slots(form)}
            | {child.key for child in form.children.values()})


def test_schema_command_exits_zero(capsys):
    code, _schema = printed_schema(capsys)
    assert code == 0


def test_schema_command_output_is_a_valid_draft_2020_12_schema(capsys):
    _code, schema = printed_schema(capsys)
    Draft202012Validator.check_schema(schema)


def test_schema_command_prints_the_schema_the_validator_uses(capsys):
    _code, schema = printed_schema(capsys)
    assert schema == stage_schema()


def test_schema_declares_draft_2020_12():
    assert stage_schema()["$schema"] == "https://json-schema.org/draft/2020-12/schema"


def test_every_grammar_form_has_a_schema_definition():
    missing = set(FORMS) - {"document"} - set(stage_schema()["$defs"])
    assert missing == set()


def test_every_schema_definition_is_a_grammar_form_or_a_shared_type():
    extra = set(stage_schema()["$defs"]) - set(FORMS) - SHARED_DEFS
    assert extra == set()


@pytest.mark.parametrize("name", sorted(FORMS))
def test_every_grammar_keyword_of_a_form_is_a_schema_property(name):
    assert grammar_keys(name) - set(form_schema(name)["properties"]) == set()


@pytest.mark.parametrize("name", sorted(FORMS))
def test_every_schema_property_of_a_form_is_a_grammar_keyword(name):
    # "$schema" is the one extra: a JSON file may name its schema (no meaning here).
    assert set(form_schema(name)["properties"]) - grammar_keys(name) - {"$schema"} == set()


@pytest.mark.parametrize("name, keyword", [
    (name, keyword) for name, form in sorted(FORMS.items()) for keyword in form.children
])
def test_every_grammar_keyword_is_spelled_out_in_the_schema(name, keyword):
    # A scalar keyword is a property of its form; a nested form's keyword names its
    # definition (the property may be a plural such as "resistors").
    child = FORMS[name].children[keyword]
    spelled = set(form_schema(name)["properties"]) | set(stage_schema()["$defs"])
    assert keyword in spelled
    assert child.shape in ("scalar", "pair") or child.shape == keyword


@pytest.mark.parametrize("name", sorted(FORMS))
def test_every_required_property_is_a_declared_property(name):
    schema = form_schema(name)
    assert set(schema.get("required", [])) <= set(schema["properties"])


@pytest.mark.parametrize("name", sorted(FORMS))
def test_every_form_refuses_keys_it_does_not_declare(name):
    assert form_schema(name)["additionalProperties"] is False


@pytest.mark.parametrize("name, keyword", [
    (name, keyword) for name, form in sorted(FORMS.items())
    for keyword, child in form.children.items() if child.shape in FORMS
])
def test_a_nested_form_refers_to_its_definition(name, keyword):
    child = FORMS[name].children[keyword]
    item = form_schema(name)["properties"][child.key]
    if child.repeated:
        assert item["type"] == "array"
        item = item["items"]
    assert item == {"$ref": f"#/$defs/{child.shape}"}


def test_every_part_parameter_is_in_the_part_and_params_definitions():
    defs = stage_schema()["$defs"]
    assert set(PART_PARAMETERS) <= set(defs["part"]["properties"])
    assert set(PART_PARAMETERS) == set(defs["params"]["properties"])


def test_every_requirement_is_in_the_require_definition():
    assert set(REQUIREMENTS) == set(stage_schema()["$defs"]["require"]["properties"])


def test_every_reference_in_the_schema_resolves():
    schema = stage_schema()
    refs = []

    def walk(node):
        if isinstance(node, dict):
            if "$ref" in node:
                refs.append(node["$ref"])
            for value in node.values():
                walk(value)
        elif isinstance(node, list):
            for value in node:
                walk(value)

    walk(schema)
    assert refs, "the schema is expected to use $ref"
    unresolved = [ref for ref in refs
                  if ref.removeprefix("#/$defs/") not in schema["$defs"]]
    assert unresolved == []


def test_schema_accepts_a_minimal_stage_tree():
    tree = {"stages": [{"name": "s", "ground": "gnd"}]}
    assert list(Draft202012Validator(stage_schema()).iter_errors(tree)) == []


def test_schema_refuses_a_number_where_a_net_name_belongs():
    tree = {"stages": [{"name": "s", "ground": 1}]}
    errors = list(Draft202012Validator(stage_schema()).iter_errors(tree))
    assert [list(error.absolute_path) for error in errors] == [["stages", 0, "ground"]]


def test_schema_refuses_an_opamp_with_neither_part_nor_params():
    opamp = {"ref": "U1", "in+": "a", "in-": "b", "out": "c", "v+": "d", "v-": "e"}
    tree = {"stages": [{"name": "s", "ground": "gnd", "opamps": [opamp]}]}
    errors = list(Draft202012Validator(stage_schema()).iter_errors(tree))
    assert [error.validator for error in errors] == ["anyOf"]


def test_schema_refuses_a_source_with_both_range_and_amplitude():
    source = {"net": "in", "range": [0, 1], "amplitude": 1}
    tree = {"stages": [{"name": "s", "ground": "gnd", "sources": [source]}]}
    errors = list(Draft202012Validator(stage_schema()).iter_errors(tree))
    assert [error.validator for error in errors] == ["not"]
