"""The option table (checker.options): one source for the reader, the CLI, `config`
and the docs; kebab-case keys with units in values; old spellings still read."""
import pathlib
import textwrap

from checker.cli import build_parser
from checker.options import OPTIONS, options_markdown

from test_workflow import LOADED, findings, run

ROOT = pathlib.Path(__file__).resolve().parents[1]


def test_docs_key_table_is_the_generated_one():
    assert options_markdown() in (ROOT / "docs" / "configuration.md").read_text()


def test_every_flag_of_the_table_is_a_check_option_with_its_help():
    check = build_parser()._subparsers._group_actions[0].choices["check"]
    helps = {flag: action.help for action in check._actions for flag in action.option_strings}
    for option in OPTIONS:
        assert option.flag in helps, option.name
        assert f"key {option.name}" in helps[option.flag]


def test_kebab_case_setting_with_a_unit_in_its_value(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "a.stage").write_text(LOADED)
    # R1 = 1 kOhm against a 10 kOhm source: ratio 0.1; 5 % of the source is 500 Ohm.
    (tmp_path / "ampcheck.toml").write_text(
        '[rules.input-resistance]\nratio-to-source = "5%"\nmax-feedback-ohm = "2M"\n')
    code, out, err = run(capsys, "check", "a.stage", "--format", "json",
                         "--select", "input-resistance")
    assert code == 0 and findings(out) == [] and "note" not in err
    code, out, _ = run(capsys, "config", ".")
    assert "rules.input-resistance.ratio-to-source = 0.05    (" in out
    assert "rules.input-resistance.max-feedback-ohm = 2e+06 Ω    (" in out


def test_old_spelling_is_read_with_a_note_naming_the_new_key(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "ampcheck.toml").write_text('[rules.loop-margin]\nwarn_below_deg = "50 deg"\n')
    code, out, err = run(capsys, "config", ".")
    assert code == 0
    assert "rules.loop-margin.warn-below-deg = 50 °" in out and "ampcheck.toml:2" in out
    assert "'warn_below_deg' is spelt 'warn-below-deg'" in err


def test_config_shows_what_check_uses_from_another_folder(tmp_path, monkeypatch, capsys):
    board = tmp_path / "board"
    board.mkdir()
    (board / ".git").mkdir()
    (board / "ampcheck.toml").write_text('stray-capacitance = "2p"\n[rules.slew-rate]\n'
                                         'min-ratio = 2\n')
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)
    code, out, _ = run(capsys, "config", str(board))
    assert code == 0 and str(board / "ampcheck.toml") in out.splitlines()[0]
    assert "stray-capacitance = 2 pF" in out and "rules.slew-rate.min-ratio = 2    (" in out


def test_explain_and_config_take_a_user_rule_with_a_list_setting(tmp_path, monkeypatch,
                                                                    capsys):
    folder = tmp_path / "mine"
    folder.mkdir()
    (folder / "bands.py").write_text(textwrap.dedent('''\
        from checker.engine import rule

        @rule("band-list", "info", "Checks nothing, across bands.", corners=[10.0, 1000.0])
        def band_list(view):
            """Checks nothing."""
            return []
        '''))
    code, out, _ = run(capsys, "explain", "band-list", "--rules-dir", str(folder))
    assert code == 0 and "Settings: corners = [10, 1000]" in out


def test_a_list_setting_is_configured_as_a_list_of_numbers(tmp_path, monkeypatch, capsys):
    folder = tmp_path / "mine"
    folder.mkdir()
    (folder / "bands.py").write_text(
        'from checker.engine import rule\n\n'
        '@rule("band-list", "info", "Checks nothing.", corners=[10.0, 1000.0])\n'
        'def band_list(view):\n    """Checks nothing."""\n    return []\n')
    (tmp_path / "ampcheck.toml").write_text('rules-dirs = ["mine"]\n[rules.band-list]\n'
                                            'corners = [20, "1k"]\n')
    monkeypatch.chdir(tmp_path)
    code, out, _ = run(capsys, "config", ".", "--trust-config-rules")
    assert code == 0 and "rules.band-list.corners = [20, 1000]    (" in out
    (tmp_path / "ampcheck.toml").write_text('rules-dirs = ["mine"]\n[rules.band-list]\n'
                                            'corners = 20\n')
    code, _, err = run(capsys, "config", ".", "--trust-config-rules")
    assert code == 2 and "band-list.corners is a list of numbers" in err
