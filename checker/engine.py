"""The rule engine: the rule decorator, one loader for built-in and user rules, and the
run of every selected rule over one stage.

A rule is a plain function decorated with :func:`rule`; the decorator only attaches a
:class:`Rule` record to the function (no global registry). :func:`load_rules` imports
the modules of the built-in package ``checker.rules`` and of any user rule folders and
collects the decorated functions it finds: one mechanism for both.
"""

from __future__ import annotations

import importlib
import importlib.util
import inspect
import os
import pkgutil
import re
import sys
import textwrap
from collections.abc import Callable, Iterable
from collections.abc import Set as AbstractSet
from dataclasses import field, replace
from checker.record import record
from types import ModuleType

from checker.analysis import AnalysisOptions, Figures, analyse
from checker.analysis.mna import SingularCircuit
from checker.cautions import KINDS as CAUTION_KINDS
from checker.cautions import acknowledge, stage_cautions
from checker.changes import apply_changes
from checker.findings import Finding, FixCheck, Severity, Suggestion
from checker.model import Origin, Stage
from checker.records import Caution, Verdict
from checker.requirements import judge_requirements
from checker.supply_ends import merged_cautions, merged_findings, merged_verdicts, supply_ends

# Enough points to bracket each loop crossover, which is then refined on a local grid:
# for a copy of a stage that a rule reads only phase margins from.
MARGIN_POINTS = 50
RULE_ID = re.compile(r"^[a-z][a-z0-9]*(-[a-z0-9]+)*$")
DOC_SECTIONS = ("What it checks", "Why it matters", "How the fix is computed", "Sources")
# Each built-in rule's docstring ends with a small stage the rule passes and one it fails;
# tests/test_rule_examples.py checks both, so the docs cannot drift from the rule.
EXAMPLE_SECTIONS = ("Passes", "Fails")
# The engine's own findings: their ids, summaries and severities (checker/catalogue.py).
from checker.catalogue import (ENGINE_RULES, ENGINE_SEVERITIES, REQUIREMENT_UNCHECKED,  # noqa: E402,F401
                               REQUIREMENT_UNMET, engine_severity)


class RuleError(Exception):
    """A rule module or definition that cannot be used (a configuration error)."""


@record(frozen=True)
class Rule:
    id: str
    severity: Severity
    summary: str
    settings: dict[str, float]
    check: Callable[[StageView], Iterable[Finding]]
    module: str

    @property
    def doc(self) -> str:
        return inspect.cleandoc(self.check.__doc__ or "")

    def sections(self) -> dict[str, str]:
        """The docstring's prose sections by heading (a heading is a line ending in ':');
        an example heading ends the section before it."""
        return {k: v for k, v in self._blocks().items() if k in DOC_SECTIONS}

    def examples(self) -> dict[str, str]:
        """The docstring's example stages by heading (``Passes``, ``Fails``), as stage
        text without the docstring's indentation."""
        return {k: v for k, v in self._blocks().items() if k in EXAMPLE_SECTIONS}

    def _blocks(self) -> dict[str, str]:
        found: dict[str, list[str]] = {}
        current = None
        for line in self.doc.splitlines():
            heading = line.strip().rstrip(":")
            if line.strip().endswith(":") and heading in DOC_SECTIONS + EXAMPLE_SECTIONS:
                current = heading
                found[current] = []
            elif current:
                found[current].append(line)
        return {k: textwrap.dedent("\n".join(v)).strip() for k, v in found.items()}


_RULE_MARK = "__ampcheck_rule__"  # the attribute @rule sets on a rule's function


def rule(id: str, severity: str, summary: str, **settings: float):
    """Declare a rule: a stable kebab-case id, a default severity, a one-line summary
    and its settings with their defaults (override them in configuration)."""
    if not RULE_ID.match(id):
        raise RuleError(f"rule id {id!r} is not kebab-case")

    def decorate(function: Callable) -> Callable:
        setattr(function, _RULE_MARK, Rule(id=id, severity=Severity.parse(severity),
                                           summary=summary, settings=dict(settings),
                                           check=function, module=function.__module__))
        return function

    return decorate


