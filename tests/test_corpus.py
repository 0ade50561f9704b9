"""Every case of the bad-input corpus through the command line: exit 2, one clear line, no traceback,
nothing written, and no memory allocated on a header's word before it is checked.

The contract (CONTRACT.md, "Exit status"): exit 2 with one line on stderr naming the file, what is
wrong and what to do; a failed command never leaves a partial output file behind and never
overwrites a good one. The cases are built by ``tests/corpus/make_corpus.py``.
"""

from __future__ import annotations

import atexit
import builtins
import contextlib
import errno
import functools
import io
import os
import re
import resource
import shutil
import subprocess
import sys
import tempfile
import tracemalloc
import warnings
from pathlib import Path

import pytest

from app.cli import main
from tests.corpus.make_corpus import Case, build_corpus

REPO = Path(__file__).resolve().parents[1]
#: Peak Python/numpy allocation allowed while refusing a file that declares an enormous size.
#: The files are a few kB to a few MB; what they declare is up to 8 TB.
HUGE_PEAK_BYTES = 64 * 2**20
#: Extra address space the process may take while such a case runs: an allocation sized by the
#: header fails at once instead of driving the machine into swap.
ADDRESS_SPACE_HEADROOM = 3 * 2**30
#: Address space of a command run in a child process (Python, numpy, h5py and pynwb take ~1.5 GiB).
CHILD_ADDRESS_SPACE = 4 * 2**30
# Warnings Python does not print by default (the command line would not show them either).
_SILENT = (DeprecationWarning, PendingDeprecationWarning, ImportWarning, ResourceWarning)
_ONE_LINE = re.compile(r"^upstroke (\w+): (?P<file>.+?): (?P<problem>.+?); (?P<fix>\S.*)$")


@functools.cache
def _corpus() -> tuple[Case, ...]:
    folder = Path(tempfile.mkdtemp(prefix="upstroke-corpus-"))
    atexit.register(shutil.rmtree, folder, ignore_errors=True)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # pynwb's notes while writing the seed files
        return tuple(build_corpus(folder))


def _case_names() -> list[str]:
    return [c.name for c in _corpus()]


def _case(name: str) -> Case:
    return next(c for c in _corpus() if c.name == name)


@contextlib.contextmanager
def _fault(case: Case, monkeypatch):
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


def _listing(case: Case) -> dict[Path, set[str]]:
    folders = {Path(p).parent for p in (case.blame, *case.files, *case.outputs, *case.keep)}
    return {f: set(os.listdir(f)) for f in folders if f.is_dir()}


def run_in_process(argv, *, huge: bool = False) -> tuple[int, str, str, int]:
    """``upstroke ARGV`` in this process: (status, stdout, stderr, peak bytes allocated).

    Warnings that Python would print are added to stderr, as the command line would show them.
    """
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
    assert len(line) < 400, f"{case.name}: not a clear line ({len(line)} characters): {line}"
    return line


def _warm_imports() -> None:
    # Import what the readers import lazily, so that the peak measured is the file's, not the
    # libraries' first load.
    import h5py  # noqa: F401
    import pyabf  # noqa: F401
    import pynwb  # noqa: F401


def test_corpus_has_every_kind_of_bad_input():
    names = _case_names()
    assert len(names) >= 50  # the hardening brief: at least 50 cases
    for prefix in ("abf1-cut-", "abf2-cut-", "abf1-", "abf2-", "nwb-", "hdf5-", "text-", "path-"):
        assert any(n.startswith(prefix) for n in names), prefix
    assert sum(c.huge for c in _corpus()) >= 8
    assert {c.fault for c in _corpus()} >= {"unreadable"}


#: Cases that still fail, each with the defect it shows; strict, so a fix must remove its entry.
KNOWN_DEFECTS: dict[str, str] = {}


def _params(names):
    return [
        pytest.param(n, marks=pytest.mark.xfail(reason=KNOWN_DEFECTS[n], strict=True)) if n in KNOWN_DEFECTS else n
        for n in names
    ]


@pytest.mark.parametrize("name", _params(_case_names()))
def test_case_is_refused_cleanly(name, monkeypatch):
    case = _case(name)
    before = _listing(case)
    kept = {p: Path(p).read_bytes() for p in case.keep}
    if case.huge:
        _warm_imports()
    try:
        with _fault(case, monkeypatch):
            status, _, stderr, peak = run_in_process(case.argv, huge=case.huge)
        check_refusal(case, status, stderr)
        for path in case.outputs:
            assert not Path(path).exists(), f"{case.name}: {path} was left behind"
        for path, content in kept.items():
            assert Path(path).read_bytes() == content, f"{case.name}: {path} was changed"
        assert _listing(case) == before, f"{case.name}: files appeared or vanished"
    finally:  # a failed case must not spoil the next ones, which share the seed files
        for path in case.outputs:
            with contextlib.suppress(OSError):
                os.remove(path)
        for path, content in kept.items():
            Path(path).write_bytes(content)
    if case.huge:
        assert peak < HUGE_PEAK_BYTES, f"{case.name}: {peak / 2**20:.0f} MiB allocated ({case.why})"


def _cap_child() -> None:
    # A header-sized allocation in the child fails at once instead of exhausting the machine.
    resource.setrlimit(resource.RLIMIT_AS, (CHILD_ADDRESS_SPACE, resource.getrlimit(resource.RLIMIT_AS)[1]))


#: A few cases through a real process: stderr as a user sees it, with any library warnings.
SUBPROCESS_CASES = ("abf2-cut-in-ADC", "nwb-rate-zero", "text-nan", "path-is-a-folder", "abf1-huge-sweep-count")


@pytest.mark.parametrize("name", _params(SUBPROCESS_CASES))
def test_case_in_a_real_process(name):
    case = _case(name)
    env = dict(os.environ, PYTHONPATH=str(REPO))
    proc = subprocess.run(
        [sys.executable, "-m", "app", *case.argv], capture_output=True, text=True, env=env,
        timeout=120, cwd=REPO, preexec_fn=_cap_child,
    )
    check_refusal(case, proc.returncode, proc.stderr)
    assert proc.stdout == ""
