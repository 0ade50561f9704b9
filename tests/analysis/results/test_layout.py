"""The schema-2 layout: many recordings, columns that differ between recordings, lazy reading,
other modules' groups kept, the recording identifier."""

from __future__ import annotations

import hashlib

import h5py
import numpy as np

from analysis.decisions import Decision, DecisionLog
from analysis.recording import recording_id
from analysis.results import ResultsFile, StoredRecording, load_results, save_results
from analysis.table import BeatTable


def _rec(i: int, n: int, extra: bool = False) -> StoredRecording:
    rng = np.random.default_rng(i)
    cols = {
        "file": [f"NL-{i:04d}.abf"] * n, "sweep": np.zeros(n, np.int64), "beat": np.arange(n),
        "t_upstroke_s": np.arange(n) * 0.45 + i * 1e-3, "accepted": np.ones(n, np.int64),
        "flags": ["noisy" if k % 3 == 0 else "" for k in range(n)], "cl_ms": rng.normal(450, 10, n),
    }
    if extra:
        cols["dad_mV"] = rng.normal(3, 1, n)
    sha = hashlib.sha256(f"recording {i}".encode()).hexdigest()
    decisions = DecisionLog([Decision(0, 1, 0.45, 0, f"bump {i}", "2026-01-02T03:04:05.000Z")]) if i % 7 == 0 else DecisionLog()
    return StoredRecording(
        source_path=f"/nowhere/NL-{i:04d}.abf", label=f"NL-{i:04d}.abf", sha256=sha, reader="abf",
        sampling_rate_hz=10_000.0, sweep_starts_s=(0.0,), sweep_lengths=(50_000,),
        settings_json='{"schema_version": 1}' if i % 2 else '{"schema_version": 1, "x": 2}', settings_schema=1,
        settings_hash="h%d" % (i % 2), beats=BeatTable(cols), decisions=decisions,
        summary={"file": np.array([f"NL-{i:04d}.abf"], dtype=object), "n_accepted": np.array([n])},
        ensembles=[(rng.normal(0, 1, 10 + i % 5), 10_000.0, -0.1)], warnings=tuple(f"w{k}" for k in range(i % 3)),
        provenance={"upstroke_version": "0.1", "analysed_at_utc": "2026-01-01T00:00:00.000Z"},
    )


def _same(a: StoredRecording, b: StoredRecording) -> None:
    assert a.beats.equals(b.beats)
    assert a.decisions == b.decisions and a.conditions == b.conditions and a.warnings == b.warnings
    assert list(a.summary) == list(b.summary)
    assert all(np.asarray(a.summary[k]).tolist() == np.asarray(b.summary[k]).tolist() for k in a.summary)
    assert len(a.ensembles) == len(b.ensembles)
    assert all(np.array_equal(x[0], y[0]) and x[1:] == y[1:] for x, y in zip(a.ensembles, b.ensembles))
    for name in ("label", "sha256", "settings_json", "settings_hash", "sweeps", "sweep_starts_s", "sweep_lengths", "provenance"):
        assert getattr(a, name) == getattr(b, name), name


def test_many_recordings_round_trip_lazily_in_any_order(tmp_path):
    # More recordings than one write block (256) and several read blocks (64); some with no beat.
    recs = [_rec(i, 0 if i % 50 == 3 else 3 + i % 9) for i in range(300)]
    path = tmp_path / "study.h5"
    save_results(path, recs)
    got = load_results(path, verify_sources=False)
    assert [r.label for r in got.recordings] == [r.label for r in recs]
    assert not any(r.loaded for r in got.recordings)  # opening read the index only
    for i in (299, 0, 150, 64, 63):
        _same(got.recordings[i], recs[i])
    # Read from the file a block at a time, but built only on use: the cost of a first use does
    # not grow with the number of recordings.
    assert not got.recordings[65].loaded and not got.recordings[200].loaded
    for a, b in zip(got.recordings, recs):
        _same(a, b)
    with h5py.File(path, "r") as f:
        index = f["index"]
        counts = index["beats_count"][()]
        assert counts.tolist() == [len(r.beats) for r in recs]
        assert index["beats_start"][()].tolist() == np.concatenate([[0], np.cumsum(counts)[:-1]]).tolist()
        assert f["beats/cl_ms"].shape == (int(counts.sum()),)
        assert f["settings/json"].shape == (2,)  # the distinct settings, stored once each


def test_columns_that_only_some_recordings_have_are_kept_for_those(tmp_path):
    recs = [_rec(0, 4), _rec(1, 5, extra=True), _rec(2, 3)]
    path = tmp_path / "mixed.h5"
    save_results(path, recs)
    got = load_results(path, verify_sources=False).recordings
    assert "dad_mV" not in got[0].beats and "dad_mV" in got[1].beats
    for a, b in zip(got, recs):
        _same(a, b)
    with h5py.File(path, "r") as f:
        dad = f["beats/dad_mV"][()]
        assert np.isnan(dad[:4]).all() and np.isnan(dad[9:]).all()  # NaN where a recording lacks the column


def test_other_top_level_groups_survive_a_rewrite(tmp_path):
    path = tmp_path / "study.h5"
    save_results(path, [_rec(0, 3)])
    with h5py.File(path, "r+") as f:
        g = f.create_group("study")
        g.create_dataset("cells", data=np.array(["NL-0417", "NL-0418"], dtype=object), dtype=h5py.string_dtype())
        g.attrs["version"] = 1
    content = load_results(path, verify_sources=False)
    save_results(path, ResultsFile(content.recordings + [_rec(1, 2)], content.default_settings_json))
    other = tmp_path / "elsewhere.h5"
    save_results(other, load_results(path, verify_sources=False))  # carried from the file it was read from
    for p in (path, other):
        with h5py.File(p, "r") as f:
            assert f["study/cells"].asstr()[()].tolist() == ["NL-0417", "NL-0418"] and f["study"].attrs["version"] == 1
            assert f["index/label"].shape == (2,)


def test_the_recording_identifier_is_the_sha256_prefix(tmp_path):
    src = tmp_path / "NL-0417.abf"
    src.write_bytes(b"samples" * 100)
    digest = hashlib.sha256(src.read_bytes()).hexdigest()  # hashlib (FIPS 180-4 SHA-256)
    assert recording_id(digest) == digest[:16] and recording_id(None) == ""
    r = _rec(0, 2)
    r.sha256 = digest
    save_results(tmp_path / "r.h5", [r])
    with h5py.File(tmp_path / "r.h5", "r") as f:
        assert f["index/id"].asstr()[0] == digest[:16]
