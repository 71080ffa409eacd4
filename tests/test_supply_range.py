"""Supplies with a range (a battery from 10.5 V to 14.4 V): every rule and requirement is
evaluated at both ends, not at the nominal voltage alone (checker/supply_ends.py)."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent

BATTERY = """(version 1)
(stage battery-buffer
  (ground gnd)
  (supply vbat 12V (range 10.5V 14.4V))
  (opamp U1 (part gp-bipolar) (in+ in) (in- out) (out out) (v+ vbat) (v- gnd))
  (source in (label "gauge") (range 3V 8.8V))
  (load out (resistance 10k))
  (require (gain 1) (headroom 0.5V)))
"""


def _check(tmp_path: Path, text: str, name: str = "s.stage") -> dict:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    run = subprocess.run([sys.executable, "-m", "checker", "check", str(path), "--format",
                          "json", "--fail-on", "never", "--no-config"], capture_output=True,
                         text=True, cwd=ROOT)
    assert run.returncode == 0, run.stderr
    return json.loads(run.stdout)["files"][0]


def _rules(file: dict) -> dict[str, str]:
    return {f["rule"]: f["message"] for s in file["stages"] for f in s["findings"]}


def test_a_follower_that_fits_at_12_v_clips_at_the_discharged_end(tmp_path):
    # Headroom arithmetic (common practice): gp-bipolar swings to 1.5 V of each rail, so at
    # 10.5 V the usable top is 9 V; the output reaches 8.8 V plus 2 mV of offset error,
    # a margin of 0.198 V against the 0.5 V asked. At 12 V the top is 10.5 V: it fits.
    nominal = _check(tmp_path, BATTERY.replace(" (range 10.5V 14.4V)", ""), "nominal.stage")
    assert _rules(nominal) == {}
    assert all(v["status"] == "met" for v in nominal["stages"][0]["requirements"])
    ranged = _check(tmp_path, BATTERY)
    rules = _rules(ranged)
    assert set(rules) == {"rail-headroom", "common-mode-range"}
    assert rules["rail-headroom"].startswith("with vbat at 10.5 V: ")
    headroom = ranged["stages"][0]["requirements"][1]
    assert headroom["status"] == "not-met" and "vbat at 10.5 V" in headroom["reason"]
    assert headroom["measured"] == pytest.approx(0.198, abs=1e-3)
    # the figures the report prints stay the nominal ones
    assert ranged["stages"][0]["figures"]["output_high"] == pytest.approx(8.8, abs=3e-3)  # plus the offset error


def test_a_caution_is_judged_at_the_end_that_makes_it_worst(tmp_path):
    # 60 V DC limit (IEC 62368-1 class ES1, DC, as in checker/cautions.py):
    # a 48 V bus that reaches 62 V while charging is beyond it.
    stage = """(version 1)
(stage bus-buffer (ground gnd) (supply vbus 48V (range 42V 62V))
  (opamp U1 (part hv-bipolar) (in+ in) (in- out) (out out) (v+ vbus) (v- gnd))
  (source in (range 10V 20V)))
"""
    cautions = _check(tmp_path, stage)["stages"][0]["cautions"]
    assert [c["measured"] for c in cautions] == [62.0]


@pytest.mark.parametrize("range_, message", [
    ("(range 10.5V 11V)", "must hold its nominal 12 V"),
    ("(range -1V 14V)", "crosses 0 V"),
])
def test_a_range_that_cannot_be_is_refused_where_it_is_written(tmp_path, range_, message):
    file = _check(tmp_path, BATTERY.replace("(range 10.5V 14.4V)", range_))
    [problem] = file["problems"]
    assert message in problem["message"] and (problem["line"], problem["column"]) == (4, 20)


def test_more_than_three_ranged_supplies_are_refused(tmp_path):
    supplies = " ".join(f"(supply v{i} {i + 5}V (range {i + 4}V {i + 6}V))" for i in range(4))
    stage = BATTERY.replace("(supply vbat 12V (range 10.5V 14.4V))",
                            "(supply vbat 12V) " + supplies)
    [problem] = _check(tmp_path, stage)["problems"]
    assert "more than 3 supplies" in problem["message"]


def test_the_json_syntax_takes_the_same_range(tmp_path):
    stage = {"version": 1, "stages": [{
        "name": "battery-buffer", "ground": "gnd",
        "supplies": [{"net": "vbat", "voltage": "12V", "range": ["10.5V", "14.4V"]}],
        "opamps": [{"ref": "U1", "part": "gp-bipolar", "in+": "in", "in-": "out",
                    "out": "out", "v+": "vbat", "v-": "gnd"}],
        "sources": [{"net": "in", "label": "gauge", "range": ["3V", "8.8V"]}],
        "loads": [{"net": "out", "resistance": "10k"}],
        "require": {"gain": 1, "headroom": "0.5V"}}]}
    file = _check(tmp_path, json.dumps(stage), "s.stage.json")
    assert set(_rules(file)) == {"rail-headroom", "common-mode-range"}
