"""Team workflow: configuration, waivers, baselines, output formats, parallel runs."""

import json
import re
import os
import pathlib
import textwrap

import pytest
from jsonschema import Draft4Validator

from checker.cli import main

ROOT = pathlib.Path(__file__).resolve().parents[1]

# An inverting stage whose 1 kOhm input loads a 10 kOhm source: input-resistance fires
# (10x source-impedance rule, common practice).
LOADED = textwrap.dedent("""\
    (stage loaded (supply vcc 15V) (supply vee -15V) (ground gnd)
      (opamp U1 (part precision-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
      (resistor R1 in fb 1k)
      (resistor R2 fb out 10k)
      (source in (range -0.5V 0.5V) (band 1Hz 1kHz) (impedance 10k))
      (load out (resistance 100k)))
    """)
FIXED = LOADED.replace("(resistor R1 in fb 1k)", "(resistor R1 in fb 100k)").replace(
    "(resistor R2 fb out 10k)", "(resistor R2 fb out 1M)")


def run(capsys, *args) -> tuple[int, str, str]:
    code = main(list(args))
    out, err = capsys.readouterr()
    return code, out, err


def findings(out: str) -> list[dict]:
    document = json.loads(out)
    found = [f for file in document["files"] for f in file["problems"]]
    return found + [f for file in document["files"] for s in file["stages"]
                    for f in s["findings"]]


@pytest.fixture
def project(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "a.stage").write_text(LOADED)
    return tmp_path


# -- configuration -----------------------------------------------------------------------

def test_config_file_sets_rule_settings_and_severity(project, capsys):
    (project / "ampcheck.toml").write_text(textwrap.dedent("""\
        [rules.input-resistance]
        severity = "error"
        ratio_to_source = 0.05
        """))
    code, out, _ = run(capsys, "check", "a.stage", "--format", "json", "--select",
                       "input-resistance")
    assert code == 0 and findings(out) == []  # 1 kOhm >= 0.05 x 10 kOhm
    (project / "ampcheck.toml").write_text('[rules.input-resistance]\nseverity = "error"\n')
    code, out, _ = run(capsys, "check", "a.stage", "--format", "json", "--select",
                       "input-resistance")
    assert code == 1 and [f["severity"] for f in findings(out)] == ["error"]


def test_pyproject_tool_table_is_read_and_the_closest_file_wins(project, capsys):
    (project / "pyproject.toml").write_text('[tool.ampcheck]\nignore = ["input-resistance"]\n')
    sub = project / "sub"
    sub.mkdir()
    (sub / "b.stage").write_text(LOADED)
    (sub / "ampcheck.toml").write_text('select = ["input-resistance"]\n')
    code, out, _ = run(capsys, "check", "a.stage", "sub/b.stage", "--format", "json")
    rules_by_file = {f["path"]: f["rule"] for f in findings(out)}
    assert rules_by_file == {os.path.join("sub", "b.stage"): "input-resistance"}


def test_command_line_overrides_the_config(project, capsys):
    (project / "ampcheck.toml").write_text('fail-on = "never"\n')
    assert run(capsys, "check", "a.stage")[0] == 0
    assert run(capsys, "check", "a.stage", "--fail-on", "warning")[0] == 1


def test_unknown_config_key_is_a_usage_error_with_file_and_line(project, capsys):
    (project / "ampcheck.toml").write_text('fail-on = "error"\n\nfail_on_severity = 1\n')
    code, _, err = run(capsys, "check", "a.stage")
    assert code == 2
    assert "ampcheck.toml:3" in err and "fail_on_severity" in err


def test_bad_rule_setting_value_names_its_line(project, capsys):
    (project / "ampcheck.toml").write_text('[rules.feedback-pole]\nwarn_below_deg = "high"\n')
    code, _, err = run(capsys, "check", "a.stage")
    assert code == 2 and "ampcheck.toml:2" in err and "warn-below-deg" in err


def test_per_path_overrides_apply_to_matching_files_only(project, capsys):
    legacy = project / "legacy"
    legacy.mkdir()
    (legacy / "old.stage").write_text(LOADED)
    (project / "ampcheck.toml").write_text(textwrap.dedent("""\
        select = ["input-resistance"]
        [[overrides]]
        paths = ["legacy/*"]
        ignore = ["input-resistance"]
        """))
    _, out, _ = run(capsys, "check", ".", "--format", "json", "--fail-on", "never")
    assert [f["path"] for f in findings(out)] == ["a.stage"]


