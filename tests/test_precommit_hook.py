"""The pre-commit hook, run for real with `pre-commit try-repo` against this repository."""

import os
import pathlib
import shutil
import subprocess
import sys
import textwrap

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[1]
PRE_COMMIT = [sys.executable, "-m", "pre_commit"]

pytest.importorskip("pre_commit", reason="pre-commit is a test extra: pip install '.[test]'")

GOOD = textwrap.dedent("""\
    (stage good (supply vcc 15V) (supply vee -15V) (ground gnd)
      (opamp U1 (part precision-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
      (resistor R1 in fb 10k) (resistor R2 fb out 20k)
      (source in (range -1V 1V) (band 1Hz 1kHz))
      (load out (resistance 10k)))
    """)
# Gain -20 over a +-1 V input needs +-20 V from +-15 V rails: rail-headroom error.
BAD = GOOD.replace("stage good", "stage bad").replace("fb out 20k", "fb out 200k")


def git(folder, *args):
    subprocess.run(["git", *args], cwd=folder, check=True, capture_output=True)


def test_manifest_is_valid():
    result = subprocess.run(PRE_COMMIT + ["validate-manifest", str(ROOT / ".pre-commit-hooks.yaml")],
                            capture_output=True, text=True)
    assert result.returncode == 0, result.stdout + result.stderr


@pytest.mark.skipif(shutil.which("git") is None, reason="needs git")
def test_hook_fails_on_a_bad_stage_and_passes_once_fixed(tmp_path):
    project = tmp_path / "board"
    project.mkdir()
    git(project, "init", "-q")
    git(project, "config", "user.email", "reviewer@example.invalid")
    git(project, "config", "user.name", "Reviewer")
    (project / "good.stage").write_text(GOOD)
    (project / "bad.stage").write_text(BAD)
    git(project, "add", ".")
    environment = dict(os.environ, PRE_COMMIT_HOME=str(tmp_path / "cache"))
    command = PRE_COMMIT + ["try-repo", str(ROOT), "ampcheck", "--all-files"]
    failing = subprocess.run(command, cwd=project, capture_output=True, text=True,
                             env=environment)
    assert failing.returncode == 1, failing.stdout + failing.stderr
    assert "rail-headroom" in failing.stdout and "bad.stage" in failing.stdout
    (project / "bad.stage").write_text(GOOD.replace("stage good", "stage bad"))
    git(project, "add", ".")
    passing = subprocess.run(command, cwd=project, capture_output=True, text=True,
                             env=environment)
    assert passing.returncode == 0, passing.stdout + passing.stderr


# A stage on +-75 V: no error, so the hook passes, but beyond the 60 V DC limit of
# IEC 62368-1 class ES1, so it carries a safety caution.
HIGH_VOLTAGE = GOOD.replace("stage good", "stage piezo").replace(
    "(supply vcc 15V) (supply vee -15V)", "(supply vcc 75V) (supply vee -75V)").replace(
    "precision-bipolar", "hv-bipolar")


@pytest.mark.skipif(shutil.which("git") is None, reason="needs git")
def test_a_passing_hook_still_shows_each_caution(tmp_path):
    project = tmp_path / "board"
    project.mkdir()
    git(project, "init", "-q")
    (project / "piezo.stage").write_text(HIGH_VOLTAGE)
    git(project, "add", ".")
    environment = dict(os.environ, PRE_COMMIT_HOME=str(tmp_path / "cache"))
    command = PRE_COMMIT + ["try-repo", str(ROOT), "ampcheck", "--all-files"]
    passing = subprocess.run(command, cwd=project, capture_output=True, text=True,
                             env=environment)
    output = passing.stdout + passing.stderr
    assert passing.returncode == 0, output
    assert "Passed" in output
    # the stderr line, and the text report's own heading (the hook is verbose)
    assert "ampcheck: caution high-voltage: piezo.stage:1:" in output
    assert "Cautions (1)" in output


