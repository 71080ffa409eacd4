"""The noise rule: integrated output noise over the source's band against the stage's
noise requirement.

Expected values, derived independently:

* thermal noise density sqrt(4kTR) (Johnson-Nyquist) with k from scipy.constants
  (CODATA): 4.07 nV/rtHz for 1 kOhm at 300 K, 4.00 nV/rtHz at 290 K;
* white noise over a band B integrates to density * sqrt(B): 1 kOhm over 10 kHz is
  about 0.4 uV rms (common practice);
* a single-pole low-pass passes white noise as if through a brick wall at its
  equivalent noise bandwidth, 1.57 x f(-3 dB) (T. Sobering, "Equivalent Noise
  Bandwidth", Technote 1);
* in an inverting stage the input resistor's noise reaches the output times Rf/R1 and
  the feedback resistor's noise at unity (R. Mancini (ed.), Op Amps for Everyone, 2nd ed., noise
  chapter); uncorrelated sources add in power.

The op-amps here are given noise densities of 0 unless a test is about them, so the
resistors' noise is all there is.
"""

from __future__ import annotations

import math
import re

import pytest
import scipy.constants
from rule_helpers import findings, line_of, only, params

from checker.analysis.noise import thermal_density
from checker.findings import Severity

RULE = "noise"
K = scipy.constants.k  # Boltzmann constant, J/K (CODATA)
QUIET = params(open_loop_gain=1e6, gbw=100e6, voltage_noise=0.0, current_noise=0.0)


def thermal(ohms: float, kelvin: float = 300.0) -> float:
    """sqrt(4kTR), V/rtHz (Johnson-Nyquist)."""
    return math.sqrt(4 * K * kelvin * ohms)


def test_thermal_density_the_rule_uses_matches_the_reference_values():
    # 4.07 nV/rtHz for 1 kOhm at 300 K and 4.00 at 290 K, with CODATA k.
    assert thermal(1e3) == pytest.approx(4.07e-9, abs=0.005e-9)
    assert thermal(1e3, 290.0) == pytest.approx(4.00e-9, abs=0.005e-9)
    assert thermal_density(1e3, 300.0) == pytest.approx(thermal(1e3), rel=1e-9)
    assert thermal_density(1e3, 290.0) == pytest.approx(thermal(1e3, 290.0), rel=1e-9)


def series_follower(require: str, ohms: str = "1k", opamp: str = QUIET,
                    band: str = "(band 0Hz 10kHz)", supply: str = "(supply vcc 15V) (supply vee -15V)",
                    rails: tuple[str, str] = ("vcc", "vee")) -> str:
    """A follower behind a series resistor R1 (line 4) from an ideal source."""
    return f"""
        (version 1)
        (stage probe-buffer
          (ground gnd) {supply}
          (resistor R1 src in {ohms})
          (opamp U1 {opamp} (in+ in) (in- out) (out out) (v+ {rails[0]}) (v- {rails[1]}))
          (source src (range -1V 1V) {band})
          (load out (resistance 100k))
          {require})
        """


def test_noise_under_the_requirement_passes():
    # 0.407 uV against 0.5 uV.
    assert findings(series_follower("(require (noise 0.5uV))"), RULE) == []


def test_no_requirement_no_check():
    assert findings(series_follower(""), RULE) == []


def test_one_kilohm_over_ten_kilohertz_is_about_four_tenths_of_a_microvolt():
    text = series_follower("(require (noise 0.3uV))")
    finding = only(text, RULE)
    expected = thermal(1e3) * math.sqrt(10e3)  # 0.407 uV (common practice: ~0.4 uV)
    assert expected == pytest.approx(0.4e-6, rel=0.02)
    assert finding.rule == RULE
    assert finding.severity is Severity.ERROR
    assert finding.elements == ("R1",)
    assert finding.line == 4 == line_of(text, "(resistor R1")
    assert finding.unit == "V"
    assert finding.measured == pytest.approx(expected, rel=0.01)
    assert finding.limit == pytest.approx(0.3e-6)
    assert finding.details["largest"] == "R1 thermal"


def test_temperature_setting_changes_the_thermal_noise():
    finding = only(series_follower("(require (noise 0.3uV))"), RULE,
                   settings={"temperature_k": 290.0})
    assert finding.measured == pytest.approx(thermal(1e3, 290.0) * math.sqrt(10e3), rel=0.01)


def test_smaller_resistor_is_suggested_and_clears_the_finding():
    finding = only(series_follower("(require (noise 0.3uV))"), RULE)
    # The noise goes as sqrt(R): 1 kOhm x (0.3/0.407)^2 = 543 Ohm at most; 510 Ohm is
    # the E24 value below (IEC 60063).
    most = 1e3 * (0.3e-6 / (thermal(1e3) * math.sqrt(10e3))) ** 2
    assert most == pytest.approx(543, rel=0.01)
    assert finding.suggestion.value == pytest.approx(510)
    assert finding.suggestion.element == "R1"
    fixed = series_follower("(require (noise 0.3uV))", ohms=repr(finding.suggestion.value))
    assert findings(fixed, RULE) == []


