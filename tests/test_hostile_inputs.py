"""Hostile and broken inputs, outputs and signals: one bad file never stops an audit.

One test per failure found by the robustness campaign (the issue "One bad file never
stops an audit"): values that cannot be physical, rule crashes on plausible input, the
per-file fence, the time budget and memory cap, size limits, files that are not regular
files, outputs that are not regular files or cannot be written, signals, and rule code
named by configuration files. The expected behaviour is the project's own contract
(docs/format.md, docs/configuration.md, the exit codes in README.md); where a number is
checked its source is named beside it.
"""

from __future__ import annotations

import errno
import io
import json
import math
import os
import pathlib
import shutil
import signal
import stat
import subprocess
import sys
import textwrap
import time

import numpy as np
import pytest

import checker.io.write
from checker import audit
from checker.analysis import AnalysisOptions, analyse
from checker.analysis.figures import signed_gain
from checker.analysis.tolerance import transfer_samples, uniform_values
from checker.analysis.updates import source_gain_with_each
from checker.build import build_stages
from checker.cli import main
from checker.engine import RunOptions, load_rules
from checker.files import discover, load_file
from checker.findings import Finding, Severity
from checker.io.load import parse_text
from checker.parts.library import load_library
from checker.report import writer
from checker.report.context import ReportContext
from checker.report.finite import finite_json
from checker.review import FileResult
from checker.stage_limits import MAX_ELEMENTS, MAX_OPAMPS, MAX_STAGES
from checker.variants import with_resistance

ROOT = pathlib.Path(__file__).resolve().parents[1]
LIBRARY = load_library()
RULES = load_rules()
POSIX = os.name == "posix"
LINUX = sys.platform.startswith("linux")

INVERTING = textwrap.dedent("""\
    (version 1)
    (stage s
      (ground gnd) (supply vcc 15V) (supply vee -15V)
      (opamp U1 (part gp-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
      (resistor R1 in fb {r1} (tolerance 1%))
      (resistor R2 fb out 100k (tolerance 1%))
      (source in (amplitude 0.1V) (band 10Hz 1kHz) (impedance 100))
      (load out (resistance 10k))
      {require})
    """)


def inverting(r1: str = "10k", require: str = "") -> str:
    return INVERTING.format(r1=r1, require=require)


@pytest.fixture(autouse=True)
def wide_plain_console(monkeypatch):
    monkeypatch.setenv("COLUMNS", "400")
    monkeypatch.setenv("NO_COLOR", "1")
    monkeypatch.delenv("AMPCHECK_TRUST_CONFIG_RULES", raising=False)


def problems_of(text: str, name: str = "t.stage") -> list:
    """The input findings of one stage file given as text (none: it built)."""
    try:
        build_stages(parse_text(text, name), LIBRARY)
    except Exception as error:  # InputErrors
        return list(error.problems)
    return []


def engine_failures(text: str) -> list[str]:
    from checker.engine import check_stages

    stages = build_stages(parse_text(text, "t.stage"), LIBRARY)
    _figures, found = check_stages(stages, list(RULES.values()), RunOptions())
    return [f.message for fs in found.values() for f in fs if f.rule == "rule-failed"]


def strict_json(text: str):
    def refuse(word):
        raise ValueError(f"not JSON: {word}")

    return json.loads(text, parse_constant=refuse)


def run_cli(capsys, *argv) -> tuple[int, str, str]:
    code = main(list(argv))
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def subprocess_cli(*argv, cwd=None, **options) -> subprocess.CompletedProcess:
    environment = dict(os.environ, COLUMNS="400", NO_COLOR="1")
    environment.pop("AMPCHECK_TRUST_CONFIG_RULES", None)
    environment.update(options.pop("env", {}))
    return subprocess.run([sys.executable, "-m", "checker", *argv], cwd=cwd,
                          capture_output=True, text=True, env=environment, timeout=120,
                          **options)


def leftovers(folder: pathlib.Path) -> list[str]:
    return sorted(p.name for p in folder.rglob(".ampcheck-*.tmp"))


# -- values that cannot be physical are refused where they are read -------------------

@pytest.mark.parametrize("value, expected", [
    ("1" + "0" * 400, "beyond the range of a number"),  # an int beyond 1.8e308 (IEEE 754)
    ("1e400", "not a finite number"),
    ("5e-324", "too small to be a number"),  # the smallest denormal double (IEEE 754)
    ("1e-9", "below the smallest non-zero resistance"),
    ("1e20", "beyond the largest resistance"),
    ("1" + "0" * 70 + "k", "too long to be a resistance value"),
])
def test_an_impossible_resistor_value_is_refused_at_its_position(value, expected):
    text = inverting(r1=value)
    (problem,) = problems_of(text)
    # line 5, column 22 is where R1's value starts in the text above ("  (resistor R1 in fb ")
    assert (problem.line, problem.column) == (5, 22)
    assert expected in problem.message
    assert len(problem.message) < 200  # a 400-digit value is not echoed whole


