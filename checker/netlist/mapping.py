"""The netlist map: what a netlist's names mean to ampcheck, in our s-expression syntax.

A netlist says ``XU1 0 fb vcc vee out OPAMP_X``; only a map says that ``OPAMP_X`` is an
op-amp of the part ``cmos-rrio`` with its pins in the order in+, in-, v+, v-, out. The
map file (ending ``.netmap``) is read by the stage format's s-expression reader with its
own grammar table, below, and found through the configuration (``netlist-map``) or given
with ``--netlist-map``. Its values are stage-format values (``M`` is mega), not netlist
values.

    (version 1)
    (opamp-model OPAMP_X (part cmos-rrio) (pins in+ in- v+ v- out))
    (connector CONN_2)                      ; instances are the board's edge
    (rail vref 2.5V)                        ; a supply the netlist has no source for
    (ground agnd)                           ; another name of ground (node 0 always is)
    (at-net sensor (source (range 0V 1V) (impedance 1k)))
    (at-net logger (load (resistance 100k) (capacitance 1n)))
    (stage-of U1 (name front-end) (join U2) (output out) (require (gain -10)))
    (board heronpost.cir (rail ...) (at-net ...) (stage-of ...))   ; for one file only
"""

from __future__ import annotations

import os
from dataclasses import field
from checker.record import record
from functools import lru_cache

from checker.io.grammar import FORMS, PART_PARAMETERS, REQUIREMENTS, Child, Form
from checker.io.load import read_text
from checker.io.positions import InputErrors, InputProblem, Path, Position, locate, reported
from checker.io.sexp_reader import read_sexp
from checker.model import Origin
from checker.units import UnitError, parse_value

OPAMP_PINS = ("in+", "in-", "out", "v+", "v-")
UNUSED_PIN = "nc"
MAX_PINS = 16
MAX_JOINED = 16

_SCALAR = "scalar"
_SCOPE = {
    "rail": Child("rails", "rail", repeated=True),
    "ground": Child("grounds", _SCALAR, repeated=True),
    "at-net": Child("at-nets", "at-net", repeated=True),
    "stage-of": Child("stage-ofs", "stage-of", repeated=True),
}

MAP_FORMS: dict[str, Form] = {
    "document": Form(children={
        "version": Child("version", _SCALAR),
        "opamp-model": Child("opamp-models", "opamp-model", repeated=True),
        "connector": Child("connectors", _SCALAR, repeated=True),
        **_SCOPE,
        "board": Child("boards", "board", repeated=True),
    }),
    "opamp-model": Form(("name",), {
        "part": Child("part", _SCALAR),
        "params": Child("params", "params"),
        "pins": Child("pins", "pins"),
    }),
    "pins": Form(tuple(f"p{i}?" for i in range(1, MAX_PINS + 1))),
    "params": FORMS["params"],
    "rail": Form(("net", "voltage")),
    "at-net": Form(("net",), {
        "source": Child("source", "edge-source"),
        "load": Child("load", "edge-load"),
    }),
    "edge-source": Form((), dict(FORMS["source"].children)),
    "edge-load": Form((), {key: child for key, child in FORMS["load"].children.items()
                           if key != "feeds"}),
    "stage-of": Form(("ref",), {
        "name": Child("name", _SCALAR),
        "note": Child("note", _SCALAR),
        "output": Child("output", _SCALAR),
        "join": Child("join", "join"),
        "require": Child("require", "require"),
        "waive": Child("waive", "waive", repeated=True),
    }),
    "join": Form(tuple(f"r{i}?" for i in range(1, MAX_JOINED + 1))),
    "require": FORMS["require"],
    "waive": FORMS["waive"],
    "board": Form(("file",), dict(_SCOPE)),
}

# Source and load keywords -> the quantity their values are (voltage sources' range,
# amplitude and offset become currents for a current source).
_SOURCE_KINDS = {"range": "signal", "amplitude": "signal", "offset": "signal",
                 "band": "frequency", "impedance": "resistance", "capacitance": "capacitance"}
_LOAD_KINDS = {"resistance": "resistance", "capacitance": "capacitance"}


