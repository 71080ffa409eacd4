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
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field, replace
from types import ModuleType

from checker.analysis import AnalysisOptions, Figures, analyse
from checker.analysis.mna import SingularCircuit
from checker.findings import Finding, Severity, Suggestion
from checker.model import Origin, Stage

# Enough points to bracket each loop crossover, which is then refined on a local grid:
# for a copy of a stage that a rule reads only phase margins from.
MARGIN_POINTS = 50
RULE_ID = re.compile(r"^[a-z][a-z0-9]*(-[a-z0-9]+)*$")
DOC_SECTIONS = ("What it checks", "Why it matters", "How the fix is computed", "Sources")
ENGINE_RULES = {
    "input-invalid": "A file could not be read, parsed, validated or built.",
    "stage-unsolvable": "The stage's equations have no unique solution as drawn.",
    "output-on-rail": "An op-amp's output is wired straight to a supply rail.",
    "rule-failed": "A rule stopped with an internal error; the other rules still ran.",
    "review-failed": "A file's review stopped (an internal error, its time budget or its"
                     " memory cap); the other files were still reviewed.",
    "waiver-invalid": "A waiver in a stage file gives no reason or names no known rule.",
    "waiver-stale": "A waiver in a stage file matched no finding; remove it.",
    "baseline-stale": "A baseline entry matched no finding; prune the baseline.",
}


class RuleError(Exception):
    """A rule module or definition that cannot be used (a configuration error)."""


@dataclass(frozen=True)
class Rule:
    id: str
    severity: Severity
    summary: str
    settings: dict[str, float]
    check: Callable[["StageView"], Iterable[Finding]]
    module: str

    @property
    def doc(self) -> str:
        return inspect.cleandoc(self.check.__doc__ or "")

    def sections(self) -> dict[str, str]:
        """The docstring's sections by heading (a heading is a line ending in ':')."""
        found: dict[str, list[str]] = {}
        current = None
        for line in self.doc.splitlines():
            heading = line.strip().rstrip(":")
            if line.strip().endswith(":") and heading in DOC_SECTIONS:
                current = heading
                found[current] = []
            elif current:
                found[current].append(line)
        return {k: "\n".join(v).strip() for k, v in found.items()}


def rule(id: str, severity: str, summary: str, **settings: float):
    """Declare a rule: a stable kebab-case id, a default severity, a one-line summary
    and its settings with their defaults (override them in configuration)."""
    if not RULE_ID.match(id):
        raise RuleError(f"rule id {id!r} is not kebab-case")

    def decorate(function: Callable) -> Callable:
        function.__ampcheck_rule__ = Rule(id=id, severity=Severity.parse(severity),
                                          summary=summary, settings=dict(settings),
                                          check=function, module=function.__module__)
        return function

    return decorate


def rules_in(module: ModuleType) -> list[Rule]:
    """The rules defined by decorated functions in ``module``."""
    return [value.__ampcheck_rule__ for value in vars(module).values()
            if callable(value) and hasattr(value, "__ampcheck_rule__")
            and value.__module__ == module.__name__]


def _builtin_modules() -> list[ModuleType]:
    try:
        package = importlib.import_module("checker.rules")
    except ModuleNotFoundError:
        # Run from a source checkout that is not installed (python -m checker in the
        # repository): the rules folder sits beside the package, as it does in git.
        folder = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))),
                              "rules")
        return _folder_modules(folder)
    names = sorted(info.name for info in pkgutil.iter_modules(package.__path__)
                   if not info.name.startswith("_"))
    return [importlib.import_module(f"checker.rules.{name}") for name in names]


def _folder_modules(folder: str) -> list[ModuleType]:
    if not os.path.isdir(folder):
        raise RuleError(f"rule folder {folder} does not exist")
    modules = []
    for name in sorted(os.listdir(folder)):
        if not name.endswith(".py") or name.startswith("_"):
            continue
        path = os.path.join(folder, name)
        module_name = f"ampcheck_user_rules.{os.path.basename(os.path.abspath(folder))}.{name[:-3]}"
        spec = importlib.util.spec_from_file_location(module_name, path)
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
            if item.id in found or item.id in ENGINE_RULES:
                raise RuleError(f"rule id {item.id!r} is defined twice"
                                f" ({found[item.id].module if item.id in found else 'engine'}"
                                f" and {item.module})")
            found[item.id] = item
    return dict(sorted(found.items()))


@dataclass
class StageView:
    """What a rule sees of one stage: the model, its figures, the rule's settings."""

    stage: Stage
    figures: Figures
    rule: Rule
    settings: dict[str, float]
    siblings: dict[str, Figures] = field(default_factory=dict)  # other stages of the file

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
                suggestion: Suggestion | None = None, **details) -> Finding:
        origin = at or self.stage.origin
        return Finding(rule=self.rule.id, severity=severity or self.rule.severity,
                       message=message, path=origin.path, line=origin.line,
                       column=origin.column, stage=self.stage.name,
                       elements=tuple(elements), measured=measured, limit=limit, unit=unit,
                       suggestion=suggestion, details=details)

    def cannot_check(self, what: str, why: str, at: Origin | None = None,
                     elements=()) -> Finding:
        """An info finding: this rule could not check ``what`` because ``why``."""
        return self.finding(f"could not check {what}: {why}", at, elements=elements,
                            severity=Severity.INFO, unchecked=True)


