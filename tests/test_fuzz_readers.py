"""A short, bounded run of the ABF and NWB reader fuzzer (``bench/fuzz_readers.py``) in CI.

Long runs belong in bench/ (``python bench/fuzz_readers.py -max_total_time=3600``). Here the
harness runs a fixed number of inputs with a fixed seed: coverage-guided with atheris where its
wheel installs (Linux), otherwise the harness's own seeded random-mutation loop, which tries the
same kinds of edits without coverage feedback. Either way every input must open as a recording
of finite samples or be refused with one line naming the file; a crash fails the test and leaves
the input that caused it in the test's temporary folder.
"""

from __future__ import annotations

import importlib.util
import os
import subprocess
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
HARNESS = REPO / "bench" / "fuzz_readers.py"
RUNS = 1000


def _run(args: list[str], cwd: Path) -> subprocess.CompletedProcess:
    env = dict(os.environ, PYTHONPATH=str(REPO))
    return subprocess.run([sys.executable, str(HARNESS), *args], cwd=cwd, env=env, capture_output=True,
                          text=True, timeout=600)


@pytest.mark.slow
def test_reader_fuzzer_finds_no_crash(tmp_path):
    if importlib.util.find_spec("atheris") is not None:
        proc = _run([f"-atheris_runs={RUNS}", "-seed=1", f"-artifact_prefix={tmp_path}/"], tmp_path)
        mode = "atheris"
    else:  # no atheris wheel for this platform: the seeded random loop, said plainly
        proc = _run(["--random", str(RUNS), "--seed", "1", "--crashes", str(tmp_path)], tmp_path)
        mode = "random mutation (atheris is not installed)"
    crashes = sorted(p.name for p in tmp_path.glob("*") if p.name.startswith(("crash-", "oom-", "timeout-")))
    assert proc.returncode == 0 and not crashes, f"{mode}: {crashes}\n{proc.stderr[-3000:]}"
    summary = [line for line in proc.stderr.splitlines() if line.startswith("fuzz_readers:")]
    assert summary, proc.stderr[-2000:]
    # Both kinds of answer were exercised: files that open and files that are refused.
    words = summary[-1].split()
    opened, refused = int(words[3].strip("(")), int(words[5])
    assert opened > 0 and refused > 0 and opened + refused >= RUNS, summary[-1]


def test_harness_replays_a_saved_input(tmp_path):
    """The random loop's inputs are plain bytes: the harness replays one without atheris."""
    sys.path.insert(0, str(HARNESS.parent))
    try:
        import fuzz_readers
    finally:
        sys.path.remove(str(HARNESS.parent))
    harness = fuzz_readers.Harness(fuzz_readers.make_seeds(tmp_path), tmp_path)
    harness(b"\x00")  # the first seed, unedited: it opens
    # The input that once opened a damaged ADC range as all-NaN samples is now refused.
    harness(b"\x00\x00{\xff\xf5")
    assert harness.opened >= 1 and harness.opened + harness.refused == 2
