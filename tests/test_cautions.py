"""Safety cautions: raised however a voltage is written, by a mains declaration, and not
removable by selection, ignore lists, configuration, severities or baselines.

Limits: 60 V DC and 42.4 V peak (30 V rms) AC, the class ES1 limits of IEC 62368-1 (the
SELV limits of IEC 60950-1). "Ripple-free" DC, a ripple of at most 10 % rms of the DC
part, is the convention of IEC 60364-4-41 and IEC 61201 (from memory). The reading of
each spelling is the project's own (checker/cautions.py, docs/format.md).
"""

from __future__ import annotations

import json
import math
import textwrap

import pytest
from rule_helpers import build, line_of

from checker.cautions import AC_PEAK_LIMIT_V, DC_LIMIT_V, stage_cautions
from checker.cli import main

DC_LIMIT = 60.0  # IEC 62368-1 class ES1, DC
AC_PEAK_LIMIT = 42.4  # IEC 62368-1 class ES1, AC: 30 V rms, 30 sqrt 2 = 42.4 V peak
OPAMP = "(params (open-loop-gain 3e5) (gbw 5MHz))"


def line_sense(source: str, rails: str = "(supply vcc 15V) (supply vee -15V)") -> str:
    """A 11:1 divider (R1, R2) into a follower, sensing a line; the source is on line 7."""
    return f"""
        (version 1)
        (stage line-sense
          (ground gnd) {rails}
          (opamp U1 {OPAMP} (in+ tap) (in- out) (out out) (v+ vcc) (v- vee))
          (resistor R1 in tap 100k)
          (resistor R2 tap gnd 10k)
          (source in (label "sensed line") {source})
          (load out (resistance 10k)))
        """


def cautions(text: str):
    return stage_cautions(build(text)[0])


def only(text: str):
    found = cautions(text)
    assert len(found) == 1, found
    return found[0]


def test_the_limits_are_those_of_the_standard():
    assert DC_LIMIT_V == DC_LIMIT
    assert AC_PEAK_LIMIT_V == AC_PEAK_LIMIT
    assert 30 * math.sqrt(2) == pytest.approx(AC_PEAK_LIMIT, abs=0.05)


# -- each spelling of a source -------------------------------------------------------------
def test_an_amplitude_at_50_hz_beyond_42_4_volts_peak_is_a_caution():
    text = line_sense("(amplitude 55V) (band 50Hz 60Hz)")
    caution = only(text)
    assert caution.caution == "high-voltage"
    assert caution.basis == "ac-peak"
    assert caution.measured == pytest.approx(55.0)
    assert caution.limit == pytest.approx(AC_PEAK_LIMIT)
    assert caution.elements == ("sensed line",)
    assert caution.line == 7 == line_of(text, "(source in")
    assert caution.column == 3


def test_a_range_with_a_band_above_0_hz_is_ac_and_gets_the_same_caution():
    # The case: -55 V to 55 V at 50 Hz is 55 V peak AC, not 55 V DC.
    caution = only(line_sense("(range -55V 55V) (band 50Hz 60Hz)"))
    assert caution.basis == "ac-peak"
    assert caution.measured == pytest.approx(55.0)
    assert caution.limit == pytest.approx(AC_PEAK_LIMIT)
    assert "AC peak" in caution.statement


def test_the_same_range_without_a_band_is_dc_and_under_60_volts():
    assert cautions(line_sense("(range -55V 55V)")) == []


def test_the_same_range_with_a_band_from_0_hz_is_dc_and_under_60_volts():
    assert cautions(line_sense("(range -55V 55V) (band 0Hz 1Hz)")) == []


def test_a_one_sided_range_at_50_hz_swings_about_its_middle():
    # 0 V to 50 V at 50 Hz: 25 V DC and 25 V peak, reaching 50 V; not a ripple on the DC
    # part (17.7 V rms against 2.5 V), so judged against 42.4 V peak.
    caution = only(line_sense("(range 0V 50V) (band 50Hz 60Hz)"))
    assert caution.basis == "ac-peak"
    assert caution.measured == pytest.approx(50.0)


def test_ac_peak_counts_the_offset():
    # 20 V DC plus 25 V peak reaches 45 V.
    caution = only(line_sense("(amplitude 25V) (offset 20V) (band 50Hz 60Hz)"))
    assert caution.measured == pytest.approx(45.0)
    assert caution.limit == pytest.approx(AC_PEAK_LIMIT)


