"""Building the typed Stage model: SI floats, resolved parts, origins."""

import dataclasses
import json

import pytest

from checker.build import build_parts, build_stages
from checker.io.load import parse_text, read_file
from checker.io.positions import InputErrors
from checker.model import OpAmpPart, Origin
from checker.parts.library import builtin_parts, load_library

STAGE = """\
(stage inv
  (ground gnd)
  (supply vcc 15V)
  (supply vee -15V)
  (opamp U1 (part gp-bipolar) (in+ gnd) (in- sum) (out vout) (v+ vcc) (v- vee))
  (resistor R1 vin sum 4k7 (tolerance 1%) (power-rating 250mW))
  (resistor R2 sum vout 47k)
  (capacitor C1 sum vout 6p8)
  (source vin (amplitude 100mV) (offset 1V) (band 10Hz 20kHz) (impedance 50))
  (load vout (resistance 2k2) (capacitance 100n))
  (require (gain -10) (gain-tolerance 5%) (bandwidth 20kHz) (phase-margin 45deg)))
"""


def build(text: str, library=None, path: str = "mem.stage"):
    return build_stages(parse_text(text, path), builtin_parts() if library is None
                        else library)


@pytest.fixture(scope="module")
def stage():
    (only,) = build(STAGE)
    return only


def approx(value):
    return pytest.approx(value, rel=1e-12)


# -- values become SI floats -------------------------------------------------------------

def test_rkm_resistor_value_becomes_ohms(stage):
    assert stage.element("R1").value == approx(4.7e3)  # IEC 60062 RKM code: 4k7 = 4.7 kΩ


def test_rkm_capacitor_value_becomes_farads(stage):
    assert stage.element("C1").value == approx(6.8e-12)  # IEC 60062 RKM code: 6p8 = 6.8 pF


def test_plain_prefixed_resistor_value_becomes_ohms(stage):
    assert stage.element("R2").value == approx(47e3)  # SI prefix definition: k = 1e3


def test_tolerance_becomes_a_fraction(stage):
    assert stage.element("R1").tolerance == approx(0.01)  # percent: 1 % = 0.01


def test_power_rating_becomes_watts(stage):
    assert stage.element("R1").power_rating_w == approx(0.25)  # SI prefix: m = 1e-3


def test_supply_voltages_become_volts_with_their_sign(stage):
    # unit symbol only; the ground net is 0 V by definition
    assert stage.rail_voltages == {"vcc": 15.0, "vee": -15.0, "gnd": 0.0}


def test_source_amplitude_and_offset_give_its_extremes(stage):
    (source,) = stage.sources
    # 1 V offset +- 100 mV peak (SI prefix definition: m = 1e-3)
    assert (source.low, source.high) == (approx(0.9), approx(1.1))


def test_source_band_becomes_hertz(stage):
    (source,) = stage.sources
    assert (source.band_low_hz, source.band_high_hz) == (approx(10.0), approx(20e3))


def test_load_values_become_ohms_and_farads(stage):
    (load,) = stage.loads
    # IEC 60062 RKM code: 2k2 = 2.2 kΩ; SI prefix definition: n = 1e-9
    assert (load.resistance_ohm, load.capacitance_f) == (approx(2.2e3), approx(100e-9))


def test_requirements_become_si_floats(stage):
    require = stage.require
    assert require.gain == -10.0
    assert require.gain_tolerance == approx(0.05)  # percent: 5 % = 0.05
    assert require.bandwidth_hz == approx(20e3)  # SI prefix definition: k = 1e3
    assert require.phase_margin_deg == approx(45.0)  # degrees are taken as written


def test_every_number_in_the_model_is_a_float(stage):
    passive_values = [p.value for p in stage.passives]
    assert all(type(value) is float for value in passive_values)
    assert all(type(s.voltage_v) is float for s in stage.supplies)


def test_element_origin_is_its_line_and_column(stage):
    assert stage.element("R2").origin == Origin("mem.stage", 7, 3)


def test_stage_lists_all_its_nets(stage):
    assert stage.nets == ["gnd", "sum", "vcc", "vee", "vin", "vout"]


# -- parts -------------------------------------------------------------------------------

def test_opamp_part_is_resolved_from_the_builtin_library(stage):
    part = stage.element("U1").part
    assert part == builtin_parts()["gp-bipolar"]
    assert part.builtin is True


def test_params_override_one_value_of_a_library_part():
    text = STAGE.replace("(part gp-bipolar)", "(part gp-bipolar) (params (gbw 3MHz))")
    (stage,) = build(text)
    part, library_part = stage.element("U1").part, builtin_parts()["gp-bipolar"]
    assert part.gbw_hz == approx(3e6)  # SI prefix definition: M = 1e6
    assert library_part.gbw_hz != part.gbw_hz
    assert part.slew_rate_v_per_s == library_part.slew_rate_v_per_s
    assert part.name == "gp-bipolar (adjusted)"


def test_params_override_leaves_the_library_part_unchanged():
    before = builtin_parts()["gp-bipolar"]
    build(STAGE.replace("(part gp-bipolar)", "(part gp-bipolar) (params (gbw 3MHz))"))
    assert builtin_parts()["gp-bipolar"] == before


