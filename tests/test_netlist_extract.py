"""Stage extraction: how a board is cut into stages, what becomes a source or a load,
what is reported as not analysed, and located problems."""

from __future__ import annotations

import pytest
from netlist_helpers import IDEAL_MAP_HEADER, extract_text, opamp_refs

from checker.io.positions import InputErrors

RAILS = "V1 vcc 0 DC 12\nV2 vee 0 DC -12\n"


def test_a_gain_stage_feeding_a_filter_is_two_stages_joined_by_feeds():
    stages, _ = extract_text(f"""* gain then Sallen-Key
{RAILS}R1 in fb 10k
R2 fb out1 100k
XU1 0 fb vcc vee out1 OA
R3 out1 n1 10k
R4 n1 n2 10k
C2 n1 out2 22n
C3 n2 0 10n
XU2 n2 out2 vcc vee out2 OA
""")
    assert opamp_refs(stages) == {"u1": ["U1"], "u2": ["U2"]}
    first, second = stages["u1"], stages["u2"]
    assert [(ld.net, ld.feeds_stage, ld.feeds_net) for ld in first.loads] == [("out1", "u2", "out1")]
    assert [s.net for s in second.sources] == ["out1"]
    # the passives between the two outputs belong to the stage that reads them
    assert {p.ref for p in first.passives} == {"R1", "R2"}
    assert {p.ref for p in second.passives} == {"R3", "R4", "C2", "C3"}
    assert second.output_net == "out2"


def test_the_fed_stage_gets_the_upstream_output_range_from_its_analysis():
    stages, extraction = extract_text(f"""* gain then follower
{RAILS}R1 in fb 10k
R2 fb out1 20k
XU1 0 fb vcc vee out1 OA
XU2 out1 out2 vcc vee out2 OA
R9 out2 0 10k
""", IDEAL_MAP_HEADER + "(at-net in (source (range -1V 1V)))\n")
    source = stages["u2"].sources[0]
    # inverting gain -R2/R1 = -2 (any op-amp text; e.g. Sedra and Smith, Microelectronic
    # Circuits, op-amp chapter) over -1 V..1 V, within the +-12 V rails, with a gain of
    # 1e6 the gain is -2/(1 + 3/1e6)
    gain = -2 / (1 + 3e-6)
    assert (source.low, source.high) == pytest.approx((gain * 1, gain * -1), rel=1e-9)
    assert extraction.tree["stages"][1]["sources"][0]["range"] == pytest.approx(
        [gain, -gain], rel=1e-9)


def test_a_three_op_amp_instrumentation_amplifier_is_one_stage():
    stages, _ = extract_text(f"""* in-amp
{RAILS}XU1 inp n1 vcc vee o1 OA
XU2 inn n2 vcc vee o2 OA
R1 o1 n1 10k
RG n1 n2 2k
R2 n2 o2 10k
R3 o1 d1 10k
R4 d1 out 10k
R5 o2 d2 10k
R6 d2 0 10k
XU3 d2 d1 vcc vee out OA
""")
    assert opamp_refs(stages) == {"u1-u2-u3": ["U1", "U2", "U3"]}
    stage = stages["u1-u2-u3"]
    assert sorted(s.net for s in stage.sources) == ["inn", "inp"]
    assert stage.output_net == "out"


def test_a_composite_amplifier_with_an_op_amp_in_the_loop_is_one_stage():
    stages, _ = extract_text(f"""* composite: U2 integrates U1's error
{RAILS}R1 in fb 1k
R2 fb out 10k
XU1 0 fb vcc vee out OA
R3 out m 10k
C1 m c2 1n
XU2 0 m vcc vee c2 OA
R4 c2 fb 100k
""")
    assert opamp_refs(stages) == {"u1-u2": ["U1", "U2"]}


def test_a_two_integrator_loop_filter_is_one_stage():
    stages, _ = extract_text(f"""* two-integrator loop
{RAILS}R1 in s1 10k
C1 s1 o1 10n
R2 s1 o1 100k
XU1 0 s1 vcc vee o1 OA
R3 o1 s2 10k
C2 s2 o2 10n
XU2 0 s2 vcc vee o2 OA
R4 o2 s1 10k
""")
    assert opamp_refs(stages) == {"u1-u2": ["U1", "U2"]}


