"""--format compact: findings on stdout, one count line at the end on stderr."""

from __future__ import annotations

import re

from checker.cli import main


def test_compact_count_line_goes_to_stderr(capsys):
    main(["check", "samples/", "--format", "compact", "--no-config"])
    out, err = capsys.readouterr()
    lines = out.splitlines()
    # stdout holds finding lines only (PATH:LINE:COL: ...), no summary
    assert lines and all(re.match(r"^[^:]+:\d+:\d+: ", line) for line in lines)
    # the count line closes the report (only the safety-caution notice may follow it)
    pattern = re.compile(r"(\d+) errors?, (\d+) warnings?, (\d+) info in (\d+) files?.*")
    matches = [m for m in map(pattern.fullmatch, err.splitlines()) if m]
    assert len(matches) == 1, err
    match = matches[0]
    counted = sum(int(match.group(i)) for i in (1, 2, 3))
    listed = [ln for ln in lines if " [waived: " not in ln and not ln.endswith("[baseline]")
              and ": caution " not in ln]
    assert counted == len(listed)
    assert int(match.group(4)) >= 1