def test_a_small_ripple_on_dc_is_judged_against_the_dc_limit():
    # 55 V DC with 1 V peak: 0.71 V rms, under 10 % of 55 V, so ripple-free DC; its peak
    # of 56 V is under 60 V.
    assert 1 / math.sqrt(2) <= 0.1 * 55
    assert cautions(line_sense("(amplitude 1V) (offset 55V) (band 50Hz 60Hz)")) == []


def test_a_ripple_on_dc_beyond_60_volts_is_a_dc_caution():
    caution = only(line_sense("(amplitude 1V) (offset 59.5V) (band 50Hz 60Hz)"))
    assert caution.basis == "dc"
    assert caution.measured == pytest.approx(60.5)
    assert caution.limit == pytest.approx(DC_LIMIT)


def test_a_current_source_is_not_judged_as_a_voltage():
    text = line_sense("(kind current) (range 0A 100A)")
    assert cautions(text) == []


# -- both limits, exactly and a millionth beyond --------------------------------------------
@pytest.mark.parametrize("peak, raised", [(AC_PEAK_LIMIT, False),
                                          (AC_PEAK_LIMIT * (1 + 1e-6), True),
                                          (AC_PEAK_LIMIT * (1 - 1e-6), False)])
def test_the_ac_peak_limit(peak, raised):
    found = cautions(line_sense(f"(range {-peak!r} {peak!r}) (band 50Hz 60Hz)"))
    assert bool(found) is raised


@pytest.mark.parametrize("volts, raised", [(DC_LIMIT, False), (DC_LIMIT * (1 + 1e-6), True),
                                           (DC_LIMIT * (1 - 1e-6), False)])
def test_the_dc_limit_of_a_source(volts, raised):
    found = cautions(line_sense(f"(range 0V {volts!r})"))
    assert bool(found) is raised


@pytest.mark.parametrize("half, raised", [(30.0, False), (30.0 * (1 + 1e-6), True)])
def test_the_dc_limit_of_the_supply_span(half, raised):
    text = line_sense("(range -1V 1V)", f"(supply vcc {half!r}) (supply vee {-half!r})")
    assert bool(cautions(text)) is raised


def test_the_supply_span_counts_the_ground_net():
    # Rails at 5 V and 62 V span 57 V between themselves, but 62 V from the ground net.
    caution = only(line_sense("(range 1V 2V)", "(supply vcc 62V) (supply vee 5V)"))
    assert caution.measured == pytest.approx(62.0)
    assert caution.basis == "dc"
    text = line_sense("(range 1V 2V)", "(supply vcc 62V) (supply vee 5V)")
    assert caution.line == 3 == line_of(text, "(supply vcc 62V)")  # the supply that makes it


# -- the mains declaration -------------------------------------------------------------------
TRANSFORMERLESS = """
    (version 1)
    (stage mains-probe
      (ground gnd) (supply vcc 5V (mains not-isolated))
      (opamp U1 (part cmos-rrio) (in+ in) (in- out) (out out) (v+ vcc) (v- gnd))
      (resistor R1 in gnd 100k)
      (source in (range 1V 2V))
      (load out (resistance 10k)))
    """


def test_a_5_volt_supply_declared_not_isolated_from_the_mains_is_a_caution():
    caution = only(TRANSFORMERLESS)
    assert caution.caution == "mains-derived"
    assert caution.basis == "declared"
    assert caution.elements == ("supply vcc",)
    assert caution.line == 3 == line_of(TRANSFORMERLESS, "(supply vcc")
    assert "without isolation" in caution.statement


def test_an_isolated_mains_supply_is_a_caution_too():
    caution = only(TRANSFORMERLESS.replace("not-isolated", "isolated"))
    assert caution.caution == "mains-derived"
    assert "through isolation" in caution.statement


def test_a_stage_declared_on_the_mains_is_a_caution():
    text = TRANSFORMERLESS.replace(" (mains not-isolated)", "").replace(
        "(ground gnd)", "(ground gnd) (mains not-isolated)")
    caution = only(text)
    assert caution.caution == "mains-derived"
    assert caution.elements == ()
    assert caution.line == 2 == line_of(text, "(stage mains-probe")


