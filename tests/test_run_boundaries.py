"""Where a run meets files and streams it does not own: no report over a file the run
reads, a full standard output, spreadsheet cells, URIs, long strings, many problems,
rule scaffolds, contradicting options and stages that feed one another.

Expected values are the project's own (messages, exit codes: docs/configuration.md);
the CSV rule follows the OWASP guidance on CSV injection (cells beginning with = + - @
tab or carriage return), the URI rule RFC 3986 (percent-encoding).
"""

from __future__ import annotations

import ast
import csv
import io
import json
import os
import subprocess
import sys
import tracemalloc

import pytest
from test_cli_foundation import assert_no_traceback, run  # noqa: F401
from test_readers import GOOD_JSON, GOOD_STAGE

from checker.io.load import parse_text
from checker.report.csv_cells import safe_cell
from checker.report.sarif import uri_reference


@pytest.fixture
def project(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "a.stage").write_text(GOOD_STAGE, encoding="utf-8")
    (tmp_path / "my.parts").write_text('(part quiet-one (class "generic") (gbw 1MHz))\n',
                                       encoding="utf-8")
    return tmp_path


def unchanged(path, before: bytes) -> bool:
    return path.read_bytes() == before


@pytest.mark.parametrize("argv, victim", [
    (["--baseline", "b.json", "-o", "json:b.json"], "b.json"),
    (["--parts", "my.parts", "-o", "json:my.parts"], "my.parts"),
    (["-o", "json:ampcheck.toml"], "ampcheck.toml"),
])
def test_no_report_is_written_over_a_file_the_run_reads(project, capsys, argv, victim):
    assert run(capsys, "check", "a.stage", "--write-baseline", "b.json", "-q")[0] == 0
    (project / "ampcheck.toml").write_text('parts = ["my.parts"]\n', encoding="utf-8")
    before = (project / victim).read_bytes()
    code, _out, err = run(capsys, "check", "a.stage", "-q", *argv)
    assert code == 2 and "refusing to write over the input file" in err
    assert unchanged(project / victim, before)


def test_a_baseline_and_a_report_cannot_share_a_file(project, capsys):
    code, _out, err = run(capsys, "check", "a.stage", "--write-baseline", "b.json",
                          "-o", "json:b.json", "-q")
    assert code == 2 and "given twice" in err
    assert not (project / "b.json").exists()


def test_mend_never_writes_over_a_part_library(project, capsys):
    before = (project / "my.parts").read_bytes()
    code, _out, err = run(capsys, "mend", "a.stage", "--parts", "my.parts", "--to",
                          "my.parts", "--no-config")
    assert unchanged(project / "my.parts", before)
    assert code != 0 or "nothing written" in err


@pytest.mark.skipif(not os.path.exists("/dev/full"), reason="needs a device that is full")
@pytest.mark.parametrize("argv", [["check", "a.stage", "-f", "json", "--no-config"],
                                  ["check", "a.stage", "--no-config"], ["schema"],
                                  ["convert", "a.stage", "--to", "json"]])
def test_a_full_standard_output_is_a_clear_usage_error(project, argv):
    with open("/dev/full", "w") as full:
        done = subprocess.run([sys.executable, "-m", "checker", *argv], stdout=full,
                              stderr=subprocess.PIPE, text=True, cwd=project)
    assert done.returncode == 2
    assert "cannot write to standard output" in done.stderr
    assert "internal error" not in done.stderr and "Traceback" not in done.stderr


@pytest.mark.parametrize("text, safe", [
    ("=HYPERLINK(1)", "'=HYPERLINK(1)"), ("+cmd", "'+cmd"), ("@SUM", "'@SUM"),
    ("-x", "'-x"), ("\tx", "'\tx"), ("-0.5", "-0.5"), ("1e-06", "1e-06"),
    ("plain", "plain"), (12, 12)])
def test_spreadsheet_formula_cells_become_text(text, safe):
    assert safe_cell(text) == safe


def test_a_stage_named_like_a_formula_is_text_in_the_csv_report(project, capsys):
    (project / "a.stage").write_text(GOOD_STAGE.replace("(stage inv", "(stage +cmd"),
                                     encoding="utf-8")
    _code, out, _err = run(capsys, "check", "a.stage", "-f", "figures-csv", "--no-config",
                           "--fail-on", "never")
    assert [row["stage"] for row in csv.DictReader(io.StringIO(out))] == ["'+cmd"]


