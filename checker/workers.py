"""Worker processes of an audit: results in task order, quiet on signals, and a worker
that dies takes only its own file with it.

Each worker is a process with a pipe of its own (no queue shared between workers, so a
worker killed at any moment cannot leave a lock held that stops the others or the
parent). The parent hands out batches of tasks, keeps at most a few batches ahead of
the first unfinished one, and yields the results in task order.

Workers ignore SIGINT (Ctrl-C reaches every process of the terminal's group; the parent
alone decides to stop, and then terminates them) and die quietly on SIGTERM and SIGHUP.
A worker that dies (killed, or its interpreter crashed) or stops answering (stuck in one
long native call past its patience) is replaced; its batch runs again one task at a time,
and the task that takes a worker down once more gets ``died(task, why)`` as its result.
Every other result is the one a single process gives.
"""

from __future__ import annotations

import signal
import time
from collections import deque
from collections.abc import Callable, Iterator
from typing import TypeVar

POLL_S = 0.25  # the longest the parent waits before it looks at its workers again
AHEAD = 4  # batches handed out beyond the first unfinished one, per worker
Task = TypeVar("Task")
Result = TypeVar("Result")


def _initialise() -> None:
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    if hasattr(signal, "SIGHUP"):
        signal.signal(signal.SIGHUP, signal.SIG_DFL)


def _serve(connection, work: Callable) -> None:
    """A worker's life: receive a batch, send back its results, until told to stop."""
    _initialise()
    while True:
        try:
            batch = connection.recv()
        except (EOFError, OSError):
            return
        if batch is None:
            return
        connection.send([work(task) for task in batch])


def _context():
    import multiprocessing  # imported here: a one-job run never needs it (cold start)

    method = "fork" if "fork" in multiprocessing.get_all_start_methods() else "spawn"
    return multiprocessing.get_context(method)


class _Worker:
    """One worker process and the batches it holds, oldest first (two at most, so it
    never waits for the parent between batches)."""

    HELD = 2

    def __init__(self, context, work: Callable):
        self.connection, child = context.Pipe()
        self.process = context.Process(target=_serve, args=(child, work), daemon=True)
        self.process.start()
        child.close()
        self.batches: deque[tuple[int, list]] = deque()  # (index of first task, tasks)
        self.since = 0.0  # when its oldest batch started

    def give(self, batch: tuple[int, list]) -> None:
        if not self.batches:
            self.since = time.monotonic()
        self.batches.append(batch)
        self.connection.send(batch[1])

    def stop(self) -> None:
        if self.process.is_alive():
            self.process.terminate()
            self.process.join(2)
            if self.process.is_alive():
                self.process.kill()
        self.process.join()
        self.connection.close()


def _exit_text(code: int | None) -> str:
    if code is not None and code < 0:
        try:
            name = signal.Signals(-code).name
        except ValueError:
            name = f"signal {-code}"
        return f"its worker process was killed ({name})"
    return f"its worker process ended unexpectedly (exit status {code})"


def ordered(work: Callable[[Task], Result], tasks: list[Task], jobs: int, chunk: int,
            patience_per_task_s: float | None,
            died: Callable[[Task, str], Result]) -> Iterator[Result]:
    """work(task) for every task, in the order of ``tasks``, from ``jobs`` processes.

    A batch whose worker is silent for longer than ``patience_per_task_s`` per task
    (plus 30 s) counts as stuck; None: only a dead worker is noticed."""
    from multiprocessing.connection import wait  # here, as in _context: cold start

    context = _context()
    pending = deque((start, tasks[start:start + chunk]) for start in range(0, len(tasks), chunk))
    done: dict[int, list] = {}
    first = 0  # the index of the first task not yet yielded
    window = AHEAD * jobs * chunk
    workers = [_Worker(context, work) for _ in range(min(jobs, len(pending)))]
    try:
        while first < len(tasks):
            for worker in workers:
                while len(worker.batches) < worker.HELD and pending and \
                        pending[0][0] < first + window:
                    worker.give(pending.popleft())
            while first in done:
                results = done.pop(first)
                yield from results
                first += len(results)
            if first >= len(tasks):
                break
            busy = [w for w in workers if w.batches]
            if not busy and not pending:  # nothing can ever bring the missing results
                raise RuntimeError(f"worker results lost from task {first} on")
            wait([w.connection for w in busy] + [w.process.sentinel for w in busy], POLL_S)
            for index, worker in enumerate(workers):
                if not worker.batches:
                    continue
                try:
                    if worker.connection.poll():
                        results = worker.connection.recv()
                        done[worker.batches.popleft()[0]] = results
                        worker.since = time.monotonic()
                        continue
                except (EOFError, OSError):
                    pass  # it died: below
                size = len(worker.batches[0][1])
                why = None
                if not worker.process.is_alive():
                    why = _exit_text(worker.process.exitcode)
                elif patience_per_task_s and \
                        time.monotonic() - worker.since > patience_per_task_s * size + 30:
                    why = ("its worker process stopped answering for"
                           f" {patience_per_task_s * size + 30:g} s")
                if why is None:
                    continue
                worker.stop()
                workers[index] = _Worker(context, work)
                lost = list(worker.batches)
                start, batch = lost[0]
                if len(batch) == 1:  # the task that took its worker down
                    done[start] = [died(batch[0], why)]
                    lost = lost[1:]
                singles = [(first_index + offset, [task]) for first_index, tasks_ in lost
                           for offset, task in enumerate(tasks_)]
                pending.extendleft(reversed(singles))  # each runs alone, next
    finally:
        for worker in workers:
            worker.stop()