def rc_filtered(require: str) -> str:
    """R1 1 kOhm and C1 100 nF low-pass into a follower; band to 1000x the corner."""
    return f"""
        (version 1)
        (stage filtered-buffer
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (resistor R1 src in 1k)
          (capacitor C1 in gnd 100n)
          (opamp U1 {QUIET} (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
          (source src (range -1V 1V) (band 0Hz 1.6MHz))
          (load out (resistance 100k))
          {require})
        """


def test_single_pole_noise_integrates_to_the_equivalent_noise_bandwidth():
    finding = only(rc_filtered("(require (noise 0.1uV))"), RULE)
    corner = 1 / (2 * math.pi * 1e3 * 100e-9)  # f(-3 dB) = 1.59 kHz
    expected = thermal(1e3) * math.sqrt(1.57 * corner)  # Sobering, Technote 1: 0.2035 uV
    assert finding.measured == pytest.approx(expected, rel=0.01)


def test_noise_set_by_a_capacitor_is_not_cured_by_a_smaller_resistor():
    # Far above the corner the noise is sqrt(kT/C) whatever R is; the rule says so.
    finding = only(rc_filtered("(require (noise 0.1uV))"), RULE)
    assert finding.measured == pytest.approx(math.sqrt(K * 300 / 100e-9), rel=0.01)
    assert finding.suggestion.value is None
    assert "kT/C" in finding.suggestion.text


def inverting(require: str, r1: str = "1k", r2: str = "10k") -> str:
    """Inverting gain -10; R1 on line 4, R2 on line 5."""
    return f"""
        (version 1)
        (stage geophone-gain
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (resistor R1 src fb {r1} (tolerance 1%))
          (resistor R2 fb out {r2} (tolerance 1%))
          (opamp U1 {QUIET} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (source src (range -0.1V 0.1V) (band 0Hz 10kHz))
          (load out (resistance 100k))
          {require})
        """


def test_inverting_stage_input_resistor_is_the_largest_contributor():
    text = inverting("(require (noise 3uV))")
    finding = only(text, RULE)
    from_r1 = thermal(1e3) * 10  # R1's noise times Rf/R1 (Mancini, noise chapter)
    from_r2 = thermal(10e3)  # R2's noise at unity
    expected = math.sqrt(from_r1 ** 2 + from_r2 ** 2) * math.sqrt(10e3)  # 4.27 uV
    assert finding.measured == pytest.approx(expected, rel=0.01)
    assert finding.elements == ("R1",)
    assert finding.line == 4 == line_of(text, "(resistor R1")
    assert finding.details["contributions"]["R1 thermal"] == pytest.approx(
        from_r1 * math.sqrt(10e3), rel=0.01)


def test_inverting_stage_fix_scales_the_network_and_keeps_the_gain():
    finding = only(inverting("(require (noise 3uV))"), RULE)
    # The whole network scaled by one factor keeps -R2/R1 and lowers the noise as its
    # square root: (3/4.27)^2 = 0.49 at most.
    r1 = finding.suggestion.value
    assert r1 <= 1e3 * (3e-6 / 4.27e-6) ** 2
    text = finding.suggestion.text
    r2 = 10 * r1
    assert f"R2 {r2 / 1e3:.3g} kΩ" in text
    assert findings(inverting("(require (noise 3uV))", repr(r1), repr(r2)), RULE) == []


NOISY = params(open_loop_gain=1e5, gbw=1e6, voltage_noise="60nV/rtHz",
               current_noise="2fA/rtHz")


def test_opamp_voltage_noise_suggests_a_quieter_built_in_class():
    text = series_follower("(require (noise 3uV))", ohms="10", opamp=NOISY,
                           supply="(supply vcc 5V)", rails=("vcc", "gnd"))
    finding = only(text, RULE)
    # 60 nV/rtHz over 10 kHz: 6 uV (white noise times sqrt(B), common practice).
    assert finding.measured == pytest.approx(60e-9 * math.sqrt(10e3), rel=0.01)
    assert finding.elements == ("U1",)
    assert finding.line == line_of(text, "(opamp U1")
    # At most 60 nV x 3/6 = 30 nV/rtHz; of the built-in classes (generic.parts) the one
    # that runs from 5 V with the least change is cmos-rrio (12 nV/rtHz).
    assert finding.suggestion.value == pytest.approx(30e-9, rel=0.01)
    assert "cmos-rrio has" in finding.suggestion.text
    fixed = series_follower("(require (noise 3uV))", ohms="10", opamp="(part cmos-rrio)",
                            supply="(supply vcc 5V)", rails=("vcc", "gnd"))
    assert findings(fixed, RULE) == []


