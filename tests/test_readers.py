"""Bad input: every problem is reported at its exact line and column, never raised.

Each test writes a small file into tmp_path and reads it the way `ampcheck check` does
(checker.files.load_file), or with checker.io.load.read_file where only the reader is
meant. Lines and columns are 1-based and count characters.
"""

import json

import pytest

import checker.io.load
from checker.files import load_file
from checker.io.load import read_file
from checker.io.positions import InputErrors
from checker.parts.library import load_library

# A valid inverting stage; the line numbers below are used by the tests.
GOOD_STAGE = """\
(stage inv
  (ground gnd)
  (supply vcc 15V)
  (supply vee -15V)
  (opamp U1 (part gp-bipolar) (in+ gnd) (in- sum) (out vout) (v+ vcc) (v- vee))
  (resistor R1 vin sum 10k)
  (resistor R2 sum vout 100k)
  (source vin (amplitude 100mV))
  (load vout (resistance 10k)))
"""
# Columns used below, counted in the text above: on line 5 "(opamp" starts at column 3,
# "(part" at 13 and "(in+" at 31; on line 6 "(resistor" starts at 3 and "10k" at 24.

GOOD_JSON = {
    "stages": [{
        "name": "inv", "ground": "gnd",
        "supplies": [{"net": "vcc", "voltage": "15V"}, {"net": "vee", "voltage": "-15V"}],
        "opamps": [{"ref": "U1", "part": "gp-bipolar", "in+": "gnd", "in-": "sum",
                    "out": "vout", "v+": "vcc", "v-": "vee"}],
        "resistors": [{"ref": "R1", "nets": ["vin", "sum"], "value": "10k"},
                      {"ref": "R2", "nets": ["sum", "vout"], "value": "100k"}],
        "sources": [{"net": "vin", "amplitude": "100mV"}],
        "loads": [{"net": "vout", "resistance": "10k"}],
    }]
}


@pytest.fixture(scope="module")
def library():
    return load_library()


def write(tmp_path, name, content):
    path = tmp_path / name
    if isinstance(content, bytes):
        path.write_bytes(content)
    else:
        path.write_text(content, encoding="utf-8")
    return str(path)


def problems_of(tmp_path, library, name, content):
    """(line, column, message) of every problem of the file, which must fail."""
    loaded = load_file(write(tmp_path, name, content), library)
    assert not loaded.ok, "the file was expected to fail"
    return [(p.line, p.column, p.message) for p in loaded.problems]


def only_problem(tmp_path, library, name, content):
    found = problems_of(tmp_path, library, name, content)
    assert len(found) == 1, found
    return found[0]


def stage_with(old, new):
    assert old in GOOD_STAGE
    return GOOD_STAGE.replace(old, new)


# -- the good files are good -------------------------------------------------------------

def test_the_good_stage_used_below_loads(tmp_path, library):
    loaded = load_file(write(tmp_path, "good.stage", GOOD_STAGE), library)
    assert loaded.problems == []
    assert [stage.name for stage in loaded.stages] == ["inv"]


def test_the_good_json_stage_used_below_loads(tmp_path, library):
    loaded = load_file(write(tmp_path, "good.stage.json", json.dumps(GOOD_JSON)), library)
    assert loaded.problems == []


# -- s-expression syntax -----------------------------------------------------------------

def test_unclosed_parenthesis_is_reported_where_it_opens(tmp_path, library):
    line, column, message = only_problem(tmp_path, library, "a.stage",
                                         "(stage a\n  (ground gnd)\n")
    assert (line, column) == (1, 1)
    assert "never closed" in message


def test_extra_closing_parenthesis_is_reported_where_it_stands(tmp_path, library):
    line, column, message = only_problem(tmp_path, library, "a.stage", "(version 1))\n")
    assert (line, column) == (1, 12)  # the second ')'
    assert "closes nothing" in message


def test_unterminated_string_is_reported_at_its_opening_quote(tmp_path, library):
    found = problems_of(tmp_path, library, "a.stage", '(stage a\n  (note "hello\n')
    unterminated = [p for p in found if "unterminated string" in p[2]]
    assert [p[:2] for p in unterminated] == [(2, 9)]  # the '"' after "  (note "


