"""The engine's own findings as rules: every id the engine emits is in the one registry
(checker/catalogue.py) with docs, and each is emitted with the registry's severity.

Each engine finding is triggered on a small stage or file here and its emitted severity
compared with the catalogue's; the test fails when an emitter hard-codes another one.
"""

import json
import textwrap

import pytest

from checker import audit
from checker.catalogue import ENGINE_CATALOGUE, ENGINE_DOC_SECTIONS, engine_severity
from checker.cli import main
from checker.engine import ENGINE_RULES, ENGINE_SEVERITIES, load_rules
from checker.rule_docs import rules_markdown

BUFFER = textwrap.dedent("""\
    (version 1)
    (stage buf
      (ground gnd) (supply vcc 12V) (supply vee -12V)
      (opamp U1 (part gp-bipolar) (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
      (source in (amplitude 1V) (band 10Hz 1kHz))
      (load out (resistance 10k))
      {extra})
    """)
# A waiver of a rule that does not fire, one without a reason, a gain the unity buffer
# does not have (no rule names a cause) and a CMRR on a stage with no differential pair.
WAIVERS_AND_REQUIREMENTS = ('(waive slew-rate "kept") (waive load-isolation)'
                            ' (require (gain 5) (cmrr 80dB))')
ON_RAIL = textwrap.dedent("""\
    (version 1)
    (stage out-on-rail (supply vcc 12V) (supply vee -12V) (ground gnd)
      (opamp U1 (part gp-bipolar) (in+ in) (in- vcc) (out vcc) (v+ vcc) (v- vee))
      (resistor R1 in gnd 10k)
      (source in (range 0 1V)))
    (stage source-loop (supply vcc 12V) (supply vee -12V) (ground gnd)
      (opamp U1 (part gp-bipolar) (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
      (source in (range 0 1V)) (source in (range -1V 1V))
      (load out (resistance 1k)))
    """)
FAILING_RULE = textwrap.dedent('''\
    from checker.engine import rule

    @rule("always-raises", "warning", "A rule that stops with an error.")
    def always_raises(view):
        """What it checks:
            Nothing.
        Why it matters:
            It does not.
        How the fix is computed:
            None.
        Sources:
            None.
        """
        raise ValueError("on purpose")
    ''')


def emitted(capsys, *argv) -> dict[str, set[str]]:
    """Severities by rule id of every finding and file problem of a JSON check run."""
    main(["check", *argv, "--format", "json", "--no-config", "--fail-on", "never",
          "--jobs", "1"])
    document = json.loads(capsys.readouterr().out)
    found: dict[str, set[str]] = {}
    for file in document["files"]:
        for item in file.get("problems", []) + [f for s in file["stages"]
                                                 for f in s["findings"]]:
            found.setdefault(item["rule"], set()).add(item["severity"])
    return found


def test_every_engine_id_is_emitted_with_the_catalogue_severity(tmp_path, capsys,
                                                                 monkeypatch):
    found: dict[str, set[str]] = {}

    def merge(more):
        for rid, labels in more.items():
            found.setdefault(rid, set()).update(labels)

    stage = tmp_path / "buf.stage"
    stage.write_text(BUFFER.format(extra=WAIVERS_AND_REQUIREMENTS))
    merge(emitted(capsys, str(stage)))
    odd = tmp_path / "odd.stage"
    odd.write_text(ON_RAIL)
    merge(emitted(capsys, str(odd)))
    bad = tmp_path / "bad.stage"
    bad.write_text("(version 1)\n(stage broken (ground gnd) (supply vcc 12 parsecs))\n")
    merge(emitted(capsys, str(bad)))
    rules = tmp_path / "rules"
    rules.mkdir()
    (rules / "always_raises.py").write_text(FAILING_RULE)
    plain = tmp_path / "plain.stage"
    plain.write_text(BUFFER.format(extra=""))
    merge(emitted(capsys, str(plain), "--rules-dir", str(rules)))
    # A baseline written for the buffer with its findings, then the findings fixed.
    base = tmp_path / "base.json"
    main(["check", str(stage), "--no-config", "--write-baseline", str(base)])
    capsys.readouterr()
    stage.write_text(BUFFER.format(extra=""))
    merge(emitted(capsys, str(stage), "--baseline", str(base)))
    real = audit.review_file

    def stops(path, *args, **kwargs):
        if path.endswith("plain.stage"):
            raise OverflowError("on purpose")
        return real(path, *args, **kwargs)

    monkeypatch.setattr(audit, "review_file", stops)
    merge(emitted(capsys, str(plain)))

    assert set(ENGINE_CATALOGUE) <= set(found), sorted(set(ENGINE_CATALOGUE) - set(found))
    for rid, item in ENGINE_CATALOGUE.items():
        assert found[rid] == {item.severity.label}, rid
    # The documented severities of issue 17: notes, not errors.
    assert {rid: engine_severity(rid).label for rid in
            ("waiver-stale", "baseline-stale", "requirement-unchecked")} == dict.fromkeys(
        ("waiver-stale", "baseline-stale", "requirement-unchecked"), "info")
    assert engine_severity("output-on-rail").label == "error"


@pytest.mark.parametrize("rule_id", sorted(ENGINE_CATALOGUE))
def test_each_engine_rule_is_documented_in_every_view(rule_id, capsys):
    item = ENGINE_CATALOGUE[rule_id]
    for heading in ENGINE_DOC_SECTIONS:
        assert item.sections()[heading].strip(), f"{rule_id} lacks {heading}"
    assert ENGINE_RULES[rule_id] == item.summary
    assert ENGINE_SEVERITIES[rule_id] is item.severity
    markdown = rules_markdown(load_rules())
    assert f"| [`{rule_id}`](#{rule_id}) | {item.severity.label} |" in markdown
    assert f"\n## {rule_id}\n" in markdown
    assert main(["explain", rule_id]) == 0
    out = capsys.readouterr().out
    assert out.startswith(f"{rule_id} ({item.severity.label}, built into the engine)")
    assert item.fix in " ".join(out.split())
