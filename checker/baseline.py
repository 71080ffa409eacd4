"""Baselines for legacy audits: record today's findings, then fail only on new ones.

An entry is keyed on file, stage, elements and rule, never on line numbers, so edits that
move lines keep it matched; repeated keys carry a count. Paths are stored relative to the
baseline file's folder, with forward slashes, so the file works from any working folder
and on any system. The file is sorted and stable, and written atomically.
"""

from __future__ import annotations

import json
import os
from collections import Counter
from collections.abc import Sequence
from dataclasses import replace
from checker.record import record

from checker.catalogue import engine_severity
from checker.findings import Finding
from checker.io.write import write_new_file

FORMAT_NAME = "ampcheck-baseline"
FORMAT_VERSION = 1
Key = tuple[str, str, tuple[str, ...], str]  # (path, stage, elements, rule)
# input-invalid may be baselined: its key is (path, "", (), rule), no line or message
UNBASELINED = {"waiver-invalid", "waiver-stale", "baseline-stale",
               "rule-failed", "review-failed"}


class BaselineError(Exception):
    """A baseline file that cannot be read (a usage error)."""


def relative(path: str, folder: str) -> str:
    return os.path.relpath(os.path.abspath(path), folder).replace(os.sep, "/")


def key_of(finding: Finding, folder: str) -> Key:
    return (relative(finding.path, folder), finding.stage or "", tuple(finding.elements),
            finding.rule)


@record
class Baseline:
    path: str
    counts: Counter  # Key -> how many findings it accepts

    @property
    def folder(self) -> str:
        return os.path.dirname(os.path.abspath(self.path))


MAX_COUNT = 10 ** 9  # findings one entry may accept: far beyond any real file


def _entry_key(entry) -> Key | None:
    """(path, stage, elements, rule) of one entry, None when a part is missing or of the
    wrong type (paths, stages, elements and rules are text)."""
    if not isinstance(entry, dict):
        return None
    path, stage, elements, rule = (entry.get(k) for k in ("path", "stage", "elements", "rule"))
    if not (isinstance(path, str) and isinstance(stage, str) and isinstance(rule, str)
            and isinstance(elements, list) and all(isinstance(e, str) for e in elements)):
        return None
    return (path, stage, tuple(elements), rule)


def load_baseline(path: str) -> Baseline:
    try:
        with open(path, encoding="utf-8") as handle:
            data = json.load(handle)
    except (OSError, ValueError) as error:
        raise BaselineError(f"cannot read baseline {path}: {error}") from None
    if not isinstance(data, dict) or data.get("format") != FORMAT_NAME or \
            data.get("version") != FORMAT_VERSION:
        raise BaselineError(f"{path} is not an {FORMAT_NAME} version {FORMAT_VERSION} file")
    entries = data.get("entries", [])
    if not isinstance(entries, list):
        raise BaselineError(f"{path}: entries is a list of findings, not {entries!r}")
    counts: Counter = Counter()
    for entry in entries:
        key = _entry_key(entry)
        count = entry.get("count", 1) if isinstance(entry, dict) else None
        # a count is a whole number of findings from 1 up (as --write-baseline writes)
        if key is None or not isinstance(count, int) or isinstance(count, bool) or \
                not 1 <= count <= MAX_COUNT:
            raise BaselineError(f"{path}: malformed entry {entry!r}")
        counts[key] += count
    return Baseline(path, counts)


def apply_baseline(findings: list[Finding], baseline: Baseline, matched: Counter
                   ) -> list[Finding]:
    """Mark the findings the baseline accepts (up to each entry's count), counting what
    matched into ``matched`` across calls."""
    result = []
    for finding in findings:
        if finding.rule not in UNBASELINED and finding.waiver is None:
            key = key_of(finding, baseline.folder)
            if matched[key] < baseline.counts.get(key, 0):
                matched[key] += 1
                finding = replace(finding, baselined=True)
        result.append(finding)
    return result


def stale_entries(baseline: Baseline, matched: Counter, checked: set[str]) -> list[Finding]:
    """Info findings for entries of checked files that matched fewer findings than they
    accept (entries of files not checked in this run are left alone)."""
    stale = []
    for key, count in sorted(baseline.counts.items()):
        path, stage, elements, rule = key
        if path not in checked or matched[key] >= count:
            continue
        where = os.path.join(baseline.folder, path)
        stale.append(Finding(
            rule="baseline-stale", severity=engine_severity("baseline-stale"),
            message=f"baseline entry for {rule} on {', '.join(elements) or 'the stage'} in stage"
                    f" {stage} no longer matches ({count - matched[key]} of {count} unused);"
                    " prune the baseline", path=os.path.relpath(where), line=1, column=1,
            stage=stage or None, elements=elements))
    return stale


def baseline_text(counts: Counter) -> str:
    entries = [{"path": p, "stage": s, "elements": list(e), "rule": r, "count": c}
               for (p, s, e, r), c in sorted(counts.items()) if c > 0]
    return json.dumps({"format": FORMAT_NAME, "version": FORMAT_VERSION, "entries": entries},
                      indent=2, ensure_ascii=False) + "\n"


def write_counts(path: str, counts: Counter, protect: Sequence[str] = ()) -> None:
    """Write a baseline holding ``counts`` (keys relative to the file's folder)."""
    write_new_file(path, baseline_text(counts), protect)


def prune_baseline(baseline: Baseline, matched: Counter, checked: set[str]) -> int:
    """Shrink the file to what matched in the checked files; never adds. Returns how
    many findings' worth of entries were removed."""
    kept: Counter = Counter()
    for key, count in baseline.counts.items():
        kept[key] = min(count, matched[key]) if key[0] in checked else count
    removed = sum(baseline.counts.values()) - sum(kept.values())
    write_new_file(baseline.path, baseline_text(kept))
    return removed
