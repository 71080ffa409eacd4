"""check's command-line habits: accumulating and additive selection, missing paths,
formats from output endings, short forms, --quiet, excludes, --color."""
import json

import pytest

from test_workflow import LOADED, findings, run

# LOADED (test_workflow) fires input-resistance (a 1 kOhm input on a 10 kOhm source).
# Its source is +-0.5 V into gain -10 on +-15 V rails, well inside the swing, and its
# output drives 100k || 10k (R2 to the virtual ground), within the part's headroom-load.


@pytest.fixture
def project(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "a.stage").write_text(LOADED)
    return tmp_path


def rule_ids(out):
    return sorted({f["rule"] for f in findings(out)})


def test_repeated_select_accumulates(project, capsys):
    _, out, _ = run(capsys, "check", "a.stage", "-f", "json", "--fail-on", "never",
                    "--select", "slew-rate", "--select", "input-resistance")
    assert rule_ids(out) == ["input-resistance"]
    _, only_last, _ = run(capsys, "check", "a.stage", "-f", "json", "--fail-on", "never",
                          "--select", "slew-rate")
    assert rule_ids(only_last) == []


def test_also_select_extends_the_configured_selection(project, capsys):
    (project / "ampcheck.toml").write_text('select = ["slew-rate"]\n')
    _, out, _ = run(capsys, "check", "a.stage", "-f", "json", "--fail-on", "never")
    assert rule_ids(out) == []
    _, out, _ = run(capsys, "check", "a.stage", "-f", "json", "--fail-on", "never",
                    "--also-select", "input-resistance")
    assert rule_ids(out) == ["input-resistance"]
    code, _, err = run(capsys, "check", "a.stage", "--also-select", "no-such-rule")
    assert code == 2 and "no-such-rule" in err


def test_output_format_from_the_ending_and_short_forms(project, capsys):
    code, out, _ = run(capsys, "check", "a.stage", "-q", "-j", "1", "--fail-on", "warning",
                       "-o", "report.sarif",
                       "-o", "report.json", "-o", "csv:table.out")
    assert code == 1 and out == ""
    assert json.loads((project / "report.sarif").read_text())["version"] == "2.1.0"
    assert rule_ids((project / "report.json").read_text()) == ["input-resistance"]
    assert "input-resistance" in (project / "table.out").read_text()
    code, _, err = run(capsys, "check", "a.stage", "-o", "report.unknown")
    assert code == 2 and ".sarif" in err


def test_excludes_on_the_command_line_and_in_the_configuration(project, capsys):
    (project / "build").mkdir()
    (project / "build" / "copy.stage").write_text(LOADED)
    (project / "old").mkdir()
    (project / "old" / "legacy.stage").write_text(LOADED)
    _, out, _ = run(capsys, "check", ".", "-f", "json", "--fail-on", "never")
    assert len(json.loads(out)["files"]) == 3
    (project / "ampcheck.toml").write_text('exclude = ["old"]\n')
    _, out, _ = run(capsys, "check", ".", "-f", "json", "--fail-on", "never",
                    "--exclude", "build/*")
    assert [f["path"] for f in json.loads(out)["files"]] == ["a.stage"]


def test_color_always_and_never(project, capsys, monkeypatch):
    monkeypatch.delenv("FORCE_COLOR", raising=False)
    monkeypatch.delenv("NO_COLOR", raising=False)
    _, coloured, _ = run(capsys, "check", "a.stage", "--color", "always")
    assert "\x1b[" in coloured
    _, plain, _ = run(capsys, "check", "a.stage", "--color", "never")
    assert "\x1b[" not in plain and "input-resistance" in plain


def test_show_errors_filters_the_display_not_the_exit_code(project, capsys):
    # input-resistance on LOADED is a warning: shown by default, hidden by --show errors,
    # and still failing the run with --fail-on warning either way.
    code, out, _ = run(capsys, "check", "a.stage", "-f", "json", "--fail-on", "warning",
                       "--show", "errors", "-o", "all.json")
    assert code == 1 and rule_ids(out) == []
    assert rule_ids((project / "all.json").read_text()) == ["input-resistance"]
    code, out, _ = run(capsys, "check", "a.stage", "--fail-on", "warning", "--show", "warnings")
    assert code == 1 and "input-resistance" in out


def test_a_stage_from_standard_input_is_named_for_messages(project, capsys, monkeypatch):
    import io

    class Stdin(io.StringIO):
        buffer = io.BytesIO(LOADED.encode())

    monkeypatch.setattr("sys.stdin", Stdin())
    code, out, _ = run(capsys, "check", "-", "--stdin-name", "boards/front.stage",
                       "-f", "json", "--fail-on", "warning", "-o", "front.csv")
    assert code == 1
    assert [f["path"] for f in json.loads(out)["files"]] == ["boards/front.stage"]
    assert "boards/front.stage" in (project / "front.csv").read_text()
    assert sorted(p.name for p in project.iterdir()) == ["a.stage", "front.csv"]
    code, _, err = run(capsys, "check", "-", "a.stage")
    assert code == 2 and "on its own" in err
