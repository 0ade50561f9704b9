"""Batch analysis: finding recordings, local pools and Dask give what a sequential analysis gives."""

from __future__ import annotations

import os
import threading

import numpy as np
import pytest

from analysis.batch import BatchCancelled, ClusterError, analyze_file, find_recordings, make_tasks, run_batch, save_batch
from analysis.errors import InputError
from tests.batch_recordings import beating_trace, write_abf1, write_text


def _touch(path, text="x"):
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text)
    return path


# -- finding recordings ----------------------------------------------------------------------
def test_find_recordings_walks_folders_sorted_and_skips_hidden_and_other_extensions(tmp_path):
    for rel in ["b/cell2.abf", "a/cell1.ABF", "a/z/cell0.abf", "a/notes.docx", "a/.cache/x.abf", "._cell9.abf", "c.abf"]:
        _touch(tmp_path / rel)
    found = find_recordings([tmp_path], extensions=[".abf"])
    rel = [os.path.relpath(p, tmp_path) for p in found]
    # Order by path components, case kept, hidden files and folders left out (common practice, no source).
    assert rel == ["a/cell1.ABF", "a/z/cell0.abf", "b/cell2.abf", "c.abf"]


def test_find_recordings_keeps_source_order_and_drops_duplicates(tmp_path):
    for rel in ["x/1.abf", "x/2.abf", "y/3.abf"]:
        _touch(tmp_path / rel)
    found = find_recordings(
        [tmp_path / "y", tmp_path / "x" / "2.abf", str(tmp_path / "**" / "*.abf")], extensions=["abf"],
    )
    rel = [os.path.relpath(p, tmp_path) for p in found]
    assert rel == ["y/3.abf", "x/2.abf", "x/1.abf"]


def test_find_recordings_excludes_output_files(tmp_path):
    _touch(tmp_path / "cell.csv")
    _touch(tmp_path / "beats.csv")
    found = find_recordings([tmp_path], extensions=[".csv"], exclude=[tmp_path / "beats.csv"])
    assert [os.path.basename(p) for p in found] == ["cell.csv"]


def test_find_recordings_takes_a_named_file_whatever_its_extension(tmp_path):
    f = _touch(tmp_path / "odd.dat")
    assert find_recordings([f], extensions=[".abf"]) == [str(f)]


@pytest.mark.parametrize("source, words", [
    ("missing-folder", "no such file or folder"),
    ("*.nothing-here", "the pattern matches no file"),
])
def test_find_recordings_bad_source_is_one_clear_line(tmp_path, monkeypatch, source, words):
    monkeypatch.chdir(tmp_path)
    with pytest.raises(InputError) as info:
        find_recordings([source], extensions=[".abf"])
    assert words in info.value.one_line() and source in info.value.one_line()


def test_find_recordings_empty_folder_says_which_extensions(tmp_path):
    _touch(tmp_path / "readme.txt")
    with pytest.raises(InputError) as info:
        find_recordings([tmp_path], extensions=[".abf", ".nwb"])
    assert "no recordings found" in str(info.value) and ".abf, .nwb" in str(info.value)


def test_find_recordings_uses_the_registered_extensions_and_skips_upstroke_outputs(tmp_path):
    from analysis.readers import supported_extensions
    from analysis.table import CSV_COLUMNS

    v, _ = beating_trace(1.0, 2000.0)
    write_text(tmp_path / "cell.csv", v, 2000.0)
    (tmp_path / "beats.csv").write_text(",".join(CSV_COLUMNS) + "\n")  # an earlier batch's output
    _touch(tmp_path / "notes.md")
    found = find_recordings([tmp_path])
    assert ".csv" in supported_extensions()  # the text reader's own registration
    assert [os.path.basename(p) for p in found] == ["cell.csv"]


# -- analysing ---------------------------------------------------------------------------------
FS_HZ = 5_000.0


@pytest.fixture(scope="module")
def study(tmp_path_factory):
    """Five recordings, the third of them broken; the beat counts known by construction."""
    folder = tmp_path_factory.mktemp("study")
    truth = {}
    for i, name in enumerate(["a-cell01.abf", "b-cell02.abf", "d-cell04.csv", "e-cell05.abf"]):
        v, t_up = beating_trace(4.0 + i, FS_HZ, cl_ms=420.0 + 30 * i, seed=i)
        path = (write_abf1 if name.endswith(".abf") else write_text)(folder / name, v, FS_HZ)
        truth[str(path)] = t_up
    (folder / "c-cell03.abf").write_bytes(b"ABF " + b"\0" * 60)  # cut short inside its header
    paths = find_recordings([folder])
    return paths, truth


