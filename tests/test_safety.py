"""Stored content is data, never code: no pickle or eval anywhere, opaque HDF5 types refused, stored
texts length-checked, and stored source paths treated as untrusted (shown, never written to).

A results file travels between colleagues and machines; opening one must not run anything it
holds, allocate what it declares, or write where it points.
"""

from __future__ import annotations

import io
import os
import shutil
import tokenize
from pathlib import Path

import numpy as np
import pytest

from analysis.errors import ResultsFileError

REPO = Path(__file__).resolve().parents[1]
#: Names that load or run code from data: Python's object serialisers and its code evaluators.
FORBIDDEN_NAMES = {"pickle", "cPickle", "_pickle", "cloudpickle", "dill", "shelve", "marshal", "eval", "exec"}
#: Files allowed one of them, with the reason.
ALLOWED = {
    # It checks that a batch task's record can cross a process boundary, as multiprocessing and
    # Dask pickle it in transit; nothing pickled is ever stored or read back from a file.
    ("tests/analysis/batch/test_batch.py", "pickle"),
}
SKIP_DIRS = {".git", ".venv", "venv", "build", "dist", "__pycache__", ".hypothesis", ".pytest_cache"}


def _python_files() -> list[Path]:
    out = []
    for root, dirs, files in os.walk(REPO):
        dirs[:] = [d for d in dirs if d not in SKIP_DIRS and not d.endswith(".egg-info")]
        out.extend(Path(root) / f for f in files if f.endswith(".py"))
    return sorted(out)


def _unsafe_uses(path: Path) -> list[str]:
    """Code (not strings or comments) that loads or runs code from data, as ``line: what``."""
    tokens = [t for t in tokenize.tokenize(io.BytesIO(path.read_bytes()).readline)
              if t.type not in (tokenize.COMMENT, tokenize.NL, tokenize.NEWLINE, tokenize.INDENT, tokenize.DEDENT)]
    found = []
    for i, tok in enumerate(tokens):
        if tok.type != tokenize.NAME:
            continue
        before = tokens[i - 1].string if i else ""
        after = [t.string for t in tokens[i + 1:i + 3]]
        if tok.string in FORBIDDEN_NAMES and before != "." and not (tok.string in ("eval", "exec") and before == "def"):
            found.append(f"{tok.start[0]}: {tok.string}")  # `dialog.exec()` (Qt's event loop) is a method
        if tok.string == "allow_pickle" and after[:2] == ["=", "True"]:
            found.append(f"{tok.start[0]}: allow_pickle=True")
        if tok.string == "yaml" and after[:1] == ["."] and tokens[i + 2].string in ("load", "unsafe_load", "full_load"):
            found.append(f"{tok.start[0]}: yaml.{tokens[i + 2].string}")
    return found


def test_no_pickle_or_eval_anywhere():
    files = _python_files()
    assert len(files) > 50 and any(p.name == "_store.py" for p in files)  # the whole tree was read
    problems = []
    for path in files:
        rel = path.relative_to(REPO).as_posix()
        for use in _unsafe_uses(path):
            if (rel, use.split(": ", 1)[1]) not in ALLOWED:
                problems.append(f"{rel}:{use}")
    assert problems == []


def test_the_scan_sees_what_it_looks_for(tmp_path):
    """The scanner itself: code is found, words in strings and comments and Qt's exec() are not."""
    sample = tmp_path / "sample.py"
    sample.write_text(
        "import pickle\nx = eval('1')\nnp.load(f, allow_pickle=True)\nyaml.load(s)\n"
        "s = 'pickle eval exec'  # eval in a comment\napp.exec()\n", encoding="utf-8",
    )
    assert _unsafe_uses(sample) == ["1: pickle", "2: eval", "3: allow_pickle=True", "4: yaml.load"]


# -- the results file ------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def good_results(tmp_path_factory) -> Path:
    from tests.corpus.results_cases import good_results as make

    return make(tmp_path_factory.mktemp("safety"))


#: A protocol-0 pickle that, if anyone unpickled it, would create ``MARKER`` (it calls open()).
def _pickle_payload(marker: Path) -> bytes:
    return b"c__builtin__\nopen\n(V" + str(marker).encode() + b"\nVw\ntR."


def test_opaque_data_holding_a_pickle_is_refused_and_never_run(good_results, tmp_path):
    import h5py

    from analysis.results import load_results

    marker = tmp_path / "unpickled-something"
    payload = np.frombuffer(_pickle_payload(marker), dtype=f"V{len(_pickle_payload(marker))}")
    for where in ("beats", "decisions"):
        path = tmp_path / "pickled.h5"
        shutil.copyfile(good_results, path)
        with h5py.File(path, "r+") as f:
            first = f[where].attrs["columns"][0]
            name = first.decode() if isinstance(first, bytes) else str(first)
            del f[f"{where}/{name}"]
            f[where].create_dataset(name, data=np.repeat(payload, 3))
        with pytest.raises(ResultsFileError, match="neither numbers nor text"):
            load_results(path).recordings[0].beats  # the tables are read on first use
        assert not marker.exists()  # nothing was unpickled


