"""The README and the format guide say what the tool does: their examples agree with the
bundled sample and with the tool's own output."""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def _block(text: str, fence: str) -> str:
    match = re.search(rf"```{fence}\n(.*?)```", text, re.S)
    assert match, fence
    return match.group(1)


def test_readme_stage_snippet_is_lines_of_the_sample():
    """Every line of the README's stage snippet (but the closing '...') is a line of
    samples/conductivity.stage, so no net in it goes undeclared."""
    snippet = _block((ROOT / "README.md").read_text(encoding="utf-8"), "lisp")
    sample = {line.strip() for line in
              (ROOT / "samples/conductivity.stage").read_text(encoding="utf-8").splitlines()}
    lines = [line.strip() for line in snippet.splitlines() if line.strip() not in ("", "...)")]
    assert lines and all(line in sample for line in lines), lines


def test_format_guide_error_lines_are_the_tools(tmp_path):
    """docs/format.md shows the compact error line as FILE:LINE:COLUMN: error
    input-invalid: message, and exit status 1; the tool prints exactly that."""
    guide = (ROOT / "docs/format.md").read_text(encoding="utf-8")
    assert "`FILE:LINE:COLUMN: error input-invalid: message`" in guide
    bad = tmp_path / "unclosed.stage"
    bad.write_text("(stage demo\n  (supply vcc 5V)\n", encoding="utf-8")
    run = subprocess.run([sys.executable, "-m", "checker", "check", str(bad), "--format",
                          "compact", "--no-config"], capture_output=True, text=True,
                         cwd=tmp_path)
    assert run.returncode == 1
    first = run.stdout.splitlines()[0]
    assert first == (f"{bad}:1:1: error input-invalid: this '(' is never closed "
                     "(a missing ')')"), first
    # the default report's block, as the guide prints it
    text = subprocess.run([sys.executable, "-m", "checker", "check", "unclosed.stage",
                           "--no-config"], capture_output=True, text=True, cwd=tmp_path)
    block = "  unclosed.stage:1:1  input-invalid\n      this '(' is never closed (a missing ')')"
    assert block in text.stdout and block in guide


def _layout_table_modules() -> set[str]:
    """Every module path DEVELOPERS.md's layout table names, prefixes resolved: a cell
    `checker/report/html_page.py`, `mend_command.py` names the second in the first's
    folder, and `checker/report/` names that whole folder."""
    named: set[str] = set()
    for line in (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8").splitlines():
        if not line.startswith("| `checker/"):
            continue
        cell = line.split("|")[1]
        names = re.findall(r"`([^`]+)`", cell)
        folder = names[0].rsplit("/", 1)[0] if "/" in names[0] else "checker"
        for name in names:
            if name.startswith("checker/"):
                named.add(name)
            elif "/" in name:
                named.add("checker/" + name)
            else:
                named.add(f"{folder}/{name}")
    return named


def test_developers_layout_table_names_every_module():
    named = _layout_table_modules()
    folders = {n.rstrip("/") for n in named if n.endswith("/")}
    modules = sorted(str(p.relative_to(ROOT)) for p in (ROOT / "checker").rglob("*.py")
                     if p.name != "__init__.py")
    missing = [m for m in modules
               if m not in named and not any(m.startswith(f + "/") for f in folders)]
    assert missing == []
    gone = sorted(n for n in named if not n.endswith("/") and not (ROOT / n).exists()
                  and not n.endswith("templates"))
    assert gone == []
