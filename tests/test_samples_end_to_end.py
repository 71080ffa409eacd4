"""The samples through the command line: each rule fires where samples/README.md says it
should, the good stages stay clean, and the exit codes follow --fail-on and --select."""

from __future__ import annotations

import json
import pathlib

import pytest

from checker.cli import main

ROOT = pathlib.Path(__file__).resolve().parents[1]

# rule id -> the sample stage written to show it (samples/README.md)
SHOWN_BY = {
    "feedback-pole": "conductivity-gain",
    "input-resistance": "soil-moisture-gain",
    "rail-headroom": "level-gain",
    "open-loop": "flood-alarm",
    "load-isolation": "logger-line-driver",
    "bandwidth": "rain-impact-preamp",
    "slew-rate": "scour-probe-drive",
    "output-current": "scour-probe-drive",
    "supply-range": "lamp-current-sense",
    "stable-gain": "doppler-echo-buffer",
    "dc-error": "corrosion-gain",
    "gain-tolerance": "irradiance-gain",
    "preferred-values": "irradiance-gain",
    "difference-balance": "strain-diff",
    "noise": "fish-counter-gain",
    "resistor-range": "bank-humidity-gain",
    "resistor-power": "battery-monitor",
    "integrator-drift": "autosampler-flow",
    "floating-input": "hydrophone-gain",
    "common-mode-range": "groundwater-buffer",
    "swapped-inputs": "staff-gauge-gain",
    "loop-margin": "river-stage-composite",
    "unstable-stage": "siren-buffer",
    "not-analysed": "level-amp",  # samples/netlist/heronpost-level.cir
    "boundary-assumed": "level-smoothing",
}
GOOD_STAGES = ("water-temp-gain", "leaf-wetness-buffer", "leaf-wetness-scale")

_cache: dict[str, tuple[int, dict]] = {}


@pytest.fixture
def report(capsys, monkeypatch) -> tuple[int, dict]:
    """(exit code, JSON document) of ``ampcheck check samples/ --format json``, run once."""
    if "json" not in _cache:
        monkeypatch.chdir(ROOT)
        code = main(["check", "samples/", "--format", "json"])
        _cache["json"] = (code, json.loads(capsys.readouterr().out))
    return _cache["json"]


def stages(document: dict) -> dict[str, dict]:
    return {stage["name"]: stage for f in document["files"] for stage in f["stages"]}


@pytest.mark.parametrize("rule,stage", sorted(SHOWN_BY.items()))
def test_rule_fires_on_the_sample_written_to_show_it(report, rule, stage):
    _code, document = report
    fired = [f["rule"] for f in stages(document)[stage]["findings"]]
    assert rule in fired


def test_turbidity_transimpedance_sample_has_a_feedback_pole_error(report):
    _code, document = report
    found = [(f["rule"], f["severity"]) for f in stages(document)["turbidity-tia"]["findings"]]
    assert ("feedback-pole", "error") in found


@pytest.mark.parametrize("stage", GOOD_STAGES)
def test_good_sample_stage_has_no_findings(report, stage):
    _code, document = report
    assert stages(document)[stage]["findings"] == []


def test_every_sample_file_reads_without_problems(report):
    _code, document = report
    assert [f["path"] for f in document["files"] if f["problems"]] == []
    netlist_stages = 3  # samples/netlist/heronpost-level.cir: level-amp, level-smoothing, logger-buffer
    assert len(stages(document)) == len(list(ROOT.glob("samples/*.stage*"))) + 1 + netlist_stages  # leaf-wetness holds two


def test_every_rule_is_shown_by_a_sample():
    from checker.engine import load_rules

    assert set(load_rules()) == set(SHOWN_BY)


def test_no_rule_fails_on_any_sample(report):
    _code, document = report
    crashed = [(name, f["message"]) for name, stage in stages(document).items()
               for f in stage["findings"] if f["rule"] in ("rule-failed", "stage-unsolvable")]
    assert crashed == []


def test_exit_code_is_1_with_errors_and_fail_on_error(report):
    code, document = report  # --fail-on error is the default
    assert document["summary"]["error"] > 0
    assert code == 1


def test_exit_code_is_1_with_explicit_fail_on_error(capsys, monkeypatch):
    monkeypatch.chdir(ROOT)
    assert main(["check", "samples/", "--format", "json", "--fail-on", "error"]) == 1
    capsys.readouterr()


def test_exit_code_is_0_with_fail_on_never(capsys, monkeypatch):
    monkeypatch.chdir(ROOT)
    assert main(["check", "samples/", "--format", "json", "--fail-on", "never"]) == 0
    capsys.readouterr()


def test_unknown_rule_in_select_is_a_usage_error(capsys, monkeypatch):
    monkeypatch.chdir(ROOT)
    assert main(["check", "samples/", "--select", "no-such-rule"]) == 2
    assert "no-such-rule" in capsys.readouterr().err


def test_text_report_has_no_traceback(capsys, monkeypatch):
    monkeypatch.chdir(ROOT)
    main(["check", "samples/", "--format", "text"])
    captured = capsys.readouterr()
    assert "conductivity-gain" in captured.out
    assert "Traceback" not in captured.out + captured.err
    assert "internal error" not in captured.out + captured.err


def test_the_high_voltage_sample_carries_its_safety_caution(report):
    _code, document = report
    stage = stages(document)["piezo-driver"]
    assert [c["caution"] for c in stage["cautions"]] == ["high-voltage"]
    # +-75 V rails span 150 V, beyond the 60 V DC limit of IEC 62368-1 class ES1
    assert stage["cautions"][0]["measured"] == 150.0
    assert [c["stage"] for c in document["cautions"]] == ["piezo-driver"]


def test_the_piezo_drivers_in_phase_load_is_heavier_than_its_parts_headroom_load(report):
    # At 38 kHz (where its swing peaks in the 38-42 kHz band) the output drives the
    # 41 kOhm feedback divider in parallel with 47 Ohm into 10 kOhm || 2.2 nF; only the
    # in-phase part counts: 1/(1/41k + Re(1/(47 + 10k || 1/(j w 2.2n)))) = 7.32 kOhm
    # (Ohm's law with complex impedances, any circuits text), below the 9 kOhm that is
    # 10 % under the part class's 10 kOhm headroom-load: the headroom is not checked.
    import cmath
    w = 2 * cmath.pi * 38e3
    piezo = 1 / (1 / 10e3 + 1j * w * 2.2e-9)
    expected = 1 / (1 / 41e3 + (1 / (47 + piezo)).real)
    assert expected == pytest.approx(7315, rel=1e-3)
    _code, document = report
    stage = stages(document)["piezo-driver"]
    (headroom,) = [v for v in stage["requirements"] if v["requirement"] == "headroom"]
    assert headroom["status"] == "could-not-check"
    assert "out drives 7.32 kΩ" in headroom["reason"]