def test_source_impedance_noise_can_only_be_narrowed():
    text = f"""
        (version 1)
        (stage probe-buffer
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {QUIET} (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
          (source in (label "reed probe") (range -1V 1V) (band 0Hz 10kHz) (impedance 100k))
          (load out (resistance 100k))
          (require (noise 2uV)))
        """
    finding = only(text, RULE)
    expected = thermal(100e3) * math.sqrt(10e3)  # 4.07 uV
    assert finding.measured == pytest.approx(expected, rel=0.01)
    assert finding.elements == ("reed probe",)
    assert finding.line == line_of(text, "(source in")
    # Noise power goes with the band: 10 kHz x (2/4.07)^2 = 2.4 kHz.
    assert finding.suggestion.value == pytest.approx(10e3 * (2e-6 / expected) ** 2, rel=0.01)


def test_part_without_noise_densities_cannot_be_counted():
    opamp = params(open_loop_gain=1e6, gbw=100e6)
    text = series_follower("(require (noise 0.5uV))", opamp=opamp)
    finding = only(text, RULE)
    assert finding.severity is Severity.INFO
    assert finding.message.startswith("could not check the noise of U1")
    assert finding.line == line_of(text, "(opamp U1")


def test_total_that_already_fails_is_reported_even_with_a_part_not_counted():
    opamp = params(open_loop_gain=1e6, gbw=100e6)
    found = findings(series_follower("(require (noise 0.3uV))", opamp=opamp), RULE)
    assert sorted(f.severity for f in found) == [Severity.INFO, Severity.ERROR]
    error = next(f for f in found if f.severity is Severity.ERROR)
    assert "not counted" in error.message


def test_without_a_band_the_noise_cannot_be_checked():
    text = series_follower("(require (noise 0.3uV))", band="")
    finding = only(text, RULE)
    assert finding.severity is Severity.INFO
    assert finding.message.startswith("could not check the output noise")


def test_a_smaller_network_that_loses_the_gain_against_the_source_says_so():
    # R1 10k, R2 1M behind a 1 kOhm source: the gain is -1M/11k = -90.9. At the network's
    # half size that meets the noise (R1 5.36k, R2 536k, E96), the source's 1 kOhm does not
    # scale with it: -536k/6.36k = -84.3, 7.3 % off, beyond the default +-5 %. The rule
    # must name the gain as what stops it, not a capacitor's kT/C. (The fish-counter
    # sample; the part's own 9 nV/rtHz makes the 40 uV budget fail.)
    text = """
        (version 1)
        (stage electrode (supply vcc 12V) (supply vee -12V) (ground gnd)
          (opamp U1 (part precision-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 10k (tolerance 1%))
          (resistor R2 fb out 1M (tolerance 1%))
          (source in (amplitude 1mV) (band 10Hz 1kHz) (impedance 1k))
          (require (noise 40uV)))
        """
    finding = only(text, RULE)
    suggestion = finding.suggestion.text
    assert "kT/C" not in suggestion
    assert "moves a signal gain by" in suggestion
    moved = float(suggestion.split("moves a signal gain by ")[1].split(" %")[0])
    r1, r2 = (float(v) * 1e3 for v in
              re.search(r"R1 ([\d.]+) kΩ, R2 ([\d.]+) kΩ", suggestion).groups())
    assert moved == pytest.approx(abs((r2 / (r1 + 1e3)) / (1e6 / 11e3) - 1) * 100, abs=0.06)
    assert moved > 5.0


def tank(ohms: str) -> str:
    """A parallel RLC tank (10 mH, 10 nF: f0 = 15.9 kHz) fed by a current sensor and
    read by a quiet follower; Q = R sqrt(C/L), so 50k gives Q 50 and 500k Q 500."""
    return f"""
    (version 1)
    (stage tank (ground gnd) (supply vcc 15V) (supply vee -15V)
      (opamp U1 {QUIET} (in+ tank) (in- out) (out out) (v+ vcc) (v- vee))
      (resistor R1 tank gnd {ohms}) (inductor L1 tank gnd 10m) (capacitor C1 tank gnd 10n)
      (source tank (kind current) (range 0A 1uA) (band 1.6kHz 160kHz))
      (require (noise 500nV)))
    """


@pytest.mark.parametrize("ohms", ["50k", "500k"])
def test_a_resonant_tank_integrates_to_kt_over_c_however_sharp(ohms):
    # The thermal noise across any capacitor in equilibrium is kT/C in total, whatever
    # the resistance and the inductance (equipartition: the tank's noise concentrates
    # at its resonance, R sets only how narrowly; e.g. C. Kittel, Elementary Statistical
    # Physics, from memory). A band a decade either side of f0 holds all but about
    # 1e-4 of it. At Q 500 the resonance is 0.2 % wide: between any log grid's points,
    # where it read 62 % low before the noise grid took the stage's natural
    # frequencies.
    finding = only(tank(ohms), RULE)
    kt_over_c = math.sqrt(scipy.constants.k * 300.0 / 10e-9)  # 0.643 uV rms
    assert finding.measured == pytest.approx(kt_over_c, rel=0.01)
