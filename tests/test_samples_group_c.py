"""The new samples for the noise, resistor, integrator, floating-input and common-mode
rules, through the command line: each rule fires on the sample written to show it, and
none of them fires on the good samples."""

from __future__ import annotations

import json
import pathlib

import pytest

from checker.cli import main

ROOT = pathlib.Path(__file__).resolve().parents[1]

# sample file -> (stage, rule, element, severity) it was written to show
SHOWN_BY = {
    "fish-counter.stage": ("fish-counter-gain", "noise", "R1", "error"),
    "bank-humidity.stage": ("bank-humidity-gain", "resistor-range", "R2", "warning"),
    "battery-monitor.stage": ("battery-monitor", "resistor-power", "R1", "warning"),
    "autosampler-flow.stage": ("autosampler-flow", "integrator-drift", "U1", "warning"),
    "hydrophone.stage": ("hydrophone-gain", "floating-input", "U1", "error"),
    "groundwater-level.stage": ("groundwater-buffer", "common-mode-range", "U1", "error"),
}
OUR_RULES = {rule for _stage, rule, _element, _severity in SHOWN_BY.values()}
GOOD_FILES = {"water-temperature.stage.json": ("water-temp-gain",),
              "leaf-wetness.stage": ("leaf-wetness-buffer", "leaf-wetness-scale")}


def check(path: str, capsys, monkeypatch) -> dict:
    monkeypatch.chdir(ROOT)
    main(["check", path, "--format", "json", "--fail-on", "never"])
    return json.loads(capsys.readouterr().out)


def stage_findings(document: dict, name: str) -> list[dict]:
    stages = {s["name"]: s for f in document["files"] for s in f["stages"]}
    return stages[name]["findings"]


@pytest.mark.parametrize("sample", sorted(SHOWN_BY))
def test_rule_fires_on_the_sample_written_to_show_it(sample, capsys, monkeypatch):
    stage, rule, element, severity = SHOWN_BY[sample]
    document = check(f"samples/{sample}", capsys, monkeypatch)
    assert [f["path"] for f in document["files"] if f["problems"]] == []
    fired = [f for f in stage_findings(document, stage) if f["rule"] == rule]
    assert fired, f"{rule} did not fire on {sample}"
    assert element in fired[0]["elements"]
    assert fired[0]["severity"] == severity


@pytest.mark.parametrize("sample", sorted(GOOD_FILES))
def test_our_rules_leave_the_good_samples_clean(sample, capsys, monkeypatch):
    document = check(f"samples/{sample}", capsys, monkeypatch)
    for stage in GOOD_FILES[sample]:
        ours = [f["rule"] for f in stage_findings(document, stage) if f["rule"] in OUR_RULES]
        assert ours == []
