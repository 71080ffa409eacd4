"""The rail-headroom rule: the output against the rails (the inputs' common-mode range
is tested in test_rule_common_mode_range.py).

The worst-case output is worked by hand for an inverting stage about a reference rail
Vref, Rg = R1, Rf = R2, input Vin:

* nominal output, with the finite open-loop gain A0 of the op-amp:
  Vout = ((1 + Rf/Rg) Vref - (Rf/Rg) Vin) * A0/(A0 + 1 + Rf/Rg)
  (superposition; finite-gain closed form from Sedra and Smith, Microelectronic
  Circuits, 7th ed., op-amp chapter);
* DC error at the output, worst case: the offset voltage times the noise gain plus the
  larger bias current times the feedback resistor,
  Vos (1 + Rf/Rg) + (Ib + Ios/2) Rf
  (Eggleston, Basic Electronics for Scientists and Engineers, section 6.4, DC error
  terms of the op-amp);
* the usable swing is each rail less the part's output headroom.
"""

from __future__ import annotations

import pytest
from rule_helpers import figures_of, findings, line_of, only, params

from checker.findings import Severity

RULE = "rail-headroom"
VOLT_TOLERANCE = 1e-4  # 0.1 mV

# A general-purpose bipolar class op-amp, given inline so every number is in view.
A0 = 1e6
VOS, IB, IOS = 2e-3, 80e-9, 20e-9
HEADROOM = 1.5
OPAMP = params(open_loop_gain=A0, gbw=1e6, offset_voltage=VOS, bias_current=IB,
               offset_current=IOS, output_headroom_high=HEADROOM,
               output_headroom_low=HEADROOM, input_range_low="2V", input_range_high="-2V")
VCC, VREF, RG, RF = 12.0, 6.0, 10e3, 150e3


def level_gain(low: float, high: float, require: str = "") -> str:
    """Gain -15 about a 6 V reference on a 12 V single supply; U1 is on line 4."""
    return f"""
        (version 1)
        (stage level-gain
          (ground gnd) (supply vcc 12V) (supply ref 6V)
          (opamp U1 {OPAMP} (in+ ref) (in- fb) (out out) (v+ vcc) (v- gnd))
          (resistor R1 in fb 10k)
          (resistor R2 fb out 150k)
          (source in (range {low!r} {high!r}) (band 0Hz 5Hz))
          (load out (resistance 10k))
          {require})
        """


def nominal_out(vin: float) -> float:
    """((1 + Rf/Rg) Vref - (Rf/Rg) Vin) * A0/(A0 + 1 + Rf/Rg)."""
    noise_gain = 1 + RF / RG
    return (noise_gain * VREF - RF / RG * vin) * A0 / (A0 + noise_gain)


def dc_error() -> float:
    """Vos (1 + Rf/Rg) + (Ib + Ios/2) Rf (Eggleston, section 6.4): 45.5 mV here."""
    noise_gain = (1 + RF / RG) * A0 / (A0 + 1 + RF / RG)
    return VOS * noise_gain + (IB + IOS / 2) * RF


def test_output_well_inside_the_swing_passes():
    # 5.8 V to 6.2 V gives 9 V to 3 V, 1.5 V from each limit.
    assert findings(level_gain(5.8, 6.2), RULE) == []


def test_output_beyond_the_swing_clips_as_an_error():
    text = level_gain(5.65, 6.4)
    finding = only(text, RULE)
    # 6.4 V in asks for 0 V out, 45.5 mV lower with the errors; the usable swing ends
    # at 0 V + 1.5 V.
    expected = nominal_out(6.4) - dc_error()
    assert finding.rule == RULE
    assert finding.severity is Severity.ERROR
    assert finding.elements == ("U1",)
    assert finding.line == 4 == line_of(text, "(opamp U1")
    assert finding.column == 3
    assert finding.unit == "V"
    assert finding.measured == pytest.approx(expected, abs=VOLT_TOLERANCE)
    assert finding.limit == pytest.approx(0 + HEADROOM)
    assert finding.details["usable_high"] == pytest.approx(VCC - HEADROOM)


