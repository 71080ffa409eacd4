"""The HTML review (`--format html`, `--output html:PATH`): what it draws, from which
figures, and how it is written. The browser's view of it is tests/test_html_browser.py.

Expected values and their sources:

* thermal noise density sqrt(4kTR) (Johnson-Nyquist) with k from scipy.constants
  (CODATA); through a single-pole RC low-pass it falls by |1 + j f/fc|, so to 1/sqrt 2
  at fc = 1/(2 pi R C) (the first-order response; common practice);
* CIE 1976 L* from sRGB (IEC 61966-2-1 transfer curve, CIE 15:2004 lightness) for the
  greyscale check of the palette;
* everything else is the project's own: the plots must show the numbers the verdicts
  and rules computed, so those are compared with each other.
"""

from __future__ import annotations

import math
import os
import pathlib
import re
import subprocess
import sys
import xml.etree.ElementTree as ElementTree

import numpy as np
import pytest
import scipy.constants
from rule_helpers import build, params

pytest.importorskip("matplotlib")
pytest.importorskip("jinja2")

from checker.analysis import AnalysisOptions, analyse  # noqa: E402
from checker.analysis.noise import noise_density, output_noise  # noqa: E402
from checker.audit import Request, check_file  # noqa: E402
from checker.changes import apply_changes  # noqa: E402
from checker.cli import main  # noqa: E402
from checker.findings import Finding, Severity  # noqa: E402
from checker.records import NOT_MET, Verdict  # noqa: E402
from checker.report import plots, stage_views  # noqa: E402

ROOT = pathlib.Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "samples"
K = scipy.constants.k
QUIET = params(open_loop_gain=1e6, gbw=100e6, voltage_noise=0.0, current_noise=0.0)
SVG = "{http://www.w3.org/2000/svg}"
PAGE_LIMIT = 150 * 1024  # the bound on one stage's page


def rc_follower() -> str:
    return f"""
        (version 1)
        (stage filtered-buffer
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (resistor R1 src in 1k)
          (capacitor C1 in gnd 100n)
          (opamp U1 {QUIET} (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
          (source src (range -1V 1V) (band 0Hz 10kHz))
          (load out (resistance 100k)))
        """


def sample_stage(name: str, stage: str | None = None):
    """(result, stage result) of a sample file checked with every plot wanted."""
    result = check_file(str(SAMPLES / name), Request(plots_wanted="all"))
    chosen = result.stages[0] if stage is None else \
        next(s for s in result.stages if s.name == stage)
    return result, chosen


@pytest.fixture(scope="module")
def review(tmp_path_factory):
    """The one-file review of the samples, written by the command line."""
    folder = tmp_path_factory.mktemp("review")
    path = folder / "review.html"
    assert main(["check", str(SAMPLES), "--fail-on", "never", "--format", "compact",
                 "--output", f"html:{path}", "--jobs", "2"]) == 0
    return path.read_text(encoding="utf-8")


# -- the numbers drawn are the solved ones ----------------------------------------------------
def test_noise_density_is_the_resistor_through_the_low_pass():
    figures = analyse(build(rc_follower())[0], AnalysisOptions())
    corner = 1 / (2 * math.pi * 1e3 * 100e-9)  # 1.59 kHz
    density = noise_density(figures, np.array([1.0, corner, 10 * corner]))
    thermal = math.sqrt(4 * K * 300.0 * 1e3)  # 4.07 nV/rtHz (Johnson-Nyquist, CODATA k)
    total = density.total_v_per_rthz
    assert total[0] == pytest.approx(thermal, rel=1e-3)
    assert total[1] == pytest.approx(thermal / math.sqrt(2), rel=1e-3)
    assert total[2] == pytest.approx(thermal / math.sqrt(101), rel=1e-3)
    names = [name for name, _element in density.names]
    assert names == ["R1 thermal", "load out thermal"]  # the load's, through ~0 ohms out
    assert density.density_of(0)[1] == pytest.approx(total[1], rel=1e-6)


def test_noise_density_integrates_to_the_output_noise_the_verdict_reads():
    figures = analyse(build(rc_follower())[0], AnalysisOptions())
    result = output_noise(figures, 0.0, 10e3)
    grid = np.geomspace(1.0, 10e3, 4000)
    power = noise_density(figures, grid).total_v_per_rthz ** 2
    integrated = math.sqrt(float(np.sum((power[1:] + power[:-1]) / 2 * np.diff(grid)))
                           + power[0] * 1.0)
    assert integrated == pytest.approx(result.total_vrms, rel=1e-3)


