"""Netlists through the command line: check, the netlist map from the configuration or
the command line, folders, extract, and the audit machinery (workers, baselines, SARIF)."""

from __future__ import annotations

import json
import os
import pathlib

import pytest

from checker.cli import main

ROOT = pathlib.Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "samples" / "netlist"

NETLIST = """* invented board
V1 vcc 0 DC 5
R1 in fb 10k
R2 fb out 100k
XU1 mid fb vcc 0 out OPX
R9 out cable 10
"""
MAP = """(version 1)
(opamp-model OPX (part cmos-rrio) (pins in+ in- v+ v- out))
(rail mid 2.5V)
(at-net in (source (range 2.4V 2.6V) (impedance 100)))
(at-net cable (load (resistance 10k) (capacitance 10n)))
"""


@pytest.fixture
def board(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "boards").mkdir()
    (tmp_path / "boards" / "front.cir").write_text(NETLIST)
    (tmp_path / "boards" / "front.netmap").write_text(MAP)
    return tmp_path


def run(capsys, *args) -> tuple[int, str, str]:
    code = main(list(args))
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def test_check_reads_a_netlist_and_points_findings_at_its_lines(board, capsys):
    code, out, err = run(capsys, "check", "boards/front.cir", "--netlist-map",
                         "boards/front.netmap", "--format", "json", "--fail-on", "never")
    assert code == 0, err
    document = json.loads(out)
    stage = document["files"][0]["stages"][0]
    assert stage["name"] == "u1" and stage["line"] == 5  # the XU1 line
    lines = {(f["rule"], f["line"]) for f in stage["findings"]}
    # the cable's 10 nF behind 10 Ohm on the output: declared at J's net, first seen on
    # the R9 line
    assert ("load-isolation", 6) in lines
    assert all(f["path"] == "boards/front.cir" for f in stage["findings"])


def test_the_netlist_map_comes_from_the_configuration(board, capsys):
    (board / "boards" / "ampcheck.toml").write_text('netlist-map = "front.netmap"\n')
    code, out, _ = run(capsys, "check", "boards/", "--format", "compact", "--fail-on", "never")
    assert code == 0
    assert "boards/front.cir:6:1: error load-isolation" in out
    code, out, _ = run(capsys, "config", "boards/front.cir")
    assert f"netlist-map = {os.path.normpath(board / 'boards' / 'front.netmap')}" in out


def test_a_folder_without_a_netlist_map_has_its_netlists_left_alone(board, capsys):
    (board / "boards" / "a.stage").write_text(
        "(version 1)(stage a (ground gnd) (supply vcc 5V)"
        " (opamp U1 (part cmos-rrio) (in+ in) (in- out) (out out) (v+ vcc) (v- gnd))"
        " (source in (range 1V 2V)))")
    code, out, _ = run(capsys, "check", "boards/", "--format", "json", "--fail-on", "never")
    assert [f["path"] for f in json.loads(out)["files"]] == ["boards/a.stage"]


def test_a_named_netlist_without_a_map_says_how_to_give_one(board, capsys):
    code, out, _ = run(capsys, "check", "boards/front.cir", "--format", "compact")
    assert code == 1
    assert "boards/front.cir:1:1: error input-invalid: no netlist map" in out


def test_a_broken_netlist_map_stops_the_run_with_its_lines(board, capsys):
    (board / "boards" / "front.netmap").write_text(MAP + "(rail vee -5Q)\n")
    code, _, err = run(capsys, "check", "boards/front.cir", "--netlist-map",
                       "boards/front.netmap")
    assert code == 2
    assert "cannot load netlist map" in err and "front.netmap:6:11" in err


def test_a_map_naming_an_unknown_part_is_a_usage_error(board, capsys):
    (board / "boards" / "front.netmap").write_text(MAP.replace("cmos-rrio", "cmos-rrI0"))
    code, _, err = run(capsys, "check", "boards/front.cir", "--netlist-map",
                       "boards/front.netmap")
    assert code == 2 and "unknown part 'cmos-rrI0'; did you mean 'cmos-rrio'?" in err