@pytest.mark.parametrize("gain, expected", [
    ("7000dB", "beyond the range of a number"),  # 10**350 overflows a double
    ("6200dB", "beyond the range of a number"),
    ("300dB", "beyond the largest gain"),  # 1e15 > 1e12, checker/units.py PLAUSIBLE
    ("0", "cannot be zero"),
])
def test_an_impossible_required_gain_is_refused(gain, expected):
    text = inverting(require=f"(require (gain {gain}) (gain-tolerance 2%))")
    (problem,) = problems_of(text)
    assert problem.line == 9 and expected in problem.message


@pytest.mark.parametrize("requirement", ["(noise -5V)", "(dc-error -1mV)", "(headroom -1V)",
                                         "(phase-margin -10deg)"])
def test_a_negative_limit_requirement_is_refused(requirement):
    (problem,) = problems_of(inverting(require=f"(require {requirement})"))
    assert "cannot be negative" in problem.message


def test_a_huge_integer_in_json_is_refused_with_its_position():
    tree = {"version": 1, "stages": [{
        "name": "s", "ground": "gnd", "supplies": [{"net": "vcc", "voltage": 10 ** 400}],
        "opamps": [{"ref": "U1", "part": "gp-bipolar", "in+": "in", "in-": "out",
                    "out": "out", "v+": "vcc", "v-": "gnd"}],
        "sources": [{"net": "in", "amplitude": "1V"}]}]}
    problems = problems_of(json.dumps(tree, indent=1), "t.stage.json")
    assert any("beyond the range of a number" in p.message and p.line > 1 for p in problems)


# -- rules on plausible input: each crashed before, each now has a result -------------

def test_zero_gain_tolerance_does_not_crash_the_bandwidth_rule():
    text = inverting(require="(require (gain -10) (gain-tolerance 0%))")
    assert engine_failures(text) == []


def test_a_source_on_a_supply_net_is_refused_by_the_builder():
    text = inverting().replace("(source in", "(source vcc").replace("R1 in fb", "R1 vcc fb")
    (problem,) = problems_of(text)
    assert "net 'vcc' is a supply" in problem.message and problem.line == 7


def test_offset_current_without_bias_current_is_could_not_check(tmp_path):
    text = inverting(require="(require (dc-error 1mV))").replace(
        "(part gp-bipolar)", "(params (gbw 1MHz) (open-loop-gain 1e5) (offset-voltage 1mV)"
        " (offset-current 10nA))")
    assert engine_failures(text) == []
    from checker.engine import check_stages

    stages = build_stages(parse_text(text, "t.stage"), LIBRARY)
    found = check_stages(stages, [RULES["dc-error"]], RunOptions())[1]["s"]
    assert any("could not check the DC error" in f.message and "bias current" in f.message
               for f in found)


def test_decompensated_part_with_its_input_on_capacitors_only():
    # in+ reaches the source only through C1 (no DC path) and the feedback resistor is
    # far below an ohm, so no series RC from the E24 ladder fits: stable-gain must say so.
    text = textwrap.dedent("""\
        (version 1)
        (stage decomp
          (ground gnd) (supply vcc 12V)
          (opamp U1 (part decomp-bipolar-g5) (in+ p) (in- fb) (out out) (v+ vcc) (v- gnd))
          (capacitor C1 in p 1n) (capacitor C2 p gnd 1n)
          (resistor R1 fb gnd 1k) (resistor R2 fb out 0.05)
          (source in (amplitude 0.1V) (offset 6V) (band 0Hz 10Hz) (impedance 0.1))
          (load out (resistance 100k)))
        """)
    assert engine_failures(text) == []


def test_an_op_amp_output_on_a_source_net_and_two_outputs_on_one_net_are_refused():
    text = inverting().replace("(load out", "(opamp U2 (part gp-bipolar) (in+ gnd) (in- out)"
                               " (out in) (v+ vcc) (v- vee)) (load out")
    assert any("where source at in is" in p.message for p in problems_of(text))
    text = inverting().replace("(load out", "(opamp U2 (part gp-bipolar) (in+ gnd) (in- fb)"
                               " (out out) (v+ vcc) (v- vee)) (load out")
    assert any("both drive net 'out'" in p.message for p in problems_of(text))


def test_a_loop_gain_that_is_zero_somewhere_gives_a_crossover_without_a_warning():
    # The output reaches a rail through an inductor: at DC the loop gain is exactly 0,
    # which has no logarithm (the stable-gain rule read log |T| on the whole grid).
    text = textwrap.dedent("""\
        (version 1)
        (stage w (ground gnd) (supply vcc 5V)
          (opamp U1 (part decomp-bipolar-g5) (in+ qq) (in- fb) (out out) (v+ vcc) (v- gnd))
          (resistor R1 fb gnd 10k) (resistor R2 fb out 39k) (capacitor C1 fb out 100n)
          (capacitor CQ1 in gnd 1n) (capacitor CQ2 in qq 1n) (capacitor CQ3 qq gnd 1n)
          (inductor L1 out vcc 10m)
          (source in (range 0.2V 0.9V) (band 1e-9 1kHz) (impedance 5k))
          (load out (resistance 100k) (capacitance 20p)))
        """)
    assert engine_failures(text) == []


