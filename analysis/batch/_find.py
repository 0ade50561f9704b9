"""Finding the recordings of a batch in folders, glob patterns and file names."""

from __future__ import annotations

import glob
import os
from typing import Iterable, Sequence

from analysis.errors import InputError, missing
from analysis.readers import supported_extensions

__all__ = ["find_recordings"]


def _registered_extensions() -> tuple[str, ...]:
    return tuple(_norm_ext(e) for e in supported_extensions())


def _norm_ext(ext: str) -> str:
    ext = ext.strip().lower()
    return ext if ext.startswith(".") else "." + ext


def _is_hidden(name: str) -> bool:
    # Dot files include the "._cell.abf" resource forks that macOS leaves on shared drives:
    # they carry a recording's extension but hold no recording.
    return name.startswith(".")


def _walk(folder: str, extensions: tuple[str, ...]) -> list[str]:
    found: list[str] = []
    for root, dirs, files in os.walk(folder):
        dirs[:] = sorted(d for d in dirs if not _is_hidden(d))
        for name in sorted(files):
            if not _is_hidden(name) and os.path.splitext(name)[1].lower() in extensions:
                found.append(os.path.join(root, name))
    return sorted(found, key=_sort_key)


def _is_upstroke_output(path: str) -> bool:
    # A beats or summary CSV that an earlier batch wrote into the folder it analysed is not a
    # recording; skip it rather than report it as a failure.
    if os.path.splitext(path)[1].lower() not in (".csv", ".tsv", ".txt"):
        return False
    try:
        with open(path, encoding="utf-8", errors="replace") as fh:
            first = fh.readline(4096).strip()
    except OSError:
        return False
    return first.startswith(("file,sweep,beat,", "file,sweep_group,"))


def _sort_key(path: str) -> tuple[str, ...]:
    # Sort by path components so that "a/b.abf" and "a-c.abf" order the same on every platform.
    return tuple(os.path.normpath(path).split(os.sep))


def find_recordings(
    sources: Iterable[str | os.PathLike],
    *,
    extensions: Sequence[str] | None = None,
    exclude: Iterable[str | os.PathLike] = (),
) -> list[str]:
    """The recordings that folders, glob patterns and file names point to, in a fixed order.

    Parameters
    ----------
    sources : iterable of str or path
        Folders (searched recursively), glob patterns (``**`` searches recursively) or files.
        A file named explicitly is taken whatever its extension; folders and patterns yield only
        files with a registered recording extension. Hidden files and folders (names starting
        with a dot) are skipped inside folders.
    extensions : sequence of str or None
        Extensions to look for (``".abf"`` or ``"abf"``); None takes every extension a reader is
        registered for (:func:`analysis.readers.supported_extensions`).
    exclude : iterable of str or path
        Files never to take, such as the batch's own output files. Beats and summary CSVs
        written by Upstroke are skipped in folders and patterns as well.

    Returns
    -------
    list of str
        Paths as found from the sources given (not made absolute), sources in the order given,
        each source's files sorted by path; a file reached twice is kept at its first place.

    Raises
    ------
    InputError
        When a source is neither a file, a folder nor a pattern matching anything, or when no
        recording is found at all.
    """
    exts = tuple(_norm_ext(e) for e in extensions) if extensions is not None else _registered_extensions()
    skip = {os.path.realpath(os.fspath(p)) for p in exclude}
    seen: set[str] = set()
    paths: list[str] = []
    given: list[str] = []
    for source in sources:
        text = os.fspath(source)
        given.append(text)
        if os.path.isdir(text):
            candidates = _walk(text, exts)
        elif os.path.isfile(text):
            candidates = [text]
        elif glob.has_magic(text):
            matches = sorted(glob.glob(text, recursive=True), key=_sort_key)
            if not matches:
                raise InputError(text, "the pattern matches no file", "check the pattern, or quote it so the shell does not expand it")
            candidates = []
            for match in matches:
                if os.path.isdir(match):
                    candidates.extend(_walk(match, exts))
                elif os.path.splitext(match)[1].lower() in exts and not _is_hidden(os.path.basename(match)):
                    candidates.append(match)
        else:
            raise InputError(text, *missing(text, "file or folder"))
        for path in candidates:
            key = os.path.realpath(path)
            if key in seen or key in skip or (path not in given and _is_upstroke_output(path)):
                continue
            seen.add(key)
            paths.append(path)
    if not paths:
        where = given[0] if len(given) == 1 else "the sources given"
        raise InputError(
            None, f"no recordings found in {where}",
            f"give folders or patterns holding files with one of these extensions: {', '.join(exts)}",
        )
    return paths