@dataclass(frozen=True)
class RunOptions:
    analysis: AnalysisOptions = AnalysisOptions(stray_capacitance_f=1e-12)
    select: frozenset[str] | None = None  # None: every rule
    ignore: frozenset[str] = frozenset()
    settings: dict[str, dict[str, float]] = field(default_factory=dict)
    severities: dict[str, Severity] = field(default_factory=dict)  # per-rule overrides
    known_rules: frozenset[str] = frozenset()  # every loaded rule id, for waiver checks


def selected(rules: dict[str, Rule], options: RunOptions) -> list[Rule]:
    return [r for rid, r in rules.items()
            if (options.select is None or rid in options.select) and rid not in options.ignore]


def check_stages(stages: list[Stage], rules: list[Rule], options: RunOptions
                 ) -> tuple[dict[str, Figures], dict[str, list[Finding]]]:
    """Figures and findings of every stage of one file (stages may look at siblings)."""
    figures = {stage.name: analyse(stage, options.analysis) for stage in stages}
    findings: dict[str, list[Finding]] = {}
    for stage in stages:
        findings[stage.name] = check_stage(stage, figures[stage.name], rules, options, figures)
    return figures, findings


def check_stage(stage: Stage, figures: Figures, rules: list[Rule], options: RunOptions,
                siblings: dict[str, Figures] | None = None) -> list[Finding]:
    """Run each rule over one stage; a failing rule becomes a finding, never a crash."""
    results: list[Finding] = []
    ran = {item.id for item in rules}
    for problem in figures.problems:
        if problem.kind == "output-on-rail":
            origin = stage.element(problem.elements[0]).origin
            results.append(Finding(rule="output-on-rail", severity=Severity.ERROR,
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
            results.append(Finding(rule="stage-unsolvable", severity=Severity.ERROR,
                                   message=problem.message, path=origin.path, line=origin.line,
                                   column=origin.column, stage=stage.name,
                                   elements=problem.elements))
    for item in rules:
        settings = dict(item.settings)
        settings.update(options.settings.get(item.id, {}))
        view = StageView(stage, figures, item, settings, siblings or {})
        severity = options.severities.get(item.id)
        try:
            for finding in item.check(view) or ():
                if severity is not None and not finding.details.get("unchecked"):
                    finding = replace(finding, severity=severity)
                results.append(finding)
        except SingularCircuit:
            continue  # already reported once as stage-unsolvable
        except Exception as error:  # a rule's bug must not stop the run
            results.append(Finding(rule="rule-failed", severity=Severity.ERROR,
                                   message=f"rule {item.id} failed: {type(error).__name__}:"
                                           f" {error}", path=stage.path,
                                   line=stage.origin.line, column=stage.origin.column,
                                   stage=stage.name))
    results = apply_waivers(stage, results, ran, options.known_rules | ran)
    return sorted(results, key=Finding.sort_key)


def apply_waivers(stage: Stage, findings: list[Finding], ran: set[str],
                  known: set[str]) -> list[Finding]:
    """Mark findings covered by the stage's waivers; report waivers that are invalid
    (no reason, unknown rule) or stale (matched nothing of a rule that ran)."""
    result = list(findings)
    extra = []
    for waiver in stage.waivers:
        origin = waiver.origin
        target = f"on {waiver.element}" if waiver.element else f"on stage {stage.name}"

        def report(rule_id: str, severity: Severity, message: str) -> None:
            extra.append(Finding(rule=rule_id, severity=severity, message=message,
                                 path=origin.path, line=origin.line, column=origin.column,
                                 stage=stage.name,
                                 elements=(waiver.element,) if waiver.element else ()))

        if waiver.rule not in known and waiver.rule not in ENGINE_RULES:
            import difflib

            close = difflib.get_close_matches(waiver.rule, sorted(known), n=1)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            report("waiver-invalid", Severity.ERROR,
                   f"waiver {target} names no known rule {waiver.rule!r}{hint}")
            continue
        if waiver.reason is None:
            report("waiver-invalid", Severity.ERROR,
                   f"waiver of {waiver.rule} {target} gives no reason: write"
                   f' (waive {waiver.rule} "why this is acceptable")')
            continue
        matched = False
        for i, finding in enumerate(result):
            if finding.rule == waiver.rule and finding.waiver is None and (
                    waiver.element is None or waiver.element in finding.elements):
                result[i] = replace(finding, waiver=waiver.reason)
                matched = True
        if not matched and waiver.rule in ran:
            report("waiver-stale", Severity.INFO,
                   f"waiver of {waiver.rule} {target} matched no finding; remove it")
    return result + extra