def test_a_return_ratio_whose_reference_system_is_singular_is_infinite():
    from checker.analysis.loop import return_ratio, unwrapped_phase_deg

    # 1 - A z = 1 - 2 * 0.5 = 0: beta = z / (1 - A z) has no finite value (the return
    # ratio identity of the module's docstring); T = A beta follows it
    T, beta = return_ratio(np.array([2.0 + 0j, 2.0 + 0j]), np.array([0.5 + 0j, 0.25 + 0j]))
    assert np.isinf(T[0]) and np.isinf(beta[0])
    assert T[1] == pytest.approx(1.0)  # 2 * 0.25 / (1 - 0.5) = 1
    # a loop gain of exactly zero has no phase step: the unwrapped phase stays finite
    assert np.all(np.isfinite(unwrapped_phase_deg(np.array([1.0, 0.0, 1j]))))


def finding_words(text: str) -> set[str]:
    from checker.engine import check_stages

    stages = build_stages(parse_text(text, "t.stage"), LIBRARY)
    _figures, found = check_stages(stages, list(RULES.values()), RunOptions())
    return {word.strip("(),;:") for fs in found.values() for f in fs
            for word in f.message.split()}


def test_an_inverting_input_on_capacitors_only_is_no_infinite_resistance_in_a_message():
    # U2's inverting input qq reaches the rest only through capacitors: its resistance
    # there is infinite, and the feedback-pole rule said "the inf Ω at its input".
    text = textwrap.dedent("""\
        (version 1)
        (stage two (ground gnd) (supply vcc 5V)
          (opamp U1 (part cmos-rrio) (in+ qq) (in- fb) (out out) (v+ vcc) (v- gnd))
          (opamp U2 (part cmos-rrio) (in+ shunt) (in- qq) (out fb) (v+ vcc) (v- gnd))
          (resistor R1 fb gnd 1k) (resistor R2 fb out 39k)
          (capacitor C1 shunt gnd 1n) (capacitor C2 fb qq 1n) (capacitor C3 qq gnd 1n)
          (source shunt (range 5mV 100mV) (band 0Hz 10Hz) (impedance 0.1))
          (load out (resistance 100k) (capacitance 20p))
          (require (gain 40) (gain-tolerance 2%)))
        """)
    assert not {"inf", "-inf", "nan"} & finding_words(text)


def test_a_corner_whose_gain_is_undefined_is_not_the_worst_corner():
    # RZ1 (1 µΩ) ties the output to the source's net and L1 holds that net at 0 V at
    # DC; the gain-tolerance rule's worst corner read "nan" where one corner's gain was
    # 0/0.
    text = textwrap.dedent("""\
        (version 1)
        (stage level (ground gnd) (supply vcc 12V)
          (opamp U1 (part decomp-bipolar-g5) (in+ qq) (in- fb) (out out) (v+ vcc) (v- gnd))
          (resistor R1 in fb 10k (tolerance 1%)) (resistor R2 fb out 150k (tolerance 1%))
          (resistor R3 vcc ref 10k (tolerance 1%)) (resistor R4 ref gnd 10k (tolerance 1%))
          (resistor RZ1 out in 1e-6) (inductor L1 in gnd 10m)
          (capacitor C1 ref gnd 10u (tolerance 20%)) (capacitor C2 vcc ref 100u)
          (capacitor C3 ref gnd 1n) (capacitor C4 ref qq 1n) (capacitor C5 qq gnd 1n)
          (source in (range 5.6V 6.4V) (band 0Hz 5Hz) (impedance 100))
          (load out (resistance 10k) (capacitance 1n))
          (require (gain -15) (gain-tolerance 2%)))
        """)
    assert not {"inf", "-inf", "nan"} & finding_words(text)


# -- writers never emit NaN or Infinity --------------------------------------------------

def test_finite_json_turns_every_non_finite_number_into_null():
    value = {"a": math.inf, "b": [math.nan, 1.5, (-math.inf,)], "c": np.float64("nan"),
             "d": np.int64(3), "e": "inf", "f": True}
    assert finite_json(value) == {"a": None, "b": [None, 1.5, [None]], "c": None, "d": 3,
                                  "e": "inf", "f": True}


@pytest.mark.parametrize("name", ["json", "sarif"])
def test_a_non_finite_measurement_is_written_as_strict_json(name):
    finding = Finding(rule="gain-tolerance", severity=Severity.WARNING, message="m",
                      path="x.stage", line=1, column=1, measured=math.inf, limit=math.nan)
    out = io.StringIO()
    report = writer(name, out, ReportContext("0", Severity.ERROR, RULES))
    report.add(FileResult("x.stage", problems=[finding]))
    report.close()
    document = strict_json(out.getvalue())  # a bare Infinity would raise here
    if name == "json":
        assert document["files"][0]["problems"][0]["measured"] is None
    else:
        assert document["runs"][0]["results"][0]["properties"]["measured"] is None