def _sequential(paths):
    """What `upstroke analyze` computes for each file, in order (None for a bad file)."""
    from analysis import analyze, open_recording

    out = []
    for p in paths:
        try:
            out.append(analyze(open_recording(p), None, label=p).beats)
        except InputError:
            out.append(None)
    return out


def _same_columns(batch_table, reference):
    for name in reference.names:
        a, b = batch_table[name], reference[name]
        if a.dtype.kind == "f":
            assert np.array_equal(a, b, equal_nan=True), name
        else:
            assert np.array_equal(a, b), name


def test_two_workers_give_the_sequential_results_in_input_order(study):
    paths, truth = study
    result = run_batch(make_tasks(paths), workers=2)
    assert result.where == "2 local processes"
    assert [o.path for o in result.outcomes] == paths
    reference = _sequential(paths)
    for outcome, ref in zip(result.outcomes, reference):
        if ref is None:
            assert not outcome.ok
            continue
        assert outcome.ok, outcome.reason
        _same_columns(outcome.beats(), ref)
        # Every constructed upstroke is found (construction of the trace; its steepest point
        # lies 2 ms after the cycle start).
        t_up = truth[outcome.path]
        assert len(outcome.beats()) == len(t_up)
        assert np.allclose(outcome.beats()["t_upstroke_s"], t_up + 0.002, atol=0.5e-3)


def test_a_failing_file_in_the_middle_is_reported_and_the_rest_saved(study, tmp_path):
    from analysis.results import load_results
    from analysis.table import BeatTable

    paths, _ = study
    result = run_batch(make_tasks(paths), workers=1)
    bad = [o for o in result.outcomes if not o.ok]
    assert [o.path for o in bad] == [paths[2]]
    assert bad[0].reason.startswith(paths[2] + ": ") and "header" in bad[0].reason and not bad[0].fault
    saved = save_batch(result, out=tmp_path / "r.h5", csv=tmp_path / "b.csv", summary_csv=tmp_path / "s.csv")
    good = [p for i, p in enumerate(paths) if i != 2]
    assert saved.n_files == 4
    content = load_results(tmp_path / "r.h5")
    assert [r.label for r in content.recordings] == good
    ref = [t for t in _sequential(paths) if t is not None]
    assert (tmp_path / "b.csv").read_text() == BeatTable.concat(ref).to_csv()
    summary_rows = (tmp_path / "s.csv").read_text().splitlines()[1:]
    assert [row.split(",")[0] for row in summary_rows] == good  # one summary row per file here


def test_save_batch_adds_to_an_existing_results_file_and_replaces_the_same_source(study, tmp_path):
    from analysis.results import load_results

    paths, _ = study
    out = tmp_path / "r.h5"
    save_batch(run_batch(make_tasks(paths[:2]), workers=1), out=out)
    save_batch(run_batch(make_tasks([paths[1], paths[3]]), workers=1), out=out)
    assert [r.label for r in load_results(out).recordings] == [paths[0], paths[1], paths[3]]


def test_cancel_between_files_stops_the_batch_and_writes_nothing(study, tmp_path):
    paths, _ = study
    flag = threading.Event()
    seen = []

    def on_done(outcome, done, total):
        seen.append(outcome.path)
        flag.set()

    with pytest.raises(BatchCancelled) as info:
        run_batch(make_tasks(paths), workers=1, cancel=flag, on_done=on_done)
    assert seen == paths[:1] and info.value.done == 1 and info.value.total == len(paths)
    with pytest.raises(BatchCancelled):
        run_batch(make_tasks(paths), workers=2, cancel=flag)  # set before any file finished
    assert list(tmp_path.iterdir()) == []


def test_the_task_travels_as_plain_values_and_keeps_every_stored_field(study):
    import pickle  # only to prove the record can travel between processes; nothing is stored

    from analysis.batch._task import _PLAIN, _fields
    from analysis.batch import stored_from_outcome

    paths, _ = study
    outcome = analyze_file(make_tasks(paths[:1])[0])
    assert outcome.ok
    back = pickle.loads(pickle.dumps(outcome))
    stored = stored_from_outcome(back)
    assert set(_fields()) == set(_PLAIN) | {"beats", "decisions", "conditions", "summary", "ensembles"}
    assert stored.label == paths[0] and stored.beats.equals(outcome.beats())
    assert "samples" not in outcome.meta and all(isinstance(v, np.ndarray) for v in outcome.columns.values())


