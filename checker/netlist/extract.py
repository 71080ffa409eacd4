"""Cut a board's netlist into op-amp stages: the same plain tree the stage readers make.

The board is a graph: nets are vertices, passives edges. Rails, ground and op-amp outputs
are *terminal* nets (low impedance: a passive's far side beyond one belongs to whatever
drives it); every other net is *internal*. Passives joined through internal nets form
*islands*. An island is *read* by the op-amps whose inputs sit on it and *driven* by the
op-amps whose outputs it touches. Op-amps become one stage when

* they read the same island, share an output net, or drive an island that no op-amp reads
  (outputs summed or tied together);
* their loops interlock: one drives another's inputs and that one, through any chain,
  drives the first's (a strongly connected component of the drives relation: composite
  amplifiers, two-integrator filters);
* one op-amp's inputs are driven by two or more op-amps of another stage (a differential
  receiver stays with the pair that drives it: the three-op-amp instrumentation amplifier);
* the netlist map joins them: ``(stage-of U1 (join U2))``.

Each stage gets its op-amps, the islands they read, the islands only they drive, and the
passives from their outputs to rails. An output of another stage that a stage reads
becomes that stage's source, and a load ``(feeds ...)`` on the stage that drives it.
Nets that leave the board (a net with one connection in the whole netlist, a pin of a
``(connector ...)`` instance, or a net named by ``(at-net ...)``) become a source when
they lead into a stage and a load when they hang off an output; without a declaration in
the map the source is an ideal voltage source of unknown range and the load is none, and
both are recorded as assumptions. Elements ampcheck does not analyse become notes.
"""

from __future__ import annotations

import os
import re
from collections import Counter
from dataclasses import field
from checker.record import record

from checker.io.netlist_reader import (Card, Command, Instance, Netlist, OtherCard,
                                       SourceCard, TwoTerminal, Word)
from checker.io.netlist_values import NetlistValueError, parse_netlist_number
from checker.io.positions import InputErrors, InputProblem, Path, Position, reported
from checker.model import Origin, ReaderNote
from checker.netlist.mapping import UNUSED_PIN, NetlistMap, OpAmpModel, Scope, key

GROUND = "0"
NOT_ANALYSED = "not-analysed"
ASSUMED = "assumed"

_NAME_OK = re.compile(r"[A-Za-z0-9_.+\-/]+")
_DESIGNATOR = re.compile(r"[A-Za-z][A-Za-z0-9_]*")
_NOT_ALLOWED = re.compile(r"[^A-Za-z0-9_.+\-/]")
_PASSIVE = {"R": ("resistor", "resistors"), "C": ("capacitor", "capacitors"),
            "L": ("inductor", "inductors")}
# Parameters of a passive that do not change its linear small-signal value.
_IGNORED_PARAMETERS = {"tc", "tc1", "tc2", "temp", "dtemp", "ic", "noisy"}
# Analysis and output commands: they do not change the circuit, so they are skipped.
_SKIPPED_COMMANDS = {"title", "model", "op", "ac", "dc", "tran", "noise", "tf", "sens",
                     "pz", "disto", "four", "print", "plot", "probe", "save", "meas",
                     "measure", "options", "option", "opt", "temp", "width", "nodeset",
                     "ic", "backanno", "control", "endc", "end"}
_KINDS = {"D": "a diode", "Q": "a bipolar transistor", "M": "a MOSFET", "J": "a JFET",
          "Z": "a MESFET", "E": "a voltage-controlled voltage source",
          "F": "a current-controlled current source",
          "G": "a voltage-controlled current source",
          "H": "a current-controlled voltage source", "B": "a behavioural source",
          "A": "a code-model (digital or mixed-signal) part",
          "U": "a digital part or distributed line", "S": "a voltage-controlled switch",
          "W": "a current-controlled switch", "T": "a transmission line",
          "O": "a lossy transmission line", "Y": "a transmission line",
          "K": "coupled inductors", "N": "a device model", "P": "coupled lines"}
# How many leading words of each kind are nodes (the rest: models, values, parameters).
_NODE_COUNT = {"D": 2, "Q": 3, "M": 4, "J": 3, "Z": 3, "E": 4, "F": 2, "G": 4, "H": 2,
               "B": 2, "S": 4, "W": 2, "T": 4, "O": 4, "Y": 4, "K": 0, "U": 0, "A": 0,
               "N": 0, "P": 0}


@record
class Extraction:
    """A netlist's stages as a stage-format tree, positions at the netlist's lines, the
    notes per stage, and per element the comment a stage-file writer puts beside it."""

    tree: dict
    positions: dict[Path, Position]
    notes: dict[str, list[ReaderNote]]
    comments: dict[Path, str] = field(default_factory=dict)
    # (stage, net, upstream stage): a source of ``stage`` that is ``upstream``'s output
    links: list[tuple[str, str, str]] = field(default_factory=list)


@record
class _Passive:
    ref: str
    letter: str
    a: str
    b: str
    value: float
    card: TwoTerminal


@record
class _OpAmp:
    index: int
    ref: str
    card: Instance
    model: OpAmpModel
    pins: dict[str, str]  # stage pin -> net key

    @property
    def out(self) -> str:
        return self.pins["out"]

    @property
    def inputs(self) -> tuple[str, str]:
        return (self.pins["in+"], self.pins["in-"])


@record
class _Signal:
    """A V or I source of the netlist that is a signal, not a rail."""

    net: str
    kind: str
    card: SourceCard
    tree: dict