def test_extract_writes_stage_files_to_a_new_folder_with_netlist_lines(board, capsys):
    code, _, err = run(capsys, "extract", "boards/", "--into", "adopted", "--netlist-map",
                       "boards/front.netmap")
    assert code == 0, err
    text = (board / "adopted" / "front.stage").read_text()
    assert "(resistor R1 in fb 10k)  ; front.cir:3 R1 (10k)" in text
    assert "(opamp U1 (part cmos-rrio)" in text
    # the written file is a stage file like any other
    code, out, _ = run(capsys, "check", "adopted/front.stage", "--format", "compact",
                       "--fail-on", "never")
    assert "adopted/front.stage" in out and "load-isolation" in out
    assert sorted(p.name for p in board.iterdir() if p.name.startswith(".ampcheck")) == []


def test_extract_never_writes_into_an_existing_folder(board, capsys):
    (board / "adopted").mkdir()
    code, _, err = run(capsys, "extract", "boards/front.cir", "--into", "adopted",
                       "--netlist-map", "boards/front.netmap")
    assert code == 2 and "it exists" in err
    assert list((board / "adopted").iterdir()) == []


def test_extract_reports_a_bad_netlist_and_writes_the_others(board, capsys):
    (board / "boards" / "broken.cir").write_text("* t\nR1 a b 4k7\n")
    code, _, err = run(capsys, "extract", "boards/", "--into", "adopted", "--netlist-map",
                       "boards/front.netmap")
    assert code == 1
    assert "boards/broken.cir:2:8:" in err and "no codes like 4k7" in err
    assert sorted(p.name for p in (board / "adopted").iterdir()) == ["front.stage"]


def test_parallel_workers_give_the_same_report_as_one_process(board, capsys):
    for i in range(4):
        (board / "boards" / f"copy{i}.cir").write_text(NETLIST.replace("10k", f"{10 + i}k"))
    (board / "boards" / "ampcheck.toml").write_text('netlist-map = "front.netmap"\n')
    _, one, _ = run(capsys, "check", "boards/", "--format", "json", "--jobs", "1",
                    "--fail-on", "never")
    _, two, _ = run(capsys, "check", "boards/", "--format", "json", "--jobs", "2",
                    "--fail-on", "never")
    assert json.loads(one) == json.loads(two)
    assert len(json.loads(one)["files"]) == 5


def test_a_baseline_of_a_netlist_lets_the_run_pass_until_something_new(board, capsys):
    args = ["check", "boards/front.cir", "--netlist-map", "boards/front.netmap",
            "--format", "compact"]
    assert run(capsys, *args)[0] == 1  # the board has errors
    assert run(capsys, *args, "--write-baseline", "base.json")[0] == 0  # written
    assert run(capsys, *args, "--baseline", "base.json")[0] == 0
    (board / "boards" / "front.cir").write_text(NETLIST.replace("R2 fb out 100k",
                                                                "R2 fb out 1meg"))
    code, out, _ = run(capsys, *args, "--baseline", "base.json")
    assert code == 1 and "rail-headroom" in out


def test_sarif_locates_findings_in_the_netlist(board, capsys):
    run(capsys, "check", "boards/front.cir", "--netlist-map", "boards/front.netmap",
        "--output", "sarif:out.sarif", "--fail-on", "never")
    sarif = json.loads((board / "out.sarif").read_text())
    locations = [r["locations"][0]["physicalLocation"] for r in sarif["runs"][0]["results"]]
    assert {loc["artifactLocation"]["uri"] for loc in locations} == {"boards/front.cir"}
    assert 6 in {loc["region"]["startLine"] for loc in locations}


def test_the_sample_board_reviews_as_the_readme_says(capsys, monkeypatch):
    monkeypatch.chdir(ROOT)
    code, out, _ = run(capsys, "check", "samples/netlist/", "--format", "json",
                       "--fail-on", "never")
    document = json.loads(out)
    stages = {s["name"]: s for s in document["files"][0]["stages"]}
    assert list(stages) == ["level-amp", "level-smoothing", "logger-buffer"]
    found = {(f["rule"], f["line"]) for s in stages.values() for f in s["findings"]}
    assert ("load-isolation", 13) in found  # the logger cable, declared in the map
    assert ("not-analysed", 37) in found  # Q1, the lamp driver
    assert ("boundary-assumed", 29) in found  # the test pad behind R12