def test_sarif_uris_are_percent_encoded():
    assert uri_reference("a b/ünï #1.stage") == "a%20b/%C3%BCn%C3%AF%20%231.stage"
    assert uri_reference("board/filter.stage") == "board/filter.stage"


@pytest.mark.parametrize("syntax", ["sexp", "json"])
def test_a_long_string_reads_in_memory_linear_in_its_length(tmp_path, syntax):
    # 2 MB in one note: the reader's memory stays a few times the text, where a
    # regular expression that matched it character by character held ~150 bytes each
    note = "x" * 2_000_000
    if syntax == "sexp":
        text = GOOD_STAGE.replace("(ground gnd)", f'(ground gnd) (note "{note}")')
        path = "a.stage"
    else:
        tree = json.loads(json.dumps(GOOD_JSON))
        tree["stages"][0]["note"] = note
        text, path = json.dumps(tree), "a.stage.json"
    tracemalloc.start()
    parse_text(text, path)
    _now, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert peak < 40e6


def test_problems_beyond_ten_are_counted_not_dropped(tmp_path, capsys):
    path = tmp_path / "many.stage"
    path.write_text("\n".join(f"(stage s{i} (ground gnd) (bogus{i}))" for i in range(60)),
                    encoding="utf-8")
    _code, out, err = run(capsys, "check", str(path), "-f", "compact", "--no-config")
    assert_no_traceback(out, err)
    assert out.count("unknown keyword") == 10
    assert "and 50 more problems from here on, not listed" in out


def test_a_rule_summary_with_a_backslash_still_makes_a_module(tmp_path, capsys):
    code, _out, _err = run(capsys, "new-rule", "my-five", "--into", str(tmp_path),
                           "--tests", str(tmp_path), "--summary", "x\\")
    assert code == 0
    ast.parse((tmp_path / "my_five.py").read_text(encoding="utf-8"))
    code, _out, err = run(capsys, "new-rule", "my-six", "--into", str(tmp_path),
                          "--tests", str(tmp_path), "--summary", "a\nb")
    assert code == 2 and "one line of printable text" in err
    assert not (tmp_path / "my_six.py").exists()


@pytest.mark.parametrize("argv, message", [
    (["--config", "c.toml", "--no-config"], "contradict each other"),
    (["--select", "slew-rate", "--ignore", "slew-rate"], "no rule would run"),
])
def test_contradicting_options_are_usage_errors(project, capsys, argv, message):
    (project / "c.toml").write_text('fail-on = "never"\n', encoding="utf-8")
    code, _out, err = run(capsys, "check", "a.stage", *argv)
    assert code == 2 and message in err


FEEDING = """\
(stage {name} (ground gnd) (supply vcc 5V)
  (opamp U1 (part cmos-rrio) (in+ in) (in- out) (out out) (v+ vcc) (v- gnd))
  (source in (range 1V 2V))
  (load out (resistance 10k) (feeds {target})))
"""


def test_stages_that_feed_themselves_or_one_another_are_refused(tmp_path, capsys):
    path = tmp_path / "ring.stage"
    path.write_text(FEEDING.format(name="a", target="b") + FEEDING.format(name="b", target="a")
                    + FEEDING.format(name="c", target="c"), encoding="utf-8")
    code, out, _err = run(capsys, "check", str(path), "-f", "compact", "--no-config")
    assert code == 1
    assert "stages a -> b -> a feed one another in a ring" in out
    assert "feeds its own stage c" in out


@pytest.mark.skipif(not hasattr(os, "pipe") or sys.platform == "win32",
                    reason="a POSIX pipe whose reader is gone")
@pytest.mark.parametrize("argv", [["check", "a.stage", "--no-config"], ["parts"],
                                  ["check", "a.stage", "-f", "json", "--no-config"]])
def test_a_reader_gone_ends_every_output_alike(project, argv):
    # the terminal-text outputs as the machine ones: 128 + SIGPIPE, not 1 (findings)
    read_end, write_end = os.pipe()
    os.close(read_end)
    try:
        done = subprocess.run([sys.executable, "-m", "checker", *argv], stdout=write_end,
                              stderr=subprocess.PIPE, text=True, cwd=project)
    finally:
        os.close(write_end)
    assert done.returncode == 141 and "Traceback" not in done.stderr