# -- the fence: a file whose review fails is a finding, the run goes on ---------------

def test_a_failure_outside_the_rules_becomes_review_failed_and_the_run_goes_on(
        tmp_path, capsys, monkeypatch):
    for name in ("a", "b", "c"):
        (tmp_path / f"{name}.stage").write_text(inverting())
    real = audit.review_file

    def flaky(path, *args, **kwargs):
        if path.endswith("b.stage"):
            raise OverflowError("int too large to convert to float")
        return real(path, *args, **kwargs)

    monkeypatch.setattr(audit, "review_file", flaky)
    code, out, err = run_cli(capsys, "check", str(tmp_path), "--format", "json", "--jobs",
                             "1", "--no-config")
    assert code == 3 and err == ""  # 3: a review stopped (README.md, exit codes)
    document = strict_json(out)
    assert [len(f["stages"]) for f in document["files"]] == [1, 0, 1]
    (failed,) = document["files"][1]["problems"]
    assert failed["rule"] == "review-failed"
    assert "OverflowError: int too large" in failed["message"]


def test_review_failed_is_a_known_engine_finding_with_its_kind():
    from checker.engine import ENGINE_RULES

    assert "review-failed" in ENGINE_RULES
    result = audit.review_failed("x.stage", "MemoryError", "x" * 1000)
    (finding,) = result.problems
    assert finding.details == {"kind": "MemoryError"} and len(finding.message) < 400


SLOW_RULE = '''
import os
import time

import numpy as np

from checker.engine import rule


@rule("hostile-probe", "info", "Misbehaves on purpose, for the robustness tests.")
def hostile_probe(view):
    """
    What it checks:
        Nothing: it sleeps on a stage named slow, allocates on one named hungry and
        ends its process on one named dies.
    Why it matters:
        It lets the tests reach the time budget, the memory cap and a dead worker.
    How the fix is computed:
        There is none.
    Sources:
        The project's own tests.
    """
    name = view.stage.name
    if name.startswith("slow"):
        while True:
            time.sleep(0.01)
    if name.startswith("hungry"):
        np.empty(8 * 1024 ** 3, dtype=np.uint8)  # 8 GiB of address space
    if name.startswith("dies"):
        os._exit(9)
    return ()
'''


@pytest.fixture
def probe_rules(tmp_path):
    folder = tmp_path / "probe-rules"
    folder.mkdir()
    (folder / "hostile_probe.py").write_text(SLOW_RULE)
    return str(folder)


def named(name: str) -> str:
    return inverting().replace("(stage s", f"(stage {name}")


@pytest.mark.parametrize("jobs", ["1", "2"])
def test_a_review_past_its_time_budget_is_stopped_and_reported(tmp_path, capsys,
                                                                probe_rules, jobs):
    files = tmp_path / "files"
    files.mkdir()
    (files / "a.stage").write_text(named("fine"))
    (files / "b.stage").write_text(named("slow"))
    (files / "c.stage").write_text(named("fine"))
    started = time.monotonic()
    code, out, _err = run_cli(capsys, "check", str(files), "--format", "json", "--no-config",
                              "--rules-dir", probe_rules, "--time-budget", "0.5",
                              "--jobs", jobs)
    assert time.monotonic() - started < 20
    assert code == 3
    document = strict_json(out)
    (failed,) = document["files"][1]["problems"]
    assert failed["rule"] == "review-failed" and "time budget" in failed["message"]
    assert len(document["files"][0]["stages"]) == len(document["files"][2]["stages"]) == 1


@pytest.mark.skipif(not LINUX, reason="the memory cap needs Linux (RLIMIT_AS, /proc)")
def test_a_review_past_its_memory_cap_is_stopped_and_reported(tmp_path, capsys, probe_rules):
    path = tmp_path / "hungry.stage"
    path.write_text(named("hungry"))
    other = tmp_path / "fine.stage"
    other.write_text(named("fine"))
    code, out, _err = run_cli(capsys, "check", str(tmp_path), "--format", "json",
                              "--no-config", "--rules-dir", probe_rules, "--memory-limit",
                              "200", "--jobs", "1")
    document = strict_json(out)
    entry = next(f for f in document["files"] if f["path"].endswith("hungry.stage"))
    messages = [f["message"] for f in entry["problems"]] + [
        f["message"] for s in entry["stages"] for f in s["findings"]]
    # The allocation is in a rule, whose guard reports it; either way it is MemoryError
    # and the run goes on with the other file.
    assert any("MemoryError" in m or "memory" in m for m in messages)
    assert code in (1, 3)
    fine = next(f for f in document["files"] if f["path"].endswith("fine.stage"))
    assert len(fine["stages"]) == 1


