"""SARIF 2.1.0 output (OASIS Static Analysis Results Interchange Format).

Rule entries carry each rule's documentation: ``help.text`` and ``help.markdown`` built
from its docstring sections and example stages (checker/rule_help.py; an engine
finding's from its catalogue entry), and ``properties.tags``, ``design-review`` and the
area it checks (checker/rule_tags.py). No ``security-severity`` and no ``security``
tag: these are design findings, not vulnerabilities. Results carry level, message, a
physical location with a repository-relative URI and start line, and a stable
fingerprint (file, stage, elements, rule: no line numbers) under our own
``ampcheckFinding/v1`` and under ``primaryLocationLineHash`` too, since code scanning
computes a hash of the line's text under that key whenever it is absent, and editing a
value on the reported line would then reopen the alert. Waived and baselined findings
carry suppressions. Safety cautions are results too, at level warning, tagged
``ampcheck-safety-caution`` in ``properties.tags`` (as are their rule entries); an
acknowledged caution carries its reason in ``properties.acknowledged`` and no
suppression, so viewers that hide suppressed results still show it. No timestamps, so
the same input gives the same bytes.
"""

from __future__ import annotations

import hashlib
import json
import os
from urllib.parse import quote

from checker.cautions import KINDS as CAUTION_KINDS
from checker.catalogue import ENGINE_CATALOGUE, ENGINE_RULES
from checker.findings import Finding, Severity
from checker.records import CAUTION_TAG, Caution
from checker.report import Writer as BaseWriter
from checker.report.context import ReportContext
from checker.report.finite import finite_json
from checker.report.machine_units import machine_unit
from checker.records import FileResult
from checker.rule_help import help_markdown, help_text
from checker.rule_tags import rule_tags

LEVEL = {Severity.ERROR: "error", Severity.WARNING: "warning", Severity.INFO: "note"}
SCHEMA_URI = "https://docs.oasis-open.org/sarif/sarif/v2.1.0/errata01/os/schemas/sarif-schema-2.1.0.json"


def repository_root(start: str) -> str:
    """The closest folder above ``start`` holding .git, else ``start`` itself."""
    folder = os.path.abspath(start)
    while True:
        if os.path.exists(os.path.join(folder, ".git")):
            return folder
        parent = os.path.dirname(folder)
        if parent == folder:
            return os.path.abspath(start)
        folder = parent


def uri_reference(path: str) -> str:
    """A relative path as the URI reference SARIF's ``uri`` holds (RFC 3986):
    spaces, non-ASCII letters, ``#`` and ``%`` percent-encoded, ``/`` kept. The
    fingerprints hash the plain path, so they stay as they were."""
    return quote(path, safe="/")


def fingerprint(finding: Finding | Caution, uri: str) -> str:
    rule = finding.caution if isinstance(finding, Caution) else finding.rule
    text = "\x1f".join((uri, finding.stage or "", *finding.elements, rule))
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:32]


FINGERPRINT_KEY = "ampcheckFinding/v1"
LINE_HASH_KEY = "primaryLocationLineHash"  # code scanning's own key: ours stands in for it


def partial_fingerprints(finding: Finding | Caution, uri: str) -> dict[str, str]:
    """Our stable fingerprint under our key and under code scanning's line-hash key."""
    value = fingerprint(finding, uri)
    return {FINGERPRINT_KEY: value, LINE_HASH_KEY: value}


def _help(item) -> dict:
    return {"text": help_text(item), "markdown": help_markdown(item)}


def _caution_entry(caution_id: str) -> dict:
    kind = CAUTION_KINDS[caution_id]
    return {"id": kind.id, "name": kind.id, "shortDescription": {"text": kind.summary},
            "fullDescription": {"text": kind.summary}, "help": _help(kind),
            "defaultConfiguration": {"level": "warning"},
            "properties": {"tags": [CAUTION_TAG]}}


def caution_result(caution: Caution, root: str, index: dict[str, int]) -> dict:
    """A caution as a SARIF result, tagged as one; never suppressed."""
    uri = os.path.relpath(os.path.abspath(caution.path), root).replace(os.sep, "/")
    properties: dict[str, object] = {"tags": [CAUTION_TAG], "stage": caution.stage, "basis": caution.basis}
    if caution.elements:
        properties["elements"] = list(caution.elements)
    for key in ("measured", "limit", "unit", "acknowledged"):
        if getattr(caution, key) is not None:
            value = getattr(caution, key)
            properties[key] = machine_unit(value) if key == "unit" else value
    text = caution.message + (f" (Acknowledged: {caution.acknowledged}.)"
                              if caution.acknowledged is not None else "")
    return {
        "ruleId": caution.caution, "ruleIndex": index[caution.caution], "level": "warning",
        "message": {"text": text},
        "locations": [{"physicalLocation": {
            "artifactLocation": {"uri": uri_reference(uri), "uriBaseId": "SRCROOT"},
            "region": {"startLine": caution.line, "startColumn": caution.column}}}],
        "partialFingerprints": partial_fingerprints(caution, uri),
        "properties": properties,
    }