def test_worst_case_error_is_offset_times_noise_gain_plus_bias_times_rf():
    finding = only(level_gain(5.65, 6.4), RULE)
    assert dc_error() == pytest.approx(0.0455, abs=1e-4)
    assert "±45.5 mV" in finding.message


def test_output_within_the_margin_of_the_swing_is_a_warning():
    # 6.295 V in gives 1.575 V out, 1.5295 V with the errors: 29.5 mV above the 1.5 V
    # limit, inside the default 0.1 V margin.
    text = level_gain(5.75, 6.295)
    finding = only(text, RULE)
    expected = nominal_out(6.295) - dc_error()
    assert 0 < expected - 1.5 < 0.1
    assert finding.severity is Severity.WARNING
    assert finding.elements == ("U1",)
    assert finding.line == line_of(text, "(opamp U1")
    assert finding.measured == pytest.approx(expected, abs=VOLT_TOLERANCE)
    assert finding.limit == pytest.approx(1.5)


def test_headroom_requirement_widens_the_margin():
    # 5.72 V to 6.28 V: 1.7545 V to 10.2455 V, 0.2545 V inside each limit: clear of the
    # default 0.1 V margin, inside a stated 0.5 V.
    assert findings(level_gain(5.72, 6.28), RULE) == []
    finding = only(level_gain(5.72, 6.28, require="(require (headroom 0.5V))"), RULE)
    assert finding.severity is Severity.WARNING


def test_suggested_input_window_is_the_range_that_fits():
    finding = only(level_gain(5.65, 6.4), RULE)
    # Solve Vout(Vin) -/+ error = limit for Vin: 6 -/+ (4.5 V - 45.5 mV)/15.
    low = VREF - (VCC - HEADROOM - dc_error() - VREF) / (RF / RG)
    high = VREF + (VREF - HEADROOM - dc_error()) / (RF / RG)
    assert low == pytest.approx(5.703, abs=1e-3) and high == pytest.approx(6.297, abs=1e-3)
    assert "from 5.7 V to 6.3 V" in finding.suggestion.text


def test_inputs_inside_the_suggested_window_no_longer_clip():
    # The window of the previous test (5.703 V to 6.297 V), 1 mV inside each end: the
    # output then sits just inside its limits, so a near-rail warning may remain, but
    # nothing clips.
    remaining = findings(level_gain(5.704, 6.296), RULE)
    assert [f.severity for f in remaining if f.severity is Severity.ERROR] == []


def test_input_outside_the_common_mode_range_is_not_this_rules_concern():
    # The follower's input reaches 4.5 V against a common-mode range that ends at 3.5 V
    # (common-mode-range reports that); its output, 4.5 V, is inside the 50 mV headroom
    # of the 5 V rail, so rail-headroom has nothing to say.
    opamp = params(open_loop_gain=1e5, gbw=1e6, output_headroom_high="50mV",
                   output_headroom_low="50mV", input_range_low="-0.1V",
                   input_range_high="-1.5V")
    text = f"""
        (version 1)
        (stage sensor-buffer
          (ground gnd) (supply vcc 5V)
          (opamp U1 {opamp} (in+ in) (in- out) (out out) (v+ vcc) (v- gnd))
          (source in (range 0.5V 4.5V) (band 0Hz 10Hz))
          (load out (resistance 10k)))
        """
    assert findings(text, RULE) == []


def test_part_without_output_headroom_cannot_be_checked():
    opamp = params(open_loop_gain=1e5, gbw=1e6, input_range_low="2V", input_range_high="-2V")
    text = f"""
        (version 1)
        (stage no-headroom
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {opamp} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 10k)
          (resistor R2 fb out 20k)
          (source in (range -1V 1V) (band 0Hz 10Hz))
          (load out (resistance 10k)))
        """
    finding = only(text, RULE)
    assert finding.severity is Severity.INFO
    assert finding.message.startswith("could not check the output headroom of U1")
    assert finding.elements == ("U1",)
    assert finding.line == 4 == line_of(text, "(opamp U1")