def rules_in(module: ModuleType) -> list[Rule]:
    """The rules defined by decorated functions in ``module``."""
    return [getattr(value, _RULE_MARK) for value in vars(module).values()
            if callable(value) and hasattr(value, _RULE_MARK)
            and value.__module__ == module.__name__]


def _builtin_modules() -> list[ModuleType]:
    try:
        package = importlib.import_module("checker.rules")
    except ModuleNotFoundError:
        # Run from a source checkout that is not installed (python -m checker in the
        # repository): the rules folder sits beside the package, as it does in git. Make
        # it the checker.rules package, as the install does, so the rules' own imports
        # of their shared helpers (checker.rules._isolation, ...) resolve.
        folder = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))),
                              "rules")
        spec = importlib.util.spec_from_file_location(
            "checker.rules", os.path.join(folder, "__init__.py"),
            submodule_search_locations=[folder])
        if spec is None or not os.path.isdir(folder):
            raise RuleError(f"the built-in rules are missing: no folder {folder}") from None
        package = importlib.util.module_from_spec(spec)
        sys.modules["checker.rules"] = package
        assert spec.loader is not None  # a .py file's location always has a source loader
        spec.loader.exec_module(package)
    names = sorted(info.name for info in pkgutil.iter_modules(package.__path__)
                   if not info.name.startswith("_"))
    return [importlib.import_module(f"checker.rules.{name}") for name in names]


def _folder_modules(folder: str) -> list[ModuleType]:
    if os.path.exists(folder) and not os.path.isdir(folder):
        raise RuleError(f"rule folder {folder} is a file: --rules-dir names a folder of"
                        " rule modules")
    if not os.path.isdir(folder):
        raise RuleError(f"rule folder {folder} does not exist")
    modules = []
    for name in sorted(os.listdir(folder)):
        if not name.endswith(".py") or name.startswith("_"):
            continue
        path = os.path.join(folder, name)
        module_name = f"ampcheck_user_rules.{os.path.basename(os.path.abspath(folder))}.{name[:-3]}"
        spec = importlib.util.spec_from_file_location(module_name, path)
        # a path ending in .py always gets a spec with a source loader
        assert spec is not None and spec.loader is not None
        module = importlib.util.module_from_spec(spec)
        sys.modules[module_name] = module
        try:
            spec.loader.exec_module(module)
        except Exception as error:
            raise RuleError(f"cannot load rule file {path}: {type(error).__name__}: {error}") \
                from None
        modules.append(module)
    return modules


def load_rules(folders: Iterable[str] = ()) -> dict[str, Rule]:
    """Built-in rules plus those in ``folders``, by id; RuleError on a clash."""
    found: dict[str, Rule] = {}
    modules = _builtin_modules()
    for folder in folders:
        modules.extend(_folder_modules(folder))
    for module in modules:
        for item in rules_in(module):
            if item.id in found or item.id in ENGINE_RULES or item.id in CAUTION_KINDS:
                owner = (found[item.id].module if item.id in found else
                         "engine" if item.id in ENGINE_RULES else "a caution")
                raise RuleError(f"rule id {item.id!r} is defined twice ({owner} and"
                                f" {item.module})")
            found[item.id] = item
    return dict(sorted(found.items()))


