"""The versioned JSON report document (format "ampcheck-report", version 4).

A fraction (a tolerance, a gain error) is named with the unit "ratio" beside its
value, never "%" (checker/report/machine_units.py).

Numbers are SI floats, null where a figure does not apply; findings sorted by path,
line, column, severity, rule. Safety cautions sit beside the findings in each stage and,
all of them, in the document's own top-level ``cautions``. Documented in
docs/report-json.md.
"""

from __future__ import annotations

import json

from checker.findings import Finding
from checker.records import BASES, STATUSES, Caution, Verdict
from checker.report.context import ReportContext
from checker.report import Writer as BaseWriter
from checker.report.finite import finite_json
from checker.report.machine_units import machine_unit
from checker.records import FileResult

FORMAT_NAME = "ampcheck-report"
FORMAT_VERSION = 4


def change_dict(change) -> dict:
    """A proposed change as a plain object: ``change``, the record's name in kebab case
    (``set-value``, ``add-passive``, ``swap-inputs``, ...), then its fields; a part
    given by ``use-part`` appears by name."""
    name = "".join("-" + c.lower() if c.isupper() else c for c in type(change).__name__)
    fields = {}
    for key, value in vars(change).items():
        if isinstance(value, tuple):
            value = list(value)
        elif hasattr(value, "gbw_hz"):  # an OpAmpPart
            value = value.name
        fields[key] = value
    return {"change": name.lstrip("-"), **fields}


def check_dict(check) -> dict | None:
    if check is None:
        return None
    return {"clears": check.clears, "introduces": list(check.introduces),
            "introduces_error": check.introduces_error, "clears_also": list(check.clears_also),
            "meets": list(check.meets), "breaks": list(check.breaks)}


def finding_dict(finding: Finding) -> dict:
    suggestion = None
    if finding.suggestion is not None:
        s = finding.suggestion
        suggestion = {"text": s.text, "value": s.value, "unit": machine_unit(s.unit),
                      "element": s.element, "changes": [change_dict(c) for c in s.changes],
                      "check": check_dict(s.check), "withheld": s.withheld}
    return {"rule": finding.rule, "severity": finding.severity.label,
            "message": finding.message, "stage": finding.stage,
            "elements": list(finding.elements), "path": finding.path, "line": finding.line,
            "column": finding.column, "measured": finding.measured, "limit": finding.limit,
            "unit": machine_unit(finding.unit), "suggestion": suggestion,
            "waived": finding.waiver, "baselined": finding.baselined,
            **_worst_case(finding)}


def _worst_case(finding: Finding) -> dict:
    """A tolerance finding's ``worst_case`` (its method and whether its corner was
    verified) where the corners were not all enumerated; absent otherwise."""
    record = finding.details.get("worst_case")
    if not isinstance(record, dict):
        return {}
    return {"worst_case": {"method": str(record["method"]),
                           "verified": bool(record["verified"])}}


def verdict_dict(verdict: Verdict) -> dict:
    return {"requirement": verdict.requirement, "status": verdict.status,
            "required": verdict.required, "statement": verdict.statement,
            "reason": verdict.reason, "measured": verdict.measured, "limit": verdict.limit,
            "unit": machine_unit(verdict.unit), "line": verdict.line, "column": verdict.column,
            "explained_by": list(verdict.explained_by)}


def caution_dict(caution: Caution) -> dict:
    return {"caution": caution.caution, "message": caution.message,
            "statement": caution.statement, "stage": caution.stage,
            "elements": list(caution.elements), "path": caution.path, "line": caution.line,
            "column": caution.column, "basis": caution.basis, "measured": caution.measured,
            "limit": caution.limit, "unit": machine_unit(caution.unit),
            "acknowledged": caution.acknowledged}


