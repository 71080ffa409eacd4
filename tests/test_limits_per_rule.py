"""Every rule with a threshold, run with its figure exactly at the limit and just either
side of it: at the limit it passes (checker/limits.py: a figure is beyond its limit only
by more than rounding), a millionth beyond it fails, a millionth inside it passes.

Each case takes the sample stage written to show the rule (samples/README.md), reads the
figure the rule measured, then moves the limit onto that figure: through a rule setting,
a stated requirement or a part parameter. The expected outcomes follow from the
comparison itself, not from outside values. Rules without a threshold to move are
listed at the end with the reason.
"""

from __future__ import annotations

import pathlib
import re

import pytest
from rule_helpers import findings

from checker.io.load import read_file
from checker.io.sexp_writer import write_sexp

ROOT = pathlib.Path(__file__).resolve().parents[1]
STEP = 1e-6  # far beyond the comparison's 1e-9 relative tolerance


def sample(name: str) -> str:
    """A sample's text in the s-expression syntax (a JSON sample is converted)."""
    path = ROOT / "samples" / name
    if name.endswith(".json"):
        return write_sexp(read_file(str(path)).tree)
    return path.read_text(encoding="utf-8")


def with_requirement(text: str, keyword: str, value: str) -> str:
    """The stage text with requirement ``keyword`` set to ``value`` (one stage)."""
    pattern = re.compile(rf"\({re.escape(keyword)} [^()\s]+\)")
    if pattern.search(text):
        return pattern.sub(f"({keyword} {value})", text, count=1)
    return text.replace("(require ", f"(require ({keyword} {value}) ", 1)


def with_parameter(text: str, ref: str, **values: float) -> str:
    """Op-amp ``ref`` with part parameters overridden by ``(params ...)``."""
    items = " ".join(f"({key.replace('_', '-')} {value!r})" for key, value in values.items())
    return re.sub(rf"(\(opamp {ref} \(part [^)]+\))", rf"\1 (params {items})", text, count=1)


def fired(text: str, rule: str, stage: str, settings=None, unit: str | None = None) -> list:
    """The rule's findings on ``stage`` (those in ``unit`` alone, when given: a rule
    with two checks)."""
    kwargs = {"settings": settings} if settings else {}
    return [f for f in findings(text, rule, **kwargs)
            if f.stage == stage and not f.details.get("unchecked")
            and (unit is None or f.unit == unit)]


def first(text: str, rule: str, stage: str, settings=None):
    found = fired(text, rule, stage, settings)
    assert found, f"{rule} does not fire on {stage}"
    return found[0]


def assert_boundary(run, make, limit: float, raising_fails: bool):
    """``run(make(v))`` with the limit at ``limit``, a millionth to the failing side and
    a millionth to the passing side. ``raising_fails``: the rule fires once the limit is
    raised past the figure (the limit is a minimum the figure must reach)."""
    up, down = limit * (1 + STEP), limit * (1 - STEP)
    if limit < 0:
        up, down = down, up
    beyond, inside = (up, down) if raising_fails else (down, up)
    assert run(make(limit)) == [], "at its limit the figure must pass"
    assert run(make(beyond)) != [], "a millionth beyond the limit must fail"
    assert run(make(inside)) == [], "a millionth inside the limit must pass"


# -- limits set through a rule setting --------------------------------------------------
SETTING_CASES = [
    # rule, sample, stage, setting, its value on the figure, raising it fails?
    ("feedback-pole", "conductivity.stage", "conductivity-gain", "warn_below_deg",
     lambda f: f.measured, True),
    ("load-isolation", "logger-output.stage.json", "logger-line-driver", "warn_below_deg",
     lambda f: f.measured, True),
    ("input-resistance", "soil-moisture.stage.json", "soil-moisture-gain", "ratio_to_source",
     lambda f: f.measured / 10e3, True),  # the probe's 10 kOhm
    ("difference-balance", "mast-strain.stage", "strain-diff", "min_cmrr_db",
     lambda f: f.measured, True),
    ("resistor-range", "bank-humidity.stage", "bank-humidity-gain", "max_bipolar_ohm",
     lambda f: f.measured, False),
    ("resistor-power", "battery-monitor.stage", "battery-monitor", "derating",
     lambda f: f.measured / f.limit * 0.5, False),  # allowed = rating x derating
    ("slew-rate", "streambed-resistivity.stage", "scour-probe-drive", "min_ratio",
     lambda f: f.limit / f.measured, True),  # needed x ratio against the part's rate
    ("preferred-values", "irradiance.stage", "irradiance-gain", "match_tolerance",
     lambda f: abs(f.limit / f.measured - 1), False),
]


@pytest.mark.parametrize("rule, name, stage, setting, value_of, raising_fails", SETTING_CASES,
                         ids=[case[0] for case in SETTING_CASES])