@pytest.mark.skipif(not POSIX, reason="needs fork and POSIX exit codes")
def test_a_worker_that_dies_takes_only_its_own_file(tmp_path, capsys, probe_rules):
    for i, name in enumerate(["fine", "fine", "dies", "fine", "fine"]):
        (tmp_path / f"{i}.stage").write_text(named(name))
    code, out, _err = run_cli(capsys, "check", str(tmp_path), "--format", "json",
                              "--no-config", "--rules-dir", probe_rules, "--jobs", "2")
    assert code == 3
    document = strict_json(out)
    assert [len(f["stages"]) for f in document["files"]] == [1, 1, 0, 1, 1]
    (failed,) = document["files"][2]["problems"]
    assert failed["rule"] == "review-failed" and "worker" in failed["message"]


# -- bounded work: size limits, batches, linear loops ----------------------------------

def test_a_stage_beyond_the_element_limit_is_one_quick_problem():
    extra = " ".join(f"(resistor X{i} out d{i} 1k)" for i in range(MAX_ELEMENTS + 10))
    text = inverting().replace("(load out", f"{extra} (load out")
    started = time.monotonic()
    problems = problems_of(text)
    assert time.monotonic() - started < 5
    (problem,) = problems
    assert f"the limit is {MAX_ELEMENTS} per stage" in problem.message


def test_too_many_op_amps_and_too_many_stages_are_refused():
    chain = " ".join(f"(opamp F{i} (part gp-bipolar) (in+ in) (in- f{i}) (out f{i})"
                     " (v+ vcc) (v- vee))" for i in range(MAX_OPAMPS))
    (problem,) = problems_of(inverting().replace("(load out", f"{chain} (load out"))
    assert f"the limit is {MAX_OPAMPS} per stage" in problem.message
    body = inverting().split("\n", 1)[1]
    text = "(version 1)\n" + "".join(body.replace("(stage s", f"(stage s{i}")
                                     for i in range(MAX_STAGES + 1))
    (problem,) = problems_of(text)
    assert f"the limit is {MAX_STAGES} per file" in problem.message


def test_dangling_nets_are_reported_each_and_hinted_at_most_twenty_times():
    extra = " ".join(f"(resistor X{i} out ou{i}t 1k)" for i in range(100))
    problems = problems_of(inverting().replace("(load out", f"{extra} (load out"))
    assert len(problems) == 100
    assert sum("did you mean" in p.message for p in problems) <= 20


def test_monte_carlo_batches_give_the_same_values_as_one_batch(monkeypatch):
    text = inverting(require="(require (gain -10) (gain-tolerance 0.5%))")
    (stage,) = build_stages(parse_text(text, "t.stage"), LIBRARY)
    figures = analyse(stage, AnalysisOptions())
    values = uniform_values(["R1", "R2"], {"R1": 1e4, "R2": 1e5}, {"R1": 0.01, "R2": 0.01},
                            500, 1)
    whole = transfer_samples(figures, values, [0], ["out", "in"], 0.0)
    monkeypatch.setattr("checker.analysis.tolerance.BATCH_BYTES", 1)  # one matrix a batch
    batched = transfer_samples(figures, values, [0], ["out", "in"], 0.0)
    assert np.array_equal(whole, batched)


def test_gains_with_each_resistor_changed_match_a_solved_copy():
    (stage,) = build_stages(parse_text(inverting(), "t.stage"), LIBRARY)
    figures = analyse(stage, AnalysisOptions())
    main_source = figures.sources[0]
    changes = [("in", "fb", 1 / 10.2e3 - 1 / 10e3), ("fb", "out", 1 / 99e3 - 1 / 100e3)]
    gains = source_gain_with_each(figures, 0, changes, main_source.reference_hz)
    for (ref, ohms), gain in zip([("R1", 10.2e3), ("R2", 99e3)], gains):
        copy = analyse(with_resistance(stage, ref, ohms), AnalysisOptions())
        # a rank-one update is exact (Sherman-Morrison; Golub and Van Loan, Matrix
        # Computations, section 2.1.4): the copy's own solve agrees to rounding
        assert signed_gain(complex(gain)) == pytest.approx(
            signed_gain(copy.sources[0].gain_from_source_mid), rel=1e-9)


def test_preferred_values_solves_no_copy_per_resistor(monkeypatch):
    extra = " ".join(f"(resistor X{i} fb gnd 10.37M)" for i in range(40))
    text = inverting().replace("(load out", f"{extra} (load out")
    from checker.engine import StageView, check_stages

    calls = []
    monkeypatch.setattr(StageView, "reanalyse", lambda self, *a, **k: calls.append(a))
    stages = build_stages(parse_text(text, "t.stage"), LIBRARY)
    found = check_stages(stages, [RULES["preferred-values"]], RunOptions())[1]["s"]
    assert len([f for f in found if f.rule == "preferred-values"]) >= 40
    assert calls == []


