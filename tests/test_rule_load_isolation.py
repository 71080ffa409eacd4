"""The load-isolation rule: capacitive loads, unbuffered sources, a heavy next stage.

Expected values, derived independently:

* phase margin of a follower with open-loop output resistance Ro driving Riso in
  series with RL || CL (feedback taken at the op-amp pin, before Riso): the loop gain is
  T(s) = A(s) * Z(s)/(Z(s) + Ro), Z = Riso + RL/(1 + s RL CL), with the single-pole op-amp
  A(s) = A0/(1 + s/w1), w1 = 2 pi GBW/A0 (Sedra and Smith, Microelectronic Circuits, 7th ed.,
  op-amp chapter); python-control ``stability_margins`` gives the margin;
* the capacitive-load pole fp = 1/(2 pi Ro CL);
* the loss of a source with impedance Rs into a load RL: the voltage divider,
  20 log10((Rs + RL)/RL) dB (common practice);
* between stages: the closed-loop output impedance of a follower, Ro/(1 + A(jw)), plus
  any series resistor, against the next stage's input impedance R1 + R2/(1 + A(jw))
  (Sedra and Smith), loss -20 log10|Zin/(Zin + Zout)| at the band centre.
"""

from __future__ import annotations

import math

import control
import pytest
from rule_helpers import TWO_PI, build, db, findings, line_of, only, params

from checker.analysis import AnalysisOptions, analyse
from checker.findings import Severity
from checker.preferred import ladder
from checker.variants import with_isolation_resistor

RULE = "load-isolation"
E24_LADDER = ladder(1.0, 10e3, "E24")
PHASE_TOLERANCE_DEG = 0.5

# -- a capacitive load on a follower ------------------------------------------------------
A0, GBW, RO = 2e5, 1e6, 75.0
DRIVER = params(open_loop_gain=A0, gbw=GBW, output_resistance=RO)
RL = 10e3


def line_driver(capacitance: float) -> str:
    """A follower driving a cable (RL = 10 kOhm, CL) straight from its output pin; the
    load is on line 6."""
    return f"""
        (version 1)
        (stage line-driver
          (ground gnd) (supply vcc 12V) (supply vee -12V)
          (opamp U1 {DRIVER} (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
          (source in (range 0V 5V) (band 0Hz 1kHz))
          (load out (resistance 10k) (capacitance {capacitance!r})))
        """


def isolated_driver(capacitance: float, riso: float) -> str:
    """The same follower with Riso between its output and the cable; feedback is taken
    at the op-amp's output pin, before Riso."""
    return f"""
        (version 1)
        (stage line-driver
          (ground gnd) (supply vcc 12V) (supply vee -12V)
          (opamp U1 {DRIVER} (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
          (resistor Riso out cable {riso!r})
          (source in (range 0V 5V) (band 0Hz 1kHz))
          (load cable (resistance 10k) (capacitance {capacitance!r})))
        """


def follower_margin_deg(capacitance: float, riso: float = 0.0) -> float:
    """python-control's margin of A(s) Z/(Z + Ro), Z = Riso + RL/(1 + s RL CL)."""
    opamp = control.tf([A0], [A0 / (TWO_PI * GBW), 1])
    # Z = (Riso (1 + s RL CL) + RL)/(1 + s RL CL), so Z/(Z + Ro) is:
    divider = control.tf([riso * RL * capacitance, riso + RL],
                         [(riso + RO) * RL * capacitance, riso + RL + RO])
    return float(control.stability_margins(opamp * divider)[1])


def test_small_capacitive_load_passes():
    assert follower_margin_deg(1e-9) > 60  # about 67 deg
    assert findings(line_driver(1e-9), RULE) == []


def test_capacitive_load_below_30_degrees_is_an_error():
    text = line_driver(10e-9)
    finding = only(text, RULE)
    expected = follower_margin_deg(10e-9)  # about 26 deg
    assert finding.rule == RULE
    assert finding.severity is Severity.ERROR
    assert finding.elements == ("U1", "load out")
    assert finding.line == 6 == line_of(text, "(load out")
    assert finding.column == 3
    assert finding.unit == "°"
    assert finding.limit == pytest.approx(45.0)
    assert finding.measured == pytest.approx(expected, abs=PHASE_TOLERANCE_DEG)


