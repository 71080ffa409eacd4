"""The archive audit's closing summary: severity counts by rule."""

from checker.findings import Finding, Severity
from checker.report.archive_summary import severity_by_rule, severity_table, stages_by_rule


def _finding(rule, severity, waiver=None):
    return Finding(rule, severity, "m", "a.amp", 1, 1, waiver=waiver)


def test_counts_each_severity_per_rule_and_skips_waived():
    findings = [_finding("gain-tolerance", Severity.ERROR),
                _finding("gain-tolerance", Severity.WARNING),
                _finding("gain-tolerance", Severity.INFO),
                _finding("gain-tolerance", Severity.ERROR),
                _finding("bandwidth", Severity.INFO),
                _finding("bandwidth", Severity.ERROR, waiver="accepted")]
    rows = severity_by_rule(findings)
    assert rows == [("gain-tolerance", 2, 1, 1), ("bandwidth", 0, 0, 1)]


def test_table_is_aligned_and_fits_80_columns():
    lines = severity_table([("gain-tolerance", 12, 3, 0), ("bandwidth", 0, 0, 1)])
    assert lines[0].split() == ["rule", "errors", "warnings", "notes"]
    assert lines[1].split() == ["gain-tolerance", "12", "3", "0"]
    assert len({len(line) for line in lines}) == 1
    assert all(len(line) <= 78 for line in lines)
    assert severity_table([]) == []


def _at(rule, path, stage, waiver=None):
    return Finding(rule, Severity.WARNING, "m", path, 1, 1, stage=stage, waiver=waiver)


def test_stages_by_rule_counts_distinct_file_stage_pairs():
    findings = [_at("noise", "a.stage", "buffer"), _at("noise", "a.stage", "buffer"),
                _at("noise", "b.stage", "buffer"), _at("noise", "a.stage", "gain"),
                _at("slew-rate", "a.stage", "gain"),
                _at("slew-rate", "b.stage", "gain", waiver="known")]
    assert stages_by_rule(findings) == [("noise", 3), ("slew-rate", 1)]