def test_scheduler_without_dask_says_what_to_install(study, monkeypatch):
    import sys

    monkeypatch.setitem(sys.modules, "dask.distributed", None)  # as if the extra were not installed
    with pytest.raises(ClusterError) as info:
        run_batch(make_tasks(study[0]), scheduler="tcp://127.0.0.1:8786")
    assert 'pip install "upstroke[cluster]"' in str(info.value)


def test_unreachable_scheduler_is_one_clear_line(study, monkeypatch):
    import analysis.batch._batch

    pytest.importorskip("dask.distributed")
    monkeypatch.setattr(analysis.batch._batch, "CONNECT_TIMEOUT_S", 0.5)
    with pytest.raises(ClusterError) as info:
        run_batch(make_tasks(study[0]), scheduler="tcp://127.0.0.1:9")
    assert "cannot reach the Dask scheduler at tcp://127.0.0.1:9" in str(info.value)


@pytest.mark.slow
def test_a_local_dask_cluster_gives_the_sequential_results(study):
    distributed = pytest.importorskip("dask.distributed")
    paths, _ = study
    reference = _sequential(paths)
    with distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1", dashboard_address=None,
    ) as cluster:
        result = run_batch(make_tasks(paths), scheduler=cluster.scheduler_address)
    assert result.where.startswith("tcp://127.0.0.1:")
    assert [o.path for o in result.outcomes] == paths
    for outcome, ref in zip(result.outcomes, reference):
        assert outcome.ok == (ref is not None)
        if ref is not None:
            _same_columns(outcome.beats(), ref)


def _blas_threads(_):
    return os.environ.get("OPENBLAS_NUM_THREADS"), os.environ.get("OMP_NUM_THREADS")


def test_pool_workers_run_single_threaded_linear_algebra(monkeypatch):
    import concurrent.futures as cf

    import analysis.batch._batch as batch

    monkeypatch.delenv("OPENBLAS_NUM_THREADS", raising=False)
    monkeypatch.setenv("OMP_NUM_THREADS", "3")  # a user's own choice is kept
    with batch._worker_environment():
        assert (os.environ["OPENBLAS_NUM_THREADS"], os.environ["OMP_NUM_THREADS"]) == ("1", "3")
    assert "OPENBLAS_NUM_THREADS" not in os.environ  # the caller's environment is restored
    pool = cf.ProcessPoolExecutor(1, mp_context=batch._pool_context())
    try:
        with batch._worker_environment():
            fut = pool.submit(_blas_threads, None)
        # The fork server may have started in an earlier test (and keeps its environment), so
        # only the value set for every worker is certain here.
        assert fut.result(timeout=120)[0] == "1"
    finally:
        pool.shutdown()


def test_a_worker_killed_mid_batch_is_reported_not_hung(study):
    psutil = pytest.importorskip("psutil")
    paths, _ = study

    def kill_workers(outcome, done, total):
        if done != 1:
            return
        for proc in psutil.Process().children(recursive=True):
            parent = proc.parent()
            if parent is not None and parent.pid != os.getpid() and "forkserver" in " ".join(parent.cmdline()):
                proc.kill()  # as the kernel's out-of-memory killer would

    many = paths * 3  # enough files that some are still waiting when the workers die
    result = run_batch(make_tasks(many), workers=2, on_done=kill_workers)
    assert [o.path for o in result.outcomes] == many
    died = [o for o in result.outcomes if o.fault]
    assert died and all("a worker process died while" in o.fault for o in died)
    assert all(o.ok or o.fault or o.error for o in result.outcomes)


def test_a_finished_task_travels_packed_and_arrives_unchanged():
    import pickle

    from analysis.batch import FileOutcome

    cols = {"file": np.array(["a.abf", "a.abf"], dtype=object), "sweep": np.array([0, 0]), "cl_ms": np.array([np.nan, 450.5]),
            "accepted": np.array([1, 0]), "flags": np.array(["", "noisy"], dtype=object), "peak_mV": np.array([20.0, 21.5])}
    summary = {"file": np.array(["a.abf"], dtype=object), "n_beats": np.array([2]), "cl_mean_ms": np.array([450.5])}
    sent = FileOutcome(0, "a.abf", columns=cols, meta={"summary": summary, "label": "a.abf"})
    got = pickle.loads(pickle.dumps(sent))  # pickle, as the process pool and Dask send it
    for mine, theirs in ((cols, got.columns), (summary, got.meta["summary"])):
        assert list(theirs) == list(mine)
        for name, values in mine.items():
            assert theirs[name].dtype == values.dtype
            assert np.array_equal(theirs[name], values, equal_nan=values.dtype.kind == "f")
    assert got.meta["label"] == "a.abf"
