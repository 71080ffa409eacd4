"""The JSON report document: its schema, determinism, and SI numbers."""

import json

from jsonschema import Draft202012Validator

from checker.cli import main
from checker.report.json_document import REPORT_SCHEMA


def run_json(capsys, *args) -> dict:
    main(["check", *args, "--format", "json", "--fail-on", "never"])
    return json.loads(capsys.readouterr().out)


def test_report_schema_is_a_valid_draft_2020_12_schema():
    Draft202012Validator.check_schema(REPORT_SCHEMA)


def test_samples_report_validates_against_the_report_schema(capsys):
    document = run_json(capsys, "samples/")
    errors = list(Draft202012Validator(REPORT_SCHEMA).iter_errors(document))
    assert not errors, errors[0].message


def test_report_is_byte_for_byte_deterministic(capsys):
    main(["check", "samples/", "--format", "json", "--fail-on", "never"])
    first = capsys.readouterr().out
    main(["check", "samples/", "--format", "json", "--fail-on", "never"])
    assert capsys.readouterr().out == first


def test_summary_counts_match_the_listed_findings(capsys):
    document = run_json(capsys, "samples/")
    listed = [f for file in document["files"] for f in file["problems"]]
    listed += [f for file in document["files"] for s in file["stages"] for f in s["findings"]]
    for severity in ("error", "warning", "info"):
        assert document["summary"][severity] == sum(f["severity"] == severity for f in listed)


def test_figures_are_si_numbers(tmp_path, capsys):
    # Inverting stage: gain -Rf/R1 = -10, input resistance R1 = 10 kOhm, noise gain
    # 1 + Rf/R1 = 11 (Sedra and Smith, Microelectronic Circuits, 7th ed., op-amp chapter); to 1e-3
    # with a finite open-loop gain of 1e6 and no output resistance.
    stage = tmp_path / "inv.stage"
    stage.write_text("""(stage inv (supply vcc 15V) (supply vee -15V) (ground gnd)
      (opamp U1 (params (open-loop-gain 1e6) (gbw 1MHz)) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
      (resistor R1 in fb 10k) (resistor R2 fb out 100k)
      (source in (range -0.1V 0.1V) (band 1Hz 100Hz) (impedance 0))
      (load out (resistance 10k)))""")
    figures = run_json(capsys, str(stage))["files"][0]["stages"][0]["figures"]
    assert abs(figures["gain"] - -10) < 1e-3 * 10
    assert abs(figures["input_resistance"] - 10e3) < 1e-3 * 10e3
    assert abs(figures["noise_gain"] - 11) < 1e-3 * 11
