"""Both syntaxes mean the same tree: round trips, random trees, and `ampcheck convert`."""

import json

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from checker.cli import main
from checker.io.grammar import PART_PARAMETERS, REQUIREMENTS
from checker.io.json_reader import read_json
from checker.io.load import parse_text, read_file
from checker.io.schema import validate
from checker.io.sexp_reader import read_sexp
from checker.io.sexp_writer import atom, write_sexp

# One of everything the grammar has, so a round trip exercises every form.
FULL = """\
; a comment that the tree does not keep
(version 1)
(part my-amp (class "made up") (note "for the tests") (gbw 2MHz) (slew-rate 1V/us)
  (open-loop-gain 100dB) (voltage-noise 10nV/rtHz))
(stage front
  (note "first \\"stage\\"")
  (ground gnd)
  (supply vcc 5)
  (supply vee -5V)
  (opamp U1 (part my-amp) (params (gbw 3MHz)) (in+ in) (in- fb) (out mid) (v+ vcc) (v- vee))
  (resistor R1 fb gnd 1k (tolerance 1%) (power-rating 0.125))
  (resistor R2 fb mid 4k7)
  (capacitor C1 fb mid 10p (tolerance 5%))
  (inductor L1 mid out 10uH)
  (source in (label "sensor") (kind current) (range 0 1uA) (band 0 10kHz)
    (impedance 100M) (capacitance 10p))
  (load out (feeds back in))
  (require (gain 5) (bandwidth 10kHz) (phase-margin 60) (cmrr 80dB)))
(stage back
  (ground gnd)
  (supply vcc 5)
  (opamp U2 (params (gbw 1MHz)) (in+ in) (in- out) (out out) (v+ vcc) (v- gnd))
  (source in (amplitude 1) (offset 2.5))
  (load out (resistance 10k) (capacitance 1n)))
"""


def test_full_sample_is_valid():
    assert parse_text(FULL, "full.stage").tree["version"] == 1


def test_sexp_tree_sexp_round_trip_gives_the_same_tree():
    tree, _positions = read_sexp(FULL, "full.stage")
    again, _positions = read_sexp(write_sexp(tree), "again.stage")
    assert again == tree


def test_sexp_writer_output_is_stable():
    tree, _positions = read_sexp(FULL, "full.stage")
    once = write_sexp(tree)
    assert write_sexp(read_sexp(once, "once.stage")[0]) == once


def test_json_tree_json_round_trip_gives_the_same_tree():
    tree, _positions = read_sexp(FULL, "full.stage")
    text = json.dumps(tree, indent=2)
    from_json, _positions = read_json(text, "full.stage.json")
    again, _positions = read_json(json.dumps(from_json, indent=2), "again.stage.json")
    assert again == from_json == tree


def test_json_to_sexp_and_back_gives_the_same_tree():
    tree, _positions = read_sexp(FULL, "full.stage")
    from_json, _positions = read_json(json.dumps(tree), "full.stage.json")
    assert read_sexp(write_sexp(from_json), "back.stage")[0] == tree


# -- atoms -------------------------------------------------------------------------------

@pytest.mark.parametrize("text", [
    "1", "1.5", "-2", "+3", ".5", "1.", "1e3", "1E-3", "007",
    # float() and int() also read these; sexpdata tries both on every bare atom.
    "nan", "NaN", "inf", "-inf", "Infinity", "1_000", "1_0.5", "\u0661",
    "t", "nil",
])
def test_numeric_looking_text_survives_as_text(text):
    tree = {"stages": [{"name": text, "ground": "gnd", "note": text}]}
    again, _positions = read_sexp(write_sexp(tree), "t.stage")
    assert again == tree


@pytest.mark.parametrize("text", [
    'say "hi"', "back\\slash", "trailing\\", "two\nlines", "tab\there", "semi;colon",
    "(paren)", "[bracket]", "it's", "a`b", "a,b", "", " ", "\u00a0", "\x00\x01\x1f",
    "\r\n", "\b\f", "\\n", "\\\"", "Ω µ °", "ends in a newline\n", "x\n",
])
def test_text_with_special_characters_survives(text):
    tree = {"stages": [{"name": "s", "ground": "gnd", "note": text}]}
    again, _positions = read_sexp(write_sexp(tree), "t.stage")
    assert again == tree