def test_reference_and_compound_types_are_refused(good_results, tmp_path):
    import h5py

    from analysis.results import load_results

    for kind in ("reference", "compound"):
        path = tmp_path / f"{kind}.h5"
        shutil.copyfile(good_results, path)
        with h5py.File(path, "r+") as f:
            table = f["beats"]
            first = table.attrs["columns"][0]
            name = first.decode() if isinstance(first, bytes) else str(first)
            rows = table[name].shape[0]
            del table[name]
            if kind == "reference":
                table.create_dataset(name, data=[f.ref] * rows, dtype=h5py.ref_dtype)
            else:
                table.create_dataset(name, data=np.zeros(rows, dtype=[("a", "<i4"), ("b", "<f8")]))
        with pytest.raises(ResultsFileError, match="neither numbers nor text"):
            load_results(path).recordings[0].beats  # the tables are read on first use


def test_a_100_MB_string_attribute_is_refused_clearly(good_results, tmp_path):
    """The label, a text in the index of recordings, holds 100 MB of text."""
    import h5py

    from tests.corpus.checks import check_refusal, run_in_process
    from tests.corpus.make_corpus import Case

    path = tmp_path / "huge-label.h5"
    shutil.copyfile(good_results, path)
    with h5py.File(path, "r+") as f:
        _set_index_text(f, "label", "L" * 100_000_000)
    assert path.stat().st_size > 100_000_000
    out = tmp_path / "beats.csv"
    case = Case("huge-label", (path,), ("export", str(path), "--csv", str(out)), path,
                r"100000000 characters is too long", "a 100 MB label")
    status, _, stderr, _ = run_in_process(case.argv)
    line = check_refusal(case, status, stderr)
    assert "LLLL" not in line and not out.exists()  # refused, not shown; nothing written


# -- stored source paths ---------------------------------------------------------------------------
def _point_sources_at(path: Path, source_path: str, relpath: str, label: str) -> None:
    import h5py

    with h5py.File(path, "r+") as f:
        for key, value in (("source_path", source_path), ("source_relpath", relpath), ("label", label)):
            _set_index_text(f, key, value)


def _set_index_text(f, column: str, value: str) -> None:
    """Set the first recording's text in a column of the index (docs/results-format.md)."""
    import h5py

    values = f["index"][column].asstr()[()].tolist()
    values[0] = value
    del f["index"][column]
    f["index"].create_dataset(column, data=np.array(values, dtype=object), dtype=h5py.string_dtype("utf-8"))


def _snapshot(folder: Path) -> dict[str, tuple[int, int]]:
    return {p.name: (p.stat().st_size, p.stat().st_mtime_ns) for p in folder.iterdir()}


@pytest.mark.parametrize("how", ["climbing", "absolute"])
def test_stored_source_paths_are_shown_never_written_to(good_results, tmp_path, how):
    """A results file whose source paths point out of its folder: at the user's own files
    (``../../etc/passwd`` style, or an absolute path). Opening, saving, re-saving and exporting
    it write only where the user asked; the files it points at, and their folder, stay as they were."""
    from analysis.session import Session
    from app.cli import main

    outside = tmp_path / "elsewhere"
    outside.mkdir()
    victim = outside / "passwd"
    victim.write_text("root:x:0:0:root:/root:/bin/sh\n", encoding="utf-8")
    work = tmp_path / "study" / "results"
    work.mkdir(parents=True)
    path = work / "crafted.h5"
    shutil.copyfile(good_results, path)
    relpath = "../../elsewhere/passwd" if how == "climbing" else str(victim)
    label = "../../elsewhere/passwd" if how == "climbing" else str(victim)
    _point_sources_at(path, str(victim), relpath, label)
    before = _snapshot(outside)

    session = Session.open(path)  # opens: the results do not need their source
    key = session.recordings[0]
    shown = " ".join(session.open_warnings)
    assert "passwd" in shown  # the path is shown to the user (the source differs from its SHA-256)
    assert session.label(key) == label
    session.reject(key, [0], "checked")
    session.save(work / "resaved.h5")
    Session.open(work / "resaved.h5").save(work / "resaved-again.h5")
    figures = work / "figures"
    assert main(["export", str(path), "--csv", str(work / "b.csv"), "--summary-csv", str(work / "s.csv"),
                 "--figures", str(figures)]) == 0
    assert [p.parent for p in figures.iterdir()] == [figures]  # the label names no other folder
    assert _snapshot(outside) == before  # nothing written to or beside the stored source
    assert victim.read_text(encoding="utf-8") == "root:x:0:0:root:/root:/bin/sh\n"
    assert sorted(p.name for p in work.iterdir()) == sorted(
        ["crafted.h5", "resaved.h5", "resaved-again.h5", "b.csv", "s.csv", "figures"])
