"""One `ampcheck check` run: stream every file's results to the report sinks, apply the
baseline, and work out the outcome. The command line builds it and turns the outcome
into an exit code; nothing here exits."""

from __future__ import annotations

import contextlib
import os
import shutil
import sys
import tempfile
from collections import Counter

from checker import audit
from checker import baseline as baselines
from checker.io.write import AtomicOutput, new_folder, unnamed_write_error
from checker.records import DEFERRAL, Caution
from checker.report import Receiver, writer, writes_folder
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
        self.writer: Receiver | None = None
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
        assert self.writer is not None  # start() made it (open_sinks starts every sink)
        with self._named():
            self.writer.close()
            if self.output is None:
                self.stream.flush()
            else:
                self.output.commit()

    def add(self, result) -> None:
        assert self.writer is not None  # start() made it (open_sinks starts every sink)
        with self._named():
            self.writer.add(result)

    @contextlib.contextmanager
    def _named(self):
        """A failed write (a full disk names no file of its own) says which report."""
        try:
            yield
        except OSError as error:
            if self.path is None or error.filename is not None:
                raise
            raise RunError(f"cannot write {self.path}: {error.strerror or error}") from None

    def abandon(self) -> None:
        """Drop a report file that was not finished (the run failed)."""
        if self.output is not None:
            self.output.abandon()


def open_sinks(outputs: list[tuple[str, str | None]], context: ReportContext,
               inputs: list[str]) -> list[Sink]:
    """A started sink for each (format, path or None for stdout); every file is opened
    before any report begins, and a failure leaves no file behind."""
    sinks: list = []
    try:
        for name, path in outputs:
            sinks.append(sink_for(name, path, context, inputs))
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


class FolderSink:
    """A report that is a folder (the HTML review of an audit): written into a new
    hidden folder beside its path, which takes the path's place when the run ends. An
    existing folder there is replaced only when an earlier review wrote it."""

    def __init__(self, name: str, path: str, context: ReportContext, inputs: list[str]):
        from checker.report.html_page import foreign_files, is_review_folder

        self.path: str | None = path  # None once the folder is in place, or abandoned
        target = os.path.realpath(path)
        if os.path.exists(target):
            if not os.path.isdir(target):
                raise RunError(f"refusing to write the {name} review folder over the file"
                               f" {path}")
            if os.listdir(target) and not is_review_folder(target):
                raise RunError(f"refusing to replace the folder {path}: it is not an"
                               f" earlier {name} review (no index.html of ours)")
            others = foreign_files(target) if os.listdir(target) else []
            if others:  # replacing the folder would delete them
                raise RunError(f"refusing to replace the review folder {path}: it holds"
                               f" {others[0]}, which no review wrote"
                               f"{f' (and {len(others) - 1} more)' if len(others) > 1 else ''};"
                               " move it out, or write the review elsewhere")
        inside = [p for p in inputs
                  if os.path.realpath(p).startswith(target.rstrip(os.sep) + os.sep)]
        if inside:
            raise RunError(f"refusing to write a review folder over the input {inside[0]}")
        parent = os.path.dirname(target) or "."
        if not os.path.isdir(parent):
            raise RunError(f"cannot write {path}: no folder {os.path.dirname(path) or '.'}")
        self.temporary = new_folder(parent, ".ampcheck-", ".tmp")
        self.writer = writer(name, None, context, folder=self.temporary)

    def start(self) -> None:
        """Nothing to open: the folder is made already and filled on close."""

    def add(self, result) -> None:
        self.writer.add(result)

    def close(self) -> None:
        self.writer.close()
        if self.path is None:
            return
        target = os.path.realpath(self.path)
        old = None
        if os.path.exists(target):
            old = tempfile.mkdtemp(dir=os.path.dirname(target), prefix=".ampcheck-old-")
            os.rmdir(old)
            os.rename(target, old)
        os.rename(self.temporary, target)
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)
        self.path = None

    def abandon(self) -> None:
        if self.path is not None:
            shutil.rmtree(self.temporary, ignore_errors=True)
            self.path = None


def sink_for(name: str, path: str | None, context: ReportContext, inputs: list[str]):
    """The sink of one report: a folder where the format writes one, else a stream."""
    if path is not None and writes_folder(name, path):
        return FolderSink(name, path, context, inputs)
    return Sink(name, path, context, inputs)


def caution_line(caution: Caution) -> str:
    """One caution as a line for standard error."""
    line = (f"ampcheck: caution {caution.caution}: {caution.path}:{caution.line}:"
            f"{caution.column} (stage {caution.stage}): {caution.statement}")
    if caution.acknowledged is not None:
        line += f" [acknowledged: {caution.acknowledged}]"
    return line


class CheckRun:
    """Streams results to sinks; remembers only counters (failing, baseline keys) and
    the lines of the run's safety cautions when they go to standard error as well
    (``caution_notice``: under a commit hook, or where the report is not read at a
    terminal)."""

    def __init__(self, context: ReportContext, sinks: list[Sink],
                 baseline: baselines.Baseline | None = None, prune: bool = False,
                 write_baseline: str | None = None, caution_notice: bool = False):
        self.context = context
        self.sinks = sinks
        self.baseline = baseline
        self.prune = prune
        self.write_baseline = write_baseline
        self.matched: Counter = Counter()  # baseline entries used so far
        self.recorded: Counter = Counter()  # this run's keys, for --write-baseline
        self.failing = False
        self.caution_notice = caution_notice
        self.caution_lines: list[str] = []
        self.review_failed = False  # a file's review stopped (exit status 3)

    def deliver(self, result: FileResult) -> None:
        if self.baseline is not None:
            result.problems = baselines.apply_baseline(result.problems, self.baseline,
                                                       self.matched)
            for stage in result.stages:
                stage.findings = baselines.apply_baseline(stage.findings, self.baseline,
                                                          self.matched)
        for sink in self.sinks:
            sink.add(result)
        for caution in result.cautions():
            self.failing = self.failing or self.context.caution_fails(caution)
            if self.caution_notice:
                self.caution_lines.append(caution_line(caution))
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
            self._notify_cautions()
            if self.write_baseline:
                baselines.write_counts(self.write_baseline, self.recorded, paths)
                print(f"wrote {len(self.recorded)} entries to {self.write_baseline}",
                      file=sys.stderr)
        except BrokenPipeError:
            self._abandon(progress)
            raise
        except (OSError, ValueError) as error:
            self._abandon(progress)
            if unnamed_write_error(error):
                assert isinstance(error, OSError)
                raise RunError(f"cannot write to standard output:"
                               f" {error.strerror or error}") from None
            raise RunError(str(error)) from None
        except BaseException:
            self._abandon(progress)
            raise
        return self.failing

    def _notify_cautions(self) -> None:
        if not self.caution_lines:
            return
        count = len(self.caution_lines)
        for line in self.caution_lines:
            print(line, file=sys.stderr)
        print(f"ampcheck: {count} safety caution{'' if count == 1 else 's'}: {DEFERRAL}",
              file=sys.stderr)

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