def test_config_command_prints_values_and_where_they_came_from(project, capsys):
    (project / "ampcheck.toml").write_text('fail-on = "warning"\n[rules.open-loop]\n'
                                           'hysteresis_fraction = 0.02\n')
    code, out, _ = run(capsys, "config", ".")
    assert code == 0
    assert "fail-on = warning" in out and "ampcheck.toml:1" in out
    assert "rules.open-loop.hysteresis-fraction = 0.02" in out and "ampcheck.toml:3" in out
    assert "rules.feedback-pole.warn-below-deg = 45 °    (default)" in out


# -- waivers -----------------------------------------------------------------------------

def test_waiver_with_reason_marks_the_finding_and_it_no_longer_fails(project, capsys):
    waived = LOADED.replace("(source in (range -0.5V 0.5V)",
                            '(source in (waive input-resistance "bench test only") (range -0.5V 0.5V)')
    (project / "a.stage").write_text(waived)
    code, out, _ = run(capsys, "check", "a.stage", "--format", "json", "--fail-on", "warning",
                       "--select", "input-resistance")
    assert code == 0
    (finding,) = findings(out)
    assert finding["rule"] == "input-resistance" and finding["waived"] == "bench test only"


def test_waiver_in_json_is_a_key(project, capsys):
    main(["convert", "a.stage", "--to", "json", "-o", "a.stage.json"])
    capsys.readouterr()
    os.remove("a.stage")
    tree = json.loads((project / "a.stage.json").read_text())
    tree["stages"][0]["waive"] = [{"rule": "input-resistance", "reason": "accepted loss"}]
    (project / "a.stage.json").write_text(json.dumps(tree))
    _, out, _ = run(capsys, "check", "a.stage.json", "--format", "json", "--select",
                    "input-resistance")
    assert [f["waived"] for f in findings(out)] == ["accepted loss"]


def test_waiver_without_reason_is_an_error_at_its_line(project, capsys):
    (project / "a.stage").write_text(LOADED.replace(
        "(load out (resistance 100k)))", "(load out (resistance 100k))\n  (waive input-resistance))"))
    code, out, _ = run(capsys, "check", "a.stage", "--format", "json")
    invalid = [f for f in findings(out) if f["rule"] == "waiver-invalid"]
    assert code == 1 and [(f["line"], f["severity"]) for f in invalid] == [(7, "error")]


def test_waiver_of_an_unknown_rule_suggests_the_nearest(project, capsys):
    (project / "a.stage").write_text(LOADED.replace(
        "(load out (resistance 100k)))", '(load out (resistance 100k))\n  (waive input-resistence "x"))'))
    _, out, _ = run(capsys, "check", "a.stage", "--format", "json")
    (invalid,) = [f for f in findings(out) if f["rule"] == "waiver-invalid"]
    assert "'input-resistance'" in invalid["message"]


def test_waiver_that_matches_nothing_is_stale(project, capsys):
    (project / "a.stage").write_text(FIXED.replace(
        "(load out (resistance 100k)))", '(load out (resistance 100k))\n  (waive open-loop "x"))'))
    _, out, _ = run(capsys, "check", "a.stage", "--format", "json", "--select", "open-loop")
    assert [(f["rule"], f["severity"]) for f in findings(out)] == [("waiver-stale", "info")]


# -- baselines ---------------------------------------------------------------------------

def test_baseline_accepts_old_findings_and_survives_moved_lines(project, capsys):
    # The findings reach --fail-on, yet writing the baseline succeeded: exit 0.
    assert run(capsys, "check", "a.stage", "--write-baseline", "base.json",
               "--fail-on", "warning")[0] == 0
    entries = json.loads((project / "base.json").read_text())["entries"]
    assert {e["rule"] for e in entries} >= {"input-resistance"}
    assert all("line" not in e for e in entries)
    (project / "a.stage").write_text("; a comment moves every line down\n\n" + LOADED)
    code, out, _ = run(capsys, "check", "a.stage", "--baseline", "base.json",
                       "--fail-on", "warning", "--format", "json")
    assert code == 0 and all(f["baselined"] for f in findings(out))


def test_baseline_fails_on_new_findings_only(project, capsys):
    run(capsys, "check", "a.stage", "--write-baseline", "base.json")
    (project / "b.stage").write_text(LOADED.replace("stage loaded", "stage fresh"))
    code, out, _ = run(capsys, "check", ".", "--baseline", "base.json", "--fail-on",
                       "warning", "--format", "json")
    new = [f for f in findings(out) if not f["baselined"]]
    assert code == 1 and {f["path"] for f in new} == {"b.stage"}


