"""Running a command line in-process the way a user meets it, and checking its answer to bad input.

Shared by the corpus, the fuzzing and the safety tests. The answer the contract asks of bad input
(CONTRACT.md, "Exit status"): exit 2 and one line on stderr, ``upstroke CMD: FILE: PROBLEM; FIX``,
naming the file, without a traceback.
"""

from __future__ import annotations

import builtins
import contextlib
import errno
import io
import os
import re
import resource
import tracemalloc
import warnings
from pathlib import Path

from .make_corpus import Case

__all__ = ["MAX_LINE_CHARS", "check_refusal", "fault", "run_in_process"]

#: Peak Python/numpy allocation allowed while refusing a file that declares an enormous size.
#: The files are a few kB to a few MB; what they declare is up to 8 TB.
HUGE_PEAK_BYTES = 64 * 2**20
#: Extra address space the process may take while such a case runs: an allocation sized by the
#: header fails at once instead of driving the machine into swap.
ADDRESS_SPACE_HEADROOM = 3 * 2**30
# Warnings Python does not print by default (the command line would not show them either).
_SILENT = (DeprecationWarning, PendingDeprecationWarning, ImportWarning, ResourceWarning)
#: Longer than this is a runaway line (quoted junk, a library's object dump), not a message; a
#: list of the valid choices (the 24 measurement settings) still fits (common practice, no source).
MAX_LINE_CHARS = 800
_ONE_LINE = re.compile(r"^upstroke (\w+): (?P<file>.+?): (?P<problem>.+?); (?P<fix>\S.*)$")



@contextlib.contextmanager
def fault(case: Case, monkeypatch):
    """Simulate the machine fault a case asks for."""
    if case.fault == "unreadable":
        target = os.path.abspath(case.blame)
        if os.geteuid() != 0:  # a real permission refusal where one is possible
            os.chmod(target, 0)
            try:
                yield
            finally:
                os.chmod(target, 0o644)
            return
        # root reads any file whatever its mode: refuse the open itself, as the kernel would.
        real_open = builtins.open

        def refusing_open(file, *args, **kwargs):
            if isinstance(file, (str, bytes, os.PathLike)) and os.path.abspath(os.fsdecode(file)) == target:
                raise PermissionError(errno.EACCES, "Permission denied", os.fsdecode(file))
            return real_open(file, *args, **kwargs)

        monkeypatch.setattr(builtins, "open", refusing_open)
        monkeypatch.setattr(io, "open", refusing_open)
    elif case.fault == "enospc":
        # The disk fills while the named output (its temporary file) is flushed; other files
        # the command writes before it still fit.
        real_fsync = os.fsync
        name = Path(case.blame).name

        def full_disk(fd):
            if name in os.path.basename(os.readlink(f"/proc/self/fd/{fd}")):
                raise OSError(errno.ENOSPC, "No space left on device")
            return real_fsync(fd)

        monkeypatch.setattr(os, "fsync", full_disk)
    yield


@contextlib.contextmanager
def _address_space_cap(headroom: int):
    """Cap the process's address space at its current size plus ``headroom`` (then restore)."""
    soft, hard = resource.getrlimit(resource.RLIMIT_AS)
    with open("/proc/self/status") as fh:
        vm_kb = next(int(line.split()[1]) for line in fh if line.startswith("VmSize:"))
    cap = vm_kb * 1024 + headroom
    if hard != resource.RLIM_INFINITY:
        cap = min(cap, hard)
    resource.setrlimit(resource.RLIMIT_AS, (cap, hard))
    try:
        yield
    finally:
        resource.setrlimit(resource.RLIMIT_AS, (soft, hard))


def run_in_process(argv, *, huge: bool = False) -> tuple[int, str, str, int]:
    """``upstroke ARGV`` in this process: (status, stdout, stderr, peak bytes allocated).

    Warnings that Python would print are added to stderr, as the command line would show them.
    """
    from app.cli import main

    out, err = io.StringIO(), io.StringIO()
    cap = _address_space_cap(ADDRESS_SPACE_HEADROOM) if huge else contextlib.nullcontext()
    with warnings.catch_warnings(record=True) as caught, cap:
        warnings.simplefilter("always")
        tracemalloc.start()
        try:
            with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
                try:
                    status = main(list(argv))
                except SystemExit as exc:  # argparse's own exits
                    status = exc.code
        finally:
            peak = tracemalloc.get_traced_memory()[1]
            tracemalloc.stop()
    shown = [f"{w.category.__name__}: {w.message}\n" for w in caught if not issubclass(w.category, _SILENT)]
    return status, out.getvalue(), err.getvalue() + "".join(shown), peak


def check_refusal(case: Case, status, stderr: str) -> str:
    """Assert the contract's answer to bad input; returns the error line."""
    assert "Traceback" not in stderr, f"{case.name}: a traceback:\n{stderr}"
    lines = [line for line in stderr.splitlines() if line.strip()]
    assert status == 2, f"{case.name}: exit {status}, not 2 ({case.why}):\n{stderr}"
    assert len(lines) == 1, f"{case.name}: {len(lines)} lines on stderr, not one:\n{stderr}"
    line = lines[0]
    match = _ONE_LINE.match(line)
    assert match, f"{case.name}: not 'upstroke CMD: FILE: PROBLEM; FIX': {line}"
    assert os.fspath(case.blame) in line, f"{case.name}: the line does not name {case.blame}: {line}"
    said = line.replace(os.fspath(case.blame), "FILE")  # match the words, not the file's name
    assert re.search(case.expect, said, re.IGNORECASE), f"{case.name}: expected /{case.expect}/ in: {line}"
    assert "MemoryError" not in said, f"{case.name}: a size was allocated before it was checked: {line}"
    assert len(line) < MAX_LINE_CHARS, f"{case.name}: not a clear line ({len(line)} characters): {line}"
    return line
