"""Read the trade's plain-text netlist into plain records, each with its file position.

Syntax and positions only, nothing of circuits: the subset is the simulator-style
netlist that schematic tools export (SPICE3 user's manual, University of California,
Berkeley, chapter 2 "Circuit description"): the first line is the title; ``*`` starts a
comment line and ``;`` (or a ``$`` that starts a word) a comment to the end of the line;
a line starting with ``+`` continues the card before it; names are case-insensitive
(kept as written, compared case-folded); ``.subckt NAME PINS...`` to ``.ends`` defines a
subcircuit and ``.end`` ends the netlist. Words are separated by white space, and
``(``, ``)``, ``,`` and ``=`` separate words too.

Element cards become records by their first letter: ``R``, ``C``, ``L`` (two nodes and a
value), ``V``, ``I`` (two nodes, a DC value, an ``AC`` part, a function such as
``SIN(...)``), ``X`` (nodes, then the subcircuit's name, then parameters); every other
letter is kept as an ``OtherCard`` for the caller to report. Values stay text here:
``netlist_values`` gives them their numeric meaning.

The reader is bounded: one pass over the lines, at most MAX_CARDS cards, MAX_WORDS words
a card, MAX_SUBCKT_DEPTH nested definitions; malformed input raises InputErrors with
every problem located (at most MAX_REPORTED).
"""

from __future__ import annotations

import re
from dataclasses import field
from checker.record import record

from checker.io.positions import MAX_REPORTED, InputErrors, InputProblem, reported

MAX_CARDS = 100_000
MAX_WORDS = 4_000
MAX_SUBCKT_DEPTH = 8

_WORD = re.compile(r"[^\s(),=;]+|[(),=]")
_FUNCTIONS = {"sin", "pulse", "pwl", "exp", "sffm", "am", "trrandom", "trnoise"}


@record(frozen=True)
class Word:
    """One word of a card and where it starts (1-based line and column)."""

    text: str
    line: int
    column: int

    @property
    def key(self) -> str:
        """The word as the convention compares it: case-folded."""
        return self.text.casefold()


@record(frozen=True)
class Parameter:
    """A ``name=value`` pair on a card."""

    name: Word
    value: Word


@record(frozen=True)
class Card:
    """What every element record shares: its name word and the subcircuit it is in."""

    name: Word
    inside: str | None  # case-folded name of the enclosing .subckt; None at top level

    @property
    def letter(self) -> str:
        return self.name.text[0].upper()

    @property
    def line(self) -> int:
        return self.name.line

    @property
    def column(self) -> int:
        return self.name.column


@record(frozen=True)
class TwoTerminal(Card):
    """``R``, ``C`` or ``L``: two nodes, a value, then extras and parameters."""

    nodes: tuple[Word, Word]  # no defaults: the reader refuses a card without both
    value: Word  # (given after the nodes, or as R=, C=, L= or value=)
    extras: tuple[Word, ...] = ()  # bare words after the value
    parameters: tuple[Parameter, ...] = ()


@record(frozen=True)
class SourceCard(Card):
    """``V`` or ``I``: two nodes, then an optional DC value, AC part and function."""

    nodes: tuple[Word, Word]  # no default: the reader refuses a card without both
    dc: Word | None = None
    ac: tuple[Word, ...] = ()  # magnitude [phase]
    function: Word | None = None  # SIN, PULSE, ...
    arguments: tuple[Word, ...] = ()
    extras: tuple[Word, ...] = ()


@record(frozen=True)
class Instance(Card):
    """``X``: a subcircuit instance: nodes in order, the subcircuit's name, parameters."""

    nodes: tuple[Word, ...]  # no defaults: the reader sets both
    subcircuit: Word
    parameters: tuple[Parameter, ...] = ()


@record(frozen=True)
class OtherCard(Card):
    """An element of a kind ampcheck does not analyse; its words as written."""

    words: tuple[Word, ...] = ()


@record(frozen=True)
class Command:
    """A dot-command other than the structural ones: its name (``include``) and words."""

    name: Word
    words: tuple[Word, ...] = ()
    inside: str | None = None

    @property
    def keyword(self) -> str:
        return self.name.text[1:].casefold()


@record(frozen=True)
class Subcircuit:
    """A ``.subckt`` definition: its name, pin nodes and the cards inside."""

    name: Word
    pins: tuple[Word, ...]
    cards: tuple[Card, ...]
    end_line: int


@record(frozen=True)
class Netlist:
    """A netlist file as records: top-level cards, definitions, other dot-commands."""

    path: str
    title: str
    cards: tuple[Card, ...]
    subcircuits: dict[str, Subcircuit] = field(default_factory=dict)  # by case-folded name
    commands: tuple[Command, ...] = ()
    line_count: int = 0


def _words(text: str, line: int, start_column: int = 1) -> list[Word]:
    """The words of one line's text (comments already cut), with positions."""
    return [Word(m.group(), line, m.start() + start_column) for m in _WORD.finditer(text)]


