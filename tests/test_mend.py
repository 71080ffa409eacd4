"""`ampcheck mend`: verified fixes written into a copy of a stage file at the recorded
positions, comments and layout kept, the input never touched without --in-place."""

from __future__ import annotations

import hashlib
import json
import pathlib
import re
import shutil

import pytest

from checker import audit
from checker.cli import main
from checker.io.load import parse_text, read_file
from checker.value_style import Style, format_fraction, format_value

ROOT = pathlib.Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "samples"
REQUEST = audit.Request(figures_wanted=False, use_config=False)
# The samples whose findings carry a verified fix that is an edit of the file
# (measured on the samples: 20 fixes in these 18 files).
MENDABLE = ["autosampler-flow.stage", "bank-humidity.stage", "battery-monitor.stage",
            "conductivity.stage", "corrosion-monitor.stage", "geophone.stage",
            "hydrophone.stage", "irradiance.stage", "logger-output.stage.json",
            "mast-strain.stage", "pressure-level.stage", "river-stage.stage",
            "sediment-integrator.stage", "siren-buffer.stage", "soil-moisture.stage.json",
            "staff-gauge.stage", "turbidity.stage"]


def run(capsys, *argv) -> tuple[int, str, str]:
    code = main(["mend", *argv])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def copy(tmp_path, name: str) -> pathlib.Path:
    target = tmp_path / name
    shutil.copyfile(SAMPLES / name, target)
    return target