def file_dict(result: FileResult) -> dict:
    stages = []
    for item in result.stages:
        summary = dict(item.summary)
        topology = summary.pop("topology", None)
        stages.append({"name": item.name, "line": item.line, "topology": topology,
                       "figures": summary, "amplifiers": item.amplifiers,
                       "requirements": [verdict_dict(v) for v in item.verdicts],
                       "cautions": [caution_dict(c) for c in item.cautions],
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
        self.verdicts = dict.fromkeys(STATUSES, 0)
        self.cautions: list[dict] = []  # few, and wanted again at the top level
        tool = {"name": "ampcheck", "version": context.tool_version}
        out.write(f'{{\n  "format": "{FORMAT_NAME}",\n  "version": {FORMAT_VERSION},\n'
                  f'  "tool": {_indented(tool, 1)},\n  "files": [')

    def add(self, result: FileResult) -> None:
        self.out.write(("," if self.files else "") + "\n    " + _indented(file_dict(result), 2))
        self.files += 1
        self.stages += len(result.stages)
        for finding in result.findings():
            self.counts[finding.severity.label] += 1
        for stage in result.stages:
            for verdict in stage.verdicts:
                self.verdicts[verdict.status] += 1
        self.cautions.extend(caution_dict(c) for c in result.cautions())

    def close(self) -> None:
        summary = {"files": self.files, "stages": self.stages, **self.counts,
                   "requirements": self.verdicts, "cautions": len(self.cautions),
                   "cautions_acknowledged": sum(1 for c in self.cautions
                                                if c["acknowledged"] is not None)}
        self.out.write(("\n  " if self.files else "") +
                       f'],\n  "cautions": {_indented(self.cautions, 1)},'
                       f'\n  "summary": {_indented(summary, 1)}\n}}\n')


_NUMBER = {"type": ["number", "null"]}
_UNIT = {"type": ["string", "null"], "not": {"const": "%"}}  # a fraction is "ratio"
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
        "unit": _UNIT,
        "waived": {"type": ["string", "null"]},
        "baselined": {"type": "boolean"},
        "worst_case": {"type": "object", "required": ["method", "verified"],
                       "additionalProperties": False,
                       "properties": {"method": {"enum": ["sensitivity", "monte-carlo"]},
                                      "verified": {"type": "boolean"}}},
        "suggestion": {"oneOf": [{"type": "null"}, {
            "type": "object",
            "required": ["text", "value", "unit", "element", "changes", "check", "withheld"],
            "additionalProperties": False,
            "properties": {"text": {"type": "string"}, "value": _NUMBER,
                           "unit": _UNIT,
                           "element": {"type": ["string", "null"]},
                           "changes": {"type": "array", "items": {
                               "type": "object", "required": ["change"],
                               "properties": {"change": {"type": "string"}}}},
                           "check": {"oneOf": [{"type": "null"}, {
                               "type": "object",
                               "required": ["clears", "introduces", "introduces_error",
                                            "clears_also", "meets", "breaks"],
                               "additionalProperties": False,
                               "properties": {
                                   "clears": {"type": "boolean"},
                                   "introduces_error": {"type": "boolean"},
                                   **{k: {"type": "array", "items": {"type": "string"}}
                                      for k in ("introduces", "clears_also", "meets",
                                                "breaks")}}}]},
                           "withheld": {"type": "boolean"}}}]},
    },
}
STAGE_FIGURES = ("gain", "gain_from_net", "input_resistance", "output_resistance", "bandwidth",
                 "phase_margin", "crossover", "noise_gain", "feedback_pole", "output_low",
                 "output_high", "pole_frequency", "pole_damping", "pole_q", "step_overshoot",
                 "peaking_db", "oscillation_frequency")