# A team part: the precision-bipolar class values under a name of the team's own. Its
# broken copy allows only a 20 V span, and the stage runs on +-15 V (a 30 V span).
TEAM_PART = """(version 1)
(part team-amp
  (class "precision bipolar")
  (open-loop-gain 2M) (gbw 1.5MHz) (slew-rate 0.3V/us)
  (offset-voltage 50uV) (bias-current 1nA) (offset-current 0.5nA)
  (input-capacitance-cm 3pF) (input-capacitance-diff 2pF) (input-resistance 30M)
  (output-resistance 60) (output-headroom-high 1.2V) (output-headroom-low 1.2V)
  (headroom-load 10k) (output-current 15mA)
  (input-range-low 1.5V) (input-range-high -1.5V)
  (supply-min 6V) (supply-max 36V) (supply-abs-max 40V)
  (voltage-noise 9nV/rtHz) (current-noise 0.2pA/rtHz))
"""
NARROW_PART = TEAM_PART.replace("(supply-max 36V) (supply-abs-max 40V)",
                                "(supply-max 18V) (supply-abs-max 20V)")


@pytest.mark.skipif(shutil.which("git") is None, reason="needs git")
def test_a_changed_part_library_or_configuration_rechecks_the_stages_it_governs(tmp_path):
    project = tmp_path / "board"
    (project / "lib").mkdir(parents=True)
    git(project, "init", "-q")
    (project / "lib" / "team.parts").write_text(TEAM_PART)
    (project / "lib" / "narrow.parts").write_text(NARROW_PART)
    (project / "ampcheck.toml").write_text('parts = ["lib/team.parts"]\n')
    (project / "good.stage").write_text(GOOD.replace("precision-bipolar", "team-amp"))
    git(project, "add", ".")
    environment = dict(os.environ, PRE_COMMIT_HOME=str(tmp_path / "cache"))
    hook = PRE_COMMIT + ["try-repo", str(ROOT), "ampcheck", "--files"]
    passing = subprocess.run(hook + ["lib/team.parts"], cwd=project, capture_output=True,
                             text=True, env=environment)
    assert passing.returncode == 0, passing.stdout + passing.stderr
    assert "Skipped" not in passing.stdout
    # Only the part library changes: the hook must still see the stage break.
    (project / "lib" / "team.parts").write_text(NARROW_PART)
    git(project, "add", ".")
    failing = subprocess.run(hook + ["lib/team.parts"], cwd=project, capture_output=True,
                             text=True, env=environment)
    assert failing.returncode == 1, failing.stdout + failing.stderr
    assert "good.stage" in failing.stdout and "supply" in failing.stdout
    # Only the configuration changes (to the narrow library): likewise.
    (project / "lib" / "team.parts").write_text(TEAM_PART)
    (project / "ampcheck.toml").write_text('parts = ["lib/narrow.parts"]\n')
    (project / "lib" / "narrow.parts").write_text(NARROW_PART.replace("team-amp", "team-amp"))
    git(project, "add", ".")
    failing = subprocess.run(hook + ["ampcheck.toml"], cwd=project, capture_output=True,
                             text=True, env=environment)
    assert failing.returncode == 1, failing.stdout + failing.stderr
    assert "good.stage" in failing.stdout


def test_the_hook_runs_one_job():
    manifest = (ROOT / ".pre-commit-hooks.yaml").read_text()
    assert "--jobs 1" in manifest


def test_under_pre_commit_check_takes_one_job_unless_told(tmp_path, monkeypatch, capsys):
    from checker import audit
    from checker.cli import main

    seen = []
    real = audit.jobs_for
    monkeypatch.setattr(audit, "jobs_for", lambda request, value: seen.append(value)
                        or real(request, value))
    monkeypatch.chdir(tmp_path)
    (tmp_path / "a.stage").write_text(GOOD)
    monkeypatch.setenv("PRE_COMMIT", "1")
    main(["check", "a.stage"])
    main(["check", "a.stage", "-j", "2"])
    monkeypatch.delenv("PRE_COMMIT")
    main(["check", "a.stage"])
    capsys.readouterr()
    assert seen == [1, 2, None]
