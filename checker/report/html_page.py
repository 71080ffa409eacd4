"""The HTML review: one self-contained page per run, or a folder for an audit.

No network and no script: the styles are inline, the plots are inline SVG drawn in the
workers (checker/report/plots.py, carried by each stage's StageSheet), and a content
security policy forbids loading anything. Laid out with jinja2 templates kept beside
this module (templates/).

Two shapes (docs/configuration.md, "The HTML review"):

- one file (``--format html`` to standard output, or ``--output html:PATH.html``): an
  overview, then every stage's section, each stage drawn in full. Sections are spooled
  to a temporary file as results arrive, so memory does not grow with the run.
- a folder (``--output html:FOLDER``, any path not ending in .html): ``index.html``
  (the overview) and a page per stage under ``stages/``, each written as its file's
  results arrive; only the plots that bear on a stage's findings are drawn.
"""

from __future__ import annotations

import os
import re
import shutil
import tempfile
from collections import Counter

import jinja2
from markupsafe import Markup

from checker.findings import Finding, Severity
from checker.records import DEFERRAL, MET, NOT_MET
from checker.report import Writer as BaseWriter
from checker.report.context import ReportContext
from checker.records import FileResult, StageResult, count_by_severity
from checker.report.values import measure, measured_line, stage_gain
from checker.units import format_si

MARKER = '<meta name="generator" content="ampcheck'  # an index page of ours begins so
INSTALL = "pip install 'ampcheck[html]'"
STAGE_FOLDER = "stages"


def environment() -> jinja2.Environment:
    return jinja2.Environment(loader=jinja2.PackageLoader("checker.report", "templates"),
                              autoescape=True, trim_blocks=True, lstrip_blocks=True,
                              undefined=jinja2.StrictUndefined, keep_trailing_newline=True)


def one_file_path(path: str) -> bool:
    """True when an --output path names one HTML file rather than a folder."""
    return path.lower().endswith((".html", ".htm"))


def is_review_folder(path: str) -> bool:
    """True for a folder an earlier HTML review wrote (its index.html is ours)."""
    index = os.path.join(path, "index.html")
    try:
        with open(index, encoding="utf-8") as handle:
            return MARKER in handle.read(2000)
    except OSError:
        return False


def foreign_files(path: str) -> list[str]:
    """The files in an earlier review folder that no review wrote (anything but our
    index.html and stage pages, each marked as ours): replacing the folder would delete
    them."""
    found = []
    for folder, _subfolders, names in os.walk(path):
        for name in names:
            full = os.path.join(folder, name)
            relative = os.path.relpath(full, path).replace(os.sep, "/")
            ours = relative == "index.html" or (
                relative.startswith(STAGE_FOLDER + "/") and relative.count("/") == 1
                and name.endswith(".html"))
            if not (ours and _marked(full)):
                found.append(relative)
    return sorted(found)


def _marked(path: str) -> bool:
    try:
        with open(path, encoding="utf-8") as handle:
            return MARKER in handle.read(2000)
    except (OSError, UnicodeDecodeError):
        return False


def slug(text: str) -> str:
    return re.sub(r"[^a-z0-9]+", "-", text.lower()).strip("-")[:60] or "stage"



def _finding(finding: Finding) -> dict:
    s = finding.suggestion
    fix = None
    if s is not None:
        fix = {"text": s.text, "withheld": s.withheld,
               "check": s.check.summary() if s.check is not None else None}
    measured = measured_line(finding.measured, finding.limit, finding.unit)
    return {"severity": finding.severity.label, "rule": finding.rule,
            "message": finding.message, "elements": ", ".join(finding.elements),
            "where": f"{finding.path}:{finding.line}:{finding.column}", "measured": measured,
            "fix": fix, "waived": finding.waiver, "baselined": finding.baselined}


VERDICT_MARKS = {MET: "✓", NOT_MET: "✗"}


def _verdict(verdict) -> dict:
    measured = measure(verdict.measured, verdict.unit) if verdict.measured is not None else None
    return {"status": verdict.status, "mark": VERDICT_MARKS.get(verdict.status, "?"),
            "requirement": verdict.requirement, "required": verdict.required,
            "statement": verdict.statement, "reason": verdict.reason, "measured": measured,
            "explained_by": ", ".join(verdict.explained_by)}