# -- files: regular files only, unreadable folders reported ---------------------------

@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="needs FIFOs")
def test_a_fifo_in_a_checked_folder_is_refused_without_blocking(tmp_path):
    os.mkfifo(tmp_path / "pipe.stage")
    (tmp_path / "good.stage").write_text(inverting())
    paths, missing = discover([str(tmp_path)])
    assert missing == [] and len(paths) == 2
    loaded = load_file(str(tmp_path / "pipe.stage"), LIBRARY)
    assert "not a regular file (a FIFO)" in loaded.problems[0].message


@pytest.mark.skipif(not os.path.exists("/dev/zero"), reason="needs /dev/zero")
def test_a_device_named_on_the_command_line_is_refused(capsys):
    code, out, _err = run_cli(capsys, "check", "/dev/zero", "--format", "compact",
                              "--no-config")
    assert code == 1
    assert "/dev/zero:1:1: error input-invalid: not a regular file (a character device)" in out


def test_a_folder_that_cannot_be_listed_is_reported(tmp_path, monkeypatch):
    (tmp_path / "good.stage").write_text(inverting())
    real_walk = os.walk

    def walk(top, onerror=None, **kwargs):  # as os.walk reports an unreadable folder
        onerror(PermissionError(errno.EACCES, "Permission denied", str(tmp_path / "locked")))
        yield from real_walk(top, onerror=onerror, **kwargs)

    monkeypatch.setattr("checker.files.os.walk", walk)
    paths, missing = discover([str(tmp_path)])
    assert len(paths) == 1
    (problem,) = missing
    assert problem.path.endswith("locked") and "Permission denied" in problem.message


@pytest.mark.skipif(not POSIX or os.geteuid() == 0, reason="root reads every folder")
def test_an_unreadable_sub_folder_is_reported_for_real(tmp_path, capsys):
    (tmp_path / "good.stage").write_text(inverting())
    locked = tmp_path / "locked"
    locked.mkdir()
    (locked / "hidden.stage").write_text(inverting())
    locked.chmod(0)
    try:
        code, out, _err = run_cli(capsys, "check", str(tmp_path), "--format", "compact",
                                  "--no-config")
    finally:
        locked.chmod(0o755)
    assert code == 1 and "cannot read this folder" in out


# -- outputs ----------------------------------------------------------------------------

@pytest.mark.skipif(not os.path.exists("/dev/null"), reason="needs /dev/null")
def test_a_device_given_as_output_is_written_not_replaced(tmp_path, capsys):
    (tmp_path / "a.stage").write_text(inverting())
    code, _out, _err = run_cli(capsys, "check", str(tmp_path), "--no-config",
                               "--output", "sarif:/dev/null")
    assert code in (0, 1)
    assert stat.S_ISCHR(os.stat("/dev/null").st_mode)


@pytest.mark.skipif(not POSIX, reason="needs /dev/stdout")
def test_json_to_dev_stdout_works_on_a_pipe(tmp_path):
    (tmp_path / "a.stage").write_text(inverting())
    done = subprocess_cli("check", "a.stage", "--no-config", "--format", "compact",
                          "--output", "json:/dev/stdout", cwd=tmp_path)
    assert done.returncode in (0, 1), done.stderr
    document = strict_json(done.stdout[done.stdout.index("{"):])
    assert document["files"][0]["path"] == "a.stage"


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="needs FIFOs")
def test_a_fifo_nobody_reads_is_an_error_not_a_wait(tmp_path, capsys):
    (tmp_path / "a.stage").write_text(inverting())
    os.mkfifo(tmp_path / "out.fifo")
    code, out, err = run_cli(capsys, "check", str(tmp_path / "a.stage"), "--no-config",
                             "--output", f"json:{tmp_path / 'out.fifo'}")
    assert code == 2 and "no process is reading this FIFO" in err and out == ""


def test_an_unwritable_output_stops_the_run_before_any_report(tmp_path, capsys):
    (tmp_path / "a.stage").write_text(inverting())
    code, out, err = run_cli(capsys, "check", str(tmp_path / "a.stage"), "--no-config",
                             "--format", "json", "--output",
                             f"sarif:{tmp_path / 'missing' / 'x.sarif'}")
    assert code == 2 and out == "" and "cannot write" in err and "internal" not in err
    code, out, err = run_cli(capsys, "check", str(tmp_path / "a.stage"), "--no-config",
                             "--format", "json", "--write-baseline",
                             str(tmp_path / "missing" / "b.json"))
    assert code == 2 and out == ""


