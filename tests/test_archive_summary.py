"""The archive audit's closing summary: severity counts by rule."""

import re
import shutil
from pathlib import Path

from checker.cli import main
from checker.findings import Finding, Severity
from checker.report.archive_summary import severity_by_rule, severity_table, stages_by_rule
from checker.report.archive_summary import rollup_table

SAMPLES = Path(__file__).resolve().parent.parent / "samples"


def _finding(rule, severity, waiver=None):
    return Finding(rule, severity, "m", "a.amp", 1, 1, waiver=waiver)


def test_counts_each_severity_per_rule_and_skips_waived():
    findings = [_finding("gain-tolerance", Severity.ERROR),
                _finding("gain-tolerance", Severity.WARNING),
                _finding("gain-tolerance", Severity.INFO),
                _finding("gain-tolerance", Severity.ERROR),
                _finding("bandwidth", Severity.INFO),
                _finding("bandwidth", Severity.ERROR, waiver="accepted")]
    rows = severity_by_rule(findings)
    assert rows == [("gain-tolerance", 2, 1, 1), ("bandwidth", 0, 0, 1)]


def test_table_is_aligned_and_fits_80_columns():
    lines = severity_table([("gain-tolerance", 12, 3, 0), ("bandwidth", 0, 0, 1)])
    assert lines[0].split() == ["rule", "errors", "warnings", "notes"]
    assert lines[1].split() == ["gain-tolerance", "12", "3", "0"]
    assert len({len(line) for line in lines}) == 1
    assert all(len(line) <= 78 for line in lines)
    assert severity_table([]) == []


def _at(rule, path, stage, waiver=None):
    return Finding(rule, Severity.WARNING, "m", path, 1, 1, stage=stage, waiver=waiver)


def test_stages_by_rule_counts_distinct_file_stage_pairs():
    findings = [_at("noise", "a.stage", "buffer"), _at("noise", "a.stage", "buffer"),
                _at("noise", "b.stage", "buffer"), _at("noise", "a.stage", "gain"),
                _at("slew-rate", "a.stage", "gain"),
                _at("slew-rate", "b.stage", "gain", waiver="known")]
    assert stages_by_rule(findings) == [("noise", 3), ("slew-rate", 1)]


def _closing_counts(out):
    """(files, stages, errors, warnings) from the report's closing line."""
    last = out.strip().splitlines()[-1]
    found = dict((noun, int(n)) for n, noun in
                 re.findall(r"(\d+) (file|stage|error|warning)s?\b", last))
    return tuple(found.get(noun, 0) for noun in ("file", "stage", "error", "warning"))


def test_folder_rollup_on_copies_of_the_samples(tmp_path, capsys, monkeypatch):
    monkeypatch.setenv("COLUMNS", "80")
    monkeypatch.setenv("NO_COLOR", "1")
    layout = {".": ["groundwater-level.stage"],
              "north": ["fish-counter.stage", "hydrophone.stage"],
              "north/weir": ["conductivity.stage"], "south": ["pressure-level.stage"]}
    expected = {}
    for folder, names in layout.items():
        (tmp_path / folder).mkdir(parents=True, exist_ok=True)
        for name in names:
            shutil.copy(SAMPLES / name, tmp_path / folder / name)
        main(["check", *(str(tmp_path / folder / n) for n in names)])
        # the reference figures: the same files checked on their own, read off the closing line
        expected[folder] = _closing_counts(capsys.readouterr().out)
    main(["check", str(tmp_path)])
    out = capsys.readouterr().out
    block = out.split("By folder\n", 1)[1].splitlines()
    assert block[0].split() == ["folder", "files", "stages", "errors", "warnings"]
    rows = {line.split()[0]: tuple(int(x) for x in line.split()[1:]) for line in block[1:5]}
    assert rows == expected
    assert expected["north"][0] == 2 and expected["north"][2] > 0
    assert all(len(line) <= 80 for line in out.split("By folder\n", 1)[1].splitlines()[:5])


def test_rollup_table_cuts_long_folder_names_to_the_width():
    lines = rollup_table([("a/" * 60 + "z", 1, 2, 3, 4), (".", 1, 1, 0, 0)], width=80)
    assert all(len("  " + line) <= 80 for line in lines)
    assert lines[1].startswith("…") and lines[1].split()[-4:] == ["1", "2", "3", "4"]