def _figures(summary: dict, gain_unit: str = "V/V") -> list[tuple[str, str]]:
    """The stage's key figures as (name, value) pairs, for its heading."""
    s = summary
    rows = []
    if s.get("topology"):
        rows.append(("topology", s["topology"]))
    if s.get("gain") is not None:
        gain = stage_gain(s["gain"], gain_unit)
        if s.get("gain_from_net") is not None:
            gain += f" (from its net {stage_gain(s['gain_from_net'], gain_unit)})"
        rows.append(("gain", gain))
    for key, name, unit in (("input_resistance", "input resistance", "Ω"),
                            ("bandwidth", "bandwidth", "Hz"),
                            ("crossover", "crossover", "Hz")):
        if s.get(key) is not None:
            rows.append((name, format_si(s[key], unit)))
    if s.get("phase_margin") is not None:
        rows.append(("phase margin", f"{s['phase_margin']:.1f}°"))
    if s.get("stable") is False:
        frequency = s.get("oscillation_frequency")
        rows.append(("stability", "unstable" + (f", oscillates near {format_si(frequency, 'Hz')}"
                                                 if frequency else "")))
    elif s.get("pole_damping") is not None:
        rows.append(("least damped pair", f"ζ {s['pole_damping']:.2f} at"
                     f" {format_si(s['pole_frequency'], 'Hz')}"))
    if s.get("output_low") is not None:
        rows.append(("output", f"{format_si(s['output_low'], 'V')} to"
                     f" {format_si(s['output_high'], 'V')}"))
    return rows


def _caution(caution) -> dict:
    measured = None
    if caution.measured is not None:
        kind = "DC" if caution.basis == "dc" else "AC peak"
        measured = f"{measured_line(caution.measured, caution.limit, caution.unit)} {kind}"
    return {"caution": caution.caution, "statement": caution.statement,
            "where": f"{caution.path}:{caution.line}:{caution.column}",
            "stage": caution.stage, "elements": ", ".join(caution.elements),
            "measured": measured, "acknowledged": caution.acknowledged}


def _status(stage: StageResult) -> str:
    """The stage's mark: "error" when a requirement is not met or an error stands;
    "caution" for a safety caution (it outranks warnings, as in the text report); else
    its worst active finding's severity, else "ok"."""
    if any(v.not_met for v in stage.verdicts):
        return "error"
    active = [f for f in stage.findings if not f.suppressed]
    worst = max((f.severity for f in active), default=None)
    if worst is not None and worst >= Severity.ERROR:
        return "error"
    if stage.cautions:
        return "caution"
    return worst.label if worst is not None and worst >= Severity.WARNING else "ok"