def test_loop_overlay_is_the_loop_of_the_fixed_copy():
    # conductivity-gain: the feedback-pole fix (1 pF across R2) gives 86 degrees of margin
    # (the README's example output).
    result, stage = sample_stage("conductivity.stage")
    from checker.audit import setup_for
    from checker.files import load_file

    setup = setup_for(str(SAMPLES / "conductivity.stage"), Request())
    model = load_file(str(SAMPLES / "conductivity.stage"), setup.library).stages[0]
    figures = analyse(model, setup.options.analysis)
    views, notes = stage_views.loop_views(model, figures, stage.findings)
    assert notes == []
    (view,) = views
    assert view.curve.margins.phase_margin_deg == pytest.approx(
        figures.loops["U1"].phase_margin_deg)
    (fix,) = view.fixes
    finding = next(f for f in stage.findings if f.rule == "feedback-pole")
    copy = apply_changes(model, finding.suggestion.changes)
    solved = analyse(copy, setup.options.analysis).loops["U1"]
    assert fix.margins.phase_margin_deg == pytest.approx(solved.phase_margin_deg)
    assert round(fix.margins.phase_margin_deg) == 86
    assert np.allclose(fix.loop_gain, solved.loop_gain)


def test_spread_histogram_is_the_rule_s_monte_carlo():
    # conductivity-gain's gain-tolerance finding reports the share of boards within
    # -10 +-2 %; the histogram's boards give the same share.
    _result, stage = sample_stage("conductivity.stage")
    finding = next(f for f in stage.findings if f.rule == "gain-tolerance")
    from checker.audit import setup_for
    from checker.files import load_file

    setup = setup_for(str(SAMPLES / "conductivity.stage"), Request())
    model = load_file(str(SAMPLES / "conductivity.stage"), setup.library).stages[0]
    figures = analyse(model, setup.options.analysis)
    (view,) = stage_views.spread_views(
        model, figures, stage.findings, lambda r: setup.options.settings_of(r, setup.all_rules))
    inside = np.mean(np.abs(view.samples / -10.0 - 1) <= 0.02 * (1 + 1e-9))
    assert inside == pytest.approx(finding.details["share_within"])
    assert view.worst == pytest.approx(finding.details["worst_gain"])
    assert view.limits == pytest.approx((-10.2, -9.8))


def test_every_sample_stage_gets_its_plots_or_says_why_not():
    for path in sorted(SAMPLES.glob("*.stage*")):
        result = check_file(str(path), Request(plots_wanted="all"))
        for stage in result.stages:
            sheet = stage.sheet
            kinds = {p.kind for p in sheet.plots}
            assert "poles" in kinds or any("natural" in n for n in sheet.notes), stage.name
            assert "loop" in kinds or any("loop" in n for n in sheet.notes), stage.name
            assert not any("could not be drawn" in n for n in sheet.notes), sheet.notes
            assert sheet.elements, stage.name


def test_unstable_stage_draws_no_response_and_says_so():
    _result, stage = sample_stage("siren-buffer.stage")
    kinds = [p.kind for p in stage.sheet.plots]
    assert "response" not in kinds
    assert "the stage is unstable, so its small-signal response is not what it does" \
        in stage.sheet.notes
    poles = next(p for p in stage.sheet.plots if p.kind == "poles")
    assert "UNSTABLE" in poles.alt


# -- what a plot says ---------------------------------------------------------------------------
def _texts(svg: str) -> list[str]:
    tree = ElementTree.fromstring(svg)
    return ["".join(node.itertext()) for node in tree.iter(f"{SVG}text")]


def test_every_plot_has_a_title_a_text_alternative_and_engineering_units():
    _result, stage = sample_stage("conductivity.stage")
    assert [p.kind for p in stage.sheet.plots] == ["loop", "response", "range", "noise",
                                                   "spread", "poles"]
    for plot in stage.sheet.plots:
        tree = ElementTree.fromstring(plot.svg)
        assert tree.find(f"{SVG}title").text == plot.title
        assert tree.find(f"{SVG}desc").text == plot.alt
        assert tree.get("role") == "img"
        texts = _texts(plot.svg)
        assert plot.title in texts
        if plot.kind in ("loop", "response", "noise"):
            # SI prefixes on the frequency axis, not powers of ten
            hertz = [t for t in texts if re.fullmatch(r"\d+ [mkMG]?Hz", t)]
            assert len(hertz) >= 3 and any(t.endswith(("kHz", "MHz")) for t in hertz), texts
        if plot.kind == "range":
            assert any(re.fullmatch(r"-?\d+(\.\d+)? (m)?V", t) for t in texts), texts
    loop = stage.sheet.plots[0]
    assert "phase margin 23.8°" in loop.alt and "crossover 397 kHz" in loop.alt
    assert "phase margin 23.8°" in _texts(loop.svg)