@record
class _Island:
    nets: set[str] = field(default_factory=set)
    passives: list[_Passive] = field(default_factory=list)
    readers: set[int] = field(default_factory=set)
    drivers: set[int] = field(default_factory=set)


class _UnionFind:
    def __init__(self):
        self.parent: dict = {}

    def find(self, item):
        self.parent.setdefault(item, item)
        root = item
        while self.parent[root] != root:
            root = self.parent[root]
        while self.parent[item] != root:  # path compression
            self.parent[item], item = root, self.parent[item]
        return root

    def union(self, a, b) -> bool:
        ra, rb = self.find(a), self.find(b)
        if ra == rb:
            return False
        if ra > rb:
            ra, rb = rb, ra
        self.parent[rb] = ra
        return True


def _at(word: Word | Card) -> Position:
    return Position(word.line, word.column)


class _Board:
    """One netlist being cut into stages; collects problems and notes as it goes."""

    def __init__(self, netlist: Netlist, netlist_map: NetlistMap | None):
        self.netlist = netlist
        self.path = netlist.path
        self.file = os.path.basename(netlist.path)
        self.map = netlist_map
        self.scope: Scope = netlist_map.for_file(netlist.path) if netlist_map else Scope()
        self.models = netlist_map.models if netlist_map else {}
        self.connectors = netlist_map.connectors if netlist_map else {}
        self.problems: list[InputProblem] = []
        self.notes: list[tuple[ReaderNote, set[str]]] = []
        self.grounds = {GROUND} | set(self.scope.grounds)
        self.spelling: dict[str, str] = {}  # net key -> first spelling
        self.first_seen: dict[str, Position] = {}  # net key -> first card touching it
        self.degree: Counter = Counter()
        self.passives: list[_Passive] = []
        self.opamps: list[_OpAmp] = []
        self.signals: dict[str, _Signal] = {}
        self.rails: dict[str, tuple[float, Position, str]] = {}  # key -> (V, pos, comment)
        self.edge_nets: set[str] = set()
        self.unread_nets: set[str] = set()
        self.names: dict[str, Card] = {}

    # -- small helpers ----------------------------------------------------------------
    def fail(self, at: Word | Card, message: str, element: str | None = None) -> None:
        self.problems.append(InputProblem(self.path, at.line, at.column, message, element))

    def note(self, kind: str, at: Word | Card | Position, message: str,
             nets=(), elements=()) -> None:
        origin = Origin(self.path, at.line, at.column)
        # Rails and ground touch every stage: they do not say where a note belongs.
        placed = {n for n in nets if n != GROUND and n not in self.rails}
        self.notes.append((ReaderNote(kind, message, origin, tuple(elements)), placed))

    def where(self, at: Word | Card) -> str:
        return f"{self.file}:{at.line}"

    def net(self, word: Word, card: Card) -> str:
        """The key of the net ``word`` names, counting the connection."""
        net = GROUND if word.key in self.grounds else word.key
        self.spelling.setdefault(net, word.text)
        self.first_seen.setdefault(net, _at(card))
        self.degree[net] += 1
        return net

    def is_ground(self, net: str) -> bool:
        return net == GROUND

    def declared(self, card_name: str):
        """The map's (stage-of REF ...) for an op-amp, by its netlist name (XU1) or its
        designator without the X (U1)."""
        stages = self.scope.stages
        return stages.get(key(card_name)) or (
            stages.get(key(card_name[1:])) if card_name[:1] in "Xx" else None)

    # -- reading the cards ------------------------------------------------------------
    def read_cards(self) -> None:
        title = self.netlist.title
        if re.match(r"^[RCLVIXrclvix]\w*\s+\S+\s+\S+", title):
            self.note(NOT_ANALYSED, Position(1, 1), f"not analysed: line 1, {title[:40]!r},"
                      " is the netlist's title by the convention, so it is not read as an"
                      " element; put a title line above it if it is one")
        pending: list[tuple[str, str, float, SourceCard]] = []
        for card in self.netlist.cards:
            first = self.names.get(card.name.key)
            if first is not None:
                self.fail(card, f"{card.name.text} appears twice in the netlist (first at"
                                f" line {first.line})", card.name.text)
                continue
            self.names[card.name.key] = card
            if isinstance(card, TwoTerminal):
                self.passive(card)
            elif isinstance(card, SourceCard):
                pending += self.source(card)
            elif isinstance(card, Instance):
                self.instance(card)
            else:
                assert isinstance(card, OtherCard)  # the reader makes only these four kinds
                self.other(card)
        self.resolve_rails(pending)
        for net, (name, volts, origin) in self.scope.rails.items():
            net = GROUND if net in self.grounds else net
            if net == GROUND:
                continue
            self.spelling.setdefault(net, name)
            self.rails[net] = (volts, self.first_seen.get(net, Position(1, 1)),
                               f"rail from the netlist map, {os.path.basename(origin.path)}:"
                               f"{origin.line}")
        for command in self.netlist.commands:
            self.command(command)

    def passive(self, card: TwoTerminal) -> None:
        a, b = (self.net(w, card) for w in card.nodes)
        kind = _PASSIVE[card.letter][0]
        try:
            value = parse_netlist_number(card.value.text)
        except NetlistValueError as error:
            self.fail(card.value, f"value of {kind} {card.name.text}: {error}",
                      card.name.text)
            return
        if value <= 0:
            self.fail(card.value, f"value of {kind} {card.name.text} must be above zero,"
                                  f" not {card.value.text!r}", card.name.text)
            return
        for parameter in card.parameters:
            name = parameter.name.key
            if name == "m":
                try:
                    multiple = parse_netlist_number(parameter.value.text)
                except NetlistValueError as error:
                    self.fail(parameter.value, f"m of {card.name.text}: {error}")
                    return
                if multiple <= 0:
                    self.fail(parameter.value, f"m of {card.name.text} must be above zero")
                    return
                # m parallel copies: R and L divide by m, C multiplies.
                value = value * multiple if card.letter == "C" else value / multiple
            elif name not in _IGNORED_PARAMETERS:
                self.note(NOT_ANALYSED, parameter.name, f"not analysed: parameter"
                          f" {parameter.name.text} of {card.name.text}; the {kind} is"
                          f" taken as {card.value.text}", (a, b), (card.name.text,))
        for extra in card.extras[:1]:
            self.note(NOT_ANALYSED, extra, f"not analysed: {extra.text!r} after the value"
                      f" of {card.name.text}; the {kind} is taken as {card.value.text}",
                      (a, b), (card.name.text,))
        if a == b:
            self.note(NOT_ANALYSED, card, f"not analysed: {card.name.text} has both ends on"
                      f" net {self.spelling[a]}; it is left out", (a,), (card.name.text,))
            return
        self.passives.append(_Passive(card.name.text, card.letter, a, b, value, card))

    def number(self, word: Word, where: str) -> float | None:
        try:
            return parse_netlist_number(word.text)
        except NetlistValueError as error:
            self.fail(word, f"{where}: {error}")
            return None

    def source(self, card: SourceCard) -> list:
        a, b = (self.net(w, card) for w in card.nodes)
        name = card.name.text
        dc = 0.0 if card.dc is None else self.number(card.dc, f"DC value of {name}")
        if dc is None:
            return []
        if a == b:
            self.note(NOT_ANALYSED, card, f"not analysed: {name} has both ends on net"
                      f" {self.spelling[a]}", (a,), (name,))
            return []
        signal = bool(card.ac) or card.function is not None or card.letter == "I"
        if not signal:
            if self.is_ground(b):
                return [(a, GROUND, dc, card)]
            if self.is_ground(a):
                return [(b, GROUND, -dc, card)]
            return [(a, b, dc, card)]
        if not (self.is_ground(a) or self.is_ground(b)):
            self.note(NOT_ANALYSED, card, f"not analysed: {name} is a signal source between"
                      f" {self.spelling[a]} and {self.spelling[b]}, neither of them ground",
                      (a, b), (name,))
            return []
        # V: V(a) - V(b) = value. I: the current flows from a through the source to b,
        # into b's net.
        if card.letter == "V":
            net, sign = (a, 1.0) if self.is_ground(b) else (b, -1.0)
        else:
            net, sign = (b, 1.0) if self.is_ground(a) else (a, -1.0)
        kind = "voltage" if card.letter == "V" else "current"
        tree: dict = {"label": f"{name} of the netlist"}
        if kind == "current":
            tree["kind"] = "current"
        function = card.function.key if card.function else None
        numbers = [self.number(w, f"{card.function.text} of {name}")
                   for w in card.arguments] if card.function else []
        arguments = [n for n in numbers if n is not None]
        if len(arguments) != len(numbers):
            return []
        if function == "sin" and len(arguments) >= 2:
            tree["amplitude"] = abs(arguments[1])
            tree["offset"] = sign * arguments[0]
            if len(arguments) >= 3 and arguments[2] > 0:
                tree["band"] = [arguments[2], arguments[2]]
        elif function == "pulse" and len(arguments) >= 2:
            tree["range"] = sorted([sign * arguments[0], sign * arguments[1]])
        elif card.function is not None:  # (function is its key)
            self.note(NOT_ANALYSED, card.function, f"not analysed: the {card.function.text}"
                      f" waveform of {name}; its range is taken as unknown", (net,), (name,))
        elif kind == "current" or card.dc is not None and not card.ac:
            tree["range"] = [sign * dc, sign * dc]
        self.signals[net] = _Signal(net, kind, card, tree)
        return []

    def resolve_rails(self, pending) -> None:
        """Rails from DC voltage sources: to ground, or stacked on another rail."""
        known = {GROUND: 0.0}
        for _ in range(len(pending) + 1):
            left = []
            for a, b, volts, card in pending:
                if b in known and a not in known:
                    known[a] = known[b] + volts
                    self.rails[a] = (known[a], _at(card), f"{self.where(card)} {card.name.text}")
                elif a in known and b not in known:
                    known[b] = known[a] - volts
                    self.rails[b] = (known[b], _at(card), f"{self.where(card)} {card.name.text}")
                elif a in known and b in known:
                    if abs(known[a] - known[b] - volts) > 1e-9 * max(1.0, abs(volts)):
                        self.fail(card, f"{card.name.text} sets {self.spelling[a]} to"
                                        f" {known[b] + volts:g} V, but it is already at"
                                        f" {known[a]:g} V", card.name.text)
                else:
                    left.append((a, b, volts, card))
            if len(left) == len(pending):
                break
            pending = left
        for a, b, _volts, card in pending:
            self.note(NOT_ANALYSED, card, f"not analysed: {card.name.text} lies between"
                      f" {self.spelling[a]} and {self.spelling[b]}, neither of them ground"
                      " or a rail", (a, b), (card.name.text,))

    def instance(self, card: Instance) -> None:
        nets = [self.net(w, card) for w in card.nodes]
        subcircuit = card.subcircuit.key
        model = self.models.get(subcircuit)
        if model is not None:
            if len(nets) != len(model.pins):
                self.fail(card, f"{card.name.text} has {len(nets)} nodes, but the netlist"
                                f" map's (opamp-model {model.name}) lists {len(model.pins)}"
                                f" pins (line {model.origin.line} of"
                                f" {os.path.basename(model.origin.path)})", card.name.text)
                return
            pins = {pin: net for pin, net in zip(model.pins, nets) if pin != UNUSED_PIN}
            self.opamps.append(_OpAmp(len(self.opamps), card.name.text, card, model, pins))
            return
        if subcircuit in self.connectors:
            self.edge_nets.update(n for n in nets if n != GROUND)
            return
        defined = self.netlist.subcircuits.get(subcircuit)
        where = f" (defined at line {defined.name.line})" if defined else ""
        self.unread_nets.update(nets)
        self.note(NOT_ANALYSED, card, f"not analysed: {card.name.text} calls subcircuit"
                  f" {card.subcircuit.text}{where}, which the netlist map does not name; if"
                  f" it is an op-amp, add (opamp-model {card.subcircuit.text} (part ...)"
                  f" (pins ...)), if a connector (connector {card.subcircuit.text})",
                  nets, (card.name.text,))

    def other(self, card: OtherCard) -> None:
        count = _NODE_COUNT.get(card.letter, 2)
        nets = [self.net(w, card) for w in card.words[:count]]
        self.unread_nets.update(nets)
        kind = _KINDS.get(card.letter, f"an element of kind {card.letter!r}")
        if card.letter == "K":
            coupled = ", ".join(w.text for w in card.words[:2])
            message = (f"not analysed: {card.name.text} couples {coupled}; they are analysed"
                       " as uncoupled inductors")
            nets = [p.a for p in self.passives if p.ref.casefold() in
                    {w.key for w in card.words[:2]}]
        else:
            on = f" on {', '.join(self.spelling[n] for n in nets)}" if nets else ""
            message = (f"not analysed: {card.name.text} ({kind}){on}; the stages are"
                       " analysed without it")
        self.note(NOT_ANALYSED, card, message, nets, (card.name.text,))

    def command(self, command: Command) -> None:
        if command.inside is not None or command.keyword in _SKIPPED_COMMANDS:
            return
        shown = " ".join([command.name.text] + [w.text for w in command.words[:3]])
        why = {"include": "included files are not read", "lib": "library files are not read",
               "inc": "included files are not read",
               "param": "parameters are not evaluated",
               "global": "global nets of subcircuits are not expanded",
               "func": "functions are not evaluated"}.get(command.keyword,
                                                          "this command is not supported")
        self.note(NOT_ANALYSED, command.name, f"not analysed: {shown} ({why})")

    # -- the graph ----------------------------------------------------------------------
    def cut(self) -> tuple[list[list[_OpAmp]], dict, list[_Island]]:
        """Stages as groups of op-amps; the islands and bridges each one owns."""
        outputs: dict[str, list[int]] = {}
        for opamp in self.opamps:
            outputs.setdefault(opamp.out, []).append(opamp.index)
        terminal = set(self.rails) | {GROUND} | set(outputs)
        nets_uf = _UnionFind()
        island_of_passive: dict[int, str] = {}
        bridges: list[_Passive] = []
        for i, passive in enumerate(self.passives):
            a_in, b_in = passive.a not in terminal, passive.b not in terminal
            if a_in and b_in:
                nets_uf.union(passive.a, passive.b)
            if a_in or b_in:
                island_of_passive[i] = passive.a if a_in else passive.b
            else:
                bridges.append(passive)
        islands: dict[str, _Island] = {}

        def island(net: str) -> _Island:
            return islands.setdefault(nets_uf.find(net), _Island())

        for i, net in island_of_passive.items():
            passive = self.passives[i]
            item = island(net)
            item.passives.append(passive)
            for end in (passive.a, passive.b):
                if end in outputs:
                    item.drivers.update(outputs[end])
                elif end not in terminal:
                    item.nets.add(end)
        for opamp in self.opamps:
            for net in opamp.inputs:
                if net not in terminal:
                    island(net).nets.add(net)
                    island(net).readers.add(opamp.index)
        groups = _UnionFind()
        for opamp in self.opamps:
            groups.find(opamp.index)
        for members in outputs.values():
            for other in members[1:]:
                groups.union(members[0], other)
        for item in islands.values():
            together = sorted(item.readers) or sorted(item.drivers)
            for other in together[1:]:
                groups.union(together[0], other)
        owner_of_bridge: dict[int, int] = {}
        for j, passive in enumerate(bridges):
            driven = sorted(outputs.get(passive.a, []) + outputs.get(passive.b, []))
            for other in driven[1:]:
                groups.union(driven[0], other)
            if driven:
                owner_of_bridge[j] = driven[0]
        refs = {key(o.ref): o.index for o in self.opamps}
        refs.update({key(o.ref[1:]): o.index for o in self.opamps
                     if o.ref[:1] in "Xx" and key(o.ref[1:]) not in refs})
        for opamp in self.opamps:
            declaration = self.declared(opamp.ref)
            for other in declaration.join if declaration else ():
                if key(other) in refs:
                    groups.union(opamp.index, refs[key(other)])
        # drives[a] = op-amps whose inputs a's output reaches (through an island they read
        # or straight onto the pin)
        drives: dict[int, set[int]] = {o.index: set() for o in self.opamps}
        for item in islands.values():
            for driver in item.drivers:
                drives[driver].update(item.readers)
        for opamp in self.opamps:
            for net in opamp.inputs:
                for driver in outputs.get(net, []):
                    drives[driver].add(opamp.index)
        self.interlock(groups, drives)
        ordered: dict[int, list[_OpAmp]] = {}
        for opamp in self.opamps:
            ordered.setdefault(groups.find(opamp.index), []).append(opamp)
        stage_of_group = {root: n for n, root in enumerate(ordered)}
        owned: dict[int, list] = {n: [] for n in range(len(ordered))}
        orphans = []
        for item in islands.values():
            touching = item.readers or item.drivers
            if not touching:
                if item.passives:
                    orphans.append(item)
                continue
            owned[stage_of_group[groups.find(next(iter(touching)))]].append(item)
        bridge_owner: dict[int, list[_Passive]] = {}
        for j, passive in enumerate(bridges):
            if j in owner_of_bridge:
                stage = stage_of_group[groups.find(owner_of_bridge[j])]
                bridge_owner.setdefault(stage, []).append(passive)
        for item in orphans:
            refs_text = ", ".join(p.ref for p in item.passives[:6])
            more = f" and {len(item.passives) - 6} more" if len(item.passives) > 6 else ""
            verb = "connects" if len(item.passives) == 1 else "connect"
            self.note(NOT_ANALYSED, item.passives[0].card, f"not analysed: {refs_text}{more}"
                      f" {verb} to no op-amp that the netlist map names",
                      item.nets, tuple(p.ref for p in item.passives))
        return list(ordered.values()), {"islands": owned, "bridges": bridge_owner,
                                        "outputs": outputs, "terminal": terminal}, orphans

    def interlock(self, groups: _UnionFind, drives: dict[int, set[int]]) -> None:
        """Join groups in a drives cycle, and differential receivers with their pair."""
        driven_by: dict[int, set[int]] = {}
        for driver, targets in drives.items():
            for target in targets:
                driven_by.setdefault(target, set()).add(driver)
        for _ in range(len(self.opamps) + 1):
            changed = False
            graph: dict[int, set[int]] = {}
            for a, targets in drives.items():
                ga = groups.find(a)
                graph.setdefault(ga, set())
                for b in targets:
                    gb = groups.find(b)
                    graph.setdefault(gb, set())
                    if ga != gb:
                        graph[ga].add(gb)
            for component in _strongly_connected(graph):
                for other in component[1:]:
                    changed |= groups.union(component[0], other)
            for opamp in self.opamps:
                mine = groups.find(opamp.index)
                by_group: dict[int, set[int]] = {}
                for driver in driven_by.get(opamp.index, ()):
                    if groups.find(driver) != mine:
                        by_group.setdefault(groups.find(driver), set()).add(driver)
                for group, drivers in by_group.items():
                    if len(drivers) >= 2:
                        changed |= groups.union(mine, group)
            if not changed:
                return