@record(frozen=True)
class OpAmpModel:
    """A subcircuit (or model) name that means an op-amp: its part and pin order."""

    name: str
    pins: tuple[str, ...]  # in the subcircuit's node order: in+, in-, out, v+, v- or nc
    part: str | None
    params: dict | None  # the stage format's (params ...) tree
    origin: Origin


@record(frozen=True)
class EdgeDeclaration:
    """What sits at a net: a source driving it and/or a load on it (stage-format trees
    without their net)."""

    net: str
    origin: Origin
    source: dict | None = None
    load: dict | None = None
    source_origin: Origin | None = None
    load_origin: Origin | None = None


@record(frozen=True)
class StageDeclaration:
    """Options for the stage an op-amp ends up in."""

    ref: str
    origin: Origin
    name: str | None = None
    note: str | None = None
    output: str | None = None
    join: tuple[str, ...] = ()
    require: dict | None = None
    waive: tuple[dict, ...] = ()


@record(frozen=True)
class Scope:
    """Rails, grounds, edge and stage declarations: the whole map's, or one board's."""

    rails: dict[str, tuple[str, float, Origin]] = field(default_factory=dict)  # by key
    grounds: dict[str, Origin] = field(default_factory=dict)
    edges: dict[str, EdgeDeclaration] = field(default_factory=dict)
    stages: dict[str, StageDeclaration] = field(default_factory=dict)

    def merged(self, board: Scope) -> Scope:
        """This scope with ``board``'s declarations on top."""
        return Scope({**self.rails, **board.rails}, {**self.grounds, **board.grounds},
                     {**self.edges, **board.edges}, {**self.stages, **board.stages})


@record(frozen=True)
class NetlistMap:
    path: str
    models: dict[str, OpAmpModel] = field(default_factory=dict)  # by case-folded name
    connectors: dict[str, Origin] = field(default_factory=dict)
    common: Scope = field(default_factory=Scope)
    boards: dict[str, Scope] = field(default_factory=dict)  # by file name

    def for_file(self, path: str) -> Scope:
        """The declarations that hold for the netlist at ``path``."""
        name = os.path.basename(path)
        board = self.boards.get(name) or self.boards.get(os.path.splitext(name)[0])
        return self.common if board is None else self.common.merged(board)


def key(name: str) -> str:
    """A netlist name as the convention compares it."""
    return str(name).casefold()


