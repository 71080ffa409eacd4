"""Machine outputs (JSON, CSV, SARIF): units, lists and the SARIF conventions."""

import csv
import io
import json
from pathlib import Path

from checker.cli import main
from checker.report.json_document import FORMAT_VERSION
from checker.report.machine_units import machine_unit

# samples/conductivity.stage: a required gain of -10 ±2 % with 1 % resistors; its
# gain-tolerance finding reads "-9.705 at the worst corner ..., 2.95 % from the required
# -10" (the project's own figure), so the machine value is the fraction 1 - 9.705/10.
SAMPLE = "samples/conductivity.stage"
WORST_ERROR = 1 - 9.705 / 10  # 0.0295


def run(capsys, *args) -> str:
    main(["check", *args, "--fail-on", "never"])
    return capsys.readouterr().out


def test_a_fraction_is_named_ratio_and_any_other_unit_is_kept():
    assert machine_unit("%") == "ratio"
    assert machine_unit("°") == "°"
    assert machine_unit(None) is None


def test_json_names_a_fraction_ratio_in_findings_suggestions_and_verdicts(capsys):
    document = json.loads(run(capsys, SAMPLE, "--format", "json"))
    assert document["version"] == FORMAT_VERSION == 4
    stage = document["files"][0]["stages"][0]
    finding = next(f for f in stage["findings"] if f["rule"] == "gain-tolerance")
    assert abs(finding["measured"] - WORST_ERROR) < 1e-4
    assert (finding["unit"], finding["limit"]) == ("ratio", 0.02)
    assert (finding["suggestion"]["unit"], finding["suggestion"]["value"]) == ("ratio", 0.005)
    verdict = next(v for v in stage["requirements"] if v["requirement"] == "gain-tolerance")
    assert verdict["unit"] == "ratio"
    assert "%" not in [f["unit"] for f in stage["findings"]]


def test_csv_names_a_fraction_ratio(capsys):
    rows = list(csv.DictReader(io.StringIO(run(capsys, SAMPLE, "--format", "csv"))))
    tolerance = [r for r in rows if r["rule"] == "gain-tolerance"]
    assert [r["record"] for r in tolerance] == ["finding", "requirement"]
    assert {r["unit"] for r in tolerance} == {"ratio"}
    assert abs(float(tolerance[0]["measured"]) - WORST_ERROR) < 1e-4


def test_sarif_names_a_fraction_ratio(capsys):
    document = json.loads(run(capsys, SAMPLE, "--format", "sarif"))
    results = document["runs"][0]["results"]
    result = next(r for r in results if r["ruleId"] == "gain-tolerance")
    assert result["properties"]["unit"] == "ratio"
    assert abs(result["properties"]["measured"] - WORST_ERROR) < 1e-4


def test_the_human_text_keeps_the_percentage(capsys):
    assert "measured 2.95 %, limit 2 %" in run(capsys, SAMPLE)


def test_csv_elements_split_back_into_the_json_lists(capsys):
    # Designators and labels may hold spaces ("load out", "supply vcc"): "; " joins them.
    document = json.loads(run(capsys, "samples/", "--format", "json"))
    expected = sorted((f["path"], f["line"], f["column"], f["rule"], tuple(f["elements"]))
                      for file in document["files"] for s in file["stages"]
                      for f in s["findings"])
    expected += sorted((c["path"], c["line"], c["column"], c["caution"], tuple(c["elements"]))
                       for c in document["cautions"])
    rows = list(csv.DictReader(io.StringIO(run(capsys, "samples/", "--format", "csv"))))

    def split(cell: str) -> tuple:
        return tuple(cell.split("; ")) if cell else ()

    found = sorted((r["path"], int(r["line"]), int(r["column"]), r["rule"], split(r["elements"]))
                   for r in rows if r["record"] == "finding")
    found += sorted((r["path"], int(r["line"]), int(r["column"]), r["rule"],
                     split(r["elements"])) for r in rows if r["record"] == "caution")
    assert found == expected
    assert ("U1", "load out") in [item[4] for item in found]  # logger-output.stage.json


def test_a_json_tolerance_given_as_a_fraction_is_hinted_as_its_percentage(tmp_path, capsys):
    # 0.01 as a fraction is 1 % (and "0.01%" would be 0.0001): the hint must say "1%".
    document = json.loads(Path("samples/logger-output.stage.json").read_text(encoding="utf-8"))
    document["stages"][0]["resistors"][0]["tolerance"] = 0.01
    stage = tmp_path / "fraction.stage.json"
    text = json.dumps(document, indent=2)
    stage.write_text(text, encoding="utf-8")
    line = next(n for n, row in enumerate(text.splitlines(), 1) if '"tolerance": 0.01' in row)
    column = text.splitlines()[line - 1].index('"tolerance"') + 1  # the key's position
    out = run(capsys, str(stage), "--format", "compact")
    message = ('a tolerance needs a percent sign: write "1%" for a fraction of 0.01'
               ' ("0.01%" is 0.0001)')
    assert (f"fraction.stage.json:{line}:{column}: error input-invalid: tolerance of resistor"
            f" R1: {message}") in out
    assert 'write "0.01%"' not in out


def test_a_tolerance_hint_for_whole_numbers_and_sexp_text():
    import pytest

    from checker.units import UnitError, parse_value

    for value, hint in ((5, 'write "5%"'), ("0.5", "write 50% for a fraction of 0.5"),
                        ("2", "write 2%"), (0.005, 'write "0.5%" for a fraction of 0.005')):
        with pytest.raises(UnitError) as error:
            parse_value(value, "percentage")
        assert hint in str(error.value)