@pytest.mark.skipif(not POSIX, reason="umask is POSIX")
def test_written_files_honour_the_umask_and_keep_a_replaced_files_mode(tmp_path, capsys):
    (tmp_path / "a.stage").write_text(inverting())
    kept = tmp_path / "kept.json"
    kept.write_text("{}")
    kept.chmod(0o600)
    previous = os.umask(0o027)
    try:
        run_cli(capsys, "check", str(tmp_path / "a.stage"), "--no-config", "--output",
                f"json:{tmp_path / 'new.json'}", "--output", f"json:{kept}")
    finally:
        os.umask(previous)
    assert stat.S_IMODE(os.stat(tmp_path / "new.json").st_mode) == 0o640  # 0o666 & ~0o027
    assert stat.S_IMODE(os.stat(kept).st_mode) == 0o600
    assert leftovers(tmp_path) == []


def test_a_full_disk_leaves_no_temporary_file(tmp_path, capsys, monkeypatch):
    (tmp_path / "a.stage").write_text(inverting())

    def full(_descriptor):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(checker.io.write.os, "fsync", full)
    code, _out, err = run_cli(capsys, "check", str(tmp_path / "a.stage"), "--no-config",
                              "--output", f"json:{tmp_path / 'r.json'}")
    assert code == 2 and "No space left on device" in err
    assert leftovers(tmp_path) == [] and not (tmp_path / "r.json").exists()


