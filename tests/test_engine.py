"""The rule engine: discovery, user rule folders, documentation, failure isolation."""

import pathlib
import textwrap

import pytest

from checker.cli import main
from checker.engine import DOC_SECTIONS, RuleError, load_rules, rule
from checker.rule_docs import rules_markdown

ROOT = pathlib.Path(__file__).resolve().parents[1]
CORE_RULES = {"feedback-pole", "input-resistance", "rail-headroom", "open-loop",
              "load-isolation"}


def test_builtin_rules_include_the_five_core_checks():
    assert CORE_RULES <= set(load_rules())


@pytest.mark.parametrize("rule_id", sorted(load_rules()))
def test_every_rule_docstring_has_every_section(rule_id):
    sections = load_rules()[rule_id].sections()
    for heading in DOC_SECTIONS:
        assert sections.get(heading), f"{rule_id} lacks '{heading}'"


def test_committed_rules_reference_matches_a_fresh_generation():
    committed = (ROOT / "docs" / "rules.md").read_text(encoding="utf-8")
    assert committed == rules_markdown(load_rules()), \
        "docs/rules.md is stale: run `ampcheck rules --markdown > docs/rules.md`"


def test_rule_ids_must_be_kebab_case():
    with pytest.raises(RuleError):
        rule("Bad_Id", "warning", "x")


USER_RULE = textwrap.dedent('''
    from checker.engine import rule

    @rule("too-many-resistors", "info", "Counts resistors.", most=2)
    def too_many_resistors(view):
        """
        What it checks:
            The number of resistors.
        Why it matters:
            A test rule.
        How the fix is computed:
            None.
        Sources:
            None.
        """
        count = len(view.stage.resistors())
        if count > view.settings["most"]:
            yield view.finding(f"{count} resistors", measured=count, limit=2)
''')

STAGE = textwrap.dedent('''
    (stage plain (supply vcc 15V) (supply vee -15V) (ground gnd)
      (opamp U1 (part gp-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
      (resistor R1 in fb 10k) (resistor R2 fb out 20k) (resistor R3 out gnd 10k)
      (source in (range -1V 1V)) (load out (resistance 10k)))
''')


def test_user_rule_folder_loads_through_the_same_loader(tmp_path, capsys):
    folder = tmp_path / "myrules"
    folder.mkdir()
    (folder / "count.py").write_text(USER_RULE)
    stage = tmp_path / "a.stage"
    stage.write_text(STAGE)
    assert "too-many-resistors" in load_rules([str(folder)])
    code = main(["check", str(stage), "--rules-dir", str(folder), "--select",
                 "too-many-resistors", "--fail-on", "info", "--format", "json"])
    out = capsys.readouterr().out
    assert code == 1
    assert '"rule": "too-many-resistors"' in out and '"message": "3 resistors"' in out


def test_user_rule_with_a_builtin_id_is_a_usage_error(tmp_path, capsys):
    folder = tmp_path / "clash"
    folder.mkdir()
    (folder / "dup.py").write_text(USER_RULE.replace("too-many-resistors", "open-loop"))
    stage = tmp_path / "a.stage"
    stage.write_text(STAGE)
    assert main(["check", str(stage), "--rules-dir", str(folder)]) == 2
    assert "defined twice" in capsys.readouterr().err


def test_a_crashing_rule_becomes_a_finding_and_the_run_goes_on(tmp_path, capsys):
    folder = tmp_path / "broken"
    folder.mkdir()
    (folder / "boom.py").write_text(USER_RULE.replace(
        "count = len(view.stage.resistors())", "count = 1 / 0"))
    stage = tmp_path / "a.stage"
    stage.write_text(STAGE)
    code = main(["check", str(stage), "--rules-dir", str(folder), "--format", "json"])
    out = capsys.readouterr().out
    assert code == 1
    assert '"rule": "rule-failed"' in out and "ZeroDivisionError" in out


def test_explain_prints_the_rule_docstring(capsys):
    assert main(["explain", "feedback-pole"]) == 0
    out = capsys.readouterr().out
    for heading in DOC_SECTIONS:
        assert heading in out


def test_explain_unknown_rule_suggests_the_nearest(capsys):
    assert main(["explain", "feedback-pol"]) == 2
    assert "feedback-pole" in capsys.readouterr().err


ODD = textwrap.dedent('''\
    (stage out-on-rail (supply vcc 12V) (supply vee -12V) (ground gnd)
      (opamp U1 (part gp-bipolar) (in+ in) (in- vcc) (out vcc) (v+ vcc) (v- vee))
      (resistor R1 in gnd 10k)
      (source in (range 0 1V)))
    (stage source-loop (supply vcc 12V) (supply vee -12V) (ground gnd)
      (opamp U1 (part gp-bipolar) (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
      (source in (range 0 1V)) (source in (range -1V 1V))
      (load out (resistance 1k)))
    ''')


def test_structural_problems_are_findings_at_the_element(tmp_path, capsys):
    path = tmp_path / "odd.stage"
    path.write_text(ODD)
    assert main(["check", str(path), "--format", "json"]) == 1
    import json

    document = json.loads(capsys.readouterr().out)
    found = {(f["rule"], f["stage"], f["line"]) for s in document["files"][0]["stages"]
             for f in s["findings"] if f["rule"] in ("output-on-rail", "stage-unsolvable")}
    # U1's line in the first stage; the two ideal sources on one net in the second (a
    # source on a supply net is refused by the builder before any analysis).
    assert found == {("output-on-rail", "out-on-rail", 2), ("stage-unsolvable", "source-loop", 7)}