def _strip_comment(text: str) -> str:
    """``text`` without a ``;`` comment or a ``$`` comment that starts a word."""
    cut = text.find(";")
    if cut != -1:
        text = text[:cut]
    for match in re.finditer(r"(?:^|\s)\$", text):
        return text[:match.start()]
    return text


def _logical_cards(text: str, path: str, problems: list[InputProblem]
                   ) -> tuple[str, list[list[Word]], int]:
    """(title, cards as word lists with continuations joined, line count)."""
    lines = text.splitlines()
    title = lines[0].strip() if lines else ""
    cards: list[list[Word]] = []
    in_control = False
    for number, raw in enumerate(lines[1:], start=2):
        stripped = raw.lstrip()
        if not stripped or stripped.startswith("*"):
            continue
        lowered = stripped.casefold()
        if in_control:
            if lowered.startswith(".endc"):
                in_control = False
            continue
        if lowered.startswith(".control"):
            in_control = True
            continue
        indent = len(raw) - len(stripped)
        body = _strip_comment(stripped)
        if stripped.startswith("+"):
            if not cards:
                problems.append(InputProblem(path, number, indent + 1, "a '+' continuation"
                                             " line with no card before it to continue"))
                continue
            cards[-1].extend(_words(body[1:], number, indent + 2))
            if len(cards[-1]) > MAX_WORDS:
                problems.append(InputProblem(path, cards[-1][0].line, cards[-1][0].column,
                                             f"a card longer than {MAX_WORDS} words"))
                raise InputErrors(reported(problems))
            continue
        words = _words(body, number, indent + 1)
        if not words:
            continue
        if words[0].key == ".end":
            return title, cards, number
        cards.append(words)
        if len(cards) > MAX_CARDS:
            problems.append(InputProblem(path, number, 1, f"more than {MAX_CARDS} cards:"
                                         " ampcheck reads netlists of at most that size"))
            raise InputErrors(reported(problems))
    return title, cards, len(lines)


def _split_parameters(words: list[Word]) -> tuple[list[Word], list[Parameter], list[Word]]:
    """(bare words, name=value parameters, stray '=' words) of a card's words."""
    bare: list[Word] = []
    parameters: list[Parameter] = []
    stray: list[Word] = []
    i = 0
    while i < len(words):
        if i + 1 < len(words) and words[i + 1].text == "=":
            if i + 2 < len(words) and words[i + 2].text not in "(),=":
                parameters.append(Parameter(words[i], words[i + 2]))
                i += 3
                continue
            stray.append(words[i + 1])
            i += 2
            continue
        if words[i].text in "(),":
            i += 1
            continue
        if words[i].text == "=":
            stray.append(words[i])
        else:
            bare.append(words[i])
        i += 1
    return bare, parameters, stray


