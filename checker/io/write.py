"""Write output files atomically, and never over an input.

A regular file (or a path that does not exist yet) is written to a temporary file in the
same folder, flushed to disk (fsync) and renamed over the target, so a reader sees the
old file or the whole new one, never half of it; the new file gets the mode a newly
created file would get under the umask (or keeps the mode of the file it replaces). A
target that exists and is not a regular file (a pipe, a terminal, /dev/null,
/dev/stdout) is written directly and never replaced. A folder is refused. Every failure
removes the temporary file.
"""

from __future__ import annotations

import errno
import os
import stat
import tempfile
import contextlib
from collections.abc import Sequence

TEMPORARY_PREFIX, TEMPORARY_SUFFIX = ".ampcheck-", ".tmp"


def _umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def new_folder(parent: str, prefix: str, suffix: str = "") -> str:
    """A new, empty hidden folder in ``parent`` (tempfile.mkdtemp) given the mode a
    folder made by hand would get (0755 under umask 022), not mkdtemp's private 0700:
    it becomes a report or extract folder that others read."""
    folder = tempfile.mkdtemp(dir=parent, prefix=prefix, suffix=suffix)
    with contextlib.suppress(OSError):  # a platform without modes: it stays as made
        os.chmod(folder, 0o777 & ~_umask())
    return folder


class AtomicOutput:
    """One output file being written: ``stream`` is a text stream; ``commit`` finishes
    it, ``abandon`` drops it (both safe to call twice)."""

    def __init__(self, path: str, protect=(), newline: str | None = ""):
        self.path = path
        self.temporary: str | None = None
        self.target = os.path.realpath(path)
        for other in protect:
            if os.path.exists(other) and os.path.realpath(other) == self.target:
                raise ValueError(f"refusing to write over the input file {other}")
        try:
            existing = os.stat(path)
        except FileNotFoundError:
            existing = None
        if existing is not None and stat.S_ISDIR(existing.st_mode):
            raise ValueError(f"{path} is a folder, not a file")
        if existing is not None and not stat.S_ISREG(existing.st_mode):
            self.stream = self._open_direct(path, newline)
            return
        folder = os.path.dirname(self.target) or "."
        try:
            handle, self.temporary = tempfile.mkstemp(dir=folder, prefix=TEMPORARY_PREFIX,
                                                      suffix=TEMPORARY_SUFFIX)
        except OSError as error:  # named by the target, not by the temporary file
            raise _named(error, path) from None
        try:
            mode = stat.S_IMODE(existing.st_mode) if existing else 0o666 & ~_umask()
            if hasattr(os, "fchmod"):  # POSIX; elsewhere the platform's default stays
                os.fchmod(handle, mode)
            self.stream = os.fdopen(handle, "w", encoding="utf-8", newline=newline)
        except BaseException:
            os.close(handle)
            self._remove()
            raise

    @staticmethod
    def _open_direct(path: str, newline: str | None):
        """A pipe, terminal or device: opened as it is. A FIFO nobody reads is an
        error rather than a wait without end."""
        try:
            handle = os.open(path, os.O_WRONLY | getattr(os, "O_NONBLOCK", 0))
        except OSError as error:
            if error.errno == errno.ENXIO:  # a FIFO with no reader
                raise OSError(error.errno, "no process is reading this FIFO", path) \
                    from None
            raise
        if hasattr(os, "set_blocking"):
            os.set_blocking(handle, True)
        return os.fdopen(handle, "w", encoding="utf-8", newline=newline)

    def commit(self) -> None:
        """Flush, fsync and rename over the target (a direct target: flush and close);
        an OSError names the target (a full disk's error names no file of its own)."""
        try:
            self._commit()
        except OSError as error:
            raise _named(error, self.path) from None

    def _commit(self) -> None:
        if self.stream.closed:
            return
        if self.temporary is None:
            self.stream.close()
            return
        self.stream.flush()
        os.fsync(self.stream.fileno())
        self.stream.close()
        os.replace(self.temporary, self.target)
        self.temporary = None
        _sync_folder(os.path.dirname(self.target) or ".")

    def abandon(self) -> None:
        """Drop an unfinished output: close it whatever happens, remove the temporary."""
        try:
            if not self.stream.closed:
                self.stream.close()
        except OSError:
            pass  # a full disk fails the last flush too; the file goes anyway
        finally:
            self._remove()

    def _remove(self) -> None:
        if self.temporary is not None:
            with contextlib.suppress(FileNotFoundError):
                os.unlink(self.temporary)
            self.temporary = None


# A write that failed for want of room or of a device (not a missing file or a mistake).
WRITE_ERRORS = frozenset({errno.ENOSPC, errno.EIO, errno.EFBIG,
                          getattr(errno, "EDQUOT", errno.ENOSPC)})


def unnamed_write_error(error: BaseException) -> bool:
    """``error`` is a failed write that names no file: every file this tool writes
    names itself in its errors (AtomicOutput), so it was standard output's."""
    return isinstance(error, OSError) and error.filename is None \
        and error.errno in WRITE_ERRORS


def _named(error: OSError, path: str) -> OSError:
    """``error`` as an OSError naming ``path``, so its message says which output failed."""
    return OSError(error.errno, error.strerror or str(error), path)


def _sync_folder(folder: str) -> None:
    """Make the rename itself durable where the platform allows opening a folder."""
    try:
        handle = os.open(folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    except OSError:
        return
    try:
        os.fsync(handle)
    except OSError:
        pass
    finally:
        os.close(handle)


def write_new_file(path: str, text: str, protect: Sequence[str] = ()) -> None:
    """Write ``text`` to ``path`` atomically (see the module's docstring).

    Refuses (ValueError) when ``path`` is one of the ``protect`` files: the tool never
    writes over its input.
    """
    output = AtomicOutput(path, protect, newline=None)
    try:
        output.stream.write(text)
        output.commit()
    except BaseException:
        output.abandon()
        raise
