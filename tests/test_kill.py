"""kill -9 at random (seeded) moments of ``analyze --out``, of a results-file save and of the review's
autosave: the previous results and every confirmed review decision survive.

CONTRACT.md ("Results file"): saves are atomic, so a crash or kill mid-save leaves the previous file
intact; a failed command never leaves a partial or corrupt output behind. A review decision is
*confirmed* once the call that records it has returned: the results-file save, or the autosave
journal's write (``analysis.session.Journal``, which the app calls after every change,
offers at its next start (``pending_reviews``) and replays when the recording is opened again).
The children are this file run as a script.
"""

from __future__ import annotations

import os
import random
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

REPO = Path(__file__).resolve().parents[1]
SEED = 20261201
pytestmark = pytest.mark.slow


def _env(tmp_path: Path) -> dict[str, str]:
    return dict(os.environ, PYTHONPATH=str(REPO), UPSTROKE_CONFIG_DIR=str(tmp_path / "config"),
                QT_QPA_PLATFORM="offscreen")


def _start(args: list[str], tmp_path: Path) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, *args], cwd=tmp_path, env=_env(tmp_path), stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)


def _kill_after(proc: subprocess.Popen, delay_s: float) -> None:
    time.sleep(delay_s)
    if proc.poll() is None:
        proc.send_signal(signal.SIGKILL)
    proc.wait(timeout=60)


def _wait_for_line(proc: subprocess.Popen, word: str) -> None:
    line = proc.stdout.readline()
    assert line.startswith(word), (line, proc.stderr.read() if proc.poll() is not None else "")


def _kill_within_a_step(proc: subprocess.Popen, rng: random.Random, *, steps: int) -> list[int]:
    """Let the child confirm ``steps`` steps (one printed line each), then kill it at a random
    moment of a following step (the pace measured on the last step); returns what it confirmed."""
    confirmed, last = [], time.perf_counter()
    pace = 0.05
    for _ in range(steps):
        line = proc.stdout.readline()
        assert line, proc.stderr.read()
        confirmed.append(int(line.split()[1]))
        now = time.perf_counter()
        pace, last = now - last, now
    _kill_after(proc, rng.uniform(0.0, 1.5) * pace)
    confirmed += [int(line.split()[1]) for line in proc.stdout.read().splitlines() if line.strip()]
    return confirmed


def _temp_files(folder: Path) -> list[str]:
    return sorted(n for n in os.listdir(folder) if ".tmp" in n)


@pytest.fixture(scope="module")
def cell(tmp_path_factory) -> Path:
    """A synthetic cell long enough that analysis and saving take a noticeable part of a second."""
    from analysis.synthetic import preset, synthesize
    from analysis.synthetic import write_abf

    folder = tmp_path_factory.mktemp("kill")
    path = folder / "cell.abf"
    write_abf(synthesize(preset("nodal-like"), duration_s=20.0, fs_hz=10_000.0, seed=31, noise_mV=0.3).recording, path)
    return path


# -- analyze --out -----------------------------------------------------------------------------------
def test_kill_during_analyze_keeps_the_previous_results(cell, tmp_path):
    """8 kills spread over a whole run (start-up, analysis, writing the CSV and the results file)."""
    import h5py

    from analysis.session import Session

    out, csv = tmp_path / "results.h5", tmp_path / "beats.csv"
    args = ["-m", "app", "analyze", str(cell), "--out", str(out), "--csv", str(csv)]
    started = time.perf_counter()
    first = _start(args, tmp_path)
    assert first.wait(timeout=300) == 0, first.stderr.read()
    duration_s = time.perf_counter() - started  # only to spread the kill moments over a run
    previous, previous_csv = out.read_bytes(), csv.read_bytes()
    n_beats = len(Session.open(out).beats(Session.open(out).recordings[0]))
    rng = random.Random(SEED)
    outcomes = []
    for _ in range(8):
        proc = _start(args, tmp_path)
        _kill_after(proc, rng.uniform(0.3, 1.05) * duration_s)
        now = out.read_bytes()
        if now != previous:  # the kill came after the move into place: the new file is whole
            with h5py.File(out, "r"):
                pass
            assert len(Session.open(out).beats(Session.open(out).recordings[0])) == n_beats
            previous = now
            outcomes.append("new")
        else:
            outcomes.append("old")
        # The CSV is the old one or a whole new one (the same analysis gives the same bytes).
        assert csv.read_bytes() == previous_csv
    # The next run removes what the killed ones left (hidden temporary files) and succeeds.
    last = _start(args, tmp_path)
    assert last.wait(timeout=300) == 0, last.stderr.read()
    assert _temp_files(tmp_path) == []
    assert Session.open(out).recordings and outcomes.count("old") >= 1