def _strongly_connected(graph: dict[int, set[int]]) -> list[list[int]]:
    """Components of more than one vertex (Tarjan's algorithm, iterative, linear)."""
    index: dict[int, int] = {}
    low: dict[int, int] = {}
    on_stack: set[int] = set()
    stack: list[int] = []
    found: list[list[int]] = []
    counter = 0
    for start in sorted(graph):
        if start in index:
            continue
        work = [(start, iter(sorted(graph[start])))]
        index[start] = low[start] = counter
        counter += 1
        stack.append(start)
        on_stack.add(start)
        while work:
            vertex, children = work[-1]
            advanced = False
            for child in children:
                if child not in index:
                    index[child] = low[child] = counter
                    counter += 1
                    stack.append(child)
                    on_stack.add(child)
                    work.append((child, iter(sorted(graph[child]))))
                    advanced = True
                    break
                if child in on_stack:
                    low[vertex] = min(low[vertex], index[child])
            if advanced:
                continue
            work.pop()
            if work:
                low[work[-1][0]] = min(low[work[-1][0]], low[vertex])
            if low[vertex] == index[vertex]:
                component = []
                while True:
                    item = stack.pop()
                    on_stack.discard(item)
                    component.append(item)
                    if item == vertex:
                        break
                if len(component) > 1:
                    found.append(sorted(component))
    return found


