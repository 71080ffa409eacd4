"""What one file's review may cost: a time budget and a memory cap.

The time budget is a POSIX interval timer (``signal.setitimer``, ITIMER_REAL): when it
runs out, :class:`OverBudget` is raised in the middle of the review, wherever it is. It is
a BaseException, so the engine's guard around each rule (which turns a rule's bug into a
``rule-failed`` finding) cannot swallow it. Python runs signal handlers between
bytecodes, so a single long numpy call finishes first; the analysis keeps its batches
small (``checker/analysis/tolerance.py``) for that reason. Where there is no interval
timer, or outside the main thread, the review runs without a budget.

The memory cap is the address-space limit (``resource.RLIMIT_AS``) of the process,
set to its size at the start of the review plus the cap, and put back afterwards: a
review that asks for more gets a MemoryError instead of exhausting the machine. It needs
Linux (the size is read from /proc/self/statm); elsewhere the review runs uncapped.
"""

from __future__ import annotations

import os
import signal
import threading
from contextlib import contextmanager

DEFAULT_TIME_BUDGET_S = 60.0  # a backstop: the largest legal stage takes about 20 s
DEFAULT_MEMORY_LIMIT_MB = 1024


class OverBudget(BaseException):
    """The review of one file ran past its time budget."""

    def __init__(self, seconds: float):
        super().__init__(f"the review took longer than its budget of {seconds:g} s")
        self.seconds = seconds


def _can_time() -> bool:
    return hasattr(signal, "setitimer") and \
        threading.current_thread() is threading.main_thread()


@contextmanager
def time_budget(seconds: float | None):
    """Raise OverBudget inside the block once ``seconds`` have passed (None or 0: no
    budget). The previous handler and timer are put back on the way out."""
    if not seconds or seconds <= 0 or not _can_time():
        yield
        return

    def expire(_signum, _frame):
        signal.setitimer(signal.ITIMER_REAL, 0)
        raise OverBudget(seconds)

    previous = signal.signal(signal.SIGALRM, expire)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)


def _address_space_bytes() -> int | None:
    """This process's size (virtual memory) in bytes, or None where it cannot be read."""
    try:
        with open("/proc/self/statm", "rb") as handle:
            pages = int(handle.read().split()[0])
        return pages * os.sysconf("SC_PAGE_SIZE")
    except (OSError, ValueError, IndexError, AttributeError):
        return None


def _cap_address_space(megabytes: float | None):
    """Lower the soft RLIMIT_AS to this process's size plus ``megabytes``; the previous
    (soft, hard) pair to put back, or None where nothing was changed."""
    if not megabytes or megabytes <= 0:
        return None
    try:
        import resource
    except ImportError:  # not POSIX
        return None
    size = _address_space_bytes()
    if size is None:
        return None
    soft, hard = resource.getrlimit(resource.RLIMIT_AS)
    limit = size + int(megabytes * 1024 * 1024)
    if hard != resource.RLIM_INFINITY:
        limit = min(limit, hard)
    if soft != resource.RLIM_INFINITY and soft <= limit:
        return None  # already capped at least as tightly
    try:
        resource.setrlimit(resource.RLIMIT_AS, (limit, hard))
    except (ValueError, OSError):
        return None
    return soft, hard


@contextmanager
def memory_cap(megabytes: float | None):
    """Within the block, the process may grow by at most ``megabytes`` (None or 0: no
    cap); MemoryError past it."""
    previous = _cap_address_space(megabytes)
    try:
        yield
    finally:
        if previous is not None:
            import resource

            resource.setrlimit(resource.RLIMIT_AS, previous)
