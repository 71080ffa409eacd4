"""The s-expression grammar of the stage format, as data.

Both syntaxes mean the same plain tree (dicts, lists, strings and numbers). This table
says how each s-expression form maps onto that tree, so one small walker converts in both
directions (see sexp_reader and sexp_writer). The JSON Schema built from this table (``schema.py``)
then validates the tree whichever syntax it came from.

A form is ``(keyword positional... (child ...)...)``:

* ``positional`` names the tree keys filled, in order, by the leading atoms; a name
  ending in ``*2`` takes two atoms as a list (``nets*2`` -> ``"nets": [a, b]``) and a
  name ending in ``?`` may be left out at the end.
* ``children`` maps a child keyword to ``Child(key, shape, repeated)``: ``scalar`` takes
  one atom, ``pair`` two atoms as a list, ``form`` a nested form named by ``shape``
  details; ``repeated`` children collect into a list under ``key``.
"""

from __future__ import annotations

from dataclasses import field
from checker.record import record


@record(frozen=True)
class Child:
    key: str
    shape: str  # "scalar" | "pair" | name of a Form
    repeated: bool = False


@record(frozen=True)
class Form:
    positional: tuple[str, ...] = ()
    children: dict[str, Child] = field(default_factory=dict)


# Parameters an op-amp part may carry, each a scalar child: keyword -> quantity kind.
PART_PARAMETERS: dict[str, str] = {
    "open-loop-gain": "gain",
    "gbw": "frequency",
    "second-pole": "frequency",
    "slew-rate": "slew-rate",
    "offset-voltage": "voltage",
    "bias-current": "current",
    "offset-current": "current",
    "input-capacitance-cm": "capacitance",
    "input-capacitance-diff": "capacitance",
    "input-resistance": "resistance",
    "output-resistance": "resistance",
    "output-headroom-high": "voltage",
    "output-headroom-low": "voltage",
    "headroom-load": "resistance",
    "output-current": "current",
    "input-range-low": "voltage",
    "input-range-high": "voltage",
    "supply-min": "voltage",
    "supply-max": "voltage",
    "supply-abs-max": "voltage",
    "voltage-noise": "voltage-noise",
    "current-noise": "current-noise",
    "min-stable-gain": "gain",
}

# Requirements a stage may state: keyword -> quantity kind.
REQUIREMENTS: dict[str, str] = {
    "gain": "gain",
    "gain-tolerance": "percentage",
    "input-resistance": "resistance",
    "bandwidth": "frequency",
    "phase-margin": "angle",
    "headroom": "voltage",
    "dc-error": "voltage",
    "noise": "voltage",
    "cmrr": "gain",
}

_PARAMS = {name: Child(name, "scalar") for name in PART_PARAMETERS}
_WAIVE = {"waive": Child("waive", "waive", repeated=True)}
_TOLERANCE = {"tolerance": Child("tolerance", "scalar"), **_WAIVE}

FORMS: dict[str, Form] = {
    "document": Form(children={
        "version": Child("version", "scalar"),
        "part": Child("parts", "part", repeated=True),
        "stage": Child("stages", "stage", repeated=True),
    }),
    "part": Form(("name",), {
        "class": Child("class", "scalar"),
        "note": Child("note", "scalar"),
        **_PARAMS,
    }),
    "params": Form((), dict(_PARAMS)),
    "stage": Form(("name",), {
        "note": Child("note", "scalar"),
        "ground": Child("ground", "scalar"),
        "supply": Child("supplies", "supply", repeated=True),
        "opamp": Child("opamps", "opamp", repeated=True),
        "resistor": Child("resistors", "resistor", repeated=True),
        "capacitor": Child("capacitors", "capacitor", repeated=True),
        "inductor": Child("inductors", "inductor", repeated=True),
        "source": Child("sources", "source", repeated=True),
        "load": Child("loads", "load", repeated=True),
        "require": Child("require", "require"),
        # (mains isolated|not-isolated): the stage is derived from the mains (a caution).
        "mains": Child("mains", "scalar"),
        **_WAIVE,
    }),
    # (supply NET VOLTAGE (range LOW HIGH) (mains isolated|not-isolated)): a rail, the
    # span it may take (a battery), and whether it is derived from the mains, through
    # isolation or not (a caution either way).
    "supply": Form(("net", "voltage"), {"mains": Child("mains", "scalar"),
                                        "range": Child("range", "pair")}),
    "opamp": Form(("ref",), {
        "part": Child("part", "scalar"),
        "params": Child("params", "params"),
        "in+": Child("in+", "scalar"),
        "in-": Child("in-", "scalar"),
        "out": Child("out", "scalar"),
        "v+": Child("v+", "scalar"),
        "v-": Child("v-", "scalar"),
        **_WAIVE,
    }),
    "resistor": Form(("ref", "nets*2", "value"), {
        **_TOLERANCE,
        "power-rating": Child("power-rating", "scalar"),
    }),
    "capacitor": Form(("ref", "nets*2", "value"), dict(_TOLERANCE)),
    "inductor": Form(("ref", "nets*2", "value"), dict(_TOLERANCE)),
    "source": Form(("net",), {
        "label": Child("label", "scalar"),
        "kind": Child("kind", "scalar"),
        "range": Child("range", "pair"),
        "amplitude": Child("amplitude", "scalar"),
        "offset": Child("offset", "scalar"),
        "band": Child("band", "pair"),
        "impedance": Child("impedance", "scalar"),
        "capacitance": Child("capacitance", "scalar"),
        **_WAIVE,
    }),
    "load": Form(("net",), {
        "resistance": Child("resistance", "scalar"),
        "capacitance": Child("capacitance", "scalar"),
        "feeds": Child("feeds", "feeds"),
        **_WAIVE,
    }),
    "feeds": Form(("stage", "net?")),
    # (waive RULE-ID "reason"): accept a rule's finding on this stage or element.
    "waive": Form(("rule", "reason?")),
    "require": Form((), {name: Child(name, "scalar") for name in REQUIREMENTS}),
}


def positional_slots(form: Form) -> list[tuple[str, int, bool]]:
    """(tree key, atom count, optional) for each positional field of ``form``."""
    slots = []
    for name in form.positional:
        if name.endswith("*2"):
            slots.append((name[:-2], 2, False))
        elif name.endswith("?"):
            slots.append((name[:-1], 1, True))
        else:
            slots.append((name, 1, False))
    return slots


def child_by_key(form: Form) -> dict[str, tuple[str, Child]]:
    """Reverse map of ``form.children``: tree key -> (keyword, Child)."""
    return {child.key: (keyword, child) for keyword, child in form.children.items()}
