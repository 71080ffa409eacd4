"""Build the Stage model from a validated plain tree: units, parts, references.

Knows units and parts, nothing of syntax: every node's position comes from the
ParsedFile's position index. All problems of a file are collected and raised together.
"""

from __future__ import annotations

import difflib
from collections import Counter
from dataclasses import replace
from typing import Any

from checker.io.grammar import PART_PARAMETERS, REQUIREMENTS
from checker.io.load import ParsedFile
from checker.io.positions import InputErrors, InputProblem, Path, locate
from checker.model import (PART_ATTRIBUTES, REQUIREMENT_ATTRIBUTES, Load, OpAmp, OpAmpPart,
                           Origin, Passive, Requirements, Source, Stage, Supply, Waiver)
from checker.stage_limits import MAX_PARTS, MAX_STAGES, stage_too_large
from checker.units import UnitError, check_plausible, format_si, parse_value

MAX_NET_HINTS = 20  # "did you mean" hints per stage: each costs a fuzzy search
MAX_RANGED_SUPPLIES = 3  # supplies with a range per stage: 2^n combinations of ends are checked

# Passive values must be positive; these kinds of parameter must not be negative.
_NON_NEGATIVE = {"resistance", "capacitance", "inductance", "frequency", "current",
                 "slew-rate", "voltage-noise", "current-noise", "power", "percentage"}
# Requirements that are magnitudes (a limit on noise, error, margin): never negative.
# Part parameters of kinds that may be signed elsewhere, each with why it cannot be here.
_NON_NEGATIVE_PART = {
    "output-headroom-high": "an output cannot swing beyond its rail",
    "output-headroom-low": "an output cannot swing beyond its rail",
}
_NON_NEGATIVE_REQUIREMENTS = {"noise", "dc-error", "headroom", "phase-margin"}
_PASSIVE_KIND = {"resistors": ("resistor", "resistance"),
                 "capacitors": ("capacitor", "capacitance"),
                 "inductors": ("inductor", "inductance")}


