"""Inputs and options that must be refused with a clear message, never passed or crashed
on: each case was found by trying the tool as a reviewer would, on inputs nobody designed
for. Every expected message is the project's own wording.
"""

import copy
import json
import os

import pytest

from test_cli_foundation import assert_no_traceback, run, wide_plain_console  # noqa: F401
from test_readers import GOOD_JSON, GOOD_STAGE

from checker.units import UnitError, parse_value

# The stage of the reader tests: a gain -10 stage, whose 10 pF of stray capacitance at
# the inverting input rings the loop; any stage that checks clean without it would do.
SAMPLE = "samples/conductivity.stage"


def write(tmp_path, name: str, text: str):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return str(path)


def test_a_negative_stray_capacitance_on_the_command_line_is_a_usage_error(capsys):
    # A negative stray capacitance cancels the op-amp's input capacitance and hides the
    # feedback-pole error of this sample; a configuration file refuses it already.
    code, out, err = run(capsys, "check", SAMPLE, "--stray-capacitance=-8p")
    assert code == 2
    assert "--stray-capacitance cannot be negative" in err
    assert_no_traceback(out, err)


@pytest.mark.parametrize("ids", ["", ",", " , "])
def test_a_select_of_no_rule_id_is_a_usage_error(capsys, ids):
    code, out, err = run(capsys, "check", SAMPLE, "--select", ids)
    assert code == 2
    assert "--select names no rule id" in err


def test_an_empty_select_in_a_configuration_file_is_an_error(tmp_path, capsys):
    stage = write(tmp_path, "a.stage", GOOD_STAGE)
    write(tmp_path, "ampcheck.toml", "select = []\n")
    code, _out, err = run(capsys, "check", stage)
    assert code == 2
    assert "select names no rule id" in err


def test_standard_input_closed_is_a_usage_error(capsys, monkeypatch):
    monkeypatch.setattr("sys.stdin", None)
    code, out, err = run(capsys, "check", "-")
    assert code == 2
    assert "standard input, which is closed" in err
    assert_no_traceback(out, err)


@pytest.mark.parametrize("entries", [
    None,
    [{"path": "a.stage", "stage": "", "elements": [], "rule": "x", "count": True}],
    [{"path": "a.stage", "stage": "", "elements": [], "rule": "x", "count": 1.5}],
    [{"path": "a.stage", "stage": "", "elements": [], "rule": "x", "count": 0}],
    [{"path": "a.stage", "stage": "", "elements": [], "rule": "x", "count": 1e30}],
    [{"path": "a.stage", "stage": "", "elements": [], "rule": None}],
    [{"path": 5, "stage": "", "elements": [], "rule": "x"}],
    [{"path": "a.stage", "stage": "", "elements": [7], "rule": "x"}],
    ["not an entry"],
])
def test_a_malformed_baseline_is_a_usage_error(tmp_path, capsys, entries):
    stage = write(tmp_path, "a.stage", GOOD_STAGE)
    baseline = write(tmp_path, "bl.json", json.dumps(
        {"format": "ampcheck-baseline", "version": 1, "entries": entries}))
    code, out, err = run(capsys, "check", stage, "--baseline", baseline, "--no-config")
    assert code == 2
    assert "bl.json: " in err and ("malformed entry" in err or "entries is a list" in err)
    assert_no_traceback(out, err)


def test_a_well_formed_baseline_still_loads(tmp_path, capsys):
    stage = write(tmp_path, "a.stage", GOOD_STAGE)
    baseline = write(tmp_path, "bl.json", json.dumps(
        {"format": "ampcheck-baseline", "version": 1, "entries": [
            {"path": "a.stage", "stage": "inv", "elements": ["R1"], "rule": "x",
             "count": 2}]}))
    code, out, err = run(capsys, "check", stage, "--baseline", baseline, "--no-config",
                         "--format", "compact")
    assert code in (0, 1)
    assert "malformed" not in err
    assert_no_traceback(out, err)


def test_mend_refuses_a_copy_whose_ending_reads_another_syntax(tmp_path, capsys):
    stage = write(tmp_path, "a.stage", GOOD_STAGE)
    target = tmp_path / "a.mended.stage.json"
    code, _out, err = run(capsys, "mend", stage, "--to", str(target), "--no-config")
    assert code == 2
    assert "would be read as JSON" in err
    assert not target.exists()