@record
class StageView:
    """What a rule sees of one stage: the model, its figures, the rule's settings."""

    stage: Stage
    figures: Figures
    rule: Rule
    settings: dict[str, float]
    siblings: dict[str, Figures] = field(default_factory=dict)  # other stages of the file
    verdicts: dict[str, Verdict] = field(default_factory=dict)  # by requirement keyword
    fixes_wanted: bool = True  # False while the engine re-checks a fix's copy

    def reanalyse(self, stage: Stage, **options) -> Figures:
        """Figures of a modified copy of the stage (to verify a suggested fix), with the
        stage's own analysis options unless ``options`` override them."""
        return analyse(stage, replace(self.figures.options, **options))

    def margins_of(self, stage: Stage) -> Figures:
        """Figures of a modified copy read only for its loops' margins (cheaper grid)."""
        return self.reanalyse(stage, points=MARGIN_POINTS)

    def finding(self, message: str, at: Origin | None = None, *, elements=(),
                severity: Severity | None = None, measured: float | None = None,
                limit: float | None = None, unit: str | None = None,
                suggestion=None, **details) -> Finding:
        """A finding of this rule. ``suggestion`` is a Suggestion, a list of alternative
        Suggestions (the engine offers the first whose re-check is clean), or a
        function returning either, called only when fixes are wanted (a re-check of a
        fix's copy reads the findings alone)."""
        origin = at or self.stage.origin
        if callable(suggestion):
            suggestion = suggestion() if self.fixes_wanted else None
        elif not self.fixes_wanted:
            suggestion = None
        if isinstance(suggestion, (list, tuple)):
            alternatives = [s for s in suggestion if s is not None]
            suggestion = alternatives[0] if alternatives else None
            if len(alternatives) > 1:
                details["alternatives"] = alternatives[1:]
        return Finding(rule=self.rule.id, severity=severity or self.rule.severity,
                       message=message, path=origin.path, line=origin.line,
                       column=origin.column, stage=self.stage.name,
                       elements=tuple(elements), measured=measured, limit=limit, unit=unit,
                       suggestion=suggestion, details=details)

    def answers(self, *keywords: str) -> dict:
        """Details that mark a finding as the explanation of the stage's requirements
        ``keywords`` (pass them to :meth:`finding`); the engine keeps the claim only for
        requirements whose verdict is not met."""
        stated = tuple(k for k in keywords if k in self.verdicts)
        return {"requirement": stated} if stated else {}

    def unmet(self, keyword: str) -> bool:
        """True when the stage states ``keyword`` and its verdict is not met."""
        verdict = self.verdicts.get(keyword)
        return verdict is not None and verdict.not_met

    def cannot_check(self, what: str, why: str, at: Origin | None = None,
                     elements=()) -> Finding:
        """An info finding: this rule could not check ``what`` because ``why``."""
        return self.finding(f"could not check {what}: {why}", at, elements=elements,
                            severity=Severity.INFO, unchecked=True)


@record(frozen=True)
class RunOptions:
    analysis: AnalysisOptions = AnalysisOptions(stray_capacitance_f=1e-12)
    select: frozenset[str] | None = None  # None: every rule
    ignore: frozenset[str] = frozenset()
    settings: dict[str, dict[str, float]] = field(default_factory=dict)
    severities: dict[str, Severity] = field(default_factory=dict)  # per-rule overrides
    known_rules: frozenset[str] = frozenset()  # every loaded rule id, for waiver checks
    # Requirement verdicts: off only in the single-rule test harness, which judges rules
    # alone; every real run judges every stated requirement.
    judge_requirements: bool = True

    def settings_of(self, rule_id: str, rules: dict[str, Rule] | None = None) -> dict:
        """A rule's settings: its defaults (when known) with the configured ones on top."""
        merged = dict(rules[rule_id].settings) if rules and rule_id in rules else {}
        merged.update(self.settings.get(rule_id, {}))
        return merged


@record
class StageCheck:
    """One stage checked: its findings (sorted), its requirements' verdicts and its
    safety cautions (always, whatever the rules, settings and severities)."""

    findings: list[Finding]
    verdicts: list[Verdict] = field(default_factory=list)
    cautions: list[Caution] = field(default_factory=list)


def selected(rules: dict[str, Rule], options: RunOptions) -> list[Rule]:
    return [r for rid, r in rules.items()
            if (options.select is None or rid in options.select) and rid not in options.ignore]


def check_stages(stages: list[Stage], rules: list[Rule], options: RunOptions
                 ) -> tuple[dict[str, Figures], dict[str, list[Finding]]]:
    """Figures and findings of every stage of one file (stages may look at siblings)."""
    figures, checks = check_file_stages(stages, rules, options)
    return figures, {name: check.findings for name, check in checks.items()}