def test_capacitive_load_between_30_and_45_degrees_is_a_warning():
    finding = only(line_driver(4.7e-9), RULE)
    expected = follower_margin_deg(4.7e-9)  # about 37 deg
    assert 30 < expected < 45
    assert finding.severity is Severity.WARNING
    assert finding.measured == pytest.approx(expected, abs=PHASE_TOLERANCE_DEG)


def test_capacitive_load_pole_is_one_over_two_pi_ro_cl():
    finding = only(line_driver(10e-9), RULE)
    expected = 1 / (TWO_PI * RO * 10e-9)  # 212 kHz
    assert finding.details["load_pole_hz"] == pytest.approx(expected, rel=1e-9)


def test_suggested_isolation_resistor_restores_the_margin_by_python_control():
    finding = only(line_driver(10e-9), RULE)
    riso = finding.suggestion.value
    assert finding.suggestion.unit == "Ω"
    assert finding.suggestion.element == "R1"  # the first free designator
    # The rule aims at 60 deg; the suggested value must get there on the hand-written loop.
    assert follower_margin_deg(10e-9, riso) >= 60 - PHASE_TOLERANCE_DEG
    # It states what Riso costs into the resistive load: Riso/(Riso + RL).
    assert f"{riso / (riso + RL) * 100:.2g} %" in finding.suggestion.text


def test_suggested_isolation_resistor_is_the_smallest_e24_value_that_does_it():
    riso = only(line_driver(10e-9), RULE).suggestion.value
    below = E24_LADDER[E24_LADDER.index(riso) - 1]
    assert follower_margin_deg(10e-9, below) < 60  # python-control, one step lower


# An inverting stage whose margin against Riso rises to about 71 deg near 22 ohms and
# falls back to about 47 deg by 10 kohms (the load's own resistance is isolated too, so
# the loop crosses over higher): the fix lies in a window, and the search must find it
# although the largest value fails. Margins here come from the analysis core itself.
WINDOWED = """
    (version 1)
    (stage windowed (supply vcc 2.5V) (supply vee -2.5V) (ground gnd)
      (opamp U1 (part cmos-rrio) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
      (resistor R1 in fb 11k) (resistor R2 fb out 4.3k) (capacitor C1 fb out 1.2p)
      (source in (range -0.2V 0.2V) (band 1Hz 1kHz) (impedance 18k))
      (load out (resistance 15k) (capacitance 56n)))
    """


def _windowed_margin(riso: float) -> float:
    stage = build(WINDOWED)[0]
    variant = with_isolation_resistor(stage, "out", riso)
    return analyse(variant, AnalysisOptions(stray_capacitance_f=0.0)).loops["U1"] \
        .phase_margin_deg


def test_isolation_resistor_found_inside_a_window_of_good_values():
    finding = only(WINDOWED, RULE)
    riso = finding.suggestion.value
    assert riso is not None, finding.suggestion.text
    assert _windowed_margin(10e3) < 60  # the top of the ladder does not pass
    assert _windowed_margin(riso) >= 60
    assert _windowed_margin(E24_LADDER[E24_LADDER.index(riso) - 1]) < 60


def test_suggested_isolation_resistor_clears_the_finding():
    finding = only(line_driver(10e-9), RULE)
    assert findings(isolated_driver(10e-9, finding.suggestion.value), RULE) == []


def test_capacitive_load_behind_a_too_small_isolation_resistor_is_flagged():
    # 1 Ohm in front of 100 nF leaves about 13.5 deg (python-control).
    assert follower_margin_deg(100e-9, 1.0) < 30
    assert findings(isolated_driver(100e-9, 1.0), RULE) != []


def test_capacitive_load_under_a_stated_phase_margin_requirement_is_flagged():
    text = f"""
        (version 1)
        (stage line-driver
          (ground gnd) (supply vcc 12V) (supply vee -12V)
          (opamp U1 {DRIVER} (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
          (source in (range 0V 5V) (band 0Hz 1kHz))
          (load out (resistance 10k) (capacitance 2.2n))
          (require (phase-margin 60deg)))
        """
    assert 45 < follower_margin_deg(2.2e-9) < 60  # about 51 deg
    finding = only(text, RULE)
    assert finding.limit == pytest.approx(60.0)