class _Builder:
    """Collects problems while converting one file's tree."""

    def __init__(self, parsed: ParsedFile):
        self.parsed = parsed
        self.problems: list[InputProblem] = []

    def origin(self, path: Path) -> Origin:
        pos = locate(self.parsed.positions, path)
        return Origin(self.parsed.path, pos.line, pos.column)

    def fail(self, path: Path, message: str, element: str | None = None) -> None:
        pos = locate(self.parsed.positions, path)
        self.problems.append(InputProblem(self.parsed.path, pos.line, pos.column, message,
                                          element))

    def value(self, node: dict, key: str, kind: str, path: Path, where: str,
              positive: bool = False, signed: bool = False) -> float | None:
        if key not in node:
            return None
        try:
            number = parse_value(node[key], kind)
            check_plausible(number, kind, node[key])
        except UnitError as error:
            self.fail(path + (key,), f"{key} of {where}: {error}")
            return None
        if positive and number <= 0:
            self.fail(path + (key,), f"{key} of {where} must be greater than zero,"
                                     f" not {node[key]!r}")
            return None
        if kind in _NON_NEGATIVE and number < 0 and not signed:
            self.fail(path + (key,), f"{key} of {where} cannot be negative ({node[key]!r})")
            return None
        return number

    # -- parts -----------------------------------------------------------------------
    def part(self, node: dict, path: Path, name: str, builtin: bool = False) -> OpAmpPart:
        values = self.part_values(node, path, f"part {name}")
        part = OpAmpPart(name=name, family=node.get("class"), note=node.get("note"),
                         builtin=builtin, origin=self.origin(path), **values)
        self.supply_order(part, path, f"part {name}")
        return part

    def part_values(self, node: dict, path: Path, where: str) -> dict[str, Any]:
        """OpAmpPart keyword arguments (each value a float) for the parameters given."""
        values: dict[str, Any] = {}
        for keyword, kind in PART_PARAMETERS.items():
            positive = keyword in ("open-loop-gain", "gbw", "second-pole", "min-stable-gain")
            number = self.value(node, keyword, kind, path, where, positive=positive)
            if number is not None and keyword in _NON_NEGATIVE_PART and number < 0:
                self.fail(path + (keyword,), f"{keyword} of {where} cannot be negative"
                                             f" ({node[keyword]!r}): {_NON_NEGATIVE_PART[keyword]}")
                continue
            if number is not None:
                values[PART_ATTRIBUTES[keyword]] = number
        return values

    def supply_order(self, part: OpAmpPart, path: Path, where: str) -> None:
        """A part's supply span in order: supply-min <= supply-max <= supply-abs-max."""
        spans = [("supply-min", part.supply_min_v), ("supply-max", part.supply_max_v),
                 ("supply-abs-max", part.supply_abs_max_v)]
        given = [(keyword, volts) for keyword, volts in spans if volts is not None]
        for (low_key, low), (high_key, high) in zip(given, given[1:]):
            if low > high:
                self.fail(path, f"{where}: {low_key} ({format_si(low, 'V')}) is above"
                                f" {high_key} ({format_si(high, 'V')}); no supply fits both")

    # -- stages ----------------------------------------------------------------------
    def stage(self, node: dict, path: Path, parts: dict[str, OpAmpPart]) -> Stage | None:
        name = node["name"]
        where = f"stage {name}"
        too_large = stage_too_large(node)
        if too_large:
            self.fail(path, f"{where} {too_large}; split it into stages that feed each other")
            return None
        ground = node["ground"]
        supplies = []
        for i, item in enumerate(node.get("supplies", [])):
            item_path = path + ("supplies", i)
            voltage = self.value(item, "voltage", "voltage", item_path, f"supply {item['net']}")
            if item["net"] == ground:
                self.fail(item_path, f"supply {item['net']} is the ground net of {where};"
                                     " the ground is 0 V by definition")
            elif voltage is not None:
                ends = self.supply_range(item, voltage, item_path)
                supplies.append(Supply(item["net"], voltage, self.origin(item_path),
                                       mains=item.get("mains"), low_v=ends[0], high_v=ends[1]))
        if sum(1 for s in supplies if s.ranged) > MAX_RANGED_SUPPLIES:
            self.fail(path, f"{where} gives a range to more than {MAX_RANGED_SUPPLIES}"
                            " supplies; each combination of their ends is checked, so give"
                            " ranges to the supplies that move most")
        opamps = [self.opamp(item, path + ("opamps", i), parts)
                  for i, item in enumerate(node.get("opamps", []))]
        passives = []
        for key, (kind, quantity) in _PASSIVE_KIND.items():
            for i, item in enumerate(node.get(key, [])):
                passives.append(self.passive(item, path + (key, i), kind, quantity))
        sources = [self.source(item, path + ("sources", i))
                   for i, item in enumerate(node.get("sources", []))]
        loads = [self.load(item, path + ("loads", i)) for i, item in enumerate(node.get("loads", []))]
        require = self.requirements(node.get("require"), path + ("require",))
        built_opamps = [o for o in opamps if o is not None]
        built_passives = [p for p in passives if p is not None]
        built_sources = [s for s in sources if s is not None]
        built_loads = [lo for lo in loads if lo is not None]
        if (len(built_opamps) != len(opamps) or len(built_passives) != len(passives)
                or len(built_sources) != len(sources) or len(built_loads) != len(loads)):
            return None
        stage = Stage(name=name, origin=self.origin(path), ground=ground,
                      supplies=tuple(supplies), opamps=tuple(built_opamps),
                      passives=tuple(built_passives), sources=tuple(built_sources),
                      loads=tuple(built_loads),
                      require=require, note=node.get("note"), mains=node.get("mains"),
                      waivers=tuple(self.waivers(node, path, built_opamps, built_sources,
                                                 built_loads)))
        self.check_references(stage, node, path)
        return stage

    def waivers(self, node: dict, path: Path, opamps: list[OpAmp], sources: list[Source],
                loads: list[Load]) -> list[Waiver]:
        """Waivers on the stage and on each element, naming the element as findings do."""
        found: list[tuple[str | None, list, Path]] = [(None, node.get("waive", []), path)]
        names: list[tuple[str, list[str]]] = [
            ("opamps", [o.ref for o in opamps]), ("sources", [s.name for s in sources]),
            ("loads", [f"load {lo.net}" for lo in loads])]
        for key, elements in names:
            for i, name in enumerate(elements):
                found.append((name, node[key][i].get("waive", []), path + (key, i)))
        for key in ("resistors", "capacitors", "inductors"):
            for i, item in enumerate(node.get(key, [])):
                found.append((item["ref"], item.get("waive", []), path + (key, i)))
        waivers = []
        for element, entries, owner in found:
            for j, entry in enumerate(entries):
                reason = (entry.get("reason") or "").strip() or None
                waivers.append(Waiver(entry["rule"], reason,
                                      self.origin(owner + ("waive", j)), element))
        return waivers

    def opamp(self, node: dict, path: Path, parts: dict[str, OpAmpPart]) -> OpAmp | None:
        ref = node["ref"]
        part = None
        if "part" in node:
            part = parts.get(node["part"])
            if part is None:
                close = difflib.get_close_matches(node["part"], list(parts), n=1, cutoff=0.5)
                hint = f"; did you mean {close[0]!r}?" if close else (
                    "; `ampcheck parts` lists the built-in parts")
                self.fail(path + ("part",), f"op-amp {ref}: unknown part {node['part']!r}{hint}",
                          ref)
                return None
        if "params" in node:
            overrides = self.part_values(node["params"], path + ("params",), f"op-amp {ref}")
            if part is None:
                part = OpAmpPart(name="inline", origin=self.origin(path + ("params",)),
                                 **overrides)
            else:
                part = replace(part, name=f"{part.name} (adjusted)", **overrides)
            self.supply_order(part, path + ("params",), f"op-amp {ref}")
        # The schema requires "part" or "params" (anyOf), so one of them set it.
        assert part is not None
        return OpAmp(ref=ref, part=part, in_pos=node["in+"], in_neg=node["in-"],
                     out=node["out"], v_pos=node["v+"], v_neg=node["v-"],
                     origin=self.origin(path))

    def passive(self, node: dict, path: Path, kind: str, quantity: str) -> Passive | None:
        ref = node["ref"]
        where = f"{kind} {ref}"
        value = self.value(node, "value", quantity, path, where, positive=True)
        tolerance = self.value(node, "tolerance", "percentage", path, where)
        rating = self.value(node, "power-rating", "power", path, where, positive=True)
        if tolerance is not None and tolerance >= 0.5:
            self.fail(path + ("tolerance",), f"tolerance of {where} is {tolerance:.0%};"
                                             " expected a few percent, e.g. 1%")
        net_a, net_b = node["nets"]
        if net_a == net_b:
            self.fail(path + ("nets",), f"{where} has both ends on net {net_a}")
        if value is None:
            return None
        return Passive(ref=ref, kind=kind, net_a=net_a, net_b=net_b, value=value,
                       tolerance=tolerance, power_rating_w=rating, origin=self.origin(path))

    def source(self, node: dict, path: Path) -> Source | None:
        kind = node.get("kind", "voltage")
        where = f"source at {node['net']}"
        signal = "voltage" if kind == "voltage" else "current"
        low = high = amplitude = None
        if "range" in node:
            ends = [self.pair_value(node["range"], i, signal, path + ("range",), where)
                    for i in range(2)]
            range_ends = [e for e in ends if e is not None]
            if len(range_ends) != len(ends):
                return None
            low, high = min(range_ends), max(range_ends)
        if "amplitude" in node:
            amplitude = self.value(node, "amplitude", signal, path, where)
            offset = self.value(node, "offset", signal, path, where, signed=True) or 0.0
            if amplitude is not None and amplitude < 0:
                self.fail(path + ("amplitude",), f"amplitude of {where} is a peak value and"
                                                 " cannot be negative")
                return None
            if amplitude is None:
                return None
            low, high = offset - abs(amplitude), offset + abs(amplitude)
        elif "offset" in node:
            self.fail(path + ("offset",), f"{where}: offset goes with amplitude")
        band_low = band_high = None
        if "band" in node:
            band = [self.pair_value(node["band"], i, "frequency", path + ("band",), where)
                    for i in range(2)]
            band_ends = [e for e in band if e is not None]
            if len(band_ends) != len(band):
                return None
            band_low, band_high = sorted(band_ends)
            if band_high <= 0:
                self.fail(path + ("band",), f"{where}: the band's upper edge must be above 0 Hz")
        impedance = self.value(node, "impedance", "resistance", path, where,
                               positive=kind == "current")
        capacitance = self.value(node, "capacitance", "capacitance", path, where)
        if capacitance is not None and kind == "voltage":
            self.fail(path + ("capacitance",), f"{where}: capacitance belongs to current"
                      " sources (a sensor's shunt capacitance); for a voltage source put a"
                      " capacitor in the stage")
        return Source(net=node["net"], kind=kind, origin=self.origin(path),
                      label=node.get("label"), low=low, high=high, amplitude=amplitude,
                      band_low_hz=band_low, band_high_hz=band_high,
                      impedance_ohm=impedance, capacitance_f=capacitance)

    def supply_range(self, item: dict, voltage: float, path: Path
                     ) -> tuple[float | None, float | None]:
        """(low, high) of a supply's (range LOW HIGH), which must hold its nominal voltage
        and keep its sign; (None, None) without a range or when it is refused."""
        if "range" not in item:
            return None, None
        where = f"supply {item['net']}"
        ends = [self.pair_value(item["range"], i, "voltage", path + ("range",), where)
                for i in range(2)]
        given = [e for e in ends if e is not None]
        if len(given) != len(ends):
            return None, None
        low, high = min(given), max(given)
        if not low <= voltage <= high:
            self.fail(path + ("range",), f"the range of {where} ({format_si(low, 'V')} to"
                                         f" {format_si(high, 'V')}) must hold its nominal"
                                         f" {format_si(voltage, 'V')}")
            return None, None
        if low < 0 < high:
            self.fail(path + ("range",), f"the range of {where} crosses 0 V; a rail keeps"
                                         " its sign")
            return None, None
        return low, high

    def pair_value(self, pair: list, i: int, kind: str, path: Path, where: str) -> float | None:
        try:
            number = parse_value(pair[i], kind)
            check_plausible(number, kind, pair[i])
        except UnitError as error:
            self.fail(path + (i,), f"{path[-1]} of {where}: {error}")
            return None
        if kind == "frequency" and number < 0:
            self.fail(path + (i,), f"{path[-1]} of {where}: a frequency cannot be negative")
            return None
        return number

    def load(self, node: dict, path: Path) -> Load | None:
        where = f"load at {node['net']}"
        resistance = self.value(node, "resistance", "resistance", path, where, positive=True)
        capacitance = self.value(node, "capacitance", "capacitance", path, where)
        feeds = node.get("feeds") or {}
        return Load(net=node["net"], origin=self.origin(path), resistance_ohm=resistance,
                    capacitance_f=capacitance, feeds_stage=feeds.get("stage"),
                    feeds_net=feeds.get("net"))

    def requirements(self, node: dict | None, path: Path) -> Requirements:
        if node is None:
            return Requirements()
        values = {}
        positions = tuple((keyword, self.origin(path + (keyword,))) for keyword in REQUIREMENTS
                          if keyword in node)
        for keyword, kind in REQUIREMENTS.items():
            number = self.value(node, keyword, kind, path, "the requirements",
                                positive=keyword in ("input-resistance", "bandwidth", "cmrr"))
            if keyword == "gain" and number == 0.0:
                # A gain tolerance is relative to the gain: zero cannot be a target.
                self.fail(path + (keyword,), "gain of the requirements cannot be zero")
                continue
            if keyword in _NON_NEGATIVE_REQUIREMENTS and number is not None and number < 0:
                self.fail(path + (keyword,), f"{keyword} of the requirements is a magnitude"
                                             f" and cannot be negative ({node[keyword]!r})")
                continue
            if number is not None:
                values[REQUIREMENT_ATTRIBUTES[keyword]] = number
        return Requirements(origin=self.origin(path), positions=positions, **values)

    # -- references ------------------------------------------------------------------
    def check_references(self, stage: Stage, node: dict, path: Path) -> None:
        where = f"stage {stage.name}"
        seen: dict[str, Origin] = {}
        designated: tuple[OpAmp | Passive, ...] = (*stage.opamps, *stage.passives)
        for element in designated:
            if element.ref in seen:
                self.fail_at(element.origin, f"designator {element.ref} is used twice in"
                             f" {where} (first at line {seen[element.ref].line})", element.ref)
            seen.setdefault(element.ref, element.origin)
        if not stage.opamps:
            self.fail(path, f"{where} has no op-amp: an (opamp REF ...) is required")
        rails = stage.rail_voltages
        supplied: dict[str, Origin] = {}
        for supply in stage.supplies:
            if supply.net in supplied:
                self.fail_at(supply.origin, f"{where} declares supply net {supply.net} twice"
                             f" (first at line {supplied[supply.net].line})")
            supplied.setdefault(supply.net, supply.origin)
        for opamp in stage.opamps:
            for pin, net in (("v+", opamp.v_pos), ("v-", opamp.v_neg)):
                if net not in rails:
                    self.fail_at(opamp.origin, f"op-amp {opamp.ref}: its {pin} pin is on net"
                                 f" {net!r}, which is not a supply; declare (supply {net} VOLTS)"
                                 " or use the ground net", opamp.ref)
            if opamp.v_pos in rails and opamp.v_neg in rails and \
                    rails[opamp.v_pos] <= rails[opamp.v_neg]:
                self.fail_at(opamp.origin, f"op-amp {opamp.ref}: v+ ({rails[opamp.v_pos]:g} V)"
                             f" must be above v- ({rails[opamp.v_neg]:g} V)", opamp.ref)
        drivers: dict[str, str] = {}
        sourced = {source.net: source for source in stage.sources}
        for opamp in stage.opamps:
            if opamp.out in drivers:
                self.fail_at(opamp.origin, f"op-amp {opamp.ref}: its output and that of"
                             f" {drivers[opamp.out]} both drive net {opamp.out!r}; two"
                             " outputs fight over one net", opamp.ref)
            elif opamp.out in sourced:
                self.fail_at(opamp.origin, f"op-amp {opamp.ref}: its output drives net"
                             f" {opamp.out!r}, where {sourced[opamp.out].name} is; a source"
                             " needs a net the stage does not drive", opamp.ref)
            drivers.setdefault(opamp.out, opamp.ref)
        pins: Counter[str] = Counter()
        for opamp in stage.opamps:
            for pin, net in opamp.pins.items():
                if pin not in ("v+", "v-"):
                    pins[net] += 1
        for passive in stage.passives:
            pins.update(passive.nets)
        for source in stage.sources:
            pins[source.net] += 1
        for load in stage.loads:
            if load.resistance_ohm is not None or load.capacitance_f is not None or load.feeds_stage:
                pins[load.net] += 1
        for net in rails:
            pins[net] += 1
        for source in stage.sources:
            if source.net in rails:
                what = "the ground" if source.net == stage.ground else "a supply"
                self.fail_at(source.origin, f"{source.name}: net {source.net!r} is {what} of"
                             f" {where}, held at a fixed voltage; a source drives a net of"
                             " its own")
            elif pins[source.net] < 2:
                self.fail_at(source.origin, f"{source.name}: nothing in {where} is connected"
                             f" to net {source.net!r}")
        for load in stage.loads:
            if pins[load.net] < 2:
                self.fail_at(load.origin, f"load at {load.net}: nothing in {where} drives"
                             f" net {load.net!r}")
        connected = [n for n in pins if pins[n] > 1]  # the candidates for a hint, once
        hints: dict[str, str] = {}
        for element in designated:
            nets = element.nets if isinstance(element, Passive) else (
                element.in_pos, element.in_neg, element.out)
            for net in nets:
                if pins[net] == 1 and net not in rails:
                    if net not in hints and len(hints) < MAX_NET_HINTS:
                        close = difflib.get_close_matches(net, connected, n=1, cutoff=0.6)
                        hints[net] = f"; did you mean {close[0]!r}?" if close else ""
                    hint = hints.get(net, "")
                    self.fail_at(element.origin, f"{element.ref}: net {net!r} is connected"
                                 f" to nothing else in {where} (dangling){hint}", element.ref)

    def fail_at(self, origin: Origin, message: str, element: str | None = None) -> None:
        self.problems.append(InputProblem(origin.path, origin.line, origin.column, message,
                                          element))


