"""The engine's own findings as rules: one registry of their ids, severities and docs.

Each finding the engine (or the reader, the baseline, the audit fence) emits itself is
an :class:`EngineRule` here, and every emitter takes its severity from
:func:`engine_severity`, so ``ampcheck rules``, ``ampcheck explain``, docs/rules.md,
SARIF rule metadata and what is emitted read the same record.

A leaf module (no numpy, no solver): the rule catalogue, the docs and the reporters read
it without loading the engine.
"""

from __future__ import annotations

from checker.record import record

from checker.findings import Severity

# The docstring sections of an engine rule, as docs/rules.md and `explain` print them.
ENGINE_DOC_SECTIONS = ("What it means", "Why it matters", "How to fix")


@record(frozen=True)
class EngineRule:
    """One finding the engine emits itself: its id, severity, summary and docs."""

    id: str
    severity: Severity
    summary: str
    means: str
    why: str
    fix: str

    def sections(self) -> dict[str, str]:
        return dict(zip(ENGINE_DOC_SECTIONS, (self.means, self.why, self.fix)))

    @property
    def doc(self) -> str:
        return "\n\n".join(f"{heading}:\n    {text}"
                           for heading, text in self.sections().items())


_E, _I = Severity.ERROR, Severity.INFO
ENGINE_CATALOGUE: dict[str, EngineRule] = {item.id: item for item in (
    EngineRule(
        "input-invalid", _E, "A file could not be read, parsed, validated or built.",
        "The file's text breaks the stage grammar or schema, a value cannot be read (a"
        " unit, a prefix, an implausible number), or a reference does not resolve (an"
        " unknown part, a dangling net, a duplicate designator). The message points at"
        " the line and column.",
        "A stage the tool cannot read is a stage nobody has checked: the run goes on with"
        " the other files, but this one fails the run.",
        "Correct the text at the position given; `ampcheck explain` for the rule the"
        " stage was meant to show, and docs/format.md for the grammar."),
    EngineRule(
        "stage-unsolvable", _E, "The stage's equations have no unique solution as drawn.",
        "The nodal equations are singular: a net floats (nothing ties it to ground at"
        " DC), or ideal sources form a loop.",
        "No figure can be computed for a circuit without a unique operating point; the"
        " rules that need the solve are not run for it.",
        "Give the floating net a DC path (a resistor to ground or to a driven net), or"
        " break the loop of sources with a series resistance."),
    EngineRule(
        "output-on-rail", _E, "An op-amp's output is wired straight to a supply rail.",
        "An op-amp's output pin sits on a supply net, so the output fights the rail.",
        "The output cannot move, and in hardware it drives its short-circuit current into"
        " the supply until it overheats.",
        "Rewire the output to its own net (a wiring slip in the stage file, as a rule)."),
    EngineRule(
        "rule-failed", _E, "A rule stopped with an internal error; the other rules still ran.",
        "A rule, the requirement verdicts or the safety cautions raised an exception on"
        " this stage; the message names which and the error.",
        "What that rule checks was not checked, so the stage cannot pass it silently.",
        "Report it with the stage file; meanwhile `--ignore` the rule for this file if"
        " its check is covered otherwise."),
    EngineRule(
        "review-failed", _E, "A file's review stopped (an internal error, its time budget or"
        " its memory cap); the other files were still reviewed.",
        "The fence around one file's review caught an internal error, its time budget"
        " (`--time-budget`) ran out, its memory cap was reached, or its worker died.",
        "One bad file never stops an audit, but a file that was not reviewed must not"
        " pass.",
        "Raise the budget for a genuinely large stage, else report the file."),
    EngineRule(
        "waiver-invalid", _E, "A waiver in a stage file gives no reason or names no known rule.",
        "A `(waive ...)` entry names a rule id that no loaded rule, engine finding or"
        " caution has, or gives no reason.",
        "A waiver with a typo waives nothing, and one without a reason cannot be"
        " reviewed.",
        "Correct the rule id (the message suggests the closest) and write why the finding"
        " is acceptable."),
    EngineRule(
        "waiver-stale", _I, "A waiver in a stage file matched no finding; remove it.",
        "A waiver names a rule that ran (or a caution) but matched nothing on this stage.",
        "A waiver left behind after a fix would silently hide the next real finding of"
        " that rule.",
        "Remove the waiver from the stage file."),
    EngineRule(
        "baseline-stale", _I, "A baseline entry matched no finding; prune the baseline.",
        "An entry of the baseline file for a checked file accepts more findings than the"
        " run produced.",
        "Unused entries would accept a new finding of the same rule on the same elements"
        " without anyone seeing it.",
        "Prune the baseline: write it again with `--write-baseline`."),
    EngineRule(
        "requirement-unmet", _E, "A stated requirement is not met and no rule names the cause.",
        "A `(require ...)` value of the stage is not met by the computed figure, and no"
        " rule's finding explains it.",
        "A stated requirement is the stage's contract; missing it is an error.",
        "Change the stage until the figure meets the requirement, or restate the"
        " requirement; the message gives the figure and the limit."),
    EngineRule(
        "requirement-unchecked", _I, "A stated requirement could not be checked (the reason"
        " is given).",
        "A requirement could not be judged: a part lacks a parameter, or the figure does"
        " not apply to the stage.",
        "The stage states a contract that no one verified; the tool never passes it"
        " silently.",
        "Give the part the missing parameter (the message names it), or remove the"
        " requirement that does not apply."),
)}

# Derived views, kept for the readers that take only a summary or a severity.
ENGINE_RULES = {rid: item.summary for rid, item in ENGINE_CATALOGUE.items()}
ENGINE_SEVERITIES = {rid: item.severity for rid, item in ENGINE_CATALOGUE.items()}
REQUIREMENT_UNMET, REQUIREMENT_UNCHECKED = "requirement-unmet", "requirement-unchecked"


def engine_severity(rule_id: str) -> Severity:
    """The severity an engine finding is emitted with (KeyError for an unknown id)."""
    return ENGINE_CATALOGUE[rule_id].severity
