"""One line per finding, for editors and grep: PATH:LINE:COL: SEVERITY RULE: MESSAGE."""

from __future__ import annotations

from checker.report import Writer as BaseWriter


class Writer(BaseWriter):
    def add(self, result) -> None:
        for f in result.findings():
            tag = f" [waived: {f.waiver}]" if f.waiver is not None else (
                " [baseline]" if f.baselined else "")
            where = f" (stage {f.stage})" if f.stage else ""
            self.out.write(f"{f.path}:{f.line}:{f.column}: {f.severity.label} {f.rule}:"
                           f" {f.message}{where}{tag}\n")