def test_palette_stays_apart_in_greyscale():
    def lightness(colour: str) -> float:
        def linear(c: float) -> float:  # sRGB transfer curve, IEC 61966-2-1
            return c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4
        r, g, b = (linear(int(colour[i:i + 2], 16) / 255) for i in (1, 3, 5))
        y = 0.2126 * r + 0.7152 * g + 0.0722 * b
        return 116 * y ** (1 / 3) - 16 if y > 216 / 24389 else y * 24389 / 27  # CIE L*

    lines = sorted(lightness(c) for c in plots.SERIES)
    assert min(b - a for a, b in zip(lines, lines[1:])) >= 15
    assert len(set(plots.STYLES)) == len(plots.SERIES)  # and each has its own line style
    assert min(lightness(c) for c in plots.SHADES) >= max(lines) + 4
    assert lightness(plots.LIMIT) < min(lightness(c) for c in plots.SHADES) - 20


def test_a_plot_does_not_depend_on_what_was_drawn_before():
    first = check_file(str(SAMPLES / "turbidity.stage"), Request(plots_wanted="all"))
    check_file(str(SAMPLES / "river-stage.stage"), Request(plots_wanted="all"))
    check_file(str(SAMPLES / "camera-lamp.stage"), Request(plots_wanted="all"))
    again = check_file(str(SAMPLES / "turbidity.stage"), Request(plots_wanted="all"))
    assert [p.svg for p in first.stages[0].sheet.plots] == \
        [p.svg for p in again.stages[0].sheet.plots]


def test_failing_scope_draws_what_bears_on_errors_and_unmet_requirements():
    def finding(rule: str, severity: Severity, **details) -> Finding:
        return Finding(rule, severity, "m", "p", 1, 1, details=details)

    def verdict(keyword: str, status: str) -> Verdict:
        return Verdict(keyword, status, "r", "s", "p", 1, 1)

    assert plots.kinds_bearing_on([finding("feedback-pole", Severity.ERROR, loop="U1")], []) \
        == ("loop",)
    assert plots.kinds_bearing_on([finding("feedback-pole", Severity.WARNING)], []) == ()
    assert plots.kinds_bearing_on([], [verdict("headroom", NOT_MET)]) == ("range",)
    assert plots.kinds_bearing_on([finding("unstable-stage", Severity.ERROR)], []) == \
        ("loop", "poles")
    assert plots.kinds_bearing_on([finding("requirement-unmet", Severity.ERROR,
                                           requirement=("noise",))], []) == ("noise",)
    assert plots.kinds_bearing_on([finding("resistor-range", Severity.ERROR)], []) == ()


def stage_views_slug(name: str) -> str:
    from checker.report.html_page import slug

    return slug(name)


# -- the page ------------------------------------------------------------------------------------
def report_stage_names(tmp_path) -> list[str]:
    """Every stage of the samples' run in report order, from the JSON report."""
    import json

    path = tmp_path / "report.json"
    assert main(["check", str(SAMPLES), "--fail-on", "never", "--format", "compact",
                 "--output", f"json:{path}"]) == 0
    document = json.loads(path.read_text(encoding="utf-8"))
    return [stage["name"] for file in document["files"] for stage in file["stages"]]


def test_one_file_review_has_every_stage_and_links_that_reach_them(review, tmp_path):
    names = report_stage_names(tmp_path)
    sections = re.findall(r'<section class="stage [^"]*" id="([^"]+)"', review)
    assert [re.sub(r"^s\d{4}-", "", s) for s in sections] == \
        [stage_views_slug(n) for n in names]
    assert len(sections) >= 28
    table = review[review.index('<table class="stages">'):]
    table = table[:table.index("</table>")]
    assert re.findall(r'<a href="#(s\d{4}-[^"]+)">', table) == sections
    assert "http://" not in review.replace("http://www.w3.org/", "")
    assert "https://" not in review.replace("https://json-schema.org", "")
    assert "<script" not in review
    assert "default-src 'none'" in review


def test_safety_cautions_come_first_in_the_overview_and_in_their_stage(review):
    # piezo-driver's supplies span 150 V, beyond the 60 V DC extra-low-voltage limit
    overview = review[:review.index('<section class="stage ')]
    assert overview.index("Safety cautions (1)") < overview.index("<h3>Stages</h3>")
    assert re.search(r'<strong>high-voltage</strong> in <a href="#(s\d{4}-piezo-driver)">',
                     overview)
    stage = review[review.index('-piezo-driver" aria-labelledby'):]
    assert stage.index("Safety cautions") < stage.index("<h3>Requirements</h3>")
    assert "the supplies span 150 V" in stage[:stage.index("<h3>Requirements</h3>")]


