"""Worker processes of an audit: results in task order, quiet on signals, and a worker
that dies takes only its own file with it.

Workers ignore SIGINT (Ctrl-C reaches every process of the terminal's group; the parent
alone decides to stop, and then terminates the pool) and die quietly on SIGTERM and
SIGHUP. A worker that dies (killed, or the interpreter crashed) or stops answering
(stuck in one long native call past ``patience_s``) is noticed by polling; the
unfinished tasks then run one at a time in a fresh single-worker pool until the task that
takes its worker down is found, and ``died(task, why)`` stands in for its result. The
other tasks are simply run again, so every result is the one a single process gives.
"""

from __future__ import annotations

import multiprocessing
import signal
import time
from collections.abc import Callable, Iterator

POLL_S = 0.25  # how often the parent looks for a dead worker while it waits


def _initialise() -> None:
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    if hasattr(signal, "SIGHUP"):
        signal.signal(signal.SIGHUP, signal.SIG_DFL)


def _batch(task: tuple[Callable, list]) -> list:
    """work(item) for every item of one batch, in one worker (fewer round trips)."""
    work, items = task
    return [work(item) for item in items]


def _context():
    method = "fork" if "fork" in multiprocessing.get_all_start_methods() else "spawn"
    return multiprocessing.get_context(method)


def _run(work, tasks: list, jobs: int, chunk: int, patience_s: float | None):
    """Yield work(task) in order from a pool of ``jobs``; return (count done, None) or
    (count done, why the pool was given up)."""
    context = _context()
    before = {process.pid for process in multiprocessing.active_children()}
    with context.Pool(jobs, initializer=_initialise) as pool:
        workers = [p for p in multiprocessing.active_children() if p.pid not in before]
        # Batches of ``chunk`` tasks, mapped one by one, so that the iterator can wait
        # with a timeout (Pool.imap with a chunksize gives a plain generator).
        batches = [(work, tasks[i:i + chunk]) for i in range(0, len(tasks), chunk)]
        results = pool.imap(_batch, batches, chunksize=1)
        done, waited_since = 0, time.monotonic()
        for _ in batches:
            while True:
                try:
                    batch = results.next(timeout=POLL_S)
                    break
                except multiprocessing.TimeoutError:
                    dead = [p for p in workers if not p.is_alive()]
                    if dead:
                        return done, _exit_text(dead[0].exitcode)
                    if patience_s and time.monotonic() - waited_since > patience_s:
                        return done, ("its worker process stopped answering for"
                                      f" {patience_s:g} s")
            waited_since = time.monotonic()
            for result in batch:
                done += 1
                yield result
    return done, None


def _exit_text(code: int | None) -> str:
    if code is not None and code < 0:
        try:
            name = signal.Signals(-code).name
        except ValueError:
            name = f"signal {-code}"
        return f"its worker process was killed ({name})"
    return f"its worker process ended unexpectedly (exit status {code})"


def ordered(work: Callable, tasks: list, jobs: int, chunk: int, patience_s: float | None,
            died: Callable[[object, str], object]) -> Iterator:
    """work(task) for every task, in the order of ``tasks``, from ``jobs`` processes."""
    start = 0
    while start < len(tasks):
        done, lost = yield from _run(work, tasks[start:], jobs, chunk, patience_s)
        start += done
        if lost is None:
            return
        # The lost task is among the next jobs * chunk: run those alone, one by one.
        suspects = tasks[start:start + jobs * chunk]
        single = patience_s / chunk if patience_s else None
        index = 0
        while index < len(suspects):
            done, lost = yield from _run(work, suspects[index:], 1, 1, single)
            index += done
            if lost is not None:
                yield died(suspects[index], lost)
                index += 1
        start += len(suspects)
