"""The supply-range rule: the span across an op-amp's supply pins against its limits.

The span is v+ minus v- (docs/format.md: a part's supply limits are spans). A span past
the absolute maximum is an error (the part may be damaged), one outside the operating
minimum..maximum a warning (its data no longer hold): the split data sheets make
between absolute maximum ratings and operating conditions (common practice). The parts
here are inline, with limits of a 5 V CMOS class: operating 1.8 V to 5.5 V, absolute
6 V.
"""

from __future__ import annotations

import pytest
from rule_helpers import findings, line_of, only, params

from checker.findings import Severity

RULE = "supply-range"
LIMITS = dict(supply_min=1.8, supply_max=5.5, supply_abs_max=6.0)


def follower(supplies: str, v_neg: str = "gnd", **limits: float) -> str:
    """A follower on the given supplies; op-amp on line 5."""
    part = params(open_loop_gain=1e5, gbw=1e6, **(limits if limits else LIMITS))
    return f"""
        (version 1)
        (stage monitor
          (ground gnd)
          {supplies}
          (opamp U1 {part} (in+ in) (in- out) (out out) (v+ vcc) (v- {v_neg}))
          (source in (range 0.5V 1V))
          (load out (resistance 10k)))
        """


def test_span_inside_the_operating_range_passes():
    assert findings(follower("(supply vcc 5V)"), RULE) == []


def test_span_beyond_the_absolute_maximum_is_an_error():
    text = follower("(supply vcc 12V)")
    finding = only(text, RULE)
    assert finding.rule == RULE
    assert finding.severity is Severity.ERROR
    assert finding.elements == ("U1",)
    assert finding.line == 5 == line_of(text, "(opamp U1")
    assert finding.unit == "V"
    assert finding.measured == pytest.approx(12.0)  # 12 V - 0 V
    assert finding.limit == pytest.approx(6.0)


def test_split_rails_count_as_their_span():
    # +-5 V: a 10 V span across the pins, though neither rail exceeds 6 V.
    text = follower("(supply vcc 5V) (supply vee -5V)", v_neg="vee")
    finding = only(text, RULE)
    assert finding.severity is Severity.ERROR
    assert finding.measured == pytest.approx(10.0)


def test_span_between_operating_and_absolute_maximum_is_a_warning():
    finding = only(follower("(supply vcc 5.8V)"), RULE)
    assert finding.severity is Severity.WARNING
    assert finding.measured == pytest.approx(5.8)
    assert finding.limit == pytest.approx(5.5)


def test_span_below_the_operating_minimum_is_a_warning():
    finding = only(follower("(supply vcc 1.5V)"), RULE)
    assert finding.severity is Severity.WARNING
    assert finding.measured == pytest.approx(1.5)
    assert finding.limit == pytest.approx(1.8)


def test_suggested_span_is_the_operating_maximum_and_clears_the_finding():
    finding = only(follower("(supply vcc 12V)"), RULE)
    assert finding.suggestion.value == pytest.approx(5.5)
    assert finding.suggestion.unit == "V"
    value = finding.suggestion.value
    assert findings(follower(f"(supply vcc {value!r})"), RULE) == []


def test_suggested_minimum_clears_the_low_span_finding():
    finding = only(follower("(supply vcc 1.5V)"), RULE)
    assert finding.suggestion.value == pytest.approx(1.8)
    assert findings(follower(f"(supply vcc {finding.suggestion.value!r})"), RULE) == []


def test_part_without_a_supply_minimum_cannot_check_the_low_side():
    found = findings(follower("(supply vcc 5V)", supply_abs_max=6.0), RULE)
    assert [f.severity for f in found] == [Severity.INFO]
    assert found[0].message.startswith("could not check the lowest supply span of U1")
    assert found[0].details.get("unchecked") is True


def test_part_without_a_supply_maximum_cannot_check_the_high_side():
    found = findings(follower("(supply vcc 5V)", supply_min=1.8), RULE)
    assert [f.severity for f in found] == [Severity.INFO]
    assert found[0].message.startswith("could not check the highest supply span of U1")
