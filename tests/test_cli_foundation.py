"""`ampcheck check` and friends on good and bad files: exit codes, no tracebacks.

A bad file never stops the other files of a run: each is reported, and the run exits 1.
"""

import json

import pytest

from test_readers import GOOD_STAGE

from checker.cli import main

GOOD = GOOD_STAGE  # the valid inverting stage of the reader tests
BAD = GOOD.replace("(resistor R2", "(resistr R2")


@pytest.fixture(autouse=True)
def wide_plain_console(monkeypatch):
    # The summary is printed through rich, which wraps at the terminal width (80 off a
    # terminal); a wide console keeps each message on one line for the assertions.
    monkeypatch.setenv("COLUMNS", "400")
    monkeypatch.setenv("NO_COLOR", "1")


def run(capsys, *argv):
    code = main(list(argv))
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def check_json(capsys, *argv):
    """Run `ampcheck check --format json`; (exit code, {path: file entry}, stderr)."""
    code, out, err = run(capsys, "check", "--format", "json", *argv)
    assert_no_traceback(out, err)
    return code, {entry["path"]: entry for entry in json.loads(out)["files"]}, err


def positions(entry):
    return [(p["line"], p["column"], p["rule"]) for p in entry["problems"]]


def assert_no_traceback(*texts):
    for text in texts:
        assert "Traceback" not in text
        assert "internal error" not in text


def test_check_of_a_good_file_reads_its_stage(tmp_path, capsys):
    (tmp_path / "good.stage").write_text(GOOD)
    _code, files, _err = check_json(capsys, str(tmp_path))
    entry = files[str(tmp_path / "good.stage")]
    assert entry["problems"] == []
    assert [stage["name"] for stage in entry["stages"]] == ["inv"]


def test_check_of_a_folder_with_a_good_and_a_bad_file_exits_1(tmp_path, capsys):
    (tmp_path / "good.stage").write_text(GOOD)
    (tmp_path / "bad.stage").write_text(BAD)
    code, _files, _err = check_json(capsys, str(tmp_path))
    assert code == 1


def test_check_of_a_folder_with_a_good_and_a_bad_file_reports_both(tmp_path, capsys):
    (tmp_path / "good.stage").write_text(GOOD)
    (tmp_path / "bad.stage").write_text(BAD)
    _code, files, _err = check_json(capsys, str(tmp_path))
    bad, good = files[str(tmp_path / "bad.stage")], files[str(tmp_path / "good.stage")]
    assert positions(bad) == [(7, 3, "input-invalid")]
    assert "unknown keyword 'resistr'" in bad["problems"][0]["message"]
    assert good["problems"] == []
    assert [stage["name"] for stage in good["stages"]] == ["inv"]


def test_check_text_report_names_the_bad_and_the_good_file(tmp_path, capsys):
    (tmp_path / "good.stage").write_text(GOOD)
    (tmp_path / "bad.stage").write_text(BAD)
    code, out, err = run(capsys, "check", str(tmp_path))
    assert code == 1
    assert f"{tmp_path / 'bad.stage'}:7:3" in out
    assert "unknown keyword 'resistr'" in out
    assert f"{tmp_path / 'good.stage'}:1" in out
    assert_no_traceback(out, err)


def test_check_reads_every_file_after_many_kinds_of_bad_ones(tmp_path, capsys):
    (tmp_path / "a-deep.stage").write_text("(" * 100_000 + ")" * 100_000)
    (tmp_path / "b-deep.stage.json").write_text("[" * 100_000 + "]" * 100_000)
    (tmp_path / "c-latin1.stage").write_bytes(b'(stage a (note "caf\xe9"))')
    (tmp_path / "d-empty.stage").write_text("")
    (tmp_path / "e-json.stage.json").write_text("{,}")
    (tmp_path / "f-unit.stage").write_text(GOOD.replace("10k)\n", "10F)\n", 1))
    (tmp_path / "z-good.stage").write_text(GOOD)
    code, files, _err = check_json(capsys, str(tmp_path))
    assert code == 1
    found = {name: positions(files[str(tmp_path / name)])[0][:2]
             for name in ["a-deep.stage", "b-deep.stage.json", "c-latin1.stage",
                          "d-empty.stage", "e-json.stage.json", "f-unit.stage"]}
    # The 41st bracket passes the depth limit; 'caf' ends at column 19; the ',' is where
    # a key should be; 10F stands at column 24 of line 6.
    assert found == {"a-deep.stage": (1, 41), "b-deep.stage.json": (1, 41),
                     "c-latin1.stage": (1, 20), "d-empty.stage": (1, 1),
                     "e-json.stage.json": (1, 2), "f-unit.stage": (6, 24)}
    assert [s["name"] for s in files[str(tmp_path / "z-good.stage")]["stages"]] == ["inv"]