@pytest.mark.parametrize("value", [0, -1, 10**20, 0.1, -2.5e-12, 1e300, 5e-324])
def test_numbers_survive_as_numbers(value):
    tree = {"stages": [{"name": "s", "ground": "gnd",
                        "supplies": [{"net": "v", "voltage": value}]}]}
    again, _positions = read_sexp(write_sexp(tree), "n.stage")
    assert again == tree
    assert type(again["stages"][0]["supplies"][0]["voltage"]) is type(value)


def test_plain_name_is_written_bare():
    assert atom("vout") == "vout"


def test_engineering_value_is_written_bare():
    assert atom("4k7") == "4k7"


def test_boolean_has_no_atom():
    with pytest.raises(TypeError):
        atom(True)


# -- random trees ------------------------------------------------------------------------

# Text as the schema allows it for names and designators, plus the tricky spellings.
TRICKY = ["1", "1.5", "-2", "+3", "1e3", "nan", "inf", "Infinity", "1_000", "t", "nil",
          ".5", "0x10"]
names = st.one_of(st.from_regex(r"[A-Za-z0-9_.+\-/]{1,10}", fullmatch=True),
                  st.sampled_from(TRICKY))
designators = st.from_regex(r"[A-Za-z][A-Za-z0-9_]{0,5}", fullmatch=True)
free_text = st.text(max_size=20)
values = st.one_of(
    st.integers(min_value=-10**12, max_value=10**12),
    st.floats(allow_nan=False, allow_infinity=False),
    st.sampled_from(["10k", "4k7", "2R2", "R47", "100n", "1%", "0.5V/us", "10 kΩ"] + TRICKY),
    st.text(min_size=1, max_size=12),
)
pairs = st.lists(values, min_size=2, max_size=2)


# A repeated child is either absent or has at least one item: an empty list has no
# s-expression spelling, so it cannot survive a round trip through that syntax.
def some(strategy):
    return st.lists(strategy, min_size=1, max_size=3)


params = st.fixed_dictionaries({}, optional={k: values for k in PART_PARAMETERS})
parts = st.fixed_dictionaries(
    {"name": names},
    optional={"class": free_text, "note": free_text, **{k: values for k in PART_PARAMETERS}})
supplies = st.fixed_dictionaries({"net": names, "voltage": values})
pins = {"ref": designators, "in+": names, "in-": names, "out": names, "v+": names,
        "v-": names}
opamps = st.one_of(
    st.fixed_dictionaries({**pins, "part": names}, optional={"params": params}),
    st.fixed_dictionaries({**pins, "params": params}),
)
passives = st.fixed_dictionaries(
    {"ref": designators, "nets": st.lists(names, min_size=2, max_size=2), "value": values},
    optional={"tolerance": values})
resistors = st.fixed_dictionaries(
    {"ref": designators, "nets": st.lists(names, min_size=2, max_size=2), "value": values},
    optional={"tolerance": values, "power-rating": values})
source_common = {"label": free_text, "kind": st.sampled_from(["voltage", "current"]),
                 "band": pairs, "impedance": values, "capacitance": values}
sources = st.one_of(
    st.fixed_dictionaries({"net": names}, optional={**source_common, "range": pairs}),
    st.fixed_dictionaries({"net": names, "amplitude": values},
                          optional={**source_common, "offset": values}),
)
feeds = st.fixed_dictionaries({"stage": names}, optional={"net": names})
loads = st.fixed_dictionaries(
    {"net": names}, optional={"resistance": values, "capacitance": values, "feeds": feeds})
requires = st.fixed_dictionaries({}, optional={k: values for k in REQUIREMENTS})
stages = st.fixed_dictionaries(
    {"name": names, "ground": names},
    optional={"note": free_text, "supplies": some(supplies), "opamps": some(opamps),
              "resistors": some(resistors), "capacitors": some(passives),
              "inductors": some(passives), "sources": some(sources), "loads": some(loads),
              "require": requires})