def test_stale_baseline_entries_are_reported_and_prune_only_shrinks(project, capsys):
    run(capsys, "check", "a.stage", "--write-baseline", "base.json")
    before = json.loads((project / "base.json").read_text())["entries"]
    (project / "a.stage").write_text(FIXED)
    _, out, _ = run(capsys, "check", "a.stage", "--baseline", "base.json", "--format", "json")
    assert any(f["rule"] == "baseline-stale" for f in findings(out))
    run(capsys, "check", "a.stage", "--baseline", "base.json", "--prune-baseline")
    after = json.loads((project / "base.json").read_text())["entries"]
    assert len(after) < len(before)
    assert all(entry in before for entry in after)


def test_baseline_file_is_sorted_and_stable(project, capsys):
    (project / "b.stage").write_text(LOADED.replace("stage loaded", "stage second"))
    run(capsys, "check", ".", "--write-baseline", "one.json")
    run(capsys, "check", ".", "--write-baseline", "two.json", "--jobs", "2")
    one = (project / "one.json").read_text()
    assert one == (project / "two.json").read_text()
    entries = json.loads(one)["entries"]
    keys = [(e["path"], e["stage"], e["elements"], e["rule"]) for e in entries]
    assert keys == sorted(keys)


# -- output formats ----------------------------------------------------------------------

def sarif_schema() -> dict:
    # The OASIS SARIF 2.1.0 schema (errata 01), vendored: origin and licence in
    # tests/data/README.md.
    text = (ROOT / "tests" / "data" / "sarif-schema-2.1.0.json").read_text(encoding="utf-8")
    return json.loads(text)


def test_sarif_output_validates_against_the_oasis_schema(capsys):
    code, out, _ = run(capsys, "check", str(ROOT / "samples"), "--format", "sarif",
                       "--fail-on", "never")
    document = json.loads(out)
    errors = list(Draft4Validator(sarif_schema()).iter_errors(document))
    assert code == 0 and not errors, errors[:1]


def test_sarif_results_carry_rule_docs_locations_fingerprints_and_suppressions(project, capsys):
    (project / "a.stage").write_text(LOADED.replace(
        "(source in (range", '(source in (waive input-resistance "accepted") (range'))
    _, out, _ = run(capsys, "check", "a.stage", "--format", "sarif")
    run_ = json.loads(out)["runs"][0]
    rules = {r["id"]: r for r in run_["tool"]["driver"]["rules"]}
    assert "What it checks" in rules["feedback-pole"]["help"]["text"]
    (result,) = [r for r in run_["results"] if r["ruleId"] == "input-resistance"]
    location = result["locations"][0]["physicalLocation"]
    assert location["artifactLocation"]["uri"] == "a.stage"
    assert location["region"]["startLine"] == 5
    assert result["suppressions"] == [{"kind": "inSource", "justification": "accepted"}]
    assert len(result["partialFingerprints"]["ampcheckFinding/v1"]) == 32
    assert "timestamp" not in out.lower() and "startTimeUtc" not in out


def test_several_outputs_in_one_run(project, capsys):
    code, out, _ = run(capsys, "check", "a.stage", "--format", "compact", "--output",
                       "sarif:r.sarif", "--output", "csv:r.csv", "--output", "json:r.json")
    assert code == 0
    assert out.startswith("a.stage:5:")
    assert json.loads((project / "r.sarif").read_text())["version"] == "2.1.0"
    assert (project / "r.csv").read_text().splitlines()[0].startswith("record,path,line,column")
    assert json.loads((project / "r.json").read_text())["format"] == "ampcheck-report"


def test_output_never_writes_over_an_input(project, capsys):
    before = (project / "a.stage").read_text()
    code, _, err = run(capsys, "check", "a.stage", "--output", "json:a.stage")
    assert code == 2 and "refusing" in err
    assert (project / "a.stage").read_text() == before


# -- bulk audits -------------------------------------------------------------------------

