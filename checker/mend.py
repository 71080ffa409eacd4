"""The verified fixes of a stage file, written into a copy of its text.

Every fix that proposes changes (checker/changes.py) was applied to a copy of its stage
and re-checked by every rule (checker/engine.py); only fixes that cleared their finding
and were not withheld are taken, and none of a waived or baselined finding. Each change
becomes edits at the reader's recorded positions (checker/io/patch.py), so comments and
layout survive. Fixes are taken in report order; one that touches an element an earlier
fix already changed (or adds a designator an earlier one added) is left out and said so,
since each fix was verified alone. A part to choose (more GBW, more slew rate) is not
an edit of this file and is left out with the reason; so is a change of a load, which is
what the stage must drive, not a choice of its design.
"""

from __future__ import annotations

from dataclasses import field
from checker.record import record

from checker import changes as ch
from checker.io.patch import Patcher, PatchError
from checker.value_style import Style, format_fraction, format_value

PASSIVE_LISTS = {"resistor": "resistors", "capacitor": "capacitors", "inductor": "inductors"}
_UNIT_OF = {"resistor": "Ω", "capacitor": "F", "inductor": "H"}


@record(frozen=True)
class Outcome:
    """One fix considered: applied, or left out with why."""

    stage: str
    rule: str
    elements: tuple[str, ...]
    line: int
    applied: bool
    why: str = ""  # for one left out
    text: str = ""  # the fix's own words


@record
class Mended:
    text: str
    outcomes: list[Outcome] = field(default_factory=list)

    @property
    def applied(self) -> list[Outcome]:
        return [o for o in self.outcomes if o.applied]


def fixable(finding) -> bool:
    """A finding whose fix is an edit verified by the re-check."""
    suggestion = finding.suggestion
    return (suggestion is not None and bool(suggestion.changes) and not suggestion.withheld
            and suggestion.check is not None and suggestion.check.clears
            and not finding.suppressed)


def claims(change) -> set[str]:
    """The elements (and loads, as 'load NET') a change touches or creates."""
    if isinstance(change, (ch.SetValue, ch.SetPowerRating, ch.RemovePassive)):
        return {change.element}
    if isinstance(change, ch.SetTolerance):
        return set(change.elements)
    if isinstance(change, ch.AddPassive):
        return {change.ref}
    if isinstance(change, (ch.SwapInputs, ch.SetPartParameter, ch.UsePart)):
        return {change.opamp}
    if isinstance(change, ch.SetLoad):
        return {f"load {change.net}"}
    if isinstance(change, ch.IsolateOutput):
        return {change.ref, f"load {change.net}"}
    if isinstance(change, ch.SeriesAtInput):
        return {change.ref, change.opamp}
    return set()


def refusal(change) -> str | None:
    """Why a change is not an edit of the file, or None."""
    if isinstance(change, ch.SetPartParameter):
        return (f"it asks for a part for {change.opamp} with a different"
                f" {change.attribute.split('_')[0]}: choose one and name it")
    if isinstance(change, ch.UsePart) and not change.part.name:
        return f"it asks for another part for {change.opamp}: choose one and name it"
    if isinstance(change, ch.RemovePassive):
        return f"it removes {change.element}: left to the designer"
    if isinstance(change, ch.SetLoad):
        # the load is what the stage must drive, not a part of the design: changing it
        # in the file would make the stage pass by restating its requirement
        return (f"it changes the load on {change.net}, which the stage has to drive:"
                " buffer the output, or correct the load if it was written wrongly")
    return None


def mend_text(text: str, parsed, findings_by_stage: dict[str, list]) -> Mended:
    """``text`` (the file ``parsed`` was read from) with the verified fixes of
    ``findings_by_stage`` (stage name -> findings in report order) written in."""
    patcher = Patcher(text, parsed.syntax, parsed.positions)
    mended = Mended(text)
    for index, stage_tree in enumerate(parsed.tree.get("stages", [])):
        claimed: set[str] = set()
        taken_by: dict[str, str] = {}
        editor = _StageEditor(patcher, stage_tree, ("stages", index))
        for finding in findings_by_stage.get(stage_tree.get("name"), []):
            if not fixable(finding):
                continue
            outcome = dict(stage=stage_tree.get("name"), rule=finding.rule,
                           elements=finding.elements, line=finding.line,
                           text=finding.suggestion.text)
            changes = finding.suggestion.changes
            touched = set().union(*(claims(c) for c in changes))
            reasons = [r for r in map(refusal, changes) if r]
            clash = sorted(touched & claimed)
            if reasons:
                mended.outcomes.append(Outcome(**outcome, applied=False, why=reasons[0]))
                continue
            if clash:
                mended.outcomes.append(Outcome(
                    **outcome, applied=False,
                    why=f"{', '.join(clash)} already changed by the fix for"
                        f" {taken_by[clash[0]]}, applied first"))
                continue
            before = len(patcher.edits)
            try:
                for change in changes:
                    editor.apply(change)
            except PatchError as error:
                del patcher.edits[before:]
                mended.outcomes.append(Outcome(**outcome, applied=False,
                                               why=f"cannot edit the file: {error}"))
                continue
            claimed |= touched
            taken_by.update(dict.fromkeys(touched, finding.rule))
            mended.outcomes.append(Outcome(**outcome, applied=True))
    mended.text = patcher.result()
    return mended