def test_the_declaration_converts_both_ways(tmp_path, capsys):
    (tmp_path / "m.stage").write_text(textwrap.dedent(TRANSFORMERLESS).lstrip())
    assert main(["convert", str(tmp_path / "m.stage"), "--to", "json"]) == 0
    document = json.loads(capsys.readouterr().out)
    assert document["stages"][0]["supplies"][0]["mains"] == "not-isolated"
    (tmp_path / "m.stage.json").write_text(json.dumps(document))
    assert main(["convert", str(tmp_path / "m.stage.json"), "--to", "sexp"]) == 0
    assert "(supply vcc 5V (mains not-isolated))" in capsys.readouterr().out


def test_an_unknown_declaration_value_is_an_input_error(tmp_path, capsys):
    (tmp_path / "m.stage").write_text(TRANSFORMERLESS.replace("not-isolated", "partly"))
    assert main(["check", str(tmp_path / "m.stage"), "--format", "compact"]) == 1
    out = capsys.readouterr().out
    assert "input-invalid" in out and "'isolated', 'not-isolated'" in out


def test_the_schema_knows_the_declaration():
    from checker.io.schema import stage_schema

    definitions = stage_schema()["$defs"]
    assert definitions["supply"]["properties"]["mains"] == {"enum": ["isolated",
                                                                     "not-isolated"]}
    assert definitions["stage"]["properties"]["mains"] == {"enum": ["isolated",
                                                                    "not-isolated"]}


# -- through the command line: no way to silence one ------------------------------------------
PIEZO = """\
(stage piezo-driver
  (ground gnd) (supply vcc 75V) (supply vee -75V)
  (opamp U1 (part hv-bipolar) (in+ in) (in- fb) (out out) (v+ vcc) (v- vee))
  (resistor R1 fb gnd 2k)
  (resistor R2 fb out 39k)
  (source in (amplitude 2.9V) (band 38kHz 42kHz) (impedance 50))
  (load out (resistance 10k)))
"""