def check_file_stages(stages: list[Stage], rules: list[Rule], options: RunOptions,
                      catalogue: dict[str, Rule] | None = None
                      ) -> tuple[dict[str, Figures], dict[str, StageCheck]]:
    """Figures, findings and verdicts of every stage of one file. ``catalogue`` holds
    every loaded rule (for the defaults of settings the verdicts share with rules that
    are not selected)."""
    figures = {stage.name: analyse(stage, options.analysis) for stage in stages}
    catalogue = catalogue or {item.id: item for item in rules}
    checks = {stage.name: _checked_over_supply_ends(stage, figures, rules, options, catalogue)
              for stage in stages}
    return figures, checks


def _checked_over_supply_ends(stage: Stage, figures: dict[str, Figures], rules: list[Rule],
                              options: RunOptions, catalogue: dict[str, Rule]) -> StageCheck:
    """The stage checked at its nominal supplies and, where a supply has a range, at every
    combination of the ranged supplies' ends (checker/supply_ends.py)."""
    nominal = check_stage(stage, figures[stage.name], rules, options, figures, catalogue)
    ends = supply_ends(stage)
    if not ends:
        return nominal
    at_ends = []
    for label, variant in ends:
        siblings = dict(figures, **{stage.name: analyse(variant, options.analysis)})
        at_ends.append((label, check_stage(variant, siblings[stage.name], rules, options,
                                           siblings, catalogue)))
    return StageCheck(
        sorted(merged_findings(nominal.findings, [(end, c.findings) for end, c in at_ends]),
               key=Finding.sort_key),
        merged_verdicts(nominal.verdicts, [(end, c.verdicts) for end, c in at_ends]),
        merged_cautions(nominal.cautions, [(end, c.cautions) for end, c in at_ends]))


def _structural_findings(stage: Stage, figures: Figures) -> list[Finding]:
    results = []
    for problem in figures.problems:
        if problem.kind == "output-on-rail":
            origin = stage.element(problem.elements[0]).origin
            results.append(Finding(rule="output-on-rail",
                                   severity=engine_severity("output-on-rail"),
                                   message=problem.message, path=origin.path,
                                   line=origin.line, column=origin.column, stage=stage.name,
                                   elements=problem.elements))
        if problem.fatal:
            origin = stage.origin
            named = {s.name: s.origin for s in stage.sources}
            for element in problem.elements:
                if element in named:
                    origin = named[element]
                    break
                try:
                    origin = stage.element(element.split()[0]).origin
                    break
                except KeyError:
                    continue
            results.append(Finding(rule="stage-unsolvable",
                                   severity=engine_severity("stage-unsolvable"),
                                   message=problem.message, path=origin.path, line=origin.line,
                                   column=origin.column, stage=stage.name,
                                   elements=problem.elements))
    return results


def _failure(stage: Stage, what: str, error: Exception) -> Finding:
    return Finding(rule="rule-failed", severity=engine_severity("rule-failed"),
                   message=f"{what} failed: {type(error).__name__}: {error}", path=stage.path,
                   line=stage.origin.line, column=stage.origin.column, stage=stage.name)