class _StageEditor:
    """One stage's changes as edits: elements found by designator in the tree."""

    def __init__(self, patcher: Patcher, tree: dict, path: tuple):
        self.patcher = patcher
        self.tree = tree
        self.path = path
        self.sexp = patcher.syntax == "sexp"
        self.added: dict[str, list[dict]] = {}  # list key -> items added (JSON lists made)

    def element(self, ref: str) -> tuple[tuple, str, dict]:
        for kind, key in PASSIVE_LISTS.items():
            for j, item in enumerate(self.tree.get(key, [])):
                if item.get("ref") == ref:
                    return self.path + (key, j), kind, item
        for j, item in enumerate(self.tree.get("opamps", [])):
            if item.get("ref") == ref:
                return self.path + ("opamps", j), "opamp", item
        raise PatchError(f"no element {ref} in the file")

    def style(self, kind: str) -> Style:
        """The style of the stage's values of this kind, else of any passive."""
        for key in (PASSIVE_LISTS[kind], *PASSIVE_LISTS.values()):
            for item in self.tree.get(key, []):
                if "value" in item:
                    return Style.of(item["value"], same_kind=key == PASSIVE_LISTS[kind])
        return Style()

    def text(self, value) -> str:
        """A value as the file writes it: JSON strings quoted."""
        if self.sexp:
            return str(value)
        import json

        return json.dumps(value, ensure_ascii=False)

    def set(self, element: tuple, key: str, value) -> None:
        self.patcher.set_child(element, key, key, self.text(value))

    def apply(self, change) -> None:
        if isinstance(change, ch.SetValue):
            path, kind, item = self.element(change.element)
            style = Style.of(item.get("value"))
            self.patcher.replace_value(path + ("value",), self.text(format_value(
                change.value, style, kind == "resistor", _UNIT_OF.get(kind, ""))))
        elif isinstance(change, ch.SetTolerance):
            for ref in change.elements:
                path, _, item = self.element(ref)
                number = isinstance(item.get("tolerance"), (int, float))
                self.set(path, "tolerance", change.tolerance if number and not self.sexp
                         else format_fraction(change.tolerance))
        elif isinstance(change, ch.SetPowerRating):
            path, _, item = self.element(change.element)
            self.set(path, "power-rating", format_value(
                change.watts, Style.of(item.get("power-rating", "1W")), unit="W"))
        elif isinstance(change, ch.AddPassive):
            self.add(change.kind, change.ref, change.net_a, change.net_b, change.value,
                     change.tolerance)
        elif isinstance(change, ch.SwapInputs):
            path, _, item = self.element(change.opamp)
            self.set(path, "in+", item["in-"])
            self.set(path, "in-", item["in+"])
        elif isinstance(change, ch.SetLoad):
            for path, item in self.loads(change.net):
                style = Style.of(item.get("resistance", "1k"))
                self.set(path, "resistance", format_value(change.resistance_ohm, style,
                                                          True, "Ω"))
        elif isinstance(change, ch.UsePart):
            path, _, _ = self.element(change.opamp)
            self.set(path, "part", change.part.name)
        elif isinstance(change, ch.IsolateOutput):
            target = ch.isolated_net(change.net)
            for path, _ in self.loads(change.net):
                self.patcher.replace_value(path + ("net",), self.text(target))
            self.add("resistor", change.ref, change.net, target, change.ohms, None)
        elif isinstance(change, ch.SeriesAtInput):
            path, _, item = self.element(change.opamp)
            pin = ch.input_net(change.opamp)
            self.set(path, "in+", pin)
            self.add("resistor", change.ref, pin, item["in+"], change.ohms, None)
        else:
            raise PatchError(f"no file edit for {type(change).__name__}")

    def loads(self, net: str):
        found = [(self.path + ("loads", j), item)
                 for j, item in enumerate(self.tree.get("loads", [])) if item.get("net") == net]
        if not found:
            raise PatchError(f"no load on {net} in the file")
        return found

    def add(self, kind: str, ref: str, net_a: str, net_b: str, value: float,
            tolerance: float | None) -> None:
        """A new passive on its own line after its kind's last (else the last passive,
        else the last op-amp), with that sibling's indent."""
        written = format_value(value, self.style(kind), kind == "resistor",
                               _UNIT_OF[kind])
        item = {"ref": ref, "nets": [net_a, net_b], "value": written}
        if tolerance is not None:
            item["tolerance"] = format_fraction(tolerance)
        form = f"({kind} {ref} {net_a} {net_b} {written}" + (
            f" (tolerance {item['tolerance']}))" if tolerance is not None else ")")
        key = PASSIVE_LISTS[kind]
        after = self.last_sibling(key)
        if self.sexp or after[-2] == key:
            self.patcher.add_item(after, form, item)
        elif key in self.added:  # a list this run made: one more item in it
            raise PatchError(f"a second new {kind} in one stage")
        else:
            self.added[key] = [item]
            self.patcher.add_list(after[:-1], key, item)

    def last_sibling(self, key: str) -> tuple:
        """The item the new one follows: the last of its own list, else the last
        passive, else the last op-amp (in file order)."""
        for keys in ((key,), tuple(PASSIVE_LISTS.values()), ("opamps",)):
            items = [self.path + (k, j) for k in keys for j in range(len(self.tree.get(k, [])))]
            if items:
                return max(items, key=self.patcher.offset)
        raise PatchError("the stage has no element to place the new one after")