def test_nesting_100000_levels_deep_is_reported_without_recursion_error(tmp_path, library):
    text = "(" * 100_000 + ")" * 100_000
    line, column, message = only_problem(tmp_path, library, "deep.stage", text)
    # The 41st '(' is the first one past the limit of 40 levels.
    assert (line, column) == (1, 41)
    assert "nesting deeper than 40 levels" in message


def test_100000_unclosed_parentheses_are_reported_without_recursion_error(tmp_path, library):
    found = problems_of(tmp_path, library, "deep.stage", "(" * 100_000)
    assert found[0][:2] == (1, 41)  # the 41st '(' is the first past the limit of 40
    assert "nesting deeper" in found[0][2]
    assert any("never closed" in message for _l, _c, message in found)


def test_reader_raises_input_errors_not_recursion_error_on_deep_nesting(tmp_path):
    path = write(tmp_path, "deep.stage", "(" * 100_000 + ")" * 100_000)
    with pytest.raises(InputErrors):
        read_file(path)


def test_empty_sexp_file_is_reported(tmp_path, library):
    assert only_problem(tmp_path, library, "empty.stage", "") == (
        1, 1, "the file holds no forms: expected (stage NAME ...) or (part NAME ...)")


def test_sexp_file_of_only_comments_is_reported_as_empty(tmp_path, library):
    line, column, message = only_problem(tmp_path, library, "c.stage", "; nothing\n\n")
    assert (line, column) == (1, 1)
    assert "holds no forms" in message


def test_several_syntax_errors_in_one_file_are_all_reported(tmp_path, library):
    text = "(stage a\n  (ground gnd) [x]\n  (note \"x\")))\n"
    found = problems_of(tmp_path, library, "many.stage", text)
    # '[' and ']' on line 2, the third ')' on line 3
    assert [(line, column) for line, column, _m in found] == [(2, 16), (2, 18), (3, 14)]
    assert "unexpected character '['" in found[0][2]
    assert "unexpected character ']'" in found[1][2]
    assert "closes nothing" in found[2][2]


def test_unknown_keyword_in_sexp_suggests_the_nearest(tmp_path, library):
    text = stage_with("(resistor R2", "(resistr R2")
    assert only_problem(tmp_path, library, "a.stage", text) == (
        7, 3, "unknown keyword 'resistr' in stage inv; did you mean 'resistor'?")


def test_stray_value_after_the_positional_fields_is_reported(tmp_path, library):
    text = stage_with("(resistor R2 sum vout 100k)", "(resistor R2 sum vout 100k 5)")
    line, column, message = only_problem(tmp_path, library, "a.stage", text)
    assert (line, column) == (7, 30)  # the 5 after "100k "
    assert "unexpected value 5 in resistor R2" in message


def test_no_break_space_is_reported_and_later_positions_stay_right(tmp_path, library):
    # sexpdata splits atoms only at ASCII white space: U+00A0 must not shift positions.
    text = stage_with("(resistor R1 vin sum 10k)", "(resistor R1\u00a0vin sum 10k)")
    line, column, message = only_problem(tmp_path, library, "a.stage", text)
    assert (line, column) == (6, 15)  # the no-break space after "(resistor R1"
    assert "U+00A0" in message


def test_backslash_outside_a_string_is_reported(tmp_path, library):
    # sexpdata would read it as an escape and merge two atoms.
    text = stage_with("(resistor R1 vin sum 10k)", "(resistor R1 v\\ in sum 10k)")
    line, column, message = only_problem(tmp_path, library, "a.stage", text)
    assert (line, column) == (6, 17)  # the backslash after "(resistor R1 v"
    assert "unexpected character '\\\\'" in message


# -- JSON syntax -------------------------------------------------------------------------

def test_invalid_json_is_reported_where_the_parser_stopped(tmp_path, library):
    text = '{"stages": [\n  {"name": "a",}\n]}\n'
    line, column, message = only_problem(tmp_path, library, "a.stage.json", text)
    assert (line, column) == (2, 16)  # the '}' where a name should follow the comma
    assert message.startswith("invalid JSON:")


def test_empty_json_file_is_reported(tmp_path, library):
    line, column, message = only_problem(tmp_path, library, "empty.stage.json", "  \n")
    assert (line, column) == (1, 1)
    assert "the file is empty" in message


def test_json_nested_100000_levels_is_reported_without_recursion_error(tmp_path, library):
    text = "[" * 100_000 + "]" * 100_000
    line, column, message = only_problem(tmp_path, library, "deep.stage.json", text)
    # The 41st '[' is the first one past the limit of 40 levels.
    assert (line, column) == (1, 41)
    assert "nesting deeper than 40 levels" in message


