"""The group-B samples through the command line: dc-error, gain-tolerance,
difference-balance and preferred-values each fire on the sample written to show them,
and stay quiet on the good stages."""

from __future__ import annotations


import pytest

from sample_helpers import GOOD_FILES, findings_by_stage

RULES = ("dc-error", "gain-tolerance", "difference-balance", "preferred-values")
GOOD = GOOD_FILES


check = findings_by_stage


def fired(findings: list[dict]) -> set[tuple[str, str]]:
    return {(f["rule"], f["severity"]) for f in findings}


def test_corrosion_monitor_shows_a_dc_error(capsys, monkeypatch):
    found = check(capsys, monkeypatch, "corrosion-monitor.stage")["corrosion-gain"]
    assert ("dc-error", "error") in fired(found)
    finding = next(f for f in found if f["rule"] == "dc-error")
    # Bias currents through R2: 1 M x (80 nA + 10 nA) = 90 mV, plus about 7 mV of offset
    # (the sample's own comment, worked by hand); the requirement is 30 mV.
    assert finding["measured"] == pytest.approx(0.097, abs=0.002)
    assert finding["limit"] == pytest.approx(0.030)
    assert finding["suggestion"]["value"] == pytest.approx(340e3)  # R2 || (R1 + 10k), E96


def test_irradiance_shows_gain_tolerance_and_a_non_preferred_value(capsys, monkeypatch):
    found = check(capsys, monkeypatch, "irradiance.stage")["irradiance-gain"]
    # a stated requirement that is not met is an error (docs/format.md, require)
    assert ("gain-tolerance", "error") in fired(found)
    assert ("preferred-values", "info") in fired(found)
    tolerance = next(f for f in found if f["rule"] == "gain-tolerance")
    # 1 + 44k * 1.05 / (1k * 0.95) = 49.63, 10.3 % over 45 (the sample's comment).
    assert tolerance["measured"] == pytest.approx(49.63 / 45 - 1, abs=0.002)
    preferred = next(f for f in found if f["rule"] == "preferred-values")
    assert preferred["elements"] == ["R2"]
    # nearest E24 is 43 kOhm, but 1 + 43k/1k = 44 is 2.2 % off the 45 asked (±1 %): the
    # re-check offers the nearest E96 value in a 1 % part instead, 44.2 kOhm (IEC 60063),
    # giving 1 + 44.2k/1k = 45.2
    assert preferred["suggestion"]["value"] == pytest.approx(44.2e3)
    assert preferred["suggestion"]["check"]["introduces"] == []


def test_mast_strain_shows_the_difference_balance(capsys, monkeypatch):
    found = check(capsys, monkeypatch, "mast-strain.stage")["strain-diff"]
    assert ("difference-balance", "error") in fired(found)
    finding = next(f for f in found if f["rule"] == "difference-balance")
    # (1 + G)/(4t) = 11/0.04 = 275, 48.8 dB (common practice), against 60 dB asked.
    assert finding["measured"] == pytest.approx(48.8, abs=0.3)
    assert finding["limit"] == pytest.approx(60.0)
    assert finding["suggestion"]["value"] == pytest.approx(0.0025)


@pytest.mark.parametrize("name,stages", sorted(GOOD.items()))
def test_good_stages_raise_nothing_from_these_rules(capsys, monkeypatch, name, stages):
    found = check(capsys, monkeypatch, name, "--select", ",".join(RULES))
    for stage in stages:
        assert found[stage] == []
