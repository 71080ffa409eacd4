"""Run `ampcheck check` on a sample through the command line and read its JSON report."""

from __future__ import annotations

import json
import pathlib

from checker.cli import main

ROOT = pathlib.Path(__file__).resolve().parents[1]
# The good sample stages (samples/README.md): no rule should fire on them.
GOOD_FILES = {"water-temperature.stage.json": ("water-temp-gain",),
              "leaf-wetness.stage": ("leaf-wetness-buffer", "leaf-wetness-scale")}


def sample_report(capsys, monkeypatch, name: str, *extra: str) -> dict:
    """The JSON report of ``ampcheck check samples/NAME`` (never failing)."""
    monkeypatch.chdir(ROOT)
    main(["check", f"samples/{name}", "--format", "json", "--fail-on", "never", *extra])
    return json.loads(capsys.readouterr().out)


def findings_by_stage(capsys, monkeypatch, name: str, *extra: str) -> dict[str, list[dict]]:
    document = sample_report(capsys, monkeypatch, name, *extra)
    return {stage["name"]: stage["findings"] for f in document["files"] for stage in f["stages"]}
