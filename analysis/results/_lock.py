"""One writer at a time for a results file: the operating system's advisory lock on a file beside it.

Every writer (``upstroke analyze --out``, ``upstroke batch``, the app's save) reads the results
file, adds to it and replaces it. Two of them at once would each replace the file with their own
view, and the first one's recordings would be lost. So a writer holds an exclusive lock while it
reads, adds and replaces (and only then): :func:`results_lock`. The lock is the kernel's
(``flock`` on POSIX, ``LockFileEx`` through ``msvcrt.locking`` on Windows) on a small hidden file
beside the results file, ``.NAME.lock``, which also tells a waiting writer who holds the lock (the
process id and its command line). The kernel releases the lock when its holder ends, however it
ends, so a killed writer never leaves the file locked. The holder removes the lock file before it
lets go; a writer that took the lock checks that its file is still the one at that path (and
starts again if not), so a writer waiting on a removed file never shares the lock with one on
the new file.

A writer that finds the lock taken says so once (``notify``), waits up to ``wait_s`` seconds for
it, and then gives up with :class:`ResultsBusyError`, naming the holder. After taking the lock a
writer must read the results file again: the previous holder may have changed it.
"""

from __future__ import annotations

import contextlib
import os
import sys
import threading
import time
from collections.abc import Callable, Iterator

from analysis.errors import ResultsFileError

if os.name == "nt":  # pragma: no cover - Windows
    import msvcrt
else:
    import fcntl

__all__ = ["DEFAULT_WAIT_S", "ResultsBusyError", "holder_of", "lock_path", "results_lock"]

#: How long a writer waits for another one to finish, unless told otherwise (``--lock-wait``).
DEFAULT_WAIT_S = 60.0
#: How often a waiting writer tries the lock again.
_POLL_S = 0.05

# Locks this process holds, by lock file: (owning thread, depth, descriptor). A writer that
# already holds the lock (the command around a save) takes it again without waiting.
_held: dict[str, tuple[int, int, int]] = {}
_held_guard = threading.Lock()


class ResultsBusyError(ResultsFileError):
    """Another process kept the results file locked for longer than the writer would wait."""


def lock_path(path: str | os.PathLike) -> str:
    """The lock file of a results file: ``.NAME.lock`` in the same folder."""
    target = os.path.abspath(os.fspath(path))
    folder, name = os.path.split(target)
    return os.path.join(folder, f".{name}.lock")


def holder_of(path: str | os.PathLike) -> str:
    """Who holds (or last held) the lock of a results file: ``pid N: COMMAND``, or ``""``."""
    try:
        with open(lock_path(path), encoding="utf-8", errors="replace") as fh:
            pid, _, command = fh.read(4096).partition("\n")
    except OSError:
        return ""
    pid, command = pid.strip(), " ".join(command.split())
    if not pid.isdigit():
        return ""
    if len(command) > 120:
        command = command[:117] + "..."
    return f"pid {pid}: {command}" if command else f"pid {pid}"


def _try_lock(fd: int) -> bool:
    if os.name == "nt":  # pragma: no cover - Windows
        try:
            msvcrt.locking(fd, msvcrt.LK_NBLCK, 1)
        except OSError:
            return False
        return True
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except BlockingIOError:
        return False
    return True


def _unlock(fd: int) -> None:
    with contextlib.suppress(OSError):
        if os.name == "nt":  # pragma: no cover - Windows
            os.lseek(fd, 0, os.SEEK_SET)
            msvcrt.locking(fd, msvcrt.LK_UNLCK, 1)
        else:
            fcntl.flock(fd, fcntl.LOCK_UN)
    os.close(fd)


def _write_holder(fd: int) -> None:
    # Who holds the lock, for the message of a writer that waits. Written past the first byte
    # would be simpler for Windows' byte-range lock, but readers there open the file shared.
    command = " ".join(getattr(sys, "orig_argv", None) or sys.argv) or "python"
    with contextlib.suppress(OSError):
        os.ftruncate(fd, 0)
        os.lseek(fd, 0, os.SEEK_SET)
        os.write(fd, f"{os.getpid()}\n{command}\n".encode("utf-8", "replace"))


@contextlib.contextmanager
def results_lock(
    path: str | os.PathLike, *, wait_s: float | None = None, notify: Callable[[str], None] | None = None,
) -> Iterator[None]:
    """Hold the exclusive write lock of the results file ``path`` for the ``with`` block.

    Parameters
    ----------
    path : str or path
        The results file (it need not exist yet; its folder must).
    wait_s : float or None
        How long to wait for another writer (None: :data:`DEFAULT_WAIT_S`).
    notify : callable or None
        Called once with a sentence when the lock is taken and this writer starts to wait
        (default: nothing is said).

    Raises
    ------
    ResultsBusyError
        When another process still holds the lock after ``wait_s`` seconds.
    ResultsFileError
        When the lock file cannot be made (a read-only folder).
    """
    key = lock_path(path)
    me = threading.get_ident()
    with _held_guard:
        owner = _held.get(key)
        if owner is not None and owner[0] == me:  # re-entered by the writer that holds it
            _held[key] = (me, owner[1] + 1, owner[2])
            reentered = True
        else:
            reentered = False
    if reentered:
        try:
            yield
        finally:
            with _held_guard:
                owner = _held[key]
                _held[key] = (me, owner[1] - 1, owner[2])
        return
    fd = _acquire(path, key, DEFAULT_WAIT_S if wait_s is None else float(wait_s), notify)
    with _held_guard:
        _held[key] = (me, 1, fd)
    try:
        yield
    finally:
        with _held_guard:
            del _held[key]
        with contextlib.suppress(OSError):
            os.remove(key)  # while still held: see the module's notes
        _unlock(fd)


def _open(path: str | os.PathLike, key: str) -> int:
    umask = os.umask(0)
    os.umask(umask)
    try:
        return os.open(key, os.O_RDWR | os.O_CREAT | getattr(os, "O_CLOEXEC", 0), 0o666 & ~umask)
    except OSError as exc:
        raise ResultsFileError(
            path, f"cannot be locked for writing ({exc.strerror or exc})", "choose a folder you can write to",
        ) from None


def _still_there(fd: int, key: str) -> bool:
    """True when ``fd`` is the file now at ``key`` (not one a previous holder removed)."""
    try:
        here, there = os.fstat(fd), os.stat(key)
    except OSError:
        return False
    return (here.st_dev, here.st_ino) == (there.st_dev, there.st_ino)


def _acquire(path: str | os.PathLike, key: str, wait_s: float, notify: Callable[[str], None] | None) -> int:
    fd = _open(path, key)
    deadline = time.monotonic() + max(0.0, wait_s)
    said = False
    while True:
        if _try_lock(fd):
            if _still_there(fd, key):
                break
            _unlock(fd)  # the previous holder removed this file: lock the one there now
            fd = _open(path, key)
            continue
        if not said and notify is not None:
            holder = holder_of(path)
            notify(f"{os.fspath(path)} is being written by another process"
                   f"{f' ({holder})' if holder else ''}; waiting up to {wait_s:g} s for it to finish")
        said = True
        if time.monotonic() >= deadline:
            holder = holder_of(path)
            os.close(fd)
            raise ResultsBusyError(
                path, f"is still being written by another process{f' ({holder})' if holder else ''} "
                f"after {wait_s:g} s", "wait for that process to finish, or give a longer --lock-wait",
            )
        time.sleep(_POLL_S)
    _write_holder(fd)
    return fd