def test_json_nesting_past_the_limit_but_within_python_recursion_is_reported(tmp_path,
                                                                            library):
    text = '{"stages": [{"name": "a", "ground": "g", "note":\n' + "[" * 50 + "]" * 50 + "}]}"
    line, column, message = only_problem(tmp_path, library, "deep.stage.json", text)
    # Three containers open on line 1, so the 41st is the 38th '[' on line 2.
    assert (line, column) == (2, 38)
    assert "nesting deeper than 40 levels" in message


def test_json_reader_raises_input_errors_not_recursion_error(tmp_path):
    path = write(tmp_path, "deep.stage.json", '{"a":' * 100_000 + "1" + "}" * 100_000)
    with pytest.raises(InputErrors):
        read_file(path)


def test_duplicate_json_key_is_reported_at_the_second_key(tmp_path, library):
    text = '{"stages": [{"name": "a", "ground": "gnd",\n  "name": "b"}]}\n'
    assert only_problem(tmp_path, library, "a.stage.json", text) == (
        2, 3, "key 'name' appears twice in one object")


def test_unknown_keyword_in_json_suggests_the_nearest(tmp_path, library):
    text = '{"stages": [{"name": "a", "ground": "gnd",\n  "resistorz": []}]}\n'
    assert only_problem(tmp_path, library, "a.stage.json", text) == (
        2, 3, "unknown keyword 'resistorz' in stage 'a'; did you mean 'resistors'?")


def test_json_nan_constant_is_refused(tmp_path, library):
    text = '{"stages": [{"name": "a", "ground": "g", "note": NaN}]}'
    line, column, message = only_problem(tmp_path, library, "a.stage.json", text)
    assert (line, column) == (1, 50)  # where NaN stands
    assert "NaN is not a value" in message


def test_json_top_level_that_is_not_an_object_is_refused(tmp_path, library):
    line, column, message = only_problem(tmp_path, library, "a.stage.json", "[1, 2]")
    assert (line, column) == (1, 1)
    assert "expected a JSON object" in message


# -- bytes and size ----------------------------------------------------------------------

def test_non_utf8_byte_is_reported_at_its_position(tmp_path, library):
    content = b'(stage a\n  (note "caf\xe9"))\n'
    line, column, message = only_problem(tmp_path, library, "a.stage", content)
    assert (line, column) == (2, 13)  # after the 12 characters of '  (note "caf'
    assert "not UTF-8 text: byte 0xe9" in message


def test_non_utf8_byte_after_multibyte_characters_counts_characters(tmp_path, library):
    # "Ω" is two bytes in UTF-8 but one column.
    content = '(stage a (note "ΩΩ'.encode() + b"\xff" + b'"))'
    line, column, _message = only_problem(tmp_path, library, "a.stage", content)
    assert (line, column) == (1, 19)  # after the 18 characters of '(stage a (note "ΩΩ'


def test_byte_order_mark_is_ignored(tmp_path, library):
    loaded = load_file(write(tmp_path, "bom.stage", "\ufeff" + GOOD_STAGE), library)
    assert loaded.problems == []


def test_file_over_the_size_limit_is_refused_before_reading(tmp_path, library, monkeypatch):
    monkeypatch.setattr(checker.io.load, "MAX_FILE_BYTES", 100)
    line, column, message = only_problem(tmp_path, library, "big.stage", GOOD_STAGE)
    assert (line, column) == (1, 1)
    assert "the limit is" in message


def test_file_at_the_size_limit_is_read(tmp_path, library, monkeypatch):
    monkeypatch.setattr(checker.io.load, "MAX_FILE_BYTES", len(GOOD_STAGE.encode()))
    assert load_file(write(tmp_path, "edge.stage", GOOD_STAGE), library).ok


# -- values ------------------------------------------------------------------------------

def test_unit_that_does_not_fit_is_reported_at_the_value(tmp_path, library):
    text = stage_with("R1 vin sum 10k", "R1 vin sum 10F")
    line, column, message = only_problem(tmp_path, library, "a.stage", text)
    assert (line, column) == (6, 24)
    assert "value of resistor R1: '10F' is a capacitance" in message