def test_convert_refuses_an_output_whose_ending_reads_another_syntax(tmp_path, capsys):
    stage = write(tmp_path, "a.stage", GOOD_STAGE)
    code, _out, err = run(capsys, "convert", stage, "--to", "json", "-o",
                          str(tmp_path / "b.stage"))
    assert code == 2
    assert "read as s-expressions; name the JSON file NAME.stage.json" in err
    assert not (tmp_path / "b.stage").exists()
    code, _out, err = run(capsys, "convert", stage, "--to", "sexp", "-o",
                          str(tmp_path / "c.stage.json"))
    assert code == 2
    assert "read as JSON; name the s-expression file NAME.stage" in err
    code, _out, _err = run(capsys, "convert", stage, "--to", "json", "-o",
                           str(tmp_path / "b.stage.json"))
    assert code == 0 and (tmp_path / "b.stage.json").exists()


def check_compact(capsys, path):
    code, out, err = run(capsys, "check", path, "--format", "compact", "--no-config")
    assert_no_traceback(out, err)
    return code, out


@pytest.mark.parametrize("document", [{"stages": []}, {"stages": [], "parts": []},
                                      {"parts": []}])
def test_a_file_of_empty_lists_holds_nothing_and_is_refused(tmp_path, capsys, document):
    path = write(tmp_path, "a.stage.json", json.dumps(document))
    code, out = check_compact(capsys, path)
    assert code == 1
    assert "the file needs 'stages' or 'parts', with at least one entry" in out


@pytest.mark.parametrize("value", ["1_000", "\u0661\u0660k", "\uff11\uff10k"])
def test_a_value_in_other_digits_is_refused_in_both_syntaxes(tmp_path, capsys, value):
    # Python reads 1_000 and other scripts' digits as numbers; the format does not.
    stage = write(tmp_path, "a.stage", GOOD_STAGE.replace("vin sum 10k", f"vin sum {value}"))
    tree = copy.deepcopy(GOOD_JSON)
    tree["stages"][0]["resistors"][0]["value"] = value
    document = write(tmp_path, "a.stage.json", json.dumps(tree))
    for path in (stage, document):
        code, out = check_compact(capsys, path)
        assert code == 1
        assert "input-invalid: value of resistor R1" in out, out


@pytest.mark.parametrize("text", ["\uff11\uff10k", "\u0661\u0660", "1_000"])
def test_parse_value_takes_ascii_decimal_only(text):
    with pytest.raises(UnitError):
        parse_value(text, "resistance")
    assert parse_value("10k", "resistance") == 10e3


@pytest.mark.parametrize("value", ["1e-400", "2.5E-999", "1e-400k"])
def test_a_number_too_small_for_a_double_is_refused_not_read_as_zero(tmp_path, capsys,
                                                                     value):
    # Python reads 1e-400 as 0.0 (below the smallest double, about 4.9e-324); a value
    # written as non-zero must not pass as 0 (a zero-ohm short, a missing capacitor).
    stage = write(tmp_path, "a.stage", GOOD_STAGE.replace("vin sum 10k", f"vin sum {value}"))
    text = json.dumps(GOOD_JSON).replace('"10k"', value if value[-1].isdigit()
                                         else f'"{value}"', 1)
    document = write(tmp_path, "a.stage.json", text)
    for path in (stage, document):
        code, out = check_compact(capsys, path)
        assert code == 1
        assert "value of resistor R1" in out and "too small to be a number" in out, out


@pytest.mark.parametrize("text", ["0", "0.0", "0e-400", "-0.000e5", "0R"])
def test_a_zero_written_as_zero_is_still_zero(text):
    assert parse_value(text, "resistance") == 0.0


def test_a_json_integer_of_thousands_of_digits_is_reported_at_its_value(tmp_path, capsys):
    text = json.dumps(GOOD_JSON).replace('"10k"', "1" + "0" * 5000)
    path = write(tmp_path, "a.stage.json", text)
    code, out = check_compact(capsys, path)
    assert code == 1
    assert ":1:1:" not in out
    assert "value of resistor R1" in out and "beyond the range of a number" in out
    assert "(5001 characters)" in out


def test_half_a_surrogate_pair_is_refused_at_its_text(tmp_path, capsys):
    tree = copy.deepcopy(GOOD_JSON)
    tree["stages"][0]["note"] = "PLACEHOLDER"
    path = write(tmp_path, "a.stage.json",
                 json.dumps(tree).replace("PLACEHOLDER", "\\udfff"))
    code, out = check_compact(capsys, path)
    assert code == 1
    assert "half of a surrogate pair" in out
    code, out, err = run(capsys, "convert", path, "--to", "sexp")
    assert code == 1
    assert "half of a surrogate pair" in err
    assert_no_traceback(out, err)