def digest(path: pathlib.Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def keyed(result) -> dict:
    return {(s.name, f.rule, f.elements): f for s in result.stages for f in s.findings}


def comments(text: str) -> list[str]:
    return re.findall(r";[^\n]*", text)


def test_a_fix_that_changes_the_load_is_left_out(tmp_path, capsys):
    # The scour-probe driver's output-current fix raises its 390 ohm load: the load is
    # what the stage must drive, so mend writes nothing and says why.
    source = copy(tmp_path, "streambed-resistivity.stage")
    before = digest(source)
    code, _, err = run(capsys, str(source), "--no-config")
    assert code == 0, err
    assert "output-current [U1]: it changes the load on out" in err
    assert "nothing written" in err
    assert digest(source) == before
    assert not (tmp_path / "streambed-resistivity.mended.stage").exists()


@pytest.mark.parametrize("name", MENDABLE)
def test_mended_file_clears_the_fixed_findings_and_brings_no_new_error(tmp_path, capsys,
                                                                      name):
    source = copy(tmp_path, name)
    before = digest(source)
    old = keyed(audit.check_file(str(source), REQUEST))
    code, _, err = run(capsys, str(source), "--no-config")
    assert code == 0, err
    assert digest(source) == before  # the input is never changed
    target = tmp_path / name.replace(".stage", ".mended.stage", 1)
    new_result = audit.check_file(str(target), REQUEST)
    assert new_result.problems == []
    new = keyed(new_result)
    applied = re.findall(r"^applied  \S+:\d+: (\S+) \[([^\]]*)\]", err, re.MULTILINE)
    assert applied, err
    for rule, elements in applied:
        stages = {k[0] for k in old if k[1] == rule and ", ".join(k[2]) == elements}
        assert stages, (rule, elements)
        for stage in stages:
            assert (stage, rule, tuple(elements.split(", "))) not in new, (rule, elements)
    brought = [k for k, f in new.items() if k not in old and f.severity.label == "error"]
    assert brought == []
    original, mended = source.read_text(), target.read_text()
    assert comments(mended) == comments(original)  # every comment, byte for byte


def test_conductivity_is_edited_in_place_of_its_values_and_gains_one_line(tmp_path,
                                                                        capsys):
    source = copy(tmp_path, "conductivity.stage")
    target = tmp_path / "out.stage"
    code, _, err = run(capsys, str(source), "--to", str(target), "--no-config")
    assert code == 0, err
    original = source.read_text()
    expected = original.replace(
        "  (resistor R1 in fb 100k (tolerance 1%))\n"
        "  (resistor R2 fb out 1M (tolerance 1%))\n",
        "  (resistor R1 in fb 100k (tolerance 0.5%))\n"
        "  (resistor R2 fb out 1M (tolerance 0.5%))\n"
        "  (capacitor C1 out fb 1p)\n")
    assert expected != original
    assert target.read_text() == expected
    assert "2 fixes written to" in err


def test_diff_mode_prints_a_unified_diff_and_writes_nothing(tmp_path, capsys):
    source = copy(tmp_path, "staff-gauge.stage")
    code, out, _ = run(capsys, str(source), "--diff", "--no-config")
    assert code == 0
    assert out.startswith(f"--- {source}\n+++ {tmp_path / 'staff-gauge.mended.stage'}\n")
    assert "-  (opamp U1 (part gp-bipolar) (in+ fb) (in- gnd) (out out)" in out
    assert "+  (opamp U1 (part gp-bipolar) (in+ gnd) (in- fb) (out out)" in out
    assert sorted(p.name for p in tmp_path.iterdir()) == ["staff-gauge.stage"]


def test_in_place_writes_over_the_input_only_when_asked(tmp_path, capsys):
    source = copy(tmp_path, "pressure-level.stage")
    elsewhere = tmp_path / "copy.stage"
    assert run(capsys, str(source), "--to", str(elsewhere), "--no-config")[0] == 0
    code, _, err = run(capsys, str(source), "--in-place", "--no-config")
    assert code == 0, err
    assert source.read_text() == elsewhere.read_text()
    assert "(tolerance 0.5%)" in source.read_text()


def test_the_input_is_refused_as_the_output(tmp_path, capsys):
    source = copy(tmp_path, "pressure-level.stage")
    before = digest(source)
    code, _, err = run(capsys, str(source), "--to", str(source), "--no-config")
    assert code == 2
    assert "refusing to write over the input file" in err
    assert digest(source) == before


def test_a_netlist_is_refused_with_a_message(capsys):
    code, _, err = run(capsys, str(SAMPLES / "netlist" / "heronpost-level.cir"))
    assert code == 2
    assert "not a stage file" in err and "ampcheck extract" in err
    assert "Traceback" not in err


def test_conflicting_fixes_apply_the_first_and_say_so(tmp_path, capsys):
    source = copy(tmp_path, "sediment-integrator.stage")
    code, _, err = run(capsys, str(source), "--no-config")
    assert code == 0
    # integrator-drift adds R2 across C1; load-isolation would add another R2
    assert re.search(r"^applied  \S+: integrator-drift", err, re.MULTILINE)
    assert re.search(r"^left out \S+: load-isolation \[U1, load out\]: R2 already changed"
                     r" by the fix for integrator-drift, applied first", err, re.MULTILINE)
    mended = (tmp_path / "sediment-integrator.mended.stage").read_text()
    assert "  (resistor R2 sum out 24M (tolerance 1%))\n  (capacitor C1" in mended
    assert "out.isolated" not in mended


def test_a_part_to_choose_is_left_out_and_nothing_is_written(tmp_path, capsys):
    source = copy(tmp_path, "rain-acoustic.stage")
    code, _, err = run(capsys, str(source), "--no-config")
    assert code == 0
    assert "left out" in err and "a part for U1 with a different gbw" in err
    assert "nothing written" in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["rain-acoustic.stage"]


def test_a_json_stage_without_capacitors_gets_the_list(tmp_path, capsys):
    converted = tmp_path / "conductivity.stage.json"
    assert main(["convert", str(SAMPLES / "conductivity.stage"), "--to", "json",
                 "-o", str(converted)]) == 0
    capsys.readouterr()
    code, _, err = run(capsys, str(converted), "--no-config")
    assert code == 0, err
    target = tmp_path / "conductivity.mended.stage.json"
    tree = json.loads(target.read_text())
    stage = tree["stages"][0]
    assert stage["capacitors"] == [{"ref": "C1", "nets": ["out", "fb"], "value": "1p"}]
    assert [r["tolerance"] for r in stage["resistors"]] == ["0.5%", "0.5%"]
    assert parse_text(target.read_text(), str(target)).tree == read_file(str(target)).tree
    result = keyed(audit.check_file(str(target), REQUEST))
    assert not [k for k in result if k[1] in ("feedback-pole", "gain-tolerance")]


def test_an_unreadable_stage_is_not_mended(tmp_path, capsys):
    broken = tmp_path / "broken.stage"
    broken.write_text("(stage x (ground gnd)\n")
    code, _, err = run(capsys, str(broken))
    assert code == 1
    assert f"{broken}:1:1:" in err and "is not mended" in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["broken.stage"]


# Value styles: RKM codes per IEC 60062 (the letter for the decimal point).
@pytest.mark.parametrize("example, value, ohms, unit, expected", [
    ("4k7", 44200.0, True, "Ω", "44k2"),
    ("4k7", 2.2, True, "Ω", "2R2"),
    ("4k7", 453000.0, True, "Ω", "453k"),
    ("100k", 44200.0, True, "Ω", "44.2k"),
    ("100kOhm", 1.6e6, True, "Ω", "1.6MOhm"),
    ("10 kΩ", 340000.0, True, "Ω", "340 kΩ"),
    ("100nF", 2.2e-12, False, "F", "2.2pF"),
    ("4.7µ", 1e-6, False, "F", "1µ"),
    (10000, 102000.0, True, "Ω", 102000),
])
def test_values_are_written_in_the_file_s_style(example, value, ohms, unit, expected):
    assert format_value(value, Style.of(example), ohms, unit) == expected


def test_tolerances_are_written_as_percentages():
    assert format_fraction(0.005) == "0.5%"
    assert format_fraction(0.0025) == "0.25%"


def test_a_broken_configuration_stops_mend_with_its_file_and_line(tmp_path, capsys):
    source = copy(tmp_path, "flood-alarm.stage")
    (tmp_path / "ampcheck.toml").write_text("[tool.ampcheck\nbad")
    before = digest(source)
    code, out, err = run(capsys, str(source), "--diff")
    assert code == 2 and out == ""
    assert f"{tmp_path / 'ampcheck.toml'}: invalid TOML" in err and "line 1, column 15" in err
    assert "does not build" not in err and "Traceback" not in err
    assert digest(source) == before
