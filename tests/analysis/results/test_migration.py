"""Results files written by earlier versions still open, export the same tables, and convert.

``tests/data/results_v1.h5`` was written by the code of results schema 1 (one group per
recording) with ``tests/data/make_results_v1.py``; ``results_v1_beats.csv`` and
``results_v1_summary.csv`` are what that code's ``upstroke export`` wrote from it. Both are kept
unchanged: they are the reference these tests compare with.
"""

from __future__ import annotations

import csv
import io
import os
import shutil

import h5py
import numpy as np

from analysis.results import SCHEMA_VERSION, load_results
from analysis.session import Session

DATA = os.path.join(os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__)))), "data")
V1 = os.path.join(DATA, "results_v1.h5")


def _rows(text: str) -> list[dict[str, str]]:
    return list(csv.DictReader(io.StringIO(text)))


def _kept(name: str) -> list[dict[str, str]]:
    with open(os.path.join(DATA, name), encoding="utf-8", newline="") as fh:
        return _rows(fh.read())


#: Summary columns renamed since schema 1 (docs/results-format.md names the current ones).
RENAMED = {
    "n_accepted": "n_used", "steady_start_s": "suggested_window_start_s", "steady_end_s": "suggested_window_end_s",
    "steady_note": "suggested_window_note",
}


def _same_cells(got: list[dict[str, str]], want: list[dict[str, str]], *, skip: tuple[str, ...] = ()) -> None:
    # Every column the schema-1 export wrote, cell for cell, under its current name (newer
    # versions may add columns).
    assert len(got) == len(want)
    for g, w in zip(got, want):
        assert {k: g.get(RENAMED.get(k, k)) for k in w if k not in skip} == {k: v for k, v in w.items() if k not in skip}


def test_the_kept_file_is_schema_1():
    with h5py.File(V1, "r") as f:
        assert int(f.attrs["schema_version"]) == 1 and "recordings/000000/beats" in f


def test_a_schema_1_file_opens_and_exports_what_its_version_exported():
    session = Session.open(V1)
    assert [session.label(k) for k in session.recordings] == ["NL-0417-baseline.abf", "NL-0417-washout.abf"]
    a, b = session.recordings
    # The review decisions the kept file holds: two beats rejected by the user, one accepted.
    beats = session.beats(a)
    assert beats["accepted"][1:3].tolist() == [0, 0] and beats["reject_reason"][1] == "electrode bump"
    assert [c.name for c in session.conditions(a)] == ["baseline", "UP-113"]
    assert len(session.decisions(b)) == 1
    _same_cells(_rows(session.all_beats().to_csv()), _kept("results_v1_beats.csv"))
    from analysis.stats import summary_csv

    # settings_hash covers every settings field, and later versions add fields (with defaults
    # that keep the stored values' meaning): it is the hash of the settings as read now.
    got = _rows(summary_csv(session.summary_table()))
    # The cell type is now judged once per recording, on its baseline, and its rule says so.
    kept = _kept("results_v1_summary.csv")
    _same_cells(got, kept, skip=("settings_hash", "cell_type_rule"))
    assert {g["settings_hash"] for g in got} == {session.settings(a).short_hash()}
    assert [g["cell_type_rule"] for g in got] == [
        kept[0]["cell_type_rule"] + " (judged once, on baseline)"] * 2 + [kept[2]["cell_type_rule"] + " (judged once, on washout)"]  # its only condition
    # The ensemble beats the file holds survive the recomputed summaries (their sources are gone).
    assert [g["ensemble_n"] for g in got] == ["1", "3", "5"]


def test_saving_a_schema_1_file_writes_the_current_layout_with_the_same_content(tmp_path):
    copy = tmp_path / "study.h5"
    shutil.copyfile(V1, copy)
    old = Session.open(copy)
    old.save(copy)
    with h5py.File(copy, "r") as f:
        assert int(f.attrs["schema_version"]) == SCHEMA_VERSION == 2
        assert "recordings" not in f and f["index"]["label"].shape == (2,)
    new = Session.open(copy)
    v1 = Session.open(V1)
    for k_old, k_new in zip(v1.recordings, new.recordings):
        assert new.beats(k_new).equals(v1.beats(k_old))
        assert new.decisions(k_new) == v1.decisions(k_old)
        assert new.conditions(k_new) == v1.conditions(k_old)
        assert new.settings(k_new) == v1.settings(k_old)
        assert new.info(k_new) == v1.info(k_old)
    _same_cells(_rows(new.all_beats().to_csv()), _kept("results_v1_beats.csv"))


def test_schema_1_recordings_read_whole_and_equal_after_conversion(tmp_path):
    from analysis.results import save_results

    old = load_results(V1)
    out = tmp_path / "converted.h5"
    save_results(out, old)
    new = load_results(out)
    for r_old, r_new in zip(old.recordings, new.recordings):
        assert r_new.beats.equals(r_old.beats)
        assert r_new.decisions == r_old.decisions and r_new.conditions == r_old.conditions
        assert list(r_new.summary) == list(r_old.summary)
        for name in r_old.summary:
            a, b = np.asarray(r_old.summary[name]), np.asarray(r_new.summary[name])
            assert a.dtype.kind == b.dtype.kind and (a.tolist() == b.tolist() or np.allclose(a, b, equal_nan=True))
        assert [e[1:] for e in r_new.ensembles] == [e[1:] for e in r_old.ensembles]
        assert all(np.array_equal(x[0], y[0]) for x, y in zip(r_new.ensembles, r_old.ensembles))