def check_stage(stage: Stage, figures: Figures, rules: list[Rule], options: RunOptions,
                siblings: dict[str, Figures] | None = None,
                catalogue: dict[str, Rule] | None = None, fixes: bool = True) -> StageCheck:
    """Judge the stage's requirements, run each rule, then answer every requirement that
    is not met: by the findings of the rules that name its cause, else by a finding of
    its own. Every fix that proposes changes is then applied to a copy of the stage and
    re-checked by every rule (``fixes`` False: no fixes, for such a re-check). A failing
    rule becomes a finding, never a crash."""
    results = _structural_findings(stage, figures)
    ran = {item.id for item in rules}
    verdicts: list[Verdict] = []
    if options.judge_requirements and stage.require.stated():
        try:
            verdicts = judge_requirements(
                stage, figures, lambda rule_id: options.settings_of(rule_id, catalogue))
        except Exception as error:  # a verdict's bug must not stop the run
            results.append(_failure(stage, "judging the requirements", error))
    by_keyword = {verdict.requirement: verdict for verdict in verdicts}
    for item in rules:
        settings = dict(item.settings)
        settings.update(options.settings.get(item.id, {}))
        view = StageView(stage, figures, item, settings, siblings or {}, by_keyword, fixes)
        severity = options.severities.get(item.id)
        try:
            for finding in item.check(view) or ():
                finding = _answering(finding, by_keyword)
                if severity is not None and not finding.details.get("unchecked"):
                    finding = replace(finding, severity=severity)
                results.append(finding)
        except SingularCircuit:
            continue  # already reported once as stage-unsolvable
        except Exception as error:  # a rule's bug must not stop the run
            results.append(_failure(stage, f"rule {item.id}", error))
    results = _one_finding_per_loop(results)
    verdicts, answered = _answer_verdicts(stage, verdicts, results, options)
    results = apply_waivers(stage, results + answered, ran | {f.rule for f in answered},
                            options.known_rules | ran)
    cautions, noted = _cautions(stage)
    results += noted
    if fixes:
        recheck = _Recheck(stage, rules, options, siblings or {}, catalogue, results, verdicts)
        results = [recheck.verified(finding) for finding in results]
    return StageCheck(sorted(results, key=Finding.sort_key), verdicts, cautions)


def _cautions(stage: Stage) -> tuple[list[Caution], list[Finding]]:
    """The stage's safety cautions, acknowledged by its waivers that name them; a note
    for each such waiver that matched none. Independent of rules and options."""
    try:
        cautions, stale = acknowledge(stage, stage_cautions(stage))
    except Exception as error:  # a bug here must not stop the run, nor pass silently
        return [], [_failure(stage, "the safety cautions", error)]
    notes = []
    for waiver in stale:
        target = f"on {waiver.element}" if waiver.element else f"on stage {stage.name}"
        notes.append(Finding(rule="waiver-stale", severity=engine_severity("waiver-stale"),
                             message=f"waiver of {waiver.rule} {target} matched no caution;"
                                     " remove it", path=waiver.origin.path,
                             line=waiver.origin.line, column=waiver.origin.column,
                             stage=stage.name,
                             elements=(waiver.element,) if waiver.element else ()))
    return cautions, notes


# Engine bookkeeping that a fix's copy may show without the fix bringing in a problem.
_BOOKKEEPING = {"waiver-stale", "waiver-invalid", "baseline-stale", REQUIREMENT_UNCHECKED}


def _key(finding: Finding) -> tuple:
    return (finding.rule, finding.elements)


def _label(finding: Finding) -> str:
    where = f" ({', '.join(finding.elements)})" if finding.elements else ""
    return f"{finding.rule}{where}"