def test_opamp_with_a_floating_input_has_no_operating_point_to_check():
    # C1 couples the source into in+ with nothing to ground behind it: the solver ties
    # the net with a tiny conductance, so the bias current reads as a huge output
    # voltage; that is the floating-input rule's finding, not a clipped output.
    text = f"""
        (version 1)
        (stage coupled-gain
          (ground gnd) (supply vcc 12V)
          (opamp U1 {OPAMP} (in+ pos) (in- fb) (out out) (v+ vcc) (v- gnd))
          (capacitor C1 in pos 100n)
          (resistor R1 fb gnd 10k)
          (resistor R2 fb out 100k)
          (source in (amplitude 10mV) (band 100Hz 10kHz))
          (load out (resistance 10k)))
        """
    assert findings(text, RULE) == []


BOTH_SIDES = """
    (version 1)
    (stage both (ground gnd) (supply vcc 12V) (supply vee -12V)
      (opamp U1 (part gp-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
      (resistor R1 in fb 10k (tolerance 1%))
      (resistor R2 fb out 1M (tolerance 1%))
      (source in (range -0.2V 0.2V))
      (load out (resistance 10k)))
    """


def test_clipping_at_both_rails_names_both_sides():
    # gain -100 on +-0.2 V asks for +-20 V (by hand) of a +-10.5 V swing (rails less the
    # part's 1.5 V headroom): both sides clip
    finding = only(BOTH_SIDES, RULE)
    assert finding.details["sides"] == ["upper", "lower"]
    assert "at the upper limit and clips by" in finding.message
    assert "at the lower limit" in finding.message


def test_the_fix_changes_the_stage_not_the_sensor():
    # the usable 21 V less 0.1 V margin each side, less the errors, against the signal's
    # 40 V: the gain must fall by about 2 (by hand); the source's range is given only
    # for reference
    text = only(BOTH_SIDES, RULE).suggestion.text
    assert text.startswith("lower the gain by a factor 1.98")
    assert "widen the supplies" in text and "for reference" in text


def test_a_load_heavier_than_the_headroom_load_is_noted_as_not_checked():
    # the part states its headroom into 10 kOhm; 1 kOhm on its output makes it swing less
    # than that headroom (common practice: headroom grows with the load current)
    text = BOTH_SIDES.replace("(resistance 10k)", "(resistance 1k)")
    notes = [f for f in findings(text, RULE) if f.details.get("unchecked")]
    assert len(notes) == 1 and "into 10 kΩ or more" in notes[0].message
    assert not [f for f in findings(BOTH_SIDES, RULE) if f.details.get("unchecked")]



def test_a_low_feedback_resistor_loads_the_output_like_a_load():
    # Gain -100 with R2 = 10k feeding a virtual ground: the output drives R2 to ground in
    # parallel with its 10k load, 10k || 10k = 5 kOhm (Ohm's law; the virtual ground moves
    # by Vout/A0, a part in 2e5), half the 10 kOhm the part states its headroom into.
    # R1 100 Ohm keeps the gain; the source range keeps the output inside the swing.
    text = (BOTH_SIDES.replace("in fb 10k", "in fb 100").replace("fb out 1M", "fb out 10k")
            .replace("(range -0.2V 0.2V)", "(range -0.05V 0.05V)"))
    notes = [f for f in findings(text, RULE) if f.details.get("unchecked")]
    assert len(notes) == 1
    assert "out drives 5 kΩ as the signal moves it" in notes[0].message
    # 10k || 1M = 9.9 kOhm is within the 10 % allowance of the stated 10 kOhm
    assert not [f for f in findings(BOTH_SIDES, RULE) if f.details.get("unchecked")]