_VERDICT = {
    "type": "object",
    "required": ["requirement", "status", "required", "statement", "reason", "measured",
                 "limit", "unit", "line", "column", "explained_by"],
    "additionalProperties": False,
    "properties": {
        "requirement": {"enum": ["gain", "gain-tolerance", "input-resistance", "bandwidth",
                                 "phase-margin", "headroom", "dc-error", "noise", "cmrr"]},
        "status": {"enum": list(STATUSES)},
        "required": {"type": "string"},
        "statement": {"type": "string"},
        "reason": {"type": ["string", "null"]},
        "measured": _NUMBER,
        "limit": _NUMBER,
        "unit": _UNIT,
        "line": {"type": "integer", "minimum": 1},
        "column": {"type": "integer", "minimum": 1},
        "explained_by": {"type": "array", "items": {"type": "string"}},
    },
}
_CAUTION = {
    "type": "object",
    "required": ["caution", "message", "statement", "stage", "elements", "path", "line",
                 "column", "basis", "measured", "limit", "unit", "acknowledged"],
    "additionalProperties": False,
    "properties": {
        "caution": {"enum": ["high-voltage", "mains-derived"]},
        "message": {"type": "string"},
        "statement": {"type": "string"},
        "stage": {"type": "string"},
        "elements": {"type": "array", "items": {"type": "string"}},
        "path": {"type": "string"},
        "line": {"type": "integer", "minimum": 1},
        "column": {"type": "integer", "minimum": 1},
        "basis": {"enum": list(BASES)},
        "measured": _NUMBER,
        "limit": _NUMBER,
        "unit": _UNIT,
        "acknowledged": {"type": ["string", "null"]},
    },
}
REPORT_SCHEMA = {
    "$schema": "https://json-schema.org/draft/2020-12/schema",
    "title": f"ampcheck report, version {FORMAT_VERSION}",
    "type": "object",
    "required": ["format", "version", "tool", "summary", "files", "cautions"],
    "additionalProperties": False,
    "properties": {
        "format": {"const": FORMAT_NAME},
        "version": {"const": FORMAT_VERSION},
        "tool": {"type": "object", "required": ["name", "version"],
                 "properties": {"name": {"const": "ampcheck"}, "version": {"type": "string"}}},
        "summary": {"type": "object",
                    "required": ["files", "stages", "error", "warning", "info", "requirements",
                                 "cautions", "cautions_acknowledged"],
                    "additionalProperties": False,
                    "properties": {
                        **{k: {"type": "integer", "minimum": 0}
                           for k in ("files", "stages", "error", "warning", "info",
                                     "cautions", "cautions_acknowledged")},
                        "requirements": {
                            "type": "object", "required": list(STATUSES),
                            "additionalProperties": False,
                            "properties": {k: {"type": "integer", "minimum": 0}
                                           for k in STATUSES}}}},
        "cautions": {"type": "array", "items": _CAUTION},
        "files": {"type": "array", "items": {
            "type": "object", "required": ["path", "problems", "stages"],
            "additionalProperties": False,
            "properties": {
                "path": {"type": "string"},
                "problems": {"type": "array", "items": _FINDING},
                "stages": {"type": "array", "items": {
                    "type": "object",
                    "required": ["name", "line", "topology", "figures", "amplifiers",
                                 "requirements", "cautions", "findings"],
                    "additionalProperties": False,
                    "properties": {
                        "name": {"type": "string"},
                        "line": {"type": "integer"},
                        "topology": {"type": ["string", "null"]},
                        "figures": {"type": "object",
                                    "required": list(STAGE_FIGURES) + ["stable"],
                                    "additionalProperties": False,
                                    "properties": {**{k: _NUMBER for k in STAGE_FIGURES},
                                                   "stable": {"type": ["boolean", "null"]}}},
                        "amplifiers": {"type": "object", "additionalProperties": {
                            "type": "object",
                            "required": ["phase_margin", "crossover", "noise_gain"]}},
                        "requirements": {"type": "array", "items": _VERDICT},
                        "cautions": {"type": "array", "items": _CAUTION},
                        "findings": {"type": "array", "items": _FINDING},
                    }}},
            }}},
    },
}
