"""Property-based fuzzing (hypothesis) of the text reader, the settings loader and the results loader.

The property is the contract's answer to bad input (CONTRACT.md, "Exit status"): every input
either opens as what it claims to be, or is refused with the documented error type and one line
naming the file. No other exception escapes, whatever the bytes. Examples that once broke a
loader are kept in the bad-input corpus (``tests/corpus``).
"""

from __future__ import annotations

import math
import os
import shutil
import string
import tempfile
from pathlib import Path

import numpy as np
import pytest

hypothesis = pytest.importorskip("hypothesis", reason="hypothesis is in the test extras")
from hypothesis import HealthCheck, Phase, given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

from analysis import open_recording  # noqa: E402
from analysis.errors import RecordingError, ResultsFileError, SettingsError  # noqa: E402
from analysis.recording import MIN_SAMPLES_PER_SWEEP  # noqa: E402
from analysis.readers._timebase import MAX_RATE_HZ, MIN_RATE_HZ  # noqa: E402

#: Modest runs: a few seconds per loader in CI; raise them locally to search longer.
FUZZ = settings(
    max_examples=int(os.environ.get("UPSTROKE_FUZZ_EXAMPLES", "60")), deadline=None, database=None,
    phases=(Phase.explicit, Phase.generate, Phase.shrink),  # no example database, no patch files
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow, HealthCheck.data_too_large],
)


def _one_line(exc, path) -> None:
    from tests.corpus.checks import MAX_LINE_CHARS

    text = exc.one_line()
    assert "\n" not in text and os.fspath(path) in text and len(text) < MAX_LINE_CHARS, text


@pytest.fixture(scope="module")
def scratch():
    folder = Path(tempfile.mkdtemp(prefix="upstroke-fuzz-"))
    yield folder
    shutil.rmtree(folder, ignore_errors=True)


# -- the text reader -----------------------------------------------------------------------------
_LABELS = ["time_s", "t (ms)", "time [us]", "Vm_mV", "V (V)", "Im/pA", "I (nA)", "x", "", "Vm", "t_s",
           "time_s,Vm_mV", "µV", '"Vm (mV)"', "ms"]
_CELLS = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True, width=64).map(repr),
    st.integers(-10**6, 10**6).map(str),
    st.sampled_from(["", "nan", "-inf", "1e400", "1,5", "abc", '"3.0"', "0x10", "1e-320", "--1", " "]),
    st.text(alphabet=string.printable, max_size=6),
)


@st.composite
def text_recordings(draw) -> str:
    """Delimited text: a header (often valid), then rows that are mostly an even time base."""
    delim = draw(st.sampled_from([",", "\t", ";", " "]))
    n_cols = draw(st.integers(1, 4))
    header = [draw(st.sampled_from(_LABELS)) for _ in range(n_cols)]
    if draw(st.booleans()):
        header = ["time_s"] + ["Vm_mV"] * (n_cols - 1 or 1)
    n_rows = draw(st.sampled_from([0, 1, 2, 50, MIN_SAMPLES_PER_SWEEP - 1, MIN_SAMPLES_PER_SWEEP, 400]))
    step = draw(st.sampled_from([1e-4, 5e-5, 1e-13, 1.0, 0.0, -1e-4, 2.5e-4]))
    rows = []
    for i in range(n_rows):
        cells = [f"{i * step:.9g}"] + [f"{-60 + 20 * math.sin(i / 7):.4f}" for _ in range(len(header) - 1)]
        rows.append(cells)
    # Spoil some cells with anything at all.
    for _ in range(draw(st.integers(0, 4))):
        if rows:
            r = draw(st.integers(0, len(rows) - 1))
            c = draw(st.integers(0, len(rows[r]) - 1))
            rows[r][c] = draw(_CELLS)
    lines = [delim.join(header)] + [delim.join(r) for r in rows]
    if draw(st.booleans()):
        lines.insert(0, "# exported " + draw(st.text(max_size=20)).replace("\n", " "))
    return "\n".join(lines) + draw(st.sampled_from(["\n", "", "\r\n", "\n\n\n"]))


@FUZZ
@given(content=text_recordings(), raw=st.binary(max_size=64), as_bytes=st.booleans())
def test_text_reader_opens_or_refuses_in_one_line(scratch, content, raw, as_bytes):
    path = scratch / "fuzz.csv"
    path.write_bytes(content.encode("utf-8", "surrogatepass") + (raw if as_bytes else b""))
    try:
        rec = open_recording(path)
    except RecordingError as exc:
        _one_line(exc, path)
        return
    # What opens is a usable recording: finite samples, a plausible rate, enough samples.
    assert MIN_RATE_HZ <= rec.sampling_rate_hz <= MAX_RATE_HZ
    for ch in range(len(rec.channels)):
        v = rec.sweep(0, ch)
        assert v.size == rec.sweep_lengths[0] >= MIN_SAMPLES_PER_SWEEP
        assert np.all(np.isfinite(v))


# -- the settings loader -------------------------------------------------------------------------
def _field_paths() -> list[tuple[str, str]]:
    from analysis.settings import describe

    return [(f.section, f.name) for f in describe()]


_VALUES = st.recursive(
    st.one_of(
        st.floats(allow_nan=True, allow_infinity=True), st.integers(-10**20, 10**20), st.booleans(),
        st.text(max_size=30), st.sampled_from(["auto", "off", "linear", "dvdt_max", "local_fit", 50.0, 60.0]),
    ),
    lambda inner: st.lists(inner, max_size=4),
    max_leaves=6,
)