# -- a source driving a load directly -------------------------------------------------------
def sensor_tap(follower_for_tap: bool = False) -> str:
    """A 47 kOhm sensor buffered by U1 for the main output, and a 100 kOhm logger input
    tapped straight off the sensor (line 7), or behind its own follower U2."""
    tap = "(load tap (resistance 100k))" if follower_for_tap else "(load in (resistance 100k))"
    second = (f"(opamp U2 {DRIVER} (in+ in) (in- tap) (out tap) (v+ vcc) (v- gnd))"
              if follower_for_tap else "")
    return f"""
        (version 1)
        (stage sensor-tap
          (ground gnd) (supply vcc 5V)
          (opamp U1 {DRIVER} (in+ in) (in- out) (out out) (v+ vcc) (v- gnd))
          (source in (label "humidity sensor") (range 0.5V 2.5V) (band 0Hz 10Hz) (impedance 47k))
          (load out (resistance 10k))
          {tap}
          {second})
        """


def test_unbuffered_source_into_a_resistive_load_loses_the_divider():
    text = sensor_tap()
    finding = only(text, RULE)
    expected = db((47e3 + 100e3) / 100e3)  # 20 log10((Rs + RL)/RL) = 3.35 dB
    assert finding.severity is Severity.WARNING
    assert finding.elements == ("humidity sensor", "load in")
    assert finding.line == 7 == line_of(text, "(load in")
    assert finding.unit == "dB"
    assert finding.limit == pytest.approx(0.83)
    assert finding.measured == pytest.approx(expected, abs=0.01)


def test_follower_between_source_and_load_clears_the_loss():
    assert findings(sensor_tap(follower_for_tap=True), RULE) == []


# -- the next stage loads this one --------------------------------------------------------
A1, GBW1, RO1, RSERIES = 1e5, 1e6, 100.0, 100.0
A2, GBW2 = 1e5, 10e6
BAND_CENTRE = math.sqrt(100 * 1000)  # both stages' band is 100 Hz to 1 kHz


def two_stages(r1: float, r2: float) -> str:
    """A follower with a 100 Ohm series resistor to its output net (load on line 7), which
    feeds an inverting stage whose input resistance is R1."""
    first = params(open_loop_gain=A1, gbw=GBW1, output_resistance=RO1)
    second = params(open_loop_gain=A2, gbw=GBW2)
    return f"""
        (version 1)
        (stage buffer
          (ground gnd) (supply vcc 5V)
          (opamp U1 {first} (in+ in) (in- drive) (out drive) (v+ vcc) (v- gnd))
          (resistor R3 drive out 100)
          (source in (range 1V 2V) (band 100Hz 1kHz))
          (load out (feeds scale in)))
        (stage scale
          (ground gnd) (supply vcc 5V) (supply ref 2.5V)
          (opamp U2 {second} (in+ ref) (in- fb) (out out) (v+ vcc) (v- gnd))
          (resistor R1 in fb {r1!r})
          (resistor R2 fb out {r2!r})
          (source in (range 1V 2V) (band 100Hz 1kHz) (impedance 100))
          (load out (resistance 10k)))
        """


def interstage_loss_db(r1: float, r2: float) -> float:
    s = 2j * math.pi * BAND_CENTRE
    a1 = A1 / (1 + s / (TWO_PI * GBW1 / A1))
    a2 = A2 / (1 + s / (TWO_PI * GBW2 / A2))
    z_out = RSERIES + RO1 / (1 + a1)
    z_in = r1 + r2 / (1 + a2)
    return -db(abs(z_in / (z_in + z_out)))


def test_low_input_resistance_next_stage_is_flagged():
    text = two_stages(1e3, 2e3)
    found = findings(text, RULE)
    assert len(found) == 1
    finding = found[0]
    expected = interstage_loss_db(1e3, 2e3)  # about 0.83 dB: 100 Ohm against 1 kOhm
    assert finding.stage == "buffer"
    assert finding.severity is Severity.WARNING
    assert finding.elements == ("load out",)
    assert finding.line == 7 == line_of(text, "(load out (feeds")
    assert finding.limit == pytest.approx(0.1)
    assert finding.measured == pytest.approx(expected, abs=0.01)


def test_raising_the_next_stage_input_resistance_clears_the_finding():
    assert interstage_loss_db(100e3, 200e3) < 0.1  # about 0.009 dB
    assert findings(two_stages(100e3, 200e3), RULE) == []