class _Writer:
    """Builds the stage-format tree of each stage from the cut board."""

    def __init__(self, board: _Board):
        self.board = board
        self.positions: dict[Path, Position] = {(): Position(1, 1)}
        self.comments: dict[Path, str] = {}
        self.net_names: dict[str, str] = {}
        self.ref_names: dict[str, str] = {}
        self.used_nets: set[str] = set()
        self.used_refs: set[str] = set()

    def name(self, net: str) -> str:
        """A net's name in the stage format: its first spelling, made a valid name."""
        if net in self.net_names:
            return self.net_names[net]
        if net == GROUND:
            text = "gnd" if "gnd" not in self.board.spelling else "0"
        else:
            text = _NOT_ALLOWED.sub("_", self.board.spelling.get(net, net))
        base, n = text, 2
        while text.casefold() in self.used_nets:
            text, n = f"{base}_{n}", n + 1
        self.used_nets.add(text.casefold())
        self.net_names[net] = text
        return text

    def ref(self, card_name: str, opamp: bool = False) -> str:
        """A designator: the netlist's name (an op-amp's without its X), made valid."""
        if card_name in self.ref_names:
            return self.ref_names[card_name]
        text = _NOT_ALLOWED.sub("_", card_name).replace(".", "_").replace("+", "_")
        text = text.replace("-", "_").replace("/", "_")
        if opamp and _DESIGNATOR.fullmatch(text[1:] or "-") and \
                text[1:].casefold() not in self.board.names:
            text = text[1:]
        base, n = text, 2
        while text.casefold() in self.used_refs:
            text, n = f"{base}_{n}", n + 1
        self.used_refs.add(text.casefold())
        self.ref_names[card_name] = text
        return text


