"""`ampcheck new-rule`: the template it writes is a working rule whose examples and
generated test pass, and it refuses what it must (a bad id, a taken id, an existing
file)."""

from __future__ import annotations

import sys
import textwrap
import types

import pytest

from checker.analysis import AnalysisOptions
from checker.build import build_stages
from checker.cli import main
from checker.engine import RunOptions, check_stages, load_rules
from checker.io.load import parse_text
from checker.parts.library import load_library

LIBRARY = load_library()


def scaffolded(tmp_path, capsys, rule_id="inverting-resistance"):
    (tmp_path / "rules").mkdir()
    (tmp_path / "tests").mkdir()
    code = main(["new-rule", rule_id, "--into", str(tmp_path / "rules"),
                 "--tests", str(tmp_path / "tests")])
    assert code == 0, capsys.readouterr().err
    return load_rules([str(tmp_path / "rules")])[rule_id]


def run_rule(rule, text: str, stray: float = 1e-12):
    stages = build_stages(parse_text(textwrap.dedent(text).strip(), "t.stage"), LIBRARY)
    options = RunOptions(analysis=AnalysisOptions(stray_capacitance_f=stray),
                         judge_requirements=False)
    _figures, by_stage = check_stages(stages, [rule], options)
    return [f for found in by_stage.values() for f in found if f.rule == rule.id]


def test_the_template_is_a_working_rule_with_both_examples(tmp_path, capsys):
    rule = scaffolded(tmp_path, capsys)
    assert rule.settings == {"max_ohm": 1e6}
    examples = rule.examples()
    assert run_rule(rule, examples["Passes"]) == []
    (finding,) = run_rule(rule, examples["Fails"])
    # 2.2 MΩ in parallel with 10 MΩ plus the part's 150 Ω output resistance (the op-amp's
    # source zeroed, its output pin sits at Ro to ground): parallel resistance, common
    # practice; cmos-rrio's Ro from the built-in library
    ro = 150.0
    assert finding.measured == pytest.approx(2.2e6 * (10e6 + ro) / (12.2e6 + ro), rel=1e-9)
    assert finding.limit == 1e6 and finding.unit == "Ω"
    assert finding.suggestion is not None


def test_the_generated_test_passes_against_the_new_rule(tmp_path, capsys, monkeypatch):
    rule = scaffolded(tmp_path, capsys)
    shim = types.ModuleType("rule_helpers")
    shim.findings = lambda text, rule_id: run_rule(rule, text, stray=0.0)

    def only(text, rule_id):
        (one,) = run_rule(rule, text, stray=0.0)
        return one

    shim.only = only
    monkeypatch.setitem(sys.modules, "rule_helpers", shim)
    source = (tmp_path / "tests" / "test_rule_inverting_resistance.py").read_text()
    namespace: dict = {}
    exec(compile(source, "generated", "exec"), namespace)
    tests = [value for name, value in namespace.items() if name.startswith("test_")]
    assert len(tests) == 2
    for test in tests:
        test()


def test_it_refuses_a_bad_id_a_taken_id_and_an_existing_file(tmp_path, capsys):
    scaffolded(tmp_path, capsys)
    capsys.readouterr()
    into = ["--into", str(tmp_path / "rules"), "--no-test"]
    assert main(["new-rule", "Bad_Id", *into]) == 2
    assert "not kebab-case" in capsys.readouterr().err
    assert main(["new-rule", "loop-margin", *into]) == 2
    assert "exists" in capsys.readouterr().err
    before = (tmp_path / "rules" / "inverting_resistance.py").read_text()
    assert main(["new-rule", "inverting-resistance", *into]) == 2
    assert "never writes over" in capsys.readouterr().err
    assert (tmp_path / "rules" / "inverting_resistance.py").read_text() == before
    assert main(["new-rule", "fresh-rule", "--into", str(tmp_path / "nowhere")]) == 2
    assert "no such folder" in capsys.readouterr().err