class _Recheck:
    """Each fix's changes applied to a copy of the stage and the copy checked by every
    selected rule, its requirements judged again: what the fix clears, meets, breaks and
    brings in."""

    def __init__(self, stage, rules, options, siblings, catalogue, findings, verdicts):
        self.stage, self.rules, self.options = stage, rules, options
        self.siblings, self.catalogue = siblings, catalogue
        self.before = {_key(f): f for f in findings}
        self.verdicts = {v.requirement: v for v in verdicts}

    def verified(self, finding: Finding) -> Finding:
        if finding.suggestion is None:
            return finding
        alternatives = [finding.suggestion] + list(finding.details.get("alternatives", ()))
        details = {k: v for k, v in finding.details.items() if k != "alternatives"}
        checked = [self._checked(finding, s) for s in alternatives]
        chosen = _choose(checked)
        return replace(finding, suggestion=chosen, details=details)

    def _checked(self, finding: Finding, suggestion: Suggestion) -> Suggestion:
        if not suggestion.changes:
            return suggestion
        try:
            copy = apply_changes(self.stage, suggestion.changes)
            figures = analyse(copy, self.options.analysis)
            after = check_stage(copy, figures, self.rules, self.options, self.siblings,
                                self.catalogue, fixes=False)
        except Exception as error:  # a fix's copy that cannot be checked is no fix
            check = FixCheck(clears=False, introduces=(
                f"a copy that cannot be checked ({type(error).__name__}: {error})",),
                introduces_error=True)
            return replace(suggestion, check=check, withheld=True)
        check = self._compare(finding, after)
        return replace(suggestion, check=check, withheld=check.introduces_error)

    def _compare(self, finding: Finding, after: StageCheck) -> FixCheck:
        now = {}
        for item in after.findings:
            if item.severity >= Severity.WARNING and item.rule not in _BOOKKEEPING:
                now[_key(item)] = item
        target = now.get(_key(finding))
        clears = target is None or target.severity < finding.severity
        introduced = [item for key, item in now.items()
                      if key not in self.before or item.severity > self.before[key].severity]
        cleared = [self.before[key] for key in self.before
                   if key != _key(finding) and key not in now
                   and self.before[key].severity >= Severity.WARNING
                   and self.before[key].rule not in _BOOKKEEPING]
        verdicts = {v.requirement: v for v in after.verdicts}
        meets = tuple(k for k, v in self.verdicts.items()
                      if not v.met and k in verdicts and verdicts[k].met)
        breaks = tuple(k for k, v in self.verdicts.items()
                       if v.met and k in verdicts and verdicts[k].not_met)
        return FixCheck(
            clears=clears,
            introduces=tuple(f"{item.severity.label} {_label(item)}: {_short(item.message)}"
                             for item in sorted(introduced, key=Finding.sort_key)),
            introduces_error=any(item.severity >= Severity.ERROR for item in introduced)
            or bool(breaks),
            clears_also=tuple(_label(item) for item in sorted(cleared, key=Finding.sort_key)),
            meets=meets, breaks=breaks)


def _short(message: str, limit: int = 110) -> str:
    return message if len(message) <= limit else message[:limit - 1].rstrip() + "…"


def _choose(checked: list[Suggestion]) -> Suggestion:
    """The first alternative whose re-check clears the finding and brings in nothing; else
    the first that brings in no error; else the first (withheld, saying why)."""
    def clean(s: Suggestion) -> bool:
        return s.check is None or (s.check.clears and not s.check.introduces)

    for test in (clean, lambda s: not s.withheld):
        for suggestion in checked:
            if test(suggestion):
                return suggestion
    return checked[0]


LOOP_RULE = "loop-margin"


def _one_finding_per_loop(findings: list[Finding]) -> list[Finding]:
    """A loop is reported once: where a rule for a cause of its small margin (it names
    the loop in its details) reports it, the general loop-margin finding is dropped."""
    explained = {f.details["loop"] for f in findings
                 if f.rule != LOOP_RULE and f.details.get("loop") and not f.details.get("unchecked")}
    return [f for f in findings
            if not (f.rule == LOOP_RULE and f.details.get("loop") in explained)]


def claimed(finding: Finding) -> tuple[str, ...]:
    """The requirement keywords a finding explains."""
    value = finding.details.get("requirement")
    if value is None:
        return ()
    return (value,) if isinstance(value, str) else tuple(value)


def _answering(finding: Finding, verdicts: dict[str, Verdict]) -> Finding:
    """A finding that answers a requirement which is not met is an error: a stated
    requirement is the stage's contract. A finding keeps its claim only on requirements
    whose verdict is not met."""
    keywords = claimed(finding)
    if not keywords:
        return finding
    kept = tuple(k for k in keywords if k in verdicts and verdicts[k].not_met)
    details = {k: v for k, v in finding.details.items() if k != "requirement"}
    if kept:
        details["requirement"] = kept
    finding = replace(finding, details=details)
    if kept and finding.severity < Severity.ERROR:
        finding = replace(finding, severity=Severity.ERROR)
    return finding


