"""`ampcheck new-rule ID`: a new rule module (and its test) from a template that works.

The template is a complete rule, not a stub: it reads a figure from the analysis core
(the resistance at each op-amp's inverting input), compares it with a setting through
checker/limits.py, says when it could not check, and carries the docstring sections and
the Passes:/Fails: examples that tests/test_rule_examples.py runs. Its author replaces
the check; the shape stays. Files are written new (never over an existing file).
"""

from __future__ import annotations

import keyword
import os


class ScaffoldError(Exception):
    """A usage problem, for cli.py to print (exit 2)."""


RULE_TEMPLATE = '''"""{summary}"""

from __future__ import annotations

from checker.engine import rule
from checker.findings import Suggestion
from checker.limits import above
from checker.units import format_si


@rule("{rule_id}", "warning", "{summary}", max_ohm=1e6)
def {function}(view):
    """
    What it checks:
        (Template: replace with your check.) The resistance the feedback network puts
        at each op-amp's inverting input, solved at DC, must not exceed `max_ohm`.

    Why it matters:
        (Template.) That resistance and the input capacitance make a pole inside the
        loop, and the bias current through it is an offset at the output.

    How the fix is computed:
        (Template.) Scale the network's resistors down together to reach the limit;
        the engine re-checks the fix with every rule.

    Sources:
        (Template.) Name a standard, a book with its edition and section, or say
        "common practice".

    Passes:
        (stage template-pass (ground gnd) (supply vcc 5V) (supply vee -5V)
          (opamp U1 (part cmos-rrio) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 10k) (resistor R2 fb out 100k)
          (source in (range -0.1V 0.1V) (band 0Hz 1kHz) (impedance 0)))

    Fails:
        (stage template-fail (ground gnd) (supply vcc 5V) (supply vee -5V)
          (opamp U1 (part cmos-rrio) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 2.2M) (resistor R2 fb out 10M)
          (source in (range -0.1V 0.1V) (band 0Hz 1kHz) (impedance 0)))
    """
    limit = view.settings["max_ohm"]
    for opamp in view.stage.opamps:
        resistance = view.figures.resistance_at(opamp.ref, opamp.in_neg)
        if resistance is None:
            yield view.cannot_check(f"the resistance at {{opamp.ref}}'s inverting input",
                                    "the input has no DC path", opamp.origin,
                                    elements=(opamp.ref,))
            continue
        if above(resistance, limit):
            factor = limit / resistance
            yield view.finding(
                f"{{format_si(resistance, 'Ω')}} at {{opamp.ref}}'s inverting input exceeds"
                f" {{format_si(limit, 'Ω')}}", opamp.origin, elements=(opamp.ref,),
                measured=resistance, limit=limit, unit="Ω",
                suggestion=Suggestion(f"scale the resistors at {{opamp.in_neg}} by"
                                      f" {{factor:.2g}}", element=opamp.ref))
'''

TEST_TEMPLATE = '''"""The {rule_id} rule (written from the `ampcheck new-rule` template: replace the
expected values with your rule's, each with its source beside it)."""

from __future__ import annotations

from rule_helpers import findings, only

RULE = "{rule_id}"

PASSES = """
    (version 1)
    (stage template-pass (ground gnd) (supply vcc 5V) (supply vee -5V)
      (opamp U1 (part cmos-rrio) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
      (resistor R1 in fb 10k) (resistor R2 fb out 100k)
      (source in (range -0.1V 0.1V) (band 0Hz 1kHz) (impedance 0)))
    """


def test_a_network_within_the_limit_passes():
    assert findings(PASSES, RULE) == []


def test_a_high_resistance_network_is_flagged_with_its_value():
    text = PASSES.replace("10k", "2.2M").replace("100k", "10M")
    finding = only(text, RULE)
    assert finding.elements == ("U1",)
    # 2.2 MΩ in parallel with 10 MΩ plus the part's 150 Ω output resistance: the
    # parallel-resistance formula, common practice
    ro = 150.0
    assert abs(finding.measured - 2.2e6 * (10e6 + ro) / (12.2e6 + ro)) < 1e-3
'''


def module_name(rule_id: str) -> str:
    """my-check -> my_check (the module and function name)."""
    return rule_id.replace("-", "_")


def scaffold(rule_id: str, into: str, tests: str | None, summary: str,
             known: set[str]) -> list[str]:
    """Write the rule module (and its test when ``tests`` is given); the paths written."""
    from checker.engine import RULE_ID
    from checker.io.write import write_new_file

    if not RULE_ID.match(rule_id):
        raise ScaffoldError(f"rule id {rule_id!r} is not kebab-case (letters, digits, single"
                            " hyphens: input-resistance)")
    if rule_id in known:
        raise ScaffoldError(f"a rule, engine finding or caution named {rule_id!r} exists")
    if keyword.iskeyword(module_name(rule_id)):
        raise ScaffoldError(f"rule id {rule_id!r} would name its function"
                            f" {module_name(rule_id)!r}, a Python keyword: choose a longer id"
                            f" ({rule_id}-check, say)")
    if not os.path.isdir(into):
        raise ScaffoldError(f"no such folder {into}")
    if tests is not None and not os.path.isdir(tests):
        raise ScaffoldError(f"no such folder {tests}")
    name = module_name(rule_id)
    planned = [(os.path.join(into, f"{name}.py"), RULE_TEMPLATE)]
    if tests is not None:
        planned.append((os.path.join(tests, f"test_rule_{name}.py"), TEST_TEMPLATE))
    for path, _template in planned:
        if os.path.lexists(path):
            raise ScaffoldError(f"{path} exists: new-rule never writes over a file")
    if not summary.strip() or not summary.isprintable():
        raise ScaffoldError("--summary is one line of printable text (no line breaks or"
                            " control characters)")
    # inside the module's "..." strings: quotes become ', a backslash is doubled
    summary = summary.replace("\\", "\\\\").replace('"', "'")
    for path, template in planned:
        write_new_file(path, template.format(rule_id=rule_id, function=name,
                                             summary=summary))
    return [path for path, _template in planned]


def register(commands) -> None:
    """The subcommand's arguments, on cli.py's subparsers."""
    new = commands.add_parser("new-rule", help="write a new rule module (and its test)"
                              " from a working template")
    new.add_argument("rule", metavar="ID", help="the new rule's kebab-case id")
    new.add_argument("--into", default="rules", metavar="DIR",
                     help="the rule folder (default: rules)")
    new.add_argument("--tests", metavar="DIR",
                     help="also write a test there (default: tests, when it exists)")
    new.add_argument("--no-test", action="store_true", help="write the rule module only")
    new.add_argument("--summary", default="Template rule: replace with a one-line summary.",
                     help="the rule's one-line summary")
    new.add_argument("--rules-dir", action="append", default=[], metavar="DIR",
                     help="user rule folders whose ids the new id must not take")


def run(args, known: set[str]) -> int:
    tests = None if args.no_test else (args.tests or ("tests" if os.path.isdir("tests")
                                                      else None))
    for path in scaffold(args.rule, args.into, tests, args.summary, known):
        print(f"wrote {path}")
    print("next: write the check, its docstring and examples, then `ampcheck rules"
          " --markdown > docs/rules.md` (DEVELOPERS.md, Adding a rule)")
    return 0