documents = st.one_of(
    st.fixed_dictionaries({"stages": some(stages)},
                          optional={"version": st.just(1), "parts": some(parts)}),
    st.fixed_dictionaries({"parts": some(parts)}, optional={"version": st.just(1)}),
)


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(documents)
def test_random_valid_tree_survives_write_sexp_then_read_sexp(tree):
    assert validate(tree, {}, "generated") == [], "the generator made an invalid tree"
    again, _positions = read_sexp(write_sexp(tree), "random.stage")
    assert again == tree


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(documents)
def test_random_valid_tree_written_as_sexp_still_validates(tree):
    assert parse_text(write_sexp(tree), "random.stage").tree == tree


@settings(max_examples=100, deadline=None)
@given(documents)
def test_random_valid_tree_survives_json(tree):
    again, _positions = read_json(json.dumps(tree, ensure_ascii=False), "random.stage.json")
    assert again == tree


# -- `ampcheck convert` ------------------------------------------------------------------

@pytest.fixture
def stage_file(tmp_path):
    path = tmp_path / "full.stage"
    path.write_text(FULL, encoding="utf-8")
    return path


def test_convert_refuses_to_write_over_its_input(stage_file, capsys):
    before = stage_file.read_bytes()
    code = main(["convert", str(stage_file), "--to", "sexp", "-o", str(stage_file)])
    assert code == 2
    assert stage_file.read_bytes() == before
    assert "refusing to write over the input file" in capsys.readouterr().err


def test_convert_refuses_the_input_under_another_spelling(stage_file, capsys):
    before = stage_file.read_bytes()
    other = stage_file.parent / "sub" / ".." / stage_file.name
    (stage_file.parent / "sub").mkdir()
    code = main(["convert", str(stage_file), "--to", "json", "-o", str(other)])
    assert code == 2
    assert stage_file.read_bytes() == before


def test_convert_refuses_the_input_through_a_symbolic_link(stage_file, capsys):
    before = stage_file.read_bytes()
    link = stage_file.parent / "link.stage"
    link.symlink_to(stage_file)
    code = main(["convert", str(stage_file), "--to", "sexp", "-o", str(link)])
    assert code == 2
    assert stage_file.read_bytes() == before


def test_convert_writes_a_new_json_file_with_the_same_tree(stage_file, capsys):
    target = stage_file.parent / "full.stage.json"
    code = main(["convert", str(stage_file), "--to", "json", "-o", str(target)])
    assert code == 0
    assert read_file(str(target)).tree == read_file(str(stage_file)).tree


def test_convert_writes_a_new_sexp_file_with_the_same_tree(stage_file, capsys):
    target = stage_file.parent / "copy.stage"
    code = main(["convert", str(stage_file), "--to", "sexp", "-o", str(target)])
    assert code == 0
    assert read_file(str(target)).tree == read_file(str(stage_file)).tree


def test_convert_leaves_no_temporary_file_behind(stage_file, capsys):
    main(["convert", str(stage_file), "--to", "json", "-o",
          str(stage_file.parent / "out.stage.json")])
    assert sorted(p.name for p in stage_file.parent.iterdir()) == [
        "full.stage", "out.stage.json"]


def test_convert_without_output_prints_to_stdout(stage_file, capsys):
    code = main(["convert", str(stage_file), "--to", "json"])
    assert code == 0
    assert json.loads(capsys.readouterr().out) == read_file(str(stage_file)).tree


def test_convert_of_a_bad_file_reports_it_and_exits_1(tmp_path, capsys):
    bad = tmp_path / "bad.stage"
    bad.write_text("(stage a\n")
    code = main(["convert", str(bad), "--to", "json"])
    captured = capsys.readouterr()
    assert code == 1
    assert f"{bad}:1:1: this '(' is never closed" in captured.err
    assert "Traceback" not in captured.out + captured.err