def _rule_entry(rule_id: str, context: ReportContext) -> dict:
    if rule_id in CAUTION_KINDS:
        return _caution_entry(rule_id)
    rule = context.rules.get(rule_id)
    if rule is None:
        item = ENGINE_CATALOGUE[rule_id]  # the rule table holds no other ids
        return {"id": item.id, "name": item.id, "shortDescription": {"text": item.summary},
                "fullDescription": {"text": " ".join(item.means.split())},
                "help": _help(item),
                "defaultConfiguration": {"level": LEVEL[item.severity]},
                "properties": {"tags": rule_tags(item.id)}}
    sections = rule.sections()
    return {"id": rule.id, "name": rule.id,
            "shortDescription": {"text": rule.summary},
            "fullDescription": {"text": " ".join(sections.get("What it checks", "").split())},
            "help": _help(rule),
            "defaultConfiguration": {"level": LEVEL[rule.severity]},
            "properties": {"tags": rule_tags(rule.id), "settings": rule.settings}}


def result_entry(finding: Finding, root: str, index: dict[str, int]) -> dict:
    uri = os.path.relpath(os.path.abspath(finding.path), root).replace(os.sep, "/")
    text = finding.message
    if finding.suggestion is not None:
        if finding.suggestion.withheld:
            text += (f" No safe fix: the computed one ({finding.suggestion.text}) brings in an"
                     " error when re-checked.")
        else:
            text += f" Fix: {finding.suggestion.text}."
        if finding.suggestion.check is not None:
            text += f" ({finding.suggestion.check.summary()}.)"
    item = {
        "ruleId": finding.rule, "ruleIndex": index[finding.rule],
        "level": LEVEL[finding.severity], "message": {"text": text},
        "locations": [{"physicalLocation": {
            "artifactLocation": {"uri": uri_reference(uri), "uriBaseId": "SRCROOT"},
            "region": {"startLine": finding.line, "startColumn": finding.column}}}],
        "partialFingerprints": partial_fingerprints(finding, uri),
    }
    properties: dict[str, object] = {}
    if finding.stage:
        properties["stage"] = finding.stage
    if finding.elements:
        properties["elements"] = list(finding.elements)
    for key in ("measured", "limit", "unit"):
        if getattr(finding, key) is not None:
            value = getattr(finding, key)
            properties[key] = machine_unit(value) if key == "unit" else value
    if properties:
        item["properties"] = properties
    suppressions = []
    if finding.waiver is not None:
        suppressions.append({"kind": "inSource", "justification": finding.waiver})
    if finding.baselined:
        suppressions.append({"kind": "external", "justification": "recorded in the baseline"})
    if suppressions:
        item["suppressions"] = suppressions
    return item


class Writer(BaseWriter):
    """Streams one run: the rule table first (every known rule), then each result."""

    def __init__(self, out, context: ReportContext):
        super().__init__(out, context)
        self.root = repository_root(os.getcwd())
        rule_ids = sorted(set(context.rules) | set(ENGINE_RULES) | set(CAUTION_KINDS))
        self.index = {rule_id: i for i, rule_id in enumerate(rule_ids)}
        driver = {"name": "ampcheck", "version": context.tool_version,
                  "rules": [_rule_entry(r, context) for r in rule_ids]}
        tool = json.dumps(finite_json({"driver": driver}), indent=2, ensure_ascii=False,
                          allow_nan=False)
        out.write(f'{{\n  "$schema": "{SCHEMA_URI}",\n  "version": "2.1.0",\n  "runs": [\n'
                  f'    {{\n      "tool": {tool.replace(chr(10), chr(10) + "      ")},\n'
                  '      "columnKind": "unicodeCodePoints",\n      "results": [')
        self.count = 0

    def add(self, result: FileResult) -> None:
        entries = [caution_result(c, self.root, self.index) for c in result.cautions()]
        entries += [result_entry(f, self.root, self.index) for f in result.findings()]
        for item in entries:
            entry = json.dumps(finite_json(item), indent=2, ensure_ascii=False,
                               allow_nan=False)
            self.out.write(("," if self.count else "") + "\n        " +
                           entry.replace("\n", "\n        "))
            self.count += 1

    def close(self) -> None:
        self.out.write(("\n      " if self.count else "") + "]\n    }\n  ]\n}\n")