def test_the_load_and_network_together_is_solved_not_summed():
    # A non-inverting gain of 11 into 10k: R2 (10k) and R1 (1k) in series from the
    # output to ground, 11k, parallel with the 10k load: 5.24 kOhm (by hand).
    text = """
    (version 1)
    (stage ni (ground gnd) (supply vcc 12V) (supply vee -12V)
      (opamp U1 (part gp-bipolar) (in+ in) (in- fb) (out out) (v+ vcc) (v- vee))
      (resistor R1 fb gnd 1k) (resistor R2 fb out 10k)
      (source in (range -0.5V 0.5V))
      (load out (resistance 10k)))
    """
    figures = figures_of(text)
    assert figures.output_loads["U1"] == pytest.approx(1 / (1 / 10e3 + 1 / 11e3), rel=1e-3)


ONE_VOLT = """
    (version 1)
    (stage low-rail
      (ground gnd) (supply vcc 1V)
      (opamp U1 (part gp-bipolar) (in+ in) (in- out) (out out) (v+ vcc) (v- gnd))
      (source in (range 0.2V 0.4V))
      (load out (resistance 10k)))
"""


def test_headroom_beyond_the_supply_leaves_no_swing_and_says_so():
    # The gp-bipolar class keeps 1.5 V from each rail (the project's class values): on a
    # 1 V supply its clip limits cross (1.5 V above the low rail, -0.5 V below the top),
    # which is no swing at all, not a swing from 1.5 V down to -0.5 V.
    finding = only(ONE_VOLT, "rail-headroom")
    assert finding.severity == Severity.ERROR
    assert "no usable swing at all" in finding.message
    assert finding.measured == pytest.approx(1.0) and finding.limit == pytest.approx(3.0)
    # the DC-error rule cannot take a fraction of a swing that is not there
    (dc,) = findings(ONE_VOLT, "dc-error")
    assert dc.details.get("unchecked") and "no usable swing" in dc.message
    # and the input range (2 V above v-, 2 V below v+ for the class) is no range either
    (cm,) = findings(ONE_VOLT, "common-mode-range")
    assert "is no range" in cm.message


# An AC-coupled non-inverting stage: R1 reaches ground through C1, so the gain is 1 at DC
# and 1 + R2/|R1 + 1/(j w C1)| in the band (non-inverting gain 1 + Zf/Zg, Sedra and
# Smith, op-amp chapter). At 100 Hz, the bottom of the band, that is 10.998; the finite
# loop gain (A0 1e6, GBW 1 MHz: |A| = 1e4 at 100 Hz) takes about 0.1 % off it.
def ac_coupled(low: str, high: str, band: str = "(band 100Hz 10kHz)") -> str:
    return f"""
(stage ac-gain (ground gnd) (supply vcc 5V) (supply vee -5V)
  (opamp U1 {OPAMP} (in+ in) (in- fb) (out out) (v+ vcc) (v- vee))
  (resistor R1 fb mid 1k) (capacitor C1 mid gnd 100u) (resistor R2 fb out 10k)
  (resistor R3 in gnd 100k)
  (source in (range {low} {high}) {band})
  (load out (resistance 10k)))
"""


def ac_gain() -> float:
    """|1 + R2 / (R1 + 1/(j 2 pi 100 Hz C1))| with the ideal op-amp."""
    import cmath
    zg = 1e3 + 1 / (2j * cmath.pi * 100 * 100e-6)
    return abs(1 + 10e3 / zg)


def test_a_range_with_a_band_swings_at_the_gain_a_coupling_capacitor_passes():
    # -1 V to 1 V swings the output by the in-band gain, about +-11 V, against the usable
    # +-3.5 V: clipping that the DC gain of 1 (+-1 V) would pass.
    assert ac_gain() == pytest.approx(10.998, abs=1e-3)
    text = ac_coupled("-1V", "1V")
    finding = only(text, RULE)
    assert finding.severity is Severity.ERROR and finding.line == line_of(text, "(opamp U1")
    assert finding.measured == pytest.approx(ac_gain(), rel=2e-3)
    # its midpoint is DC, so only the swing goes through the in-band gain: 0 V +- 0.2 V
    # about a 1 V midpoint gives 1 V +- 2.2 V, inside the swing
    assert findings(ac_coupled("0.8V", "1.2V"), RULE) == []