def _worst_files(out):
    line = next((x for x in out.splitlines() if x.startswith("Worst files: ")), None)
    return None if line is None else line[len("Worst files: "):].split("; ")


def test_worst_option_and_key_set_the_length_of_the_worst_lists(tmp_path, capsys,
                                                                   monkeypatch):
    monkeypatch.setenv("COLUMNS", "400")
    monkeypatch.chdir(tmp_path)
    for name in ("fish-counter", "hydrophone", "conductivity", "pressure-level",
                 "groundwater-level", "flood-alarm"):
        shutil.copy(SAMPLES / f"{name}.stage", tmp_path / f"{name}.stage")
    main(["check", "."])
    assert len(_worst_files(capsys.readouterr().out)) == 5  # the default
    main(["check", "--worst", "2", "."])
    out = capsys.readouterr().out
    assert len(_worst_files(out)) == 2
    assert _worst_files(out)[0].startswith("fish-counter.stage (3 errors")  # samples' worst
    stage_line = next(x for x in out.splitlines() if x.startswith("Worst stages"))
    assert stage_line.count(" in ") == 2
    main(["check", "--worst", "0", "."])
    out = capsys.readouterr().out
    assert _worst_files(out) is None and "Worst stages" not in out
    assert "Severity by rule" in out  # the rest of the summary stays
    (tmp_path / "ampcheck.toml").write_text("worst = 1\n")
    main(["check", "."])
    assert len(_worst_files(capsys.readouterr().out)) == 1
    main(["check", "--worst", "3", "."])  # the command line wins over the file
    assert len(_worst_files(capsys.readouterr().out)) == 3


def test_worst_below_zero_is_a_usage_error(tmp_path, capsys):
    shutil.copy(SAMPLES / "hydrophone.stage", tmp_path / "a.stage")
    code = main(["check", "--worst", "-1", str(tmp_path)])
    err = capsys.readouterr().err
    assert code == 2 and "--worst takes a whole number of at least 0" in err


def test_figures_csv_has_a_row_per_stage_matching_the_json_figures(tmp_path, capsys):
    import csv
    import json

    for name in ("hydrophone", "bank-humidity", "autosampler-flow"):
        shutil.copy(SAMPLES / f"{name}.stage", tmp_path / f"{name}.stage")
    sheet = tmp_path / "out" / "figures.csv"
    (tmp_path / "out").mkdir()
    main(["check", "--format", "json", "--figures-csv", str(sheet), str(tmp_path)])
    document = json.loads(capsys.readouterr().out)  # the reference: the JSON report
    rows = list(csv.DictReader(sheet.open()))
    assert list(rows[0]) == ["file", "stage", "gain", "gain_unit", "bandwidth (Hz)",
                             "phase_margin (deg)", "output_low (V)", "output_high (V)",
                             "errors", "warnings", "notes"]
    stages = [(f["path"], s) for f in document["files"] for s in f["stages"]]
    assert len(rows) == len(stages) == 3
    for row, (path, stage) in zip(rows, stages):
        assert (row["file"], row["stage"]) == (path, stage["name"])
        for column, key in (("gain", "gain"), ("bandwidth (Hz)", "bandwidth"),
                            ("phase_margin (deg)", "phase_margin")):
            want = stage["figures"][key]
            assert (row[column] == "") if want is None else float(row[column]) == want
        severities = [f["severity"] for f in stage["findings"] if not f.get("waived")]
        assert int(row["errors"]) == severities.count("error")
        assert int(row["warnings"]) == severities.count("warning")
    assert [p.name for p in (tmp_path / "out").iterdir()] == ["figures.csv"]  # no temp left


def test_figures_csv_through_output_with_a_findings_only_format(tmp_path, capsys):
    """-o figures-csv:PATH beside --format compact (which shows no figures) still fills
    the figures: the run computes them because one of its reports needs them."""
    import csv

    shutil.copy(SAMPLES / "conductivity.stage", tmp_path / "conductivity.stage")
    sheet = tmp_path / "f.csv"
    main(["check", "--format", "compact", "-o", f"figures-csv:{sheet}",
          str(tmp_path / "conductivity.stage")])
    capsys.readouterr()
    (row,) = list(csv.DictReader(sheet.open()))
    # the sample's comment: R1 = 100k, R2 = 1M, a gain of -R2/R1 = -10 (less from the
    # cell's side, which its impedance loads: common practice)
    assert float(row["gain"]) < -9.8 and float(row["phase_margin (deg)"]) > 0
