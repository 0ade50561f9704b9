"""Error types of the analysis core.

Every error a user can fix by changing their input derives from :class:`InputError`. Its message
is one line that names the file (when there is one), says what is wrong and says what to do. The
command line turns an :class:`InputError` into that line on stderr and exit status 2; anything else
is an internal fault (exit status 1).
"""

from __future__ import annotations

import errno
import os

__all__ = ["InputError", "RecordingError", "SettingsError", "ResultsFileError", "missing"]


def missing(path: str | os.PathLike, what: str = "file") -> tuple[str, str]:
    """``(problem, fix)`` for a path that does not lead to a file: a symbolic link that loops or
    points nowhere is named as such, not as a missing ``what``."""
    text = os.fspath(path)
    try:
        os.stat(text)
    except OSError as exc:
        if exc.errno == errno.ELOOP:
            return ("is a loop of symbolic links (it leads back to itself)",
                    "point the link at the real file, or give the file's own path")
        if os.path.islink(text):
            return (f"is a symbolic link to {os.readlink(text)!r}, which does not exist",
                    "point the link at the real file, or give the file's own path")
        if exc.errno == errno.ENOTDIR:
            return (f"no such {what}: a part of the path is not a folder", "check the path")
    return (f"no such {what}", "check the path and the name")


class InputError(ValueError):
    """A problem with the user's input that the user can fix.

    Parameters
    ----------
    path : str or os.PathLike or None
        The file the problem is in; None when no file is involved.
    problem : str
        What is wrong, as a short clause ("the file is empty").
    fix : str
        What to do about it ("record again or pick another file").
    """

    def __init__(self, path: str | os.PathLike | None, problem: str, fix: str = "") -> None:
        self.path = None if path is None else os.fspath(path)
        self.problem = problem
        self.fix = fix
        super().__init__(self.one_line())

    def __reduce__(self):
        # Pickled as its three parts (an error raised in a worker process reaches the parent).
        return type(self), (self.path, self.problem, self.fix)

    def one_line(self) -> str:
        """The message as a single line: ``FILE: PROBLEM; FIX``."""
        text = self.problem if self.path is None else f"{self.path}: {self.problem}"
        if self.fix:
            text += f"; {self.fix}"
        return " ".join(text.split())


class RecordingError(InputError):
    """A recording cannot be opened or does not hold what an analysis needs."""


class SettingsError(InputError):
    """A settings file or value is missing, malformed or out of range."""


class ResultsFileError(InputError):
    """A results file (HDF5) is missing, corrupt, foreign or of an unknown schema."""