class _MapBuilder:
    def __init__(self, path: str, positions: dict[Path, Position]):
        self.path = path
        self.positions = positions
        self.problems: list[InputProblem] = []

    def origin(self, at: Path) -> Origin:
        pos = locate(self.positions, at)
        return Origin(self.path, pos.line, pos.column)

    def fail(self, at: Path, message: str) -> None:
        pos = locate(self.positions, at)
        self.problems.append(InputProblem(self.path, pos.line, pos.column, message))

    def value(self, value, kind: str, at: Path, where: str, positive=False,
              signed=False) -> float | None:
        try:
            number = parse_value(value, kind)
        except UnitError as error:
            self.fail(at, f"{where}: {error}")
            return None
        if positive and number <= 0:
            self.fail(at, f"{where} must be greater than zero, not {value!r}")
            return None
        if kind not in ("voltage", "gain") and number < 0 and not signed:
            self.fail(at, f"{where} cannot be negative ({value!r})")
            return None
        return number

    def names(self, node: dict, prefix: str, limit: int) -> list[str]:
        return [str(node[f"{prefix}{i}"]) for i in range(1, limit + 1) if f"{prefix}{i}" in node]

    # -- forms -------------------------------------------------------------------------
    def model(self, node: dict, at: Path) -> OpAmpModel | None:
        name = str(node["name"])
        where = f"opamp-model {name}"
        if "part" not in node and "params" not in node:
            self.fail(at, f"{where} needs (part NAME) or (params ...): which op-amp it is")
        for keyword, value in (node.get("params") or {}).items():
            kind = PART_PARAMETERS[keyword]
            self.value(value, kind, at + ("params", keyword), f"{keyword} of {where}",
                       positive=keyword in ("open-loop-gain", "gbw", "second-pole",
                                            "min-stable-gain"))
        pins = self.names(node.get("pins") or {}, "p", MAX_PINS)
        if "pins" not in node:
            self.fail(at, f"{where} needs (pins ...): the op-amp pin of each subcircuit node"
                          f" in order, e.g. (pins {' '.join(OPAMP_PINS)})")
            return None
        unknown = [p for p in pins if p not in OPAMP_PINS and p != UNUSED_PIN]
        if unknown:
            self.fail(at + ("pins",), f"{where}: unknown pin {unknown[0]!r}; the pins are"
                                      f" {', '.join(OPAMP_PINS)} and {UNUSED_PIN} for a node"
                                      " ampcheck leaves unconnected")
            return None
        for pin in OPAMP_PINS:
            if pins.count(pin) != 1:
                self.fail(at + ("pins",), f"{where}: (pins ...) must name {pin} exactly once"
                                          f" (it names it {pins.count(pin)} times)")
                return None
        return OpAmpModel(name, tuple(pins), node.get("part"), node.get("params"),
                          self.origin(at))

    def scope(self, node: dict, at: Path, where: str) -> Scope:
        scope = Scope()
        for i, item in enumerate(node.get("rails", [])):
            item_at = at + ("rails", i)
            net = str(item["net"])
            if key(net) in scope.rails:
                self.fail(item_at, f"rail {net} is declared twice in {where}")
                continue
            volts = self.value(item["voltage"], "voltage", item_at + ("voltage",),
                               f"voltage of rail {net}")
            if volts is not None:
                scope.rails[key(net)] = (net, volts, self.origin(item_at))
        for i, net in enumerate(node.get("grounds", [])):
            scope.grounds[key(net)] = self.origin(at + ("grounds", i))
        for i, item in enumerate(node.get("at-nets", [])):
            item_at = at + ("at-nets", i)
            net = str(item["net"])
            if key(net) in scope.edges:
                self.fail(item_at, f"(at-net {net} ...) appears twice in {where}")
                continue
            if "source" not in item and "load" not in item:
                self.fail(item_at, f"(at-net {net} ...) needs a (source ...) or a (load ...)")
                continue
            if key(net) in scope.rails or key(net) in scope.grounds or key(net) == "0":
                self.fail(item_at, f"(at-net {net} ...): {net} is a rail or ground")
                continue
            if "source" in item:
                self.source(item["source"], item_at + ("source",), f"the source at {net}")
            if "load" in item:
                self.load(item["load"], item_at + ("load",), f"the load at {net}")
            scope.edges[key(net)] = EdgeDeclaration(
                net, self.origin(item_at), item.get("source"), item.get("load"),
                self.origin(item_at + ("source",)) if "source" in item else None,
                self.origin(item_at + ("load",)) if "load" in item else None)
        for i, item in enumerate(node.get("stage-ofs", [])):
            item_at = at + ("stage-ofs", i)
            ref = str(item["ref"])
            if key(ref) in scope.stages:
                self.fail(item_at, f"(stage-of {ref} ...) appears twice in {where}")
                continue
            if "require" in item:
                self.requirements(item["require"], item_at + ("require",))
            name = item.get("name")
            if name is not None and not _valid_name(str(name)):
                self.fail(item_at + ("name",), f"stage name {name!r} is not a valid name"
                                               " (letters, digits, _ . + - /)")
            scope.stages[key(ref)] = StageDeclaration(
                ref, self.origin(item_at), None if name is None else str(name),
                item.get("note"), item.get("output"),
                tuple(self.names(item.get("join") or {}, "r", MAX_JOINED)),
                item.get("require"), tuple(item.get("waive", [])))
        return scope

    def source(self, node: dict, at: Path, where: str) -> None:
        kind = node.get("kind", "voltage")
        if kind not in ("voltage", "current"):
            self.fail(at + ("kind",), f"kind of {where} must be voltage or current,"
                                      f" not {kind!r}")
            return
        if "range" in node and "amplitude" in node:
            self.fail(at, f"{where}: give either (range ...) or (amplitude ...), not both")
        if "offset" in node and "amplitude" not in node:
            self.fail(at + ("offset",), f"{where}: offset goes with amplitude")
        if "capacitance" in node and kind == "voltage":
            self.fail(at + ("capacitance",), f"{where}: capacitance belongs to current"
                                             " sources; for a voltage source draw a capacitor")
        for keyword, quantity in _SOURCE_KINDS.items():
            if keyword not in node:
                continue
            signed = quantity == "signal"
            if signed:
                quantity = kind
            values = node[keyword] if isinstance(node[keyword], list) else [node[keyword]]
            for j, value in enumerate(values):
                step = (keyword, j) if isinstance(node[keyword], list) else (keyword,)
                self.value(value, quantity, at + step, f"{keyword} of {where}",
                           positive=keyword == "impedance" and kind == "current", signed=signed)

    def load(self, node: dict, at: Path, where: str) -> None:
        for keyword, quantity in _LOAD_KINDS.items():
            if keyword in node:
                self.value(node[keyword], quantity, at + (keyword,), f"{keyword} of {where}",
                           positive=keyword == "resistance")

    def requirements(self, node: dict, at: Path) -> None:
        for keyword, value in node.items():
            if keyword == "gain" and isinstance(value, (int, float)):
                continue
            self.value(value, REQUIREMENTS[keyword], at + (keyword,),
                       f"{keyword} in the requirements",
                       positive=keyword in ("input-resistance", "bandwidth", "cmrr"))


