"""The HDF5 results file: round trip, refusal of bad files, atomic saves under kill -9."""

from __future__ import annotations

import hashlib
import math
import os
import signal
import subprocess
import sys
import textwrap

import h5py
import numpy as np
import pytest

from analysis.conditions import parse_condition
from analysis.decisions import Decision, DecisionLog
from analysis.errors import ResultsFileError
from analysis.results import FORMAT_NAME, SCHEMA_VERSION, ResultsFile, StoredRecording, load_results, provenance_now, save_results
from analysis.table import BeatTable


def _record(tmp_path, n=50, name="cell.abf") -> StoredRecording:
    src = tmp_path / name
    src.write_bytes(b"recorded samples " * 10)
    rng = np.random.default_rng(0)
    beats = BeatTable({
        "file": [name] * n, "sweep": np.zeros(n, int), "beat": np.arange(n), "t_upstroke_s": np.arange(n) * 0.8,
        "accepted": np.ones(n, int), "flags": ["no_diastole"] + ["ead;noisy"] * (n - 1),
        "condition": ["baseline"] * n, "cl_ms": np.r_[np.nan, rng.normal(800, 10, n - 1)],
        "reject_reason": ["é auto: clipped (flat at 10 mV)"] * n, "i_upstroke": np.arange(n) * 8000,
    })
    return StoredRecording(
        source_path=str(src), label=name, sha256=hashlib.sha256(src.read_bytes()).hexdigest(), reader="abf",
        channel=0, channel_name="Vm", units="mV", ljp_mV=-13.5, sweeps=(0,), sampling_rate_hz=10_000.0,
        sweep_starts_s=(0.0,), sweep_lengths=(400_000,), settings_json='{"schema_version": 1}', settings_schema=1,
        settings_hash="abc123", beats=beats,
        decisions=DecisionLog([Decision(0, 3, 2.4, 0, "bump", "2024-02-03T10:00:00.000Z"), Decision(0, 3, 2.4, -1, "", "t2", "undo")]),
        conditions=(parse_condition("baseline=0-60s"), parse_condition("drug=sweeps:2-end,steady=last20beats")),
        summary={"file": np.array([name], dtype=object), "n_used": np.array([49]), "cl_mean_ms": np.array([np.nan])},
        ensembles=[(np.linspace(-60, 20, 100), 10_000.0, -0.3)], warnings=("one", "two"), provenance=provenance_now(),
    )


def test_round_trip_is_exact(tmp_path):
    r = _record(tmp_path)
    path = tmp_path / "results.h5"
    save_results(path, ResultsFile([r, _record(tmp_path, 3, "other.abf")], '{"x": 1}'))
    got = load_results(path)
    assert got.open_warnings == []
    assert got.default_settings_json == '{"x": 1}'
    g = got.recordings[0]
    assert g.beats.equals(r.beats)
    assert g.beats["i_upstroke"].dtype == np.int64 and g.beats["flags"].dtype == object
    assert g.decisions == r.decisions
    assert g.conditions == r.conditions and math.isinf(g.conditions[1].end)
    assert g.settings_json == r.settings_json and g.settings_hash == "abc123"
    for field in ("label", "sha256", "reader", "channel", "channel_name", "ljp_mV", "sweeps", "sampling_rate_hz",
                  "sweep_starts_s", "sweep_lengths", "warnings", "provenance"):
        assert getattr(g, field) == getattr(r, field), field
    assert list(g.summary) == list(r.summary) and np.isnan(g.summary["cl_mean_ms"][0])
    assert np.array_equal(g.ensembles[0][0], r.ensembles[0][0]) and g.ensembles[0][1:] == (10_000.0, -0.3)
    assert [x.label for x in got.recordings] == ["cell.abf", "other.abf"]


def test_layout_is_readable_with_plain_h5py(tmp_path):
    # The documented layout (docs/results-format.md), read without Upstroke: h5py alone.
    r = _record(tmp_path)
    path = tmp_path / "results.h5"
    save_results(path, [r])
    with h5py.File(path, "r") as f:
        assert f.attrs["format"] == FORMAT_NAME and f.attrs["schema_version"] == SCHEMA_VERSION
        index = f["index"]
        assert index["source_relpath"].asstr()[0] == "cell.abf"
        assert index["id"].asstr()[0] == r.sha256[:16]  # first 16 hex digits of the SHA-256
        assert index["beats_start"][0] == 0 and index["beats_count"][0] == 50
        assert f["beats/cl_ms"].dtype == np.float64
        assert h5py.check_string_dtype(f["beats/flags"].dtype).encoding == "utf-8"
        assert f["beats/reject_reason"].asstr()[0].startswith("é")
        assert [c for c in f["beats"].attrs["columns"]] == r.beats.names
        assert f["decisions/accepted"][()].tolist() == [0, -1]
        assert f["settings/json"].asstr()[index["settings_row"][0]] == '{"schema_version": 1}'


def test_same_content_gives_identical_datasets(tmp_path):
    r = _record(tmp_path)
    a, b = tmp_path / "a.h5", tmp_path / "b.h5"
    save_results(a, [r])
    save_results(b, [r])

    def dump(path):
        out = {}
        with h5py.File(path, "r") as f:
            def visit(name, obj):
                attrs = {k: np.asarray(v).tolist() for k, v in obj.attrs.items()}
                data = np.asarray(obj[()]).tolist() if isinstance(obj, h5py.Dataset) else None
                out[name] = (repr(attrs), repr(data))
            f.visititems(visit)
        return out

    assert dump(a) == dump(b)


