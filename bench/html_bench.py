"""Benchmark of the HTML review: prints figures, asserts nothing.

Targets (issue: the review report): the HTML audit of the 2,000-stage benchmark set (a
folder review, which draws what fails) within 3x the time of the text audit; a stage's
page under about 150 KB. It prints ms per stage for the text report and the HTML review,
both for the audit set and for the samples reviewed as one file (every stage drawn in
full).

Run: .venv/bin/python bench/html_bench.py [--files 2000] [--repeats 3] [--jobs 2]
from a virtual environment with the html extra installed.
"""

from __future__ import annotations

import argparse
import os
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)

from generate_stages import generate  # noqa: E402

_SCRIPT = os.path.join(os.path.dirname(sys.executable), "ampcheck")
AMPCHECK = [_SCRIPT] if os.path.exists(_SCRIPT) else [sys.executable, "-m", "checker"]
SAMPLES = os.path.join(os.path.dirname(HERE), "samples")


def wall(command: list[str]) -> float:
    start = time.perf_counter()
    subprocess.run(command, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                   cwd=tempfile.gettempdir(), check=True)
    return time.perf_counter() - start


def stages_in(review: str) -> int:
    with open(review, encoding="utf-8") as handle:
        return int(re.search(r"(\d+) stages?, \d+ plots", handle.read()).group(1))


def compare(label: str, target: str, html_output: str, repeats: int, jobs: int) -> None:
    """Text and HTML runs alternating (a shared machine's speed drifts between runs)."""
    text_runs, html_runs = [], []
    for _ in range(repeats):
        text_runs.append(wall(AMPCHECK + ["check", target, "--jobs", str(jobs), "--format",
                                          "text", "--fail-on", "never"]))
        if os.path.isdir(html_output):
            shutil.rmtree(html_output)
        html_runs.append(wall(AMPCHECK + ["check", target, "--jobs", str(jobs), "--format",
                                          "compact", "--fail-on", "never", "--output",
                                          f"html:{html_output}"]))
    index = html_output if html_output.endswith(".html") else \
        os.path.join(html_output, "index.html")
    stages = stages_in(index)
    text_s, html_s = statistics.median(text_runs), statistics.median(html_runs)
    print(f"{label}: {stages} stages, {jobs} jobs: text {text_s * 1e3 / stages:.2f} ms per"
          f" stage ({text_s:.1f} s), HTML {html_s * 1e3 / stages:.2f} ms per stage"
          f" ({html_s:.1f} s): {html_s / text_s:.2f}x the text report")
    print(f"  runs (s): text {', '.join(f'{t:.1f}' for t in text_runs)};"
          f" HTML {', '.join(f'{t:.1f}' for t in html_runs)}")


def page_sizes(folder: str) -> None:
    pages = os.path.join(folder, "stages")
    sizes = sorted(os.path.getsize(os.path.join(pages, name)) for name in os.listdir(pages))
    print(f"  stage pages: median {sizes[len(sizes) // 2] / 1024:.1f} KB, largest"
          f" {sizes[-1] / 1024:.1f} KB (target < 150 KB); whole folder"
          f" {sum(sizes) / 1024 ** 2:.1f} MB")


def one_file_sections(review: str) -> None:
    with open(review, encoding="utf-8") as handle:
        sections = re.split(r'(?=<section class="stage )', handle.read())[1:]
    sizes = sorted(len(s.encode("utf-8")) for s in sections)
    print(f"  one-file stage sections: median {sizes[len(sizes) // 2] / 1024:.1f} KB, largest"
          f" {sizes[-1] / 1024:.1f} KB (target < 150 KB); file"
          f" {os.path.getsize(review) / 1024 ** 2:.2f} MB")


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--files", type=int, default=2000)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--jobs", type=int, default=2)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        review = os.path.join(folder, "samples.html")
        compare("samples, one file (every stage in full)", SAMPLES, review, args.repeats,
                args.jobs)
        one_file_sections(review)
        audit = os.path.join(folder, "audit")
        generate(audit, args.files)
        output = os.path.join(folder, "audit-review")
        compare(f"benchmark set of {args.files} files, folder (what fails)", audit, output,
                args.repeats, args.jobs)
        page_sizes(output)


if __name__ == "__main__":
    main()