def _valid_name(name: str) -> bool:
    import re

    return re.fullmatch(r"[A-Za-z0-9_.+\-/]+", name) is not None


def parse_map(text: str, path: str) -> NetlistMap:
    """The netlist map in ``text``; InputErrors with every problem, located."""
    try:
        tree, positions = read_sexp(text, path, MAP_FORMS)
    except InputErrors as errors:
        if len(errors.problems) == 1 and errors.problems[0].message.startswith(
                "the file holds no forms"):
            raise InputErrors([InputProblem(path, 1, 1, "the netlist map holds no forms:"
                                            " expected (opamp-model NAME ...) and the like")]
                              ) from None
        raise
    builder = _MapBuilder(path, positions)
    if tree.get("version", 1) != 1:
        builder.fail(("version",), f"netlist map version {tree['version']!r}: this"
                                   " ampcheck reads version 1")
    models: dict[str, OpAmpModel] = {}
    for i, node in enumerate(tree.get("opamp-models", [])):
        model = builder.model(node, ("opamp-models", i))
        if model is None:
            continue
        if key(model.name) in models:
            builder.fail(("opamp-models", i), f"opamp-model {model.name} is declared twice"
                                              f" (first at line {models[key(model.name)].origin.line})")
            continue
        models[key(model.name)] = model
    connectors = {}
    for i, name in enumerate(tree.get("connectors", [])):
        if key(name) in models:
            builder.fail(("connectors", i), f"{name} is declared both as an op-amp model"
                                            " and as a connector")
        connectors[key(name)] = builder.origin(("connectors", i))
    common = builder.scope(tree, (), "the map")
    boards: dict[str, Scope] = {}
    for i, node in enumerate(tree.get("boards", [])):
        name = str(node["file"])
        if name in boards:
            builder.fail(("boards", i), f"(board {name} ...) appears twice")
            continue
        boards[name] = builder.scope(node, ("boards", i), f"board {name}")
    if builder.problems:
        raise InputErrors(reported(sorted(builder.problems, key=lambda p: (p.line, p.column))))
    return NetlistMap(path, models, connectors, common, boards)


@lru_cache(maxsize=32)
def load_map(path: str) -> NetlistMap:
    """Read the netlist map file at ``path`` (cached per path for one run)."""
    return parse_map(read_text(path), path)


def check_parts(netlist_map: NetlistMap, library: dict) -> None:
    """InputErrors, at the map's lines, for op-amp models naming parts not in ``library``."""
    import difflib

    problems = []
    for model in netlist_map.models.values():
        if model.part is not None and model.part not in library:
            close = difflib.get_close_matches(model.part, list(library), n=1, cutoff=0.5)
            hint = f"; did you mean {close[0]!r}?" if close else (
                "; `ampcheck parts` lists the parts")
            problems.append(InputProblem(model.origin.path, model.origin.line,
                                         model.origin.column, f"opamp-model {model.name}:"
                                         f" unknown part {model.part!r}{hint}"))
    if problems:
        raise InputErrors(problems)