def test_params_alone_make_an_inline_part():
    text = STAGE.replace("(part gp-bipolar)", "(params (gbw 2MHz) (open-loop-gain 100dB))")
    (stage,) = build(text)
    part = stage.element("U1").part
    assert part.name == "inline"
    assert part.gbw_hz == approx(2e6)  # SI prefix definition: M = 1e6
    assert part.open_loop_gain == approx(1e5)  # decibel: 10 ** (100 / 20)
    assert part.slew_rate_v_per_s is None


def test_part_defined_in_the_file_is_used():
    text = "(part my-amp (gbw 7MHz) (slew-rate 2V/us))\n" + STAGE.replace(
        "(part gp-bipolar)", "(part my-amp)")
    (stage,) = build(text)
    part = stage.element("U1").part
    assert part.name == "my-amp"
    assert part.gbw_hz == approx(7e6)  # SI prefix definition: M = 1e6
    assert part.slew_rate_v_per_s == approx(2e6)  # 1 V/µs = 1e6 V/s (SI prefix definition)
    assert part.builtin is False


def test_part_defined_in_the_file_shadows_a_builtin_of_the_same_name():
    text = "(part gp-bipolar (gbw 7MHz))\n" + STAGE
    (stage,) = build(text)
    part = stage.element("U1").part
    assert part.gbw_hz == approx(7e6)  # SI prefix definition: M = 1e6
    assert part.origin == Origin("mem.stage", 1, 1)


def test_part_defined_twice_in_one_file_is_refused():
    text = "(part a (gbw 1MHz))\n(part a (gbw 2MHz))\n"
    with pytest.raises(InputErrors, match="part a is defined twice"):
        build_parts(parse_text(text, "twice.parts"))


def test_user_library_adds_a_part(tmp_path):
    library_file = tmp_path / "mine.parts"
    library_file.write_text("(part lab-amp (gbw 12MHz) (open-loop-gain 1M))\n")
    library = load_library([str(library_file)])
    (stage,) = build(STAGE.replace("(part gp-bipolar)", "(part lab-amp)"), library)
    part = stage.element("U1").part
    assert part.gbw_hz == approx(12e6)  # SI prefix definition: M = 1e6
    assert part.origin == Origin(str(library_file), 1, 1)


def test_user_library_keeps_the_builtin_parts(tmp_path):
    library_file = tmp_path / "mine.parts"
    library_file.write_text("(part lab-amp (gbw 12MHz))\n")
    library = load_library([str(library_file)])
    assert set(builtin_parts()) < set(library)


def test_user_library_overrides_a_builtin_part_by_name(tmp_path):
    library_file = tmp_path / "mine.parts"
    library_file.write_text("(part gp-bipolar (gbw 9MHz))\n")
    library = load_library([str(library_file)])
    assert library["gp-bipolar"].gbw_hz == approx(9e6)  # SI prefix definition: M = 1e6
    assert library["gp-bipolar"].builtin is False


def test_later_user_library_wins_over_an_earlier_one(tmp_path):
    first, second = tmp_path / "a.parts", tmp_path / "b.parts"
    first.write_text("(part x (gbw 1MHz))\n")
    second.write_text("(part x (gbw 2MHz))\n")
    library = load_library([str(first), str(second)])
    assert library["x"].gbw_hz == approx(2e6)  # SI prefix definition: M = 1e6


def test_user_library_in_json_syntax_is_read(tmp_path):
    library_file = tmp_path / "mine.parts.json"
    library_file.write_text(json.dumps({"parts": [{"name": "lab-amp", "gbw": "12MHz"}]}))
    assert load_library([str(library_file)])["lab-amp"].gbw_hz == approx(12e6)


def test_user_library_with_a_bad_value_raises_input_errors(tmp_path):
    library_file = tmp_path / "bad.parts"
    library_file.write_text("(part lab-amp\n  (gbw 12MF))\n")
    with pytest.raises(InputErrors) as raised:
        load_library([str(library_file)])
    (problem,) = raised.value.problems
    assert (problem.line, problem.column) == (2, 3)
    assert "gbw of part lab-amp" in problem.message


def test_builtin_parts_are_all_marked_builtin():
    parts = builtin_parts()
    assert parts
    assert all(part.builtin for part in parts.values())


def test_builtin_part_names_match_their_keys():
    assert all(name == part.name for name, part in builtin_parts().items())


# -- the two syntaxes build the same model -----------------------------------------------

def without_origins(value):
    """The model with every Origin replaced by None, for comparing syntaxes."""
    if isinstance(value, Origin):
        return None
    if isinstance(value, OpAmpPart) and value.builtin:
        return value
    if dataclasses.is_dataclass(value):
        return type(value)(**{f.name: without_origins(getattr(value, f.name))
                              for f in dataclasses.fields(value)})
    if isinstance(value, (tuple, list)):
        return type(value)(without_origins(item) for item in value)
    return value


def test_json_and_sexp_of_one_stage_build_the_same_model(tmp_path):
    sexp_path = tmp_path / "a.stage"
    sexp_path.write_text(STAGE)
    json_path = tmp_path / "a.stage.json"
    json_path.write_text(json.dumps(read_file(str(sexp_path)).tree))
    from_sexp = build_stages(read_file(str(sexp_path)), builtin_parts())
    from_json = build_stages(read_file(str(json_path)), builtin_parts())
    assert without_origins(from_json) == without_origins(from_sexp)