def extract(netlist: Netlist, netlist_map: NetlistMap | None) -> Extraction:
    """The stages of ``netlist`` as a stage-format tree; InputErrors when it has none."""
    board = _Board(netlist, netlist_map)
    board.read_cards()
    if board.problems:
        raise InputErrors(reported(sorted(board.problems, key=lambda p: (p.line, p.column))))
    for opamp in board.opamps:
        for pin in ("v+", "v-"):
            net = opamp.pins[pin]
            if net != GROUND and net not in board.rails:
                board.fail(opamp.card, f"op-amp {opamp.card.name.text}: its {pin} pin is on"
                           f" net {board.spelling[net]!r}, which no DC source in the netlist"
                           " holds; declare it in the netlist map with (rail"
                           f" {board.spelling[net]} VOLTS)", opamp.card.name.text)
    if board.problems:
        raise InputErrors(reported(board.problems))
    if not board.opamps:
        raise InputErrors([_no_opamp_problem(board)])
    groups, owned, _orphans = board.cut()
    return _StageTrees(board, groups, owned).build()


def _no_opamp_problem(board: _Board) -> InputProblem:
    called: dict[str, Instance] = {}
    for card in board.netlist.cards:
        if isinstance(card, Instance):
            called.setdefault(card.subcircuit.text, card)
    if board.map is None:
        message = ("no netlist map: ampcheck needs one to know which subcircuits are"
                   " op-amps; name it with --netlist-map FILE or netlist-map in ampcheck.toml")
        return InputProblem(board.path, 1, 1, message)
    if called:
        listed = ", ".join(f"{name} (line {card.line})" for name, card in
                           list(called.items())[:5])
        message = (f"no op-amp stage: the netlist map names none of the subcircuits this"
                   f" netlist calls ({listed}); add (opamp-model NAME (part ...) (pins ...))")
    else:
        message = "no op-amp stage: this netlist calls no subcircuit (X...) at all"
    return InputProblem(board.path, 1, 1, message)