@pytest.fixture
def project(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    monkeypatch.delenv("PRE_COMMIT", raising=False)
    (tmp_path / "piezo.stage").write_text(PIEZO)
    return tmp_path


def run(capsys, *args) -> tuple[int, str, str]:
    code = main(list(args))
    out, err = capsys.readouterr()
    return code, out, err


def document_cautions(out: str) -> list[dict]:
    return json.loads(out)["cautions"]


def test_a_plain_run_reports_the_caution(project, capsys):
    code, out, _ = run(capsys, "check", "piezo.stage", "--format", "json")
    found = document_cautions(out)
    assert [c["caution"] for c in found] == ["high-voltage"]
    assert found[0]["measured"] == pytest.approx(150.0)
    assert code == 0  # a caution alone does not fail a run that fails on errors


@pytest.mark.parametrize("selection", ["bandwidth", "feedback-pole,slew-rate"])
def test_a_selection_of_other_rules_keeps_the_caution(project, capsys, selection):
    _, out, _ = run(capsys, "check", "piezo.stage", "--format", "json", "--select", selection)
    assert [c["caution"] for c in document_cautions(out)] == ["high-voltage"]


@pytest.mark.parametrize("option", ["--ignore", "--select"])
def test_a_caution_cannot_be_ignored_or_selected(project, capsys, option):
    code, out, err = run(capsys, "check", "piezo.stage", option, "high-voltage")
    assert code == 2 and out == ""
    assert "high-voltage is a safety caution, not a rule" in err


@pytest.mark.parametrize("config", [
    "[rules.high-voltage]\ndc_limit_v = 1000\n",
    "[rules.high-voltage]\nseverity = \"info\"\n",
    "ignore = [\"high-voltage\"]\n",
    "[[overrides]]\npaths = [\"*\"]\nignore = [\"high-voltage\", \"bandwidth\"]\n",
])
def test_a_configuration_cannot_raise_the_limits_demote_or_ignore_a_caution(
        project, capsys, config):
    (project / "ampcheck.toml").write_text(config)
    code, out, err = run(capsys, "check", "piezo.stage")
    assert code == 2 and out == ""
    assert "ampcheck.toml:" in err and "high-voltage is a safety caution" in err


def test_failing_on_never_still_reports_the_caution(project, capsys):
    code, out, _ = run(capsys, "check", "piezo.stage", "--format", "json", "--fail-on", "never")
    assert code == 0 and len(document_cautions(out)) == 1


def test_an_unacknowledged_caution_fails_a_run_that_fails_on_warnings(project, capsys):
    # floating-input finds nothing here: only the caution can fail the run
    code, _, _ = run(capsys, "check", "piezo.stage", "--fail-on", "warning",
                     "--select", "floating-input")
    assert code == 1


def test_a_baseline_does_not_hold_a_caution(project, capsys):
    run(capsys, "check", "piezo.stage", "--write-baseline", "base.json")
    assert "high-voltage" not in (project / "base.json").read_text()
    code, out, _ = run(capsys, "check", "piezo.stage", "--baseline", "base.json",
                       "--format", "json", "--fail-on", "warning")
    assert [c["caution"] for c in document_cautions(out)] == ["high-voltage"]
    assert code == 1  # still unacknowledged


def test_a_user_rule_cannot_take_a_cautions_id(project, capsys):
    (project / "mine").mkdir()
    (project / "mine" / "hv.py").write_text(
        "from checker.engine import rule\n\n\n"
        "@rule('high-voltage', 'info', 'Quiet.')\n"
        "def quiet(view):\n"
        "    return []\n")
    code, _, err = run(capsys, "check", "piezo.stage", "--rules-dir", "mine")
    assert code == 2 and "'high-voltage' is defined twice (a caution" in err


# -- acknowledged by a waiver, and still printed -------------------------------------------------
REASON = "reviewed by the safety engineer, enclosure drawing E-4"
ACKNOWLEDGED = PIEZO.replace("(load out (resistance 10k)))",
                             f'(load out (resistance 10k))\n  (waive high-voltage "{REASON}"))')


def test_a_waiver_acknowledges_the_caution_and_it_stays_in_every_format(project, capsys):
    (project / "piezo.stage").write_text(ACKNOWLEDGED)
    reason = "reviewed by the safety engineer, enclosure drawing E-4"
    code, out, _ = run(capsys, "check", "piezo.stage", "--format", "json", "--fail-on",
                       "warning", "--select", "floating-input")
    document = json.loads(out)
    assert [c["acknowledged"] for c in document["cautions"]] == [reason]
    assert document["files"][0]["stages"][0]["cautions"][0]["acknowledged"] == reason
    assert code == 0  # acknowledged: it no longer fails, and no waiver-stale note
    assert not [f for f in document["files"][0]["stages"][0]["findings"]
                if f["rule"].startswith("waiver")]
    _, text, _ = run(capsys, "check", "piezo.stage")
    assert "Cautions (1)" in text and f"acknowledged: {reason}" in text
    _, compact, _ = run(capsys, "check", "piezo.stage", "--format", "compact")
    assert "caution high-voltage: " in compact and f"[acknowledged: {reason}]" in compact
    _, sarif, _ = run(capsys, "check", "piezo.stage", "--format", "sarif")
    result = next(r for r in json.loads(sarif)["runs"][0]["results"]
                  if r["ruleId"] == "high-voltage")
    assert result["properties"]["acknowledged"] == reason and "suppressions" not in result


def test_a_waiver_without_a_reason_acknowledges_nothing(project, capsys):
    (project / "piezo.stage").write_text(ACKNOWLEDGED.replace(
        ' "reviewed by the safety engineer, enclosure drawing E-4"', ""))
    code, out, _ = run(capsys, "check", "piezo.stage", "--format", "json")
    document = json.loads(out)
    assert document["cautions"][0]["acknowledged"] is None
    rules = [f["rule"] for f in document["files"][0]["stages"][0]["findings"]]
    assert "waiver-invalid" in rules and code == 1


def test_a_waiver_of_a_caution_that_is_not_raised_is_stale(project, capsys):
    (project / "piezo.stage").write_text(ACKNOWLEDGED.replace("75V", "15V").replace(
        "-75V", "-15V"))
    _, out, _ = run(capsys, "check", "piezo.stage", "--format", "json")
    document = json.loads(out)
    assert document["cautions"] == []
    stale = [f for f in document["files"][0]["stages"][0]["findings"]
             if f["rule"] == "waiver-stale"]
    assert len(stale) == 1 and "matched no caution" in stale[0]["message"]


# -- each report shows them apart ----------------------------------------------------------------
def test_the_text_report_prints_cautions_first_under_their_own_heading(project, capsys):
    (project / "piezo.stage").write_text(PIEZO.replace("(resistor R1 fb gnd 2k)",
                                                       "(resistor R1 fb gnd 2R)"))
    _, text, _ = run(capsys, "check", "piezo.stage")
    assert text.index("Cautions (1)") < text.index("Errors (")
    assert "does not assess electrical safety" in text
    assert "⚠ high-voltage" in text
    assert "1 caution, " in text.splitlines()[-1]


def test_a_stage_with_only_a_caution_is_not_marked_clean(project, capsys):
    (project / "mains.stage").write_text(textwrap.dedent(TRANSFORMERLESS).lstrip())
    _, text, _ = run(capsys, "check", "mains.stage", "--fail-on", "never")
    stage_line = next(line for line in text.splitlines()
                      if line.lstrip().startswith(("⚠", "✓", "!", "·", "✗"))
                      and "mains-probe" in line)
    assert stage_line.strip().startswith("⚠ mains-probe")


def test_json_report_since_version_3_has_cautions_at_the_top_and_in_each_stage(project, capsys):
    from jsonschema import Draft202012Validator

    from checker.report.json_document import REPORT_SCHEMA

    _, out, _ = run(capsys, "check", "piezo.stage", "--format", "json")
    document = json.loads(out)
    assert document["version"] == 4
    assert not list(Draft202012Validator(REPORT_SCHEMA).iter_errors(document))
    assert document["cautions"] == document["files"][0]["stages"][0]["cautions"]
    assert document["summary"]["cautions"] == 1
    assert document["summary"]["cautions_acknowledged"] == 0
    caution = document["cautions"][0]
    assert caution["basis"] == "dc" and caution["limit"] == DC_LIMIT
    assert caution["message"].startswith(caution["statement"] + ": this tool does not")


def test_sarif_tags_the_caution_and_its_rule_entry(project, capsys):
    _, out, _ = run(capsys, "check", "piezo.stage", "--format", "sarif")
    sarif_run = json.loads(out)["runs"][0]
    result = next(r for r in sarif_run["results"] if r["ruleId"] == "high-voltage")
    assert result["properties"]["tags"] == ["ampcheck-safety-caution"]
    assert result["level"] == "warning"
    entry = sarif_run["tool"]["driver"]["rules"][result["ruleIndex"]]
    assert entry["id"] == "high-voltage"
    assert entry["properties"]["tags"] == ["ampcheck-safety-caution"]


def test_csv_has_a_caution_row_and_a_cautions_column_on_every_row(project, capsys):
    import csv
    import io

    _, out, _ = run(capsys, "check", "piezo.stage", "--format", "csv")
    rows = list(csv.DictReader(io.StringIO(out)))
    assert rows[0]["record"] == "caution" and rows[0]["rule"] == "high-voltage"
    assert rows[0]["severity"] == "caution"
    assert all(row["cautions"] == "high-voltage" for row in rows)


# -- standard error: under the commit hook, and where the report is not read ------------------
def test_under_the_commit_hook_each_caution_has_a_line_on_stderr(project, capsys,
                                                                 monkeypatch):
    monkeypatch.setenv("PRE_COMMIT", "1")
    code, _, err = run(capsys, "check", "piezo.stage")
    assert code == 0  # the hook passes; the line is there all the same
    assert "ampcheck: caution high-voltage: piezo.stage:2:" in err
    assert "ampcheck: 1 safety caution: this tool does not assess electrical safety" in err


def test_a_machine_report_on_stdout_leaves_the_caution_on_stderr_too(project, capsys):
    _, _, err = run(capsys, "check", "piezo.stage", "--format", "sarif")
    assert "ampcheck: caution high-voltage" in err


def test_no_caution_no_line(project, capsys):
    (project / "piezo.stage").write_text(PIEZO.replace("75V", "15V"))
    _, _, err = run(capsys, "check", "piezo.stage", "--format", "json")
    assert "caution" not in err


def test_explain_and_rules_list_the_cautions(capsys):
    code, out, _ = run(capsys, "explain", "mains-derived")
    assert code == 0 and "a safety caution" in out and "What it checks:" in out
    code, out, _ = run(capsys, "rules")
    assert code == 0 and "high-voltage" in out and "mains-derived" in out


def test_a_waiver_on_a_source_acknowledges_that_sources_caution_only(project, capsys):
    # Two cautions: the 150 V supply span and the 55 V peak AC source; the source's own
    # waiver acknowledges its caution and leaves the supplies' one as it is.
    (project / "piezo.stage").write_text(PIEZO.replace(
        "(source in (amplitude 2.9V)",
        '(source in (waive high-voltage "probe behind the guard") (amplitude 55V)'))
    _, out, _ = run(capsys, "check", "piezo.stage", "--format", "json")
    found = {(tuple(c["elements"]), c["acknowledged"]) for c in document_cautions(out)}
    assert found == {(("source at in",), "probe behind the guard"), ((), None)}