def test_a_setting_on_the_figure_passes_and_a_millionth_beyond_fails(
        rule, name, stage, setting, value_of, raising_fails):
    text = re.sub(r"\((phase-margin|cmrr) [^()\s]+\)", "", sample(name))  # the setting decides
    # the sample states cmrr 60 dB; without it the rule's own 40 dB would pass the stage
    showing = {"min_cmrr_db": 60.0} if rule == "difference-balance" else None
    value = value_of(first(text, rule, stage, showing))
    assert_boundary(lambda settings: fired(text, rule, stage, settings),
                    lambda v: {setting: v}, value, raising_fails)


# -- limits set through a stated requirement --------------------------------------------
REQUIREMENT_CASES = [
    # rule, sample, stage, keyword, unit written, its value on the figure, raising fails?
    ("bandwidth", "rain-acoustic.stage", "rain-impact-preamp", "bandwidth", "Hz",
     lambda f: f.measured, True),
    ("dc-error", "corrosion-monitor.stage", "corrosion-gain", "dc-error", "V",
     lambda f: f.measured, False),
    ("noise", "fish-counter.stage", "fish-counter-gain", "noise", "V",
     lambda f: f.measured, False),
    ("gain-tolerance", "irradiance.stage", "irradiance-gain", "gain-tolerance", "%",
     lambda f: f.measured * 100, False),
    # the margin left to the clip limit on the worse side (measured: the output's
    # extreme, limit: the clip level there)
    ("rail-headroom", "leaf-wetness.stage", "leaf-wetness-scale", "headroom", "V",
     lambda f: abs(f.limit - f.measured), True),
]


@pytest.mark.parametrize("rule, name, stage, keyword, unit, value_of, raising_fails",
                         REQUIREMENT_CASES, ids=[case[0] for case in REQUIREMENT_CASES])
def test_a_requirement_on_the_figure_passes_and_a_millionth_beyond_fails(
        rule, name, stage, keyword, unit, value_of, raising_fails):
    text = sample(name)
    if rule == "rail-headroom":
        text = with_requirement(text, keyword, "1V")  # the sample meets its 0.2 V
    value = value_of(first(text, rule, stage))
    assert_boundary(lambda t: fired(t, rule, stage, unit="Hz" if rule == "bandwidth" else None),
                    lambda v: with_requirement(text, keyword, f"{v!r}{unit}"), value,
                    raising_fails)


# -- limits set through a part parameter ------------------------------------------------
PARAMETER_CASES = [
    # rule, sample, stage, op-amp, parameter, its value on the figure, raising fails?
    ("stable-gain", "doppler-velocity.stage", "doppler-echo-buffer", "U1", "min_stable_gain",
     lambda f: f.measured, True),
    ("output-current", "streambed-resistivity.stage", "scour-probe-drive", "U1",
     "output_current", lambda f: f.measured, False),
    ("supply-range", "camera-lamp.stage", "lamp-current-sense", "U1", "supply_max",
     lambda f: f.measured, False),
]


@pytest.mark.parametrize("rule, name, stage, ref, parameter, value_of, raising_fails",
                         PARAMETER_CASES, ids=[case[0] for case in PARAMETER_CASES])
def test_a_part_parameter_on_the_figure_passes_and_a_millionth_beyond_fails(
        rule, name, stage, ref, parameter, value_of, raising_fails):
    text = sample(name)
    if rule == "supply-range":  # judge the operating maximum alone
        text = with_parameter(text, ref, supply_abs_max=100.0)
    value = value_of(first(text, rule, stage))
    base = text
    if rule == "supply-range":
        base = text.replace("(params (supply-abs-max 100.0))", "")

    def make(v):
        extra = {parameter: v}
        if rule == "supply-range":
            extra["supply_abs_max"] = 100.0
        return with_parameter(base, ref, **extra)

    assert_boundary(lambda t: fired(t, rule, stage), make, value, raising_fails)


def test_the_common_mode_limit_on_the_input_passes_and_a_millionth_beyond_fails():
    # groundwater-buffer: the transmitter's 0.5 V bottom against the part's input range
    # from V- + 2 V; move input-range-low onto the figure (V- is 0 V here)
    text = sample("groundwater-level.stage")
    run = lambda t: fired(t, "common-mode-range", "groundwater-buffer")  # noqa: E731
    low = first(text, "common-mode-range", "groundwater-buffer").measured
    # in+ is the transmitter; in- (the output) sits an offset lower and is judged too
    remaining = run(with_parameter(text, "U1", input_range_low=low))
    if remaining:
        low = remaining[0].measured
    assert_boundary(run, lambda v: with_parameter(text, "U1", input_range_low=v), low,
                    raising_fails=True)


# Rules without a threshold to move: open-loop and swapped-inputs judge the sign of the
# loop, floating-input a DC path, integrator-drift the absence of DC feedback; each is
# tested on stages that have and lack the property in its own test file.
