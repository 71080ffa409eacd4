"""One line per caution and per finding, for editors and grep:
PATH:LINE:COL: SEVERITY RULE: MESSAGE, with ``caution`` in place of the severity for a
safety caution (its lines come first). A closing count line goes to standard error so
standard output stays one finding per line."""

from __future__ import annotations

import sys
from collections import Counter

from checker.findings import Severity
from checker.report import Writer as BaseWriter


def count_line(counts: Counter, set_aside: int, files: int) -> str:
    """"3 errors, 5 warnings, 1 info in 12 files" (set-aside findings counted apart)."""
    parts = []
    for severity in sorted(Severity, reverse=True):
        n = counts[severity]
        noun = severity.label if n == 1 or severity is Severity.INFO else severity.label + "s"
        parts.append(f"{n} {noun}")
    tail = f" ({set_aside} waived or baselined, not counted)" if set_aside else ""
    return f"{', '.join(parts)} in {files} file{'' if files == 1 else 's'}{tail}"


class Writer(BaseWriter):
    def __init__(self, out, context, err=None):
        super().__init__(out, context)
        self.err = err
        self.counts: Counter = Counter()
        self.set_aside = 0
        self.files = 0

    def close(self) -> None:
        print(count_line(self.counts, self.set_aside, self.files),
              file=self.err or sys.stderr)

    def add(self, result) -> None:
        self.files += 1
        for c in result.cautions():
            tag = f" [acknowledged: {c.acknowledged}]" if c.acknowledged is not None else ""
            self.out.write(f"{c.path}:{c.line}:{c.column}: caution {c.caution}:"
                           f" {c.message} (stage {c.stage}){tag}\n")
        for f in result.findings():
            tag = f" [waived: {f.waiver}]" if f.waiver is not None else (
                " [baseline]" if f.baselined else "")
            where = f" (stage {f.stage})" if f.stage else ""
            if f.waiver is not None or f.baselined:
                self.set_aside += 1
            else:
                self.counts[f.severity] += 1
            self.out.write(f"{f.path}:{f.line}:{f.column}: {f.severity.label} {f.rule}:"
                           f" {f.message}{where}{tag}\n")
