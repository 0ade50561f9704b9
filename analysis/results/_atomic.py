"""Writing output files so that a failure or a kill never leaves a partial or broken file.

Every output (results file, CSV, figure) is written to a temporary file in the same folder, flushed
and fsynced, then moved over the target with :func:`os.replace`, which is atomic on POSIX and on
Windows within one volume. Until that last step the previous file (if any) is untouched; after it,
the new file is complete. A process killed in between leaves only a hidden temporary file
(``.NAME.tmp-PID-...``), which the next write to the same target removes when its process is gone.
"""

from __future__ import annotations

import contextlib
import errno
import os
import re
import tempfile
from typing import Iterator

from analysis.errors import InputError

__all__ = ["WriteError", "atomic_output", "atomic_outputs", "fsync_folder", "output_mode", "remove_stale_temps", "temp_prefix", "write_text_atomic"]


def temp_prefix(path: str | os.PathLike) -> str:
    """The name prefix of the temporary files written for ``path``."""
    return f".{os.path.basename(os.fspath(path))}.tmp-"


def remove_stale_temps(path: str | os.PathLike) -> None:
    """Remove the temporary files that writers of ``path`` killed before they finished left behind
    (those of a process still running are kept)."""
    folder = os.path.dirname(os.path.abspath(path))
    prefix = temp_prefix(path)
    try:
        names = os.listdir(folder)
    except OSError:
        return
    for name in names:
        if not name.startswith(prefix):
            continue
        m = re.match(r"(\d+)-", name[len(prefix):])
        if m is None or int(m.group(1)) == os.getpid() or _alive(int(m.group(1))):
            continue
        with contextlib.suppress(OSError):
            os.remove(os.path.join(folder, name))


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except (PermissionError, OSError):
        return True
    return True


def _fsync_path(path: str) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def fsync_folder(folder: str | os.PathLike) -> None:
    """Make a rename into ``folder`` durable (a folder cannot be opened this way on Windows: no-op)."""
    with contextlib.suppress(OSError):
        _fsync_path(folder)


def output_mode(target: str | os.PathLike) -> int:
    """The permissions for a file written to a temporary file and moved to ``target``.

    mkstemp makes a private (0600) file; the result gets the permissions of the file it
    replaces, or those an ordinary new file would get (0666 less the umask).
    """
    try:
        return os.stat(target).st_mode & 0o7777
    except OSError:
        umask = os.umask(0)
        os.umask(umask)
        return 0o666 & ~umask


@contextlib.contextmanager
def atomic_output(path: str | os.PathLike) -> Iterator[str]:
    """A temporary path to write to; on success it replaces ``path``, on any error it is removed.

    Parameters
    ----------
    path : str or path
        The final file. Its folder must exist.

    Yields
    ------
    str
        The temporary file's path (in the same folder, so the final move is atomic). The caller
        writes and closes it inside the ``with`` block.

    Raises
    ------
    WriteError
        For any OSError while the file is written, flushed or moved (a full disk, no
        permission): one line naming ``path``. The temporary file is removed first.

    Examples
    --------
    >>> import os, tempfile
    >>> target = os.path.join(tempfile.mkdtemp(), "out.txt")
    >>> with atomic_output(target) as tmp:
    ...     with open(tmp, "w") as fh:
    ...         _ = fh.write("done\\n")
    >>> open(target).read()
    'done\\n'
    """
    target = os.path.abspath(os.fspath(path))
    folder = os.path.dirname(target)
    remove_stale_temps(target)
    try:
        fd, tmp = tempfile.mkstemp(prefix=f"{temp_prefix(target)}{os.getpid()}-", dir=folder)
    except OSError as exc:
        raise WriteError.of(path, exc) from None
    os.close(fd)
    try:
        yield tmp
        _fsync_path(tmp)
        os.chmod(tmp, output_mode(target))
        os.replace(tmp, target)
    except BaseException as exc:
        with contextlib.suppress(OSError):
            os.remove(tmp)
        if isinstance(exc, OSError):  # a full disk, a read-only folder: the user's to fix
            raise WriteError.of(path, exc) from None
        raise
    fsync_folder(folder)


class WriteError(InputError):
    """An output file cannot be written (a full disk, no permission, a read-only folder)."""

    @classmethod
    def of(cls, path: str | os.PathLike, exc: OSError) -> "WriteError":
        code = exc.errno
        reason = exc.strerror or " ".join(str(exc).split())[:160] or type(exc).__name__
        if code in (errno.ENOSPC, errno.EDQUOT) or "No space left" in str(exc):
            fix = "the disk is full: free some space or write elsewhere; the previous file is unchanged"
        elif code in (errno.EACCES, errno.EPERM, errno.EROFS):
            fix = "choose a folder you can write to; the previous file is unchanged"
        else:
            fix = "check the disk or write elsewhere; the previous file is unchanged"
        return cls(path, f"cannot be written ({reason})", fix)


@contextlib.contextmanager
def atomic_outputs(paths: list[str | os.PathLike]) -> Iterator[list[str]]:
    """Temporary paths for several outputs, moved over their targets only when all are written.

    A failure while any of them is written (an error, a full disk) removes every temporary file
    and leaves every target as it was, so a command with several outputs writes all or none.
    The final moves happen one after another once everything is complete and flushed. An
    OSError (or a :class:`WriteError` from a writer) becomes a :class:`WriteError` naming the
    target it concerns.

    Parameters
    ----------
    paths : list of str or path
        The final files, each in an existing folder.

    Yields
    ------
    list of str
        One temporary path per target, in the same order.
    """
    targets = [os.path.abspath(os.fspath(p)) for p in paths]
    temps: list[str] = []
    current = None  # the target being flushed or moved, once the writers are done
    try:
        for target in targets:
            remove_stale_temps(target)
            fd, tmp = tempfile.mkstemp(prefix=f"{temp_prefix(target)}{os.getpid()}-", dir=os.path.dirname(target))
            os.close(fd)
            temps.append(tmp)
        yield list(temps)
        for tmp, target in zip(temps, targets):
            current = target
            _fsync_path(tmp)
            os.chmod(tmp, output_mode(target))
        for tmp, target in zip(temps, targets):
            current = target
            os.replace(tmp, target)
    except BaseException as exc:
        for tmp in temps:
            with contextlib.suppress(OSError):
                os.remove(tmp)
        if isinstance(exc, (OSError, WriteError)):
            # Name the output the user asked for, not its temporary file.
            where = getattr(exc, "path", None) or getattr(exc, "filename", None) or ""
            target = current or next(
                (t for t, tmp in zip(targets, temps) if os.path.basename(tmp) in os.fspath(where)),
                next((t for t in targets if temp_prefix(t) in os.fspath(where)), targets[0] if targets else where),
            )
            if isinstance(exc, WriteError):
                raise WriteError(target, exc.problem, exc.fix) from None
            raise WriteError.of(target, exc) from None
        raise
    for folder in sorted({os.path.dirname(t) for t in targets}):
        fsync_folder(folder)


def write_text_atomic(path: str | os.PathLike, text: str) -> None:
    """Write ``text`` (UTF-8, ``\\n`` line ends as given) to ``path`` atomically."""
    with atomic_output(path) as tmp:
        with open(tmp, "w", encoding="utf-8", newline="") as fh:
            fh.write(text)
