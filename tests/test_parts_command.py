"""`ampcheck parts NAME`: one part in full, with its source; unknown names get hints."""

from __future__ import annotations

import pytest

from checker.cli import EXIT_OK, EXIT_USAGE, main


def test_one_builtin_part_in_full_with_units_and_source(capsys):
    assert main(["parts", "cmos-rrio"]) == EXIT_OK
    out = capsys.readouterr().out
    # values are the project's own, from checker/parts/generic.parts
    assert "built-in library (invented, typical of the class)" in out
    assert "gbw                      10 MHz" in out
    assert "current-noise            5 fA/√Hz" in out
    assert "supply-abs-max           6 V" in out
    assert "second-pole              —" in out


def test_a_user_part_names_its_file(tmp_path, capsys):
    lib = tmp_path / "mine.parts"
    lib.write_text("(part heron-buffer (open-loop-gain 50k) (gbw 2MHz))\n", encoding="utf-8")
    assert main(["parts", "heron-buffer", "--parts", str(lib)]) == EXIT_OK
    out = capsys.readouterr().out
    assert f"user part file {lib}" in out and "2 MHz" in out


def test_an_unknown_name_lists_the_nearest_and_exits_2(capsys):
    assert main(["parts", "cmos-rail"]) == EXIT_USAGE == 2
    err = capsys.readouterr().err
    assert "no part named 'cmos-rail'" in err and "cmos-rrio" in err


def test_parts_json_gives_si_floats_with_units_and_source(capsys):
    import json

    assert main(["parts", "--format", "json"]) == EXIT_OK
    doc = json.loads(capsys.readouterr().out)
    parts = {p["name"]: p for p in doc["parts"]}
    rrio = parts["cmos-rrio"]  # values from checker/parts/generic.parts
    assert rrio["source"] == {"kind": "builtin", "invented": True}
    assert rrio["parameters"]["gbw"] == {"value": 10e6, "unit": "Hz"}
    noise = rrio["parameters"]["current-noise"]
    assert noise["unit"] == "A/√Hz" and noise["value"] == pytest.approx(5e-15)
    assert rrio["parameters"]["second-pole"] == {"value": None, "unit": "Hz"}


def test_rules_json_lists_ids_severities_and_setting_defaults(capsys):
    import json

    from checker.engine import load_rules

    assert main(["rules", "--format", "json"]) == EXIT_OK
    rows = {r["id"]: r for r in json.loads(capsys.readouterr().out)["rules"]}
    # max_gain_error 0.01 is the project's own default in the bandwidth rule
    assert rows["bandwidth"]["settings"] == {"max_gain_error": 0.01}
    assert rows["bandwidth"]["severity"] == "warning" and rows["bandwidth"]["kind"] == "rule"
    assert set(load_rules([])) <= set(rows)