def test_results_do_not_depend_on_job_count_or_batching(capsys):
    samples = sorted(str(p) for p in (ROOT / "samples").glob("*.stage*"))
    _, whole, _ = run(capsys, "check", *samples, "--format", "compact", "--fail-on", "never",
                      "--jobs", "2")
    _, serial, _ = run(capsys, "check", *samples, "--format", "compact", "--fail-on", "never",
                       "--jobs", "1")
    assert whole == serial
    batched = ""
    for i in range(0, len(samples), 3):
        batched += run(capsys, "check", *samples[i:i + 3], "--format", "compact",
                       "--fail-on", "never", "--jobs", "1")[1]
    assert sorted(batched.splitlines()) == sorted(whole.splitlines())


def test_a_bad_file_is_counted_and_listed_and_the_audit_goes_on(project, capsys):
    (project / "broken.stage").write_text("(stage broken\n")
    code, out, _ = run(capsys, "check", ".", "--jobs", "2")
    assert code == 1
    assert "Could not read 1 file: broken.stage" in out
    assert "2 files, 1 stage:" in out


def test_text_headers_count_what_the_closing_summary_counts(project, capsys):
    import re

    run(capsys, "check", "a.stage", "--write-baseline", "base.json")
    (project / "b.stage").write_text(LOADED.replace("stage loaded", "stage fresh"))
    _, out, _ = run(capsys, "check", ".", "--baseline", "base.json", "--fail-on", "never")
    closing = out.strip().splitlines()[-1]
    for heading, noun in (("Errors", "error"), ("Warnings", "warning"), ("Notes", "note")):
        header = re.search(rf"^{heading} \((\d+)(?:, \+(\d+) waived or in the baseline)?\)",
                           out, re.M)
        summary = re.search(rf"(\d+) {noun}s?\b", closing)
        assert summary, closing
        assert int(header.group(1) if header else 0) == int(summary.group(1)), out
    # a's findings are baselined: listed apart with --show-baselined, else not listed
    assert "a.stage:5:3" not in out
    _, out, _ = run(capsys, "check", ".", "--baseline", "base.json", "--fail-on", "never",
                    "--show-baselined")
    assert "waived or in the baseline)" in out and "a.stage:5:3" in out


def test_an_unreadable_file_can_be_baselined(project, capsys):
    (project / "broken.stage").write_text("(stage broken\n  (opamp U1\n")  # unclosed
    code, out, _ = run(capsys, "check", "broken.stage", "--format", "json")
    assert code == 1 and {f["rule"] for f in findings(out)} == {"input-invalid"}
    assert run(capsys, "check", "broken.stage", "--write-baseline", "base.json")[0] == 0
    entries = json.loads((project / "base.json").read_text())["entries"]
    assert entries and {e["rule"] for e in entries} == {"input-invalid"}
    code, out, _ = run(capsys, "check", "broken.stage", "--baseline", "base.json",
                       "--format", "json")
    assert code == 0 and all(f["baselined"] for f in findings(out))


def test_baselined_findings_are_hidden_from_the_text_report_unless_asked(project, capsys):
    run(capsys, "check", "a.stage", "--write-baseline", "base.json")
    code, out, err = run(capsys, "check", "a.stage", "--baseline", "base.json",
                         "--format", "compact")
    assert code == 0 and out == ""
    hidden = re.search(r"(\d+) findings? in the baseline not listed", err)
    assert hidden and int(hidden.group(1)) >= 1, err
    code, out, _ = run(capsys, "check", "a.stage", "--baseline", "base.json",
                       "--format", "compact", "--show-baselined")
    assert code == 0 and "input-resistance" in out
    assert len(out.splitlines()) == int(hidden.group(1))
    code, out, _ = run(capsys, "check", "a.stage", "--baseline", "base.json")
    assert "input-resistance" not in out and "0 errors" in out
    # a machine format keeps them, marked
    code, out, _ = run(capsys, "check", "a.stage", "--baseline", "base.json",
                       "--format", "json")
    assert findings(out) and all(f["baselined"] for f in findings(out))


def test_ignoring_input_invalid_drops_the_findings_but_not_the_unread_count(project, capsys):
    (project / "broken.stage").write_text("(stage broken\n  (opamp U1\n")  # unclosed
    code, out, _ = run(capsys, "check", "broken.stage", "a.stage", "--ignore",
                       "input-invalid", "--format", "json")
    assert "input-invalid" not in {f["rule"] for f in findings(out)}
    code, out, _ = run(capsys, "check", "broken.stage", "a.stage", "--ignore",
                       "input-invalid", "--fail-on", "error")
    assert "input-invalid" not in out
    assert "1 file could not be read" in out and "broken.stage" in out
    assert code == 0  # a's findings are warnings; nothing else fails