def test_a_configuration_with_a_byte_order_mark_reads_as_stage_files_do(project, capsys):
    (project / "c.toml").write_bytes(b'\xef\xbb\xbffail-on = "never"\n')
    code, _out, err = run(capsys, "check", "a.stage", "--config", "c.toml", "-q")
    assert code == 0 and "invalid TOML" not in err
    (project / "c.toml").write_bytes('fail-on = "never"\n'.encode("utf-16"))
    code, _out, err = run(capsys, "check", "a.stage", "--config", "c.toml", "-q")
    assert code == 2 and "save it as UTF-8" in err


@pytest.mark.parametrize("argv", [["--stray-capacitance", "1"],
                                  ["--config", "stray.toml"]])
def test_a_stray_capacitance_of_farads_is_no_stray(project, capsys, argv):
    # a layout stray is picofarads (common practice 0.5 to 2 pF); 1 F read as one made
    # every gain 1e-5 of its value
    (project / "stray.toml").write_text('stray-capacitance = "1"\n', encoding="utf-8")
    code, _out, err = run(capsys, "check", "a.stage", *argv)
    assert code == 2 and "1 nF at the most" in err


def test_an_output_file_named_dash_is_refused(project, capsys):
    code, _out, err = run(capsys, "check", "a.stage", "-o", "json:-", "--no-config")
    assert code == 2 and "standard output takes the --format report" in err
    assert not (project / "-").exists()


def test_mend_keeps_a_byte_order_mark(tmp_path, capsys):
    # samples/conductivity.stage has verified fixes to write (its feedback pole)
    with open("samples/conductivity.stage", "rb") as handle:
        text = handle.read()
    stage = tmp_path / "bom.stage"
    stage.write_bytes(b"\xef\xbb\xbf" + text)
    code, _out, err = run(capsys, "mend", str(stage), "--no-config")
    assert code == 0 and "written to" in err
    mended = (tmp_path / "bom.mended.stage").read_bytes()
    assert mended.startswith(b"\xef\xbb\xbf") and not mended.startswith(b"\xef\xbb\xbf" * 2)


def test_a_rule_setting_in_both_spellings_is_an_error(project, capsys):
    (project / "c.toml").write_text("[rules.feedback-pole]\nwarn_below_deg = 50\n"
                                    "warn-below-deg = 60\n", encoding="utf-8")
    code, _out, err = run(capsys, "check", "a.stage", "--config", "c.toml")
    assert code == 2 and "is given twice" in err and "c.toml:3" in err


@pytest.mark.skipif(sys.platform == "win32", reason="POSIX modes")
def test_a_review_folder_gets_the_mode_a_folder_made_by_hand_gets(project, capsys):
    mask = os.umask(0o022)
    try:
        code, _out, _err = run(capsys, "check", "a.stage", "-o", "html:review", "-q",
                               "--no-config", "--fail-on", "never")
    finally:
        os.umask(mask)
    assert code == 0
    assert (project / "review").stat().st_mode & 0o777 == 0o755


def test_carriage_returns_alone_are_refused_at_their_position(tmp_path, capsys):
    # positions count LF; a file of CR-only lines would put every problem on line 1
    path = tmp_path / "cr.stage"
    path.write_bytes(b"(stage a (ground gnd)\r  (bogus))\r")
    _code, out, _err = run(capsys, "check", str(path), "-f", "compact", "--no-config")
    assert "cr.stage:1:22: error input-invalid: a line ends in a carriage return alone" in out
    path.write_bytes(b"(stage a (ground gnd)\r\n  (bogus))\r\n")  # CRLF reads as LF
    _code, out, _err = run(capsys, "check", str(path), "-f", "compact", "--no-config")
    assert "cr.stage:2:3: error input-invalid: unknown keyword 'bogus'" in out


def test_a_review_folder_holding_foreign_files_is_not_replaced(project, capsys):
    argv = ("check", "a.stage", "-o", "html:review", "-q", "--no-config", "--fail-on", "never")
    assert run(capsys, *argv)[0] == 0
    (project / "review" / "notes.txt").write_text("kept", encoding="utf-8")
    code, _out, err = run(capsys, *argv)
    assert code == 2 and "it holds notes.txt, which no review wrote" in err
    assert (project / "review" / "notes.txt").read_text(encoding="utf-8") == "kept"
    (project / "review" / "notes.txt").unlink()
    assert run(capsys, *argv)[0] == 0  # an earlier review alone is replaced as before
