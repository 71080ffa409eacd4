"""The progress bar never stays on a terminal: run under a pseudo-terminal (python's pty
module) with stdout and stderr both on it, and look for bar residue in what it shows."""

from __future__ import annotations

import os
import pty
import subprocess
import sys

import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def on_terminal(*args: str) -> str:
    leader, follower = pty.openpty()
    env = {k: v for k, v in os.environ.items() if k not in ("CI", "PRE_COMMIT")}
    env["PYTHONPATH"] = ROOT
    proc = subprocess.Popen([sys.executable, "-m", "checker", "check", *args],
                            stdin=subprocess.DEVNULL, stdout=follower, stderr=follower,
                            cwd=ROOT, env=env)
    os.close(follower)
    chunks = []
    while True:
        try:
            data = os.read(leader, 65536)
        except OSError:  # the child closed the terminal
            break
        if not data:
            break
        chunks.append(data)
    proc.wait(timeout=120)
    os.close(leader)
    return b"".join(chunks).decode("utf-8", "replace")


@pytest.mark.parametrize("fmt", ["compact", "csv"])
def test_no_bar_left_before_streamed_findings(fmt):
    shown = on_terminal("samples/", "--format", fmt, "--no-config")
    assert "samples/" in shown  # the findings did arrive
    assert "\r" not in shown.replace("\r\n", "\n")  # no carriage-return redraws left
    assert "checking" not in shown and "0%" not in shown
