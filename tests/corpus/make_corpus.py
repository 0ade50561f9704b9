"""Build the bad-input corpus: every way a user's file can be wrong, and the command it must fail on.

Each :class:`Case` is one or more files written into a folder, the ``upstroke`` command line to
run on them, the file the one-line error must name and what it must say. Every case must end in
exit status 2 with exactly one line on stderr (``upstroke CMD: FILE: PROBLEM; FIX``), no
traceback, and no output file left behind or changed.

Run it as a script to look at the files::

    python tests/corpus/make_corpus.py /tmp/upstroke-corpus

or import it: ``build_corpus(folder) -> list[Case]``.

The groups live beside this file: ``abf_cases`` (truncation at every header boundary, damaged
fields, bit flips), ``nwb_cases`` (missing fields, foreign HDF5, results files), ``text_cases``
(junk, NaN, Inf, one sample, irregular time), ``settings_cases`` (TOML) and ``path_cases``
(folders, unreadable files, a full disk).
"""

from __future__ import annotations

import os
import sys
from dataclasses import dataclass, field
from pathlib import Path

if __package__ in (None, ""):  # run as a script: make `tests.corpus` importable
    sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

__all__ = ["Case", "build_corpus", "FAULTS"]

#: Faults of the machine that a case can ask the test to simulate while the command runs:
#: ``unreadable`` (opening the named file raises PermissionError, as for a file without read
#: permission; the tests run as root, for whom permissions never refuse a read) and ``enospc``
#: (flushing a written file to disk raises OSError(ENOSPC), as on a full disk).
FAULTS = ("", "unreadable", "enospc")


@dataclass(frozen=True)
class Case:
    """One bad input and how the command line must answer it.

    Attributes
    ----------
    name : str
        Unique, e.g. ``"abf2-cut-in-ADC-section"``.
    files : tuple of Path
        The files the case made (the damaged input first).
    argv : tuple of str
        The command line after ``upstroke``.
    blame : Path
        The file the error line must name.
    expect : str
        A regular expression (case-insensitive) the error line must match: the problem named.
    why : str
        What is damaged, and where the byte layout comes from.
    outputs : tuple of Path
        Files the command would write; none may exist afterwards.
    keep : tuple of Path
        Files that exist before the command and must be byte-identical afterwards.
    fault : str
        One of :data:`FAULTS`.
    huge : bool
        The file declares an enormous size: the command's peak memory is checked.
    tags : tuple of str
        ``"subprocess"``: the command runs in a process of its own.
    env : tuple of (name, value)
        Environment variables set for that process (with the ``subprocess`` tag).
    """

    name: str
    files: tuple[Path, ...]
    argv: tuple[str, ...]
    blame: Path
    expect: str
    why: str
    outputs: tuple[Path, ...] = ()
    keep: tuple[Path, ...] = ()
    fault: str = ""
    huge: bool = False
    tags: tuple[str, ...] = field(default=())
    env: tuple[tuple[str, str], ...] = ()

    def __post_init__(self) -> None:
        if self.fault not in FAULTS:
            raise ValueError(f"unknown fault {self.fault!r}")


def build_corpus(folder: str | os.PathLike) -> list[Case]:
    """Write every case's files under ``folder`` and return the cases.

    Parameters
    ----------
    folder : str or os.PathLike
        An empty (or new) folder; each group writes into its own sub-folder.

    Returns
    -------
    list of Case
        In a fixed order; names are unique.
    """
    from . import abf_cases, nwb_cases, path_cases, results_cases, settings_cases, text_cases

    root = Path(folder)
    root.mkdir(parents=True, exist_ok=True)
    cases: list[Case] = []
    for group in (abf_cases, nwb_cases, text_cases, settings_cases, results_cases, path_cases):
        sub = root / group.__name__.rsplit(".", 1)[-1]
        sub.mkdir(exist_ok=True)
        cases.extend(group.build(sub))
    names = [c.name for c in cases]
    duplicates = sorted({n for n in names if names.count(n) > 1})
    if duplicates:
        raise ValueError(f"duplicate corpus case names: {duplicates}")
    return cases


def main(argv: list[str] | None = None) -> int:
    """Write the corpus into the folder given and list its cases."""
    import argparse

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("folder", help="where to write the files")
    args = parser.parse_args(argv)
    cases = build_corpus(args.folder)
    for case in cases:
        print(f"{case.name:40s} upstroke {' '.join(case.argv)}")
    print(f"{len(cases)} cases in {args.folder}")
    return 0


if __name__ == "__main__":
    if __package__ in (None, ""):
        from tests.corpus.make_corpus import main as _main  # the package's own copy of this module

        sys.exit(_main())
    sys.exit(main())