def test_op_amps_reading_the_same_network_are_one_stage():
    stages, _ = extract_text(f"""* two buffers on one divider
{RAILS}R1 vcc tap 10k
R2 tap 0 10k
XU1 tap o1 vcc vee o1 OA
XU2 tap o2 vcc vee o2 OA
""")
    assert opamp_refs(stages) == {"u1-u2": ["U1", "U2"]}


def test_the_map_can_join_op_amps_and_name_the_stage():
    netlist = f"""* two-op-amp in-amp
{RAILS}XU1 inp n1 vcc vee o1 OA
R1 n1 0 10k
R2 n1 o1 10k
R3 o1 n2 10k
R4 n2 out 10k
XU2 inn n2 vcc vee out OA
"""
    stages, _ = extract_text(netlist)
    assert opamp_refs(stages) == {"u1": ["U1"], "u2": ["U2"]}
    stages, _ = extract_text(netlist, IDEAL_MAP_HEADER + "(stage-of U1 (name ina) (join U2))\n")
    assert opamp_refs(stages) == {"ina": ["U1", "U2"]}


def test_a_net_with_one_connection_is_an_assumed_source_or_load():
    stages, extraction = extract_text(f"""* off-board in and out
{RAILS}R1 in fb 10k
R2 fb out 100k
XU1 0 fb vcc vee out OA
R9 out cable 47
""")
    stage = stages["u1"]
    assert [s.net for s in stage.sources] == ["in"]
    assert "assumed" in stage.sources[0].label
    assert stage.sources[0].low is None and stage.sources[0].impedance_ohm is None
    assert stage.output_net == "cable"
    assumed = [n for n in stage.reader_notes if n.kind == "assumed"]
    assert [(n.origin.line, n.elements) for n in assumed] == [
        (7, ("load cable",)), (4, (stage.sources[0].name,))]


def test_connector_instances_mark_their_nets_as_leaving_the_board():
    stages, _ = extract_text(f"""* connectors
{RAILS}XJ1 in 0 CONN
XJ2 out 0 CONN
R1 in 0 100k
XU1 in out vcc vee out OA
""", IDEAL_MAP_HEADER + "(connector CONN)\n(at-net out (load (resistance 2k)))\n")
    stage = stages["u1"]
    assert [s.net for s in stage.sources] == ["in"]
    assert [(ld.net, ld.resistance_ohm) for ld in stage.loads] == [("out", 2000.0)]


def test_declared_sources_loads_rails_and_requirements_come_from_the_map():
    stages, _ = extract_text("""* declared
V1 vcc 0 5
R1 in fb 10k
R2 fb out 47k
XU1 mid fb vcc 0 out OA
""", IDEAL_MAP_HEADER + """(rail mid 2.5V)
(at-net in (source (label "sensor") (range 2V 3V) (impedance 220)))
(at-net out (load (resistance 10k) (capacitance 100p)))
(stage-of U1 (name hum) (require (gain -4.7)))
""")
    stage = stages["hum"]
    assert stage.rail_voltages == {"vcc": 5.0, "mid": 2.5, "gnd": 0.0}
    source = stage.sources[0]
    assert (source.label, source.low, source.high, source.impedance_ohm) == \
        ("sensor", 2.0, 3.0, 220.0)
    assert (stage.loads[0].resistance_ohm, stage.loads[0].capacitance_f) == (1e4, 1e-10)
    assert stage.require.gain == -4.7
    assert not [n for n in stage.reader_notes if n.kind == "assumed"]


def test_signal_sources_of_the_netlist_become_stage_sources():
    stages, _ = extract_text(f"""* stimuli
{RAILS}Vs in 0 DC 0.5 AC 1 SIN(0.5 0.2 1k)
Ipd 0 pd 100n
R1 in fb 10k
R2 fb out 10k
R3 pd fb 1meg
XU1 0 fb vcc vee out OA
""")
    sources = {s.net: s for s in stages["u1"].sources}
    # SIN(VO VA FREQ): offset VO, amplitude VA (SPICE3 user's manual, section on
    # independent sources); I n+ n- drives the current from n+ through the source to n-
    assert (sources["in"].low, sources["in"].high, sources["in"].amplitude) == \
        pytest.approx((0.3, 0.7, 0.2))
    assert sources["pd"].kind == "current"
    assert (sources["pd"].low, sources["pd"].high) == pytest.approx((100e-9, 100e-9))


def test_rails_stack_on_other_rails_and_negative_sources_read_right():
    stages, _ = extract_text("""* stacked
V1 0 vee 12
V2 vcc vee 24
R1 in fb 10k
R2 fb out 10k
XU1 0 fb vcc vee out OA
""")
    assert stages["u1"].rail_voltages == {"vcc": 12.0, "vee": -12.0, "gnd": 0.0}