def test_each_stage_section_is_under_the_page_limit(review):
    sections = re.split(r'(?=<section class="stage )', review)[1:]
    sizes = [len(s.encode("utf-8")) for s in sections]
    assert max(sizes) < PAGE_LIMIT, max(sizes)


def test_the_review_is_the_same_for_any_job_count(review, tmp_path):
    path = tmp_path / "one-job.html"
    assert main(["check", str(SAMPLES), "--fail-on", "never", "--format", "compact",
                 "--output", f"html:{path}", "--jobs", "1"]) == 0
    assert path.read_text(encoding="utf-8") == review


def test_folder_review_pages_and_what_it_draws(tmp_path, capsys):
    target = tmp_path / "review"
    assert main(["check", str(SAMPLES / "conductivity.stage"), str(SAMPLES / "leaf-wetness.stage"),
                 "--fail-on", "never", "--format", "compact", "--output",
                 f"html:{target}"]) == 0
    index = (target / "index.html").read_text(encoding="utf-8")
    pages = sorted(os.listdir(target / "stages"))
    assert pages == ["s0001-conductivity-gain.html", "s0002-leaf-wetness-buffer.html",
                     "s0003-leaf-wetness-scale.html"]
    assert re.findall(r'<a href="(stages/[^"]+)">', index) == [f"stages/{p}" for p in pages]
    failing = (target / "stages" / pages[0]).read_text(encoding="utf-8")
    # conductivity-gain: feedback-pole and its unmet phase-margin (the loop, the poles),
    # gain-tolerance (the spread)
    assert re.findall(r'class="plot plot-([a-z]+)"', failing) == ["loop", "spread", "poles"]
    assert '<a href="../index.html">' in failing
    passing = (target / "stages" / pages[1]).read_text(encoding="utf-8")
    assert "<svg" not in passing and "Elements" in passing
    assert not [n for n in os.listdir(tmp_path) if n.startswith(".ampcheck-")]
    # run again: an earlier review folder is replaced
    assert main(["check", str(SAMPLES / "conductivity.stage"), "--fail-on", "never",
                 "--format", "compact", "--output", f"html:{target}"]) == 0
    assert sorted(os.listdir(target / "stages")) == ["s0001-conductivity-gain.html"]


def test_folder_review_never_replaces_a_folder_of_something_else(tmp_path, capsys):
    target = tmp_path / "boards"
    target.mkdir()
    (target / "notes.txt").write_text("keep me")
    assert main(["check", str(SAMPLES / "conductivity.stage"), "--format", "compact",
                 "--output", f"html:{target}"]) == 2
    assert "refusing to replace the folder" in capsys.readouterr().err
    assert (target / "notes.txt").read_text() == "keep me"
    assert not [n for n in os.listdir(tmp_path) if n.startswith(".ampcheck-")]


def test_html_without_the_extra_names_the_install_command(monkeypatch, capsys):
    import importlib.util

    real = importlib.util.find_spec
    monkeypatch.setattr(importlib.util, "find_spec",
                        lambda name, *a: None if name == "matplotlib" else real(name, *a))
    assert main(["check", str(SAMPLES / "conductivity.stage"), "--format", "html"]) == 2
    err = capsys.readouterr().err
    assert "matplotlib" in err and "pip install 'ampcheck[html]'" in err


def test_text_run_imports_neither_plotting_nor_templating():
    code = ("import sys; from checker.cli import main; "
            f"main(['check', {str(SAMPLES / 'conductivity.stage')!r}, '--fail-on', 'never']); "
            "print(sorted(m for m in ('matplotlib', 'jinja2', 'markupsafe') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True, cwd=ROOT).stdout
    assert out.strip().splitlines()[-1] == "[]"


def test_a_review_folder_is_dropped_when_a_later_report_cannot_be_opened(tmp_path, capsys):
    stage = tmp_path / "conductivity.stage"
    stage.write_text((SAMPLES / "conductivity.stage").read_text())
    assert main(["check", str(stage), "--format", "compact", "--output",
                 f"html:{tmp_path / 'review'}", "--output", f"json:{stage}"]) == 2
    assert "refusing to write over the input file" in capsys.readouterr().err
    assert sorted(os.listdir(tmp_path)) == ["conductivity.stage"]