def test_check_reports_every_problem_of_a_bad_file(tmp_path, capsys):
    text = GOOD.replace("(resistor R2 sum vout 100k)", "(resistor R2 sum vout 0)")
    text = text.replace("(resistor R1 vin sum 10k)", "(resistor R1 vin sum 10F)")
    (tmp_path / "two.stage").write_text(text)
    code, files, _err = check_json(capsys, str(tmp_path / "two.stage"))
    assert code == 1
    # 10F after "  (resistor R1 vin sum ", 0 after "  (resistor R2 sum vout "
    assert positions(files[str(tmp_path / "two.stage")]) == [
        (6, 24, "input-invalid"), (7, 25, "input-invalid")]


def test_check_of_a_missing_path_is_a_usage_error(tmp_path, capsys):
    missing = tmp_path / "nowhere.stage"
    code, out, err = run(capsys, "check", str(missing))
    assert code == 2 and out == ""
    assert f"no such file or directory: {missing}" in err


def test_check_of_a_folder_without_stage_files_is_a_usage_error(tmp_path, capsys):
    (tmp_path / "notes.txt").write_text("nothing here")
    code, out, err = run(capsys, "check", str(tmp_path))
    assert code == 2
    assert "no stage files" in err
    assert_no_traceback(out, err)


@pytest.mark.parametrize("name", ["ampcheck.toml", "pyproject.toml"])
def test_a_broken_configuration_in_a_checked_folder_is_a_clear_usage_error(
        tmp_path, capsys, name):
    """A folder's configuration is read while the found files are filtered; its TOML
    error must reach the user with file, line and column, never as an internal error."""
    (tmp_path / "a.stage").write_text(GOOD_STAGE)
    (tmp_path / name).write_text("[tool.ampcheck\nbad")
    code, out, err = run(capsys, "check", str(tmp_path), "--no-progress")
    assert code == 2 and out == ""
    assert f"{tmp_path / name}: invalid TOML" in err and "line 1, column 15" in err
    assert_no_traceback(out, err)


def test_check_takes_a_named_file_whatever_its_ending(tmp_path, capsys):
    (tmp_path / "stage.txt").write_text(GOOD)
    _code, files, _err = check_json(capsys, str(tmp_path / "stage.txt"))
    assert [s["name"] for s in files[str(tmp_path / "stage.txt")]["stages"]] == ["inv"]


def test_check_skips_hidden_folders(tmp_path, capsys):
    (tmp_path / ".hidden").mkdir()
    (tmp_path / ".hidden" / "bad.stage").write_text(BAD)
    (tmp_path / "good.stage").write_text(GOOD)
    _code, files, _err = check_json(capsys, str(tmp_path))
    assert list(files) == [str(tmp_path / "good.stage")]


def test_check_with_a_user_part_library_uses_its_parts(tmp_path, capsys):
    (tmp_path / "mine.parts").write_text("(part lab-amp (gbw 12MHz))\n")
    (tmp_path / "good.stage").write_text(GOOD.replace("gp-bipolar", "lab-amp"))
    _code, files, _err = check_json(capsys, str(tmp_path / "good.stage"),
                                    "--parts", str(tmp_path / "mine.parts"))
    entry = files[str(tmp_path / "good.stage")]
    assert entry["problems"] == []
    assert [s["name"] for s in entry["stages"]] == ["inv"]


def test_check_with_a_bad_part_library_is_a_usage_error(tmp_path, capsys):
    (tmp_path / "bad.parts").write_text("(part lab-amp (gbw 12MF))\n")
    (tmp_path / "good.stage").write_text(GOOD)
    code, out, err = run(capsys, "check", str(tmp_path / "good.stage"),
                         "--parts", str(tmp_path / "bad.parts"))
    assert code == 2
    # located at "(gbw", column 15 of "(part lab-amp (gbw 12MF))"
    assert f"cannot load part library:\n  {tmp_path / 'bad.parts'}:1:15:" in err
    assert_no_traceback(out, err)


def test_parts_command_lists_the_builtin_parts(capsys):
    code, out, _err = run(capsys, "parts")
    assert code == 0
    assert "gp-bipolar" in out


def test_no_command_prints_help_and_exits_2(capsys):
    code, out, _err = run(capsys)
    assert code == 2
    assert "usage: ampcheck" in out


def test_unknown_option_exits_2(capsys):
    code, _out, err = run(capsys, "check", "--no-such-option", ".")
    assert code == 2
    assert "unrecognized arguments" in err
