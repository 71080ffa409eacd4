"""One line per caution and per finding, for editors and grep:
PATH:LINE:COL: SEVERITY RULE: MESSAGE, with ``caution`` in place of the severity for a
safety caution (its lines come first)."""

from __future__ import annotations

from checker.report import Writer as BaseWriter


class Writer(BaseWriter):
    def add(self, result) -> None:
        for c in result.cautions():
            tag = f" [acknowledged: {c.acknowledged}]" if c.acknowledged is not None else ""
            self.out.write(f"{c.path}:{c.line}:{c.column}: caution {c.caution}:"
                           f" {c.message} (stage {c.stage}){tag}\n")
        for f in result.findings():
            tag = f" [waived: {f.waiver}]" if f.waiver is not None else (
                " [baseline]" if f.baselined else "")
            where = f" (stage {f.stage})" if f.stage else ""
            self.out.write(f"{f.path}:{f.line}:{f.column}: {f.severity.label} {f.rule}:"
                           f" {f.message}{where}{tag}\n")