class _StageTrees:
    """The tree of every stage, with positions, comments and notes."""

    def __init__(self, board: _Board, groups: list[list[_OpAmp]], owned: dict):
        self.board = board
        self.groups = groups
        self.islands: dict[int, list[_Island]] = owned["islands"]
        self.bridges: dict[int, list[_Passive]] = owned["bridges"]
        self.outputs: dict[str, list[int]] = owned["outputs"]
        self.terminal: set[str] = owned["terminal"]
        self.writer = _Writer(board)
        self.group_of: dict[int, int] = {o.index: n for n, g in enumerate(groups) for o in g}
        self.stage_names: list[str] = []
        # (stage, net key, upstream stage) of every source that is another stage's output
        self.from_stages: list[tuple[str, str, str]] = []

    def build(self) -> Extraction:
        self.stage_names = self.names()
        stages = []
        stage_nets: list[set[str]] = []
        self.feeds: dict[int, list[tuple[str, str]]] = {n: [] for n in range(len(self.groups))}
        members = [self.members(n) for n in range(len(self.groups))]
        for n, (_opamps, _passives, nets) in enumerate(members):
            for net in sorted(nets):
                for driver in self.outputs.get(net, []):
                    upstream = self.group_of[driver]
                    if upstream != n:
                        self.feeds[upstream].append((net, self.stage_names[n]))
        for n, (opamps, passives, nets) in enumerate(members):
            stages.append(self.stage(n, opamps, passives, nets))
            stage_nets.append(nets)
        notes: dict[str, list[ReaderNote]] = {name: [] for name in self.stage_names}
        for n, tree in enumerate(stages):
            notes[self.stage_names[n]].extend(tree.pop("_notes"))
        stage_of_net: dict[str, int] = {}
        for n, nets in enumerate(stage_nets):
            for net in nets:
                stage_of_net.setdefault(net, n)
        for note, nets in self.board.notes:
            target = min((stage_of_net[net] for net in nets if net in stage_of_net), default=0)
            notes[self.stage_names[target]].append(note)
        tree = {"version": 1, "stages": stages}
        links = [(stage, self.writer.name(net), upstream)
                 for stage, net, upstream in self.from_stages]
        return Extraction(tree, self.writer.positions, notes, self.writer.comments, links)

    def names(self) -> list[str]:
        used: set[str] = set()
        names = []
        for group in self.groups:
            name = next((self.board.declared(o.ref).name for o in group
                         if self.board.declared(o.ref) and self.board.declared(o.ref).name),
                        None)
            if name is None:
                name = "-".join(self.writer.ref(o.ref, opamp=True).lower() for o in group)
            base, n = name, 2
            while name in used:
                name, n = f"{base}-{n}", n + 1
            used.add(name)
            names.append(name)
        return names

    def members(self, n: int) -> tuple[list[_OpAmp], list[_Passive], set[str]]:
        opamps = self.groups[n]
        passives = [p for item in self.islands.get(n, []) for p in item.passives]
        passives += self.bridges.get(n, [])
        passives.sort(key=lambda p: (p.card.line, p.card.column))
        nets: set[str] = set()
        for opamp in opamps:
            nets.update(opamp.pins.values())
        for passive in passives:
            nets.update((passive.a, passive.b))
        return opamps, passives, nets

    def stage(self, n: int, opamps: list[_OpAmp], passives: list[_Passive],
              nets: set[str]) -> dict:
        board, writer = self.board, self.writer
        at: Path = ("stages", n)
        name = self.stage_names[n]
        first = opamps[0].card
        writer.positions[at] = _at(first)
        declaration = next((board.declared(o.ref) for o in opamps if board.declared(o.ref)),
                           None)
        stage: dict = {"name": name,
                       "note": (declaration.note if declaration and declaration.note else
                                f"Extracted from {board.file}."),
                       "ground": writer.name(GROUND)}
        notes: list[ReaderNote] = []
        rails = sorted(net for net in nets if net in board.rails)
        if rails:
            stage["supplies"] = []
        for net in rails:
            volts, pos, comment = board.rails[net]
            path = at + ("supplies", len(stage["supplies"]))
            stage["supplies"].append({"net": writer.name(net), "voltage": volts})
            writer.positions[path] = pos
            writer.comments[path] = comment
        stage["opamps"] = []
        for opamp in opamps:
            path = at + ("opamps", len(stage["opamps"]))
            item: dict[str, object] = {"ref": writer.ref(opamp.ref, opamp=True)}
            if opamp.model.part is not None:
                item["part"] = opamp.model.part
            if opamp.model.params:
                item["params"] = dict(opamp.model.params)
            for pin in ("in+", "in-", "out", "v+", "v-"):
                item[pin] = writer.name(opamp.pins[pin])
            stage["opamps"].append(item)
            writer.positions[path] = _at(opamp.card)
            words = dict(zip(opamp.model.pins, opamp.card.nodes))
            for pin in ("in+", "in-", "out", "v+", "v-"):
                writer.positions[path + (pin,)] = _at(words[pin])
            writer.comments[path] = (f"{board.where(opamp.card)} {opamp.card.name.text}"
                                     f" (subcircuit {opamp.card.subcircuit.text})")
        for passive in passives:
            kind, plural = _PASSIVE[passive.letter]
            items = stage.setdefault(plural, [])
            path = at + (plural, len(items))
            items.append({"ref": writer.ref(passive.ref),
                          "nets": [writer.name(passive.a), writer.name(passive.b)],
                          "value": passive.value})
            writer.positions[path] = _at(passive.card)
            writer.positions[path + ("value",)] = _at(passive.card.value)
            writer.positions[path + ("nets",)] = _at(passive.card.nodes[0])
            writer.comments[path] = f"{board.where(passive.card)} {passive.card.name.text}" + (
                f" ({passive.card.value.text})" if passive.card.value.text != "" else "")
        own_outputs = {o.out for o in opamps}
        adjacent = set()
        for passive in passives:
            if passive.a in own_outputs:
                adjacent.add(passive.b)
            if passive.b in own_outputs:
                adjacent.add(passive.a)
        read_nets = {net for item in self.islands.get(n, []) if item.readers
                     for net in item.nets}
        sources: list[tuple[Position, dict, str]] = []
        loads: list[tuple[int, Position, dict, str]] = []
        edges = board.scope.edges
        for net in sorted(nets):
            if net in board.rails or net == GROUND:
                continue
            declared = edges.get(net)
            shown = writer.name(net)
            where = board.first_seen.get(net, _at(first))
            if declared is not None and declared.source is not None:
                sources.append((where, {"net": shown, **declared.source},
                                f"declared in the netlist map,"
                                f" {os.path.basename(declared.origin.path)}:"
                                f"{declared.origin.line}"))
            elif net in self.outputs and net not in own_outputs:
                driver = board.opamps[self.outputs[net][0]]
                upstream = self.stage_names[self.group_of[driver.index]]
                sources.append((_at(driver.card), {
                    "net": shown, "label": f"{shown} from stage {upstream}"},
                    f"the output of {driver.card.name.text}, stage {upstream}"))
                self.from_stages.append((name, net, upstream))
            elif net in board.signals:
                signal = board.signals[net]
                sources.append((_at(signal.card), {"net": shown, **signal.tree},
                                f"{board.where(signal.card)} {signal.card.name.text}"))
            elif declared is None and self.is_edge(net) and \
                    self.leads_in(net, read_nets, own_outputs, adjacent):
                label = f"{shown} from off the board (assumed: an ideal voltage source at 0 V)"
                sources.append((where, {"net": shown, "label": label},
                                "assumed: the net leaves the board"))
                notes.append(self.assumed(where, f"assumed: {shown} leaves the board and is"
                             " taken as an ideal voltage source at 0 V with no known range"
                             " (the DC figures see 0 V there); declare it"
                             f" with (at-net {board.spelling.get(net, shown)} (source ...)) in"
                             " the netlist map", label))
            if declared is not None and declared.load is not None:
                loads.append((0, where, {"net": shown, **declared.load},
                              f"declared in the netlist map,"
                              f" {os.path.basename(declared.origin.path)}:"
                              f"{declared.origin.line}"))
            elif declared is None and self.is_edge(net) and \
                    not self.leads_in(net, read_nets, own_outputs, adjacent):
                loads.append((1, where, {"net": shown}, "assumed: the net leaves the board;"
                              " no load is known"))
                notes.append(self.assumed(where, f"assumed: {shown} leaves the board with no"
                             " load known, so none is analysed; declare it with (at-net"
                             f" {board.spelling.get(net, shown)} (load ...)) in the netlist"
                             " map", f"load {shown}"))
        for net, downstream in self.feeds[n]:
            loads.append((2, board.first_seen.get(net, _at(first)),
                          {"net": writer.name(net), "feeds": {"stage": downstream,
                                                              "net": writer.name(net)}},
                          f"the input of stage {downstream}"))
        output = declaration.output if declaration and declaration.output else None
        if output is not None:
            wanted = writer.name(key(output)) if key(output) in board.spelling else output
            loads.sort(key=lambda item: item[2]["net"] != wanted)
            if not any(item[2]["net"] == wanted for item in loads):
                loads.insert(0, (0, _at(first), {"net": wanted}, "the stage's output, by the"
                                 " netlist map"))
        else:
            loads.sort(key=lambda item: item[0])
        if not loads:
            chosen = self.output_opamp(opamps)
            loads.append((3, _at(chosen.card), {"net": writer.name(chosen.out)},
                          f"the output of {chosen.card.name.text}"))
        sources.sort(key=lambda item: (item[0].line, item[0].column))
        self.fill_markers(stage, sources, loads, nets, notes, first)
        for position, tree, comment in sources:
            path = at + ("sources", len(stage.setdefault("sources", [])))
            stage["sources"].append(tree)
            writer.positions[path] = position
            writer.comments[path] = comment
        for _rank, position, tree, comment in loads:
            path = at + ("loads", len(stage.setdefault("loads", [])))
            stage["loads"].append(tree)
            writer.positions[path] = position
            writer.comments[path] = comment
        if declaration is not None:
            if declaration.require:
                stage["require"] = dict(declaration.require)
                writer.positions[at + ("require",)] = _at(first)
                writer.comments[at + ("require",)] = (
                    f"from the netlist map, {os.path.basename(declaration.origin.path)}:"
                    f"{declaration.origin.line}")
            if declaration.waive:
                stage["waive"] = [dict(w) for w in declaration.waive]
        stage["_notes"] = notes
        return stage

    @staticmethod
    def leads_in(net: str, read_nets: set[str], own_outputs: set[str], adjacent: set[str]
                 ) -> bool:
        """Whether an edge net is an input: on an island an op-amp reads, and neither an
        output nor one passive away from one (then it is an output, e.g. behind Riso)."""
        return net in read_nets and net not in own_outputs and net not in adjacent

    def is_edge(self, net: str) -> bool:
        board = self.board
        return (board.degree[net] == 1 or net in board.edge_nets) and net not in board.rails

    def assumed(self, where: Position, message: str, element: str) -> ReaderNote:
        return ReaderNote(ASSUMED, message, Origin(self.board.path, where.line, where.column),
                          (element,))

    def output_opamp(self, opamps: list[_OpAmp]) -> _OpAmp:
        """The op-amp whose output no other op-amp of the stage reads (else the first)."""
        read = set()
        for item in self.islands.get(self.group_of[opamps[0].index], []):
            for driver in item.drivers:
                if item.readers - {driver}:
                    read.add(driver)
        for opamp in opamps:
            for net in opamp.inputs:
                read.update(i for i in self.outputs.get(net, []) if i != opamp.index)
        return next((o for o in opamps if o.index not in read), opamps[0])

    def fill_markers(self, stage: dict, sources, loads, nets: set[str], notes, first) -> None:
        """Loads that only mark nets the stage would otherwise leave dangling: nets that
        also go to elements ampcheck does not analyse (0 F: they change nothing)."""
        writer = self.writer
        pins: Counter = Counter()
        for item in stage["opamps"]:
            for pin in ("in+", "in-", "out"):
                pins[item[pin]] += 1
        for plural in ("resistors", "capacitors", "inductors"):
            for item in stage.get(plural, []):
                pins.update(item["nets"])
        for _position, tree, _comment in sources:
            pins[tree["net"]] += 1
        for _rank, _position, tree, _comment in loads:
            if "resistance" in tree or "capacitance" in tree or "feeds" in tree:
                pins[tree["net"]] += 1
        rails = {writer.name(net) for net in nets if net in self.board.rails or net == GROUND}
        marked = {tree["net"] for _r, _p, tree, _c in loads}
        for net in sorted(nets):
            shown = writer.name(net)
            if shown in rails or pins[shown] >= 2:
                continue
            if shown in marked:
                for _rank, _position, tree, _comment in loads:
                    if tree["net"] == shown and len(tree) == 1:
                        tree["capacitance"] = 0.0
                        break
                continue
            where = self.board.first_seen.get(net, _at(first))
            loads.append((4, where, {"net": shown, "capacitance": 0.0},
                          "a marker: the net also goes to elements that are not analysed"))
            if net not in self.board.unread_nets:
                notes.append(self.assumed(where, f"assumed: {shown} has one connection in"
                             " this stage and nothing known beyond it", f"load {shown}"))
