"""The same input and settings give the same outputs on every run: identical CSV bytes and identical
HDF5 datasets and attributes, from separate processes with different hash seeds.

The only stored values that may differ are the clock readings the results-file layout documents
(``docs/results-format.md``): when a recording was analysed (``provenance/analysed_at_utc``)
and when each review decision was made (``decisions/time_utc``).
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

REPO = Path(__file__).resolve().parents[1]
#: Stored values that read a clock (docs/results-format.md).
CLOCK_FIELDS = ("analysed_at_utc", "time_utc")


@pytest.fixture(scope="module")
def recordings(tmp_path_factory) -> Path:
    """Two synthetic cells with noise, hum, drift, an artefact and a pause (ABF 1 and NWB)."""
    from analysis.synthetic import Artefact, Pause, preset, synthesize
    from analysis.synthetic import write_abf, write_nwb

    folder = tmp_path_factory.mktemp("determinism")
    a = synthesize(preset("nodal-like"), duration_s=5.0, fs_hz=10_000.0, seed=21, noise_mV=0.3, hum_mV=0.2,
                   drift_mV_per_min=2.0, artefacts=[Artefact(t_s=2.3)], pauses=[Pause(beat=5)])
    b = synthesize(preset("purkinje-like"), duration_s=3.0, fs_hz=20_000.0, seed=22, noise_mV=0.2, n_sweeps=2)
    write_abf(a.recording, folder / "cell-a.abf")
    write_nwb(b.recording, folder / "cell-b.nwb")
    (folder / "settings.toml").write_text(
        "[measurement]\ntop_method = \"dvdt_fraction\"\napd_percent = [30, 50, 90]\n", encoding="utf-8",
    )
    return folder


def _run(args: list[str], cwd: Path, hash_seed: str) -> None:
    env = dict(os.environ, PYTHONPATH=str(REPO), PYTHONHASHSEED=hash_seed)
    proc = subprocess.run([sys.executable, "-m", "app", *args], cwd=cwd, env=env, capture_output=True,
                          text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr


def _contents(path: Path) -> dict[str, object]:
    """Every dataset's values and every attribute of an HDF5 file, by path, without clock readings."""
    import h5py

    out: dict[str, object] = {}

    def attrs(name: str, obj) -> None:
        for key, value in obj.attrs.items():
            if key not in CLOCK_FIELDS:
                out[f"{name}@{key}"] = value

    def visit(name: str, obj) -> None:
        attrs(name, obj)
        if isinstance(obj, h5py.Dataset) and name.rsplit("/", 1)[-1] not in CLOCK_FIELDS:
            out[name] = (obj.dtype.str, obj.shape, obj[()])

    with h5py.File(path, "r") as f:
        attrs("/", f)
        f.visititems(visit)
    return out


def _same(a, b) -> bool:
    if isinstance(a, tuple):
        return len(a) == len(b) and all(_same(x, y) for x, y in zip(a, b))
    a, b = np.asarray(a), np.asarray(b)
    if a.dtype.kind == "f":
        return a.shape == b.shape and np.array_equal(a, b, equal_nan=True) and a.tobytes() == b.tobytes()
    return a.shape == b.shape and bool(np.all(a == b))


def _assert_same_h5(first: Path, second: Path) -> None:
    a, b = _contents(first), _contents(second)
    assert sorted(a) == sorted(b)  # the same groups, datasets and attributes
    differ = [name for name in a if not _same(a[name], b[name])]
    assert not differ, f"differ between runs: {differ[:10]}"
    assert len(a) > 50  # the comparison saw a whole results file, not an empty one


@pytest.mark.slow
def test_analyze_gives_identical_outputs_on_every_run(recordings):
    outputs = []
    for run, hash_seed in (("1", "1"), ("2", "4242")):
        args = ["analyze", "cell-a.abf", "cell-b.nwb", "--settings", "settings.toml",
                "--condition", "baseline=0-2.5s", "--condition", "drug=2.5s-end",
                "--out", f"run{run}.h5", "--csv", f"run{run}.csv", "--summary-csv", f"run{run}-summary.csv"]
        _run(args, recordings, hash_seed)
        outputs.append(run)
    for suffix in (".csv", "-summary.csv"):
        first = (recordings / f"run1{suffix}").read_bytes()
        assert first == (recordings / f"run2{suffix}").read_bytes()  # identical bytes
        assert first.count(b"\n") > 3
    _assert_same_h5(recordings / "run1.h5", recordings / "run2.h5")