class _Reader:
    def __init__(self, path: str):
        self.path = path
        self.problems: list[InputProblem] = []

    def fail(self, word: Word, message: str) -> None:
        self.problems.append(InputProblem(self.path, word.line, word.column, message))

    def card(self, words: list[Word], inside: str | None) -> Card | None:
        name = words[0]
        letter = name.text[0].upper()
        rest = words[1:]
        if not name.text[0].isalpha():
            self.fail(name, f"{name.text!r} starts neither an element (a letter such as R,"
                            " C or X) nor a dot-command")
            return None
        if letter in "RCL":
            return self.two_terminal(name, rest, inside)
        if letter in "VI":
            return self.source(name, rest, inside)
        if letter == "X":
            return self.instance(name, rest, inside)
        return OtherCard(name, inside, tuple(w for w in rest if w.text not in "(),"))

    def two_terminal(self, name: Word, rest: list[Word], inside) -> Card | None:
        bare, parameters, stray = _split_parameters(rest)
        for word in stray[:1]:
            self.fail(word, f"{name.text}: '=' with no name or value beside it")
        if len(bare) < 2:
            self.fail(name, f"{name.text} needs two nodes and a value:"
                            f" {name.text} NODE NODE VALUE")
            return None
        value = bare[2] if len(bare) > 2 else None
        extras = tuple(bare[3:])
        if value is None:  # the value may be given as R=10k, C=1n, L=1u or value=...
            keys = {name.text[0].casefold(), "value"}
            given = [p for p in parameters if p.name.key in keys]
            if given:
                value = given[0].value
                parameters = [p for p in parameters if p is not given[0]]
        if value is None:
            self.fail(name, f"{name.text} has no value: {name.text} NODE NODE VALUE")
            return None
        return TwoTerminal(name, inside, (bare[0], bare[1]), value, extras, tuple(parameters))

    def source(self, name: Word, rest: list[Word], inside) -> Card | None:
        bare = [w for w in rest if w.text not in ",="]
        if len(bare) < 2 or bare[0].text in "()" or bare[1].text in "()":
            self.fail(name, f"{name.text} needs two nodes: {name.text} NODE NODE [DC VALUE]"
                            " [AC MAGNITUDE] [FUNCTION(...)]")
            return None
        nodes = (bare[0], bare[1])
        words = bare[2:]
        dc = function = None
        ac: list[Word] = []
        arguments: list[Word] = []
        extras: list[Word] = []
        i = 0
        while i < len(words):
            word = words[i]
            key = word.key
            if key == "dc" and i + 1 < len(words) and words[i + 1].text not in "()":
                dc = words[i + 1]
                i += 2
            elif key == "ac":
                i += 1
                while i < len(words) and len(ac) < 2 and _looks_numeric(words[i].text):
                    ac.append(words[i])
                    i += 1
                if not ac:
                    ac.append(word)  # AC alone: magnitude 1 by the convention
            elif key in _FUNCTIONS and function is None:
                function = word
                i += 1
                if i < len(words) and words[i].text == "(":
                    i += 1
                    while i < len(words) and words[i].text != ")":
                        arguments.append(words[i])
                        i += 1
                    if i >= len(words):
                        self.fail(function, f"{name.text}: {function.text}( is never closed")
                        return None
                    i += 1
                else:
                    while i < len(words) and _looks_numeric(words[i].text):
                        arguments.append(words[i])
                        i += 1
            elif dc is None and not ac and function is None and _looks_numeric(word.text):
                dc = word
                i += 1
            elif word.text in "()":
                i += 1
            else:
                extras.append(word)
                i += 1
        return SourceCard(name, inside, nodes, dc, tuple(ac), function, tuple(arguments),
                          tuple(extras))

    def instance(self, name: Word, rest: list[Word], inside) -> Card | None:
        cut = next((i for i, w in enumerate(rest) if w.key in ("params:", "params")), None)
        head = rest if cut is None else rest[:cut]
        tail = [] if cut is None else rest[cut + 1:]
        bare, parameters, stray = _split_parameters(head)
        more_bare, more, more_stray = _split_parameters(tail)
        for word in (stray + more_stray + more_bare)[:1]:
            self.fail(word, f"{name.text}: unexpected {word.text!r} among the parameters")
        if len(bare) < 2:
            self.fail(name, f"{name.text} needs its nodes and the subcircuit's name:"
                            f" {name.text} NODE... SUBCIRCUIT")
            return None
        return Instance(name, inside, tuple(bare[:-1]), bare[-1], tuple(parameters + more))

    def read(self, text: str) -> Netlist:
        title, raw_cards, line_count = _logical_cards(text, self.path, self.problems)
        top: list[Card] = []
        commands: list[Command] = []
        subcircuits: dict[str, Subcircuit] = {}
        # Open definitions: (name word, pins, cards so far).
        stack: list[tuple[Word, tuple[Word, ...], list[Card]]] = []
        for words in raw_cards:
            head = words[0]
            inside = stack[-1][0].key if stack else None
            if head.text.startswith("."):
                keyword = head.key
                if keyword == ".subckt":
                    names = [w for w in words[1:] if w.text not in "(),="]
                    if not names:
                        self.fail(head, ".subckt needs a name: .subckt NAME NODE...")
                        continue
                    if len(stack) >= MAX_SUBCKT_DEPTH:
                        self.fail(head, f"subcircuit definitions nested deeper than"
                                        f" {MAX_SUBCKT_DEPTH}")
                        break
                    cut = next((i for i, w in enumerate(names)
                                if w.key in ("params:", "params")), len(names))
                    bare, _params, _stray = _split_parameters(names[1:cut])
                    stack.append((names[0], tuple(bare), []))
                elif keyword == ".ends":
                    if not stack:
                        self.fail(head, ".ends with no .subckt open")
                        continue
                    name, pins, cards = stack.pop()
                    if name.key in subcircuits:
                        self.fail(name, f"subcircuit {name.text} is defined twice (first at"
                                        f" line {subcircuits[name.key].name.line})")
                        continue
                    subcircuits[name.key] = Subcircuit(name, pins, tuple(cards), head.line)
                else:
                    commands.append(Command(head, tuple(words[1:]), inside))
                continue
            card = self.card(words, inside)
            if card is None:
                if len(self.problems) >= MAX_REPORTED:
                    first = words[0]
                    self.problems.append(InputProblem(
                        self.path, first.line, first.column, f"reading stopped after"
                        f" {MAX_REPORTED} problems; more may follow: mend these and check"
                        " again"))
                    break
                continue
            (stack[-1][2] if stack else top).append(card)
        for name, _pins, _cards in stack[:MAX_REPORTED]:
            self.fail(name, f".subckt {name.text} is never closed (a missing .ends)")
        if self.problems:
            raise InputErrors(self.problems[:MAX_REPORTED + 1])
        return Netlist(self.path, title, tuple(top), subcircuits, tuple(commands), line_count)


def _looks_numeric(text: str) -> bool:
    return bool(re.match(r"[+-]?(?:\d|\.\d)", text))


def read_netlist(text: str, path: str) -> Netlist:
    """The netlist in ``text`` as records; InputErrors for malformed input."""
    opening = text.lstrip()[:16].casefold()
    if opening.startswith(("(export", "<?xml", "{")):
        raise InputErrors([InputProblem(path, 1, 1, f"this is not a simulator-style"
                                        f" netlist (it starts with {opening[:8]!r}); ampcheck"
                                        " reads the one-element-per-line netlist")])
    return _Reader(path).read(text)