class Writer(BaseWriter):
    """Streams stage sections (one file) or stage pages (a folder); keeps only the
    overview's rows and counters."""

    def __init__(self, out, context: ReportContext, folder: str | None = None):
        super().__init__(out, context)
        self.env = environment()
        self.folder = folder
        self.files: list[dict] = []
        self.counts: Counter = Counter()
        self.suppressed = 0
        self.by_rule: Counter = Counter()
        self.requirements: Counter = Counter()
        self.stages = 0
        self.plots = 0
        self.cautions: list[dict] = []  # few, shown first in the overview
        self.spool = None
        if folder is None:
            self.spool = tempfile.TemporaryFile("w+", encoding="utf-8", newline="")  # noqa: SIM115 (closed in close())
        else:
            os.makedirs(os.path.join(folder, STAGE_FOLDER), exist_ok=True)

    def _base(self) -> dict:
        return {"version": self.context.tool_version}

    def add(self, result: FileResult) -> None:
        rows = []
        for stage in result.stages:
            self.stages += 1
            anchor = f"s{self.stages:04d}-{slug(stage.name)}"
            section = self._stage(result, stage, anchor)
            if self.folder is None:
                link = f"#{anchor}"
                assert self.spool is not None  # one file: __init__ opened the spool
                self.spool.write(self.env.get_template("_stage.html.j2").render(
                    stage=section, overview_link="#overview", **self._base()))
            else:
                link = f"{STAGE_FOLDER}/{anchor}.html"
                page = self.env.get_template("stage_page.html.j2").render(
                    stage=section, overview_link="../index.html", **self._base())
                with open(os.path.join(self.folder, link), "w", encoding="utf-8",
                          newline="") as handle:
                    handle.write(page)
            self.cautions.extend({**c, "link": link} for c in section["cautions"])
            rows.append({"name": stage.name, "line": stage.line, "link": link,
                         "status": section["status"], "counts": section["counts"],
                         "requirements": section["requirement_counts"],
                         "figures": section["figures"][:4]})
        for finding in result.findings():
            if finding.suppressed:
                self.suppressed += 1
                continue
            self.counts[finding.severity.label] += 1
            self.by_rule[(finding.rule, finding.severity.label)] += 1
        problems = [_finding(f) for f in result.problems]
        self.files.append({"path": result.path, "stages": rows, "problems": problems})

    def _stage(self, result: FileResult, stage: StageResult, anchor: str) -> dict:
        verdicts = [_verdict(v) for v in stage.verdicts]
        counted = Counter(v.status for v in stage.verdicts)
        self.requirements.update(counted)
        sheet = stage.sheet
        plots = [{"kind": p.kind, "key": f"{anchor}-{p.key}", "title": p.title, "alt": p.alt,
                  "svg": Markup(p.svg)} for p in (sheet.plots if sheet else ())]
        self.plots += len(plots)
        return {"name": stage.name, "path": result.path, "line": stage.line, "anchor": anchor,
                "status": _status(stage),
                "counts": count_by_severity([f for f in stage.findings if not f.suppressed]),
                "requirement_counts": {"met": counted.get(MET, 0),
                                       "not_met": counted.get(NOT_MET, 0),
                                       "unchecked": len(stage.verdicts) - counted.get(MET, 0)
                                       - counted.get(NOT_MET, 0)},
                "figures": _figures(stage.summary, stage.gain_unit), "verdicts": verdicts,
                "cautions": [_caution(c) for c in stage.cautions], "deferral": DEFERRAL,
                "findings": [_finding(f) for f in sorted(stage.findings, key=Finding.sort_key)],
                "elements": list(sheet.elements) if sheet else [],
                "plots": plots, "notes": list(sheet.notes) if sheet else []}

    def _overview(self) -> dict:
        rules = sorted(self.by_rule.items(), key=lambda item: (-item[1], item[0]))
        return {"files": self.files, "stage_total": self.stages, "plot_total": self.plots,
                "cautions": self.cautions, "deferral": DEFERRAL,
                "counts": {label: self.counts.get(label, 0)
                           for label in ("error", "warning", "info")},
                "suppressed": self.suppressed,
                "requirements": {"met": self.requirements.get(MET, 0),
                                 "not_met": self.requirements.get(NOT_MET, 0),
                                 "unchecked": sum(self.requirements.values())
                                 - self.requirements.get(MET, 0)
                                 - self.requirements.get(NOT_MET, 0)},
                "by_rule": [{"rule": rule, "severity": severity, "count": count}
                            for (rule, severity), count in rules],
                "fail_on": self.context.fail_on.label if self.context.fail_on else None,
                "unreadable": sum(1 for f in self.files if f["problems"])}

    def close(self) -> None:
        overview = self._overview()
        if self.folder is None:
            head, tail = self.env.get_template("one_file.html.j2").render(
                overview=overview, **self._base()).split("<!--stages-->", 1)
            self.out.write(head)
            assert self.spool is not None  # one file: __init__ opened the spool
            self.spool.seek(0)
            shutil.copyfileobj(self.spool, self.out)
            self.spool.close()
            self.out.write(tail)
            return
        page = self.env.get_template("index.html.j2").render(overview=overview,
                                                              **self._base())
        with open(os.path.join(self.folder, "index.html"), "w", encoding="utf-8",
                  newline="") as handle:
            handle.write(page)