def test_moved_sources_are_found_and_changed_sources_warned(tmp_path):
    r = _record(tmp_path)
    path = tmp_path / "results.h5"
    save_results(path, [r])
    (tmp_path / "cell.abf").write_bytes(b"something else")
    got = load_results(path)
    assert len(got.recordings) == 1
    assert any("has changed since it was analysed" in w for w in got.open_warnings)
    os.remove(tmp_path / "cell.abf")
    got = load_results(path)
    assert any("source recording is missing" in w for w in got.open_warnings)
    assert got.recordings[0].beats.equals(r.beats)  # the results still open


@pytest.mark.parametrize("kind", ["truncated", "garbage", "empty", "foreign", "newer", "no_version"])
def test_bad_files_are_refused_with_one_line(tmp_path, kind):
    good = tmp_path / "good.h5"
    save_results(good, [_record(tmp_path)])
    bad = tmp_path / "bad.h5"
    data = good.read_bytes()
    if kind == "truncated":
        bad.write_bytes(data[: len(data) // 2])
    elif kind == "garbage":
        bad.write_bytes(data[:2048] + bytes(range(256)) * 64 + data[2048 + 256 * 64:])
    elif kind == "empty":
        bad.write_bytes(b"")
    elif kind == "foreign":
        with h5py.File(bad, "w") as f:
            f["x"] = np.arange(3)
    else:
        bad.write_bytes(data)
        with h5py.File(bad, "a") as f:
            if kind == "newer":
                f.attrs["schema_version"] = SCHEMA_VERSION + 1
            else:
                del f.attrs["schema_version"]
    with pytest.raises(ResultsFileError) as err:
        load_results(bad)
    line = err.value.one_line()
    assert "\n" not in line and str(bad) in line
    expected = {
        "truncated": "not a readable HDF5 file", "empty": "not a readable HDF5 file",
        "foreign": "not an Upstroke results file", "newer": "newer Upstroke",
        "no_version": "no valid results schema version",
    }.get(kind)
    if expected:
        assert expected in line
    else:
        assert "HDF5" in line or "damaged" in line


def test_a_failed_save_leaves_the_previous_file(tmp_path, monkeypatch):
    import analysis.results._store as store

    path = tmp_path / "results.h5"
    save_results(path, [_record(tmp_path)])
    before = path.read_bytes()

    def boom(*args, **kwargs):
        raise RuntimeError("disk on fire")

    monkeypatch.setattr(store, "write_v2", boom)
    with pytest.raises(RuntimeError):
        save_results(path, [_record(tmp_path)])
    assert path.read_bytes() == before
    assert sorted(os.listdir(tmp_path)) == ["cell.abf", "results.h5"]


_CHILD = textwrap.dedent(
    """
    import os, sys, time
    import numpy as np
    sys.path.insert(0, {repo!r})
    import analysis.results._layout as layout
    import analysis.results._atomic as atomic
    from analysis.table import BeatTable
    from analysis.results._store import StoredRecording, save_results

    stop_after = int(sys.argv[2])
    count = [0]
    real_write = layout._Table._append_column

    def write_column(self, *args):
        real_write(self, *args)
        count[0] += 1
        print("column", count[0], flush=True)
        if count[0] == stop_after:
            time.sleep(60)

    real_replace = os.replace

    def replace(a, b):
        print("replace", flush=True)
        if stop_after < 0:
            time.sleep(60)
        real_replace(a, b)

    layout._Table._append_column = write_column
    atomic.os.replace = replace
    n = 200_000
    rng = np.random.default_rng(1)
    beats = BeatTable({{"sweep": np.zeros(n, int), "t_upstroke_s": np.arange(n) * 0.5, "cl_ms": rng.normal(500, 5, n),
                        "flags": ["noisy"] * n}})
    rec = StoredRecording(source_path="mem", label="big", beats=beats)
    save_results(sys.argv[1], [rec])
    print("done", flush=True)
    """
)


@pytest.mark.slow
@pytest.mark.parametrize("moment", [1, 3, 8, -1])
def test_kill_during_save_keeps_the_previous_file(tmp_path, moment):
    # kill -9 at several moments of a save: after the 1st, 3rd and 8th dataset, and just before
    # the final rename (moment -1). The previous file must stay byte-identical and open.
    path = tmp_path / "results.h5"
    save_results(path, [_record(tmp_path)])
    before = hashlib.sha256(path.read_bytes()).hexdigest()
    repo = os.path.dirname(os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__)))))
    script = tmp_path / "child.py"
    script.write_text(_CHILD.format(repo=repo))
    proc = subprocess.Popen([sys.executable, str(script), str(path), str(moment)], stdout=subprocess.PIPE, text=True)
    want = "replace" if moment < 0 else f"column {moment}"
    try:
        for line in proc.stdout:
            if line.strip() == want:
                break
        else:
            pytest.fail("the child ended before the moment to kill it")
        os.kill(proc.pid, signal.SIGKILL)
    finally:
        proc.wait(timeout=30)
    assert proc.returncode == -signal.SIGKILL
    assert hashlib.sha256(path.read_bytes()).hexdigest() == before
    assert load_results(path).recordings[0].label == "cell.abf"
    leftovers = [n for n in os.listdir(tmp_path) if n.startswith(".results.h5.tmp-")]
    assert len(leftovers) == 1  # the killed save's temporary file...
    save_results(path, [_record(tmp_path)])
    assert not [n for n in os.listdir(tmp_path) if n.startswith(".results.h5.tmp-")]  # ...goes with the next save