def test_unknown_unit_is_reported_at_the_value(tmp_path, library):
    text = stage_with("R1 vin sum 10k", "R1 vin sum 10Q")
    line, column, message = only_problem(tmp_path, library, "a.stage", text)
    assert (line, column) == (6, 24)
    assert "unknown unit or prefix 'Q'" in message


def test_bad_unit_in_json_is_reported_at_its_key(tmp_path, library):
    tree = json.loads(json.dumps(GOOD_JSON))
    tree["stages"][0]["resistors"][0]["value"] = "10F"
    text = json.dumps(tree, indent=1)
    # A JSON member is located at its key: find where '"value": "10F"' starts.
    before = text[:text.index('"value": "10F"')]
    expected = (before.count("\n") + 1, len(before) - before.rfind("\n"))
    line, column, message = only_problem(tmp_path, library, "a.stage.json", text)
    assert (line, column) == expected
    assert "is a capacitance" in message


@pytest.mark.parametrize("value", ["0", "-10k"])
def test_resistance_that_is_not_positive_is_reported(tmp_path, library, value):
    text = stage_with("R1 vin sum 10k", f"R1 vin sum {value}")
    line, column, message = only_problem(tmp_path, library, "a.stage", text)
    assert (line, column) == (6, 24)
    assert "value of resistor R1 must be greater than zero" in message


@pytest.mark.parametrize("value", ["0", "-1n"])
def test_capacitance_that_is_not_positive_is_reported(tmp_path, library, value):
    text = stage_with("  (resistor R2 sum vout 100k)\n",
                      f"  (resistor R2 sum vout 100k)\n  (capacitor C1 sum vout {value})\n")
    line, column, message = only_problem(tmp_path, library, "a.stage", text)
    assert (line, column) == (8, 26)  # the value after "  (capacitor C1 sum vout "
    assert "value of capacitor C1 must be greater than zero" in message


# -- references --------------------------------------------------------------------------

def test_duplicate_designator_is_reported_at_the_second_use(tmp_path, library):
    text = stage_with("(resistor R2", "(resistor R1")
    assert only_problem(tmp_path, library, "a.stage", text) == (
        7, 3, "designator R1 is used twice in stage inv (first at line 6)")


def test_unknown_part_is_reported_with_the_nearest_name(tmp_path, library):
    text = stage_with("gp-bipolar", "gp-bipolr")
    assert only_problem(tmp_path, library, "a.stage", text) == (
        5, 13, "op-amp U1: unknown part 'gp-bipolr'; did you mean 'gp-bipolar'?")


def test_unknown_part_without_a_near_name_points_to_the_parts_command(tmp_path, library):
    text = stage_with("gp-bipolar", "zzzz")
    line, column, message = only_problem(tmp_path, library, "a.stage", text)
    assert (line, column) == (5, 13)
    assert "`ampcheck parts`" in message


def test_opamp_power_pin_on_a_net_that_is_not_a_supply_is_reported(tmp_path, library):
    text = stage_with("(v- vee)", "(v- vneg)")
    line, column, message = only_problem(tmp_path, library, "a.stage", text)
    assert (line, column) == (5, 3)
    assert "its v- pin is on net 'vneg', which is not a supply" in message


def test_opamp_with_v_plus_below_v_minus_is_reported(tmp_path, library):
    text = stage_with("(v+ vcc) (v- vee)", "(v+ vee) (v- vcc)")
    line, column, message = only_problem(tmp_path, library, "a.stage", text)
    assert (line, column) == (5, 3)
    assert "v+ (-15 V) must be above v- (15 V)" in message


def test_net_touched_by_one_pin_only_is_reported_as_dangling(tmp_path, library):
    text = stage_with("(resistor R2 sum vout", "(resistor R2 sumx vout")
    assert only_problem(tmp_path, library, "a.stage", text) == (
        7, 3, ("R2: net 'sumx' is connected to nothing else in stage inv (dangling);"
               " did you mean 'sum'?"))


def test_stage_without_an_opamp_is_reported(tmp_path, library):
    text = stage_with(
        "  (opamp U1 (part gp-bipolar) (in+ gnd) (in- sum) (out vout) (v+ vcc) (v- vee))\n",
        "  (resistor R3 vout gnd 1k)\n")
    line, column, message = only_problem(tmp_path, library, "a.stage", text)
    assert (line, column) == (1, 1)
    assert "stage inv has no op-amp" in message