@pytest.mark.skipif(not POSIX, reason="needs SIGPIPE")
def test_a_closed_pipe_ends_quietly_with_141(tmp_path):
    for i in range(150):
        shutil.copy(ROOT / "samples" / "conductivity.stage", tmp_path / f"{i:03}.stage")
    process = subprocess.Popen([sys.executable, "-m", "checker", "check", str(tmp_path),
                                "--no-config", "--format", "compact", "--fail-on", "never",
                                "--jobs", "1"], stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    process.stdout.readline()
    process.stdout.close()  # as `| head -1` does
    _out, err = process.communicate(timeout=120)
    assert process.returncode == 141  # 128 + SIGPIPE (13), the shells' convention
    assert err == b""


@pytest.mark.skipif(not POSIX, reason="needs a POSIX shell")
def test_a_closed_stdout_is_an_error(tmp_path):
    (tmp_path / "a.stage").write_text(inverting())
    done = subprocess.run(["sh", "-c", 'exec "$@" >&-', "sh", sys.executable, "-m",
                           "checker", "check", str(tmp_path / "a.stage"), "--no-config"],
                          capture_output=True, text=True, timeout=60)
    assert done.returncode == 2 and "standard output is closed" in done.stderr


# -- signals ----------------------------------------------------------------------------

@pytest.mark.skipif(not POSIX, reason="POSIX signals")
@pytest.mark.parametrize("name, status", [("SIGTERM", 143), ("SIGINT", 130),
                                          ("SIGHUP", 129)])
def test_a_signal_stops_workers_quietly_and_leaves_no_temporary_file(tmp_path, probe_rules,
                                                                      name, status):
    files = tmp_path / "files"
    files.mkdir()
    for i in range(4):
        (files / f"{i}.stage").write_text(named("slow" if i % 2 else "fine"))
    out = tmp_path / "reports"
    out.mkdir()
    process = subprocess.Popen(
        [sys.executable, "-m", "checker", "check", str(files), "--no-config", "--rules-dir",
         probe_rules, "--jobs", "2", "--time-budget", "0", "--output",
         f"sarif:{out / 'r.sarif'}"], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
        start_new_session=True)
    deadline = time.monotonic() + 30
    while not leftovers(out) and time.monotonic() < deadline:
        time.sleep(0.05)
    time.sleep(0.5)  # the workers are at their files
    os.killpg(process.pid, getattr(signal, name))  # the whole group, as a terminal does
    _stdout, err = process.communicate(timeout=60)
    assert process.returncode == status  # 128 + the signal's number
    assert leftovers(out) == [] and not (out / "r.sarif").exists()
    assert b"Traceback" not in err and len(err.splitlines()) <= 2


# -- configuration files run no code unless asked --------------------------------------

MARKER_RULE = '''
import pathlib
pathlib.Path(__file__).with_name("ran.marker").write_text("the rule file ran")
'''


@pytest.fixture
def planted(tmp_path):
    """A folder whose ampcheck.toml names a rule folder whose code leaves a marker."""
    (tmp_path / "rules").mkdir()
    (tmp_path / "rules" / "planted.py").write_text(MARKER_RULE)
    (tmp_path / "ampcheck.toml").write_text('rules-dirs = ["rules"]\n')
    (tmp_path / "a.stage").write_text(inverting())
    return tmp_path


def test_rule_folders_from_a_configuration_file_do_not_run_unasked(planted, capsys,
                                                                    monkeypatch):
    monkeypatch.chdir(planted)
    code, out, err = run_cli(capsys, "check", "a.stage")
    assert code == 2 and out == ""
    assert "--trust-config-rules" in err and "ampcheck.toml:1" in err
    assert not (planted / "rules" / "ran.marker").exists()
    code, _out, err = run_cli(capsys, "config", "a.stage")
    assert code == 2 and not (planted / "rules" / "ran.marker").exists()


def test_rule_folders_from_configuration_load_with_the_flag(planted, capsys, monkeypatch):
    monkeypatch.chdir(planted)
    code, _out, _err = run_cli(capsys, "check", "a.stage", "--trust-config-rules")
    assert code in (0, 1)
    assert (planted / "rules" / "ran.marker").exists()


def test_rule_folders_from_configuration_load_with_the_environment(planted, capsys,
                                                                   monkeypatch):
    monkeypatch.chdir(planted)
    monkeypatch.setenv("AMPCHECK_TRUST_CONFIG_RULES", "1")
    code, _out, _err = run_cli(capsys, "check", "a.stage")
    assert code in (0, 1)
    assert (planted / "rules" / "ran.marker").exists()


def test_configuration_discovery_stops_at_the_repository_root(tmp_path, capsys):
    (tmp_path / "ampcheck.toml").write_text('ignore = ["resistor-range"]\n')
    repository = tmp_path / "board"
    (repository / ".git").mkdir(parents=True)
    (repository / "a.stage").write_text(inverting())
    code, out, _err = run_cli(capsys, "config", str(repository / "a.stage"))
    assert code == 0 and "none found (defaults)" in out
    (tmp_path / "loose").mkdir()
    (tmp_path / "loose" / "a.stage").write_text(inverting())
    code, out, _err = run_cli(capsys, "config", str(tmp_path / "loose" / "a.stage"))
    assert str(tmp_path / "ampcheck.toml") in out


def test_a_configured_parts_path_that_is_no_part_library_is_not_echoed(tmp_path, capsys,
                                                                       monkeypatch):
    (tmp_path / "secret.txt").write_text("(hunter2 correct horse battery staple)\n")
    (tmp_path / "ampcheck.toml").write_text('parts = ["secret.txt"]\n')
    (tmp_path / "a.stage").write_text(inverting())
    monkeypatch.chdir(tmp_path)
    code, out, err = run_cli(capsys, "check", "a.stage")
    assert code == 2 and "not a part library" in err
    assert "hunter2" not in err + out


def test_configured_parts_resolve_relative_to_their_file(tmp_path, capsys, monkeypatch):
    project = tmp_path / "project"
    (project / "lib").mkdir(parents=True)
    (project / "lib" / "ours.parts").write_text("(part ours-rrio (gbw 3MHz)"
                                                " (open-loop-gain 1e5))\n")
    (project / "ampcheck.toml").write_text('parts = ["lib/ours.parts"]\n')
    (project / "a.stage").write_text(inverting().replace("gp-bipolar", "ours-rrio"))
    monkeypatch.chdir(tmp_path)  # not the configuration's folder
    code, out, _err = run_cli(capsys, "check", "project/a.stage", "--format", "json")
    assert code in (0, 1)
    assert strict_json(out)["files"][0]["problems"] == []


# -- a whole audit with hostile files ---------------------------------------------------

HOSTILE_TEXTS = {
    "digits.stage": inverting(r1="1" + "0" * 400),
    "decibels.stage": inverting(require="(require (gain 7000dB))"),
    "denormal.stage": inverting(r1="5e-324"),
    "tolerance.stage": inverting(require="(require (gain -10) (gain-tolerance 0%))"),
    "crowded.stage": inverting().replace("(load out", " ".join(
        f"(resistor X{i} out d{i} 1k)" for i in range(300)) + " (load out"),
    "slow.stage": named("slow"),
    "broken.stage.json": '{"version": 1, "stages": [',
}


def test_an_audit_with_hostile_files_reports_every_file_the_same_for_any_job_count(
        tmp_path, capsys, probe_rules):
    files = tmp_path / "files"
    files.mkdir()
    for sample in sorted((ROOT / "samples").glob("*.stage*"))[:12]:
        shutil.copy(sample, files / sample.name)
    for name, text in HOSTILE_TEXTS.items():
        (files / name).write_text(text)
    reports = {}
    for jobs in ("1", "2"):
        out = tmp_path / f"out{jobs}"
        out.mkdir()
        code, stdout, _err = run_cli(
            capsys, "check", str(files), "--no-config", "--rules-dir", probe_rules,
            "--time-budget", "1", "--jobs", jobs, "--format", "text",
            *[f"--output={name}:{out / ('r.' + name)}"
              for name in ("json", "sarif", "compact", "csv")])
        assert code == 3
        reports[jobs] = {name: (out / f"r.{name}").read_text()
                         for name in ("json", "sarif", "compact", "csv")}
        reports[jobs]["text"] = stdout
        assert leftovers(out) == []
    assert reports["1"] == reports["2"]
    document = strict_json(reports["1"]["json"])
    assert len(document["files"]) == 12 + len(HOSTILE_TEXTS)
    strict_json(reports["1"]["sarif"])
    rules = {f["rule"] for entry in document["files"] for f in entry["problems"]}
    assert rules == {"input-invalid", "review-failed"}