# -- a results-file save -----------------------------------------------------------------------------
def _child_save(results: str) -> None:
    """Decision k rejects beat k mod n with the reason "kill test k"; save after each one and
    print it once the save has returned. Runs until killed, from where the last child stopped."""
    from analysis.session import Session

    session = Session.open(results)
    key = session.recordings[0]
    n = len(session.beats(key))
    k = _last_saved(Path(results)) + 1
    print("ready", flush=True)
    while True:
        session.reject(key, [k % n], f"kill test {k}")
        session.save(results)
        print(f"saved {k}", flush=True)
        k += 1


def _saved_state(results: Path) -> list[int | None]:
    """Per beat, the k of the decision on it in the saved file (None: never decided)."""
    from analysis.session import Session

    session = Session.open(results, verify_sources=False)
    reasons = [str(r) for r in session.beats(session.recordings[0])["reject_reason"]]
    return [int(r.rsplit(" ", 1)[1]) if r.startswith("kill test ") else None for r in reasons]


def _last_saved(results: Path) -> int:
    return max((k for k in _saved_state(results) if k is not None), default=-1)


def test_kill_during_save_keeps_every_confirmed_decision(cell, tmp_path):
    """8 kills while a session saves after every decision: the file always opens and holds
    exactly the decisions up to one k: every one whose save returned, perhaps the one being saved
    when the kill came (finished but not yet reported), never a part of a save."""
    results = tmp_path / "review.h5"
    ok = subprocess.run([sys.executable, "-m", "app", "analyze", str(cell), "--out", str(results)],
                        cwd=tmp_path, env=_env(tmp_path), capture_output=True, text=True, timeout=300)
    assert ok.returncode == 0, ok.stderr
    rng = random.Random(SEED + 1)
    previous = -1
    for run in range(8):
        proc = _start([__file__, "save", str(results)], tmp_path)
        _wait_for_line(proc, "ready")
        confirmed = _kill_within_a_step(proc, rng, steps=rng.randint(0, 3))
        assert proc.returncode == -signal.SIGKILL  # killed mid-review, not finished
        state = _saved_state(results)  # opens: the kill never leaves a broken results file
        last = max((k for k in state if k is not None), default=-1)
        reported = max(confirmed, default=previous)
        assert reported <= last <= reported + 1, (run, confirmed, last)
        n = len(state)
        for beat, k in enumerate(state):  # every beat holds its latest decision up to `last`
            latest = last - ((last - beat) % n)
            assert k == (latest if latest >= 0 else None), (run, beat, k, last)
        previous = last
    assert previous >= 4  # the kills landed while saves were going on


# -- the review's autosave ---------------------------------------------------------------------------
def _child_autosave(recording: str, folder: str) -> None:
    """Review beats one by one as the app does: decide, then write the journal."""
    from analysis.session import Session
    from analysis.session import Journal

    session = Session()
    key = session.add(recording)
    journal = Journal(recording, key, folder=Path(folder))
    print("ready", flush=True)
    for i in range(len(session.beats(key))):
        session.reject(key, [i], f"kill test {i}")
        journal.write(session)
        print(f"journal {i}", flush=True)


def test_kill_during_autosave_loses_no_confirmed_decision(cell, tmp_path):
    """8 kills during a review: opening the recording again finds the journal (the app restores
    it and says so) and replaying it brings back every confirmed decision."""
    from analysis.session import Session
    from analysis.session import Journal, pending_reviews

    folder = tmp_path / "autosave"
    rng = random.Random(SEED + 2)
    fresh = Session()
    key = fresh.add(str(cell))
    base = fresh.beats(key)
    for run in range(8):
        for stale in folder.glob("*.json") if folder.exists() else ():
            stale.unlink()
        proc = _start([__file__, "autosave", str(cell), str(folder)], tmp_path)
        _wait_for_line(proc, "ready")
        confirmed = _kill_within_a_step(proc, rng, steps=rng.randint(0, 6))
        journal = Journal(str(cell), key, folder=folder)
        if not confirmed and not journal.exists():
            continue  # killed before the first decision was written: nothing was confirmed
        assert journal.exists()  # what the app looks for when the recording is opened again
        # What the app offers at its next start: this recording's unsaved review.
        offered = pending_reviews(folder)
        assert [(p.origin, p.key) for p in offered] == [(os.path.abspath(cell), key)]
        assert offered[0].decisions >= len(confirmed)
        session = Session()
        assert session.add(str(cell)) == key
        report = journal.restore(session)
        assert report is not None and report.decisions >= len(confirmed)
        beats = session.beats(key)
        for i in confirmed:
            assert beats["accepted"][i] == 0 and beats["reject_reason"][i] == f"kill test {i}", (run, i)
        untouched = [i for i in range(len(beats)) if i > (max(confirmed) if confirmed else -1) + 1]
        assert np.array_equal(beats["accepted"][untouched], base["accepted"][untouched])


if __name__ == "__main__":
    mode, *rest = sys.argv[1:]
    sys.path.insert(0, str(REPO))
    {"save": _child_save, "autosave": _child_autosave}[mode](*rest)