def test_the_input_window_of_an_ac_coupled_swing_keeps_its_midpoint():
    # The swing that fits about 0 V: (3.5 V less the DC error) / the in-band gain.
    finding = only(ac_coupled("-1V", "1V"), RULE)
    half = (5.0 - HEADROOM - (VOS + IB * 10e3)) / ac_gain()  # DC gain 1: Vos + Ib Rf
    assert half == pytest.approx(0.318, abs=1e-3)
    assert f"from -{half * 1e3:.0f} mV to {half * 1e3:.0f} mV" in finding.suggestion.text


def test_a_range_without_a_band_is_read_at_dc():
    # the same source with no band is a DC level: gain 1, +-1 V, no clipping
    assert findings(ac_coupled("-1V", "1V", band=""), RULE) == []


def band_pass(r2: str, capacitance: str) -> str:
    """A multiple-feedback band-pass, R1 10k in, R2 to ground, R3 1M and two equal
    capacitors, on a near-ideal op-amp whose output stays 1.5 V inside +-5 V rails."""
    opamp = params(open_loop_gain=1e9, gbw=1e12, output_headroom_high=1.5,
                   output_headroom_low=1.5)
    return f"""
    (version 1)
    (stage mfb (ground gnd) (supply vcc 5V) (supply vee -5V)
      (opamp U1 {opamp} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
      (resistor R1 in a 10k) (resistor R2 a gnd {r2})
      (capacitor C1 a fb {capacitance}) (capacitor C2 a out {capacitance})
      (resistor R3 fb out 1M)
      (source in (amplitude 100mV) (band 100Hz 10kHz))
      (load out (resistance 100k)))
    """


def test_a_narrow_resonance_between_grid_points_is_found():
    # With C1 = C2 = 10n and R2 100: f0 = 1/(2 pi C sqrt(R3 (R1 || R2))) = 1.6 kHz,
    # Q = sqrt(R3/(R1 || R2))/2 = 50, and a peak gain of R3/(2 R1) = 50 (multiple-feedback
    # band-pass with equal capacitors, from memory). 100 mV in the band swings the output
    # +-5 V against the usable +-3.5 V; the peak is 2 % wide, narrower than the grid's
    # spacing.
    finding = only(band_pass("100", "10n"), RULE)
    assert finding.severity is Severity.ERROR
    assert finding.measured == pytest.approx(0.1 * 1e6 / (2 * 10e3), rel=0.005)


def test_a_resonance_of_q_500_is_followed_down_to_its_peak():
    # R2 1.0001 and C1 = C2 = 100n: R1 || R2 = 0.9999 Ohm, so Q = sqrt(1M / 0.9999)/2 =
    # 500 and f0 = 1/(2 pi 100n sqrt(1M 0.9999)) = 1.59 kHz (the same formulas), the same
    # peak gain of 50: 0.2 % wide, and a search of two fixed levels straddled it and read
    # no clipping at all.
    finding = only(band_pass("1.0001", "100n"), RULE)
    assert finding.severity is Severity.ERROR
    assert finding.measured == pytest.approx(0.1 * 1e6 / (2 * 10e3), rel=0.002)


def test_a_capacitive_load_is_no_heavier_load_for_the_headroom():
    # A follower into 100k || 1 nF swung at up to 100 kHz: the capacitor's current is
    # zero at the voltage's peak (i = C dv/dt, a quarter cycle apart), so at the peak the
    # output drives 100 kOhm, above the part's 10 kOhm headroom-load: no note.
    text = """
    (version 1)
    (stage follow-cap (ground gnd) (supply vcc 15V) (supply vee -15V)
      (opamp U1 (part jfet-input) (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
      (source in (amplitude 5V) (band 10Hz 100kHz))
      (load out (resistance 100k) (capacitance 1n)))
    """
    assert not [f for f in findings(text, RULE) if f.details.get("unchecked")]
    # (the part's own input network takes a little in-phase current too: within 1 %)
    assert figures_of(text).output_loads["U1"] == pytest.approx(100e3, rel=0.01)
