"""SARIF 2.1.0 output (OASIS Static Analysis Results Interchange Format).

Rule entries carry each rule's documentation; results carry level, message, a physical
location with a repository-relative URI and start line, a stable partial fingerprint
(file, stage, elements, rule: no line numbers), and suppressions for waived and
baselined findings. No timestamps, so the same input gives the same bytes.
"""

from __future__ import annotations

import hashlib
import json
import os

from checker.engine import ENGINE_RULES
from checker.findings import Finding, Severity
from checker.report.context import ReportContext
from checker.review import FileResult

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


def fingerprint(finding: Finding, uri: str) -> str:
    text = "\x1f".join((uri, finding.stage or "", *finding.elements, finding.rule))
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:32]


def _rule_entry(rule_id: str, context: ReportContext) -> dict:
    rule = context.rules.get(rule_id)
    if rule is None:
        summary = ENGINE_RULES.get(rule_id, rule_id)
        return {"id": rule_id, "shortDescription": {"text": summary},
                "fullDescription": {"text": summary},
                "defaultConfiguration": {"level": "error" if rule_id in (
                    "input-invalid", "stage-unsolvable", "rule-failed", "waiver-invalid")
                    else "note"}}
    sections = rule.sections()
    markdown = "\n\n".join(f"**{heading}**\n\n{' '.join(text.split())}"
                           for heading, text in sections.items())
    return {"id": rule.id, "name": rule.id,
            "shortDescription": {"text": rule.summary},
            "fullDescription": {"text": " ".join(sections.get("What it checks", "").split())},
            "help": {"text": rule.doc, "markdown": markdown},
            "defaultConfiguration": {"level": LEVEL[rule.severity]},
            "properties": {"settings": rule.settings}}


def document(results: list[FileResult], context: ReportContext, root: str | None = None) -> dict:
    root = root or repository_root(os.getcwd())
    findings = [f for result in results for f in result.findings()]
    rule_ids = sorted(set(context.rules) | {f.rule for f in findings})
    index = {rule_id: i for i, rule_id in enumerate(rule_ids)}
    sarif_results = []
    for finding in findings:
        uri = os.path.relpath(os.path.abspath(finding.path), root).replace(os.sep, "/")
        text = finding.message
        if finding.suggestion is not None:
            text += f" Fix: {finding.suggestion.text}."
        item = {
            "ruleId": finding.rule, "ruleIndex": index[finding.rule],
            "level": LEVEL[finding.severity], "message": {"text": text},
            "locations": [{"physicalLocation": {
                "artifactLocation": {"uri": uri, "uriBaseId": "SRCROOT"},
                "region": {"startLine": finding.line, "startColumn": finding.column}}}],
            "partialFingerprints": {"ampcheckFinding/v1": fingerprint(finding, uri)},
        }
        properties = {}
        if finding.stage:
            properties["stage"] = finding.stage
        if finding.elements:
            properties["elements"] = list(finding.elements)
        for key in ("measured", "limit", "unit"):
            if getattr(finding, key) is not None:
                properties[key] = getattr(finding, key)
        if properties:
            item["properties"] = properties
        suppressions = []
        if finding.waiver is not None:
            suppressions.append({"kind": "inSource", "justification": finding.waiver})
        if finding.baselined:
            suppressions.append({"kind": "external",
                                 "justification": "recorded in the baseline"})
        if suppressions:
            item["suppressions"] = suppressions
        sarif_results.append(item)
    return {
        "$schema": SCHEMA_URI,
        "version": "2.1.0",
        "runs": [{
            "tool": {"driver": {"name": "ampcheck", "version": context.tool_version,
                                "rules": [_rule_entry(r, context) for r in rule_ids]}},
            "columnKind": "unicodeCodePoints",
            "results": sarif_results,
        }],
    }


def render(results: list[FileResult], context: ReportContext) -> str:
    return json.dumps(document(results, context), indent=2, ensure_ascii=False) + "\n"