def build_parts(parsed: ParsedFile, builtin: bool = False) -> list[OpAmpPart]:
    """The parts defined in a file; InputErrors on bad values or duplicate names."""
    builder = _Builder(parsed)
    parts = []
    names = set()
    if len(parsed.tree.get("parts", [])) > MAX_PARTS:
        builder.fail(("parts", MAX_PARTS), f"this file defines"
                     f" {len(parsed.tree['parts'])} parts; the limit is {MAX_PARTS} per file")
        raise InputErrors(builder.problems)
    for i, node in enumerate(parsed.tree.get("parts", [])):
        if node["name"] in names:
            builder.fail(("parts", i), f"part {node['name']} is defined twice in this file")
        names.add(node["name"])
        parts.append(builder.part(node, ("parts", i), node["name"], builtin=builtin))
    if builder.problems:
        raise InputErrors(builder.problems)
    return parts


def build_stages(parsed: ParsedFile, library: dict[str, OpAmpPart]) -> list[Stage]:
    """The stages of a file with parts resolved (inline parts first, then ``library``)."""
    parts = dict(library)
    parts.update({part.name: part for part in build_parts(parsed)})
    builder = _Builder(parsed)
    stages = []
    names: dict[str, int] = {}
    if len(parsed.tree.get("stages", [])) > MAX_STAGES:
        builder.fail(("stages", MAX_STAGES), f"this file holds"
                     f" {len(parsed.tree['stages'])} stages; the limit is {MAX_STAGES} per"
                     " file")
        raise InputErrors(builder.problems)
    for i, node in enumerate(parsed.tree.get("stages", [])):
        if node["name"] in names:
            builder.fail(("stages", i), f"stage {node['name']} is defined twice in this file")
        names[node["name"]] = i
        stage = builder.stage(node, ("stages", i), parts)
        if stage is not None:
            stages.append(stage)
    by_name = {stage.name: stage for stage in stages}
    for stage in stages:
        for load in stage.loads:
            if load.feeds_stage is None:
                continue
            target = by_name.get(load.feeds_stage)
            if target is stage:
                builder.fail_at(load.origin, f"load at {load.net} feeds its own stage"
                                f" {stage.name}: a stage's output feeds the next stage")
            elif target is None:
                builder.fail_at(load.origin, f"load at {load.net} feeds stage"
                                f" {load.feeds_stage!r}, which this file does not define")
            elif load.feeds_net and load.feeds_net not in {s.net for s in target.sources}:
                builder.fail_at(load.origin, f"load at {load.net} feeds net {load.feeds_net!r}"
                                f" of stage {target.name}, which has no source there")
            elif not target.sources:
                builder.fail_at(load.origin, f"stage {target.name} has no source for load"
                                f" at {load.net} to feed")
    _feed_rings(stages, builder)
    if builder.problems:
        raise InputErrors(sorted(builder.problems, key=lambda p: (p.line, p.column)))
    return stages


def _feed_rings(stages: list[Stage], builder) -> None:
    """A problem at the first load of each ring of stages feeding one another (a -> b ->
    a): a chain of stages has a first one, and the loads that feed are read in order."""
    feeds = {stage.name: [load for load in stage.loads
                          if load.feeds_stage and load.feeds_stage != stage.name]
             for stage in stages}
    reported_rings: set[frozenset] = set()
    for start in feeds:
        path, load_path, at = [start], [], start
        while True:
            nexts = [load for load in feeds.get(at, []) if load.feeds_stage in feeds]
            if not nexts:
                break
            load = nexts[0]
            load_path.append(load)
            assert load.feeds_stage is not None  # kept above for feeding a known stage
            at = load.feeds_stage
            if at in path:
                ring = path[path.index(at):]
                if frozenset(ring) not in reported_rings:
                    reported_rings.add(frozenset(ring))
                    first = load_path[path.index(at)]
                    builder.fail_at(first.origin, "stages " + " -> ".join(ring + [at])
                                    + " feed one another in a ring: a chain of stages has a"
                                    " first stage")
                break
            path.append(at)

