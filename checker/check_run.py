"""One `ampcheck check` run: stream every file's results to the report sinks, apply the
baseline, and work out the outcome. The command line builds it and turns the outcome
into an exit code; nothing here exits."""

from __future__ import annotations

import os
import sys
from collections import Counter

from checker import audit
from checker import baseline as baselines
from checker.io.write import AtomicOutput
from checker.report import writer
from checker.report.context import ReportContext
from checker.review import FileResult


class RunError(Exception):
    """A problem with the run's own files (a report path, the baseline): a usage error."""


class Sink:
    """One report being written: to standard output, or to a file written atomically
    (``checker/io/write.py``; never an input). Opening a sink writes nothing, so every
    output can be checked before any report starts (``start``)."""

    def __init__(self, name: str, path: str | None, context: ReportContext,
                 inputs: list[str]):
        self.name, self.context, self.path = name, context, path
        self.output: AtomicOutput | None = None
        self.writer = None
        if path is None:
            self.stream = sys.stdout
            return
        try:
            self.output = AtomicOutput(path, protect=inputs)
        except ValueError as error:
            raise RunError(str(error)) from None
        except OSError as error:
            raise RunError(f"cannot write {path}: {error.strerror or error}") from None
        self.stream = self.output.stream

    def start(self) -> None:
        self.writer = writer(self.name, self.stream, self.context)

    def close(self) -> None:
        self.writer.close()
        if self.output is None:
            self.stream.flush()
        else:
            self.output.commit()

    def abandon(self) -> None:
        """Drop a report file that was not finished (the run failed)."""
        if self.output is not None:
            self.output.abandon()


def open_sinks(outputs: list[tuple[str, str | None]], context: ReportContext,
               inputs: list[str]) -> list[Sink]:
    """A started sink for each (format, path or None for stdout); every file is opened
    before any report begins, and a failure leaves no file behind."""
    sinks: list[Sink] = []
    try:
        for name, path in outputs:
            sinks.append(Sink(name, path, context, inputs))
        for sink in sinks:
            sink.start()
    except BaseException:
        for sink in sinks:
            sink.abandon()
        raise
    return sinks


def probe_output(path: str, inputs: list[str]) -> None:
    """RunError unless ``path`` could be written (a file the run writes at its end, such
    as a baseline); leaves nothing behind."""
    try:
        AtomicOutput(path, protect=inputs).abandon()
    except ValueError as error:
        raise RunError(str(error)) from None
    except OSError as error:
        raise RunError(f"cannot write {path}: {error.strerror or error}") from None


class CheckRun:
    """Streams results to sinks; remembers only counters (failing, baseline keys)."""

    def __init__(self, context: ReportContext, sinks: list[Sink],
                 baseline: baselines.Baseline | None = None, prune: bool = False,
                 write_baseline: str | None = None):
        self.context = context
        self.sinks = sinks
        self.baseline = baseline
        self.prune = prune
        self.write_baseline = write_baseline
        self.matched: Counter = Counter()  # baseline entries used so far
        self.recorded: Counter = Counter()  # this run's keys, for --write-baseline
        self.failing = False
        self.review_failed = False  # a file's review stopped (exit status 3)

    def deliver(self, result: FileResult) -> None:
        if self.baseline is not None:
            for stage in result.stages:
                stage.findings = baselines.apply_baseline(stage.findings, self.baseline,
                                                          self.matched)
        for sink in self.sinks:
            sink.writer.add(result)
        folder = os.path.dirname(os.path.abspath(self.write_baseline or "."))
        for finding in result.findings():
            self.failing = self.failing or self.context.fails(finding)
            self.review_failed = self.review_failed or finding.rule == audit.REVIEW_FAILED
            if self.write_baseline and finding.rule not in baselines.UNBASELINED \
                    and finding.waiver is None:
                self.recorded[baselines.key_of(finding, folder)] += 1

    def run(self, paths: list[str], missing, request: audit.Request, jobs: int,
            progress=None) -> bool:
        """Check every path; True when a finding reaches the failing severity."""
        try:
            for finding in missing:
                self.deliver(FileResult(finding.path, problems=[finding]))
            for result in audit.check_files(paths, request, jobs):
                self.deliver(result)
                if progress is not None:
                    progress.advance(progress.task_ids[0])
            if progress is not None:
                progress.stop()
            self._finish_baseline(paths)
            for sink in self.sinks:
                sink.close()
            if self.write_baseline:
                baselines.write_counts(self.write_baseline, self.recorded, paths)
                print(f"wrote {len(self.recorded)} entries to {self.write_baseline}",
                      file=sys.stderr)
        except BrokenPipeError:
            self._abandon(progress)
            raise
        except (OSError, ValueError) as error:
            self._abandon(progress)
            raise RunError(str(error)) from None
        except BaseException:
            self._abandon(progress)
            raise
        return self.failing

    def _finish_baseline(self, paths: list[str]) -> None:
        if self.baseline is None:
            return
        checked = {baselines.relative(p, self.baseline.folder) for p in paths}
        stale = baselines.stale_entries(self.baseline, self.matched, checked)
        if stale:
            self.deliver(FileResult(os.path.relpath(self.baseline.path), problems=stale))
        if self.prune:
            removed = baselines.prune_baseline(self.baseline, self.matched, checked)
            print(f"pruned {removed} stale entries from {self.baseline.path}",
                  file=sys.stderr)

    def _abandon(self, progress) -> None:
        if progress is not None:
            progress.stop()
        for sink in self.sinks:
            sink.abandon()