def test_supply_on_the_ground_net_is_reported(tmp_path, library):
    text = stage_with("(supply vee -15V)", "(supply gnd 0V)")
    found = problems_of(tmp_path, library, "a.stage", text)
    assert found[0] == (4, 3, ("supply gnd is the ground net of stage inv; the ground is"
                               " 0 V by definition"))
    # With vee gone, the op-amp's v- pin is reported too, at the op-amp.
    assert [(line, column) for line, column, _m in found] == [(4, 3), (5, 3)]


def test_load_feeding_an_unknown_stage_is_reported(tmp_path, library):
    text = stage_with("(load vout (resistance 10k))", "(load vout (feeds next vin))")
    assert only_problem(tmp_path, library, "a.stage", text) == (
        9, 3, "load at vout feeds stage 'next', which this file does not define")


def test_load_feeding_a_stage_of_the_same_file_is_accepted(tmp_path, library):
    second = GOOD_STAGE.replace("(stage inv", "(stage next")
    text = stage_with("(load vout (resistance 10k))", "(load vout (feeds next vin))") + second
    loaded = load_file(write(tmp_path, "two.stage", text), library)
    assert loaded.problems == []
    assert loaded.stages[0].loads[0].feeds_stage == "next"


# -- schema problems at their node -------------------------------------------------------

def test_missing_required_field_is_reported_at_its_form(tmp_path, library):
    text = stage_with("  (ground gnd)\n", "")
    line, column, message = only_problem(tmp_path, library, "a.stage", text)
    assert (line, column) == (1, 1)
    assert "stage 'inv' is missing 'ground'" in message


def test_invalid_net_name_is_reported_at_the_name(tmp_path, library):
    text = stage_with("(in+ gnd)", '(in+ "g n d")')
    line, column, message = only_problem(tmp_path, library, "a.stage", text)
    assert (line, column) == (5, 31)
    assert "is not a valid name" in message


def _values(nodes):
    """The plain values of parsed SNodes, as sexpdata.parse gives them (symbols as str)."""
    return [_values(n.value) if n.is_list else n.value for n in nodes]


def _sexpdata_values(items):
    import sexpdata

    return [_sexpdata_values(i) if isinstance(i, list) else
            str(i) if isinstance(i, sexpdata.Symbol) else i for i in items]


@pytest.mark.parametrize("text", [
    GOOD_STAGE,
    '(a "x\\"y" "tab\\there" "back\\\\slash" "odd\\qescape" "" 1 -2 +3 1.5 1e3 -0 10k)',
    "(n nan inf -inf infinity 0x1f 1e 4.7u 2.2µ) ; a comment\n(b)",
    '(multi\n  "line\nstring" (deeper (still (more 0.001))))',
])
def test_the_tree_is_the_one_sexpdata_reads(text):
    # The reader's own pass over the characters (it keeps positions) must read every
    # token as the sexpdata library itself does: checked against sexpdata.parse.
    import sexpdata

    from checker.io.sexp_reader import parse

    expected = _sexpdata_values(sexpdata.parse(text, nil=None, true=None, false=None))
    assert repr(_values(parse(text, "t.stage"))) == repr(expected)


@pytest.mark.parametrize("token", ["1_000", "1_0.5", "\u0661\u0660", "\uff11\uff10"])
def test_numbers_beyond_ascii_decimal_stay_text(token):
    # The one departure from sexpdata: Python reads 1_000 and other scripts' digits as
    # numbers, the format (like JSON) does not, so they stay text for the value check
    # to refuse, as the same text quoted is refused.
    import sexpdata

    from checker.io.sexp_reader import parse

    assert isinstance(sexpdata.parse(f"({token})")[0][0], (int, float))
    (node,) = parse(f"({token})", "t.stage")
    assert node.value[0].value == token


def test_every_bundled_stage_reads_as_sexpdata_reads_it():
    import pathlib

    import sexpdata

    from checker.io.sexp_reader import parse

    root = pathlib.Path(__file__).resolve().parent.parent
    files = sorted(root.glob("samples/**/*.stage")) + sorted(root.glob("checker/**/*.parts"))
    assert len(files) >= 5
    for file in files:
        text = file.read_text(encoding="utf-8")
        expected = _sexpdata_values(sexpdata.parse(text, nil=None, true=None, false=None))
        assert repr(_values(parse(text, str(file)))) == repr(expected), file