@st.composite
def settings_tables(draw) -> dict:
    """A settings table: real sections and keys (and some that are not) with any values."""
    paths = _field_paths()
    table: dict = {}
    for _ in range(draw(st.integers(0, 6))):
        if draw(st.integers(0, 9)) == 0:
            section, key = draw(st.text(string.ascii_lowercase + "_", min_size=1, max_size=8)), "x"
        else:
            section, key = draw(st.sampled_from(paths))
            if draw(st.integers(0, 9)) == 0:
                key = key + "_typo"
        if section == "schema_version":
            continue
        table.setdefault(section, {})[key] = draw(_VALUES)
    if draw(st.integers(0, 4)) == 0:
        table["schema_version"] = draw(st.one_of(st.integers(-3, 4), st.text(max_size=3)))
    return table


@FUZZ
@given(table=settings_tables())
def test_settings_loader_loads_or_refuses_in_one_line(scratch, table):
    import tomli_w

    from analysis.settings import load_settings, save_settings

    path = scratch / "fuzz.toml"
    try:
        path.write_text(tomli_w.dumps(table), encoding="utf-8")
    except (TypeError, ValueError):  # a table TOML cannot hold (a list of mixed tables)
        return
    try:
        loaded = load_settings(path)
    except SettingsError as exc:
        _one_line(exc, path)
        return
    # What loads saves and loads back to the same settings (tomli-w writes, tomllib reads).
    again = scratch / "again.toml"
    save_settings(loaded, again)
    assert load_settings(again) == loaded


@FUZZ
@given(raw=st.binary(max_size=300) | st.text(max_size=300).map(lambda t: t.encode("utf-8", "surrogatepass")))
def test_settings_loader_on_any_bytes(scratch, raw):
    from analysis.settings import Settings, load_settings

    path = scratch / "bytes.toml"
    path.write_bytes(raw)
    try:
        assert isinstance(load_settings(path), Settings)
    except SettingsError as exc:
        _one_line(exc, path)


# -- the results loader --------------------------------------------------------------------------
@pytest.fixture(scope="module")
def good_results(scratch) -> Path:
    from tests.corpus.results_cases import good_results as make

    folder = scratch / "results"
    folder.mkdir()
    return make(folder)


def _items(f) -> list[str]:
    names: list[str] = []
    f.visit(names.append)
    return names


@st.composite
def results_edits(draw):
    """A list of edits to a results file: delete an item, set an attribute, replace a dataset."""
    import h5py

    values = st.one_of(
        st.integers(-2**63, 2**63 - 1).map(np.int64), st.floats().map(np.float64), st.text(max_size=40),
        st.just(np.zeros(3)), st.just(np.array([b"x", b"yy"])), st.just(np.zeros(2, dtype="V4")),
    )
    data = st.one_of(
        st.just(np.zeros(0)), st.just(np.arange(5.0)), st.just(np.array([np.nan, np.inf])),
        st.just(np.array(["a", "b"], dtype=object)), st.just(np.zeros((2, 2), dtype=np.int8)),
        st.just(np.zeros(3, dtype=[("a", "i4"), ("b", "f8")])), st.just(np.array(["é" * 50], dtype=object)),
    )
    edits = []
    for _ in range(draw(st.integers(1, 3))):
        kind = draw(st.sampled_from(["delete", "attr", "replace"]))
        edits.append((kind, draw(st.integers(0, 10**6)), draw(st.sampled_from(["format", "schema_version", "columns", "label",
                                                                             "source_path", "all_sweeps", "channel", "hash",
                                                                             "schema_version", "fs_hz"])),
                      draw(values) if kind == "attr" else draw(data)))
    del h5py
    return edits


def _apply(path: Path, edits) -> None:
    import h5py

    with h5py.File(path, "r+") as f:
        for kind, pick, attr, value in edits:
            names = _items(f)
            if not names:
                return
            name = names[pick % len(names)]
            if kind == "delete":
                del f[name]
            elif kind == "attr":
                target = f if pick % 5 == 0 else f[name]
                target.attrs[attr] = value
            else:
                parent, _, leaf = name.rpartition("/")
                del f[name]
                if isinstance(value, np.ndarray) and value.dtype == object:
                    f[parent or "/"].create_dataset(leaf, data=value, dtype=h5py.string_dtype())
                else:
                    f[parent or "/"].create_dataset(leaf, data=value)


@FUZZ
@given(edits=results_edits())
def test_results_loader_opens_or_refuses_in_one_line(scratch, good_results, edits):
    from analysis.session import Session

    path = scratch / "edited.h5"
    shutil.copyfile(good_results, path)
    try:
        _apply(path, edits)
    except (KeyError, ValueError, TypeError, OSError):  # h5py refused the edit itself
        return
    try:
        session = Session.open(path)
        # What opens exports (a recording's tables are read then): the beats table of every recording.
        table = session.all_beats().to_csv()
    except ResultsFileError as exc:
        _one_line(exc, path)
        return
    assert table.startswith("file,sweep,beat,")


@FUZZ
@given(flips=st.lists(st.tuples(st.integers(0, 10**7), st.integers(0, 255)), min_size=1, max_size=8),
       cut=st.one_of(st.none(), st.integers(0, 10**7)))
def test_results_loader_on_damaged_bytes(scratch, good_results, flips, cut):
    from analysis.session import Session

    data = bytearray(good_results.read_bytes())
    for at, value in flips:
        data[at % len(data)] = value
    if cut is not None:
        data = data[: cut % len(data)]
    path = scratch / "damaged.h5"
    path.write_bytes(bytes(data))
    try:
        Session.open(path).all_beats()  # the tables are read on first use
    except ResultsFileError as exc:
        _one_line(exc, path)
