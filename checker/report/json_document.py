"""The versioned JSON report document (format "ampcheck-report", version 1).

Numbers are SI floats, null where a figure does not apply; findings sorted by path,
line, column, severity, rule. Documented in docs/report-json.md.
"""

from __future__ import annotations

import json

from checker.findings import Finding
from checker.report.context import ReportContext
from checker.review import FileResult, count_by_severity

FORMAT_NAME = "ampcheck-report"
FORMAT_VERSION = 1


def finding_dict(finding: Finding) -> dict:
    suggestion = None
    if finding.suggestion is not None:
        suggestion = {"text": finding.suggestion.text, "value": finding.suggestion.value,
                      "unit": finding.suggestion.unit, "element": finding.suggestion.element}
    return {"rule": finding.rule, "severity": finding.severity.label,
            "message": finding.message, "stage": finding.stage,
            "elements": list(finding.elements), "path": finding.path, "line": finding.line,
            "column": finding.column, "measured": finding.measured, "limit": finding.limit,
            "unit": finding.unit, "suggestion": suggestion}


def document(results: list[FileResult], context: ReportContext) -> dict:
    files = []
    every: list[Finding] = []
    stage_count = 0
    for result in results:
        every.extend(result.findings())
        stages = []
        for item in result.stages:
            stage_count += 1
            summary = dict(item.summary)
            topology = summary.pop("topology", None)
            stages.append({"name": item.stage.name, "line": item.stage.origin.line,
                           "topology": topology, "figures": summary,
                           "amplifiers": item.amplifiers,
                           "findings": [finding_dict(f) for f in item.findings]})
        files.append({"path": result.path,
                      "problems": [finding_dict(f) for f in result.problems],
                      "stages": stages})
    summary = {"files": len(results), "stages": stage_count, **count_by_severity(every)}
    return {"format": FORMAT_NAME, "version": FORMAT_VERSION,
            "tool": {"name": "ampcheck", "version": context.tool_version},
            "summary": summary, "files": files}


def render(results: list[FileResult], context: ReportContext) -> str:
    return json.dumps(document(results, context), indent=2, ensure_ascii=False,
                      allow_nan=False) + "\n"
