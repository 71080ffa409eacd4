"""The versioned JSON report document (format "ampcheck-report", version 1).

Numbers are SI floats, null where a figure does not apply; findings sorted by path,
line, column, severity, rule. Documented in docs/report-json.md.
"""

from __future__ import annotations

import json

from checker.findings import Finding
from checker.report.context import ReportContext
from checker.report import Writer as BaseWriter
from checker.report.finite import finite_json
from checker.review import FileResult

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
            "unit": finding.unit, "suggestion": suggestion, "waived": finding.waiver,
            "baselined": finding.baselined}


def file_dict(result: FileResult) -> dict:
    stages = []
    for item in result.stages:
        summary = dict(item.summary)
        topology = summary.pop("topology", None)
        stages.append({"name": item.name, "line": item.line, "topology": topology,
                       "figures": summary, "amplifiers": item.amplifiers,
                       "findings": [finding_dict(f) for f in item.findings]})
    return {"path": result.path, "problems": [finding_dict(f) for f in result.problems],
            "stages": stages}


def _indented(value, depth: int) -> str:
    text = json.dumps(finite_json(value), indent=2, ensure_ascii=False, allow_nan=False)
    return text.replace("\n", "\n" + "  " * depth)


class Writer(BaseWriter):
    """Streams the document: each file's entry as it arrives, the summary last."""

    def __init__(self, out, context: ReportContext):
        super().__init__(out, context)
        self.files = self.stages = 0
        self.counts = {"error": 0, "warning": 0, "info": 0}
        tool = {"name": "ampcheck", "version": context.tool_version}
        out.write(f'{{\n  "format": "{FORMAT_NAME}",\n  "version": {FORMAT_VERSION},\n'
                  f'  "tool": {_indented(tool, 1)},\n  "files": [')

    def add(self, result: FileResult) -> None:
        self.out.write(("," if self.files else "") + "\n    " + _indented(file_dict(result), 2))
        self.files += 1
        self.stages += len(result.stages)
        for finding in result.findings():
            self.counts[finding.severity.label] += 1

    def close(self) -> None:
        summary = {"files": self.files, "stages": self.stages, **self.counts}
        self.out.write(("\n  " if self.files else "") +
                       f'],\n  "summary": {_indented(summary, 1)}\n}}\n')


_NUMBER = {"type": ["number", "null"]}
_FINDING = {
    "type": "object",
    "required": ["rule", "severity", "message", "stage", "elements", "path", "line", "column",
                 "measured", "limit", "unit", "suggestion", "waived", "baselined"],
    "additionalProperties": False,
    "properties": {
        "rule": {"type": "string"},
        "severity": {"enum": ["error", "warning", "info"]},
        "message": {"type": "string"},
        "stage": {"type": ["string", "null"]},
        "elements": {"type": "array", "items": {"type": "string"}},
        "path": {"type": "string"},
        "line": {"type": "integer", "minimum": 1},
        "column": {"type": "integer", "minimum": 1},
        "measured": _NUMBER,
        "limit": _NUMBER,
        "unit": {"type": ["string", "null"]},
        "waived": {"type": ["string", "null"]},
        "baselined": {"type": "boolean"},
        "suggestion": {"oneOf": [{"type": "null"}, {
            "type": "object", "required": ["text", "value", "unit", "element"],
            "additionalProperties": False,
            "properties": {"text": {"type": "string"}, "value": _NUMBER,
                           "unit": {"type": ["string", "null"]},
                           "element": {"type": ["string", "null"]}}}]},
    },
}
STAGE_FIGURES = ("gain", "input_resistance", "output_resistance", "bandwidth", "phase_margin",
                 "crossover", "noise_gain", "feedback_pole", "output_low", "output_high")
REPORT_SCHEMA = {
    "$schema": "https://json-schema.org/draft/2020-12/schema",
    "title": "ampcheck report, version 1",
    "type": "object",
    "required": ["format", "version", "tool", "summary", "files"],
    "additionalProperties": False,
    "properties": {
        "format": {"const": FORMAT_NAME},
        "version": {"const": FORMAT_VERSION},
        "tool": {"type": "object", "required": ["name", "version"],
                 "properties": {"name": {"const": "ampcheck"}, "version": {"type": "string"}}},
        "summary": {"type": "object",
                    "required": ["files", "stages", "error", "warning", "info"],
                    "additionalProperties": False,
                    "properties": {k: {"type": "integer", "minimum": 0}
                                   for k in ("files", "stages", "error", "warning", "info")}},
        "files": {"type": "array", "items": {
            "type": "object", "required": ["path", "problems", "stages"],
            "additionalProperties": False,
            "properties": {
                "path": {"type": "string"},
                "problems": {"type": "array", "items": _FINDING},
                "stages": {"type": "array", "items": {
                    "type": "object",
                    "required": ["name", "line", "topology", "figures", "amplifiers", "findings"],
                    "additionalProperties": False,
                    "properties": {
                        "name": {"type": "string"},
                        "line": {"type": "integer"},
                        "topology": {"type": ["string", "null"]},
                        "figures": {"type": "object", "required": list(STAGE_FIGURES),
                                    "additionalProperties": False,
                                    "properties": {k: _NUMBER for k in STAGE_FIGURES}},
                        "amplifiers": {"type": "object", "additionalProperties": {
                            "type": "object",
                            "required": ["phase_margin", "crossover", "noise_gain"]}},
                        "findings": {"type": "array", "items": _FINDING},
                    }}},
            }}},
    },
}