def _answer_verdicts(stage: Stage, verdicts: list[Verdict], findings: list[Finding],
                     options: RunOptions) -> tuple[list[Verdict], list[Finding]]:
    """Each verdict with the rules that explain it; a finding of its own for a verdict
    not met that no rule explains, and a note for one that could not be checked."""
    answered, extra = [], []
    for verdict in verdicts:
        explaining = tuple(sorted({f.rule for f in findings
                                   if verdict.requirement in claimed(f)}))
        verdict = replace(verdict, explained_by=explaining)
        answered.append(verdict)
        if verdict.not_met and not explaining:
            rule_id = REQUIREMENT_UNMET
            message = (f"requirement {verdict.requirement} {verdict.required} is not met:"
                       f" {verdict.statement}; {verdict.reason}")
        elif verdict.unchecked:
            rule_id = REQUIREMENT_UNCHECKED
            message = (f"could not check requirement {verdict.requirement}"
                       f" {verdict.required}: {verdict.reason}")
        else:
            continue
        if (options.select is not None and rule_id not in options.select) \
                or rule_id in options.ignore:
            continue
        extra.append(Finding(rule=rule_id, severity=engine_severity(rule_id), message=message,
                             path=verdict.path, line=verdict.line, column=verdict.column,
                             stage=stage.name, measured=verdict.measured, limit=verdict.limit,
                             unit=verdict.unit,
                             details={"requirement": (verdict.requirement,),
                                      "unchecked": verdict.unchecked}))
    return answered, extra


# Engine findings that say something was not checked (or is about the bookkeeping):
# waiving one would let a stage pass that nothing analysed.
UNWAIVABLE = {
    "stage-unsolvable": "the stage's equations have no solution, so nothing was analysed",
    "rule-failed": "the rule stopped, so what it checks was not checked",
    "review-failed": "the review stopped, so the file was not checked",
    "input-invalid": "the file was not read",
    "waiver-invalid": "it reports a waiver itself",
    "waiver-stale": "it reports a waiver itself",
    "baseline-stale": "it reports the baseline",
}


def apply_waivers(stage: Stage, findings: list[Finding], ran: set[str],
                  known: AbstractSet[str]) -> list[Finding]:
    """Mark findings covered by the stage's waivers; report waivers that are invalid
    (no reason, unknown rule) or stale (matched nothing of a rule that ran)."""
    result = list(findings)
    extra = []
    for waiver in stage.waivers:
        origin = waiver.origin
        target = f"on {waiver.element}" if waiver.element else f"on stage {stage.name}"

        def report(rule_id: str, message: str) -> None:
            extra.append(Finding(rule=rule_id, severity=engine_severity(rule_id), message=message,
                                 path=origin.path, line=origin.line, column=origin.column,
                                 stage=stage.name,
                                 elements=(waiver.element,) if waiver.element else ()))

        if waiver.rule not in known and waiver.rule not in ENGINE_RULES \
                and waiver.rule not in CAUTION_KINDS:
            import difflib

            close = difflib.get_close_matches(waiver.rule, sorted(set(known) | set(CAUTION_KINDS)),
                                              n=1)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            report("waiver-invalid",
                   f"waiver {target} names no known rule {waiver.rule!r}{hint}")
            continue
        if waiver.rule in UNWAIVABLE:
            report("waiver-invalid",
                   f"waiver of {waiver.rule} {target} cannot be: {UNWAIVABLE[waiver.rule]};"
                   " remove the waiver and mend the cause")
            continue
        if waiver.reason is None:
            report("waiver-invalid",
                   f"waiver of {waiver.rule} {target} gives no reason: write"
                   f' (waive {waiver.rule} "why this is acceptable")')
            continue
        if waiver.rule in CAUTION_KINDS:
            continue  # it acknowledges a caution (checker/cautions.py), not a finding
        matched = False
        for i, finding in enumerate(result):
            if finding.rule == waiver.rule and finding.waiver is None and (
                    waiver.element is None or waiver.element in finding.elements):
                result[i] = replace(finding, waiver=waiver.reason)
                matched = True
        if not matched and waiver.rule in ran:
            report("waiver-stale",
                   f"waiver of {waiver.rule} {target} matched no finding; remove it")
    return result + extra