@pytest.mark.parametrize("parameters, message", [
    ("(output-headroom-high -3V)", "output-headroom-high of part odd cannot be negative"),
    ("(output-headroom-low -0.1V)", "output-headroom-low of part odd cannot be negative"),
    ("(supply-min 10V) (supply-max 2V)", "supply-min (10 V) is above supply-max (2 V)"),
    ("(supply-max 36V) (supply-abs-max 30V)",
     "supply-max (36 V) is above supply-abs-max (30 V)"),
])
def test_impossible_part_data_is_refused(tmp_path, capsys, parameters, message):
    library = write(tmp_path, "lab.parts", f"(part odd (gbw 1MHz) {parameters})\n")
    stage = write(tmp_path, "a.stage", GOOD_STAGE)
    code, out, err = run(capsys, "check", stage, "--parts", library, "--no-config")
    assert code == 2
    assert message in err
    assert_no_traceback(out, err)


def test_impossible_inline_part_data_is_refused(tmp_path, capsys):
    stage = write(tmp_path, "a.stage", GOOD_STAGE.replace(
        "(part gp-bipolar)", "(part gp-bipolar) (params (supply-max 5V))"))
    code, out = check_compact(capsys, stage)
    assert code == 1
    assert "op-amp U1: supply-min (10 V) is above supply-max (5 V)" in out


@pytest.mark.parametrize("rule", ["stage-unsolvable", "rule-failed", "input-invalid",
                                  "waiver-stale"])
def test_a_finding_that_nothing_was_checked_cannot_be_waived(tmp_path, capsys, rule):
    # An inductor straight across the 15 V supply: a loop of a source and an inductor,
    # so the stage is unsolvable, and a waiver must not let it pass unanalysed.
    text = GOOD_STAGE.replace("(load vout", "(inductor L1 vcc gnd 1m) (load vout").replace(
        "(stage inv\n", f'(stage inv\n  (waive {rule} "accepted")\n')
    path = write(tmp_path, "a.stage", text)
    code, out = check_compact(capsys, path)
    assert code == 1
    assert f"waiver of {rule} on stage inv cannot be" in out
    assert "error stage-unsolvable" in out  # reported, not waived


@pytest.mark.parametrize("rule_id", ["class", "import", "lambda"])
def test_a_rule_id_that_names_a_python_keyword_is_refused(tmp_path, capsys, rule_id):
    # The scaffold names the rule's function after its id: def class(view) would not load.
    code, _out, err = run(capsys, "new-rule", rule_id, "--into", str(tmp_path))
    assert code == 2
    assert "a Python keyword" in err
    assert list(tmp_path.iterdir()) == []


def test_a_supply_net_declared_twice_is_reported_at_the_second(tmp_path, capsys):
    text = GOOD_STAGE.replace("(supply vee -15V)", "(supply vee -15V)\n  (supply vcc 12V)")
    code, out = check_compact(capsys, write(tmp_path, "a.stage", text))
    assert code == 1
    assert "a.stage:5:3: error input-invalid: stage inv declares supply net vcc twice" \
        " (first at line 3)" in out


@pytest.mark.skipif(not os.path.exists("/dev/full"), reason="needs /dev/full")
def test_a_report_that_cannot_be_written_names_its_path(capsys):
    # /dev/full fails every write with "no space left": the message must say which
    # report failed, since the error itself names no file.
    code, out, err = run(capsys, "check", SAMPLE, "--output", "json:/dev/full",
                         "--format", "compact")
    assert code == 2
    assert "cannot write /dev/full: No space left on device" in err
    assert_no_traceback(out, err)


def test_mend_to_a_missing_folder_names_the_copy_not_a_temporary(tmp_path, capsys):
    # The sample has two verified fixes, so mend writes, into a folder that is not there.
    with open(SAMPLE, encoding="utf-8") as handle:
        stage = write(tmp_path, "a.stage", handle.read())
    target = tmp_path / "nowhere" / "a.stage"
    code, _out, err = run(capsys, "mend", stage, "--to", str(target), "--no-config")
    assert code == 2
    assert str(target) in err
    assert ".ampcheck-" not in err and ".tmp" not in err
