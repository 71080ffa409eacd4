"""The stage model: frozen dataclasses, every number an SI float, every part resolved.

Built by checker.build from a validated plain tree; read by the analysis core and the
rules. Nothing here knows about syntax or files beyond the Origin of each element.
"""

from __future__ import annotations

from dataclasses import field, fields
from checker.record import record


@record(frozen=True)
class Origin:
    """Where an element was written: file path, 1-based line and column."""

    path: str
    line: int
    column: int

    def __str__(self) -> str:
        return f"{self.path}:{self.line}:{self.column}"


@record(frozen=True)
class OpAmpPart:
    """An op-amp's parameters; None where the part does not state one.

    Common-mode input range and output headroom are signed offsets from the rails:
    ``input_range_low_v`` is the lowest input relative to V- (-0.1 means 0.1 V below V-),
    ``input_range_high_v`` the highest relative to V+ (-1.5 means 1.5 V below V+);
    ``output_headroom_high_v`` is how far below V+ the output stops (0.1 means V+ - 0.1).
    """

    name: str
    family: str | None = None
    note: str | None = None
    open_loop_gain: float | None = None
    gbw_hz: float | None = None
    second_pole_hz: float | None = None
    slew_rate_v_per_s: float | None = None
    offset_voltage_v: float | None = None
    bias_current_a: float | None = None
    offset_current_a: float | None = None
    input_capacitance_cm_f: float | None = None
    input_capacitance_diff_f: float | None = None
    input_resistance_ohm: float | None = None
    output_resistance_ohm: float | None = None
    output_headroom_high_v: float | None = None
    output_headroom_low_v: float | None = None
    headroom_load_ohm: float | None = None
    output_current_a: float | None = None
    input_range_low_v: float | None = None
    input_range_high_v: float | None = None
    supply_min_v: float | None = None
    supply_max_v: float | None = None
    supply_abs_max_v: float | None = None
    voltage_noise_v_per_rthz: float | None = None
    current_noise_a_per_rthz: float | None = None
    min_stable_gain: float | None = None
    builtin: bool = False
    origin: Origin | None = None

    def missing(self, *attributes: str) -> list[str]:
        """The names among ``attributes`` that this part leaves as None."""
        return [name for name in attributes if getattr(self, name) is None]


# Stage-format keyword -> OpAmpPart attribute.
PART_ATTRIBUTES: dict[str, str] = {
    "open-loop-gain": "open_loop_gain",
    "gbw": "gbw_hz",
    "second-pole": "second_pole_hz",
    "slew-rate": "slew_rate_v_per_s",
    "offset-voltage": "offset_voltage_v",
    "bias-current": "bias_current_a",
    "offset-current": "offset_current_a",
    "input-capacitance-cm": "input_capacitance_cm_f",
    "input-capacitance-diff": "input_capacitance_diff_f",
    "input-resistance": "input_resistance_ohm",
    "output-resistance": "output_resistance_ohm",
    "output-headroom-high": "output_headroom_high_v",
    "output-headroom-low": "output_headroom_low_v",
    "headroom-load": "headroom_load_ohm",
    "output-current": "output_current_a",
    "input-range-low": "input_range_low_v",
    "input-range-high": "input_range_high_v",
    "supply-min": "supply_min_v",
    "supply-max": "supply_max_v",
    "supply-abs-max": "supply_abs_max_v",
    "voltage-noise": "voltage_noise_v_per_rthz",
    "current-noise": "current_noise_a_per_rthz",
    "min-stable-gain": "min_stable_gain",
}
assert set(PART_ATTRIBUTES.values()) <= {f.name for f in fields(OpAmpPart)}


@record(frozen=True)
class OpAmp:
    ref: str
    part: OpAmpPart
    in_pos: str
    in_neg: str
    out: str
    v_pos: str
    v_neg: str
    origin: Origin

    @property
    def pins(self) -> dict[str, str]:
        return {"in+": self.in_pos, "in-": self.in_neg, "out": self.out,
                "v+": self.v_pos, "v-": self.v_neg}


@record(frozen=True)
class Passive:
    """A resistor, capacitor or inductor between ``net_a`` and ``net_b``."""

    ref: str
    kind: str  # "resistor" | "capacitor" | "inductor"
    net_a: str
    net_b: str
    value: float  # ohms, farads or henries
    origin: Origin
    tolerance: float | None = None  # fraction: 0.01 for 1 %
    power_rating_w: float | None = None

    @property
    def nets(self) -> tuple[str, str]:
        return (self.net_a, self.net_b)

    def other(self, net: str) -> str:
        return self.net_b if net == self.net_a else self.net_a


@record(frozen=True)
class Supply:
    net: str
    voltage_v: float
    origin: Origin
    mains: str | None = None  # "isolated" | "not-isolated": declared derived from the mains
    low_v: float | None = None  # (range LOW HIGH): the lowest and highest voltage it takes
    high_v: float | None = None

    @property
    def ranged(self) -> bool:
        return self.low_v is not None and self.high_v is not None


