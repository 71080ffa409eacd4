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


# -- SARIF for code scanning -----------------------------------------------------------------

def sarif(capsys, *args) -> dict:
    return json.loads(run(capsys, *args, "--format", "sarif"))


def sarif_schema() -> dict:
    # The OASIS SARIF 2.1.0 schema, vendored: origin and licence in tests/data/README.md.
    return json.loads((Path(__file__).parent / "data" / "sarif-schema-2.1.0.json")
                      .read_text(encoding="utf-8"))


def test_the_vendored_schema_is_the_oasis_sarif_2_1_0_one_and_rejects_a_broken_log():
    from jsonschema import Draft4Validator

    schema = sarif_schema()
    assert schema["id"].startswith("https://docs.oasis-open.org/sarif/sarif/v2.1.0/")
    assert "2.1.0" in schema["title"]
    Draft4Validator.check_schema(schema)
    broken = {"version": "2.1.0", "runs": [{"tool": {"driver": {}}}]}  # driver needs a name
    assert list(Draft4Validator(schema).iter_errors(broken))


def test_samples_sarif_validates_against_the_oasis_schema(capsys):
    from jsonschema import Draft4Validator, FormatChecker

    document = sarif(capsys, "samples/")
    validator = Draft4Validator(sarif_schema(), format_checker=FormatChecker())
    errors = sorted(validator.iter_errors(document), key=lambda e: list(e.absolute_path))
    assert not errors, [f"{list(e.absolute_path)}: {e.message}" for e in errors[:3]]
    assert len(document["runs"][0]["results"]) > 10  # the samples do raise findings


def test_every_result_has_our_fingerprint_as_its_line_hash(capsys):
    results = sarif(capsys, "samples/")["runs"][0]["results"]
    for result in results:
        prints = result["partialFingerprints"]
        assert prints["primaryLocationLineHash"] == prints["ampcheckFinding/v1"]
        assert len(prints["primaryLocationLineHash"]) == 32


def test_the_line_hash_survives_an_edit_of_the_reported_line_and_a_shift(tmp_path,
                                                                        monkeypatch, capsys):
    # Code scanning would hash the line's text: a changed tolerance on the reported line,
    # or a line added above, would reopen the alert. Ours names file, stage, elements, rule.
    text = Path(SAMPLE).read_text(encoding="utf-8")
    monkeypatch.chdir(tmp_path)
    Path("conductivity.stage").write_text(text, encoding="utf-8")

    def gain_tolerance_result() -> dict:
        results = sarif(capsys, "conductivity.stage")["runs"][0]["results"]
        return next(r for r in results if r["ruleId"] == "gain-tolerance")

    before = gain_tolerance_result()
    line = before["locations"][0]["physicalLocation"]["region"]["startLine"]
    lines = text.splitlines(keepends=True)
    assert "(tolerance 1%)" in lines[line - 1]
    lines[line - 1] = lines[line - 1].replace("(tolerance 1%)", "(tolerance 2%)")
    Path("conductivity.stage").write_text("; moved down a line\n" + "".join(lines),
                                          encoding="utf-8")
    after = gain_tolerance_result()
    assert after["locations"][0]["physicalLocation"]["region"]["startLine"] == line + 1
    assert after["properties"]["measured"] != before["properties"]["measured"]
    assert (after["partialFingerprints"]["primaryLocationLineHash"]
            == before["partialFingerprints"]["primaryLocationLineHash"])


def rule_entries(capsys) -> dict[str, dict]:
    driver = sarif(capsys, SAMPLE)["runs"][0]["tool"]["driver"]
    return {entry["id"]: entry for entry in driver["rules"]}


def test_rule_help_is_generated_from_the_docstrings(capsys):
    from checker.catalogue import ENGINE_CATALOGUE
    from checker.engine import DOC_SECTIONS, load_rules

    entries = rule_entries(capsys)
    for rule in load_rules().values():
        markdown, text = entries[rule.id]["help"]["markdown"], entries[rule.id]["help"]["text"]
        for heading in DOC_SECTIONS:
            body = " ".join(rule.sections()[heading].split())
            assert f"### {heading}\n\n{body}" in markdown, (rule.id, heading)
            assert f"{heading}: {body}" in text, (rule.id, heading)
        for example in rule.examples().values():
            assert f"```\n{example}\n```" in markdown, rule.id
    for item in ENGINE_CATALOGUE.values():
        markdown = entries[item.id]["help"]["markdown"]
        assert f"### How to fix\n\n{' '.join(item.fix.split())}" in markdown, item.id


def test_gain_tolerance_help_markdown_reads_as_documented(capsys):
    markdown = rule_entries(capsys)["gain-tolerance"]["help"]["markdown"]
    assert markdown.startswith("### What it checks\n\nIn a stage that states both `gain` and"
                               " `gain-tolerance`,")
    assert "Settings (override in configuration): `default_tolerance` = 0.05," in markdown
    assert "### A stage it fails\n\n```\n" in markdown


def test_every_rule_is_tagged_with_its_area_and_nothing_reads_as_security(capsys):
    from checker.catalogue import ENGINE_CATALOGUE
    from checker.engine import load_rules
    from checker.rule_tags import AREA_OF

    known = set(load_rules()) | set(ENGINE_CATALOGUE)
    assert known == set(AREA_OF)  # a new built-in rule must be given an area
    entries = rule_entries(capsys)
    assert entries["gain-tolerance"]["properties"]["tags"] == ["design-review", "accuracy"]
    assert entries["loop-margin"]["properties"]["tags"] == ["design-review", "stability"]
    assert entries["waiver-stale"]["properties"]["tags"] == ["design-review", "waivers"]
    assert entries["high-voltage"]["properties"]["tags"] == ["ampcheck-safety-caution"]
    for rule_id in known:
        tags = entries[rule_id]["properties"]["tags"]
        assert tags[0] == "design-review" and "user-rule" not in tags and "security" not in tags
    out = run(capsys, "samples/", "--format", "sarif")
    assert "security-severity" not in out and '"security"' not in out


def test_a_user_rule_is_tagged_as_one(tmp_path, capsys):
    (tmp_path / "house.py").write_text('''from checker.engine import rule


@rule("house-divider", "info", "A house rule that never fires.", spread=[1, 2])
def house_divider(view):
    """
    What it checks:
        Nothing at all.

    Why it matters:
        It shows a user rule's SARIF entry.

    How the fix is computed:
        There is none.

    Sources:
        None (common practice).
    """
    return []
''', encoding="utf-8")
    document = sarif(capsys, SAMPLE, "--rules-dir", str(tmp_path), "--trust-config-rules")
    entries = {e["id"]: e for e in document["runs"][0]["tool"]["driver"]["rules"]}
    entry = entries["house-divider"]
    assert entry["properties"]["tags"] == ["design-review", "user-rule"]
    assert entry["help"]["markdown"].startswith("### What it checks\n\nNothing at all.")
    assert "`spread` = [1, 2]" in entry["help"]["markdown"]


def test_a_huge_or_non_finite_tolerance_number_still_gets_a_clear_message():
    import pytest

    from checker.units import UnitError, parse_value

    for value in (10 ** 400, float("nan"), float("inf")):
        with pytest.raises(UnitError, match="a tolerance needs a percent sign"):
            parse_value(value, "percentage")