@pytest.mark.slow
def test_batch_with_workers_gives_what_one_process_gives(recordings):
    """Parallel workers finish in any order; the outputs must not show it."""
    _run(["batch", "cell-a.abf", "cell-b.nwb", "--settings", "settings.toml", "--out", "b1.h5",
          "--csv", "b1.csv", "--workers", "1", "--quiet"], recordings, "7")
    _run(["batch", "cell-a.abf", "cell-b.nwb", "--settings", "settings.toml", "--out", "b2.h5",
          "--csv", "b2.csv", "--workers", "2", "--quiet"], recordings, "8")
    assert (recordings / "b1.csv").read_bytes() == (recordings / "b2.csv").read_bytes()
    _assert_same_h5(recordings / "b1.h5", recordings / "b2.h5")


def test_export_reproduces_the_same_bytes_twice(recordings, tmp_path):
    """In-process: two exports of one results file, and two saves of one session, are identical."""
    from analysis.session import Session
    from app.cli import main

    assert main(["analyze", str(recordings / "cell-a.abf"), "--out", str(tmp_path / "r.h5")]) == 0
    assert main(["export", str(tmp_path / "r.h5"), "--csv", str(tmp_path / "e1.csv"),
                 "--summary-csv", str(tmp_path / "s1.csv")]) == 0
    assert main(["export", str(tmp_path / "r.h5"), "--csv", str(tmp_path / "e2.csv"),
                 "--summary-csv", str(tmp_path / "s2.csv")]) == 0
    assert (tmp_path / "e1.csv").read_bytes() == (tmp_path / "e2.csv").read_bytes()
    assert (tmp_path / "s1.csv").read_bytes() == (tmp_path / "s2.csv").read_bytes()
    session = Session.open(tmp_path / "r.h5")
    session.save(tmp_path / "again1.h5")
    Session.open(tmp_path / "again1.h5").save(tmp_path / "again2.h5")
    _assert_same_h5(tmp_path / "again1.h5", tmp_path / "again2.h5")


@pytest.mark.slow
def test_reproducible_mode_gives_identical_results_file_bytes(recordings):
    """SOURCE_DATE_EPOCH (reproducible-builds.org's specification) fixes every clock reading: two
    runs, in separate processes with different hash seeds, write byte-identical results files."""
    import h5py

    for run, hash_seed in (("1", "3"), ("2", "977")):
        args = ["analyze", "cell-a.abf", "cell-b.nwb", "--settings", "settings.toml",
                "--condition", "baseline=0-2.5s", "--out", f"repro{run}.h5"]
        env_seed = dict(os.environ, SOURCE_DATE_EPOCH="1767225600")
        proc = subprocess.run([sys.executable, "-m", "app", *args], cwd=recordings, capture_output=True, text=True,
                              timeout=300, env=dict(env_seed, PYTHONPATH=str(REPO), PYTHONHASHSEED=hash_seed))
        assert proc.returncode == 0, proc.stderr
    first, second = (recordings / "repro1.h5").read_bytes(), (recordings / "repro2.h5").read_bytes()
    assert len(first) > 10_000 and first == second
    with h5py.File(recordings / "repro1.h5", "r") as f:
        stamps = {f["recordings"][k]["provenance"].attrs["analysed_at_utc"] for k in f["recordings"]}
    assert stamps == {"2026-01-01T00:00:00.000Z"}  # 1767225600 s after 1970-01-01 UTC (POSIX time)


def test_a_malformed_source_date_epoch_is_refused_in_one_line(monkeypatch):
    from analysis.decisions import now_utc
    from analysis.errors import InputError

    monkeypatch.setenv("SOURCE_DATE_EPOCH", "yesterday")
    with pytest.raises(InputError, match=r"SOURCE_DATE_EPOCH='yesterday' is not a whole number"):
        now_utc()
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "0")
    assert now_utc() == "1970-01-01T00:00:00.000Z"  # the POSIX epoch