@record(frozen=True)
class Source:
    """A signal source at ``net``: a voltage behind a series impedance, or a current
    with a shunt impedance and capacitance (a sensor such as a photodiode).

    ``low``/``high`` are the extremes of the source's value (volts or amperes), None
    when the file gives neither a range nor an amplitude.
    """

    net: str
    kind: str  # "voltage" | "current"
    origin: Origin
    label: str | None = None
    low: float | None = None
    high: float | None = None
    amplitude: float | None = None  # peak AC amplitude, when given as one
    band_low_hz: float | None = None
    band_high_hz: float | None = None
    impedance_ohm: float | None = None  # series (voltage) or shunt (current); None: ideal
    capacitance_f: float | None = None  # shunt, current sources only

    @property
    def name(self) -> str:
        return self.label or f"source at {self.net}"


@record(frozen=True)
class Load:
    net: str
    origin: Origin
    resistance_ohm: float | None = None
    capacitance_f: float | None = None
    feeds_stage: str | None = None
    feeds_net: str | None = None


@record(frozen=True)
class Requirements:
    """What the stage must achieve; None where the file states nothing. ``positions``
    gives where each stated keyword was written."""

    origin: Origin | None = None
    gain: float | None = None
    gain_tolerance: float | None = None
    input_resistance_ohm: float | None = None
    bandwidth_hz: float | None = None
    phase_margin_deg: float | None = None
    headroom_v: float | None = None
    dc_error_v: float | None = None
    noise_v: float | None = None
    cmrr: float | None = None
    positions: tuple[tuple[str, Origin], ...] = field(default=(), compare=False)

    def stated(self) -> list[str]:
        """The keywords this stage states, in the format's order."""
        return [keyword for keyword, attribute in REQUIREMENT_ATTRIBUTES.items()
                if getattr(self, attribute) is not None]

    def origin_of(self, keyword: str) -> Origin | None:
        """Where ``keyword`` was written (the require form where it is not known)."""
        return dict(self.positions).get(keyword, self.origin)


REQUIREMENT_ATTRIBUTES: dict[str, str] = {
    "gain": "gain",
    "gain-tolerance": "gain_tolerance",
    "input-resistance": "input_resistance_ohm",
    "bandwidth": "bandwidth_hz",
    "phase-margin": "phase_margin_deg",
    "headroom": "headroom_v",
    "dc-error": "dc_error_v",
    "noise": "noise_v",
    "cmrr": "cmrr",
}


@record(frozen=True)
class Waiver:
    """A rule's finding accepted in the stage file, on the stage or on one element."""

    rule: str
    reason: str | None
    origin: Origin
    element: str | None = None  # designator, source name or "load NET"; None: whole stage


@record(frozen=True)
class ReaderNote:
    """What the reader of a foreign file (a netlist) left out or assumed for a stage, for
    the rules that report it (``not-analysed``, ``boundary-assumed``)."""

    kind: str  # "not-analysed" | "assumed"
    message: str
    origin: Origin
    elements: tuple[str, ...] = ()


@record(frozen=True)
class Stage:
    name: str
    origin: Origin
    ground: str
    supplies: tuple[Supply, ...] = ()
    opamps: tuple[OpAmp, ...] = ()
    passives: tuple[Passive, ...] = ()
    sources: tuple[Source, ...] = ()
    loads: tuple[Load, ...] = ()
    require: Requirements = field(default_factory=Requirements)
    note: str | None = None
    waivers: tuple[Waiver, ...] = ()
    reader_notes: tuple[ReaderNote, ...] = ()  # set for stages extracted from a netlist
    mains: str | None = None  # "isolated" | "not-isolated": the stage declared on the mains

    @property
    def path(self) -> str:
        return self.origin.path

    @property
    def rail_voltages(self) -> dict[str, float]:
        """Every fixed-potential net (supplies and ground) and its DC voltage."""
        rails = {supply.net: supply.voltage_v for supply in self.supplies}
        rails[self.ground] = 0.0
        return rails

    @property
    def nets(self) -> list[str]:
        """Every net of the stage, sorted."""
        names = set(self.rail_voltages)
        for opamp in self.opamps:
            names.update(opamp.pins.values())
        for passive in self.passives:
            names.update(passive.nets)
        names.update(source.net for source in self.sources)
        names.update(load.net for load in self.loads)
        return sorted(names)

    @property
    def output_net(self) -> str:
        """The net the stage delivers: its first load's, else the last op-amp's output."""
        if self.loads:
            return self.loads[0].net
        return self.opamps[-1].out

    def element(self, ref: str):
        """The op-amp or passive with designator ``ref``."""
        items: tuple[OpAmp | Passive, ...] = (*self.opamps, *self.passives)
        for item in items:
            if item.ref == ref:
                return item
        raise KeyError(ref)

    def resistors(self) -> tuple[Passive, ...]:
        return tuple(p for p in self.passives if p.kind == "resistor")

    def capacitors(self) -> tuple[Passive, ...]:
        return tuple(p for p in self.passives if p.kind == "capacitor")
