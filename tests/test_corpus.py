"""Every case of the bad-input corpus through the command line: exit 2, one clear line, no traceback,
nothing written, and no memory allocated on a header's word before it is checked.

The contract (CONTRACT.md, "Exit status"): exit 2 with one line on stderr naming the file, what is
wrong and what to do; a failed command never leaves a partial output file behind and never
overwrites a good one. The cases are built by ``tests/corpus/make_corpus.py``.
"""

from __future__ import annotations

import atexit
import contextlib
import functools
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import warnings
from pathlib import Path

import pytest

from tests.corpus.checks import HUGE_PEAK_BYTES, check_refusal, fault, run_in_process
from tests.corpus.make_corpus import Case, build_corpus

REPO = Path(__file__).resolve().parents[1]
#: Address space of a command run in a child process (Python, numpy, h5py and pynwb take ~1.5 GiB).
CHILD_ADDRESS_SPACE = 4 * 2**30


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


def _listing(case: Case) -> dict[Path, set[str]]:
    folders = {Path(p).parent for p in (case.blame, *case.files, *case.outputs, *case.keep)}
    return {f: set(os.listdir(f)) for f in folders if f.is_dir()}


def _warm_imports() -> None:
    # Import what the readers import lazily, so that the peak measured is the file's, not the
    # libraries' first load.
    import h5py  # noqa: F401
    import pyabf  # noqa: F401
    import pynwb  # noqa: F401


def test_corpus_has_every_kind_of_bad_input():
    names = _case_names()
    assert len(names) >= 50  # the hardening brief: at least 50 cases
    for prefix in ("abf1-cut-", "abf2-cut-", "abf1-", "abf2-", "nwb-", "hdf5-", "text-", "settings-",
                   "results-", "path-", "save-", "batch-", "gui-"):
        assert any(n.startswith(prefix) for n in names), prefix
    assert sum(c.huge for c in _corpus()) >= 8
    assert {c.fault for c in _corpus()} >= {"unreadable", "enospc"}
    assert {c.argv[0] for c in _corpus()} >= {"info", "analyze", "export", "batch", "gui"}


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
        if "subprocess" in case.tags:  # the desktop app: its own process, as a user starts it
            proc = _run_child(case)
            status, stderr, peak = proc.returncode, proc.stderr, 0
        else:
            with fault(case, monkeypatch):
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


def _run_child(case: Case) -> subprocess.CompletedProcess:
    env = dict(os.environ, PYTHONPATH=str(REPO), QT_QPA_PLATFORM="offscreen", **dict(case.env))
    return subprocess.run(
        [sys.executable, "-m", "app", *case.argv], capture_output=True, text=True, env=env,
        timeout=120, cwd=REPO, preexec_fn=_cap_child,
    )


@pytest.mark.parametrize("name", _params(SUBPROCESS_CASES))
def test_case_in_a_real_process(name):
    case = _case(name)
    proc = _run_child(case)
    check_refusal(case, proc.returncode, proc.stderr)
    assert proc.stdout == ""