def test_what_is_not_understood_is_a_note_and_the_rest_goes_on():
    stages, _ = extract_text(f"""* odds and ends
{RAILS}R1 in fb 10k
R2 fb out 100k tc1=1m m=2
XU1 0 fb vcc vee out OA
D1 fb 0 DCLAMP
XU9 out x y OTHER_PART
E1 e 0 fb 0 2
.include parts.lib
.param rval=1k
.tran 1u 1m
""")
    stage = stages["u1"]
    notes = [(n.origin.line, n.message.split(";")[0]) for n in stage.reader_notes
             if n.kind == "not-analysed"]
    assert notes == [
        (7, "not analysed: D1 (a diode) on fb, 0"),
        (8, "not analysed: XU9 calls subcircuit OTHER_PART, which the netlist map does"
            " not name"),
        (9, "not analysed: E1 (a voltage-controlled voltage source) on e, 0, fb, 0"),
        (10, "not analysed: .include parts.lib (included files are not read)"),
        (11, "not analysed: .param rval = 1k (parameters are not evaluated)"),
    ]
    # m=2: two in parallel, 50 kOhm; tc1 changes nothing at one temperature
    assert stage.element("R2").value == 50e3


def test_a_parameter_that_changes_a_value_is_reported():
    stages, _ = extract_text(f"""* scale
{RAILS}R1 in fb 10k scale=2
R2 fb out 100k
XU1 0 fb vcc vee out OA
""")
    assert any("parameter scale of R1" in n.message for n in stages["u1"].reader_notes)


def test_a_title_line_that_looks_like_an_element_is_reported():
    stages, _ = extract_text(f"""R0 in fb 1k
{RAILS}R1 in fb 10k
R2 fb out 100k
XU1 0 fb vcc vee out OA
""")
    assert any(n.origin.line == 1 and "title" in n.message for n in stages["u1"].reader_notes)


def test_names_are_case_insensitive_and_ground_aliases_come_from_the_map():
    stages, _ = extract_text("""* cases
V1 VCC 0 5
r1 IN Fb 10k
R2 fb OUT 10k
xu1 AGND FB vcc agnd out OA
""", IDEAL_MAP_HEADER.replace("OA", "oa") + "(ground AGND)\n")
    stage = stages["u1"]
    assert stage.opamps[0].in_pos == "gnd" and stage.opamps[0].in_neg == "Fb"
    assert {p.ref for p in stage.passives} == {"r1", "R2"}


@pytest.mark.parametrize("netlist, map_text, line, column, words", [
    ("* t\nV1 vcc 0 5\nR1 in fb 4k7\nXU1 0 fb vcc 0 out OA\nR2 fb out 1k\n",
     IDEAL_MAP_HEADER, 3, 10, "no codes like 4k7"),
    ("* t\nV1 vcc 0 5\nR1 in fb 1k\nXU1 0 fb vdd 0 fb OA\n", IDEAL_MAP_HEADER, 4, 1,
     "(rail vdd VOLTS)"),
    ("* t\nV1 vcc 0 5\nXU1 0 fb vcc 0 OA\n", IDEAL_MAP_HEADER, 3, 1,
     "has 4 nodes, but the netlist map's (opamp-model OA) lists 5 pins"),
    ("* t\nV1 vcc 0 5\nR1 a b 1k\nr1 b c 1k\n", IDEAL_MAP_HEADER, 4, 1, "appears twice"),
    ("* t\nV1 vcc 0 5\nV2 vcc 0 6\n", IDEAL_MAP_HEADER, 3, 1, "already at 5 V"),
    ("* t\nV1 vcc 0 5\nR1 a b 1k\nX1 a b c d e OTHER\n", IDEAL_MAP_HEADER, 1, 1,
     "names none of the subcircuits this netlist calls (OTHER (line 4))"),
    ("* t\nR1 a b 1k\n", None, 1, 1, "no netlist map"),
    ("* t\nR1 a b 0\n", IDEAL_MAP_HEADER, 2, 8, "must be above zero"),
])
def test_problems_are_located_at_the_netlist_line(netlist, map_text, line, column, words):
    with pytest.raises(InputErrors) as errors:
        extract_text(netlist, map_text)
    problem = errors.value.problems[0]
    assert (problem.path, problem.line, problem.column) == ("board.cir", line, column)
    assert words in problem.message
